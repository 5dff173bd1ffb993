//! Rank metrics: ROC AUC with DeLong's variance, the paired DeLong test,
//! KS, and the ROC and precision–recall curves — all from one sort.
//!
//! Scores are sorted once; tied scores form a group that counts one half
//! everywhere. For each positive the placement value V₁₀ is the (weighted)
//! share of negatives below it, plus half those tied; for each negative V₀₁
//! is the share of positives above it, plus half those tied. Then AUC is the
//! weighted mean of V₁₀, and DeLong, DeLong & Clarke-Pearson (1988),
//! "Comparing the areas under two or more correlated receiver operating
//! characteristic curves", Biometrics 44(3), give
//! var(AUC) = S₁₀/n₁ + S₀₁/n₀ from the sample variances of the placements.
//! This is the O(n log n) form of Sun & Xu (2014), IEEE Signal Processing
//! Letters 21(11); the AUC and its variance come from the same placements,
//! so they cannot disagree on ties. Counts are f64 (no 32-bit overflow at
//! millions of rows). Weights are frequency weights.
//!
//! Higher scores mean "more likely positive"; nothing here guesses the
//! direction, and an AUC below 0.5 is reported as it is.

use serde::Serialize;

/// Placement values and the AUC of one score.
#[derive(Debug, Clone)]
pub struct Placements {
    /// The AUC (ties count one half).
    pub auc: f64,
    /// V₁₀ for each positive, in row order of the positives.
    pub positive: Vec<f64>,
    /// V₀₁ for each negative, in row order of the negatives.
    pub negative: Vec<f64>,
    /// Weights of the positives, same order.
    pub positive_weights: Vec<f64>,
    /// Weights of the negatives, same order.
    pub negative_weights: Vec<f64>,
}

/// Row indices sorted by score, ascending (ties in row order). Sorting
/// (score, row) pairs keeps the keys in cache and needs no stable sort.
pub fn sort_by_score(scores: &[f64]) -> Vec<usize> {
    let mut keyed: Vec<(f64, u32)> = scores.iter().enumerate().map(|(i, &s)| (s, i as u32)).collect();
    keyed.sort_unstable_by(|a, b| a.0.total_cmp(&b.0).then(a.1.cmp(&b.1)));
    keyed.into_iter().map(|(_, i)| i as usize).collect()
}

/// Placement values of `scores` for the labels `positive`.
pub fn placements(scores: &[f64], positive: &[bool], weights: Option<&[f64]>) -> Placements {
    placements_sorted(scores, positive, weights, &sort_by_score(scores))
}

/// [`placements`] given the order of [`sort_by_score`].
pub fn placements_sorted(scores: &[f64], positive: &[bool], weights: Option<&[f64]>, order: &[usize]) -> Placements {
    let n = scores.len();
    let w = |i: usize| weights.map_or(1.0, |w| w[i]);
    let total_positive: f64 = (0..n).filter(|&i| positive[i]).map(w).sum();
    let total_negative: f64 = (0..n).filter(|&i| !positive[i]).map(w).sum();
    let mut v10 = vec![0.0; n];
    let mut v01 = vec![0.0; n];
    let (mut negatives_below, mut positives_below) = (0.0, 0.0);
    let mut start = 0;
    while start < n {
        let mut end = start + 1;
        while end < n && scores[order[end]] == scores[order[start]] {
            end += 1;
        }
        let (mut group_positive, mut group_negative) = (0.0, 0.0);
        for &i in &order[start..end] {
            if positive[i] {
                group_positive += w(i);
            } else {
                group_negative += w(i);
            }
        }
        let positives_above = total_positive - positives_below - group_positive;
        for &i in &order[start..end] {
            if positive[i] {
                v10[i] = (negatives_below + 0.5 * group_negative) / total_negative;
            } else {
                v01[i] = (positives_above + 0.5 * group_positive) / total_positive;
            }
        }
        negatives_below += group_negative;
        positives_below += group_positive;
        start = end;
    }
    let mut result = Placements {
        auc: 0.0,
        positive: Vec::new(),
        negative: Vec::new(),
        positive_weights: Vec::new(),
        negative_weights: Vec::new(),
    };
    for i in 0..n {
        if positive[i] {
            result.positive.push(v10[i]);
            result.positive_weights.push(w(i));
        } else {
            result.negative.push(v01[i]);
            result.negative_weights.push(w(i));
        }
    }
    result.auc = result.positive.iter().zip(&result.positive_weights).map(|(v, w)| v * w).sum::<f64>() / total_positive;
    result
}

fn weighted_covariance(a: &[f64], b: &[f64], weights: &[f64], mean_a: f64, mean_b: f64) -> Option<f64> {
    let total: f64 = weights.iter().sum();
    if total <= 1.0 {
        return None;
    }
    let s: f64 = a.iter().zip(b).zip(weights).map(|((x, y), w)| w * (x - mean_a) * (y - mean_b)).sum();
    Some(s / (total - 1.0))
}

impl Placements {
    /// DeLong's variance of the AUC; `None` with fewer than two rows in a class.
    pub fn variance(&self) -> Option<f64> {
        self.covariance(self)
    }

    /// DeLong's covariance of this AUC and another score's AUC on the same rows.
    pub fn covariance(&self, other: &Placements) -> Option<f64> {
        let n1: f64 = self.positive_weights.iter().sum();
        let n0: f64 = self.negative_weights.iter().sum();
        let s10 = weighted_covariance(&self.positive, &other.positive, &self.positive_weights, self.auc, other.auc)?;
        let s01 = weighted_covariance(&self.negative, &other.negative, &self.negative_weights, self.auc, other.auc)?;
        Some(s10 / n1 + s01 / n0)
    }
}

/// The paired DeLong test of two AUCs on the same rows.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct PairedAuc {
    /// AUC(a) − AUC(b).
    pub auc_diff: f64,
    /// Standard error of the difference.
    pub se: f64,
    /// The difference over its standard error.
    pub z: f64,
    /// Two-sided p-value.
    pub p_value: f64,
}

/// DeLong's z-test of AUC(a) = AUC(b): z = (A − B)/√(var A + var B − 2 cov).
pub fn paired_delong(a: &Placements, b: &Placements) -> Option<PairedAuc> {
    let variance = a.variance()? + b.variance()? - 2.0 * a.covariance(b)?;
    let difference = a.auc - b.auc;
    let se = variance.max(0.0).sqrt();
    let z = if se > 0.0 { difference / se } else { 0.0 };
    Some(PairedAuc { auc_diff: difference, se, z, p_value: crate::tails::two_sided_p(z) })
}

/// One point of a curve.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct CurvePoint {
    /// The score threshold (rows with score ≥ threshold are flagged).
    pub threshold: f64,
    /// x: false-positive rate (ROC) or recall (precision–recall).
    pub x: f64,
    /// y: true-positive rate (ROC) or precision (precision–recall).
    pub y: f64,
}

/// Sweep results from the highest score down: one entry per distinct
/// score, with the weighted positives and negatives flagged at that
/// threshold (score ≥ threshold).
#[derive(Debug, Clone)]
pub struct Sweep {
    /// Distinct thresholds, descending.
    pub thresholds: Vec<f64>,
    /// Weighted positives with score ≥ threshold.
    pub true_positives: Vec<f64>,
    /// Weighted negatives with score ≥ threshold.
    pub false_positives: Vec<f64>,
    /// Total weighted positives.
    pub positives: f64,
    /// Total weighted negatives.
    pub negatives: f64,
}

/// The threshold sweep of a score.
pub fn sweep(scores: &[f64], positive: &[bool], weights: Option<&[f64]>) -> Sweep {
    sweep_sorted(scores, positive, weights, &sort_by_score(scores))
}

/// [`sweep`] given the order of [`sort_by_score`].
pub fn sweep_sorted(scores: &[f64], positive: &[bool], weights: Option<&[f64]>, order: &[usize]) -> Sweep {
    let w = |i: usize| weights.map_or(1.0, |w| w[i]);
    let mut result = Sweep {
        thresholds: Vec::new(),
        true_positives: Vec::new(),
        false_positives: Vec::new(),
        positives: 0.0,
        negatives: 0.0,
    };
    let (mut tp, mut fp) = (0.0, 0.0);
    let mut k = order.len();
    while k > 0 {
        let threshold = scores[order[k - 1]];
        while k > 0 && scores[order[k - 1]] == threshold {
            let i = order[k - 1];
            if positive[i] {
                tp += w(i);
            } else {
                fp += w(i);
            }
            k -= 1;
        }
        result.thresholds.push(threshold);
        result.true_positives.push(tp);
        result.false_positives.push(fp);
    }
    result.positives = tp;
    result.negatives = fp;
    result
}

impl Sweep {
    /// KS = max over thresholds of TPR − FPR, and the threshold where it is
    /// reached.
    pub fn ks(&self) -> (f64, f64) {
        let mut best = (0.0, f64::INFINITY);
        for i in 0..self.thresholds.len() {
            let gap = self.true_positives[i] / self.positives - self.false_positives[i] / self.negatives;
            if gap > best.0 {
                best = (gap, self.thresholds[i]);
            }
        }
        best
    }

    /// Average precision Σ (Rₖ − Rₖ₋₁)·Pₖ over thresholds from the top
    /// (the step-wise definition scikit-learn uses).
    pub fn average_precision(&self) -> f64 {
        let mut previous_recall = 0.0;
        let mut ap = 0.0;
        for i in 0..self.thresholds.len() {
            let recall = self.true_positives[i] / self.positives;
            let precision = self.true_positives[i] / (self.true_positives[i] + self.false_positives[i]);
            ap += (recall - previous_recall) * precision;
            previous_recall = recall;
        }
        ap
    }

    /// The ROC curve, thinned to at most `points` points (always keeping
    /// the ends), starting at (0, 0).
    pub fn roc(&self, points: usize) -> Vec<CurvePoint> {
        let mut curve = vec![CurvePoint { threshold: f64::INFINITY, x: 0.0, y: 0.0 }];
        let n = self.thresholds.len();
        let step = (n / points.max(1)).max(1);
        for i in (0..n).filter(|i| i % step == 0 || *i == n - 1) {
            curve.push(CurvePoint {
                threshold: self.thresholds[i],
                x: self.false_positives[i] / self.negatives,
                y: self.true_positives[i] / self.positives,
            });
        }
        curve
    }

    /// The precision–recall curve, thinned like [`Sweep::roc`].
    pub fn precision_recall(&self, points: usize) -> Vec<CurvePoint> {
        let n = self.thresholds.len();
        let step = (n / points.max(1)).max(1);
        (0..n)
            .filter(|i| i % step == 0 || *i == n - 1)
            .map(|i| CurvePoint {
                threshold: self.thresholds[i],
                x: self.true_positives[i] / self.positives,
                y: self.true_positives[i] / (self.true_positives[i] + self.false_positives[i]),
            })
            .collect()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Hanley & McNeil (1982), "The meaning and use of the area under a
    /// receiver operating characteristic (ROC) curve", Radiology 143:29–36,
    /// Table I: five-point ratings of 58 normal and 51 abnormal cases.
    fn hanley_mcneil() -> (Vec<f64>, Vec<bool>) {
        let normal = [33, 6, 6, 11, 2];
        let abnormal = [3, 2, 2, 11, 33];
        let (mut scores, mut labels) = (Vec::new(), Vec::new());
        for rating in 0..5 {
            for _ in 0..normal[rating] {
                scores.push(rating as f64 + 1.0);
                labels.push(false);
            }
            for _ in 0..abnormal[rating] {
                scores.push(rating as f64 + 1.0);
                labels.push(true);
            }
        }
        (scores, labels)
    }

    #[test]
    fn hanley_mcneil_table_one() {
        let (scores, labels) = hanley_mcneil();
        let p = placements(&scores, &labels, None);
        // AUC = 1321/1479 = 0.893171 (Hanley & McNeil 1982, Table I).
        approx::assert_relative_eq!(p.auc, 1321.0 / 1479.0, max_relative = 1e-12);
        // DeLong SE 0.030724 and 95% CI 0.83295–0.95339, as general-purpose
        // statistics packages report for these data.
        let se = p.variance().unwrap().sqrt();
        assert!((se - 0.030724).abs() < 5e-7, "{se}");
        assert!((p.auc - 1.959964 * se - 0.83295).abs() < 5e-6);
        assert!((p.auc + 1.959964 * se - 0.95339).abs() < 5e-6);
    }

    #[test]
    fn properties() {
        let (scores, labels) = hanley_mcneil();
        // A monotone transform leaves AUC and KS exactly unchanged.
        let transformed: Vec<f64> = scores.iter().map(|s| (3.0 * s).exp() - 7.0).collect();
        assert_eq!(placements(&scores, &labels, None).auc, placements(&transformed, &labels, None).auc);
        assert_eq!(sweep(&scores, &labels, None).ks().0, sweep(&transformed, &labels, None).ks().0);
        // A perfectly separating score: AUC 1, DeLong variance 0.
        let perfect: Vec<f64> = labels.iter().map(|&l| if l { 1.0 } else { 0.0 }).collect();
        let p = placements(&perfect, &labels, None);
        assert_eq!(p.auc, 1.0);
        assert_eq!(p.variance(), Some(0.0));
        // KS is the largest TPR − FPR over thresholds, found by brute force.
        let s = sweep(&scores, &labels, None);
        let mut best: f64 = 0.0;
        for t in [1.0, 2.0, 3.0, 4.0, 5.0] {
            let tpr = (0..scores.len()).filter(|&i| labels[i] && scores[i] >= t).count() as f64 / 51.0;
            let fpr = (0..scores.len()).filter(|&i| !labels[i] && scores[i] >= t).count() as f64 / 58.0;
            best = best.max(tpr - fpr);
        }
        approx::assert_relative_eq!(s.ks().0, best, max_relative = 1e-12);
        // Weight 2 equals a duplicated row.
        let weights: Vec<f64> = (0..scores.len()).map(|i| if i % 3 == 0 { 2.0 } else { 1.0 }).collect();
        let (mut ds, mut dl) = (Vec::new(), Vec::new());
        for i in 0..scores.len() {
            for _ in 0..weights[i] as usize {
                ds.push(scores[i]);
                dl.push(labels[i]);
            }
        }
        let a = placements(&scores, &labels, Some(&weights));
        let b = placements(&ds, &dl, None);
        approx::assert_relative_eq!(a.auc, b.auc, max_relative = 1e-12);
        approx::assert_relative_eq!(a.variance().unwrap(), b.variance().unwrap(), max_relative = 1e-12);
    }

    #[test]
    fn a_million_rows_do_not_overflow() {
        let n = 1_000_000;
        let scores: Vec<f64> = (0..n).map(|i| ((i * 7919) % 1000) as f64).collect();
        let labels: Vec<bool> = (0..n).map(|i| (i * 7919) % 1000 >= 400 && i % 2 == 0).collect();
        let p = placements(&scores, &labels, None);
        assert!(p.auc > 0.5 && p.auc < 1.0 && p.variance().unwrap() > 0.0);
    }
}
