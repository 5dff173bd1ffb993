//! The range of inputs a model can score: for each numeric input, the
//! largest magnitude at which every class's evidence — and every
//! intermediate quantity on the way to it, in the library and in the
//! exported SQL — stays a finite double.
//!
//! A row with a value beyond its input's bound is set aside as
//! `out-of-range` (the reject reason the scoring layer gives it) instead
//! of being given a posterior computed from an overflow. The rule is one
//! per input, not per row, so that SQL can apply it before any arithmetic:
//! PostgreSQL aborts the whole query on a floating-point overflow, and no
//! expression can catch one.
//!
//! Each input gets an equal share of an evidence budget
//! [`EVIDENCE_LIMIT`] (a sixteenth of the largest double, so sums of the
//! shares, the class constants and a calibration slope of up to 16 do not
//! overflow). Within its bound an input's term is at most its share, so the
//! sum over inputs is at most the budget; the bounds are therefore
//! conservative, by at most the number of inputs (linear evidence) or its
//! square root (quadratic evidence), never more.
//!
//! - Logistic regression: |βₖⱼ xⱼ| ≤ share.
//! - LDA: the library computes u = L⁻¹x and u·vₖ with vₖ = L⁻¹μₖ, the SQL
//!   wᵀx with w = L⁻ᵀ(vₖ − v_ref); both are bounded by
//!   2‖L⁻¹eⱼ‖·max(1, maxₖ‖vₖ‖)·|xⱼ| per input (the triangle inequality over
//!   the columns of L⁻¹).
//! - QDA: z = Lₖ⁻¹(x − μₖ) has ‖z‖ ≤ Σⱼ ‖Lₖ⁻¹eⱼ‖·|xⱼ − μₖⱼ|, and ‖z‖² must
//!   stay within the budget.
//! - Naive Bayes: each Gaussian term is ((xⱼ − μₖⱼ)·sₖⱼ)² with
//!   sₖⱼ = 1/(σₖⱼ√2), scaled before it is squared.
//!
//! One-hot and 0/1 indicator columns are bounded by construction and have
//! no bound of their own (+∞).

use nalgebra::DMatrix;

use crate::model::discriminant::DiscriminantModel;
use crate::model::logistic::LogisticModel;
use crate::model::naive_bayes::NaiveBayesModel;
use crate::model::FittedModel;

/// The evidence budget: a sixteenth of the largest double.
pub const EVIDENCE_LIMIT: f64 = f64::MAX / 16.0;

/// Per numeric model input (features, then indicators), the largest |x|
/// the model scores with finite evidence; `slope` is the magnitude of a
/// calibration map's slope applied to the log odds (1 when there is none).
pub fn input_bounds(model: &FittedModel, slope: f64) -> Vec<f64> {
    let budget = EVIDENCE_LIMIT / slope.abs().max(1.0);
    let bounds = match model {
        FittedModel::Logistic(m) => logistic_bounds(m, budget),
        FittedModel::Lda(m) => lda_bounds(m, budget),
        FittedModel::Qda(m) => qda_bounds(m, budget),
        FittedModel::NaiveBayes(m) => naive_bayes_bounds(m, budget),
    };
    // A model whose own constants use up the budget scores nothing beyond 0.
    bounds.into_iter().map(|b| if b.is_nan() { 0.0 } else { b.max(0.0) }).collect()
}

/// One input's share of `budget` among `inputs` (one share kept for the
/// constants and the one-hot columns).
fn share(budget: f64, inputs: usize) -> f64 {
    budget / (inputs as f64 + 1.0)
}

fn logistic_bounds(m: &LogisticModel, budget: f64) -> Vec<f64> {
    let p = m.encoding.numeric.len();
    let share = share(budget, p);
    (0..p)
        .map(|j| {
            let largest = m.coefficients.iter().map(|c| c.slopes[j].abs()).fold(0.0, f64::max);
            share / largest
        })
        .collect()
}

/// The Euclidean norm of each column of L⁻¹ (None when L cannot be
/// inverted: the model scores nothing, and says so elsewhere).
fn inverse_column_norms(lower: &DMatrix<f64>) -> Option<(DMatrix<f64>, Vec<f64>)> {
    let d = lower.nrows();
    let inverse = lower.clone().solve_lower_triangular(&DMatrix::identity(d, d))?;
    let norms = (0..d).map(|j| inverse.column(j).norm()).collect();
    Some((inverse, norms))
}

fn lda_bounds(m: &DiscriminantModel, budget: f64) -> Vec<f64> {
    let p = m.encoding.numeric.len();
    let Some((inverse, norms)) = m.factors().ok().and_then(|f| inverse_column_norms(&f[0].lower)) else {
        return vec![0.0; p];
    };
    let largest_v =
        m.means.iter().map(|mean| (&inverse * nalgebra::DVector::from_column_slice(mean)).norm()).fold(1.0, f64::max);
    let share = share(budget, p);
    norms[..p].iter().map(|n| share / (2.0 * n * largest_v)).collect()
}

fn qda_bounds(m: &DiscriminantModel, budget: f64) -> Vec<f64> {
    let p = m.encoding.numeric.len();
    let Ok(factors) = m.factors() else { return vec![0.0; p] };
    // ‖z‖ may reach √budget; its share per numeric input, after what the
    // means and the one-hot columns (|x − μ| ≤ 1 + |μ|) may use.
    let reach = budget.sqrt();
    let mut bounds = vec![f64::INFINITY; p];
    for (class, mean) in m.means.iter().enumerate() {
        let factor = &factors[class.min(factors.len() - 1)];
        let Some((_, norms)) = inverse_column_norms(&factor.lower) else { return vec![0.0; p] };
        let fixed: f64 = norms[p..].iter().zip(&mean[p..]).map(|(n, mu)| n * (1.0 + mu.abs())).sum();
        let share = (reach - fixed) / p.max(1) as f64;
        for j in 0..p {
            bounds[j] = bounds[j].min(share / norms[j] - mean[j].abs());
        }
    }
    bounds
}

fn naive_bayes_bounds(m: &NaiveBayesModel, budget: f64) -> Vec<f64> {
    let p = m.numeric.len();
    let terms = m.gaussian_terms();
    // Each term ((x − μ)·s)² may reach the share: |x − μ|·s ≤ √share.
    let reach = share(budget, p).sqrt();
    (0..p)
        .map(|j| {
            if !terms.gaussian[j] {
                return f64::INFINITY;
            }
            m.means
                .iter()
                .zip(&terms.scale)
                .map(|(mean, scale)| reach / scale[j] - mean[j].abs())
                .fold(f64::INFINITY, f64::min)
        })
        .collect()
}
