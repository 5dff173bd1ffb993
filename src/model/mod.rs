//! The four Bayes-rule families behind one interface.
//!
//! Every family fits on a [`Dataset`] (with its optional frequency weights)
//! and returns, per row, the log-posterior of each class for a given prior.
//!
//! - The class-conditional families ([`naive_bayes`], [`discriminant`]: LDA
//!   and QDA) estimate log p(x | k) and apply a prior by Bayes' rule at
//!   prediction time: log p(k | x) = log p(x | k) + log πₖ − log Σⱼ p(x | j)πⱼ.
//!   The prior is never baked into the fitted parameters, so swapping it is
//!   exact.
//! - The posterior-direct family ([`logistic`]) estimates p(k | x) under the
//!   class mix of its (weighted) training rows, which the model records; a
//!   new prior is applied by the odds correction log p′(k | x) = log p(k | x)
//!   + log π′ₖ − log πₖ, renormalised.
//!
//! Posteriors are computed in log space and normalised by log-sum-exp (the
//! row maximum subtracted first), so no row can give NaN or infinity.

pub mod aggregates;
pub mod calibration;
pub mod collinearity;
pub mod design;
pub mod discriminant;
pub mod drift;
pub mod levels;
pub mod linalg;
pub mod logistic;
pub mod logistic_aggregates;
pub mod moments;
pub mod naive_bayes;
pub mod penalised;
pub mod range;

use ndarray::Array2;
use rayon::prelude::*;
use serde::{Deserialize, Serialize};

use crate::data::{Dataset, Inputs};
use crate::error::{Error, Result, Setting};
use crate::progress::Progress;

/// The families, by their command-line names.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum Family {
    /// Logistic regression (posterior-direct).
    Logistic,
    /// Naive Bayes: Gaussian numeric and smoothed categorical likelihoods.
    NaiveBayes,
    /// Linear discriminant analysis: Gaussian classes with a shared covariance.
    Lda,
    /// Quadratic discriminant analysis: Gaussian classes, own covariances.
    Qda,
}

impl Family {
    /// Every family, in the order commands list them.
    pub const ALL: [Family; 4] = [Family::Logistic, Family::NaiveBayes, Family::Lda, Family::Qda];

    /// The command-line name.
    pub fn name(self) -> &'static str {
        match self {
            Family::Logistic => "logistic",
            Family::NaiveBayes => "naive-bayes",
            Family::Lda => "lda",
            Family::Qda => "qda",
        }
    }

    /// True for the families that model p(x | class).
    pub fn is_class_conditional(self) -> bool {
        self != Family::Logistic
    }
}

/// Hyperparameters of a fit, one variant per family (checked by
/// [`FamilyParams::check`] before fitting).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(tag = "family", rename_all = "kebab-case")]
pub enum FamilyParams {
    /// See [`logistic::LogisticParams`].
    Logistic(logistic::LogisticParams),
    /// See [`naive_bayes::NaiveBayesParams`].
    NaiveBayes(naive_bayes::NaiveBayesParams),
    /// See [`discriminant::LdaParams`].
    Lda(discriminant::LdaParams),
    /// See [`discriminant::QdaParams`].
    Qda(discriminant::QdaParams),
}

impl FamilyParams {
    /// The defaults of a family.
    pub fn defaults(family: Family) -> Self {
        match family {
            Family::Logistic => FamilyParams::Logistic(logistic::LogisticParams::default()),
            Family::NaiveBayes => FamilyParams::NaiveBayes(naive_bayes::NaiveBayesParams::default()),
            Family::Lda => FamilyParams::Lda(discriminant::LdaParams::default()),
            Family::Qda => FamilyParams::Qda(discriminant::QdaParams::default()),
        }
    }

    /// The family.
    pub fn family(&self) -> Family {
        match self {
            FamilyParams::Logistic(_) => Family::Logistic,
            FamilyParams::NaiveBayes(_) => Family::NaiveBayes,
            FamilyParams::Lda(_) => Family::Lda,
            FamilyParams::Qda(_) => Family::Qda,
        }
    }

    /// Validates every value (ranges, finiteness).
    pub fn check(&self) -> Result<()> {
        let bad = |setting: Setting, what: &str| Err(Error::invalid(crate::error::message![setting, what]));
        match self {
            FamilyParams::Logistic(p) => {
                if !(p.l2 >= 0.0 && p.l2.is_finite()) {
                    return bad(Setting::L2, " must be a finite number ≥ 0");
                }
                if p.max_iterations == 0 {
                    return bad(Setting::MaxIterations, " must be at least 1");
                }
                if !(p.tolerance > 0.0) {
                    return bad(Setting::Tolerance, " must be positive");
                }
                if let Some(a) = p.mixing {
                    if !(a > 0.0 && a < 1.0) {
                        return bad(Setting::Mixing, " must lie strictly between 0 and 1 (ridge is 0, lasso is 1)");
                    }
                }
                if p.path_length.is_some_and(|n| n == 0 || n > 10_000) {
                    return bad(Setting::PathLength, " must be between 1 and 10000");
                }
                if let Some(floor) = p.lambda_floor {
                    if !(floor > 0.0 && floor < 1.0) {
                        return bad(Setting::LambdaFloor, " must lie strictly between 0 and 1 (a share of λ_max)");
                    }
                }
                if p.cv_folds < 2 {
                    return bad(Setting::CvFolds, " must be at least 2");
                }
            }
            FamilyParams::NaiveBayes(p) => {
                if !(p.smoothing >= 0.0 && p.smoothing.is_finite()) {
                    return bad(Setting::Smoothing, " must be a finite number ≥ 0");
                }
                if !(p.variance_floor >= 0.0 && p.variance_floor < 1.0) {
                    return bad(Setting::VarianceFloor, " must lie in [0, 1)");
                }
            }
            FamilyParams::Lda(p) => {
                if let discriminant::Shrinkage::Value(v) = p.shrinkage {
                    if !(0.0..=1.0).contains(&v) {
                        return bad(Setting::Shrinkage, " takes none, ledoit-wolf or a number in [0, 1]");
                    }
                }
            }
            FamilyParams::Qda(p) => {
                if !(0.0..=1.0).contains(&p.reg) {
                    return bad(Setting::Reg, " must lie in [0, 1]");
                }
            }
        }
        Ok(())
    }
}

/// What a fit reports about itself: it goes into the model file, not only
/// onto the terminal.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, Default)]
pub struct Diagnostics {
    /// Iterations taken (1 for closed-form fits).
    pub iterations: usize,
    /// Whether the fit met its convergence criterion.
    pub converged: bool,
    /// Weighted log-likelihood of the training rows at the fit (for the
    /// class-conditional families, of the joint p(x, y) under the prior in
    /// use; for logistic, of the labels given x).
    pub log_likelihood: f64,
    /// Warnings a user must see: non-convergence, separation, shrinkage used.
    pub warnings: Vec<String>,
    /// Weighted mean −ln p(y | x) of the training rows' posteriors at the
    /// training class mix: the one in-sample fit figure every family shares
    /// (absent for fits from aggregates, which never see the rows).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub training_log_loss: Option<f64>,
}

/// The weighted mean −ln p(yᵢ | xᵢ) of a dataset's rows under a model, at
/// the class mix `prior`; posteriors below the smallest normal double
/// count as that, so one row cannot make the figure infinite.
pub fn training_log_loss(model: &FittedModel, dataset: &Dataset, prior: &[f64]) -> f64 {
    let log_posteriors = model.log_posteriors(&dataset.inputs(), prior);
    let (mut total, mut weight) = (0.0, 0.0);
    for (i, row) in log_posteriors.rows().into_iter().enumerate() {
        let w = dataset.weights.as_ref().map_or(1.0, |w| w[i]);
        let class = dataset.target[i] as usize;
        total -= w * row[class].max(f64::MIN_POSITIVE.ln());
        weight += w;
    }
    total / weight
}

/// A fitted model of any family. Written with its `family` first, and read
/// the same way, straight into the family's parameters (see the
/// `Deserialize` impl).
#[derive(Debug, Clone, PartialEq, Serialize)]
#[serde(tag = "family", rename_all = "kebab-case")]
pub enum FittedModel {
    /// A logistic regression.
    Logistic(logistic::LogisticModel),
    /// A naive Bayes model.
    NaiveBayes(naive_bayes::NaiveBayesModel),
    /// An LDA model.
    Lda(discriminant::DiscriminantModel),
    /// A QDA model.
    Qda(discriminant::DiscriminantModel),
}

/// Reads `{"family": F, ...}` with the family first, as it is written, and
/// the rest straight into that family's parameters: serde's own reading of
/// a tagged enum would first copy the whole object into a buffer, several
/// times the file's size for a large covariance.
impl<'de> Deserialize<'de> for FittedModel {
    fn deserialize<D: serde::Deserializer<'de>>(deserializer: D) -> std::result::Result<Self, D::Error> {
        struct FamilyFirst;
        impl<'de> serde::de::Visitor<'de> for FamilyFirst {
            type Value = FittedModel;

            fn expecting(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
                f.write_str("a fitted model whose first field is \"family\"")
            }

            fn visit_map<A: serde::de::MapAccess<'de>>(self, mut map: A) -> std::result::Result<FittedModel, A::Error> {
                use serde::de::Error as _;
                if map.next_key::<String>()?.as_deref() != Some("family") {
                    return Err(A::Error::custom("the fitted model's first field must be \"family\""));
                }
                let family: Family = map.next_value()?;
                let rest = serde::de::value::MapAccessDeserializer::new(map);
                Ok(match family {
                    Family::Logistic => FittedModel::Logistic(Deserialize::deserialize(rest)?),
                    Family::NaiveBayes => FittedModel::NaiveBayes(Deserialize::deserialize(rest)?),
                    Family::Lda => FittedModel::Lda(Deserialize::deserialize(rest)?),
                    Family::Qda => FittedModel::Qda(Deserialize::deserialize(rest)?),
                })
            }
        }
        deserializer.deserialize_map(FamilyFirst)
    }
}

/// The name of a class's posterior column wherever posteriors are written:
/// `score`'s output, the SQL export and `compare --predictions`
/// (`NAME:posterior_<class>` there).
pub fn posterior_column(class: &str) -> String {
    format!("posterior_{class}")
}

/// Fits a family on a dataset, with the dataset's own row weights.
pub fn fit(dataset: &Dataset, params: &FamilyParams) -> Result<(FittedModel, Diagnostics)> {
    fit_weighted(dataset, params, dataset.weights.as_deref(), None, &Progress::silent())
}

/// What can be refused from the schema and the counts alone, before any
/// pass over the rows: a spread the Gaussian families cannot hold, and
/// what the row counts rule out. Every fit runs it; a comparison runs it
/// (with [`check_memory`]) for each candidate before its folds.
pub fn check_before_fitting(dataset: &Dataset, params: &FamilyParams, weights: Option<&[f64]>) -> Result<()> {
    if !matches!(params, FamilyParams::Logistic(_)) {
        check_gaussian_scale(dataset, params.family().name())?;
    }
    check_counts(dataset, params, weights)
}

/// What the row counts rule out, refused before any pass over the rows
/// (a pass costs d² per row; at thousands of columns, minutes and
/// gigabytes): QDA with no more rows in some class than design columns,
/// LDA without a diagonal weight with d ≥ n − K.
fn check_counts(dataset: &Dataset, params: &FamilyParams, weights: Option<&[f64]>) -> Result<()> {
    let d = params.design_width(&dataset.schema);
    let classes = &dataset.schema.target.classes;
    let mut rows = vec![0usize; classes.len()];
    for (r, &y) in dataset.target.iter().enumerate() {
        if weights.is_none_or(|w| w[r] > 0.0) {
            rows[y as usize] += 1;
        }
    }
    match params {
        FamilyParams::Qda(p) => {
            let (n, k) = (rows.iter().sum::<usize>(), classes.len());
            if p.reg > 0.0 && d >= n.saturating_sub(k) {
                return Err(Error::FitFailed {
                    family: "qda".into(),
                    message: crate::error::message![
                        pooled_too_wide(n, k, d),
                        ", so mixing it in (",
                        Setting::Reg,
                        ") cannot mend a class's own; use fewer inputs (",
                        Setting::Exclude,
                        "), or naive-bayes"
                    ],
                });
            }
            let needed = discriminant::qda_rows_needed(p, d);
            if let Some((class, &n)) = rows.iter().enumerate().find(|(_, &n)| n < needed) {
                return Err(Error::TooFewRows {
                    family: "qda".into(),
                    class: classes[class].clone(),
                    rows: n,
                    needed,
                    hint: discriminant::qda_rows_hint(),
                });
            }
        }
        FamilyParams::Lda(p) if p.shrinkage == discriminant::Shrinkage::None => {
            let (n, k) = (rows.iter().sum::<usize>(), classes.len());
            if d >= n.saturating_sub(k) {
                return Err(Error::FitFailed {
                    family: "lda".into(),
                    message: crate::error::message![
                        pooled_too_wide(n, k, d),
                        "; use a diagonal weight (",
                        Setting::Shrinkage.set_to("ledoit-wolf"),
                        "), fewer inputs, or naive-bayes"
                    ],
                });
            }
        }
        _ => {}
    }
    Ok(())
}

/// Why a pooled covariance of `d` inputs is singular with `n` rows in `k`
/// classes.
fn pooled_too_wide(n: usize, k: usize, d: usize) -> String {
    format!(
        "{n} rows in {k} classes leave {} degrees of freedom for a pooled covariance of {d} inputs, which needs more than {d}",
        n.saturating_sub(k)
    )
}

/// Bytes a fit of `params` holds at its peak beyond the dataset itself:
/// the d × d (or, for logistic regression, parameter-sized) matrices it
/// builds, counted as the code allocates them, with one set of per-class
/// accumulators per thread.
pub fn fit_memory_estimate(dataset: &Dataset, params: &FamilyParams) -> u64 {
    let d = params.design_width(&dataset.schema) as u64;
    let k = dataset.schema.target.classes.len() as u64;
    let threads = rayon::current_num_threads() as u64;
    let matrix = d * d * 8;
    match params {
        // Information matrix, its copy as a system, the factor, the
        // inverse and the transform, and a per-thread accumulator.
        FamilyParams::Logistic(_) => {
            let size = (k - 1) * (d + 1);
            (5 + threads) * size * size * 8
        }
        FamilyParams::NaiveBayes(_) => (threads + 2) * k * d * 8,
        // Per-class scatter (per thread while accumulating), the pooled
        // covariance, its factor, inverse and copies.
        FamilyParams::Lda(_) => (threads * k + k + 5) * matrix,
        // Per class: scatter (per thread), covariance, factor, inverse.
        FamilyParams::Qda(_) => (threads * k + 4 * k + 1) * matrix,
    }
}

/// Half the machine's memory: the default limit of a fit's estimate
/// (`None` where the machine's memory cannot be read).
pub fn default_memory_limit() -> Option<u64> {
    crate::io::machine_memory().map(|bytes| bytes / 2)
}

/// Refuses a fit whose [`fit_memory_estimate`] exceeds `limit` (`None`:
/// [`default_memory_limit`]), before any pass over the rows.
pub fn check_memory(dataset: &Dataset, params: &FamilyParams, limit: Option<u64>) -> Result<()> {
    let Some(limit) = limit.or_else(default_memory_limit) else { return Ok(()) };
    let estimate = fit_memory_estimate(dataset, params);
    if estimate > limit {
        let gib = |b: u64| b as f64 / (1u64 << 30) as f64;
        return Err(Error::FitFailed {
            family: params.family().name().into(),
            message: crate::error::message![
                format!(
                    "with {} design columns the fit would take about {:.1} GiB, above the limit of {:.1} GiB; use fewer inputs (",
                    design::Encoding::from_schema(&dataset.schema).width(),
                    gib(estimate),
                    gib(limit)
                ),
                Setting::Exclude,
                "), or raise ",
                Setting::MemoryLimit
            ],
        });
    }
    Ok(())
}

/// Standard deviations beyond which a Gaussian family's variances (the
/// squares) would leave the range a double holds with full precision,
/// about 1e-290 to 1e290.
pub const GAUSSIAN_SPREAD_RANGE: (f64, f64) = (1e-145, 1e145);

/// The Gaussian families hold variances in the data's own units. A numeric
/// input whose spread (its training summary's standard deviation, computed
/// at any scale) puts them outside [`GAUSSIAN_SPREAD_RANGE`] is refused with
/// the remedy, rather than called constant (the squares underflow to 0) or
/// given an infinite variance. Logistic regression standardises each input
/// by its own magnitude and fits such a column as it is.
fn check_gaussian_scale(dataset: &Dataset, family: &str) -> Result<()> {
    let (low, high) = GAUSSIAN_SPREAD_RANGE;
    for column in &dataset.schema.columns {
        let Some(summary) = &column.numeric else { continue };
        let sd = summary.std_dev;
        if sd > 0.0 && !(low..=high).contains(&sd) {
            let magnitude = if sd < low { "small" } else { "large" };
            return Err(Error::FitFailed {
                family: family.into(),
                message: format!(
                    "column '{}' varies on a scale of about {sd:.0e}, too {magnitude} for its variance to be held in the data's units; rescale it (multiply it by about {:.0e}), or use logistic regression, which fits it as it is",
                    column.name,
                    1.0 / sd
                )
                .into(),
            });
        }
    }
    Ok(())
}

/// Fits a family with the given row weights — the dataset's own, or those of
/// a training fold (a weight of 0 leaves a row out exactly) — optionally
/// starting from an earlier fit of the same family (used by logistic
/// regression as a warm start; ignored by the closed-form families).
/// Logistic regression reports its Newton iterations or its λ path to
/// `progress`; the closed forms take one pass and report nothing.
pub fn fit_weighted(
    dataset: &Dataset,
    params: &FamilyParams,
    weights: Option<&[f64]>,
    start: Option<&FittedModel>,
    progress: &Progress,
) -> Result<(FittedModel, Diagnostics)> {
    params.check()?;
    check_before_fitting(dataset, params, weights)?;
    match params {
        FamilyParams::Logistic(p) => {
            let start = match start {
                Some(FittedModel::Logistic(m)) => Some(m),
                _ => None,
            };
            let (m, d) = logistic::fit(dataset, p, weights, start, progress)?;
            Ok((FittedModel::Logistic(m), d))
        }
        FamilyParams::NaiveBayes(p) => {
            let (m, d) = naive_bayes::fit(dataset, p, weights)?;
            Ok((FittedModel::NaiveBayes(m), d))
        }
        FamilyParams::Lda(p) => {
            let (m, d) = discriminant::fit_lda(dataset, p, weights)?;
            Ok((FittedModel::Lda(m), d))
        }
        FamilyParams::Qda(p) => {
            let (m, d) = discriminant::fit_qda(dataset, p, weights)?;
            Ok((FittedModel::Qda(m), d))
        }
    }
}

impl FamilyParams {
    /// The number of design columns a fit of these parameters models
    /// jointly: every one-hot column for logistic regression and one-hot
    /// LDA and QDA, the numeric inputs alone for naive Bayes and the level
    /// frequencies.
    pub fn design_width(&self, schema: &crate::data::schema::Schema) -> usize {
        match self {
            FamilyParams::Logistic(_) => design::Encoding::from_schema(schema).width(),
            FamilyParams::NaiveBayes(_) => schema.numeric_inputs().len(),
            FamilyParams::Lda(p) => discriminant::gaussian_encoding(schema, p.categories).width(),
            FamilyParams::Qda(p) => discriminant::gaussian_encoding(schema, p.categories).width(),
        }
    }

    /// Sets whether aliased inputs are refused (logistic regression and
    /// LDA; the other families have no such inputs to drop).
    pub fn set_refuse_aliased(&mut self, refuse: bool) {
        match self {
            FamilyParams::Logistic(p) => p.refuse_aliased = refuse,
            FamilyParams::Lda(p) => p.refuse_aliased = refuse,
            _ => {}
        }
    }
}

impl FittedModel {
    /// The design terms dropped from the fit as aliased.
    pub fn aliased(&self) -> &[String] {
        match self {
            FittedModel::Logistic(m) => &m.aliased,
            FittedModel::Lda(m) | FittedModel::Qda(m) => &m.aliased,
            FittedModel::NaiveBayes(_) => &[],
        }
    }

    /// The family.
    pub fn family(&self) -> Family {
        match self {
            FittedModel::Logistic(_) => Family::Logistic,
            FittedModel::NaiveBayes(_) => Family::NaiveBayes,
            FittedModel::Lda(_) => Family::Lda,
            FittedModel::Qda(_) => Family::Qda,
        }
    }

    /// Number of classes.
    pub fn classes(&self) -> usize {
        match self {
            FittedModel::Logistic(m) => m.class_mix.len(),
            FittedModel::NaiveBayes(m) => m.classes.len(),
            FittedModel::Lda(m) | FittedModel::Qda(m) => m.classes.len(),
        }
    }

    /// Per-row class log-likelihoods log p(x | k) (rows × classes), for the
    /// class-conditional families, up to a term common to every class of a
    /// row (LDA leaves out −½xᵀΣ⁻¹x, which cancels from the posteriors;
    /// see [`discriminant::DiscriminantModel::log_likelihoods`]); `None` for
    /// logistic regression.
    pub fn log_likelihoods(&self, inputs: &Inputs<'_>) -> Option<Array2<f64>> {
        let rows: Vec<usize> = (0..inputs.rows()).collect();
        self.log_likelihoods_of(inputs, &rows)
    }

    /// [`FittedModel::log_likelihoods`] for the given rows only.
    pub fn log_likelihoods_of(&self, inputs: &Inputs<'_>, rows: &[usize]) -> Option<Array2<f64>> {
        let k = self.classes();
        match self {
            FittedModel::Logistic(_) => None,
            FittedModel::NaiveBayes(m) => Some(per_row(rows, k, |r, out| m.log_likelihoods(inputs, r, out))),
            FittedModel::Lda(m) | FittedModel::Qda(m) => {
                Some(per_row(rows, k, |r, out| m.log_likelihoods(inputs, r, out)))
            }
        }
    }

    /// Per-row class log-posteriors (rows × classes) under `prior` (one
    /// probability per class, summing to 1).
    pub fn log_posteriors(&self, inputs: &Inputs<'_>, prior: &[f64]) -> Array2<f64> {
        let rows: Vec<usize> = (0..inputs.rows()).collect();
        self.log_posteriors_of(inputs, &rows, prior)
    }

    /// [`FittedModel::log_posteriors`] for the given rows only.
    pub fn log_posteriors_of(&self, inputs: &Inputs<'_>, rows: &[usize], prior: &[f64]) -> Array2<f64> {
        let k = self.classes();
        let log_prior: Vec<f64> = prior.iter().map(|p| p.ln()).collect();
        match self {
            FittedModel::Logistic(m) => {
                // Odds correction from the training class mix to `prior`.
                let shift: Vec<f64> = log_prior.iter().zip(&m.class_mix).map(|(lp, pi)| lp - pi.ln()).collect();
                per_row(rows, k, |r, out| {
                    m.log_posteriors_at_training_mix(inputs, r, out);
                    for row in out.chunks_mut(k) {
                        row.iter_mut().zip(&shift).for_each(|(v, s)| *v += s);
                        normalise_log(row);
                    }
                })
            }
            _ => {
                let mut scores =
                    self.log_likelihoods_of(inputs, rows).unwrap_or_else(|| Array2::zeros((rows.len(), k)));
                if let Some(values) = scores.as_slice_mut() {
                    values.par_chunks_mut(4096 * k).for_each(|block| {
                        for row in block.chunks_mut(k) {
                            row.iter_mut().zip(&log_prior).for_each(|(v, lp)| *v += lp);
                            normalise_log(row);
                        }
                    });
                }
                scores
            }
        }
    }

    /// Posterior probabilities (rows × classes) under `prior`.
    pub fn posteriors(&self, inputs: &Inputs<'_>, prior: &[f64]) -> Array2<f64> {
        let mut p = self.log_posteriors(inputs, prior);
        p.mapv_inplace(f64::exp);
        p
    }
}

/// Subtracts log Σ exp(row) from every entry: the row becomes log
/// probabilities. The maximum is subtracted first, so nothing overflows.
pub fn normalise_log(row: &mut [f64]) {
    let max = row.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    if !max.is_finite() {
        // No class has finite evidence (inputs beyond 1e150): say nothing.
        let uniform = -(row.len() as f64).ln();
        row.iter_mut().for_each(|v| *v = uniform);
        return;
    }
    let total: f64 = row.iter().map(|v| (v - max).exp()).sum();
    let log_total = max + total.ln();
    // A class with −∞ evidence gets the most negative finite log-probability.
    row.iter_mut().for_each(|v| *v = (*v - log_total).max(f64::MIN));
}

/// Runs `f` over blocks of `rows` in parallel, each filling its rows of a
/// row-major `rows.len()` × `k` output.
fn per_row(rows: &[usize], k: usize, f: impl Fn(&[usize], &mut [f64]) + Sync) -> Array2<f64> {
    const BLOCK: usize = 2048;
    let n = rows.len();
    let mut out = vec![0.0; n * k];
    if k > 0 {
        out.par_chunks_mut(BLOCK * k).zip(rows.par_chunks(BLOCK)).for_each(|(chunk, block)| f(block, chunk));
    }
    Array2::from_shape_vec((n, k), out).unwrap_or_else(|_| Array2::zeros((n, k)))
}
