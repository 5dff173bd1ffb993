//! `baserate fit DATA --target COL --family F [family options] [--prior SPEC | --base-rate P] -o MODEL`
//!
//! Fits one family on a training file and writes the model file (atomically).
//! Holds the whole training file in memory.

use std::path::PathBuf;
use std::process::ExitCode;

use crate::cli::data_args::DataArgs;
use crate::cli::Failure;
use baserate::data::Dataset;
use baserate::error::Error;
use baserate::format::{count, number, percent};
use baserate::model::discriminant::{Divisor, LdaParams, QdaParams, Shrinkage};
use baserate::model::logistic::{ClassWeight, LogisticParams};
use baserate::model::naive_bayes::NaiveBayesParams;
use baserate::model::penalised::{LambdaChoice, LambdaRule, Penalty};
use baserate::model::{Family, FamilyParams};
use baserate::prior::PriorSpec;
use baserate::report::{wrap, CAUTION};
use baserate::train::{parse_sampling_rates, train, CalibrationMethod, TrainRequest, TrainingSource};

/// `--family` values.
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum FamilyArg {
    /// Logistic regression (posterior-direct).
    Logistic,
    /// Naive Bayes (Gaussian numeric, smoothed categorical).
    NaiveBayes,
    /// Linear discriminant analysis.
    Lda,
    /// Quadratic discriminant analysis.
    Qda,
}

impl From<FamilyArg> for Family {
    fn from(f: FamilyArg) -> Family {
        match f {
            FamilyArg::Logistic => Family::Logistic,
            FamilyArg::NaiveBayes => Family::NaiveBayes,
            FamilyArg::Lda => Family::Lda,
            FamilyArg::Qda => Family::Qda,
        }
    }
}

/// `--covariance-divisor` values.
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum DivisorArg {
    /// n − K for LDA, nₖ − 1 for QDA.
    Unbiased,
    /// n for LDA, nₖ for QDA (maximum likelihood).
    Rows,
}

/// Per-family options, shared by `fit` and (later) `compare`.
#[derive(Debug, Clone, Default, clap::Args)]
pub struct FamilyOptions {
    /// logistic: ridge penalty λ on standardised slopes (intercept unpenalised).
    #[arg(long, value_name = "LAMBDA")]
    pub l2: Option<f64>,
    /// logistic: class weights, `equal` or CLASS=W,... (multiplying row weights).
    #[arg(long, value_name = "SPEC")]
    pub class_weight: Option<String>,
    /// logistic: Newton iterations at most [default: 50].
    #[arg(long, value_name = "N")]
    pub max_iterations: Option<usize>,
    /// logistic: convergence tolerance on the largest standardised step [default: 1e-8].
    #[arg(long, value_name = "T")]
    pub tolerance: Option<f64>,
    /// logistic: a penalty fitted along a λ path by coordinate descent: none, ridge, lasso or elastic-net [default: none].
    #[arg(long, value_name = "P")]
    pub penalty: Option<String>,
    /// logistic: elastic-net mixing α in (0, 1): α·‖β‖₁ + (1−α)/2·‖β‖² [default: 0.5].
    #[arg(long, value_name = "A")]
    pub mixing: Option<f64>,
    /// logistic: λ of the penalty, or `auto` (K-fold cross-validated deviance) [default: auto].
    #[arg(long, value_name = "VALUE|auto")]
    pub lambda: Option<String>,
    /// logistic: points on the λ path [default: 100].
    #[arg(long, value_name = "N")]
    pub path_length: Option<usize>,
    /// logistic: which cross-validated λ: one-se (largest within one standard error of the minimum) or min [default: one-se].
    #[arg(long, value_name = "RULE")]
    pub lambda_rule: Option<String>,
    /// logistic: folds for --lambda auto [default: 5].
    #[arg(long, value_name = "K")]
    pub cv_folds: Option<usize>,
    /// naive-bayes: additive smoothing of categorical likelihoods [default: 1].
    #[arg(long, value_name = "ALPHA")]
    pub smoothing: Option<f64>,
    /// naive-bayes: floor on class variances as a share of the overall variance [default: 1e-9].
    #[arg(long, value_name = "F")]
    pub variance_floor: Option<f64>,
    /// lda: none, ledoit-wolf, or α in [0, 1] (toward the diagonal of the pooled covariance).
    #[arg(long, value_name = "S")]
    pub shrinkage: Option<String>,
    /// qda: weight γ of the pooled covariance in each class's, in [0, 1].
    #[arg(long, value_name = "GAMMA")]
    pub reg: Option<f64>,
    /// lda, qda: covariance divisor.
    #[arg(long, value_enum, value_name = "D")]
    pub covariance_divisor: Option<DivisorArg>,
}

fn only_for(flag: &str, families: &str, family: Family) -> Error {
    Error::Usage(format!("{flag} applies to {families}, not to {}", family.name()))
}

impl FamilyOptions {
    /// The checked parameters of `family`; an option of another family is a usage error.
    pub fn params(&self, family: Family) -> baserate::Result<FamilyParams> {
        let logistic_flags = [
            ("--l2", self.l2.is_some()),
            ("--class-weight", self.class_weight.is_some()),
            ("--max-iterations", self.max_iterations.is_some()),
            ("--tolerance", self.tolerance.is_some()),
            ("--penalty", self.penalty.is_some()),
            ("--mixing", self.mixing.is_some()),
            ("--lambda", self.lambda.is_some()),
            ("--path-length", self.path_length.is_some()),
            ("--lambda-rule", self.lambda_rule.is_some()),
            ("--cv-folds", self.cv_folds.is_some()),
        ];
        let nb_flags = [("--smoothing", self.smoothing.is_some()), ("--variance-floor", self.variance_floor.is_some())];
        let check = |flags: &[(&str, bool)], families: &str, allowed: bool| -> baserate::Result<()> {
            match flags.iter().find(|(_, set)| *set) {
                Some((flag, _)) if !allowed => Err(only_for(flag, families, family)),
                _ => Ok(()),
            }
        };
        check(&logistic_flags, "logistic", family == Family::Logistic)?;
        check(&nb_flags, "naive-bayes", family == Family::NaiveBayes)?;
        check(&[("--shrinkage", self.shrinkage.is_some())], "lda", family == Family::Lda)?;
        check(&[("--reg", self.reg.is_some())], "qda", family == Family::Qda)?;
        check(
            &[("--covariance-divisor", self.covariance_divisor.is_some())],
            "lda and qda",
            matches!(family, Family::Lda | Family::Qda),
        )?;
        let divisor = match self.covariance_divisor {
            Some(DivisorArg::Rows) => Divisor::Rows,
            _ => Divisor::Unbiased,
        };
        let params = match family {
            Family::Logistic => {
                let defaults = LogisticParams::default();
                let penalty = match self.penalty.as_deref() {
                    None | Some("none") => Penalty::None,
                    Some("ridge") => Penalty::Ridge,
                    Some("lasso") => Penalty::Lasso,
                    Some("elastic-net") => Penalty::ElasticNet,
                    Some(other) => {
                        return Err(Error::Usage(format!(
                            "--penalty takes none, ridge, lasso or elastic-net, not '{other}'"
                        )))
                    }
                };
                let path_flags = [
                    ("--mixing", self.mixing.is_some()),
                    ("--lambda", self.lambda.is_some()),
                    ("--path-length", self.path_length.is_some()),
                    ("--lambda-rule", self.lambda_rule.is_some()),
                    ("--cv-folds", self.cv_folds.is_some()),
                ];
                if penalty == Penalty::None {
                    if let Some((flag, _)) = path_flags.iter().find(|(_, set)| *set) {
                        return Err(Error::Usage(format!("{flag} needs --penalty ridge, lasso or elastic-net")));
                    }
                } else if self.l2.is_some() {
                    return Err(Error::Usage(
                        "--l2 is the Newton fit's ridge; with --penalty give --lambda instead".into(),
                    ));
                }
                if self.mixing.is_some() && penalty != Penalty::ElasticNet {
                    return Err(Error::Usage("--mixing is for --penalty elastic-net (ridge is 0, lasso is 1)".into()));
                }
                let lambda = match self.lambda.as_deref() {
                    None | Some("auto") => LambdaChoice::Auto,
                    Some(v) => LambdaChoice::Value(
                        v.parse::<f64>()
                            .ok()
                            .filter(|x| *x >= 0.0 && x.is_finite())
                            .ok_or_else(|| Error::Usage(format!("--lambda takes a number ≥ 0 or auto, not '{v}'")))?,
                    ),
                };
                let lambda_rule = match self.lambda_rule.as_deref() {
                    None | Some("one-se") => LambdaRule::OneSe,
                    Some("min") => LambdaRule::Min,
                    Some(other) => {
                        return Err(Error::Usage(format!("--lambda-rule takes one-se or min, not '{other}'")))
                    }
                };
                FamilyParams::Logistic(LogisticParams {
                    l2: self.l2.unwrap_or(defaults.l2),
                    class_weight: parse_class_weight(self.class_weight.as_deref())?,
                    max_iterations: self.max_iterations.unwrap_or(defaults.max_iterations),
                    tolerance: self.tolerance.unwrap_or(defaults.tolerance),
                    penalty,
                    mixing: self.mixing,
                    lambda,
                    path_length: self.path_length.unwrap_or(defaults.path_length),
                    lambda_rule,
                    cv_folds: self.cv_folds.unwrap_or(defaults.cv_folds),
                    cv_seed: defaults.cv_seed,
                })
            }
            Family::NaiveBayes => {
                let defaults = NaiveBayesParams::default();
                FamilyParams::NaiveBayes(NaiveBayesParams {
                    smoothing: self.smoothing.unwrap_or(defaults.smoothing),
                    variance_floor: self.variance_floor.unwrap_or(defaults.variance_floor),
                })
            }
            Family::Lda => {
                FamilyParams::Lda(LdaParams { shrinkage: parse_shrinkage(self.shrinkage.as_deref())?, divisor })
            }
            Family::Qda => FamilyParams::Qda(QdaParams { reg: self.reg.unwrap_or(0.0), divisor }),
        };
        params.check()?;
        Ok(params)
    }
}

/// Parses `--shrinkage`.
pub fn parse_shrinkage(text: Option<&str>) -> baserate::Result<Shrinkage> {
    match text {
        None | Some("none") => Ok(Shrinkage::None),
        Some("ledoit-wolf") => Ok(Shrinkage::LedoitWolf),
        Some(v) => v.parse::<f64>().ok().filter(|a| (0.0..=1.0).contains(a)).map(Shrinkage::Value).ok_or_else(|| {
            Error::Usage(format!("--shrinkage takes none, ledoit-wolf or a number in [0, 1], not '{v}'"))
        }),
    }
}

/// Parses `--class-weight`.
pub fn parse_class_weight(text: Option<&str>) -> baserate::Result<ClassWeight> {
    match text {
        None => Ok(ClassWeight::None),
        Some("equal") => Ok(ClassWeight::Equal),
        Some(spec) => spec
            .split(',')
            .map(|part| {
                let (class, w) = part
                    .rsplit_once('=')
                    .ok_or_else(|| Error::Usage(format!("--class-weight takes equal or CLASS=W,..., not '{part}'")))?;
                let w: f64 =
                    w.trim().parse().map_err(|_| Error::Usage(format!("'{w}' in --class-weight is not a number")))?;
                Ok((class.trim().to_string(), w))
            })
            .collect::<baserate::Result<Vec<_>>>()
            .map(ClassWeight::Explicit),
    }
}

/// Parses `--prior` / `--base-rate` (at most one).
pub fn prior_spec(prior: Option<&str>, base_rate: Option<f64>) -> baserate::Result<Option<PriorSpec>> {
    match (prior, base_rate) {
        (Some(_), Some(_)) => Err(Error::Usage("give --prior or --base-rate, not both".into())),
        (Some(p), None) => Ok(Some(p.parse()?)),
        (None, Some(b)) => Ok(Some(PriorSpec::BaseRate(b))),
        (None, None) => Ok(None),
    }
}

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
fn fit_from_stats(args: &Args, params: FamilyParams, spec: Option<PriorSpec>, talk: bool) -> Result<ExitCode, Failure> {
    use baserate::export::stats_reader::read_stats;
    use baserate::model::aggregates::FromAggregates;
    use baserate::train::{train_from_aggregates, FromStats};
    if args.calibrate.is_some() || args.sampled.is_some() {
        return Err(Error::Usage(
            "--calibrate needs out-of-fold predictions and --sampled a training file; neither goes with --from-stats"
                .into(),
        )
        .into());
    }
    let aggregates = read_stats(&args.data)?;
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
    let file = train_from_aggregates(&aggregates, &request, baserate::io::sha256_file(&args.data)?)?;
    file.save(&args.out)?;
    if talk {
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
    }
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
    execute(args, true)
}

/// Runs `fit` printing nothing (for the demo).
pub fn run_quietly(args: Args) -> Result<ExitCode, Failure> {
    execute(args, false)
}

fn execute(args: Args, talk: bool) -> Result<ExitCode, Failure> {
    let family: Family = args.family.into();
    let params = args.family_options.params(family)?;
    let spec = prior_spec(args.prior.as_deref(), args.base_rate)?;
    if args.from_stats {
        return fit_from_stats(&args, params, spec, talk);
    }
    let options = args.data_args.to_options()?;
    let (dataset, notices) = Dataset::read(&args.data, &options)?;
    for n in &notices {
        eprintln!("note: {}", wrap(&n.0, 100, 6));
    }
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
        source: TrainingSource {
            input_path: args.data.display().to_string(),
            input_sha256: baserate::io::sha256_file(&args.data)?,
        },
    };
    let file = train(&dataset, &request)?;
    file.save(&args.out)?;

    if !talk {
        return Ok(ExitCode::SUCCESS);
    }
    let mix = class_mix_text(target);
    println!("fitted {} on {} rows of {}: {}", family.name(), count(dataset.rows()), args.data.display(), mix);
    println!(
        "positive class: {}; {} iteration{}, {}, log-likelihood {}",
        target.positive,
        file.diagnostics.iterations,
        if file.diagnostics.iterations == 1 { "" } else { "s" },
        if file.diagnostics.converged { "converged" } else { "NOT converged" },
        number(file.diagnostics.log_likelihood, 8)
    );
    for w in &file.diagnostics.warnings {
        eprintln!("warning: {}", wrap(w, 100, 9));
    }
    println!("model written to {} (see it with: baserate inspect {})", args.out.display(), args.out.display());
    println!("\n{}", wrap(CAUTION, 100, 0));
    Ok(ExitCode::SUCCESS)
}
