//! The family flags `fit` and `compare` share: `--family` and each
//! family's options (as flags for `fit`, after a colon for `compare`), and
//! the prior flags. Turns them into the library's checked parameters.

use baserate::error::Error;
use baserate::evaluate::compare::Candidate;
use baserate::model::discriminant::{CategoryModel, Divisor, LdaParams, QdaParams};
use baserate::model::logistic::LogisticParams;
use baserate::model::naive_bayes::NaiveBayesParams;
use baserate::model::penalised::Penalty;
use baserate::model::{Family, FamilyParams};
use baserate::prior::PriorSpec;

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

/// Per-family options, shared by `fit` and (later) `compare`.
#[derive(Debug, Clone, Default, clap::Args)]
pub struct FamilyOptions {
    /// logistic: the Newton fit's ridge λ on standardised slopes (intercept unpenalised); --penalty ridge is the coordinate-descent path.
    #[arg(long, value_name = "LAMBDA")]
    pub newton_ridge: Option<f64>,
    /// logistic: class weights multiplying row weights: `equal-totals` (every class the same total weight) or CLASS=W,....
    #[arg(long, value_name = "SPEC")]
    pub reweight: Option<String>,
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
    /// logistic: points on the λ path [default: ten to a decade of λ down to the floor].
    #[arg(long, value_name = "N")]
    pub path_length: Option<usize>,
    /// logistic: the path's last λ as a share of λ_max [default: 1e-2 with more rows than columns, else 1e-1].
    #[arg(long, value_name = "R")]
    pub lambda_floor: Option<f64>,
    /// logistic: walk the whole λ path instead of stopping once the choice of λ is settled.
    #[arg(long)]
    pub full_path: bool,
    /// logistic: which cross-validated λ: sparsest-within-se (largest within one standard error of the minimum) or lowest-deviance [default: sparsest-within-se].
    #[arg(long, value_name = "RULE")]
    pub lambda_rule: Option<String>,
    /// logistic: folds for --lambda auto [default: 5].
    #[arg(long, value_name = "K")]
    pub cv_folds: Option<usize>,
    /// naive-bayes: additive smoothing of categorical likelihoods [default: 1].
    #[arg(long, value_name = "ALPHA")]
    pub smoothing: Option<f64>,
    /// naive-bayes: floor on class variances as a share of each feature's pooled within-class variance [default: 1e-6].
    #[arg(long, value_name = "F")]
    pub variance_floor: Option<f64>,
    /// lda: none, ledoit-wolf, or α in [0, 1] (toward the diagonal of the pooled covariance).
    #[arg(long, value_name = "A")]
    pub diagonal_weight: Option<String>,
    /// qda: weight γ of the pooled covariance in each class's, in [0, 1].
    #[arg(long, value_name = "G")]
    pub pooled_weight: Option<f64>,
    /// lda, qda: covariance divisor.
    #[arg(long, value_name = "unbiased|rows")]
    pub covariance_divisor: Option<Divisor>,
    /// lda, qda: how categorical inputs enter [default: one-hot for lda, frequencies for qda].
    #[arg(long, value_name = "one-hot|frequencies")]
    pub category_model: Option<CategoryModel>,
    /// logistic, lda: refuse inputs that are exact linear combinations of others, instead of dropping them from the fit.
    #[arg(long)]
    pub refuse_aliased: bool,
}

fn only_for(flag: &str, families: &str, family: Family) -> Error {
    Error::Usage(format!("{flag} applies to {families}, not to {}", family.name()))
}

impl FamilyOptions {
    /// The checked parameters of `family`; an option of another family is a usage error.
    pub fn params(&self, family: Family) -> baserate::Result<FamilyParams> {
        let logistic_flags = [
            ("--newton-ridge", self.newton_ridge.is_some()),
            ("--reweight", self.reweight.is_some()),
            ("--max-iterations", self.max_iterations.is_some()),
            ("--tolerance", self.tolerance.is_some()),
            ("--penalty", self.penalty.is_some()),
            ("--mixing", self.mixing.is_some()),
            ("--lambda", self.lambda.is_some()),
            ("--path-length", self.path_length.is_some()),
            ("--lambda-floor", self.lambda_floor.is_some()),
            ("--full-path", self.full_path),
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
        check(&[("--diagonal-weight", self.diagonal_weight.is_some())], "lda", family == Family::Lda)?;
        check(&[("--pooled-weight", self.pooled_weight.is_some())], "qda", family == Family::Qda)?;
        let logistic_or_lda = matches!(family, Family::Logistic | Family::Lda);
        check(&[("--refuse-aliased", self.refuse_aliased)], "logistic and lda", logistic_or_lda)?;
        check(
            &[
                ("--covariance-divisor", self.covariance_divisor.is_some()),
                ("--category-model", self.category_model.is_some()),
            ],
            "lda and qda",
            matches!(family, Family::Lda | Family::Qda),
        )?;
        let (divisor, categories) = (self.covariance_divisor.unwrap_or_default(), self.category_model);
        let params = match family {
            Family::Logistic => {
                let defaults = LogisticParams::default();
                let penalty: Penalty = flag_value("--penalty", self.penalty.as_deref())?;
                let path_flags = [
                    ("--mixing", self.mixing.is_some()),
                    ("--lambda", self.lambda.is_some()),
                    ("--path-length", self.path_length.is_some()),
                    ("--lambda-floor", self.lambda_floor.is_some()),
                    ("--full-path", self.full_path),
                    ("--lambda-rule", self.lambda_rule.is_some()),
                    ("--cv-folds", self.cv_folds.is_some()),
                ];
                if penalty == Penalty::None {
                    if let Some((flag, _)) = path_flags.iter().find(|(_, set)| *set) {
                        return Err(Error::Usage(format!("{flag} needs --penalty ridge, lasso or elastic-net")));
                    }
                } else if self.newton_ridge.is_some() {
                    return Err(Error::Usage(
                        "--newton-ridge is the Newton fit's ridge; with --penalty give --lambda instead".into(),
                    ));
                }
                if self.mixing.is_some() && penalty != Penalty::ElasticNet {
                    return Err(Error::Usage("--mixing is for --penalty elastic-net (ridge is 0, lasso is 1)".into()));
                }
                FamilyParams::Logistic(LogisticParams {
                    l2: self.newton_ridge.unwrap_or(defaults.l2),
                    class_weight: flag_value("--reweight", self.reweight.as_deref())?,
                    max_iterations: self.max_iterations.unwrap_or(defaults.max_iterations),
                    tolerance: self.tolerance.unwrap_or(defaults.tolerance),
                    penalty,
                    mixing: self.mixing,
                    lambda: flag_value("--lambda", self.lambda.as_deref())?,
                    path_length: self.path_length.or(defaults.path_length),
                    lambda_floor: self.lambda_floor,
                    full_path: self.full_path,
                    lambda_rule: flag_value("--lambda-rule", self.lambda_rule.as_deref())?,
                    cv_folds: self.cv_folds.unwrap_or(defaults.cv_folds),
                    cv_seed: defaults.cv_seed,
                    refuse_aliased: self.refuse_aliased,
                })
            }
            Family::NaiveBayes => {
                let defaults = NaiveBayesParams::default();
                FamilyParams::NaiveBayes(NaiveBayesParams {
                    smoothing: self.smoothing.unwrap_or(defaults.smoothing),
                    variance_floor: self.variance_floor.unwrap_or(defaults.variance_floor),
                })
            }
            Family::Lda => FamilyParams::Lda(LdaParams {
                shrinkage: flag_value("--diagonal-weight", self.diagonal_weight.as_deref())?,
                divisor,
                refuse_aliased: self.refuse_aliased,
                categories: categories.unwrap_or(LdaParams::default().categories),
            }),
            Family::Qda => FamilyParams::Qda(QdaParams {
                reg: self.pooled_weight.unwrap_or(0.0),
                divisor,
                categories: categories.unwrap_or(QdaParams::default().categories),
            }),
        };
        params.check()?;
        Ok(params)
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

/// A flag's value by the library's rule for it (its default when absent).
fn flag_value<T: std::str::FromStr<Err = String> + Default>(flag: &str, text: Option<&str>) -> baserate::Result<T> {
    text.map_or(Ok(T::default()), |t| t.parse().map_err(|e| Error::Usage(format!("{flag} {e}"))))
}

/// A family option's named value, by the rule its flag uses.
fn named<T: std::str::FromStr<Err = String>>(spec: &str, key: &str, value: &str) -> baserate::Result<T> {
    value.parse().map_err(|e| Error::Usage(format!("--family {spec}: {key} {e}")))
}

/// Parses `F[:OPTION=VALUE,...][+platt|+isotonic]` into a named candidate.
pub fn parse_candidate(spec: &str) -> baserate::Result<Candidate> {
    let (base, calibration) = match spec.rsplit_once('+') {
        Some((b, "platt")) => (b, Some(baserate::evaluate::compare::Calibration::Platt)),
        Some((b, "isotonic")) => (b, Some(baserate::evaluate::compare::Calibration::Isotonic)),
        Some((_, other)) => {
            return Err(Error::Usage(format!("--family {spec}: '+{other}' is not +platt or +isotonic")))
        }
        None => (spec, None),
    };
    let (family_text, options_text) = base.split_once(':').unwrap_or((base, ""));
    let family: Family = match family_text {
        "logistic" => FamilyArg::Logistic,
        "naive-bayes" => FamilyArg::NaiveBayes,
        "lda" => FamilyArg::Lda,
        "qda" => FamilyArg::Qda,
        other => return Err(Error::Usage(format!("--family '{other}' is not one of logistic, naive-bayes, lda, qda"))),
    }
    .into();
    let mut options = FamilyOptions::default();
    for part in options_text.split(',').filter(|p| !p.is_empty()) {
        let (key, value) = part
            .split_once('=')
            .ok_or_else(|| Error::Usage(format!("--family {spec}: '{part}' is not OPTION=VALUE")))?;
        let number =
            |v: &str| v.parse::<f64>().map_err(|_| Error::Usage(format!("--family {spec}: '{v}' is not a number")));
        // A count is a whole number as written: `2.7` is refused, never cut to 2.
        let count = |v: &str| {
            v.parse::<usize>()
                .map_err(|_| Error::Usage(format!("--family {spec}: {key} takes a whole number; got '{v}'")))
        };
        match key {
            "newton-ridge" => options.newton_ridge = Some(number(value)?),
            "reweight" => options.reweight = Some(value.to_string()),
            "max-iterations" => options.max_iterations = Some(count(value)?),
            "tolerance" => options.tolerance = Some(number(value)?),
            "penalty" => options.penalty = Some(value.to_string()),
            "mixing" => options.mixing = Some(number(value)?),
            "lambda" => options.lambda = Some(value.to_string()),
            "path-length" => options.path_length = Some(count(value)?),
            "lambda-floor" => options.lambda_floor = Some(number(value)?),
            "full-path" => {
                options.full_path = match value {
                    "yes" | "true" => true,
                    "no" | "false" => false,
                    _ => {
                        return Err(Error::Usage(format!("--family {spec}: full-path takes yes or no; got '{value}'")))
                    }
                }
            }
            "lambda-rule" => options.lambda_rule = Some(value.to_string()),
            "cv-folds" => options.cv_folds = Some(count(value)?),
            "smoothing" => options.smoothing = Some(number(value)?),
            "variance-floor" => options.variance_floor = Some(number(value)?),
            "diagonal-weight" => options.diagonal_weight = Some(value.to_string()),
            "pooled-weight" => options.pooled_weight = Some(number(value)?),
            // The words `fit`'s flags take, parsed by the same rule.
            "covariance-divisor" => options.covariance_divisor = Some(named(spec, key, value)?),
            "category-model" => options.category_model = Some(named(spec, key, value)?),
            other => return Err(Error::Usage(format!("--family {spec}: unknown option '{other}'"))),
        }
    }
    Ok(Candidate { name: spec.to_string(), params: options.params(family)?, calibration })
}
