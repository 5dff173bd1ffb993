//! `baserate compare DATA --target COL [--family F[:OPTION=VALUE,...]]... [--folds K [--repeats R] | --test-fraction F | --split-by COL --test-from V [--gap V] | --holdout FILE] [--seed N] [--json FILE] [--report FILE]`
//!
//! Fits families side by side on the same splits and evaluates them out of
//! sample. Each `--family` may carry its own options after a colon, e.g.
//! `--family lda:shrinkage=ledoit-wolf`, `--family qda:reg=0.1`,
//! `--family logistic:l2=0.01,class-weight=equal`; the text given is the
//! result's name. Holds the whole file in memory.

use std::path::PathBuf;
use std::process::ExitCode;

use crate::cli::data_args::DataArgs;
use crate::cli::fit::{FamilyArg, FamilyOptions};
use crate::cli::output::write_atomic;
use crate::cli::Failure;
use baserate::data::schema::ColumnKind;
use baserate::data::split::{assign, SplitPlan};
use baserate::data::Dataset;
use baserate::error::Error;
use baserate::evaluate::compare::{
    cross_predict, evaluate, evaluate_reweighted, learning_curve, multiclass, Candidate, EvaluationOptions, TestedScore,
};
use baserate::model::Family;
use baserate::report::evaluation::{evaluation_html, evaluation_screen};

/// Arguments of `compare`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The CSV file.
    pub data: PathBuf,
    /// Data options.
    #[command(flatten)]
    pub data_args: DataArgs,
    /// A family to compare, with options after a colon (repeatable; default: all four).
    #[arg(long = "family", value_name = "F[:OPTION=VALUE,...]")]
    pub families: Vec<String>,
    /// Stratified K-fold cross-validation [default: 5 folds].
    #[arg(long, value_name = "K")]
    pub folds: Option<usize>,
    /// Repeats of K-fold with fresh shuffles.
    #[arg(long, value_name = "R", default_value_t = 1)]
    pub repeats: usize,
    /// A stratified holdout of this share of rows instead of folds.
    #[arg(long, value_name = "F")]
    pub test_fraction: Option<f64>,
    /// Out-of-time split on this column (with --test-from).
    #[arg(long, value_name = "COL")]
    pub split_by: Option<String>,
    /// Rows with --split-by at or after this value are the test set.
    #[arg(long, value_name = "VALUE")]
    pub test_from: Option<String>,
    /// Training ends before this value; rows up to --test-from are left out (a label-maturity gap).
    #[arg(long, value_name = "VALUE")]
    pub gap: Option<String>,
    /// Train on DATA, test on this file (same columns).
    #[arg(long, value_name = "FILE")]
    pub holdout: Option<PathBuf>,
    /// Evaluation options.
    #[command(flatten)]
    pub evaluation: EvaluationArgs,
    /// Also fit on growing training sizes and chart holdout log loss and AUC.
    #[arg(long)]
    pub learning_curve: bool,
    /// Write out-of-fold predictions (first repeat) to FILE.
    #[arg(long, value_name = "FILE")]
    pub predictions: Option<PathBuf>,
}

/// The evaluation options `compare` and `assess` share.
#[derive(Debug, clap::Args)]
pub struct EvaluationArgs {
    /// Seed of the splits and the bootstrap.
    #[arg(long, default_value_t = 1)]
    pub seed: u64,
    /// Paired-bootstrap draws for intervals of log-loss and Brier differences [default: 200 up to 200,000 tested rows, above that the normal interval; 0: the normal interval].
    #[arg(long, value_name = "N")]
    pub bootstrap: Option<usize>,
    /// A column of amounts for amount-weighted capture.
    #[arg(long, value_name = "COL")]
    pub amount: Option<String>,
    /// Report every figure per segment of this column.
    #[arg(long, value_name = "COL")]
    pub by: Option<String>,
    /// The class mix the posteriors are to be stated at: empirical, uniform or CLASS=P,...; metrics are then shown as measured and reweighted to it.
    #[arg(long, value_name = "SPEC")]
    pub prior: Option<String>,
    /// Binary shorthand for --prior POSITIVE=P,OTHER=1-P.
    #[arg(long, value_name = "P")]
    pub base_rate: Option<f64>,
    /// A loss specification (TOML): the Bayes-rule decisions and what they cost on the tested rows.
    #[arg(long, value_name = "FILE")]
    pub costs: Option<PathBuf>,
    /// Write every figure as JSON to FILE (`-` for stdout).
    #[arg(long, value_name = "FILE")]
    pub json: Option<PathBuf>,
    /// Write a self-contained HTML report to FILE.
    #[arg(long, value_name = "FILE")]
    pub report: Option<PathBuf>,
}

/// The costs file and the values of the columns it reads (taken before
/// the inputs matrix is freed).
pub type CostInputs = (baserate::decide::CostSpec, Vec<(String, Vec<f64>)>);

/// Reads a costs file and the columns it uses.
pub fn read_costs(path: &std::path::Path, dataset: &Dataset) -> baserate::Result<CostInputs> {
    let shown = path.display().to_string();
    let text = std::fs::read_to_string(path).map_err(|e| Error::io(&shown, e))?;
    let spec = baserate::decide::CostSpec::parse(&shown, &text, &dataset.schema.target.classes)?;
    if dataset.schema.target.classes.len() != 2 {
        return Err(Error::Usage(format!(
            "{shown}: cost figures in compare and assess need a two-class target; this one has {} classes (score applies costs to any number)",
            dataset.schema.target.classes.len()
        )));
    }
    let mut columns: Vec<(String, Vec<f64>)> = Vec::new();
    for column in spec.columns() {
        let values = column_text(dataset, &column).ok_or_else(|| Error::SchemaMismatch {
            path: shown.clone(),
            message: format!("the costs use column '{column}', which the data does not have (or which was excluded)"),
        })?;
        let parsed: Option<Vec<f64>> = values
            .iter()
            .map(|v| baserate::data::number::parse_f64(v.trim().as_bytes()).filter(|x| x.is_finite()))
            .collect();
        let parsed = parsed.ok_or_else(|| Error::SchemaMismatch {
            path: shown.clone(),
            message: format!("the costs use column '{column}', which is not numeric"),
        })?;
        columns.push((column, parsed));
    }
    Ok((spec, columns))
}

/// Computes what every result's decisions cost on the tested rows and adds
/// `expected_cost` (mean cost per row) and the rest to each result's metrics.
/// `fold_of`: each row's test fold, so capacity applies per fold.
pub fn apply_costs(
    (spec, columns): &CostInputs,
    scores: &[TestedScore],
    options: &EvaluationOptions<'_>,
    evaluation: &mut baserate::evaluate::compare::Evaluation,
    fold_of: Option<&[u32]>,
) -> Vec<baserate::evaluate::compare::CostFigures> {
    let figures = baserate::evaluate::compare::cost_figures(
        scores,
        options,
        spec,
        &|c, r| columns.iter().find(|(n, _)| n == c).map_or(0.0, |(_, v)| v[r]),
        fold_of,
    );
    for f in &figures {
        if let Some(r) = evaluation.results.iter_mut().find(|r| r.name == f.name) {
            if let (Some(object), Ok(serde_json::Value::Object(extra))) =
                (r.metrics.as_object_mut(), serde_json::to_value(f))
            {
                for (key, value) in extra {
                    if key != "name" {
                        object.insert(key, value);
                    }
                }
            }
        }
    }
    evaluation.costs = figures.clone();
    figures
}

/// The decisions table for the terminal.
pub fn costs_text(figures: &[baserate::evaluate::compare::CostFigures]) -> String {
    use baserate::report::table::{Align, Table};
    let mut table = Table::new(&[
        ("name", Align::Left),
        ("cost per row", Align::Right),
        ("± SE", Align::Right),
        ("95% interval", Align::Right),
        ("total", Align::Right),
        ("cutoff (theory)", Align::Right),
        ("cutoff (best here)", Align::Right),
        ("actions", Align::Left),
    ]);
    for f in figures {
        table.row(vec![
            f.name.clone(),
            format!("{:.4}", f.expected_cost),
            format!("{:.4}", f.expected_cost_se),
            format!("{:.4} – {:.4}", f.expected_cost_ci[0], f.expected_cost_ci[1]),
            format!("{:.2}", f.total_cost),
            f.theoretical_cutoff.map_or("–".into(), |c| format!("{c:.4}")),
            f.best_cutoff_on_holdout.map_or("–".into(), |c| format!("{c:.4}")),
            f.actions.iter().map(|(a, n)| format!("{a} {n:.0}")).collect::<Vec<_>>().join(", "),
        ]);
    }
    format!(
        "\ndecisions under the costs (realised cost of the Bayes-rule action on the tested rows):\n{}",
        table.render()
    )
}

/// Parses `F[:OPTION=VALUE,...][+platt|+isotonic]` into a named candidate.
pub fn parse_candidate(spec: &str) -> baserate::Result<Candidate> {
    let (base, calibration) = match spec.rsplit_once('+') {
        Some((b, "platt")) => (b, Some(baserate::evaluate::compare::Calibration::Platt)),
        Some((b, "isotonic")) => (b, Some(baserate::evaluate::compare::Calibration::Isotonic)),
        Some((_, other)) => {
            return Err(Error::Usage(format!("--family {spec}: '+{other}' is not +platt or +isotonic")))
        }
        None => (spec, None),
    };
    let (family_text, options_text) = base.split_once(':').unwrap_or((base, ""));
    let family: Family = match family_text {
        "logistic" => FamilyArg::Logistic,
        "naive-bayes" => FamilyArg::NaiveBayes,
        "lda" => FamilyArg::Lda,
        "qda" => FamilyArg::Qda,
        other => return Err(Error::Usage(format!("--family '{other}' is not one of logistic, naive-bayes, lda, qda"))),
    }
    .into();
    let mut options = FamilyOptions::default();
    for part in options_text.split(',').filter(|p| !p.is_empty()) {
        let (key, value) = part
            .split_once('=')
            .ok_or_else(|| Error::Usage(format!("--family {spec}: '{part}' is not OPTION=VALUE")))?;
        let number =
            |v: &str| v.parse::<f64>().map_err(|_| Error::Usage(format!("--family {spec}: '{v}' is not a number")));
        match key {
            "l2" => options.l2 = Some(number(value)?),
            "class-weight" => options.class_weight = Some(value.to_string()),
            "max-iterations" => options.max_iterations = Some(number(value)? as usize),
            "tolerance" => options.tolerance = Some(number(value)?),
            "penalty" => options.penalty = Some(value.to_string()),
            "mixing" => options.mixing = Some(number(value)?),
            "lambda" => options.lambda = Some(value.to_string()),
            "path-length" => options.path_length = Some(number(value)? as usize),
            "lambda-rule" => options.lambda_rule = Some(value.to_string()),
            "cv-folds" => options.cv_folds = Some(number(value)? as usize),
            "smoothing" => options.smoothing = Some(number(value)?),
            "variance-floor" => options.variance_floor = Some(number(value)?),
            "shrinkage" => options.shrinkage = Some(value.to_string()),
            "reg" => options.reg = Some(number(value)?),
            "covariance-divisor" => {
                options.covariance_divisor = Some(match value {
                    "rows" => crate::cli::fit::DivisorArg::Rows,
                    "unbiased" => crate::cli::fit::DivisorArg::Unbiased,
                    v => {
                        return Err(Error::Usage(format!(
                            "--family {spec}: covariance-divisor '{v}' is not unbiased or rows"
                        )))
                    }
                })
            }
            other => return Err(Error::Usage(format!("--family {spec}: unknown option '{other}'"))),
        }
    }
    Ok(Candidate { name: spec.to_string(), params: options.params(family)?, calibration })
}

/// Values of a column for every row, as text: an id column, a categorical
/// feature's levels, or a numeric feature's numbers.
pub fn column_text(dataset: &Dataset, column: &str) -> Option<Vec<String>> {
    if let Some((_, values)) = dataset.ids.iter().find(|(name, _)| name == column) {
        return Some(values.clone());
    }
    if let Some(c) = dataset.schema.categorical_inputs().iter().position(|c| c.name == column) {
        let levels = dataset.schema.categorical_inputs()[c].categorical.as_ref()?.levels.clone();
        return Some(dataset.categorical[c].iter().map(|&code| levels[code as usize].clone()).collect());
    }
    let j = dataset.schema.numeric_inputs().iter().position(|n| n == column)?;
    (j < dataset.numeric.ncols()).then(|| dataset.numeric.column(j).iter().map(|v| format!("{v}")).collect())
}

/// Runs `compare`.
pub fn run(args: Args) -> Result<ExitCode, Failure> {
    execute(args, true)
}

/// Runs `compare` for the demo: the table without the caution (the demo
/// prints it once at the end).
pub fn run_quietly(args: Args) -> Result<ExitCode, Failure> {
    execute(args, false)
}

fn execute(args: Args, caution: bool) -> Result<ExitCode, Failure> {
    let mut options = args.data_args.to_options()?;
    // The split column is not a feature: read it as an identifier.
    if let Some(c) = &args.split_by {
        if !options.ids.contains(c) {
            options.ids.push(c.clone());
        }
    }
    let candidates: Vec<Candidate> = if args.families.is_empty() {
        ["logistic", "naive-bayes", "lda", "qda"].iter().map(|f| parse_candidate(f)).collect::<baserate::Result<_>>()?
    } else {
        args.families.iter().map(|f| parse_candidate(f)).collect::<baserate::Result<_>>()?
    };
    for (i, c) in candidates.iter().enumerate() {
        if candidates[..i].iter().any(|d| d.name == c.name) {
            return Err(Error::Usage(format!("--family {} is given twice", c.name)).into());
        }
    }
    let chosen = [args.folds.is_some(), args.test_fraction.is_some(), args.split_by.is_some(), args.holdout.is_some()]
        .iter()
        .filter(|&&b| b)
        .count();
    if chosen > 1 {
        return Err(Error::Usage("choose one of --folds, --test-fraction, --split-by and --holdout".into()).into());
    }
    if args.split_by.is_some() != args.test_from.is_some() {
        return Err(Error::Usage("--split-by and --test-from go together".into()).into());
    }
    if args.gap.is_some() && args.split_by.is_none() {
        return Err(Error::Usage("--gap needs --split-by and --test-from".into()).into());
    }

    // With --holdout, the two files are read as one (the holdout validated
    // on its own first, so its errors name its own lines).
    let (mut dataset, notices, holdout_rows) = match &args.holdout {
        Some(holdout) => {
            Dataset::read(holdout, &options)?;
            let train = std::fs::read(&args.data).map_err(|e| Error::io(args.data.display().to_string(), e))?;
            let test = std::fs::read(holdout).map_err(|e| Error::io(holdout.display().to_string(), e))?;
            let header_end = |b: &[u8]| memchr::memchr(b'\n', b).map_or(b.len(), |i| i + 1);
            let strip = |b: &[u8]| b.strip_prefix(b"\xEF\xBB\xBF").map(<[u8]>::to_vec).unwrap_or_else(|| b.to_vec());
            let (train, test) = (strip(&train), strip(&test));
            if train[..header_end(&train)].trim_ascii() != test[..header_end(&test)].trim_ascii() {
                return Err(Error::Usage(format!(
                    "{} must have the same header as {}",
                    holdout.display(),
                    args.data.display()
                ))
                .into());
            }
            let mut joined = train.clone();
            if !joined.ends_with(b"\n") {
                joined.push(b'\n');
            }
            joined.extend_from_slice(&test[header_end(&test)..]);
            let shown = format!("{} + {}", args.data.display(), holdout.display());
            let table = baserate::data::csv_read::read_bytes(&shown, &joined, &options)?;
            let (train_only, _) = Dataset::read(&args.data, &options)?;
            let (d, n) = Dataset::from_table(table, &options)?;
            let train_rows = train_only.rows();
            (d, n, Some(train_rows))
        }
        None => {
            let (d, n) = Dataset::read(&args.data, &options)?;
            (d, n, None)
        }
    };
    for n in &notices {
        eprintln!("note: {}", n.0);
    }
    let target = &dataset.schema.target;
    let k = target.classes.len();
    let positive = target.positive_index();
    let plan = if let (Some(column), Some(test_from)) = (&args.split_by, &args.test_from) {
        let values = column_text(&dataset, column).unwrap_or_default();
        SplitPlan::OutOfTime {
            values,
            column: column.clone(),
            test_from: test_from.clone(),
            gap_from: args.gap.clone(),
        }
    } else if let Some(f) = args.test_fraction {
        SplitPlan::Holdout { test_fraction: f }
    } else {
        SplitPlan::KFold { folds: args.folds.unwrap_or(5), repeats: args.repeats }
    };
    let assignment = match holdout_rows {
        Some(train_rows) => baserate::data::split::Assignment {
            folds: vec![(0..dataset.rows()).map(|i| if i < train_rows { 1 } else { 0 }).collect()],
            tested_folds: 1,
            description: format!(
                "trained on {}, tested on {}",
                args.data.display(),
                args.holdout.as_ref().map(|h| h.display().to_string()).unwrap_or_default()
            ),
        },
        None => assign(&plan, &dataset.target, k, args.evaluation.seed)?,
    };

    let target_prior = match crate::cli::fit::prior_spec(args.evaluation.prior.as_deref(), args.evaluation.base_rate)? {
        Some(spec) => Some(spec.resolve(&target.classes, &target.class_mix(), positive)?),
        None => None,
    };
    let predictions = cross_predict(&dataset, &candidates, &assignment, target_prior.as_deref())?;
    let amounts = match &args.evaluation.amount {
        Some(column) => {
            let j = dataset.schema.numeric_inputs().iter().position(|n| n == column).ok_or_else(|| {
                Error::Usage(format!("--amount must name a numeric feature column; '{column}' is not one"))
            })?;
            Some(dataset.numeric.column(j).to_vec())
        }
        None => None,
    };
    let segments = match &args.evaluation.by {
        Some(column) => Some(column_text(&dataset, column).ok_or_else(|| {
            Error::Usage(format!(
                "--by names column '{column}', which was not read (name it with --id, or as a feature)"
            ))
        })?),
        None => None,
    };
    let learning = if args.learning_curve {
        learning_curve(&dataset, &candidates, &assignment, args.evaluation.seed, 8)
    } else {
        Vec::new()
    };
    if let Some(path) = &args.predictions {
        let mut w = csv::Writer::from_writer(Vec::new());
        let mut header: Vec<String> = dataset.ids.iter().map(|(n, _)| n.clone()).collect();
        header.push("fold".into());
        header.push(target.column.clone());
        for p in &predictions {
            for c in &target.classes {
                header.push(format!("{}:p_{c}", p.name));
            }
        }
        let io = |e: csv::Error| Error::io(path.display().to_string(), std::io::Error::other(e));
        w.write_record(&header).map_err(io)?;
        for i in 0..dataset.rows() {
            if predictions[0].log_posteriors[0][(i, 0)].is_nan() {
                continue;
            }
            let mut record: Vec<String> = dataset.ids.iter().map(|(_, v)| v[i].clone()).collect();
            record.push((assignment.folds[0][i] + 1).to_string());
            record.push(target.classes[dataset.target[i] as usize].clone());
            for p in &predictions {
                record.extend((0..k).map(|c| baserate::format::exact(p.log_posteriors[0][(i, c)].exp())));
            }
            w.write_record(&record).map_err(io)?;
        }
        let bytes = w.into_inner().map_err(|e| Error::io(path.display().to_string(), e.into_error()))?;
        write_atomic(path, &bytes)?;
    }
    let multiclass_figures = if k > 2 { multiclass(&predictions, &dataset) } else { Vec::new() };
    let scores: Vec<TestedScore> = predictions.iter().map(|p| TestedScore::from_predictions(p, positive)).collect();
    // Penalised logistic candidates, fitted on all rows, for their path
    // and cross-validation charts.
    let mut penalised = Vec::new();
    for candidate in candidates.iter().filter(|_| args.evaluation.report.is_some()) {
        if let baserate::model::FamilyParams::Logistic(p) = &candidate.params {
            if p.penalty != baserate::model::penalised::Penalty::None {
                match baserate::model::fit(&dataset, &candidate.params) {
                    Ok((baserate::model::FittedModel::Logistic(m), _)) => {
                        if let Some(record) = m.penalty {
                            penalised.push((candidate.name.clone(), m.encoding.terms(), record));
                        }
                    }
                    Ok(_) => {}
                    Err(e) => eprintln!("note: {}: the path chart could not be drawn: {e}", candidate.name),
                }
            }
        }
    }
    // What the evaluation does not need is freed first: the inputs matrix
    // and the full posterior tables (the scores keep the log odds).
    drop(predictions);
    let cost_inputs = match &args.evaluation.costs {
        Some(path) => Some(read_costs(path, &dataset)?),
        None => None,
    };
    dataset.numeric = ndarray::Array2::zeros((0, 0));
    let options = EvaluationOptions {
        target: &dataset.target,
        positive,
        classes: &target.classes,
        weights: dataset.weights.as_deref(),
        amounts: amounts.as_deref(),
        bootstrap: args.evaluation.bootstrap,
        seed: args.evaluation.seed,
        segments: segments.as_deref().map(|v| (args.evaluation.by.as_deref().unwrap_or(""), v)),
        split: assignment.description.clone(),
    };
    let mut evaluation = evaluate(&scores, &options);
    // With a target prior: the same figures with the test rows reweighted by
    // class (importance weights π′ₖ/πₖ, π the tested rows' class mix), so
    // they describe a portfolio at the target mix.
    let reweighted = target_prior.as_ref().map(|to| evaluate_reweighted(&scores, &options, to));
    let cost_table = match &cost_inputs {
        Some(inputs) => costs_text(&apply_costs(
            inputs,
            &scores,
            &options,
            &mut evaluation,
            assignment.folds.first().map(Vec::as_slice),
        )),
        None => String::new(),
    };
    if k > 2 {
        evaluation.set_multiclass(multiclass_figures);
    }
    if let Some(path) = &args.evaluation.json {
        let mut value = serde_json::to_value(&evaluation).map_err(|e| Error::Usage(e.to_string()))?;
        if !learning.is_empty() {
            value["learning_curve"] = serde_json::to_value(&learning).unwrap_or_default();
        }
        if let (Some(to), Some(r)) = (&target_prior, &reweighted) {
            value["target_prior"] = serde_json::to_value(to).unwrap_or_default();
            value["reweighted"] = serde_json::to_value(r).unwrap_or_default();
        }
        let text = serde_json::to_string_pretty(&value).map_err(|e| Error::Usage(e.to_string()))?;
        write_atomic(path, format!("{text}\n").as_bytes())?;
    }
    if let Some(path) = &args.evaluation.report {
        let description = format!(
            "{}: {} rows; target '{}' with classes {}; features {}.",
            args.data.display(),
            dataset.rows(),
            target.column,
            target.classes.join(", "),
            dataset
                .schema
                .features()
                .map(|c| format!(
                    "{} ({})",
                    c.name,
                    if c.kind == Some(ColumnKind::Numeric) { "numeric" } else { "categorical" }
                ))
                .collect::<Vec<_>>()
                .join(", ")
        );
        write_atomic(path, evaluation_html(&evaluation, &learning, &penalised, &description).as_bytes())?;
    }
    if args.evaluation.json.as_deref().is_some_and(|p| p.as_os_str() == "-") {
        return Ok(ExitCode::SUCCESS);
    }
    let reweighted = match (target_prior.as_deref(), reweighted.as_ref()) {
        (Some(to), Some(r)) => Some((r, to, target.classes.as_slice())),
        _ => None,
    };
    print!("{}", evaluation_screen(&evaluation, reweighted, &cost_table, caution));
    if let Some(path) = &args.evaluation.report {
        if caution {
            println!("report written to {}", path.display());
        }
    }
    Ok(ExitCode::SUCCESS)
}
