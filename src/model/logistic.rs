//! Logistic regression, binary and multinomial, by Newton's method (IRLS)
//! with step-halving.
//!
//! The objective, with N the total weight (the row count without weights,
//! so that a weight of 2 is exactly a duplicated row), wᵢ the row weight
//! times its class weight, and β_s the slopes of the internally
//! standardised design columns (standard deviation with divisor N):
//!
//!   F(θ) = −(1/N)·Σᵢ wᵢ·log p(yᵢ | xᵢ; θ) + (λ/2)·‖β_s‖²,   intercepts unpenalised.
//!
//! Classes are compared with a reference class: the first class, in byte
//! order, other than the positive class (for two classes, the negative
//! one). log p(k | x)/p(ref | x) = β₀ₖ + βₖᵀx.
//!
//! Each Newton iteration is one parallel pass over row tiles accumulating
//! the gradient and the Hessian Σ wᵢ pₖ(δₖⱼ − pⱼ) zzᵀ; the step solves a
//! Cholesky system and is halved while the objective does not fall. The
//! fit stops when the largest step on the standardised scale is below the
//! tolerance. Standard errors come from the inverse of the Fisher
//! information at the solution, carried to the original scale by the
//! linear map that undoes the standardisation; they are not reported for
//! penalised fits.

use nalgebra::{DMatrix, DVector};
use rayon::prelude::*;
use serde::{Deserialize, Serialize};

use crate::data::{Dataset, Inputs};
use crate::error::{Error, Result, Setting};
use crate::model::design::{tiles, Encoding, TILE_ROWS};
use crate::model::linalg::{aliased_columns, cholesky, dot, Aliased};
use crate::model::penalised::{LambdaChoice, LambdaRule, PathSettings, Penalty, PenaltyFit};
use crate::model::{normalise_log, Diagnostics};

/// How classes are weighted in the fit.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, Default)]
#[serde(rename_all = "kebab-case")]
pub enum ClassWeight {
    /// Every row by its own weight.
    #[default]
    None,
    /// Each class's total weight made equal (Wₖ·cₖ = N/K).
    Equal,
    /// A stated multiplier per class.
    Explicit(Vec<(String, f64)>),
}

impl std::str::FromStr for ClassWeight {
    type Err = String;

    /// `equal-totals` or `CLASS=W,...` (`--reweight`).
    fn from_str(text: &str) -> std::result::Result<Self, String> {
        if text == "equal-totals" {
            return Ok(ClassWeight::Equal);
        }
        text.split(',')
            .map(|part| {
                let (class, w) =
                    part.rsplit_once('=').ok_or_else(|| format!("takes equal-totals or CLASS=W,..., not '{part}'"))?;
                let w: f64 = w.trim().parse().map_err(|_| format!("has '{w}', which is not a number"))?;
                Ok((class.trim().to_string(), w))
            })
            .collect::<std::result::Result<Vec<_>, String>>()
            .map(ClassWeight::Explicit)
    }
}

/// Logistic regression hyperparameters.
///
/// | name | default | meaning | range |
/// |---|---|---|---|
/// | l2 | 0 | ridge penalty λ on standardised slopes | ≥ 0 |
/// | class_weight | none | class weights | none, equal, CLASS=W,... |
/// | max_iterations | 50 | Newton iterations at most | ≥ 1 |
/// | tolerance | 1e-8 | largest standardised step at convergence | > 0 |
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct LogisticParams {
    /// Ridge penalty λ.
    pub l2: f64,
    /// Class weights.
    pub class_weight: ClassWeight,
    /// Newton iterations at most.
    pub max_iterations: usize,
    /// Convergence tolerance on the standardised step.
    pub tolerance: f64,
    /// A penalty fitted by coordinate descent along a λ path
    /// ([`crate::model::penalised`]); `none` keeps the Newton fit.
    #[serde(default)]
    pub penalty: Penalty,
    /// Elastic-net mixing α (0 ridge, 1 lasso) [default 0.5].
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub mixing: Option<f64>,
    /// λ, or `auto` (cross-validated).
    #[serde(default)]
    pub lambda: LambdaChoice,
    /// Points on the λ path; `None`: ten to a decade of λ down to the floor
    /// ([`crate::model::penalised::default_path_length`]).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub path_length: Option<usize>,
    /// The path's last λ as a share of λ_max; `None` takes the default for
    /// the data's shape ([`crate::model::penalised::default_floor`]).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub lambda_floor: Option<f64>,
    /// Walk the whole path: no early stop (`--full-path`).
    #[serde(default, skip_serializing_if = "std::ops::Not::not")]
    pub full_path: bool,
    /// Which cross-validated λ: sparsest-within-se or min.
    #[serde(default)]
    pub lambda_rule: LambdaRule,
    /// Folds for `--lambda auto`.
    #[serde(default = "default_cv_folds")]
    pub cv_folds: usize,
    /// Seed of those folds.
    #[serde(default = "default_cv_seed")]
    pub cv_seed: u64,
    /// Refuse inputs that are exact linear combinations of earlier ones
    /// instead of dropping them from the fit (`--refuse-aliased`).
    #[serde(default, skip_serializing_if = "std::ops::Not::not")]
    pub refuse_aliased: bool,
}

fn default_cv_folds() -> usize {
    5
}
fn default_cv_seed() -> u64 {
    1
}

impl Default for LogisticParams {
    fn default() -> Self {
        LogisticParams {
            l2: 0.0,
            class_weight: ClassWeight::None,
            max_iterations: 50,
            tolerance: 1e-8,
            penalty: Penalty::None,
            mixing: None,
            lambda: LambdaChoice::Auto,
            path_length: None,
            lambda_floor: None,
            full_path: false,
            lambda_rule: LambdaRule::SparsestWithinSe,
            cv_folds: default_cv_folds(),
            cv_seed: default_cv_seed(),
            refuse_aliased: false,
        }
    }
}

/// One class's coefficients against the reference class, original scale.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ClassCoefficients {
    /// Index of the class.
    pub class: usize,
    /// β₀ₖ.
    pub intercept: f64,
    /// βₖ, one per design column.
    pub slopes: Vec<f64>,
}

/// A fitted logistic regression.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct LogisticModel {
    /// How inputs become design columns.
    pub encoding: Encoding,
    /// Class names.
    pub classes: Vec<String>,
    /// Index of the reference class.
    pub reference: usize,
    /// The weighted class shares of the training rows: the class mix the
    /// posteriors are calibrated to.
    pub class_mix: Vec<f64>,
    /// Coefficients of every class but the reference.
    pub coefficients: Vec<ClassCoefficients>,
    /// Covariance of (intercept, slopes) of every non-reference class in
    /// order, original scale, row-major; absent for penalised fits.
    pub covariance: Option<Vec<f64>>,
    /// The ridge penalty used.
    pub l2: f64,
    /// A coordinate-descent penalty's record: λ, how it was chosen, the path.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub penalty: Option<PenaltyFit>,
    /// Under separation, the design terms whose coefficients grow without
    /// bound (the maximum-likelihood estimate does not exist): their
    /// estimates are where the fit stopped, and their odds ratios diverge.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub diverging: Vec<String>,
    /// Design terms dropped from the fit as exact linear combinations of
    /// earlier ones: their slopes are 0 and carry no standard error.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub aliased: Vec<String>,
}

impl LogisticModel {
    /// Writes log p(k | x) at the training class mix for `rows` into `out`.
    pub fn log_posteriors_at_training_mix(&self, inputs: &Inputs<'_>, rows: &[usize], out: &mut [f64]) {
        let k = self.classes.len();
        let d = self.encoding.width();
        let mut x = vec![0.0; d];
        for (i, &r) in rows.iter().enumerate() {
            self.encoding.fill_row(inputs, r, &mut x);
            let row = &mut out[i * k..(i + 1) * k];
            row[self.reference] = 0.0;
            for c in &self.coefficients {
                row[c.class] = c.intercept + c.slopes.iter().zip(&x).map(|(b, v)| b * v).sum::<f64>();
            }
            normalise_log(row);
        }
    }

    /// Standard errors of (intercept, slopes) per non-reference class.
    pub fn standard_errors(&self) -> Option<Vec<Vec<f64>>> {
        let covariance = self.covariance.as_ref()?;
        let width = self.encoding.width() + 1;
        let size = width * self.coefficients.len();
        Some(
            (0..self.coefficients.len())
                .map(|q| {
                    (0..width).map(|a| covariance[(q * width + a) * size + q * width + a].max(0.0).sqrt()).collect()
                })
                .collect(),
        )
    }

    /// Checks shapes and values (used when a model file is loaded).
    pub fn validate(&self) -> std::result::Result<(), String> {
        let k = self.classes.len();
        let d = self.encoding.width();
        if self.class_mix.len() != k || self.reference >= k || self.coefficients.len() + 1 != k {
            return Err("coefficients do not match the classes".into());
        }
        if self.coefficients.iter().any(|c| c.slopes.len() != d || c.class >= k || c.class == self.reference) {
            return Err("coefficients do not match the inputs".into());
        }
        if self.class_mix.iter().any(|p| !(*p > 0.0 && *p < 1.0)) {
            return Err("the training class mix must lie strictly between 0 and 1".into());
        }
        let values = self.coefficients.iter().flat_map(|c| std::iter::once(&c.intercept).chain(&c.slopes));
        if values.clone().any(|v| !v.is_finite()) {
            return Err("a coefficient is not a finite number".into());
        }
        if let Some(c) = &self.covariance {
            let size = (d + 1) * self.coefficients.len();
            if c.len() != size * size || c.iter().any(|v| !v.is_finite()) {
                return Err("the coefficient covariance has the wrong size or a non-finite value".into());
            }
        }
        Ok(())
    }
}

/// The reference class: the first class, in byte order, other than `positive`.
pub fn reference_class(classes: usize, positive: usize) -> usize {
    (0..classes).find(|&c| c != positive).unwrap_or(0)
}

/// Combined row weights: row weight × class weight.
fn combined_weights(dataset: &Dataset, weights: Option<&[f64]>, class_weight: &ClassWeight) -> Result<Vec<f64>> {
    let target = &dataset.schema.target;
    let k = target.classes.len();
    let mut weighted_counts = vec![0.0; k];
    for (r, &y) in dataset.target.iter().enumerate() {
        weighted_counts[y as usize] += weights.map_or(1.0, |w| w[r]);
    }
    let multipliers = class_multipliers(&target.classes, &weighted_counts, class_weight)?;
    Ok(dataset
        .target
        .iter()
        .enumerate()
        .map(|(r, &y)| weights.map_or(1.0, |w| w[r]) * multipliers[y as usize])
        .collect())
}

/// Each class's weight multiplier under `class_weight`, from the classes'
/// total row weights.
pub(crate) fn class_multipliers(
    classes: &[String],
    weighted_counts: &[f64],
    class_weight: &ClassWeight,
) -> Result<Vec<f64>> {
    let k = classes.len();
    Ok(match class_weight {
        ClassWeight::None => vec![1.0; k],
        ClassWeight::Equal => {
            let total: f64 = weighted_counts.iter().sum();
            weighted_counts.iter().map(|w| if *w > 0.0 { total / (k as f64 * w) } else { 0.0 }).collect()
        }
        ClassWeight::Explicit(entries) => {
            let mut m = vec![1.0; k];
            for (class, w) in entries {
                let Some(i) = classes.iter().position(|c| c == class) else {
                    return Err(Error::invalid(crate::error::message![
                        Setting::ClassWeight,
                        format!(" names class '{class}', which is not one of {}", classes.join(", "))
                    ]));
                };
                if !(*w > 0.0 && w.is_finite()) {
                    return Err(Error::invalid(crate::error::message![
                        Setting::ClassWeight,
                        format!(" for '{class}' must be a positive number")
                    ]));
                }
                m[i] = *w;
            }
            m
        }
    })
}

/// What one pass over the rows gives at a parameter vector.
#[derive(Clone)]
struct Pass {
    log_likelihood: f64,
    gradient: Vec<f64>,
    hessian: Vec<f64>,
    extreme_rows: usize,
}

/// How much a pass computes.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord)]
enum Derivatives {
    /// The gradient of the log-likelihood.
    Gradient,
    /// The gradient and the Hessian.
    Hessian,
}

impl Pass {
    fn zero(size: usize, level: Derivatives) -> Self {
        Pass {
            log_likelihood: 0.0,
            gradient: vec![0.0; size],
            hessian: vec![0.0; if level == Derivatives::Hessian { size * size } else { 0 }],
            extreme_rows: 0,
        }
    }

    fn add(&mut self, other: &Pass) {
        self.log_likelihood += other.log_likelihood;
        self.extreme_rows += other.extreme_rows;
        self.gradient.iter_mut().zip(&other.gradient).for_each(|(a, b)| *a += b);
        self.hessian.iter_mut().zip(&other.hessian).for_each(|(a, b)| *a += b);
    }
}

/// Everything a pass needs besides the parameters.
struct Problem<'a> {
    encoding: &'a Encoding,
    inputs: Inputs<'a>,
    target: &'a [u32],
    weights: &'a [f64],
    /// Position of each class among the non-reference classes (None for the reference).
    slot: Vec<Option<usize>>,
    /// Standardisation of each design column.
    centre: Vec<f64>,
    scale: Vec<f64>,
    /// Design columns left out of the fit (aliased): read as 0, so their
    /// slopes stay at 0 and their rows of the information are empty.
    inert: Vec<bool>,
}

impl Problem<'_> {
    /// Number of non-reference classes.
    fn q(&self) -> usize {
        self.slot.iter().filter(|s| s.is_some()).count()
    }

    /// Parameters per class: intercept and one slope per design column.
    fn width(&self) -> usize {
        self.encoding.width() + 1
    }

    /// Log-likelihood (and gradient and Hessian of it when asked) at θ,
    /// on the standardised scale.
    fn pass(&self, theta: &[f64], level: Derivatives) -> Pass {
        let n = self.inputs.rows();
        let q = self.q();
        let width = self.width();
        let size = q * width;
        let d = width - 1;
        const TILES_PER_CHUNK: usize = 16;
        let chunk_rows = TILES_PER_CHUNK * TILE_ROWS;
        let chunks: Vec<std::ops::Range<usize>> =
            (0..n.div_ceil(chunk_rows)).map(|c| c * chunk_rows..((c + 1) * chunk_rows).min(n)).collect();
        let partial: Vec<Pass> = chunks
            .par_iter()
            .map(|chunk| {
                let mut acc = Pass::zero(size, level);
                // Column-major tile: column 0 is the constant 1.
                let mut z = vec![0.0; TILE_ROWS * width];
                let mut eta = vec![0.0; TILE_ROWS * q];
                let mut p = vec![0.0; TILE_ROWS * q];
                let mut u = vec![0.0; TILE_ROWS];
                let mut uz = vec![0.0; TILE_ROWS * width];
                for range in tiles(chunk.len()) {
                    let rows = chunk.start + range.start..chunk.start + range.end;
                    let len = rows.len();
                    z[..len].iter_mut().for_each(|v| *v = 1.0);
                    self.encoding.fill_tile(&self.inputs, rows.clone(), &mut z[len..len * width]);
                    for j in 0..d {
                        let (c, s) = (self.centre[j], self.scale[j]);
                        let column = &mut z[(j + 1) * len..(j + 2) * len];
                        if self.inert[j] {
                            column.iter_mut().for_each(|v| *v = 0.0);
                        } else {
                            column.iter_mut().for_each(|v| *v = (*v - c) / s);
                        }
                    }
                    // Linear predictors, column by column.
                    for c in 0..q {
                        let e = &mut eta[c * len..(c + 1) * len];
                        e.iter_mut().for_each(|v| *v = 0.0);
                        for a in 0..width {
                            let b = theta[c * width + a];
                            if b != 0.0 {
                                e.iter_mut().zip(&z[a * len..(a + 1) * len]).for_each(|(v, x)| *v += b * x);
                            }
                        }
                    }
                    let weights = &self.weights[rows.clone()];
                    let target = &self.target[rows];
                    for i in 0..len {
                        let max = (0..q).map(|c| eta[c * len + i]).fold(0.0f64, f64::max);
                        let mut total = (-max).exp();
                        for c in 0..q {
                            total += (eta[c * len + i] - max).exp();
                        }
                        let log_total = max + total.ln();
                        let observed = self.slot[target[i] as usize].map_or(0.0, |c| eta[c * len + i]);
                        acc.log_likelihood += weights[i] * (observed - log_total);
                        let mut largest = (-log_total).exp();
                        for c in 0..q {
                            p[c * len + i] = (eta[c * len + i] - log_total).exp();
                            largest = largest.max(p[c * len + i]);
                        }
                        if largest > 1.0 - 1e-10 {
                            acc.extreme_rows += 1;
                        }
                    }
                    for c in 0..q {
                        // Gradient: Σ w (1[y = c] − p_c) z.
                        for i in 0..len {
                            let hit = self.slot[target[i] as usize] == Some(c);
                            u[i] = weights[i] * (f64::from(u8::from(hit)) - p[c * len + i]);
                        }
                        for a in 0..width {
                            acc.gradient[c * width + a] += dot(&u[..len], &z[a * len..(a + 1) * len]);
                        }
                        if level < Derivatives::Hessian {
                            continue;
                        }
                        // Hessian blocks (c, e), e ≥ c: Σ w p_c(δ − p_e) z zᵀ.
                        for e in c..q {
                            for i in 0..len {
                                let delta = if c == e { 1.0 } else { 0.0 };
                                u[i] = weights[i] * p[c * len + i] * (delta - p[e * len + i]);
                            }
                            for a in 0..width {
                                let za = &z[a * len..(a + 1) * len];
                                uz[a * len..(a + 1) * len]
                                    .iter_mut()
                                    .zip(za)
                                    .zip(&u[..len])
                                    .for_each(|((o, x), w)| *o = x * w);
                            }
                            for a in 0..width {
                                let start = if c == e { a } else { 0 };
                                for b in start..width {
                                    let v = dot(&uz[a * len..(a + 1) * len], &z[b * len..(b + 1) * len]);
                                    let (row, col) = (c * width + a, e * width + b);
                                    acc.hessian[row * size + col] += v;
                                    if row != col {
                                        acc.hessian[col * size + row] += v;
                                    }
                                }
                            }
                        }
                    }
                }
                acc
            })
            .collect();
        let mut total = Pass::zero(size, level);
        for part in &partial {
            total.add(part);
        }
        total
    }
}

/// The refusal under `--refuse-aliased`: the aliased terms and what they
/// are combinations of.
pub fn aliased_error(family: &str, terms: &[String], aliased: &[Aliased]) -> Error {
    Error::SingularCovariance {
        family: family.into(),
        whose: "of the inputs".into(),
        columns: aliased.iter().flat_map(|a| a.involved.iter().chain([&a.column])).map(|&c| terms[c].clone()).collect(),
        hint: crate::error::message![
            format!("{}: remove them (", describe_aliased(terms, aliased)),
            Setting::Exclude,
            "), or leave out ",
            Setting::RefuseAliased,
            " to have them dropped from the fit"
        ],
    }
}

/// The warning when aliased terms are dropped.
pub fn aliased_warning(terms: &[String], aliased: &[Aliased]) -> String {
    format!(
        "{}, so {} dropped from the fit (coefficient 0, no standard error; the model records {}); --refuse-aliased refuses instead",
        describe_aliased(terms, aliased),
        if aliased.len() == 1 { "it is" } else { "they are" },
        if aliased.len() == 1 { "it" } else { "them" },
    )
}

/// `'total' is aliased: a linear combination of 'a', 'b'; …`.
fn describe_aliased(terms: &[String], aliased: &[Aliased]) -> String {
    let quoted = |c: &usize| format!("'{}'", terms[*c]);
    aliased
        .iter()
        .map(|a| {
            let of: Vec<String> = a.involved.iter().map(quoted).collect();
            let what = if of.is_empty() {
                "constant".to_string()
            } else {
                format!("a linear combination of {}", of.join(", "))
            };
            format!("{} is aliased: {what} in the training rows", quoted(&a.column))
        })
        .collect::<Vec<_>>()
        .join("; ")
}

/// Weighted mean and standard deviation (divisor: the total weight) of
/// values already brought near unit magnitude.
fn scaled_mean_sd(values: impl Iterator<Item = f64> + Clone, weights: &[f64], total: f64) -> (f64, f64) {
    let mean = values.clone().zip(weights).map(|(v, w)| w * v).sum::<f64>() / total;
    let square = values.zip(weights).map(|(v, w)| w * (v - mean) * (v - mean)).sum::<f64>() / total;
    (mean, square.sqrt())
}

/// Original-scale coefficients on the standardised scale of `centre` and
/// `scale`: θ₀ = β₀ + Σ βⱼ·mⱼ, θⱼ = βⱼ·sⱼ, block after block.
pub(crate) fn standardised(coefficients: &[ClassCoefficients], centre: &[f64], scale: &[f64]) -> Vec<f64> {
    let d = centre.len();
    let mut theta = Vec::with_capacity(coefficients.len() * (d + 1));
    for c in coefficients {
        theta.push(c.intercept + (0..d).map(|j| c.slopes[j] * centre[j]).sum::<f64>());
        theta.extend((0..d).map(|j| c.slopes[j] * scale[j]));
    }
    theta
}

/// Back to the original scale (β = β_s/s, β₀ = β₀_s − Σ β_s·m/s) for the
/// classes of `order`, with the linear map that does it (for carrying the
/// covariance along).
pub(crate) fn original_scale(
    theta: &[f64],
    order: &[usize],
    centre: &[f64],
    scale: &[f64],
) -> (Vec<ClassCoefficients>, DMatrix<f64>) {
    let d = centre.len();
    let width = d + 1;
    let size = order.len() * width;
    let mut coefficients = Vec::with_capacity(order.len());
    let mut transform = DMatrix::zeros(size, size);
    for (position, &c) in order.iter().enumerate() {
        let block = &theta[position * width..(position + 1) * width];
        let slopes: Vec<f64> = (0..d).map(|j| block[j + 1] / scale[j]).collect();
        let intercept = block[0] - (0..d).map(|j| slopes[j] * centre[j]).sum::<f64>();
        coefficients.push(ClassCoefficients { class: c, intercept, slopes });
        let o = position * width;
        transform[(o, o)] = 1.0;
        for j in 0..d {
            transform[(o, o + j + 1)] = -centre[j] / scale[j];
            transform[(o + j + 1, o + j + 1)] = 1.0 / scale[j];
        }
    }
    (coefficients, transform)
}

/// The objective F = −ℓ/N + (λ/2)·‖β_s‖² (intercepts unpenalised).
pub(crate) fn objective(log_likelihood: f64, theta: &[f64], width: usize, total_weight: f64, lambda: f64) -> f64 {
    let penalty: f64 = (0..theta.len()).filter(|i| i % width != 0).map(|i| theta[i] * theta[i]).sum();
    -log_likelihood / total_weight + 0.5 * lambda * penalty
}

/// The right-hand side of the Newton system on F: g/N − λβ′.
pub(crate) fn newton_rhs(
    gradient: &[f64],
    theta: &[f64],
    width: usize,
    total_weight: f64,
    lambda: f64,
) -> DVector<f64> {
    let mut rhs = DVector::from_iterator(gradient.len(), gradient.iter().map(|g| g / total_weight));
    for i in (0..gradient.len()).filter(|i| i % width != 0) {
        rhs[i] -= lambda * theta[i];
    }
    rhs
}

/// The Newton system's matrix on F, H/N + λI′, with an inert (aliased)
/// slope's row and column left as the identity's so that its step is 0.
pub(crate) fn newton_system(
    hessian: &[f64],
    width: usize,
    total_weight: f64,
    lambda: f64,
    inert: &[bool],
) -> DMatrix<f64> {
    let size = (hessian.len() as f64).sqrt().round() as usize;
    let mut system = DMatrix::from_row_slice(size, size, hessian) / total_weight;
    for i in (0..size).filter(|i| i % width != 0) {
        system[(i, i)] += lambda;
    }
    for i in (0..size).filter(|&i| is_inert(inert, width, i)) {
        system.row_mut(i).fill(0.0);
        system.column_mut(i).fill(0.0);
        system[(i, i)] = 1.0;
    }
    system
}

/// Whether parameter `i` is the slope of an inert (aliased) design column.
fn is_inert(inert: &[bool], width: usize, i: usize) -> bool {
    !i.is_multiple_of(width) && inert[i % width - 1]
}

/// The covariance of the original-scale coefficients from the information
/// (the Hessian of −ℓ on the standardised scale), row-major; `None`, with
/// a warning, where a variance lies beyond a double.
pub(crate) fn covariance_from_information(
    hessian: &[f64],
    width: usize,
    inert: &[bool],
    transform: &DMatrix<f64>,
    terms: &[String],
    warnings: &mut Vec<String>,
) -> Option<Vec<f64>> {
    let size = transform.nrows();
    let mut information = DMatrix::from_row_slice(size, size, hessian);
    for i in (0..size).filter(|&i| is_inert(inert, width, i)) {
        information.row_mut(i).fill(0.0);
        information.column_mut(i).fill(0.0);
        information[(i, i)] = 1.0;
    }
    let factor = cholesky(&information).ok()?;
    let mut standardised = factor.inverse();
    // An aliased slope is fixed at 0: no variance, no covariance.
    for i in (0..size).filter(|&i| is_inert(inert, width, i)) {
        standardised.row_mut(i).fill(0.0);
        standardised.column_mut(i).fill(0.0);
    }
    let original = transform * standardised * transform.transpose();
    // At an input's extreme scale its slope's variance (the square of a
    // standard error of 1e200, say) may lie beyond a double.
    let mut beyond: Vec<&str> = (0..size)
        .filter(|&i| i % width > 0 && !original.row(i).iter().all(|v| v.is_finite()))
        .map(|i| terms[i % width - 1].as_str())
        .collect();
    if beyond.is_empty() {
        return Some(original.transpose().as_slice().to_vec());
    }
    beyond.dedup();
    warnings.push(format!(
        "no standard errors are stored: at the scale of {} the coefficients' variances lie beyond what a double holds; rescale the column for them",
        beyond.iter().map(|t| format!("'{t}'")).collect::<Vec<_>>().join(", ")
    ));
    None
}

/// Fits a logistic regression with the given row weights (the dataset's
/// own, or those of a training fold), starting from `start` (a previous
/// fit on similar rows: a warm start) or from the intercept-only solution.
pub fn fit(
    dataset: &Dataset,
    params: &LogisticParams,
    row_weights: Option<&[f64]>,
    start: Option<&LogisticModel>,
    progress: &crate::progress::Progress,
) -> Result<(LogisticModel, Diagnostics)> {
    let weights = row_weights;
    let schema = &dataset.schema;
    let classes = schema.target.classes.clone();
    let k = classes.len();
    let reference = reference_class(k, schema.target.positive_index());
    let encoding = Encoding::from_schema(schema);
    let terms = encoding.terms();
    let d = encoding.width();
    let weights = combined_weights(dataset, weights, &params.class_weight)?;
    let inputs = dataset.inputs();

    // Class mix and standardisation under the combined weights.
    let mut class_weight_totals = vec![0.0; k];
    for (r, &y) in dataset.target.iter().enumerate() {
        class_weight_totals[y as usize] += weights[r];
    }
    let total_weight: f64 = class_weight_totals.iter().sum();
    if class_weight_totals.iter().any(|w| !(*w > 0.0)) {
        return Err(Error::FitFailed {
            family: "logistic".into(),
            message: "every class needs rows with positive weight".into(),
        });
    }
    let class_mix: Vec<f64> = class_weight_totals.iter().map(|w| w / total_weight).collect();
    let all_one_class = vec![0u32; dataset.rows()];
    let overall = crate::model::moments::class_moments(&encoding, &inputs, &all_one_class, Some(&weights), 1, true);
    let mut centre = overall[0].mean.clone();
    let mut scale: Vec<f64> = overall[0].scatter.iter().map(|s| (s / total_weight).sqrt()).collect();
    // A numeric input at an extreme magnitude is standardised from moments
    // of its values divided by a power of two near that magnitude: squares
    // in its own units would overflow (1e300) or underflow to 0 (1e-300).
    // The magnitude comes from the training summary, not another pass.
    for (j, name) in encoding.numeric.iter().enumerate() {
        let summary = schema.columns.iter().find(|c| &c.name == name).and_then(|c| c.numeric.as_ref());
        let largest = summary.map_or(1.0, |s| s.min.abs().max(s.max.abs()));
        let unit = crate::data::summary::magnitude_unit(largest);
        if unit != 1.0 {
            let column = inputs.numeric.column(j);
            let (mean, sd) = scaled_mean_sd(column.iter().map(|v| v / unit), &weights, total_weight);
            centre[j] = mean * unit;
            scale[j] = sd * unit;
        }
    }
    if let Some(j) = (0..d).find(|&j| !(scale[j] > 0.0)) {
        return Err(Error::SingularCovariance {
            family: "logistic".into(),
            whose: "of the inputs".into(),
            columns: vec![terms[j].clone()],
            hint: crate::error::message!["the column is constant; remove it with ", Setting::Exclude],
        });
    }
    if params.penalty != Penalty::None {
        let settings = PathSettings {
            mixing: params.penalty.mixing(params.mixing),
            lambda: params.lambda,
            path_length: params.path_length,
            floor: params.lambda_floor,
            stop_early: !params.full_path,
            folds: params.cv_folds,
            rule: params.lambda_rule,
            seed: params.cv_seed,
            // In gradient units: the largest coordinate step times its curvature.
            tolerance: params.tolerance / 100.0,
        };
        let fitted =
            crate::model::penalised::fit(dataset, &encoding, reference, &weights, params.penalty, &settings, progress)?;
        let order: Vec<usize> = (0..k).filter(|&c| c != reference).collect();
        let coefficients = order
            .iter()
            .enumerate()
            .map(|(position, &class)| ClassCoefficients {
                class,
                intercept: fitted.intercepts[position],
                slopes: fitted.slopes[position * d..(position + 1) * d].to_vec(),
            })
            .collect();
        let mut warnings = Vec::new();
        if !fitted.converged {
            warnings.push("coordinate descent did not converge at every λ of the path (1,000 outer iterations)".into());
        }
        let iterations = fitted.record.path.len();
        let model = LogisticModel {
            encoding,
            classes,
            reference,
            class_mix,
            coefficients,
            covariance: None,
            l2: 0.0,
            penalty: Some(fitted.record),
            diverging: Vec::new(),
            aliased: Vec::new(),
        };
        let diagnostics = Diagnostics {
            iterations,
            converged: fitted.converged,
            log_likelihood: fitted.log_likelihood,
            warnings,
            ..Diagnostics::default()
        };
        return Ok((model, diagnostics));
    }
    let mut slot = vec![None; k];
    let mut order = Vec::new();
    for c in 0..k {
        if c != reference {
            slot[c] = Some(order.len());
            order.push(c);
        }
    }
    let mut problem = Problem {
        encoding: &encoding,
        inputs,
        target: &dataset.target,
        weights: &weights,
        slot,
        centre,
        scale,
        inert: vec![false; d],
    };
    let q = order.len();
    let width = d + 1;
    let size = q * width;
    // Start at the intercept-only solution: log of the class-mix ratios.
    let mut theta = vec![0.0; size];
    for (position, &c) in order.iter().enumerate() {
        theta[position * width] = (class_mix[c] / class_mix[reference]).ln();
    }
    let warm = start.filter(|m| m.encoding == encoding && m.reference == reference);
    // A warm start: the previous fit's coefficients on this fit's standardised scale.
    if let Some(previous) = warm {
        theta = standardised(&previous.coefficients, &problem.centre, &problem.scale);
    }
    let lambda = params.l2;
    let mut warnings = Vec::new();
    let objective = |log_likelihood: f64, theta: &[f64]| objective(log_likelihood, theta, width, total_weight, lambda);
    let parameter_name = |i: usize| {
        let class = &classes[order[i / width]];
        let term = if i.is_multiple_of(width) {
            crate::model::design::INTERCEPT.to_string()
        } else {
            terms[i % width - 1].clone()
        };
        if q > 1 {
            format!("{term} [{class}]")
        } else {
            term
        }
    };

    let mut iterations = 0;
    let mut converged = false;
    let mut last_step = f64::INFINITY;
    let mut current = problem.pass(&theta, Derivatives::Hessian);
    // Aliased inputs (unpenalised fits, where they leave the information
    // singular). From the intercept-only start the information is the
    // weighted cross-product of the standardised design, so its aliasing
    // is the design's; a warm start (a fit on a superset of these rows)
    // carries its own, which holds on any subset of its rows.
    let aliased: Vec<Aliased> = match warm {
        _ if lambda > 0.0 => Vec::new(),
        Some(previous) => previous
            .aliased
            .iter()
            .filter_map(|t| terms.iter().position(|x| x == t))
            .map(|column| Aliased { column, involved: Vec::new() })
            .collect(),
        None => {
            let block = DMatrix::from_fn(width, width, |a, b| current.hessian[a * size + b]);
            // The intercept is column 0 of the information, never aliased.
            aliased_columns(&block)
                .into_iter()
                .filter(|a| a.column > 0)
                .map(|a| Aliased {
                    column: a.column - 1,
                    involved: a.involved.iter().filter(|&&c| c > 0).map(|c| c - 1).collect(),
                })
                .collect()
        }
    };
    if !aliased.is_empty() {
        if params.refuse_aliased {
            return Err(aliased_error("logistic", &terms, &aliased));
        }
        if warm.is_none() {
            warnings.push(aliased_warning(&terms, &aliased));
        }
        for a in &aliased {
            problem.inert[a.column] = true;
            for position in 0..q {
                theta[position * width + a.column + 1] = 0.0;
            }
        }
        current = problem.pass(&theta, Derivatives::Hessian);
    }
    // From a warm start (a fit on similar rows, as in cross-validation) the
    // information matrix at the start is kept for every step: a
    // fixed-Hessian Newton iteration, which converges to the same optimum
    // with passes that need only the gradient. Without progress it falls
    // back to full Newton steps.
    let mut fixed: Option<crate::model::linalg::Factor> = None;
    let mut fixed_mode = start.is_some();
    loop {
        if last_step <= params.tolerance {
            converged = true;
            break;
        }
        if iterations >= params.max_iterations {
            if fixed_mode {
                // Fall back: full Newton from here, with a fresh budget.
                fixed_mode = false;
                fixed = None;
                iterations = 0;
                current = problem.pass(&theta, Derivatives::Hessian);
                continue;
            }
            break;
        }
        iterations += 1;
        progress.report("Newton iterations", iterations as u64, None);
        let rhs = newton_rhs(&current.gradient, &theta, width, total_weight, lambda);
        let factor = match (&fixed, current.hessian.is_empty()) {
            (Some(f), true) => Ok(f.clone()),
            _ => cholesky(&newton_system(&current.hessian, width, total_weight, lambda, &problem.inert)),
        };
        let factor = match factor {
            Ok(f) => {
                if fixed_mode && fixed.is_none() {
                    fixed = Some(f.clone());
                }
                f
            }
            // From a warm start the information can be singular because
            // the start already separates the rows; the fit from the usual
            // start tells collinearity from separation, as `fit` does.
            Err(_) if iterations == 1 && start.is_some() => return fit(dataset, params, row_weights, None, progress),
            Err(s) if iterations == 1 => {
                return Err(Error::SingularCovariance {
                    family: "logistic".into(),
                    whose: "of the inputs (the information matrix)".into(),
                    columns: s.columns.iter().map(|&c| parameter_name(c)).collect(),
                    hint: crate::error::message![
                        "these columns are collinear: remove one of them (",
                        Setting::Exclude,
                        ") or add ",
                        Setting::L2
                    ],
                });
            }
            Err(_) => {
                warnings.push(
                    "the information matrix became singular during the fit, which signals separation; the estimates are not reliable"
                        .to_string(),
                );
                break;
            }
        };
        let mut step: Vec<f64> = factor.solve(&rhs).iter().copied().collect();
        let before = objective(current.log_likelihood, &theta);
        let mut halvings = 0;
        let (next_theta, next) = loop {
            let candidate: Vec<f64> = theta.iter().zip(&step).map(|(t, s)| t + s).collect();
            // With derivatives: an accepted trial is the next iterate's pass.
            let level = if fixed_mode { Derivatives::Gradient } else { Derivatives::Hessian };
            let trial = problem.pass(&candidate, level);
            let after = objective(trial.log_likelihood, &candidate);
            if after <= before + 1e-12 * before.abs() {
                break (candidate, trial);
            }
            if halvings >= 30 {
                // No step lowers the objective: stay, and say so.
                break (theta.clone(), current.clone());
            }
            step.iter_mut().for_each(|s| *s *= 0.5);
            halvings += 1;
        };
        if halvings >= 30 {
            warnings
                .push("no Newton step lowered the objective (30 halvings); the fit stopped where it was".to_string());
            break;
        }
        last_step = step.iter().fold(0.0f64, |m, s| m.max(s.abs()));
        theta = next_theta;
        current = next;
    }

    // Separation (Albert & Anderson 1984, "On the existence of maximum
    // likelihood estimates in logistic regression models", Biometrika
    // 71(1)): rows fitted with probability 0 or 1 while slopes keep
    // growing. Complete when every row is so fitted, quasi-complete when
    // some are. The inputs involved are those whose standardised slope is
    // large (beyond 10: an odds ratio of e¹⁰ per standard deviation,
    // common practice as a sign of divergence).
    let largest = (0..size).filter(|i| i % width != 0).max_by(|&a, &b| theta[a].abs().total_cmp(&theta[b].abs()));
    let separated = current.extreme_rows > 0 && (!converged || largest.is_some_and(|i| theta[i].abs() > 10.0));
    let mut diverging = Vec::new();
    if separated {
        // The separation warning below says what the singular information meant.
        warnings.retain(|w| !w.starts_with("the information matrix became singular"));
        let mut involved: Vec<usize> = (0..size).filter(|&i| i % width != 0 && theta[i].abs() > 10.0).collect();
        if involved.is_empty() {
            involved.extend(largest);
        }
        diverging = involved.iter().map(|&i| terms[i % width - 1].clone()).collect();
        diverging.dedup();
        let kind =
            if current.extreme_rows >= dataset.target.iter().enumerate().filter(|(r, _)| weights[*r] > 0.0).count() {
                "complete"
            } else {
                "quasi-complete"
            };
        let names: Vec<String> = involved.iter().map(|&i| format!("'{}'", parameter_name(i))).collect();
        warnings.push(format!(
            "{kind} separation by {}: {} rows are fitted with probability 0 or 1, and the maximum-likelihood estimates do not exist (those coefficients grow without bound, however many iterations); \
             the estimates are where the fit stopped and have no standard errors. Fit with a penalty (--newton-ridge 0.01, or --penalty ridge), or look at what separates the classes",
            names.join(", "),
            current.extreme_rows
        ));
    } else if !converged {
        warnings.push(format!(
            "did not converge in {iterations} iterations (last standardised step {last_step:.2e}); raise --max-iterations"
        ));
    }

    let (coefficients, transform) = original_scale(&theta, &order, &problem.centre, &problem.scale);
    // Standard errors for unpenalised fits (a warm-started fit, as in
    // cross-validation folds, has none: nobody reads them there).
    if lambda == 0.0 && start.is_none() && current.hessian.is_empty() {
        current = problem.pass(&theta, Derivatives::Hessian);
    }
    let covariance = if lambda == 0.0 && !current.hessian.is_empty() {
        covariance_from_information(&current.hessian, width, &problem.inert, &transform, &terms, &mut warnings)
    } else {
        None
    };
    // Standard errors of diverging estimates would be an artefact of where
    // the fit stopped.
    let covariance = if diverging.is_empty() { covariance } else { None };
    let model = LogisticModel {
        encoding,
        classes,
        reference,
        class_mix,
        coefficients,
        covariance,
        l2: lambda,
        penalty: None,
        diverging,
        aliased: aliased.iter().map(|a| terms[a.column].clone()).collect(),
    };
    Ok((
        model,
        Diagnostics {
            iterations,
            converged,
            log_likelihood: current.log_likelihood,
            warnings,
            ..Diagnostics::default()
        },
    ))
}
