//! `baserate compare DATA --target COL [--family F[:OPTION=VALUE,...]]... [--folds K [--repeats R] | --test-fraction F | --split-by COL --test-from V [--gap V] | --holdout FILE] [--seed N] [--json FILE] [--report FILE]`
//!
//! Fits families side by side on the same splits and evaluates them out of
//! sample. Each `--family` may carry its own options after a colon, e.g.
//! `--family lda:diagonal-weight=ledoit-wolf`, `--family qda:pooled-weight=0.1`,
//! `--family logistic:newton-ridge=0.01,reweight=equal-totals`; the text given is the
//! result's name. Holds the whole file in memory.

use std::path::PathBuf;
use std::process::ExitCode;

use crate::cli::data_args::DataArgs;
use crate::cli::family_args::{parse_candidate, prior_spec};
use crate::cli::output::write_atomic;
use crate::cli::Failure;
use baserate::data::Dataset;
use baserate::error::Error;
use baserate::evaluate::compare::{compare_families, ComparisonRequest, SplitChoice, StudyOptions};
use baserate::evaluate::study::Study;
use baserate::report::header::ReportHeader;
use baserate::report::study::{compared_data_description, study_html, study_screen};

/// Arguments of `compare`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The CSV file.
    pub data: PathBuf,
    /// Data options.
    #[command(flatten)]
    pub data_args: DataArgs,
    /// The memory limit of a fit.
    #[command(flatten)]
    pub memory: crate::cli::memory_arg::MemoryArgs,
    /// A family to compare, with options after a colon (repeatable; default: all four).
    #[arg(long = "family", value_name = "F[:OPTION=VALUE,...]")]
    pub families: Vec<String>,
    /// logistic, lda: refuse inputs that are exact linear combinations of others, instead of dropping them from the fit.
    #[arg(long)]
    pub refuse_aliased: bool,
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
    /// Ends with exit code 1 when any family failed (by default, 1 only when every family failed).
    #[arg(long)]
    pub strict: bool,
    /// Write out-of-fold predictions (first repeat) to FILE.
    #[arg(long, value_name = "FILE")]
    pub predictions: Option<PathBuf>,
}

/// The evaluation options `compare` and `judge` share.
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

impl EvaluationArgs {
    /// The study options these flags ask for.
    pub fn study_options(&self) -> baserate::Result<StudyOptions> {
        Ok(StudyOptions {
            seed: self.seed,
            bootstrap: self.bootstrap,
            amount: self.amount.clone(),
            by: self.by.clone(),
            target_prior: prior_spec(self.prior.as_deref(), self.base_rate)?,
            costs: self.costs.clone(),
        })
    }

    /// Writes the JSON and HTML outputs asked for, then prints the screen
    /// unless the JSON went to stdout; true when the screen was printed.
    pub fn write_outputs(&self, study: &Study, description: &str, header: &ReportHeader) -> Result<bool, Failure> {
        if let Some(path) = &self.json {
            let text = serde_json::to_string_pretty(&study.json(&crate::cli::flag)?)
                .map_err(|e| Error::Usage(e.to_string()))?;
            write_atomic(path, format!("{text}\n").as_bytes())?;
        }
        if let Some(path) = &self.report {
            write_atomic(path, study_html(study, &crate::cli::flag, description, header).as_bytes())?;
        }
        if self.json.as_deref().is_some_and(|p| p.as_os_str() == "-") {
            return Ok(false);
        }
        print!("{}", study_screen(study, &crate::cli::flag, true));
        Ok(true)
    }
}

/// The split the flags choose.
fn split_choice(args: &Args) -> baserate::Result<SplitChoice> {
    let chosen = [args.folds.is_some(), args.test_fraction.is_some(), args.split_by.is_some(), args.holdout.is_some()]
        .iter()
        .filter(|&&b| b)
        .count();
    if chosen > 1 {
        return Err(Error::Usage("choose one of --folds, --test-fraction, --split-by and --holdout".into()));
    }
    if args.split_by.is_some() != args.test_from.is_some() {
        return Err(Error::Usage("--split-by and --test-from go together".into()));
    }
    if args.gap.is_some() && args.split_by.is_none() {
        return Err(Error::Usage("--gap needs --split-by and --test-from".into()));
    }
    Ok(if let (Some(column), Some(test_from)) = (&args.split_by, &args.test_from) {
        SplitChoice::OutOfTime { column: column.clone(), test_from: test_from.clone(), gap_from: args.gap.clone() }
    } else if let Some(test_fraction) = args.test_fraction {
        SplitChoice::Holdout { test_fraction }
    } else {
        SplitChoice::KFold { folds: args.folds.unwrap_or(5), repeats: args.repeats }
    })
}

/// Runs `compare`.
pub fn run(args: Args) -> Result<ExitCode, Failure> {
    let _claim = crate::cli::output::claim_outputs(
        &[
            ("the data file", Some(&args.data)),
            ("the holdout file", args.holdout.as_deref()),
            ("the costs file", args.evaluation.costs.as_deref()),
        ],
        &[
            (baserate::error::Setting::Json, args.evaluation.json.as_deref()),
            (baserate::error::Setting::Report, args.evaluation.report.as_deref()),
            (baserate::error::Setting::Predictions, args.predictions.as_deref()),
        ],
    )?;
    let bar = crate::cli::progress::TerminalProgress::start(false);
    let mut options = args.data_args.to_options()?;
    options.progress = bar.sink();
    // The split column is not a feature: read it as an identifier.
    if let Some(c) = &args.split_by {
        if !options.ids.contains(c) {
            options.ids.push(c.clone());
        }
    }
    let names: Vec<&str> = if args.families.is_empty() {
        vec!["logistic", "naive-bayes", "lda", "qda"]
    } else {
        args.families.iter().map(String::as_str).collect()
    };
    let mut candidates = names.into_iter().map(parse_candidate).collect::<baserate::Result<Vec<_>>>()?;
    candidates.iter_mut().for_each(|c| c.params.set_refuse_aliased(args.refuse_aliased));
    let mut split = split_choice(&args)?;
    let (dataset, notices) = match &args.holdout {
        Some(holdout) => {
            let joined = Dataset::read_with_holdout(&args.data, holdout, &options)?;
            split = SplitChoice::TrainThenTest {
                training_rows: joined.training_rows,
                description: format!("trained on {}, tested on {}", args.data.display(), holdout.display()),
            };
            (joined.dataset, joined.notices)
        }
        None => Dataset::read(&args.data, &options)?,
    };
    bar.suspend(|| crate::cli::output::print_notices(&notices));
    let description = compared_data_description(&args.data.display().to_string(), &dataset);
    let request = ComparisonRequest {
        candidates,
        split,
        options: args.evaluation.study_options()?,
        learning_curve: args.learning_curve,
        penalised_paths: args.evaluation.report.is_some(),
        predictions: args.predictions.is_some(),

        memory_limit: args.memory.memory_limit,
        progress: bar.sink(),
    };
    // The report's header hashes the inputs before the work, so it names
    // the bytes that were read.
    let header = match &args.evaluation.report {
        Some(_) => ReportHeader::new(
            &std::env::args().collect::<Vec<_>>(),
            &[Some(args.data.as_path()), args.holdout.as_deref(), args.evaluation.costs.as_deref()],
            request.settings(),
            &notices,
            &crate::cli::flag,
        )?,
        None => ReportHeader::default(),
    };
    let study = compare_families(dataset, &request);
    drop(bar);
    let study = study?;
    for note in &study.notes {
        eprintln!("note: {note}");
    }
    if let (Some(path), Some(bytes)) = (&args.predictions, &study.predictions_csv) {
        write_atomic(path, bytes)?;
    }
    let printed = args.evaluation.write_outputs(&study, &description, &header)?;
    if let (true, Some(path)) = (printed, &args.evaluation.report) {
        println!("report written to {}", path.display());
    }
    for failed in &study.failed {
        eprintln!("warning: {} failed {}", failed.name, failed.reason(&crate::cli::flag));
    }
    if args.strict && !study.failed.is_empty() {
        eprintln!("--strict: {} of the families failed, so the run ends with exit code 1", study.failed.len());
        return Ok(ExitCode::from(1));
    }
    Ok(ExitCode::SUCCESS)
}
