//! `baserate judge DATA --target COL --score COL [--score COL]... [--score-type probability|log-odds|rank] [--direction higher-positive|lower-positive] [--json FILE] [--report FILE]`
//!
//! The evaluation of `compare` for scores made elsewhere — a bureau score,
//! another team's model — on every row of DATA, with the paired tests
//! between them. `rank` scores (points, grades) get the rank metrics only.
//! Holds the whole file in memory.

use std::path::PathBuf;
use std::process::ExitCode;

use crate::cli::data_args::DataArgs;
use crate::cli::Failure;
use baserate::data::Dataset;
use baserate::evaluate::study::{judge_scores, JudgeRequest, ScoreScale};

/// `--score-type` values.
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum ScoreTypeArg {
    /// Probabilities of the positive class: every metric.
    Probability,
    /// Log odds of the positive class (a comparison's `:log_odds` columns): every metric, nothing lost near 0 or 1.
    LogOdds,
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

/// Arguments of `judge`.
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

/// Runs `judge`.
pub fn run(args: Args) -> Result<ExitCode, Failure> {
    let _claim = crate::cli::output::claim_outputs(
        &[("the data file", Some(&args.data)), ("the costs file", args.evaluation.costs.as_deref())],
        &[
            (baserate::error::Setting::Json, args.evaluation.json.as_deref()),
            (baserate::error::Setting::Report, args.evaluation.report.as_deref()),
        ],
    )?;
    let mut options = args.data_args.to_options()?;
    options.score_columns = args.scores.clone();
    options.scores_are_probabilities = args.score_type == ScoreTypeArg::Probability;
    let (dataset, notices) = Dataset::read(&args.data, &options)?;
    let request = JudgeRequest {
        scores: args.scores.clone(),
        scale: match args.score_type {
            ScoreTypeArg::Probability => ScoreScale::Probability,
            ScoreTypeArg::LogOdds => ScoreScale::LogOdds,
            ScoreTypeArg::Rank => ScoreScale::Rank,
        },
        lower_positive: args.direction == DirectionArg::LowerPositive,
        train_prior: args.train_prior,
        options: args.evaluation.study_options()?,
    };
    let study = judge_scores(&dataset, &request)?;
    let description = format!("{}: {} rows; scores {}", args.data.display(), dataset.rows(), args.scores.join(", "));
    let header = match &args.evaluation.report {
        Some(_) => baserate::report::header::ReportHeader::new(
            &std::env::args().collect::<Vec<_>>(),
            &[Some(args.data.as_path()), args.evaluation.costs.as_deref()],
            request.settings(),
            &notices,
            &crate::cli::flag,
        )?,
        None => baserate::report::header::ReportHeader::default(),
    };
    args.evaluation.write_outputs(&study, &description, &header)?;
    Ok(ExitCode::SUCCESS)
}
