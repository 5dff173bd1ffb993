//! Base-rate correction and estimation of a new portfolio's class mix.
//!
//! - The odds correction (Saerens, Latinne & Decaestecker 2002, "Adjusting
//!   the outputs of a classifier to new a priori probabilities: a simple
//!   procedure", Neural Computation 14(1); Elkan 2001, "The foundations of
//!   cost-sensitive learning"): p′(k | x) ∝ p(k | x)·π′ₖ/πₖ, done on log
//!   posteriors (add log π′ₖ − log πₖ, renormalise).
//! - EM for an unknown new prior (Saerens et al. 2002): alternate
//!   π⁽ˢ⁺¹⁾ₖ = mean over rows of p⁽ˢ⁾(k | x), the posteriors corrected to
//!   π⁽ˢ⁾, until the prior moves less than a tolerance; the likelihood rises
//!   at every step.
//! - Black-box shift estimation (Lipton, Wang & Smola 2018, "Detecting and
//!   correcting for label shift with black box predictors", ICML): with C
//!   the joint distribution of (predicted class, true class) on held-out
//!   training rows and μ the new rows' predicted-class mix, solve C·w = μ;
//!   the new prior is wₖ·πₖ, clipped at 0 and renormalised.
//! - The likelihood-ratio test of "class mix unchanged" (Saerens et al.
//!   2002): 2·Σᵢ log Σₖ p(k | xᵢ)·π̂ₖ/πₖ against χ² with K − 1 degrees of
//!   freedom, π̂ the EM estimate.

pub mod shift;
pub mod spec;

pub use spec::PriorSpec;

use nalgebra::{DMatrix, DVector};

use crate::model::normalise_log;
use crate::rng::Rng;

/// Moves one row of log posteriors from prior `from` to prior `to`.
pub fn correct_row(row: &mut [f64], from: &[f64], to: &[f64]) {
    for ((v, f), t) in row.iter_mut().zip(from).zip(to) {
        *v += t.ln() - f.ln();
    }
    normalise_log(row);
}

/// The outcome of EM.
#[derive(Debug, Clone, PartialEq)]
pub struct EmEstimate {
    /// The estimated prior.
    pub prior: Vec<f64>,
    /// Iterations taken.
    pub iterations: usize,
    /// Whether the change fell below the tolerance.
    pub converged: bool,
    /// The log-likelihood ratio Σᵢ log Σₖ p(k | xᵢ)·π̂ₖ/πₖ at the estimate.
    pub log_likelihood_ratio: f64,
}

/// Largest change of any class's prior at which EM stops.
pub const EM_TOLERANCE: f64 = 1e-10;
/// Iterations at most.
pub const EM_MAX_ITERATIONS: usize = 10_000;

/// Σᵢ log Σₖ exp(lpᵢₖ)·π′ₖ/πₖ: the log-likelihood of the new rows under
/// prior π′ relative to π (rows: log posteriors under π, row-major).
pub fn log_likelihood_ratio(log_posteriors: &[f64], k: usize, from: &[f64], to: &[f64]) -> f64 {
    let ratio: Vec<f64> = to.iter().zip(from).map(|(t, f)| t / f).collect();
    log_posteriors.chunks(k).map(|row| row.iter().zip(&ratio).map(|(lp, r)| lp.exp() * r).sum::<f64>().ln()).sum()
}

/// EM estimate of the new prior from log posteriors under `from`
/// (row-major, `k` per row), optionally on a resample `rows`, stopping when
/// no class's prior moves by `tolerance` or more.
pub fn em(log_posteriors: &[f64], k: usize, from: &[f64], rows: Option<&[usize]>, tolerance: f64) -> EmEstimate {
    let probabilities: Vec<f64> = log_posteriors.iter().map(|v| v.exp()).collect();
    em_probabilities(&probabilities, k, from, rows, tolerance, None)
}

/// [`em`] on posterior probabilities (faster for repeated use: no
/// logarithms in the loop), starting from `start` (default: `from`) — a
/// bootstrap draw starts from the full sample's estimate and needs few
/// iterations.
pub fn em_probabilities(
    posteriors: &[f64],
    k: usize,
    from: &[f64],
    rows: Option<&[usize]>,
    tolerance: f64,
    start: Option<&[f64]>,
) -> EmEstimate {
    let n = rows.map_or(posteriors.len() / k, <[usize]>::len);
    let row_of = |i: usize| {
        let r = rows.map_or(i, |rows| rows[i]);
        &posteriors[r * k..(r + 1) * k]
    };
    // One EM step: the mean of the posteriors corrected to `prior`.
    let step = |prior: &[f64]| -> Vec<f64> {
        let ratio: Vec<f64> = prior.iter().zip(from).map(|(p, f)| p / f).collect();
        let mut next = vec![0.0; k];
        for i in 0..n {
            let row = row_of(i);
            let total: f64 = row.iter().zip(&ratio).map(|(p, r)| p * r).sum();
            for c in 0..k {
                next[c] += row[c] * ratio[c] / total;
            }
        }
        next.iter_mut().for_each(|m| *m /= n as f64);
        next
    };
    let distance = |a: &[f64], b: &[f64]| a.iter().zip(b).map(|(x, y)| (x - y).abs()).fold(0.0, f64::max);
    // Accelerated by SQUAREM (Varadhan & Roland 2008, "Simple and globally
    // convergent methods for accelerating the convergence of any EM
    // algorithm", Scand. J. Statistics 35(2)): the same fixed point in far
    // fewer steps when classes overlap; `iterations` counts EM steps.
    let mut prior = start.unwrap_or(from).to_vec();
    let mut iterations = 0;
    let mut converged = false;
    while iterations < EM_MAX_ITERATIONS {
        let first = step(&prior);
        iterations += 1;
        if distance(&first, &prior) < tolerance {
            prior = first;
            converged = true;
            break;
        }
        let second = step(&first);
        iterations += 1;
        let r: Vec<f64> = first.iter().zip(&prior).map(|(a, b)| a - b).collect();
        let v: Vec<f64> = second.iter().zip(&first).zip(&r).map(|((b, a), r)| b - a - r).collect();
        let norm = |x: &[f64]| x.iter().map(|v| v * v).sum::<f64>().sqrt();
        let alpha = if norm(&v) > 0.0 { (-norm(&r) / norm(&v)).min(-1.0) } else { -1.0 };
        let mut jumped: Vec<f64> = prior
            .iter()
            .zip(&r)
            .zip(&v)
            .map(|((p, r), v)| (p - 2.0 * alpha * r + alpha * alpha * v).max(1e-12))
            .collect();
        let total: f64 = jumped.iter().sum();
        jumped.iter_mut().for_each(|p| *p /= total);
        // A stabilising EM step from the jump.
        let next = step(&jumped);
        iterations += 1;
        let change = distance(&next, &prior);
        prior = next;
        if change < tolerance {
            converged = true;
            break;
        }
    }
    let ratio: Vec<f64> = prior.iter().zip(from).map(|(t, f)| t / f).collect();
    let log_likelihood_ratio = (0..n).map(|i| row_of(i).iter().zip(&ratio).map(|(p, r)| p * r).sum::<f64>().ln()).sum();
    EmEstimate { log_likelihood_ratio, prior, iterations, converged }
}

/// The outcome of BBSE.
#[derive(Debug, Clone, PartialEq)]
pub struct BbseEstimate {
    /// The estimated prior (after clipping).
    pub prior: Vec<f64>,
    /// Condition number of C (large: the estimate is unreliable).
    pub condition_number: f64,
    /// Whether a negative weight was clipped to 0.
    pub clipped: bool,
}

/// BBSE from the held-out confusion C (`confusion[i][j]` = share of
/// held-out rows predicted i with true class j), the new rows' predicted
/// class shares μ and the training prior π.
pub fn bbse(confusion: &[Vec<f64>], predicted_mix: &[f64], from: &[f64]) -> Option<BbseEstimate> {
    let k = from.len();
    let c = DMatrix::from_fn(k, k, |i, j| confusion[i][j]);
    let svd = c.clone().svd(false, false);
    let (largest, smallest) =
        svd.singular_values.iter().fold((0.0f64, f64::INFINITY), |(a, b), &s| (a.max(s), b.min(s)));
    let condition_number = if smallest > 0.0 { largest / smallest } else { f64::INFINITY };
    // C's columns sum to πⱼ; C·w = μ with w the ratio π′/π.
    let w = c.lu().solve(&DVector::from_column_slice(predicted_mix))?;
    let mut clipped = false;
    let mut prior: Vec<f64> = (0..k)
        .map(|j| {
            let p = w[j] * from[j];
            if p < 0.0 {
                clipped = true;
                0.0
            } else {
                p
            }
        })
        .collect();
    let total: f64 = prior.iter().sum();
    if !(total > 0.0) {
        return None;
    }
    prior.iter_mut().for_each(|p| *p /= total);
    Some(BbseEstimate { prior, condition_number, clipped })
}

/// Percentile interval (2.5%, 97.5%) of each class's share over `draws`
/// bootstrap resamples of the rows, each estimated by `estimate`.
pub fn bootstrap_interval(
    rows: usize,
    k: usize,
    draws: usize,
    seed: u64,
    mut estimate: impl FnMut(&[usize]) -> Option<Vec<f64>>,
) -> Vec<[f64; 2]> {
    let mut rng = Rng::new(Rng::stream_seed(seed, 31));
    let mut samples: Vec<Vec<f64>> = vec![Vec::with_capacity(draws); k];
    let mut resample = vec![0usize; rows];
    for _ in 0..draws {
        for r in resample.iter_mut() {
            *r = (rng.next_u64() % rows as u64) as usize;
        }
        if let Some(p) = estimate(&resample) {
            for (s, v) in samples.iter_mut().zip(p) {
                s.push(v);
            }
        }
    }
    samples
        .into_iter()
        .map(|mut s| {
            if s.is_empty() {
                return [f64::NAN, f64::NAN];
            }
            s.sort_by(f64::total_cmp);
            let at = |q: f64| s[((q * (s.len() - 1) as f64).round() as usize).min(s.len() - 1)];
            [at(0.025), at(0.975)]
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn logit_correct(p: f64, from: f64, to: f64) -> f64 {
        let mut row = [p.ln(), (1.0 - p).ln()];
        correct_row(&mut row, &[from, 1.0 - from], &[to, 1.0 - to]);
        row[0].exp()
    }

    #[test]
    fn closed_forms() {
        // A posterior of 0.9 at training prior 0.5 moved to 0.1: the odds
        // 9 × (0.1/0.9)/(0.5/0.5) = 1, so exactly 0.5.
        approx::assert_relative_eq!(logit_correct(0.9, 0.5, 0.1), 0.5, max_relative = 1e-12);
        // 0.2 at 0.3 moved to 0.05: odds 0.25 × (0.05/0.95)/(0.3/0.7) = 7/228,
        // so p = 7/235.
        approx::assert_relative_eq!(logit_correct(0.2, 0.3, 0.05), 7.0 / 235.0, max_relative = 1e-12);
        // A correction followed by its inverse is the identity.
        for p in [1e-9, 0.01, 0.3, 0.77, 1.0 - 1e-9] {
            let there = logit_correct(p, 0.1, 0.6);
            approx::assert_relative_eq!(logit_correct(there, 0.6, 0.1), p, max_relative = 1e-9);
        }
    }

    #[test]
    fn em_recovers_a_known_shift() {
        // Rows from two known Gaussian classes (unit variance, means 0 and 2)
        // at a new prior of 0.2; posteriors computed exactly under 0.5.
        let mut rng = Rng::new(4);
        let n = 20_000;
        let mut lp = Vec::with_capacity(2 * n);
        for _ in 0..n {
            let positive = rng.bernoulli(0.2);
            let x = rng.normal() + if positive { 2.0 } else { 0.0 };
            let llr = 2.0 * x - 2.0; // log N(x; 2, 1) − log N(x; 0, 1)
            let mut row = [llr, 0.0];
            normalise_log(&mut row);
            lp.extend_from_slice(&row);
        }
        let e = em(&lp, 2, &[0.5, 0.5], None, EM_TOLERANCE);
        assert!(e.converged);
        assert!((e.prior[0] - 0.2).abs() < 0.015, "{:?}", e.prior);
        assert!(e.log_likelihood_ratio > 0.0);
    }

    #[test]
    fn bbse_inverts_the_confusion() {
        // A classifier with 80% accuracy on each class, training prior 0.5.
        let c = vec![vec![0.4, 0.1], vec![0.1, 0.4]];
        // At a new prior (0.2, 0.8): μ = (0.8·0.2 + 0.2·0.8, ...) = (0.32, 0.68).
        let est = bbse(&c, &[0.32, 0.68], &[0.5, 0.5]).unwrap();
        approx::assert_relative_eq!(est.prior[0], 0.2, max_relative = 1e-12);
        assert!(!est.clipped && est.condition_number > 1.0);
    }
}
