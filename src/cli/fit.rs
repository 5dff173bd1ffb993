//! `baserate fit DATA --target COL --family F [family options] [--prior SPEC | --base-rate P] -o MODEL`
//!
//! Fits one family on a training file and writes the model file (atomically).
//! Holds the whole training file in memory.

use std::path::PathBuf;
use std::process::ExitCode;

use crate::cli::data_args::DataArgs;
use crate::cli::family_args::{prior_spec, FamilyArg, FamilyOptions};
use crate::cli::Failure;
use baserate::data::Dataset;
use baserate::error::Error;
use baserate::format::{count, percent};
use baserate::model::{Family, FamilyParams};
use baserate::prior::PriorSpec;
use baserate::report::{wrap, CAUTION};
use baserate::train::{parse_sampling_rates, train, CalibrationMethod, TrainRequest, TrainingSource};

/// Arguments of `fit`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The training CSV file (with --from-stats: the aggregates stats-sql's query returned, as CSV).
    pub data: PathBuf,
    /// DATA is the result of `baserate stats-sql`: fit lda, qda or naive-bayes from those aggregates.
    #[arg(long)]
    pub from_stats: bool,
    /// Data options.
    #[command(flatten)]
    pub data_args: DataArgs,
    /// The memory limit of a fit.
    #[command(flatten)]
    pub memory: crate::cli::memory_arg::MemoryArgs,
    /// The family to fit.
    #[arg(long, value_enum)]
    pub family: FamilyArg,
    /// Family options.
    #[command(flatten)]
    pub family_options: FamilyOptions,
    /// The prior to score with: empirical, uniform, or CLASS=P,... [default: empirical].
    #[arg(long, value_name = "SPEC")]
    pub prior: Option<String>,
    /// Binary shorthand for --prior POSITIVE=P,OTHER=1-P.
    #[arg(long, value_name = "P")]
    pub base_rate: Option<f64>,
    /// Where to write the model file.
    #[arg(long, short = 'o', value_name = "MODEL")]
    pub out: PathBuf,
    /// Seed of the held-out folds (out-of-fold predictions stored for shift estimation).
    #[arg(long, default_value_t = 1)]
    pub seed: u64,
    /// Calibrate the posteriors on out-of-fold predictions (two classes).
    #[arg(long, value_enum)]
    pub calibrate: Option<CalibrateArg>,
    /// The training rows are a sample: CLASS=RATE,... (e.g. all frauds and 10% of the rest: genuine=0.1).
    #[arg(long, value_name = "SPEC")]
    pub sampled: Option<String>,
}

/// `--calibrate` values.
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum CalibrateArg {
    /// Platt's logistic map (Platt 1999).
    Platt,
    /// Isotonic regression by pool-adjacent-violators.
    Isotonic,
}

/// `fit STATS.csv --from-stats`: the family fitted from an engine's aggregates.
fn fit_from_stats(args: &Args, params: FamilyParams, spec: Option<PriorSpec>) -> Result<ExitCode, Failure> {
    use baserate::export::stats_reader::read_stats_with_hash;
    use baserate::model::aggregates::FromAggregates;
    use baserate::train::{train_from_aggregates, FromStats};
    if args.calibrate.is_some() || args.sampled.is_some() {
        return Err(Error::Usage(
            "--calibrate needs out-of-fold predictions and --sampled a training file; neither goes with --from-stats"
                .into(),
        )
        .into());
    }
    let (aggregates, input_sha256) = read_stats_with_hash(&args.data)?;
    if let Some(target) = &args.data_args.target {
        if *target != aggregates.target {
            return Err(Error::Usage(format!(
                "--target names '{target}', but the aggregates are of target '{}'",
                aggregates.target
            ))
            .into());
        }
    }
    let missing = match args.data_args.missing {
        crate::cli::data_args::MissingArg::Error => baserate::data::MissingPolicy::Error,
        crate::cli::data_args::MissingArg::DropRows => baserate::data::MissingPolicy::DropRows,
        crate::cli::data_args::MissingArg::Impute => {
            return Err(Error::Usage(
                "--missing impute needs each column's median before the sums, which one aggregate pass cannot give; use drop-rows or error".into(),
            )
            .into())
        }
    };
    let request =
        FromStats {
            fit: FromAggregates {
                params,
                positive: args.data_args.positive.clone(),
                missing,
                na_tokens: args.data_args.na.clone().unwrap_or_else(|| {
                    baserate::data::options::DEFAULT_NA_TOKENS.iter().map(|s| s.to_string()).collect()
                }),
            },
            prior: spec,
        };
    let file = train_from_aggregates(&aggregates, &request, input_sha256)?;
    file.save(&args.out)?;
    let target = &file.schema.target;
    let mix = class_mix_text(target);
    println!(
        "fitted {} from the aggregates in {} ({} rows): {}",
        file.family.name(),
        args.data.display(),
        count(file.training.rows),
        mix
    );
    println!("positive class: {}", file.schema.target.positive);
    for w in &file.diagnostics.warnings {
        eprintln!("note: {}", wrap(w, 100, 6));
    }
    println!("model written to {} (see it with: baserate inspect {})", args.out.display(), args.out.display());
    println!("\n{}", wrap(CAUTION, 100, 0));
    Ok(ExitCode::SUCCESS)
}

/// "CLASS COUNT (SHARE), ..." for the training classes.
fn class_mix_text(target: &baserate::data::schema::TargetSchema) -> String {
    let parts: Vec<String> = target
        .classes
        .iter()
        .zip(&target.counts)
        .zip(&target.class_mix())
        .map(|((c, n), s)| format!("{c} {} ({})", count(*n), percent(*s)))
        .collect();
    parts.join(", ")
}

/// Runs `fit`.
pub fn run(args: Args) -> Result<ExitCode, Failure> {
    let _claim = crate::cli::output::claim_outputs(
        &[("the data file", Some(&args.data))],
        &[(baserate::error::Setting::Output, Some(&args.out))],
    )?;
    let family: Family = args.family.into();
    let params = args.family_options.params(family)?;
    let spec = prior_spec(args.prior.as_deref(), args.base_rate)?;
    if args.from_stats {
        return fit_from_stats(&args, params, spec);
    }
    let bar = crate::cli::progress::TerminalProgress::start(false);
    let mut options = args.data_args.to_options()?;
    options.progress = bar.sink();
    let (dataset, notices, input_sha256) = Dataset::read_with_hash(&args.data, &options)?;
    bar.suspend(|| crate::cli::output::print_notices(&notices));
    let target = &dataset.schema.target;
    let request = TrainRequest {
        params,
        prior: spec,
        sampling_rates: args.sampled.as_deref().map(parse_sampling_rates).transpose()?.unwrap_or_default(),
        calibration: args.calibrate.map(|c| match c {
            CalibrateArg::Platt => CalibrationMethod::Platt,
            CalibrateArg::Isotonic => CalibrationMethod::Isotonic,
        }),
        seed: args.seed,
        source: TrainingSource { input_path: args.data.display().to_string(), input_sha256 },

        memory_limit: args.memory.memory_limit,
        progress: bar.sink(),
    };
    let file = train(&dataset, &request);
    drop(bar);
    let file = file?;
    file.save(&args.out)?;
    let mix = class_mix_text(target);
    println!("fitted {} on {} rows of {}: {}", family.name(), count(dataset.rows()), args.data.display(), mix);
    println!("positive class: {}; fit: {}", target.positive, baserate::report::model::fit_summary(&file));
    for w in &file.diagnostics.warnings {
        eprintln!("warning: {}", wrap(w, 100, 9));
    }
    println!("model written to {} (see it with: baserate inspect {})", args.out.display(), args.out.display());
    println!("\n{}", wrap(CAUTION, 100, 0));
    Ok(ExitCode::SUCCESS)
}
