//! Linear and quadratic discriminant analysis: Gaussian classes with a
//! shared covariance (LDA) or their own (QDA), fitted from per-class
//! moments in one parallel pass.
//!
//! - LDA pools the within-class cross-products by weight, never by the
//!   prior (priors move only the intercepts), and divides by n − K (the
//!   unbiased pooled estimate; `Divisor::Rows` divides by n).
//!   `--diagonal-weight` shrinks the pooled covariance S toward the scaled
//!   identity on the standardised scale, i.e. toward its own diagonal D:
//!   (1 − α)S + αD, so that changing a column's units changes nothing.
//!   `ledoit-wolf` sets α by Ledoit & Wolf (2004), "A well-conditioned
//!   estimator for large-dimensional covariance matrices", J. Multivariate
//!   Analysis 88(2), applied to the standardised within-class residuals.
//! - QDA divides each class's cross-products by nₖ − 1 (as R's MASS::qda;
//!   `Divisor::Rows` divides by nₖ); `--pooled-weight γ` shrinks each toward the
//!   pooled covariance, (1 − γ)Σₖ + γΣ (Friedman 1989, "Regularized
//!   discriminant analysis", JASA 84(405)).
//!
//! - Categorical inputs enter in one of two ways ([`CategoryModel`]):
//!   one-hot, as 0/1 design columns modelled as Gaussian with the numeric
//!   inputs (LDA's default), or (QDA's) through their smoothed
//!   class-conditional level frequencies beside a Gaussian model of the
//!   numeric inputs alone: p(x | k) = p(x_cat | k)·p(x_num | k), each
//!   categorical input independent of the rest given the class. This is
//!   the simplest case of the location model (Krzanowski 1975,
//!   "Discrimination and classification using both binary and continuous
//!   variables", JASA 70(352), §2: a multinomial over the cells of the
//!   categorical inputs, a Gaussian of the continuous ones within each
//!   cell, here with the cell means equal and the cell probabilities a
//!   product over the inputs), with Laplace smoothing (α = 1) of the level
//!   frequencies as in naive Bayes.
//!
//! log p(x | k) = −½(d·ln 2π + ln|Σₖ| + ‖Lₖ⁻¹(x − μₖ)‖²) through the Cholesky
//! factor Lₖ: one triangular solve per row and class, no explicit inverse.

use std::sync::OnceLock;

use nalgebra::{DMatrix, DVector};
use rayon::prelude::*;
use serde::{Deserialize, Serialize};

use crate::data::schema::Schema;
use crate::data::{Dataset, Inputs};
use crate::error::{Error, Message, Result, Setting};
use crate::model::design::{Encoding, OneHot};
use crate::model::levels::{add_level_terms, level_counts, level_likelihoods, CategoricalLikelihood, LevelCounts};
use crate::model::linalg::{cholesky, weakest_direction, Factor, Singularity, NEAR_SINGULAR_RATIO};
use crate::model::moments::{class_moments, Moments};
use crate::model::Diagnostics;

/// Shrinkage of LDA's pooled covariance.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize, Default)]
#[serde(rename_all = "kebab-case")]
pub enum Shrinkage {
    /// The pooled covariance as estimated.
    #[default]
    None,
    /// α by Ledoit & Wolf (2004).
    LedoitWolf,
    /// A stated α in [0, 1].
    Value(f64),
}

impl std::str::FromStr for Shrinkage {
    type Err = String;

    /// `none`, `ledoit-wolf` or a stated α in [0, 1] (`--diagonal-weight`).
    fn from_str(text: &str) -> std::result::Result<Self, String> {
        match text {
            "none" => Ok(Shrinkage::None),
            "ledoit-wolf" => Ok(Shrinkage::LedoitWolf),
            v => v
                .parse::<f64>()
                .ok()
                .filter(|a| (0.0..=1.0).contains(a))
                .map(Shrinkage::Value)
                .ok_or_else(|| format!("takes none, ledoit-wolf or a number in [0, 1], not '{v}'")),
        }
    }
}

/// The divisor of the covariance estimates.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, Default)]
#[serde(rename_all = "kebab-case")]
pub enum Divisor {
    /// n − K for LDA's pooled covariance, nₖ − 1 for QDA's class covariances.
    #[default]
    Unbiased,
    /// n for LDA, nₖ for QDA (maximum likelihood).
    Rows,
}

impl Divisor {
    /// The name `--covariance-divisor` takes.
    pub fn name(self) -> &'static str {
        match self {
            Divisor::Unbiased => "unbiased",
            Divisor::Rows => "rows",
        }
    }
}

impl std::str::FromStr for Divisor {
    type Err = String;

    /// A divisor by its name, as `fit`'s flag and `compare`'s family
    /// options both give it.
    fn from_str(text: &str) -> std::result::Result<Self, String> {
        [Divisor::Unbiased, Divisor::Rows]
            .into_iter()
            .find(|d| d.name() == text)
            .ok_or_else(|| format!("'{text}' is not unbiased or rows"))
    }
}

/// How LDA and QDA take categorical inputs.
///
/// Each family's default is the treatment that predicted better out of
/// sample on the demo lending data and on statsmodels' fair data (README,
/// "Categorical inputs in LDA and QDA"): one-hot for LDA, whose pooled
/// covariance also carries how the levels move with the numeric inputs;
/// level frequencies for QDA, whose class covariances are nearly singular
/// along the 0/1 columns of rare levels.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum CategoryModel {
    /// One 0/1 design column per level but the first, modelled as Gaussian
    /// with the numeric inputs.
    OneHot,
    /// Smoothed class-conditional level frequencies beside a Gaussian model
    /// of the numeric inputs (the location model; see the module notes).
    Frequencies,
}

impl CategoryModel {
    /// The treatment of model files written before there was a choice.
    fn older_files() -> Self {
        CategoryModel::OneHot
    }

    /// The name `--category-model` takes.
    pub fn name(self) -> &'static str {
        match self {
            CategoryModel::OneHot => "one-hot",
            CategoryModel::Frequencies => "frequencies",
        }
    }
}

impl std::str::FromStr for CategoryModel {
    type Err = String;

    /// A treatment by its name (see [`CategoryModel::name`]).
    fn from_str(text: &str) -> std::result::Result<Self, String> {
        [CategoryModel::OneHot, CategoryModel::Frequencies]
            .into_iter()
            .find(|c| c.name() == text)
            .ok_or_else(|| format!("'{text}' is not one-hot or frequencies"))
    }
}

/// Additive smoothing of the level frequencies under
/// [`CategoryModel::Frequencies`]: Laplace's, naive Bayes' default.
pub const LEVEL_SMOOTHING: f64 = 1.0;

/// The design columns of the Gaussian part: every input under one-hot, the
/// numeric inputs alone under level frequencies.
pub fn gaussian_encoding(schema: &Schema, categories: CategoryModel) -> Encoding {
    match categories {
        CategoryModel::OneHot => Encoding::from_schema(schema),
        CategoryModel::Frequencies => Encoding { numeric: schema.numeric_inputs(), one_hot: Vec::new() },
    }
}

/// LDA hyperparameters.
///
/// | name | default | meaning | range |
/// |---|---|---|---|
/// | shrinkage | none | shrinkage of the pooled covariance | none, ledoit-wolf, [0, 1] |
/// | divisor | unbiased | n − K, or n | |
/// | categories | one-hot | how categorical inputs enter | one-hot, frequencies |
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct LdaParams {
    /// Shrinkage of the pooled covariance.
    pub shrinkage: Shrinkage,
    /// Divisor of the pooled covariance.
    pub divisor: Divisor,
    /// Refuse inputs that are exact linear combinations of earlier ones
    /// instead of dropping them from the fit (`--refuse-aliased`).
    #[serde(default, skip_serializing_if = "std::ops::Not::not")]
    pub refuse_aliased: bool,
    /// How categorical inputs enter.
    #[serde(default = "CategoryModel::older_files")]
    pub categories: CategoryModel,
}

impl Default for LdaParams {
    fn default() -> Self {
        LdaParams {
            shrinkage: Shrinkage::default(),
            divisor: Divisor::default(),
            refuse_aliased: false,
            categories: CategoryModel::OneHot,
        }
    }
}

/// QDA hyperparameters.
///
/// | name | default | meaning | range |
/// |---|---|---|---|
/// | reg | 0 | weight of the pooled covariance in each class's | [0, 1] |
/// | divisor | unbiased | nₖ − 1, or nₖ | |
/// | categories | frequencies | how categorical inputs enter | one-hot, frequencies |
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct QdaParams {
    /// Friedman's γ: Σₖ(γ) = (1 − γ)Σₖ + γΣ.
    pub reg: f64,
    /// Divisor of the class covariances.
    pub divisor: Divisor,
    /// How categorical inputs enter.
    #[serde(default = "CategoryModel::older_files")]
    pub categories: CategoryModel,
}

impl Default for QdaParams {
    fn default() -> Self {
        QdaParams { reg: 0.0, divisor: Divisor::default(), categories: CategoryModel::Frequencies }
    }
}

/// A fitted LDA or QDA model.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct DiscriminantModel {
    /// How inputs become the design columns of the Gaussian part (the
    /// numeric inputs alone under level frequencies).
    pub encoding: Encoding,
    /// Categorical inputs modelled by their smoothed class-conditional
    /// level frequencies ([`CategoryModel::Frequencies`]); empty under
    /// one-hot, where they are design columns.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub levels: Vec<CategoricalLikelihood>,
    /// Class names.
    pub classes: Vec<String>,
    /// Training weight of each class.
    pub class_weights: Vec<f64>,
    /// Class means of the design columns.
    pub means: Vec<Vec<f64>>,
    /// Covariances, row-major d × d: one (LDA) or one per class (QDA).
    pub covariances: Vec<Vec<f64>>,
    /// The shrinkage α applied to LDA's pooled covariance (0 when none).
    #[serde(default)]
    pub shrinkage: f64,
    /// Design terms dropped from LDA's fit as exact linear combinations of
    /// earlier ones (within the classes): their class means are the pooled
    /// mean and their covariances with the other terms 0, so they carry no
    /// evidence.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub aliased: Vec<String>,
    /// Cholesky factors, computed on first use.
    #[serde(skip)]
    factors: OnceLock<Vec<Factor>>,
}

impl PartialEq for DiscriminantModel {
    fn eq(&self, other: &Self) -> bool {
        self.encoding == other.encoding
            && self.levels == other.levels
            && self.classes == other.classes
            && self.class_weights == other.class_weights
            && self.means == other.means
            && self.covariances == other.covariances
            && self.shrinkage == other.shrinkage
            && self.aliased == other.aliased
    }
}

/// Dimension of a square matrix stored row-major.
fn dim_of(covariance: &[f64]) -> usize {
    (covariance.len() as f64).sqrt().round() as usize
}

fn to_matrix(covariance: &[f64]) -> DMatrix<f64> {
    let d = dim_of(covariance);
    DMatrix::from_row_slice(d, d, covariance)
}

impl DiscriminantModel {
    /// How the model takes categorical inputs; `None` when it has none.
    pub fn category_model(&self) -> Option<CategoryModel> {
        if !self.levels.is_empty() {
            Some(CategoryModel::Frequencies)
        } else if !self.encoding.one_hot.is_empty() {
            Some(CategoryModel::OneHot)
        } else {
            None
        }
    }

    /// Every input as one-hot design columns: the Gaussian part's columns
    /// followed by the level-frequency inputs' levels. The linear
    /// discriminant is written on these terms whichever the treatment.
    pub fn full_encoding(&self) -> Encoding {
        let mut encoding = self.encoding.clone();
        encoding
            .one_hot
            .extend(self.levels.iter().map(|t| OneHot { column: t.column.clone(), levels: t.levels.clone() }));
        encoding
    }

    /// The covariance factors; an error when a covariance is not positive
    /// definite (a corrupt or hand-edited model file).
    pub fn factors(&self) -> Result<&[Factor]> {
        if let Some(f) = self.factors.get() {
            return Ok(f);
        }
        let mut factors = Vec::with_capacity(self.covariances.len());
        for (k, c) in self.covariances.iter().enumerate() {
            let factor = cholesky(&to_matrix(c)).map_err(|s| Error::FitFailed {
                family: "discriminant".into(),
                message: format!("covariance {k} is not positive definite (columns {:?})", s.columns).into(),
            })?;
            factors.push(factor);
        }
        Ok(self.factors.get_or_init(|| factors))
    }

    /// Checks shapes and finiteness (used when a model file is loaded).
    pub fn validate(&self) -> std::result::Result<(), String> {
        let d = self.encoding.width();
        let k = self.classes.len();
        if self.means.len() != k || self.class_weights.len() != k || self.means.iter().any(|m| m.len() != d) {
            return Err("class means do not match the classes and inputs".into());
        }
        if !(self.covariances.len() == 1 || self.covariances.len() == k) {
            return Err("the number of covariances is neither 1 nor one per class".into());
        }
        if self.covariances.iter().any(|c| c.len() != d * d) {
            return Err("a covariance has the wrong size".into());
        }
        let all = self.means.iter().flatten().chain(self.covariances.iter().flatten());
        if all.clone().any(|v| !v.is_finite()) || !self.levels.iter().all(|t| crate::model::levels::valid(t, k)) {
            return Err("a parameter is not a finite number, or a level table has the wrong shape".into());
        }
        self.factors().map(|_| ()).map_err(|e| e.to_string())
    }

    /// Writes log p(x | k) for `rows` into `out` (row-major, K per row),
    /// for LDA up to a term common to every class of a row: −½‖L⁻¹x‖² is
    /// left out. It cancels from every posterior, and far from the data
    /// (an income of 1e21) it would swamp the class terms, so that every
    /// class looked alike and the posterior came out as the prior. The
    /// remaining terms are LDA's linear discriminant, as the SQL export
    /// computes it.
    pub fn log_likelihoods(&self, inputs: &Inputs<'_>, rows: &[usize], out: &mut [f64]) {
        let Ok(factors) = self.factors() else {
            out.iter_mut().for_each(|v| *v = 0.0);
            return;
        };
        let d = self.encoding.width();
        let k = self.classes.len();
        let constant = d as f64 * std::f64::consts::TAU.ln();
        let mut x = vec![0.0; d];
        let mut z = vec![0.0; d];
        if factors.len() == 1 {
            // LDA: with u = L⁻¹x and vₖ = L⁻¹μₖ, ‖L⁻¹(x − μₖ)‖² = ‖u‖² − 2u·vₖ + ‖vₖ‖²:
            // one triangular solve per row instead of one per class.
            let factor = &factors[0];
            let v: Vec<Vec<f64>> = self
                .means
                .iter()
                .map(|m| {
                    let mut v = m.clone();
                    factor.solve_lower_in_place(&mut v);
                    v
                })
                .collect();
            let v_norms: Vec<f64> = v.iter().map(|v| v.iter().map(|x| x * x).sum()).collect();
            for (i, &r) in rows.iter().enumerate() {
                self.encoding.fill_row(inputs, r, &mut x);
                factor.solve_lower_in_place(&mut x);
                for class in 0..k {
                    let cross: f64 = x.iter().zip(&v[class]).map(|(a, b)| a * b).sum();
                    let mut ll = -0.5 * (constant + factor.log_det + v_norms[class]) + cross;
                    add_level_terms(&self.levels, inputs.categorical, r, class, &mut ll);
                    out[i * k + class] = ll;
                }
            }
            return;
        }
        for (i, &r) in rows.iter().enumerate() {
            self.encoding.fill_row(inputs, r, &mut x);
            for class in 0..k {
                let factor = &factors[if factors.len() == 1 { 0 } else { class }];
                z.iter_mut().zip(&x).zip(&self.means[class]).for_each(|((z, x), m)| *z = x - m);
                factor.solve_lower_in_place(&mut z);
                let quadratic: f64 = z.iter().map(|v| v * v).sum();
                let mut ll = -0.5 * (constant + factor.log_det + quadratic);
                add_level_terms(&self.levels, inputs.categorical, r, class, &mut ll);
                out[i * k + class] = ll;
            }
        }
    }

    /// LDA's linear discriminant: for each class other than `reference`, the
    /// coefficients w = Σ⁻¹(μₖ − μ_ref) on the design columns and the
    /// intercept −½(μₖᵀΣ⁻¹μₖ − μ_refᵀΣ⁻¹μ_ref) + log(πₖ/π_ref), so that
    /// log p(k | x)/p(ref | x) = intercept + wᵀx. The terms are those of
    /// [`DiscriminantModel::full_encoding`]: a level-frequency input adds
    /// log(P(l | k)/P(l | ref)) for its level l, written as one-hot
    /// coefficients against its first level, whose own ratio goes into the
    /// intercept.
    pub fn linear_discriminant(&self, prior: &[f64], reference: usize) -> Result<Vec<(usize, f64, Vec<f64>)>> {
        let factors = self.factors()?;
        let factor = &factors[0];
        let inverse_mean: Vec<DVector<f64>> =
            self.means.iter().map(|m| factor.solve(&DVector::from_column_slice(m))).collect();
        let quadratic: Vec<f64> =
            self.means.iter().zip(&inverse_mean).map(|(m, im)| DVector::from_column_slice(m).dot(im)).collect();
        Ok((0..self.classes.len())
            .filter(|&c| c != reference)
            .map(|c| {
                let mut w: Vec<f64> =
                    (0..self.encoding.width()).map(|j| inverse_mean[c][j] - inverse_mean[reference][j]).collect();
                let mut intercept = -0.5 * (quadratic[c] - quadratic[reference]) + (prior[c] / prior[reference]).ln();
                for table in &self.levels {
                    let ratio = |l: usize| table.log_probabilities[c][l] - table.log_probabilities[reference][l];
                    intercept += ratio(0);
                    w.extend((1..table.levels.len()).map(|l| ratio(l) - ratio(0)));
                }
                (c, intercept, w)
            })
            .collect())
    }
}

/// The rows with positive weight each class needs for QDA on `d` design
/// columns: a class's own covariance is singular with d rows or fewer,
/// which only mixing in the pooled one (`reg` > 0) mends.
pub(crate) fn qda_rows_needed(params: &QdaParams, d: usize) -> usize {
    let needed = match params.divisor {
        Divisor::Unbiased => 2,
        Divisor::Rows => 1,
    };
    needed.max(if params.reg > 0.0 { needed } else { d + 1 })
}

fn check_classes(family: &str, classes: &[String], moments: &[Moments], needed: usize, hint: Message) -> Result<()> {
    for (k, m) in moments.iter().enumerate() {
        if m.rows < needed {
            return Err(Error::TooFewRows {
                family: family.into(),
                class: classes.get(k).cloned().unwrap_or_default(),
                rows: m.rows,
                needed,
                hint: hint.clone(),
            });
        }
    }
    Ok(())
}

fn singular(family: &str, whose: String, encoding: &Encoding, s: Singularity, hint: Message) -> Error {
    let terms = encoding.terms();
    Error::SingularCovariance {
        family: family.into(),
        whose,
        columns: s.columns.iter().map(|&c| terms.get(c).cloned().unwrap_or_else(|| format!("#{c}"))).collect(),
        hint,
    }
}

/// Σ_k M_k: the pooled within-class cross-products.
fn pooled_scatter(moments: &[Moments], d: usize) -> DMatrix<f64> {
    let mut w = DMatrix::zeros(d, d);
    for m in moments {
        for i in 0..d {
            for j in 0..d {
                w[(i, j)] += m.scatter_at(i, j);
            }
        }
    }
    w
}

/// Σᵢ wᵢ ‖zᵢ‖⁴ over the standardised within-class residuals zᵢ =
/// D^{-1/2}(xᵢ − μ_{yᵢ}), for the Ledoit–Wolf shrinkage intensity.
fn fourth_moment(
    encoding: &Encoding,
    dataset: &Dataset,
    weights: Option<&[f64]>,
    means: &[Vec<f64>],
    scale: &[f64],
) -> f64 {
    let inputs = dataset.inputs();
    let d = encoding.width();
    let n = inputs.rows();
    (0..n.div_ceil(8192))
        .into_par_iter()
        .map(|b| {
            let mut x = vec![0.0; d];
            let mut sum = 0.0;
            for r in b * 8192..((b + 1) * 8192).min(n) {
                let w = weights.map_or(1.0, |w| w[r]);
                if w == 0.0 {
                    continue;
                }
                encoding.fill_row(&inputs, r, &mut x);
                let m = &means[dataset.target[r] as usize];
                let norm: f64 = (0..d).map(|j| ((x[j] - m[j]) / scale[j]).powi(2)).sum();
                sum += w * norm * norm;
            }
            sum
        })
        .collect::<Vec<f64>>()
        .iter()
        .sum()
}

/// The Ledoit–Wolf (2004) intensity for shrinking the sample covariance R
/// (divisor n) of centred data toward μI, μ = tr(R)/d: with ‖A‖² = tr(AAᵀ)/d,
/// δ² = ‖R − μI‖², β̄² = (1/n²)Σᵢ‖zᵢzᵢᵀ − R‖² = (Σᵢ‖zᵢ‖⁴/n − ‖R‖²_F)/(n·d),
/// and α = min(β̄², δ²)/δ².
pub fn ledoit_wolf_intensity(r: &DMatrix<f64>, fourth: f64, n: f64) -> f64 {
    let d = r.nrows() as f64;
    let mu = r.trace() / d;
    let frobenius: f64 = r.iter().map(|v| v * v).sum();
    let delta = (frobenius - 2.0 * mu * r.trace() + mu * mu * d) / d;
    let beta = ((fourth / n - frobenius) / (n * d)).max(0.0);
    if delta <= 0.0 {
        return 0.0;
    }
    beta.min(delta) / delta
}

fn lda_hint() -> Message {
    crate::error::message![
        "remove constant or duplicated columns (",
        Setting::Exclude,
        "), or shrink the covariance with ",
        Setting::Shrinkage.set_to("ledoit-wolf")
    ]
}

/// What to do when a class has no more rows than QDA has inputs.
pub(crate) fn qda_rows_hint() -> Message {
    crate::error::message![
        "a class's own covariance of that many inputs is singular with so few rows; mix in the pooled one with ",
        Setting::Reg,
        " (e.g. 0.1), use fewer inputs (",
        Setting::Exclude,
        "), or use naive-bayes or lda"
    ]
}

fn qda_hint() -> Message {
    crate::error::message![
        "remove constant or duplicated columns (",
        Setting::Exclude,
        "), regularise with ",
        Setting::Reg,
        " (e.g. 0.1), or use lda"
    ]
}

/// Fits LDA; `weights` are the row weights to use (the dataset's own, or
/// those of a training fold).
pub fn fit_lda(
    dataset: &Dataset,
    params: &LdaParams,
    weights: Option<&[f64]>,
) -> Result<(DiscriminantModel, Diagnostics)> {
    let encoding = gaussian_encoding(&dataset.schema, params.categories);
    let k = dataset.schema.target.classes.len();
    let moments = class_moments(&encoding, &dataset.inputs(), &dataset.target, weights, k, false);
    let levels = frequency_counts(dataset, params.categories, weights);
    fit_lda_from_moments(dataset, params, weights, encoding, moments, levels)
}

/// The level counts the frequency treatment fits on (none under one-hot).
fn frequency_counts(dataset: &Dataset, categories: CategoryModel, weights: Option<&[f64]>) -> Vec<LevelCounts> {
    match categories {
        CategoryModel::OneHot => Vec::new(),
        CategoryModel::Frequencies => level_counts(dataset, weights, dataset.schema.target.classes.len()),
    }
}

/// The level-frequency tables and their share of the training
/// log-likelihood; refuses a model with no numeric input for its Gaussian
/// part (that model is naive Bayes).
fn frequency_tables(
    family: &str,
    d: usize,
    levels: &[LevelCounts],
    moments: &[Moments],
) -> Result<(Vec<CategoricalLikelihood>, f64)> {
    if d == 0 && !levels.is_empty() {
        return Err(Error::FitFailed {
            family: family.to_string(),
            message: crate::error::message![
                "every input is categorical, so the level frequencies leave no numeric input for the Gaussian part; that model is naive-bayes, or give ",
                Setting::Categories.set_to("one-hot")
            ],
        });
    }
    let class_weights: Vec<f64> = moments.iter().map(|m| m.weight).collect();
    Ok(level_likelihoods(levels, &class_weights, LEVEL_SMOOTHING))
}

/// Fits LDA from per-class moments of the Gaussian part's design (as
/// [`class_moments`] gives them for the rows with positive `weights`) and
/// the level counts of the level-frequency inputs; the data is read again
/// only for the Ledoit–Wolf intensity.
pub fn fit_lda_from_moments(
    dataset: &Dataset,
    params: &LdaParams,
    weights: Option<&[f64]>,
    encoding: Encoding,
    moments: Vec<Moments>,
    levels: Vec<LevelCounts>,
) -> Result<(DiscriminantModel, Diagnostics)> {
    let fourth = |means: &[Vec<f64>], scale: &[f64]| fourth_moment(&encoding, dataset, weights, means, scale);
    let classes = dataset.schema.target.classes.clone();
    lda_from_moments(&classes, params, encoding.clone(), moments, levels, Some(&fourth))
}

/// Σᵢ wᵢ‖zᵢ‖⁴ of the rows given the class means and the column scales.
pub type FourthMoment<'a> = dyn Fn(&[Vec<f64>], &[f64]) -> f64 + 'a;

/// Fits LDA from per-class moments and level counts alone.
/// `fourth_moment(means, scale)` gives Σᵢ wᵢ‖zᵢ‖⁴ for the Ledoit–Wolf
/// intensity; without it (moments computed elsewhere, e.g. by an SQL
/// engine) that shrinkage is refused.
pub fn lda_from_moments(
    classes: &[String],
    params: &LdaParams,
    encoding: Encoding,
    moments: Vec<Moments>,
    levels: Vec<LevelCounts>,
    fourth_moment: Option<&FourthMoment<'_>>,
) -> Result<(DiscriminantModel, Diagnostics)> {
    let d = encoding.width();
    let k = classes.len();
    check_classes("lda", classes, &moments, 1, "collect more rows of that class".into())?;
    let (levels, level_log_likelihood) = frequency_tables("lda", d, &levels, &moments)?;
    let n: f64 = moments.iter().map(|m| m.weight).sum();
    let divisor = match params.divisor {
        Divisor::Unbiased => n - k as f64,
        Divisor::Rows => n,
    };
    if divisor <= 0.0 || d == 0 {
        return Err(Error::FitFailed {
            family: "lda".into(),
            // A weighted count, written to six significant digits (1e-300
            // weights once gave three hundred zeros).
            message: format!(
                "{} rows (weighted) and {k} classes leave nothing to estimate a covariance from",
                crate::format::number(n, 6)
            )
            .into(),
        });
    }
    let mut covariance = pooled_scatter(&moments, d) / divisor;
    let mut means: Vec<Vec<f64>> = moments.iter().map(|m| m.mean.clone()).collect();
    let mut warnings = Vec::new();
    let alpha = match params.shrinkage {
        Shrinkage::None => 0.0,
        Shrinkage::Value(a) => a,
        Shrinkage::LedoitWolf => {
            // Residuals standardised by the pooled standard deviations
            // (divisor n), as Ledoit & Wolf's estimator takes centred data.
            let scatter = pooled_scatter(&moments, d);
            let scale: Vec<f64> = (0..d).map(|j| (scatter[(j, j)] / n).sqrt()).collect();
            if let Some(j) = (0..d).find(|&j| !(scale[j] > 0.0)) {
                return Err(singular(
                    "lda",
                    "pooled over the classes".into(),
                    &encoding,
                    Singularity { columns: vec![j], smallest_eigenvalue: 0.0 },
                    crate::error::message!["a constant column cannot be shrunk; remove it with ", Setting::Exclude],
                ));
            }
            let r = DMatrix::from_fn(d, d, |i, j| scatter[(i, j)] / n / (scale[i] * scale[j]));
            let Some(fourth_moment) = fourth_moment else {
                return Err(Error::FitFailed {
                    family: "lda".into(),
                    message: crate::error::message![
                        "Ledoit–Wolf shrinkage needs fourth moments of the rows, which aggregates of sums and cross-products do not hold; give ",
                        Setting::Shrinkage.set_to("none"),
                        " or a value in [0, 1]"
                    ],
                });
            };
            let fourth = fourth_moment(&means, &scale);
            ledoit_wolf_intensity(&r, fourth, n)
        }
    };
    if alpha > 0.0 {
        let diagonal = DMatrix::from_diagonal(&covariance.diagonal());
        covariance = covariance * (1.0 - alpha) + diagonal * alpha;
    }
    // Without shrinkage an aliased term leaves the pooled covariance
    // singular: it is dropped by giving it no evidence — every class its
    // pooled mean, no covariance with the other terms — so the factor,
    // the scoring and the SQL export need nothing of their own for it.
    let aliased = if alpha > 0.0 { Vec::new() } else { crate::model::linalg::aliased_columns(&covariance) };
    if !aliased.is_empty() {
        let terms = encoding.terms();
        if params.refuse_aliased {
            return Err(crate::model::logistic::aliased_error("lda", &terms, &aliased));
        }
        warnings.push(crate::model::logistic::aliased_warning(&terms, &aliased));
        for a in &aliased {
            let j = a.column;
            let pooled = moments.iter().map(|m| m.weight * m.mean[j]).sum::<f64>() / n;
            // Each class's spread about the pooled mean now counts as within-class.
            let between = moments.iter().map(|m| m.weight * (m.mean[j] - pooled).powi(2)).sum::<f64>() / divisor;
            let variance = covariance[(j, j)] + between;
            covariance.row_mut(j).fill(0.0);
            covariance.column_mut(j).fill(0.0);
            covariance[(j, j)] = variance;
            means.iter_mut().for_each(|m| m[j] = pooled);
        }
    }
    let aliased: Vec<String> = {
        let terms = encoding.terms();
        aliased.iter().map(|a| terms[a.column].clone()).collect()
    };
    let factor = cholesky(&covariance)
        .map_err(|s| singular("lda", "pooled over the classes".into(), &encoding, s, lda_hint()))?;
    let log_likelihood =
        joint_log_likelihood(&moments, std::slice::from_ref(&factor), std::slice::from_ref(&covariance))
            + level_log_likelihood;
    let model = DiscriminantModel {
        encoding,
        levels,
        classes: classes.to_vec(),
        class_weights: moments.iter().map(|m| m.weight).collect(),
        means,
        covariances: vec![covariance.transpose().as_slice().to_vec()],
        shrinkage: alpha,
        aliased,
        factors: OnceLock::new(),
    };
    let _ = model.factors.set(vec![factor]);
    Ok((model, Diagnostics { iterations: 1, converged: true, log_likelihood, warnings, ..Diagnostics::default() }))
}

/// Fits QDA; `weights` as for [`fit_lda`].
pub fn fit_qda(
    dataset: &Dataset,
    params: &QdaParams,
    weights: Option<&[f64]>,
) -> Result<(DiscriminantModel, Diagnostics)> {
    let encoding = gaussian_encoding(&dataset.schema, params.categories);
    let k = dataset.schema.target.classes.len();
    let moments = class_moments(&encoding, &dataset.inputs(), &dataset.target, weights, k, false);
    let levels = frequency_counts(dataset, params.categories, weights);
    fit_qda_from_moments(dataset, params, encoding, moments, levels)
}

/// Fits QDA from per-class moments of the Gaussian part's design and the
/// level counts of the level-frequency inputs; the data is not read.
pub fn fit_qda_from_moments(
    dataset: &Dataset,
    params: &QdaParams,
    encoding: Encoding,
    moments: Vec<Moments>,
    levels: Vec<LevelCounts>,
) -> Result<(DiscriminantModel, Diagnostics)> {
    qda_from_moments(&dataset.schema.target.classes, params, encoding, moments, levels)
}

/// Fits QDA from per-class moments and level counts alone, for classes
/// named `classes`.
pub fn qda_from_moments(
    classes: &[String],
    params: &QdaParams,
    encoding: Encoding,
    moments: Vec<Moments>,
    levels: Vec<LevelCounts>,
) -> Result<(DiscriminantModel, Diagnostics)> {
    let d = encoding.width();
    let k = classes.len();
    let (levels, level_log_likelihood) = frequency_tables("qda", d, &levels, &moments)?;
    if d == 0 {
        return Err(Error::FitFailed { family: "qda".into(), message: "there are no inputs to model".into() });
    }
    check_classes("qda", classes, &moments, qda_rows_needed(params, d), qda_rows_hint())?;
    let n: f64 = moments.iter().map(|m| m.weight).sum();
    let pooled = if params.reg > 0.0 {
        let divisor = match params.divisor {
            Divisor::Unbiased => n - k as f64,
            Divisor::Rows => n,
        };
        pooled_scatter(&moments, d) / divisor
    } else {
        DMatrix::zeros(d, d)
    };
    let mut covariances = Vec::with_capacity(k);
    let mut factors = Vec::with_capacity(k);
    let mut warnings = Vec::new();
    for (class, m) in moments.iter().enumerate() {
        let divisor = match params.divisor {
            Divisor::Unbiased => m.weight - 1.0,
            Divisor::Rows => m.weight,
        };
        if !(divisor > 0.0) {
            return Err(Error::TooFewRows {
                family: "qda".into(),
                class: classes[class].clone(),
                rows: m.rows,
                needed: 2,
                hint: "the class's weights sum to 1 or less; collect more rows of it".into(),
            });
        }
        let own = DMatrix::from_fn(d, d, |i, j| m.scatter_at(i, j) / divisor);
        let covariance = own * (1.0 - params.reg) + &pooled * params.reg;
        let whose = format!("of class '{}'", classes[class]);
        let factor = cholesky(&covariance).map_err(|s| singular("qda", whose, &encoding, s, qda_hint()))?;
        if let Some(warning) = near_singular_warning(&classes[class], &encoding, &covariance) {
            warnings.push(warning);
        }
        covariances.push(covariance);
        factors.push(factor);
    }
    let log_likelihood = joint_log_likelihood(&moments, &factors, &covariances) + level_log_likelihood;
    let model = DiscriminantModel {
        encoding,
        levels,
        classes: classes.to_vec(),
        class_weights: moments.iter().map(|m| m.weight).collect(),
        means: moments.iter().map(|m| m.mean.clone()).collect(),
        covariances: covariances.iter().map(|c| c.transpose().as_slice().to_vec()).collect(),
        shrinkage: 0.0,
        aliased: Vec::new(),
        factors: OnceLock::new(),
    };
    let _ = model.factors.set(factors);
    Ok((model, Diagnostics { iterations: 1, converged: true, log_likelihood, warnings, ..Diagnostics::default() }))
}

/// The warning for a class covariance whose smallest correlation
/// eigenvalue is below [`NEAR_SINGULAR_RATIO`] of its largest, naming the
/// inputs that carry that direction.
fn near_singular_warning(class: &str, encoding: &Encoding, covariance: &DMatrix<f64>) -> Option<String> {
    let weakest = weakest_direction(covariance, 0.25);
    if !(weakest.smallest < NEAR_SINGULAR_RATIO * weakest.largest) {
        return None;
    }
    let terms = encoding.terms();
    let named: Vec<String> = weakest.columns.iter().map(|&j| format!("'{}'", terms[j])).collect();
    let one_hot = weakest.columns.iter().any(|&j| j >= encoding.numeric.len());
    Some(format!(
        "the covariance of class '{class}' is nearly singular along {}: its smallest eigenvalue on the correlation scale is {} of its largest (the warning is given below {}), so rows a little off that direction get posteriors near 0 or 1; mix in the pooled covariance with --pooled-weight (e.g. 0.1){}",
        named.join(", "),
        crate::format::number(weakest.smallest / weakest.largest, 3),
        NEAR_SINGULAR_RATIO,
        if one_hot { ", or take the categorical inputs by their level frequencies (--category-model frequencies)" } else { "" }
    ))
}

/// Σᵢ wᵢ log N(xᵢ; μ_{yᵢ}, Σ_{yᵢ}) in closed form from the moments (the rows
/// are centred at their own class means): −½ Σₖ [Wₖ(d ln 2π + ln|Σₖ|) +
/// tr(Σₖ⁻¹Mₖ)]. Priors are not included: the joint depends on the prior in
/// use, the fit does not.
fn joint_log_likelihood(moments: &[Moments], factors: &[Factor], covariances: &[DMatrix<f64>]) -> f64 {
    let d = covariances[0].nrows();
    moments
        .iter()
        .enumerate()
        .map(|(k, m)| {
            let f = &factors[if factors.len() == 1 { 0 } else { k }];
            let inverse = f.inverse();
            let trace: f64 = (0..d)
                .flat_map(|i| (0..d).map(move |j| (i, j)))
                .map(|(i, j)| inverse[(i, j)] * m.scatter_at(j, i))
                .sum();
            -0.5 * (m.weight * (d as f64 * std::f64::consts::TAU.ln() + f.log_det) + trace)
        })
        .sum()
}
