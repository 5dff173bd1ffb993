//! `baserate assess DATA --target COL --score COL [--score COL]... [--score-type probability|rank] [--direction higher-positive|lower-positive] [--json FILE] [--report FILE]`
//!
//! The evaluation of `compare` for scores made elsewhere — a bureau score,
//! another team's model — on every row of DATA, with the paired tests
//! between them. `rank` scores (points, grades) get the rank metrics only.
//! Holds the whole file in memory.

use std::path::PathBuf;
use std::process::ExitCode;

use crate::cli::data_args::DataArgs;
use crate::cli::output::write_atomic;
use crate::cli::Failure;
use baserate::data::Dataset;
use baserate::error::Error;
use baserate::evaluate::compare::{evaluate, evaluate_reweighted, EvaluationOptions, TestedScore};
use baserate::evaluate::metrics::ScoreKind;
use baserate::report::evaluation::{evaluation_html, evaluation_screen};

/// `--score-type` values.
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum ScoreTypeArg {
    /// Probabilities of the positive class: every metric.
    Probability,
    /// Points or grades: rank metrics only.
    Rank,
}

/// `--direction` values.
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum DirectionArg {
    /// Higher scores mean more likely positive.
    HigherPositive,
    /// Lower scores mean more likely positive (e.g. credit points).
    LowerPositive,
}

/// Arguments of `assess`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The CSV file with labels and score columns.
    pub data: PathBuf,
    /// Data options.
    #[command(flatten)]
    pub data_args: DataArgs,
    /// A score column (repeatable).
    #[arg(long = "score", value_name = "COL", required = true)]
    pub scores: Vec<String>,
    /// What the scores are.
    #[arg(long, value_enum, default_value = "probability")]
    pub score_type: ScoreTypeArg,
    /// Which way the scores point.
    #[arg(long, value_enum, default_value = "higher-positive")]
    pub direction: DirectionArg,
    /// The positive class's share in the data the probability scores are calibrated to (needed with --prior/--base-rate).
    #[arg(long, value_name = "P")]
    pub train_prior: Option<f64>,
    /// Evaluation options.
    #[command(flatten)]
    pub evaluation: crate::cli::compare::EvaluationArgs,
}

/// Probabilities are clipped to [1e-15, 1 − 1e-15] before the log odds are
/// taken, so that a score of exactly 0 or 1 gives a finite (large) log loss.
pub const PROBABILITY_CLIP: f64 = 1e-15;

/// Runs `assess`.
pub fn run(args: Args) -> Result<ExitCode, Failure> {
    let mut options = args.data_args.to_options()?;
    for s in &args.scores {
        if !options.numeric.contains(s) {
            options.numeric.push(s.clone());
        }
    }
    let (dataset, _) = Dataset::read(&args.data, &options)?;
    let target = &dataset.schema.target;
    let positive = target.positive_index();
    let inputs = dataset.schema.numeric_inputs();
    let rows: Vec<usize> = (0..dataset.rows()).collect();
    let target_prior = match crate::cli::fit::prior_spec(args.evaluation.prior.as_deref(), args.evaluation.base_rate)? {
        Some(spec) => Some(spec.resolve(&target.classes, &target.class_mix(), positive)?),
        None => None,
    };
    // The odds correction of probability scores from the prior they are
    // calibrated to (--train-prior) to the target prior.
    let shift = match (&target_prior, args.train_prior) {
        (Some(_), _) if target.classes.len() != 2 => {
            return Err(Error::Usage("--prior with external scores is for two classes".into()).into())
        }
        (Some(to), Some(from)) if from > 0.0 && from < 1.0 => {
            (to[positive] / (1.0 - to[positive])).ln() - (from / (1.0 - from)).ln()
        }
        (Some(_), Some(_)) => return Err(Error::Usage("--train-prior must lie strictly between 0 and 1".into()).into()),
        (Some(_), None) if args.score_type == ScoreTypeArg::Probability => {
            return Err(Error::Usage(
                "--prior and --base-rate need --train-prior: the class mix the scores are calibrated to".into(),
            )
            .into())
        }
        _ => 0.0,
    };
    let mut scores = Vec::new();
    for name in &args.scores {
        let j = inputs
            .iter()
            .position(|n| n == name)
            .ok_or_else(|| Error::Usage(format!("--score {name} is not a numeric column")))?;
        let column = dataset.numeric.column(j);
        let sign = if args.direction == DirectionArg::LowerPositive { -1.0 } else { 1.0 };
        let log_odds: Vec<f64> = match args.score_type {
            ScoreTypeArg::Rank => column.iter().map(|v| sign * v).collect(),
            ScoreTypeArg::Probability => {
                if let Some((i, v)) = column.iter().enumerate().find(|(_, v)| !(0.0..=1.0).contains(*v)) {
                    return Err(Error::Usage(format!(
                        "--score {name}: row {} holds {v}, not a probability; use --score-type rank for points or grades",
                        i + 1
                    ))
                    .into());
                }
                column
                    .iter()
                    .map(|&p| {
                        let p = if sign < 0.0 { 1.0 - p } else { p };
                        let p = p.clamp(PROBABILITY_CLIP, 1.0 - PROBABILITY_CLIP);
                        (p / (1.0 - p)).ln() + shift
                    })
                    .collect()
            }
        };
        scores.push(TestedScore {
            name: name.clone(),
            family: None,
            log_odds: vec![log_odds],
            rows: vec![rows.clone()],
            kind: if args.score_type == ScoreTypeArg::Rank { ScoreKind::Rank } else { ScoreKind::Probability },
            warnings: Vec::new(),
        });
    }
    let amounts = match &args.evaluation.amount {
        Some(column) => Some(
            crate::cli::compare::column_text(&dataset, column)
                .and_then(|v| v.iter().map(|x| x.parse::<f64>().ok()).collect::<Option<Vec<f64>>>())
                .ok_or_else(|| Error::Usage(format!("--amount must name a numeric column; '{column}' is not one")))?,
        ),
        None => None,
    };
    let segments = match &args.evaluation.by {
        Some(column) => Some(
            crate::cli::compare::column_text(&dataset, column)
                .ok_or_else(|| Error::Usage(format!("--by names column '{column}', which was not read")))?,
        ),
        None => None,
    };
    let options = EvaluationOptions {
        target: &dataset.target,
        positive,
        classes: &target.classes,
        weights: dataset.weights.as_deref(),
        amounts: amounts.as_deref(),
        bootstrap: args.evaluation.bootstrap,
        seed: args.evaluation.seed,
        segments: segments.as_deref().map(|v| (args.evaluation.by.as_deref().unwrap_or(""), v)),
        split: "scores made elsewhere, every row".into(),
    };
    let mut evaluation = evaluate(&scores, &options);
    let reweighted = target_prior.as_ref().map(|to| evaluate_reweighted(&scores, &options, to));
    let cost_table = match &args.evaluation.costs {
        Some(path) => {
            let inputs = crate::cli::compare::read_costs(path, &dataset)?;
            crate::cli::compare::costs_text(&crate::cli::compare::apply_costs(
                &inputs,
                &scores,
                &options,
                &mut evaluation,
                None,
            ))
        }
        None => String::new(),
    };
    if let Some(path) = &args.evaluation.json {
        let mut value = serde_json::to_value(&evaluation).map_err(|e| Error::Usage(e.to_string()))?;
        if let (Some(to), Some(r)) = (&target_prior, &reweighted) {
            value["target_prior"] = serde_json::to_value(to).unwrap_or_default();
            value["reweighted"] = serde_json::to_value(r).unwrap_or_default();
        }
        let text = serde_json::to_string_pretty(&value).map_err(|e| Error::Usage(e.to_string()))?;
        write_atomic(path, format!("{text}\n").as_bytes())?;
    }
    if let Some(path) = &args.evaluation.report {
        let description =
            format!("{}: {} rows; scores {}", args.data.display(), dataset.rows(), args.scores.join(", "));
        write_atomic(path, evaluation_html(&evaluation, &[], &[], &description).as_bytes())?;
    }
    if args.evaluation.json.as_deref().is_some_and(|p| p.as_os_str() == "-") {
        return Ok(ExitCode::SUCCESS);
    }
    let reweighted = match (target_prior.as_deref(), reweighted.as_ref()) {
        (Some(to), Some(r)) => Some((r, to, target.classes.as_slice())),
        _ => None,
    };
    print!("{}", evaluation_screen(&evaluation, reweighted, &cost_table, true));
    Ok(ExitCode::SUCCESS)
}
