//! Naive Bayes: features independent given the class, Gaussian for numeric
//! inputs and categorical with additive smoothing for categorical ones, in
//! one model.
//!
//! - Numeric: μₖⱼ and σ²ₖⱼ by weighted maximum likelihood (divisor the class
//!   weight Wₖ), with a variance floor: σ²ₖⱼ ≥ f·Pⱼ, Pⱼ the pooled
//!   within-class variance of feature j (Σₖ scatterₖⱼ / Σₖ Wₖ; the overall
//!   variance where every class is constant), f = `--variance-floor`
//!   (default [`DEFAULT_VARIANCE_FLOOR`], 1e-6). The floor only binds when a
//!   feature is (nearly) constant within a class; it keeps the likelihood
//!   finite there.
//! - Categorical: P(level l | k) = (cₖₗ + α)/(Wₖ + α·L), cₖₗ the weighted
//!   count, L the number of levels, α = `--smoothing` (default 1, Laplace).
//!   With α = 0 a level never seen in a class gets probability 2.2e-308
//!   (the smallest normal double) rather than 0, so posteriors stay finite.
//!
//! - Missing-value indicators (the 0/1 inputs `--missing impute` adds) are
//!   Bernoulli, with the same smoothing: P(1 | k) = (cₖ + α)/(Wₖ + 2α). A
//!   Gaussian on a 0/1 input that is constant within a class would put the
//!   whole posterior on the chance that a test row is 0.
//!
//! log p(x | k) = Σⱼ log N(xⱼ; μₖⱼ, σ²ₖⱼ) + Σ_b log P(x_b | k) + Σ_c log P(x_c | k).

use serde::{Deserialize, Serialize};

use crate::data::{Dataset, Inputs};
use crate::error::{Error, Result, Setting};
use crate::model::design::Encoding;
pub use crate::model::levels::CategoricalLikelihood;
use crate::model::levels::{level_counts, level_likelihoods, SMALLEST_PROBABILITY};
use crate::model::moments::{class_moments, Moments};
use crate::model::Diagnostics;

/// Default floor on a class variance, as a share of the feature's pooled
/// within-class variance: a class's standard deviation is never below a
/// thousandth of the pooled one. The floor exists for a feature constant
/// within a class, whose evidence would otherwise be unbounded; 1e-6 leaves
/// every class whose spread is a measurable part of the pooled spread
/// untouched (our choice).
pub const DEFAULT_VARIANCE_FLOOR: f64 = 1e-6;

/// Naive Bayes hyperparameters.
///
/// | name | default | meaning | range |
/// |---|---|---|---|
/// | smoothing | 1 | additive smoothing α of categorical likelihoods | ≥ 0 |
/// | variance_floor | 1e-6 | floor on class variances, as a share of the feature's pooled within-class variance | [0, 1) |
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct NaiveBayesParams {
    /// Additive smoothing α.
    pub smoothing: f64,
    /// Floor f on σ²ₖⱼ / Pⱼ, Pⱼ the pooled within-class variance.
    pub variance_floor: f64,
}

impl Default for NaiveBayesParams {
    fn default() -> Self {
        NaiveBayesParams { smoothing: 1.0, variance_floor: DEFAULT_VARIANCE_FLOOR }
    }
}

/// A fitted naive Bayes model.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct NaiveBayesModel {
    /// Class names.
    pub classes: Vec<String>,
    /// Training weight of each class.
    pub class_weights: Vec<f64>,
    /// Numeric inputs.
    pub numeric: Vec<String>,
    /// μₖⱼ, one row per class.
    pub means: Vec<Vec<f64>>,
    /// σ²ₖⱼ (after the floor), one row per class.
    pub variances: Vec<Vec<f64>>,
    /// Categorical inputs.
    pub categorical: Vec<CategoricalLikelihood>,
    /// Numeric inputs modelled as Bernoulli (missing-value indicators).
    #[serde(default)]
    pub bernoulli: Vec<BernoulliInput>,
}

/// A 0/1 input's class-conditional probabilities.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct BernoulliInput {
    /// Its position among the numeric inputs.
    pub index: usize,
    /// log P(x = 1 | class) and log P(x = 0 | class), one pair per class.
    pub log_probabilities: Vec<[f64; 2]>,
}

/// See [`NaiveBayesModel::gaussian_terms`].
#[derive(Debug, Clone, PartialEq)]
pub struct GaussianTerms {
    /// Whether each numeric input is Gaussian (not a 0/1 indicator).
    pub gaussian: Vec<bool>,
    /// −½ Σⱼ ln(2πσ²ₖⱼ) over the Gaussian inputs, per class.
    pub constants: Vec<f64>,
    /// 1/(σₖⱼ√2) for the Gaussian inputs, 0 for the others, per class: the
    /// deviation is scaled before it is squared, so that a value far from
    /// the data (1e155 in a column whose σ is in the thousands) gives a
    /// finite term wherever the term itself is a finite double.
    pub scale: Vec<Vec<f64>>,
}

impl NaiveBayesModel {
    /// The Gaussian part of log p(x | k) = constantₖ − Σⱼ ((xⱼ − μₖⱼ)·scaleₖⱼ)²,
    /// with the 0/1 indicator inputs (modelled as Bernoulli) left out.
    pub fn gaussian_terms(&self) -> GaussianTerms {
        let mut gaussian = vec![true; self.numeric.len()];
        for b in &self.bernoulli {
            gaussian[b.index] = false;
        }
        let constants = self
            .variances
            .iter()
            .map(|v| {
                -0.5 * v
                    .iter()
                    .zip(&gaussian)
                    .filter(|(_, &g)| g)
                    .map(|(s, _)| (std::f64::consts::TAU * s).ln())
                    .sum::<f64>()
            })
            .collect();
        let scale = self
            .variances
            .iter()
            .map(|v| v.iter().zip(&gaussian).map(|(s, &g)| if g { (0.5 / s).sqrt() } else { 0.0 }).collect())
            .collect();
        GaussianTerms { gaussian, constants, scale }
    }

    /// Writes log p(x | k) for `rows` into `out` (row-major, K per row).
    pub fn log_likelihoods(&self, inputs: &Inputs<'_>, rows: &[usize], out: &mut [f64]) {
        let k = self.classes.len();
        let p = self.numeric.len();
        // Per class: −½ Σⱼ ln(2πσ²) once, then the quadratic terms per row.
        let GaussianTerms { constants, scale, .. } = self.gaussian_terms();
        for (i, &r) in rows.iter().enumerate() {
            for class in 0..k {
                let mut ll = constants[class];
                let means = &self.means[class];
                let scale = &scale[class];
                for j in 0..p {
                    let scaled = (inputs.numeric[(r, j)] - means[j]) * scale[j];
                    ll -= scaled * scaled;
                }
                for b in &self.bernoulli {
                    let one = inputs.numeric[(r, b.index)] > 0.5;
                    ll += b.log_probabilities[class][usize::from(!one)];
                }
                crate::model::levels::add_level_terms(&self.categorical, inputs.categorical, r, class, &mut ll);
                out[i * k + class] = ll;
            }
        }
    }

    /// Checks shapes and values (used when a model file is loaded).
    pub fn validate(&self) -> std::result::Result<(), String> {
        let k = self.classes.len();
        let p = self.numeric.len();
        let shapes = self.means.len() == k
            && self.variances.len() == k
            && self.class_weights.len() == k
            && self.means.iter().chain(&self.variances).all(|r| r.len() == p)
            && self.categorical.iter().all(|c| crate::model::levels::valid(c, k));
        let bernoulli = self.bernoulli.iter().all(|b| {
            b.index < p && b.log_probabilities.len() == k && b.log_probabilities.iter().flatten().all(|v| v.is_finite())
        });
        if !shapes || !bernoulli {
            return Err("parameter shapes do not match the classes and inputs".into());
        }
        if self.variances.iter().flatten().any(|v| !(*v > 0.0 && v.is_finite()))
            || self.means.iter().flatten().any(|v| !v.is_finite())
        {
            return Err("a parameter is not a finite number (or a variance is not positive)".into());
        }
        Ok(())
    }
}

/// The weighted counts naive Bayes fits on: per class, the moments of the
/// numeric inputs (diagonal), for each 0/1 indicator input the weight of its
/// ones, and for each categorical input the weight of each level.
#[derive(Debug, Clone, PartialEq)]
pub struct NaiveBayesSummaries {
    /// Numeric input names.
    pub numeric: Vec<String>,
    /// Diagonal moments of the numeric inputs, per class.
    pub moments: Vec<Moments>,
    /// Indicator inputs: (index among the numeric inputs, weight of ones per class).
    pub indicators: Vec<(usize, Vec<f64>)>,
    /// Categorical inputs: (column, levels, weight per class and level).
    pub categorical: Vec<crate::model::levels::LevelCounts>,
}

/// Fits naive Bayes with the given row weights (the dataset's own, or those
/// of a training fold).
pub fn fit(
    dataset: &Dataset,
    params: &NaiveBayesParams,
    weights: Option<&[f64]>,
) -> Result<(NaiveBayesModel, Diagnostics)> {
    let schema = &dataset.schema;
    let k = schema.target.classes.len();
    let numeric_only = Encoding { numeric: schema.numeric_inputs(), one_hot: Vec::new() };
    let p = numeric_only.numeric.len();
    let inputs = dataset.inputs();
    let moments = class_moments(&numeric_only, &inputs, &dataset.target, weights, k, true);
    let indicator_names: Vec<String> = schema
        .features()
        .filter_map(|c| match &c.imputation {
            Some(crate::data::schema::Imputation::Median { indicator, .. }) => Some(indicator.clone()),
            _ => None,
        })
        .collect();
    let indicators = (0..p)
        .filter(|&j| indicator_names.contains(&numeric_only.numeric[j]))
        .map(|j| {
            let mut ones = vec![0.0; k];
            let column = dataset.numeric.column(j);
            for (r, &y) in dataset.target.iter().enumerate() {
                if column[r] > 0.5 {
                    ones[y as usize] += weights.map_or(1.0, |w| w[r]);
                }
            }
            (j, ones)
        })
        .collect();
    let categorical = level_counts(dataset, weights, k);
    let summaries = NaiveBayesSummaries { numeric: numeric_only.numeric, moments, indicators, categorical };
    fit_summaries(&schema.target.classes, params, &summaries)
}

/// Fits naive Bayes from its weighted counts alone (the data is not read):
/// the same fit as [`fit`] on the rows they summarise.
pub fn fit_summaries(
    classes: &[String],
    params: &NaiveBayesParams,
    summaries: &NaiveBayesSummaries,
) -> Result<(NaiveBayesModel, Diagnostics)> {
    let k = classes.len();
    let moments = &summaries.moments;
    let p = summaries.numeric.len();
    for (class, m) in moments.iter().enumerate() {
        if m.rows == 0 {
            return Err(Error::TooFewRows {
                family: "naive-bayes".into(),
                class: classes[class].clone(),
                rows: 0,
                needed: 1,
                hint: "collect rows of that class".into(),
            });
        }
    }
    // Overall variances V_j (divisor n), from the class moments.
    let mut overall = moments[0].clone();
    for m in &moments[1..] {
        overall.merge(m);
    }
    let indicators: Vec<usize> = summaries.indicators.iter().map(|(j, _)| *j).collect();
    let mut bernoulli = Vec::new();
    let mut log_likelihood = 0.0;
    for (j, ones) in &summaries.indicators {
        let log_probabilities: Vec<[f64; 2]> = (0..k)
            .map(|class| {
                let p1 = ((ones[class] + params.smoothing) / (moments[class].weight + 2.0 * params.smoothing))
                    .clamp(SMALLEST_PROBABILITY, 1.0 - f64::EPSILON);
                [p1.ln(), (1.0 - p1).ln()]
            })
            .collect();
        for class in 0..k {
            let [one, zero] = log_probabilities[class];
            log_likelihood += ones[class] * one + (moments[class].weight - ones[class]) * zero;
        }
        bernoulli.push(BernoulliInput { index: *j, log_probabilities });
    }
    let mut warnings = Vec::new();
    let mut variances = Vec::with_capacity(k);
    for (class, m) in moments.iter().enumerate() {
        let mut row = Vec::with_capacity(p);
        for j in 0..p {
            if indicators.contains(&j) {
                row.push(1.0);
                continue;
            }
            let total_variance = overall.scatter[j] / overall.weight;
            if !(total_variance > 0.0) {
                return Err(Error::SingularCovariance {
                    family: "naive-bayes".into(),
                    whose: "of every class".into(),
                    columns: vec![summaries.numeric[j].clone()],
                    hint: crate::error::message!["the column is constant; remove it with ", Setting::Exclude],
                });
            }
            let variance = m.scatter[j] / m.weight;
            // The floor is a share of the pooled within-class variance (the
            // overall variance where every class is constant): a feature's
            // spread about its class means, which the class means cannot
            // inflate.
            let pooled =
                moments.iter().map(|c| c.scatter[j]).sum::<f64>() / moments.iter().map(|c| c.weight).sum::<f64>();
            let floor = params.variance_floor * if pooled > 0.0 { pooled } else { total_variance };
            if variance < floor {
                warnings.push(format!(
                    "column '{}' is (nearly) constant in class '{}'; its variance was floored at {floor:.3e}",
                    summaries.numeric[j], classes[class]
                ));
            }
            row.push(variance.max(floor).max(f64::MIN_POSITIVE));
        }
        variances.push(row);
    }
    // Categorical likelihoods from weighted counts.
    let class_weights: Vec<f64> = moments.iter().map(|m| m.weight).collect();
    let (categorical, categorical_log_likelihood) =
        level_likelihoods(&summaries.categorical, &class_weights, params.smoothing);
    log_likelihood += categorical_log_likelihood;
    // Σᵢ wᵢ log p(xᵢ | yᵢ) in closed form.
    for (class, m) in moments.iter().enumerate() {
        for j in (0..p).filter(|j| !indicators.contains(j)) {
            let v = variances[class][j];
            log_likelihood -= 0.5 * (m.weight * (std::f64::consts::TAU * v).ln() + m.scatter[j] / v);
        }
    }
    let model = NaiveBayesModel {
        classes: classes.to_vec(),
        class_weights: moments.iter().map(|m| m.weight).collect(),
        numeric: summaries.numeric.clone(),
        means: moments.iter().map(|m| m.mean.clone()).collect(),
        variances,
        categorical,
        bernoulli,
    };
    Ok((model, Diagnostics { iterations: 1, converged: true, log_likelihood, warnings, ..Diagnostics::default() }))
}
