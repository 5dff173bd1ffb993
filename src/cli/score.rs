//! `baserate score MODEL DATA -o OUT [--prior SPEC | --base-rate P] [--id COLS]`
//!
//! Posteriors for every row of DATA: the `--id` columns, then one column
//! `p_<class>` per class, under the model's prior or the one given. The
//! output is written atomically. This first version holds the file in
//! memory.

use std::path::PathBuf;

use std::process::ExitCode;

use crate::cli::data_args::parse_delimiter;
use crate::cli::fit::prior_spec;
use crate::cli::output::write_atomic;
use crate::cli::Failure;
use crate::data::scoring::read_for_scoring;
use crate::model::file::ModelFile;

/// Arguments of `score`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The model file.
    pub model: PathBuf,
    /// The CSV file to score.
    pub data: PathBuf,
    /// Where to write the scores (`-` for stdout).
    #[arg(long, short = 'o', value_name = "OUT")]
    pub out: PathBuf,
    /// The prior to score with: empirical, uniform, or CLASS=P,... [default: the model's].
    #[arg(long, value_name = "SPEC")]
    pub prior: Option<String>,
    /// Binary shorthand for --prior POSITIVE=P,OTHER=1-P.
    #[arg(long, value_name = "P")]
    pub base_rate: Option<f64>,
    /// The prior estimated by `shift`: SHIFT.json (the EM estimate) or SHIFT.json:bbse.
    #[arg(long, value_name = "SHIFT.json[:METHOD]")]
    pub prior_from: Option<String>,
    /// A loss specification (TOML): adds the columns `action` and `expected_cost`.
    #[arg(long, value_name = "FILE")]
    pub costs: Option<PathBuf>,
    /// Columns passed through to the output (comma-separated; repeatable).
    #[arg(long = "id", value_name = "COLS", value_delimiter = ',')]
    pub ids: Vec<String>,
    /// Field delimiter: one character, or `tab`.
    #[arg(long, value_name = "C", default_value = ",")]
    pub delimiter: String,
    /// Missing-value tokens [default: the training file's].
    #[arg(long, value_name = "TOKENS", value_delimiter = ',', allow_hyphen_values = true)]
    pub na: Option<Vec<String>>,
}

/// Runs `score`.
pub fn run(args: Args) -> Result<ExitCode, Failure> {
    let file = ModelFile::load(&args.model)?;
    let positive = file.classes.iter().position(|c| *c == file.positive).unwrap_or(0);
    let prior = match (prior_spec(args.prior.as_deref(), args.base_rate)?, &args.prior_from) {
        (Some(_), Some(_)) => {
            return Err(crate::Error::Usage("give --prior/--base-rate or --prior-from, not both".into()).into())
        }
        (Some(spec), None) => spec.resolve(&file.classes, &file.training_class_mix, positive)?,
        (None, Some(from)) => crate::cli::shift::prior_from_file(from, &file.classes)?,
        (None, None) => file.prior.clone(),
    };
    let spec = match &args.costs {
        Some(path) => {
            let shown = path.display().to_string();
            let text = std::fs::read_to_string(path).map_err(|e| crate::Error::io(&shown, e))?;
            Some(crate::decide::CostSpec::parse(&shown, &text, &file.classes)?)
        }
        None => None,
    };
    // A capacity ranks every row by its saving before any row is assigned,
    // so it needs the whole input in hand: a file, not a stream.
    if args.data.as_os_str() == "-" && spec.as_ref().is_some_and(|s| s.actions.iter().any(|a| a.capacity.is_some())) {
        return Err(crate::Error::Usage(
            "a capacity in the costs file needs every row before any is assigned; give the data as a file, not on stdin"
                .into(),
        )
        .into());
    }
    // Cost columns that are not numeric inputs of the model are read beside the ids.
    let numeric_inputs = file.schema.numeric_inputs();
    let mut ids = args.ids.clone();
    let extra: Vec<String> =
        spec.as_ref().map_or(Vec::new(), |s| s.columns().into_iter().filter(|c| !numeric_inputs.contains(c)).collect());
    for c in &extra {
        // A categorical input cannot also be read as an amount.
        if file.schema.categorical_inputs().iter().any(|k| k.name == *c) {
            return Err(crate::Error::SchemaMismatch {
                path: args.costs.as_ref().map(|p| p.display().to_string()).unwrap_or_default(),
                message: format!("the costs use column '{c}', which the model reads as categorical, not numeric"),
            }
            .into());
        }
        if !ids.contains(c) {
            ids.push(c.clone());
        }
    }
    let data = read_for_scoring(&args.data, &file.schema, &ids, parse_delimiter(&args.delimiter)?, args.na.clone())?;
    let mut posteriors = file.log_posteriors(&data.inputs(), &prior);
    posteriors.mapv_inplace(f64::exp);
    // Decisions: the expected cost of every action per row, then the rule.
    let decisions = match &spec {
        Some(spec) => {
            let mut columns: Vec<(String, Vec<f64>)> = Vec::new();
            for column in spec.columns() {
                if let Some(j) = numeric_inputs.iter().position(|n| *n == column) {
                    columns.push((column, data.numeric.column(j).to_vec()));
                } else {
                    let values =
                        &data.ids.iter().find(|(n, _)| *n == column).map(|(_, v)| v.clone()).unwrap_or_default();
                    let mut parsed = Vec::with_capacity(values.len());
                    for (r, v) in values.iter().enumerate() {
                        match crate::data::number::parse_f64(v.trim().as_bytes()).filter(|x| x.is_finite()) {
                            Some(x) => parsed.push(x),
                            None => {
                                return Err(crate::Error::SchemaMismatch {
                                    path: args.data.display().to_string(),
                                    message: format!(
                                    "the costs use column '{column}', whose value '{v}' in data row {} is not a number",
                                    r + 1
                                ),
                                }
                                .into())
                            }
                        }
                    }
                    columns.push((column, parsed));
                }
            }
            let costs: Vec<Vec<f64>> = (0..data.rows())
                .map(|r| {
                    let row: Vec<f64> = posteriors.row(r).to_vec();
                    spec.expected_costs(&row, &|c| columns.iter().find(|(n, _)| n == c).map_or(0.0, |(_, v)| v[r]))
                })
                .collect();
            Some(crate::decide::decide(spec, &costs))
        }
        None => None,
    };
    let mut writer = csv::Writer::from_writer(Vec::with_capacity(data.rows() * 40));
    let shown_ids: Vec<usize> = (0..data.ids.len()).filter(|&i| args.ids.contains(&data.ids[i].0)).collect();
    let mut header: Vec<String> = shown_ids.iter().map(|&i| data.ids[i].0.clone()).collect();
    header.extend(file.classes.iter().map(|c| format!("p_{c}")));
    if decisions.is_some() {
        header.push("action".into());
        header.push("expected_cost".into());
    }
    let io_error = |e: csv::Error| crate::Error::io(args.out.display().to_string(), std::io::Error::other(e));
    writer.write_record(&header).map_err(io_error)?;
    let mut record: Vec<String> = Vec::with_capacity(header.len());
    for (r, row) in posteriors.rows().into_iter().enumerate() {
        record.clear();
        record.extend(shown_ids.iter().map(|&i| data.ids[i].1[r].clone()));
        record.extend(row.iter().map(|p| crate::report::exact(*p)));
        if let (Some(d), Some(spec)) = (&decisions, &spec) {
            record.push(spec.actions[d.action[r]].name.clone());
            record.push(crate::report::exact(d.expected_cost[r]));
        }
        writer.write_record(&record).map_err(io_error)?;
    }
    let bytes = writer.into_inner().map_err(|e| crate::Error::io(args.out.display().to_string(), e.into_error()))?;
    write_atomic(&args.out, &bytes)?;
    for (column, n) in &data.imputed {
        eprintln!("note: column '{column}': {n} missing values filled as in training");
    }
    if args.out.as_os_str() != "-" {
        eprintln!(
            "scored {} rows with the {} model; posteriors written to {}",
            data.rows(),
            file.family.name(),
            args.out.display()
        );
    }
    if let (Some(d), Some(spec)) = (&decisions, &spec) {
        let counts: Vec<String> = spec
            .actions
            .iter()
            .enumerate()
            .map(|(a, action)| format!("{} {}", action.name, d.action.iter().filter(|&&x| x == a).count()))
            .collect();
        let total: f64 = d.expected_cost.iter().sum();
        eprintln!(
            "decisions: {}; total expected cost {total:.2} ({:.4} per row)",
            counts.join(", "),
            total / data.rows().max(1) as f64
        );
        if let Some((action, cutoff)) = spec.cutoff(positive) {
            let base = file.calibrated_to()[positive];
            let on_model_scale = if (prior[positive] - base).abs() > 1e-12 {
                format!(
                    " (on the model's own scale, at its class mix {base:.4}: {:.6})",
                    crate::decide::cutoff_on_training_scale(cutoff, base, prior[positive])
                )
            } else {
                String::new()
            };
            eprintln!("equivalent rule: {action} when p({}) >= {cutoff:.6}{on_model_scale}", file.positive);
        }
        eprintln!("{}", crate::report::wrap(crate::CAUTION, 100, 0));
    }
    Ok(ExitCode::SUCCESS)
}
