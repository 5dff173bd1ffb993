//! `baserate score MODEL DATA -o OUT [--prior SPEC | --base-rate P] [--costs FILE] [--rejects FILE] [--summary FILE]`
//!
//! The batch job: posteriors (and actions with `--costs`) for every row of
//! DATA, streamed in bounded memory by [`baserate::batch`]. This file parses
//! the arguments, shows progress on a terminal and prints the summary.

use std::path::PathBuf;

use std::process::ExitCode;

use crate::cli::data_args::{parse_delimiter, ApplyArgs};
use crate::cli::family_args::prior_spec;
use crate::cli::Failure;
use baserate::batch::{Outputs, ScoreJob};
use baserate::data::options::MissingPolicy;
use baserate::train::file::ModelFile;

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
    /// The prior to score with.
    #[command(flatten)]
    pub priors: PriorArgs,
    /// A loss specification (TOML): adds the columns `action` and `expected_cost`.
    #[arg(long, value_name = "FILE")]
    pub costs: Option<PathBuf>,
    /// Columns passed through to the output (comma-separated; repeatable).
    #[arg(long = "id", value_name = "COLS", value_delimiter = ',')]
    pub ids: Vec<String>,
    /// Reading and the policies for rows that cannot be scored.
    #[command(flatten)]
    pub apply: ApplyArgs,
    /// Writes the run's summary as JSON (`-` for stdout).
    #[arg(long, value_name = "FILE")]
    pub summary: Option<PathBuf>,
    /// Ends with exit code 3 when more than this share of the rows read was set aside.
    #[arg(long, value_name = "R")]
    pub max_reject_rate: Option<f64>,
    /// Columns passed through at the end of each output row (comma-separated).
    #[arg(long, value_name = "COLS", value_delimiter = ',')]
    pub keep: Vec<String>,
    /// Adds the K features that moved each row most toward the positive class (logistic, lda, naive-bayes).
    #[arg(long, value_name = "K")]
    pub reasons: Option<usize>,
    /// Worker threads [default: one per core].
    #[arg(long, value_name = "N", default_value_t = 0)]
    pub threads: usize,
    /// Bytes of input per chunk (memory is a few chunks per thread).
    #[arg(long, value_name = "BYTES", default_value_t = baserate::batch::DEFAULT_CHUNK_BYTES)]
    pub chunk_bytes: usize,
    /// The longest record, in bytes; a longer one is set aside as `record-size` (an unclosed quote, usually).
    #[arg(long, value_name = "BYTES", default_value_t = baserate::records::DEFAULT_MAX_RECORD_BYTES)]
    pub max_record_bytes: usize,
    /// No progress display and no summary on stderr (errors are still shown).
    #[arg(long, short = 'q')]
    pub quiet: bool,
    /// Loading the model.
    #[command(flatten)]
    pub loading: crate::cli::model_arg::ModelArgs,
}

/// The prior flags of the commands that apply a model (`score`, `export-sql`).
#[derive(Debug, Clone, clap::Args)]
pub struct PriorArgs {
    /// The prior to score with: empirical, uniform, or CLASS=P,... [default: the model's].
    #[arg(long, value_name = "SPEC")]
    pub prior: Option<String>,
    /// Binary shorthand for --prior POSITIVE=P,OTHER=1-P.
    #[arg(long, value_name = "P")]
    pub base_rate: Option<f64>,
    /// The prior estimated by `shift`: SHIFT.json (the EM estimate) or SHIFT.json:bbse.
    #[arg(long, value_name = "SHIFT.json[:METHOD]")]
    pub prior_from: Option<String>,
}

impl PriorArgs {
    /// The shift file `--prior-from` reads, without its `:METHOD`.
    pub fn prior_from_path(&self) -> Option<&std::path::Path> {
        self.prior_from.as_deref().map(|spec| std::path::Path::new(baserate::prior::shift::split_shift_spec(spec).0))
    }

    /// The prior a run scores with: `--prior`/`--base-rate`, a `shift`
    /// result (`--prior-from`), or the model's own.
    pub fn resolve(&self, file: &ModelFile) -> baserate::Result<Vec<f64>> {
        resolve_prior(file, self.prior.as_deref(), self.base_rate, self.prior_from.as_deref())
    }
}

fn resolve_prior(
    file: &ModelFile,
    prior: Option<&str>,
    base_rate: Option<f64>,
    prior_from: Option<&str>,
) -> baserate::Result<Vec<f64>> {
    match (prior_spec(prior, base_rate)?, prior_from) {
        (Some(_), Some(_)) => Err(baserate::Error::Usage("give --prior/--base-rate or --prior-from, not both".into())),
        (Some(spec), None) => spec.resolve(&file.classes, &file.training_class_mix, file.positive_index()),
        (None, Some(from)) => crate::cli::shift::prior_from_file(from, &file.classes),
        (None, None) => Ok(file.prior.clone()),
    }
}

/// Parses a `--missing` value of the commands that apply a model.
pub fn parse_missing(text: Option<&str>) -> baserate::Result<Option<MissingPolicy>> {
    match text {
        None => Ok(None),
        Some("error") => Ok(Some(MissingPolicy::Error)),
        Some("impute") => Ok(Some(MissingPolicy::Impute)),
        Some("drop-rows") => Ok(Some(MissingPolicy::DropRows)),
        Some(other) => {
            Err(baserate::Error::Usage(format!("--missing takes error, impute or drop-rows; got '{other}'")))
        }
    }
}

/// Runs `score`.
pub fn run(args: Args) -> Result<ExitCode, Failure> {
    crate::cli::output::refuse_overwrites(
        &[
            ("the model file", Some(&args.model)),
            ("the data file", Some(&args.data)),
            ("the costs file", args.costs.as_deref()),
            ("the shift file", args.priors.prior_from_path()),
        ],
        &[
            (baserate::error::Setting::Scores, Some(&args.out)),
            (baserate::error::Setting::Rejects, args.apply.rejects.as_deref()),
            (baserate::error::Setting::Summary, args.summary.as_deref()),
        ],
    )?;
    let (file, integrity) = args.loading.load(&args.model)?;
    let prior = args.priors.resolve(&file)?;
    let costs = args.costs.as_deref().map(|path| file.read_costs(path)).transpose()?;
    if let Some(rate) = args.max_reject_rate {
        if !(0.0..=1.0).contains(&rate) {
            return Err(baserate::Error::Usage(format!("--max-reject-rate must be between 0 and 1; got {rate}")).into());
        }
    }
    let missing = parse_missing(args.apply.policies.missing.as_deref())?;
    if args.reasons == Some(0) {
        return Err(baserate::Error::Usage("--reasons K needs K of at least 1".into()).into());
    }
    let job = ScoreJob {
        data: args.data.clone(),
        prior: prior.clone(),
        costs,
        ids: args.ids.clone(),
        keep: args.keep.clone(),
        delimiter: parse_delimiter(&args.apply.delimiter)?,
        na_tokens: args.apply.na.clone(),
        unseen: args.apply.policies.unseen,
        missing,
        reasons: args.reasons.unwrap_or(0),
        threads: args.threads,
        chunk_bytes: args.chunk_bytes,
        max_record_bytes: args.max_record_bytes.max(1),
        model_integrity: integrity,
    };
    let outputs =
        Outputs { scores: args.out.clone(), rejects: args.apply.rejects.clone(), summary: args.summary.clone() };
    let total_bytes = if args.data.as_os_str() == "-" || args.data.extension().is_some_and(|e| e == "gz") {
        None
    } else {
        std::fs::metadata(&args.data).ok().map(|m| m.len())
    };
    let bar = progress_bar(args.quiet, total_bytes);
    let show = |rows: u64, bytes: u64| {
        if let Some(bar) = &bar {
            bar.set_position(if total_bytes.is_some() { bytes } else { rows });
            bar.set_message(format!("{rows} rows read,"));
        }
    };
    let summary = baserate::batch::run(&file, &job, &outputs, &show);
    if let Some(bar) = &bar {
        bar.finish_and_clear();
    }
    let summary = summary.map_err(|e| match e {
        baserate::Error::Io { source, .. } if source.kind() == std::io::ErrorKind::BrokenPipe => Failure::BrokenPipe,
        other => Failure::Library(other),
    })?;
    crate::cli::output::warn_stale(&summary.stale_temporaries_removed);
    if !args.quiet {
        let target = if args.out.as_os_str() == "-" { "stdout".to_string() } else { args.out.display().to_string() };
        eprint!("{}", baserate::report::score::render_score_summary(&file, &job, &summary, &target));
    }
    if let Some(rate) = args.max_reject_rate {
        if summary.reject_rate > rate {
            eprintln!(
                "limit breached: {} of {} rows ({:.4}%) were set aside, above --max-reject-rate {rate}",
                summary.rows_rejected,
                summary.rows_read,
                100.0 * summary.reject_rate
            );
            return Ok(ExitCode::from(3));
        }
    }
    Ok(ExitCode::SUCCESS)
}

/// A progress display on stderr when it is a terminal: bytes with an ETA
/// for a file of known size, rows otherwise.
fn progress_bar(quiet: bool, total_bytes: Option<u64>) -> Option<indicatif::ProgressBar> {
    use std::io::IsTerminal;
    if quiet || !std::io::stderr().is_terminal() {
        return None;
    }
    let bar = match total_bytes {
        Some(total) => indicatif::ProgressBar::new(total).with_style(
            indicatif::ProgressStyle::with_template(
                "{spinner} {msg} {bytes}/{total_bytes}  {bytes_per_sec}  eta {eta}",
            )
            .unwrap_or_else(|_| indicatif::ProgressStyle::default_bar()),
        ),
        None => indicatif::ProgressBar::new_spinner().with_style(
            indicatif::ProgressStyle::with_template("{spinner} {msg} {elapsed}")
                .unwrap_or_else(|_| indicatif::ProgressStyle::default_spinner()),
        ),
    };
    Some(bar)
}
