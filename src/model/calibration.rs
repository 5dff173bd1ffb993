//! Calibration maps from a score (the log posterior odds of the positive
//! class) to a probability, fitted on held-out predictions.
//!
//! - Platt (1999), "Probabilistic outputs for support vector machines and
//!   comparisons to regularized likelihood methods": p = 1/(1 + exp(A·f + B)),
//!   fitted to the targets (N₊ + 1)/(N₊ + 2) for positives and 1/(N₋ + 2)
//!   for negatives, by Newton's method with backtracking (the safeguarded
//!   form of Lin, Lin & Weng 2007, "A note on Platt's probabilistic outputs
//!   for support vector machines", Machine Learning 68(3)).
//! - Isotonic regression by pool-adjacent-violators (Ayer et al. 1955;
//!   Barlow et al. 1972): the weighted least-squares non-decreasing fit.
//!   Applied as a piecewise-constant step: a new score takes the value of
//!   the last block that starts at or below it (the first block's value
//!   below the first breakpoint).

use serde::{Deserialize, Serialize};

/// A fitted calibration map.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(tag = "method", rename_all = "kebab-case")]
pub enum CalibrationMap {
    /// p = 1/(1 + exp(a·f + b)).
    Platt {
        /// A.
        a: f64,
        /// B.
        b: f64,
    },
    /// A non-decreasing step function.
    Isotonic {
        /// The lowest score of each block, increasing.
        breakpoints: Vec<f64>,
        /// The block's fitted probability, non-decreasing.
        values: Vec<f64>,
    },
}

impl CalibrationMap {
    /// The calibrated probability of a score.
    pub fn apply(&self, score: f64) -> f64 {
        match self {
            CalibrationMap::Platt { a, b } => 1.0 / (1.0 + (a * score + b).exp()),
            CalibrationMap::Isotonic { breakpoints, values } => {
                let block = breakpoints.partition_point(|&x| x <= score);
                values[block.saturating_sub(1).min(values.len().saturating_sub(1))]
            }
        }
    }

    /// Checks shapes and values (used when a model file is loaded).
    pub fn validate(&self) -> Result<(), String> {
        match self {
            CalibrationMap::Platt { a, b } if a.is_finite() && b.is_finite() => Ok(()),
            CalibrationMap::Isotonic { breakpoints, values }
                if !values.is_empty()
                    && breakpoints.len() == values.len()
                    && breakpoints.windows(2).all(|w| w[0] < w[1])
                    && values.iter().all(|v| (0.0..=1.0).contains(v)) =>
            {
                Ok(())
            }
            _ => Err("the calibration map is malformed".into()),
        }
    }
}

/// Pool-adjacent-violators: the non-decreasing sequence closest to `y` in
/// weighted least squares, for values already in score order.
pub fn pool_adjacent_violators(y: &[f64], w: &[f64]) -> Vec<f64> {
    // Blocks as (weighted sum, weight, length).
    let mut blocks: Vec<(f64, f64, usize)> = Vec::with_capacity(y.len());
    for (&v, &weight) in y.iter().zip(w) {
        blocks.push((v * weight, weight, 1));
        while blocks.len() > 1 {
            let n = blocks.len();
            let (s1, w1, _) = blocks[n - 2];
            let (s2, w2, _) = blocks[n - 1];
            if s1 / w1 > s2 / w2 {
                let (_, _, l2) = blocks[n - 1];
                let last = blocks.pop();
                if let (Some(previous), Some(_)) = (blocks.last_mut(), last) {
                    previous.0 += s2;
                    previous.1 += w2;
                    previous.2 += l2;
                }
            } else {
                break;
            }
        }
    }
    blocks.iter().flat_map(|&(s, w, l)| std::iter::repeat_n(s / w, l)).collect()
}

/// Fits an isotonic map of `scores` to the labels.
pub fn fit_isotonic(scores: &[f64], positive: &[bool], weights: Option<&[f64]>) -> CalibrationMap {
    let mut order: Vec<usize> = (0..scores.len()).collect();
    order.sort_by(|&a, &b| scores[a].total_cmp(&scores[b]).then(a.cmp(&b)));
    // Tied scores form one point first, so a tie never straddles blocks.
    let (mut xs, mut ys, mut ws) = (Vec::new(), Vec::new(), Vec::new());
    for &i in &order {
        let w = weights.map_or(1.0, |w| w[i]);
        let y = f64::from(u8::from(positive[i]));
        match xs.last() {
            Some(&x) if x == scores[i] => {
                let last = ys.len() - 1;
                let total: f64 = ws[last] + w;
                ys[last] = (ys[last] * ws[last] + y * w) / total;
                ws[last] = total;
            }
            _ => {
                xs.push(scores[i]);
                ys.push(y);
                ws.push(w);
            }
        }
    }
    let fitted = pool_adjacent_violators(&ys, &ws);
    let (mut breakpoints, mut values) = (Vec::new(), Vec::new());
    for (x, v) in xs.iter().zip(&fitted) {
        if values.last() != Some(v) {
            breakpoints.push(*x);
            values.push(*v);
        }
    }
    CalibrationMap::Isotonic { breakpoints, values }
}

/// Fits Platt's map p = 1/(1 + exp(A·f + B)) to the labels.
pub fn fit_platt(scores: &[f64], positive: &[bool], weights: Option<&[f64]>) -> CalibrationMap {
    let w = |i: usize| weights.map_or(1.0, |w| w[i]);
    let n_pos: f64 = (0..scores.len()).filter(|&i| positive[i]).map(w).sum();
    let n_neg: f64 = (0..scores.len()).filter(|&i| !positive[i]).map(w).sum();
    let (high, low) = ((n_pos + 1.0) / (n_pos + 2.0), 1.0 / (n_neg + 2.0));
    let target: Vec<f64> = positive.iter().map(|&p| if p { high } else { low }).collect();
    // Cross-entropy of the targets at (A, B), written stably.
    let objective = |a: f64, b: f64| -> f64 {
        (0..scores.len())
            .map(|i| {
                let f = a * scores[i] + b;
                let t = target[i];
                w(i) * if f >= 0.0 { t * f + (-f).exp().ln_1p() } else { (t - 1.0) * f + f.exp().ln_1p() }
            })
            .sum()
    };
    let (mut a, mut b) = (0.0, ((n_neg + 1.0) / (n_pos + 1.0)).ln());
    let mut value = objective(a, b);
    for _ in 0..100 {
        let (mut g1, mut g2, mut h11, mut h22, mut h21) = (0.0, 0.0, 1e-12, 1e-12, 0.0);
        for i in 0..scores.len() {
            let f = a * scores[i] + b;
            let (p, q) = if f >= 0.0 {
                let e = (-f).exp();
                (e / (1.0 + e), 1.0 / (1.0 + e))
            } else {
                let e = f.exp();
                (1.0 / (1.0 + e), e / (1.0 + e))
            };
            let d2 = w(i) * p * q;
            h11 += scores[i] * scores[i] * d2;
            h22 += d2;
            h21 += scores[i] * d2;
            let d1 = w(i) * (target[i] - p);
            g1 += scores[i] * d1;
            g2 += d1;
        }
        if g1.abs() < 1e-12 && g2.abs() < 1e-12 {
            break;
        }
        let det = h11 * h22 - h21 * h21;
        let da = -(h22 * g1 - h21 * g2) / det;
        let db = -(-h21 * g1 + h11 * g2) / det;
        let slope = g1 * da + g2 * db;
        let mut step = 1.0;
        let mut improved = false;
        while step >= 1e-10 {
            let candidate = objective(a + step * da, b + step * db);
            if candidate < value + 1e-4 * step * slope {
                a += step * da;
                b += step * db;
                value = candidate;
                improved = true;
                break;
            }
            step /= 2.0;
        }
        if !improved {
            break;
        }
    }
    CalibrationMap::Platt { a, b }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn pool_adjacent_violators_worked_examples() {
        // Worked by hand: each violation pooled into its weighted mean.
        let ones = [1.0; 7];
        assert_eq!(
            pool_adjacent_violators(&[3.0, 7.0, 5.0, 9.0, 8.0, 7.0, 10.0], &ones),
            vec![3.0, 6.0, 6.0, 8.0, 8.0, 8.0, 10.0]
        );
        assert_eq!(pool_adjacent_violators(&[23.0, 27.0, 25.0, 28.0], &ones[..4]), vec![23.0, 26.0, 26.0, 28.0]);
        // (18·1 + 17·1 + 12·3)/5 = 14.2 and (21·3 + 16·1)/4 = 19.75.
        let fitted = pool_adjacent_violators(&[18.0, 17.0, 12.0, 21.0, 16.0], &[1.0, 1.0, 3.0, 3.0, 1.0]);
        for (f, e) in fitted.iter().zip([14.2, 14.2, 14.2, 19.75, 19.75]) {
            approx::assert_relative_eq!(*f, e, max_relative = 1e-12);
        }
    }

    #[test]
    fn platt_reference_case() {
        // Scores (5, −4, 1), labels (1, 0, 0): A = −0.2026145, B = 0.6523667
        // (scipy and scikit-learn agree; the case scikit-learn's calibration
        // tests use). Absolute tolerance 1e-5, as the optimum is found by an
        // iterative method stopped on a gradient tolerance.
        let CalibrationMap::Platt { a, b } = fit_platt(&[5.0, -4.0, 1.0], &[true, false, false], None) else {
            panic!("platt");
        };
        assert!((a - -0.2026145).abs() < 1e-5, "{a}");
        assert!((b - 0.6523667).abs() < 1e-5, "{b}");
    }

    #[test]
    fn isotonic_maps_are_monotone_steps() {
        let scores = [-2.0, -1.0, 0.0, 0.0, 1.0, 2.0, 3.0];
        let labels = [false, true, false, false, true, false, true];
        let map = fit_isotonic(&scores, &labels, None);
        map.validate().unwrap();
        let applied: Vec<f64> = [-5.0, -1.5, 0.0, 0.5, 2.5, 9.0].iter().map(|&s| map.apply(s)).collect();
        assert!(applied.windows(2).all(|w| w[0] <= w[1]), "{applied:?}");
        assert_eq!(map.apply(-5.0), 0.0);
        assert_eq!(map.apply(9.0), 1.0);
    }
}
