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
    /// DATA is the result of `baserate stats-sql`: fit lda, qda or naive-bayes from those aggregates, or take one logistic Newton step from --start.
    #[arg(long)]
    pub from_stats: bool,
    /// With --from-stats --family logistic: the model the step query was written at; NEXT (-o) is the model after the step.
    #[arg(long, value_name = "MODEL", requires = "from_stats")]
    pub start: Option<PathBuf>,
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
    if let (Some(start), FamilyParams::Logistic(params)) = (&args.start, &params) {
        return newton_from_stats(args, start, params.clone(), spec);
    }
    if args.start.is_some() || params.family() == Family::Logistic {
        return Err(Error::Usage(
            "from aggregates, logistic regression takes one Newton step per query: --family logistic with --start MODEL (the model the query was written at); the class-conditional families take no --start".into(),
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
    let missing = args.data_args.missing_policy_from_aggregates()?;
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

/// `fit STEP.csv --from-stats --family logistic --start MODEL -o NEXT`: one Newton step.
fn newton_from_stats(
    args: &Args,
    start: &std::path::Path,
    params: baserate::model::logistic::LogisticParams,
    prior: Option<PriorSpec>,
) -> Result<ExitCode, Failure> {
    use baserate::model::logistic_aggregates::StepVerdict;
    use baserate::train::newton::{newton_from_aggregates, NewtonRequest};
    let (start_file, integrity) = baserate::train::file::ModelFile::open(start, false)?;
    if let Some(warning) = integrity.warning(&start.display().to_string()) {
        eprintln!("warning: {warning}");
    }
    let (sums, input_sha256) = baserate::export::newton_reader::read_newton_with_hash(&args.data, &start_file)?;
    let missing = args.data_args.missing_policy_from_aggregates()?;
    let request = NewtonRequest { params, missing, prior };
    let (file, outcome) = newton_from_aggregates(&start_file, &sums, &request, input_sha256)?;
    file.save(&args.out)?;
    let state = &outcome.state;
    println!(
        "query {}: deviance {:.10e} at {} over {} rows ({})",
        state.queries,
        outcome.deviance,
        start.display(),
        count(file.training.rows),
        class_mix_text(&file.schema.target)
    );
    let next = args.out.display();
    match outcome.verdict {
        StepVerdict::Converged => println!(
            "converged: the Newton step was {:.1e} (tolerance {:.0e}); {next} is the fit, standard errors from this query's information",
            state.largest_step,
            request.params.tolerance
        ),
        StepVerdict::Stepped => println!(
            "Newton step {:.1e} (tolerance {:.0e}): to go on, write the query at {next} (stats-sql --start {next}) and run it",
            state.largest_step,
            request.params.tolerance
        ),
        StepVerdict::Halved { before, after } => println!(
            "the objective rose ({before:.10e} before the step, {after:.10e} after): {next} is the step halved (halving {}; each costs one query); run the query at {next}",
            state.halvings
        ),
        StepVerdict::Restarted { objective, null } => println!(
            "the start is worse than no inputs (objective {objective:.4e}, intercept-only {null:.4e}): {next} is the intercept-only model, from which the steps go on; run the query at {next}"
        ),
    }
    for level in &outcome.new_levels {
        println!("new level {level}: enters {next} with coefficient 0");
    }
    for w in &file.diagnostics.warnings {
        eprintln!("note: {}", wrap(w, 100, 6));
    }
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
