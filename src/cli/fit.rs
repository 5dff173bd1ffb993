//! `baserate fit DATA --target COL --family F [family options] [--prior SPEC | --base-rate P] -o MODEL`
//!
//! Fits one family on a training file and writes the model file (atomically).
//! Holds the whole training file in memory.

use std::path::PathBuf;
use std::process::ExitCode;

use crate::cli::data_args::DataArgs;
use crate::cli::Failure;
use crate::data::Dataset;
use crate::error::Error;
use crate::format::{count, number, percent};
use crate::model::calibration::{fit_isotonic, fit_platt};
use crate::model::discriminant::{Divisor, LdaParams, QdaParams, Shrinkage};
use crate::model::logistic::{ClassWeight, LogisticParams};
use crate::model::naive_bayes::NaiveBayesParams;
use crate::model::penalised::{LambdaChoice, LambdaRule, Penalty};
use crate::model::{Family, FamilyParams};
use crate::prior::PriorSpec;
use crate::report::{wrap, CAUTION};
use crate::train::file::{ModelFile, TrainingInfo, FORMAT, FORMAT_VERSION};

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
    pub fn params(&self, family: Family) -> crate::Result<FamilyParams> {
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
        let check = |flags: &[(&str, bool)], families: &str, allowed: bool| -> crate::Result<()> {
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
pub fn parse_shrinkage(text: Option<&str>) -> crate::Result<Shrinkage> {
    match text {
        None | Some("none") => Ok(Shrinkage::None),
        Some("ledoit-wolf") => Ok(Shrinkage::LedoitWolf),
        Some(v) => v.parse::<f64>().ok().filter(|a| (0.0..=1.0).contains(a)).map(Shrinkage::Value).ok_or_else(|| {
            Error::Usage(format!("--shrinkage takes none, ledoit-wolf or a number in [0, 1], not '{v}'"))
        }),
    }
}

/// Parses `--class-weight`.
pub fn parse_class_weight(text: Option<&str>) -> crate::Result<ClassWeight> {
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
            .collect::<crate::Result<Vec<_>>>()
            .map(ClassWeight::Explicit),
    }
}

/// Parses `--prior` / `--base-rate` (at most one).
pub fn prior_spec(prior: Option<&str>, base_rate: Option<f64>) -> crate::Result<Option<PriorSpec>> {
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

/// The population class mix implied by sampling rates: training mix ÷ rate,
/// renormalised.
pub fn population_mix(classes: &[String], training_mix: &[f64], spec: &str) -> crate::Result<(Vec<f64>, Vec<f64>)> {
    let mut rates = vec![1.0; classes.len()];
    for part in spec.split(',') {
        let (class, rate) = part
            .rsplit_once('=')
            .ok_or_else(|| Error::Usage(format!("--sampled takes CLASS=RATE,..., not '{part}'")))?;
        let i = classes.iter().position(|c| c == class.trim()).ok_or_else(|| {
            Error::Usage(format!("--sampled names class '{class}', which is not one of {}", classes.join(", ")))
        })?;
        let r: f64 = rate.trim().parse().map_err(|_| Error::Usage(format!("'{rate}' in --sampled is not a number")))?;
        if !(r > 0.0 && r <= 1.0) {
            return Err(Error::Usage(format!("--sampled rate for '{class}' must lie in (0, 1]")));
        }
        rates[i] = r;
    }
    let raw: Vec<f64> = training_mix.iter().zip(&rates).map(|(m, r)| m / r).collect();
    let total: f64 = raw.iter().sum();
    Ok((raw.iter().map(|v| v / total).collect(), rates))
}

/// Out-of-fold predictions of the training rows (5 stratified folds),
/// summarised as the held-out confusion and mean posteriors; `None` when a
/// fold cannot be fitted (too few rows of a class).
fn held_out_summary(
    dataset: &Dataset,
    params: &FamilyParams,
    prior: &[f64],
    seed: u64,
) -> crate::Result<Option<(crate::train::file::HeldOut, Vec<f64>)>> {
    use crate::data::split::{assign, SplitPlan};
    use crate::evaluate::compare::{cross_predict, Candidate};
    const FOLDS: usize = 5;
    let k = dataset.schema.target.classes.len();
    let assignment = assign(&SplitPlan::KFold { folds: FOLDS, repeats: 1 }, &dataset.target, k, seed)?;
    let candidate = Candidate::new("held-out", params.clone());
    let Ok(predictions) = cross_predict(dataset, &[candidate], &assignment, Some(prior)) else {
        return Ok(None);
    };
    let lp = &predictions[0].log_posteriors[0];
    let total: f64 = dataset.weights.as_ref().map_or(dataset.rows() as f64, |w| w.iter().sum());
    let mut confusion = vec![vec![0.0; k]; k];
    let mut mean_posterior = vec![0.0; k];
    let positive = dataset.schema.target.positive_index();
    let mut log_odds = Vec::with_capacity(dataset.rows());
    for (i, row) in lp.rows().into_iter().enumerate() {
        let values = row.to_vec();
        log_odds.push(crate::evaluate::compare::log_odds_of(&values, positive));
        let w = dataset.weights.as_ref().map_or(1.0, |w| w[i]) / total;
        let predicted = (0..k).max_by(|&a, &b| row[a].total_cmp(&row[b])).unwrap_or(0);
        confusion[predicted][dataset.target[i] as usize] += w;
        for c in 0..k {
            mean_posterior[c] += w * row[c].exp();
        }
    }
    Ok(Some((crate::train::file::HeldOut { folds: FOLDS, confusion, mean_posterior }, log_odds)))
}

/// `fit STATS.csv --from-stats`: the family fitted from an engine's aggregates.
fn fit_from_stats(args: &Args, params: FamilyParams, spec: Option<PriorSpec>, talk: bool) -> Result<ExitCode, Failure> {
    use crate::export::stats::{model_from_stats, read_stats, FromStats};
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
        crate::cli::data_args::MissingArg::Error => crate::data::MissingPolicy::Error,
        crate::cli::data_args::MissingArg::DropRows => crate::data::MissingPolicy::DropRows,
        crate::cli::data_args::MissingArg::Impute => {
            return Err(Error::Usage(
                "--missing impute needs each column's median before the sums, which one aggregate pass cannot give; use drop-rows or error".into(),
            )
            .into())
        }
    };
    let request = FromStats {
        params,
        prior: spec,
        positive: args.data_args.positive.clone(),
        missing,
        na_tokens: args
            .data_args
            .na
            .clone()
            .unwrap_or_else(|| crate::data::options::DEFAULT_NA_TOKENS.iter().map(|s| s.to_string()).collect()),
    };
    let file = model_from_stats(&aggregates, &request, crate::io::sha256_file(&args.data)?)?;
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
fn class_mix_text(target: &crate::data::schema::TargetSchema) -> String {
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
    let (model, diagnostics) = crate::model::fit(&dataset, &params)?;
    let training_class_mix = match &model {
        crate::model::FittedModel::Logistic(m) => m.class_mix.clone(),
        _ => target.class_mix(),
    };
    // With --sampled, the default prior is the population mix the sampling
    // rates imply; the posteriors stay calibrated to the training mix.
    let (default_mix, sampling_rates) = match &args.sampled {
        Some(spec) => {
            let (mix, rates) = population_mix(&target.classes, &training_class_mix, spec)?;
            (mix, Some(rates))
        }
        None => (training_class_mix.clone(), None),
    };
    let prior = spec.unwrap_or(PriorSpec::Empirical).resolve(&target.classes, &default_mix, target.positive_index())?;
    let file = ModelFile {
        format: FORMAT.to_string(),
        format_version: FORMAT_VERSION,
        tool_version: env!("CARGO_PKG_VERSION").to_string(),
        created: crate::io::utc_timestamp(),
        family,
        params: params.clone(),
        schema: dataset.schema.clone(),
        classes: target.classes.clone(),
        positive: target.positive.clone(),
        prior,
        training_class_mix,
        training: TrainingInfo {
            input_path: args.data.display().to_string(),
            input_sha256: crate::io::sha256_file(&args.data)?,
            rows: dataset.rows(),
            class_counts: target.counts.clone(),
            weighted_class_counts: target.weighted_counts.clone(),
        },
        diagnostics,
        model,
        held_out: None,
        calibration: None,
        sampling_rates,
        drift_reference: None,
    };
    let mut file = file;
    let calibrated_to = file.calibrated_to().to_vec();
    // Out-of-fold predictions of a penalised fit use the λ chosen on all
    // rows (choosing it again inside every fold would cost a cross-
    // validation per fold for a summary of the predictions' mix).
    let fold_params = match (&params, &file.model) {
        (FamilyParams::Logistic(p), crate::model::FittedModel::Logistic(m)) => match &m.penalty {
            Some(record) => {
                FamilyParams::Logistic(LogisticParams { lambda: LambdaChoice::Value(record.lambda), ..p.clone() })
            }
            None => params.clone(),
        },
        _ => params.clone(),
    };
    if let Some((held_out, log_odds)) = held_out_summary(&dataset, &fold_params, &calibrated_to, args.seed)? {
        if let Some(method) = args.calibrate {
            if target.classes.len() != 2 {
                return Err(Error::Usage("--calibrate is for two classes".into()).into());
            }
            let labels: Vec<bool> = dataset.target.iter().map(|&y| y as usize == target.positive_index()).collect();
            file.calibration = Some(match method {
                CalibrateArg::Platt => fit_platt(&log_odds, &labels, dataset.weights.as_deref()),
                CalibrateArg::Isotonic => fit_isotonic(&log_odds, &labels, dataset.weights.as_deref()),
            });
        }
        file.held_out = Some(held_out);
    } else if args.calibrate.is_some() {
        return Err(Error::FitFailed {
            family: family.name().into(),
            message:
                "--calibrate needs out-of-fold predictions, and a fold could not be fitted (too few rows of a class)"
                    .into(),
        }
        .into());
    }
    // The training rows' features and scores (at the model's prior, after
    // any calibration), binned, for drift checks when scoring.
    let positive = target.positive_index();
    let scores: Vec<f64> =
        file.log_posteriors(&dataset.inputs(), &file.prior).column(positive).iter().map(|v| v.exp()).collect();
    file.drift_reference = Some(crate::model::drift::reference(&dataset, &target.positive, &scores));
    file.validate().map_err(|m| Error::FitFailed { family: family.name().into(), message: m })?;
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
