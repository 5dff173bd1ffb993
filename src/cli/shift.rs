//! `baserate shift MODEL NEWDATA [--json FILE]` or
//! `baserate shift NEWDATA --score COL --train-prior P [--reference LABELED.csv --target COL] [--json FILE]`
//!
//! Estimates the class mix (base rate) of an unlabeled new portfolio (see
//! `baserate::prior::shift`). The new rows are read as `score` reads them:
//! the same delimiter, missing-value tokens and policies, and rows that
//! cannot be scored set aside in `--rejects`. Holds the new portfolio in
//! memory.

use std::io::Write;
use std::path::{Path, PathBuf};
use std::process::ExitCode;

use crate::cli::data_args::{parse_delimiter, ApplyArgs};
use crate::cli::output::write_atomic;
use crate::cli::score::parse_missing;
use crate::cli::Failure;
use baserate::apply::in_memory::{estimate_portfolio_shift, ScoringRequest};
use baserate::apply::row::{check_place_for_rejects, reject_file};
use baserate::data::score_column::read_score_column;
use baserate::error::Error;
use baserate::prior::shift::{estimate_shift_from_scores, ShiftEstimate, ShiftOptions};
use baserate::records::Dialect;
use baserate::report::shift::render_shift;

/// Arguments of `shift`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// MODEL NEWDATA, or NEWDATA with --score.
    #[arg(num_args = 1..=2, required = true, value_name = "FILES")]
    pub files: Vec<PathBuf>,
    /// A column of probabilities of the positive class (the scores form).
    #[arg(long, value_name = "COL")]
    pub score: Option<String>,
    /// The positive class's share in the data the score was calibrated on (the scores form).
    #[arg(long, value_name = "P")]
    pub train_prior: Option<f64>,
    /// A labelled file with the same score column, for BBSE in the scores form.
    #[arg(long, value_name = "LABELED.csv")]
    pub reference: Option<PathBuf>,
    /// The label column of --reference.
    #[arg(long, value_name = "COL")]
    pub target: Option<String>,
    /// Reading the new rows and the policies for rows that cannot be scored (set aside rows are left out of the estimate).
    #[command(flatten)]
    pub apply: ApplyArgs,
    /// Bootstrap draws for the intervals.
    #[arg(long, value_name = "N", default_value_t = 200)]
    pub bootstrap: usize,
    /// Seed of the bootstrap.
    #[arg(long, default_value_t = 1)]
    pub seed: u64,
    /// Write every figure as JSON to FILE (`-` for stdout).
    #[arg(long, value_name = "FILE")]
    pub json: Option<PathBuf>,
    /// Loading the model (the model form).
    #[command(flatten)]
    pub loading: crate::cli::model_arg::ModelArgs,
}

/// Reads a prior from a `shift --json` file: `PATH` (EM) or `PATH:METHOD`.
pub fn prior_from_file(spec: &str, classes: &[String]) -> baserate::Result<Vec<f64>> {
    baserate::prior::shift::prior_from_shift_file(spec, classes)
}

/// Runs `shift`.
pub fn run(args: Args) -> Result<ExitCode, Failure> {
    let mut inputs: Vec<(&str, Option<&Path>)> =
        args.files.iter().map(|f| ("an input file", Some(f.as_path()))).collect();
    inputs.push(("the reference file", args.reference.as_deref()));
    let _claim = crate::cli::output::claim_outputs(
        &inputs,
        &[
            (baserate::error::Setting::Json, args.json.as_deref()),
            (baserate::error::Setting::Rejects, args.apply.rejects.as_deref()),
        ],
    )?;
    let bar = crate::cli::progress::TerminalProgress::start(false);
    let options = ShiftOptions { bootstrap: args.bootstrap, seed: args.seed, progress: bar.sink() };
    let delimiter = parse_delimiter(&args.apply.delimiter)?;
    let estimate = match (args.files.as_slice(), &args.score) {
        ([model, data], None) => model_form(&args, model, data, delimiter, &options)?,
        ([data], Some(column)) => scores_form(&args, data, column, delimiter, &options)?,
        _ => return Err(Error::Usage("give MODEL NEWDATA, or NEWDATA with --score".into()).into()),
    };
    drop(bar);
    if let Some(path) = &args.json {
        let text = serde_json::to_string_pretty(&estimate).map_err(|e| Error::Usage(e.to_string()))?;
        write_atomic(path, format!("{text}\n").as_bytes())?;
        if path.as_os_str() == "-" {
            return Ok(ExitCode::SUCCESS);
        }
    }
    print!("{}", render_shift(&estimate, args.bootstrap, args.seed));
    std::io::stdout().flush()?;
    Ok(ExitCode::SUCCESS)
}

/// The model form: the new rows scored by the model, read as `score`
/// reads them.
fn model_form(
    args: &Args,
    model: &Path,
    data: &Path,
    delimiter: u8,
    options: &ShiftOptions,
) -> baserate::Result<ShiftEstimate> {
    let (file, integrity) = args.loading.load(model)?;
    let missing = parse_missing(args.apply.policies.missing.as_deref())?;
    check_place_for_rejects(args.apply.policies.unseen, missing, args.apply.rejects.is_some())?;
    let request = ScoringRequest {
        ids: Vec::new(),
        dialect: Dialect::with_delimiter(delimiter),
        na_tokens: args.apply.na.as_ref().map(|t| t.iter().filter(|t| !t.is_empty()).cloned().collect()),
        missing,
        unseen: args.apply.policies.unseen,
        keep_rejects: args.apply.rejects.is_some(),
    };
    let (mut estimate, read) = estimate_portfolio_shift(&file, data, &request, options)?;
    estimate.model_integrity = Some(integrity.name().to_string());
    if let Some(path) = &args.apply.rejects {
        write_atomic(path, &reject_file(&read.rejects))?;
        let rejected = read.rejects.len();
        if rejected > 0 && args.json.as_ref().is_none_or(|j| j.as_os_str() != "-") {
            eprintln!("note: {rejected} rows set aside in {} and left out of the estimate", path.display());
        }
    }
    Ok(estimate)
}

/// The scores form: probabilities made elsewhere, at a stated training
/// prior, with an optional labelled reference for BBSE.
fn scores_form(
    args: &Args,
    data: &Path,
    column: &str,
    delimiter: u8,
    options: &ShiftOptions,
) -> baserate::Result<ShiftEstimate> {
    let train_prior = args.train_prior.ok_or_else(|| Error::Usage("--score needs --train-prior".into()))?;
    let (scores, _) = read_score_column(data, column, None, delimiter)?;
    let reference = match (&args.reference, &args.target) {
        (Some(reference), Some(target)) => {
            let (scores, labels) = read_score_column(reference, column, Some(target), delimiter)?;
            let labels = labels.ok_or_else(|| {
                Error::Usage(format!("--target {target} must be a label column of the reference file"))
            })?;
            Some((scores, labels))
        }
        (Some(_), None) => return Err(Error::Usage("--reference needs --target".into())),
        _ => None,
    };
    let reference = reference.as_ref().map(|(s, l)| (s.as_slice(), l.as_slice()));
    estimate_shift_from_scores(&scores, train_prior, reference, options)
}
