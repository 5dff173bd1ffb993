//! Out-of-sample metrics of binary and multi-class posteriors, all with
//! frequency weights.
//!
//! Conventions (stated in every report):
//! - log loss = −(1/W)Σ w·log p(y), from log-posteriors (no clipping needed);
//! - binary Brier = (1/W)Σ w·(p − y)² in [0, 1]; multi-class Brier =
//!   (1/W)Σ w·Σₖ(pₖ − yₖ)² in [0, 2];
//! - rank metrics (AUC, KS, average precision) use the log posterior odds
//!   of the positive class, so no ties are created where probabilities
//!   round to 0 or 1; a prior correction or a monotone recalibration leaves
//!   them exactly unchanged;
//! - calibration: 10 equal-width bins of the predicted probability (empty
//!   bins kept, shown as empty); ECE = Σ (W_b/W)·|ō_b − p̄_b|; the Murphy
//!   (1973) decomposition Brier = reliability − resolution + uncertainty on
//!   those bins, plus the two within-bin terms of Stephenson, Coelho &
//!   Jolliffe (2008) that vanish when forecasts are constant within bins;
//!   calibration slope and intercept from a logistic recalibration on the
//!   log-odds (Cox 1958): slope b in logit P(y) = a + b·z, intercept a with
//!   b fixed at 1;
//! - Hosmer–Lemeshow: 10 groups of about equal weight by predicted
//!   probability, Σ (O − E)²/(E·(1 − E/n)), 8 degrees of freedom (Hosmer &
//!   Lemeshow 1980).

use serde::Serialize;

use crate::evaluate::roc::{placements, placements_sorted, sort_by_score, sweep_sorted, CurvePoint, Placements, Sweep};
use crate::tails::{chi_square_upper, NORMAL_975};

/// The shares of rows flagged at which precision, recall and lift are shown.
pub const ALERT_RATES: [f64; 4] = [0.001, 0.005, 0.01, 0.05];
/// Bins of the reliability table and ECE.
pub const CALIBRATION_BINS: usize = 10;
/// Bands of the gains table.
pub const GAINS_BANDS: usize = 10;

/// A confusion table at one threshold (flagged = predicted positive).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Confusion {
    /// What set the threshold: "p >= 0.5", "ks", "alert 1%".
    pub rule: String,
    /// The probability threshold (rows with p ≥ it are flagged).
    pub threshold: f64,
    /// Share of (weighted) rows flagged.
    pub flagged_share: f64,
    /// True positives.
    pub true_positives: f64,
    /// False positives.
    pub false_positives: f64,
    /// True negatives.
    pub true_negatives: f64,
    /// False negatives.
    pub false_negatives: f64,
    /// TP / (TP + FP).
    pub precision: f64,
    /// TP / (TP + FN): the capture rate.
    pub recall: f64,
    /// Harmonic mean of precision and recall.
    pub f1: f64,
    /// Precision over the base rate.
    pub lift: f64,
    /// Share of the positives' amount caught (with `--amount`).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub amount_capture: Option<f64>,
}

/// One bin of the reliability table.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ReliabilityBin {
    /// Lower edge of the predicted probability.
    pub low: f64,
    /// Upper edge.
    pub high: f64,
    /// Weighted rows.
    pub weight: f64,
    /// Mean predicted probability (absent when the bin is empty).
    pub mean_predicted: Option<f64>,
    /// Observed event rate (absent when the bin is empty).
    pub observed: Option<f64>,
}

/// The Murphy decomposition of the Brier score on binned forecasts.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct BrierDecomposition {
    /// Σ (W_b/W)(p̄_b − ō_b)².
    pub reliability: f64,
    /// Σ (W_b/W)(ō_b − ō)².
    pub resolution: f64,
    /// ō(1 − ō).
    pub uncertainty: f64,
    /// (1/W)Σ w(p − p̄_b)²: the within-bin variance of the forecasts.
    pub within_bin_variance: f64,
    /// −(2/W)Σ w(p − p̄_b)(y − ō_b): the within-bin covariance term.
    pub within_bin_covariance: f64,
}

/// One band of the gains table (highest scores first).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct GainsBand {
    /// Band number, 1 = highest scores.
    pub band: usize,
    /// Lowest probability in the band.
    pub min_probability: f64,
    /// Highest probability in the band.
    pub max_probability: f64,
    /// Weighted rows.
    pub count: f64,
    /// Weighted events.
    pub events: f64,
    /// Events / count.
    pub event_rate: f64,
    /// Non-events per event (the trade's good:bad odds).
    pub odds: Option<f64>,
    /// Share of all events in this band and those above.
    pub cumulative_capture: f64,
}

/// The Hosmer–Lemeshow test.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct HosmerLemeshow {
    /// The statistic.
    pub statistic: f64,
    /// Degrees of freedom (groups − 2).
    pub df: f64,
    /// Upper chi-square tail.
    pub p_value: f64,
}

/// The name of the AUC interval's construction, as the JSON gives it.
pub const AUC_INTERVAL: &str = "logit";

/// The 95% interval of an AUC from its (DeLong) standard error, made on the
/// logit scale and mapped back, so it stays inside [0, 1]: logit(A) ±
/// 1.96·SE/(A(1 − A)), the delta method's standard error of logit(A)
/// (common practice; Pepe 2003, *The Statistical Evaluation of Medical
/// Tests for Classification and Prediction*, ch. 5, from memory). An AUC
/// of exactly 0 or 1 gives the point itself.
pub fn auc_interval(auc: f64, se: f64) -> (f64, f64) {
    if !(auc > 0.0 && auc < 1.0 && se.is_finite()) {
        return (auc, auc);
    }
    let centre = (auc / (1.0 - auc)).ln();
    let half = NORMAL_975 * se / (auc * (1.0 - auc));
    let back = |z: f64| 1.0 / (1.0 + (-z).exp());
    (back(centre - half), back(centre + half))
}

/// Every figure for one binary score.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct BinaryMetrics {
    /// Weighted rows.
    pub rows: f64,
    /// Weighted share of positives.
    pub base_rate: f64,
    /// ROC AUC.
    pub auc: f64,
    /// DeLong standard error.
    pub auc_se: Option<f64>,
    /// Lower end of the 95% interval (see [`auc_interval`]).
    pub auc_ci_low: Option<f64>,
    /// Upper end.
    pub auc_ci_high: Option<f64>,
    /// How the interval is made: `logit` (see [`auc_interval`]).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub auc_interval: Option<&'static str>,
    /// 2·AUC − 1.
    pub gini: f64,
    /// max (TPR − FPR).
    pub ks: f64,
    /// The probability at which KS is reached.
    pub ks_threshold: f64,
    /// Average precision.
    pub average_precision: f64,
    /// Log loss (probability scores only).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub log_loss: Option<f64>,
    /// Brier score.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub brier: Option<f64>,
    /// Its Murphy decomposition.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub brier_decomposition: Option<BrierDecomposition>,
    /// Calibration intercept (slope fixed at 1).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub calibration_intercept: Option<f64>,
    /// Calibration slope.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub calibration_slope: Option<f64>,
    /// Expected calibration error (10 equal-width bins).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub ece: Option<f64>,
    /// The reliability table.
    #[serde(skip_serializing_if = "Vec::is_empty")]
    pub reliability: Vec<ReliabilityBin>,
    /// Hosmer–Lemeshow.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub hosmer_lemeshow: Option<HosmerLemeshow>,
    /// Confusion tables: at 0.5 and the KS point (probability scores), then
    /// at each alert rate.
    pub confusion: Vec<Confusion>,
    /// The gains table.
    pub gains: Vec<GainsBand>,
    /// ROC and precision–recall curves (for reports; not in JSON).
    #[serde(skip)]
    pub curves: Curves,
}

/// Points kept on each curve.
pub const CURVE_POINTS: usize = 400;

/// What a score is.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ScoreKind {
    /// Calibrated-looking probabilities: every metric.
    Probability,
    /// Points or grades: rank metrics only.
    Rank,
}

/// Inputs to [`binary_metrics`].
pub struct BinaryScores<'a> {
    /// Log posterior odds of the positive class (or any score with higher =
    /// more likely positive, for rank scores).
    pub log_odds: &'a [f64],
    /// Labels.
    pub positive: &'a [bool],
    /// Frequency weights.
    pub weights: Option<&'a [f64]>,
    /// Per-row amounts for amount-weighted capture.
    pub amounts: Option<&'a [f64]>,
    /// Probability or rank.
    pub kind: ScoreKind,
}

fn sigmoid(z: f64) -> f64 {
    if z >= 0.0 {
        1.0 / (1.0 + (-z).exp())
    } else {
        let e = z.exp();
        e / (1.0 + e)
    }
}

/// log σ(z), stably.
fn log_sigmoid(z: f64) -> f64 {
    if z >= 0.0 {
        -(-z).exp().ln_1p()
    } else {
        z - z.exp().ln_1p()
    }
}

/// Log-likelihood, gradient and Hessian of the recalibration model
/// logit P(y) = a + b·z at (a, b), in one parallel pass (chunks summed in
/// order, so the result does not depend on the thread count).
fn recalibration_pass(z: &[f64], y: &[bool], weights: Option<&[f64]>, a: f64, b: f64) -> [f64; 6] {
    use rayon::prelude::*;
    const CHUNK: usize = 16_384;
    let parts: Vec<[f64; 6]> = (0..z.len().div_ceil(CHUNK))
        .into_par_iter()
        .map(|c| {
            let mut acc = [0.0; 6];
            for i in c * CHUNK..((c + 1) * CHUNK).min(z.len()) {
                let w = weights.map_or(1.0, |w| w[i]);
                let eta = a + b * z[i];
                let p = sigmoid(eta);
                let r = w * (f64::from(u8::from(y[i])) - p);
                let v = w * p * (1.0 - p);
                acc[0] += w * log_sigmoid(if y[i] { eta } else { -eta });
                acc[1] += r;
                acc[2] += r * z[i];
                acc[3] += v;
                acc[4] += v * z[i];
                acc[5] += v * z[i] * z[i];
            }
            acc
        })
        .collect();
    let mut total = [0.0; 6];
    for p in parts {
        for k in 0..6 {
            total[k] += p[k];
        }
    }
    total
}

/// Logistic regression of y on (1, z) (`with_slope`) or on 1 with offset z:
/// returns (intercept, slope) by Newton's method with step-halving.
fn recalibrate(z: &[f64], y: &[bool], weights: Option<&[f64]>, with_slope: bool) -> Option<(f64, f64)> {
    let (mut a, mut b) = (0.0, 1.0);
    let mut current = recalibration_pass(z, y, weights, a, b);
    for _ in 0..100 {
        let [_, g0, g1, h00, h01, h11] = current;
        let (mut da, mut db) = if with_slope {
            let det = h00 * h11 - h01 * h01;
            if !(det.abs() > 0.0) {
                return None;
            }
            ((h11 * g0 - h01 * g1) / det, (h00 * g1 - h01 * g0) / det)
        } else {
            if !(h00 > 0.0) {
                return None;
            }
            (g0 / h00, 0.0)
        };
        let mut next = recalibration_pass(z, y, weights, a + da, b + db);
        let mut halvings = 0;
        while !(next[0] >= current[0] - 1e-12 * current[0].abs()) && halvings < 40 {
            da *= 0.5;
            db *= 0.5;
            next = recalibration_pass(z, y, weights, a + da, b + db);
            halvings += 1;
        }
        a += da;
        b += db;
        current = next;
        if !(a.is_finite() && b.is_finite()) {
            return None;
        }
        if da.abs().max(db.abs()) < 1e-10 {
            return Some((a, b));
        }
    }
    Some((a, b))
}

/// Every binary metric of one score.
pub fn binary_metrics(scores: &BinaryScores<'_>) -> BinaryMetrics {
    binary_metrics_with_placements(scores).0
}

/// [`binary_metrics`], and the placement values it computed (for paired
/// DeLong tests).
pub fn binary_metrics_with_placements(scores: &BinaryScores<'_>) -> (BinaryMetrics, Placements) {
    let n = scores.log_odds.len();
    let w = |i: usize| scores.weights.map_or(1.0, |w| w[i]);
    let total: f64 = (0..n).map(w).sum();
    let positives: f64 = (0..n).filter(|&i| scores.positive[i]).map(w).sum();
    let base_rate = positives / total;
    // One sort serves every rank figure.
    let order = sort_by_score(scores.log_odds);
    let placed: Placements = placements_sorted(scores.log_odds, scores.positive, scores.weights, &order);
    let se = placed.variance().map(f64::sqrt);
    let swept = sweep_sorted(scores.log_odds, scores.positive, scores.weights, &order);
    let (ks, ks_cut) = swept.ks();
    let probability = scores.kind == ScoreKind::Probability;
    let to_probability = |z: f64| if probability { sigmoid(z) } else { z };

    let curves = curves_of(&swept, CURVE_POINTS);
    let mut metrics = BinaryMetrics {
        rows: total,
        base_rate,
        auc: placed.auc,
        auc_se: se,
        auc_ci_low: se.map(|s| auc_interval(placed.auc, s).0),
        auc_ci_high: se.map(|s| auc_interval(placed.auc, s).1),
        auc_interval: se.map(|_| AUC_INTERVAL),
        gini: 2.0 * placed.auc - 1.0,
        ks,
        ks_threshold: to_probability(ks_cut),
        average_precision: swept.average_precision(),
        log_loss: None,
        brier: None,
        brier_decomposition: None,
        calibration_intercept: None,
        calibration_slope: None,
        ece: None,
        reliability: Vec::new(),
        hosmer_lemeshow: None,
        confusion: Vec::new(),
        gains: Vec::new(),
        curves,
    };

    let confusion_at = |rule: String, cut: f64| -> Confusion {
        let (mut tp, mut fp, mut amount_caught) = (0.0, 0.0, 0.0);
        for i in 0..n {
            if scores.log_odds[i] >= cut {
                if scores.positive[i] {
                    tp += w(i);
                    amount_caught += scores.amounts.map_or(0.0, |a| a[i] * w(i));
                } else {
                    fp += w(i);
                }
            }
        }
        let amount_total: f64 =
            scores.amounts.map_or(0.0, |a| (0..n).filter(|&i| scores.positive[i]).map(|i| a[i] * w(i)).sum());
        let precision = if tp + fp > 0.0 { tp / (tp + fp) } else { 0.0 };
        let recall = tp / positives;
        Confusion {
            rule,
            threshold: to_probability(cut),
            flagged_share: (tp + fp) / total,
            true_positives: tp,
            false_positives: fp,
            true_negatives: total - positives - fp,
            false_negatives: positives - tp,
            precision,
            recall,
            f1: if precision + recall > 0.0 { 2.0 * precision * recall / (precision + recall) } else { 0.0 },
            lift: precision / base_rate,
            amount_capture: scores.amounts.map(|_| if amount_total > 0.0 { amount_caught / amount_total } else { 0.0 }),
        }
    };
    if probability {
        metrics.confusion.push(confusion_at("p >= 0.5".into(), 0.0));
        metrics.confusion.push(confusion_at("ks".into(), ks_cut));
    }
    // Alert rates: the lowest threshold at which at most that share is flagged
    // (ties kept together, so the realised share is stated).
    for rate in ALERT_RATES {
        let mut cut = f64::INFINITY;
        for i in 0..swept.thresholds.len() {
            if (swept.true_positives[i] + swept.false_positives[i]) / total <= rate + 1e-12 {
                cut = swept.thresholds[i];
            } else {
                break;
            }
        }
        if cut.is_finite() {
            metrics.confusion.push(confusion_at(format!("alert {}%", rate * 100.0), cut));
        }
    }

    // Gains by bands of equal weight, highest scores first.
    let band_weight = total / GAINS_BANDS as f64;
    let mut cumulative_events = 0.0;
    let mut position = order.len();
    for band in 1..=GAINS_BANDS {
        let (mut count, mut events) = (0.0, 0.0);
        let (mut low, mut high) = (f64::INFINITY, f64::NEG_INFINITY);
        while position > 0 && (count < band_weight || band == GAINS_BANDS) {
            let i = order[position - 1];
            count += w(i);
            events += if scores.positive[i] { w(i) } else { 0.0 };
            low = low.min(scores.log_odds[i]);
            high = high.max(scores.log_odds[i]);
            position -= 1;
        }
        if count == 0.0 {
            continue;
        }
        cumulative_events += events;
        metrics.gains.push(GainsBand {
            band,
            min_probability: to_probability(low),
            max_probability: to_probability(high),
            count,
            events,
            event_rate: events / count,
            odds: (events > 0.0).then(|| (count - events) / events),
            cumulative_capture: cumulative_events / positives,
        });
    }

    if !probability {
        return (metrics, placed);
    }
    let p: Vec<f64> = scores.log_odds.iter().map(|&z| sigmoid(z)).collect();
    let y = |i: usize| f64::from(u8::from(scores.positive[i]));
    let log_loss = -(0..n)
        .map(|i| {
            w(i) * if scores.positive[i] { log_sigmoid(scores.log_odds[i]) } else { log_sigmoid(-scores.log_odds[i]) }
        })
        .sum::<f64>()
        / total;
    let brier = (0..n).map(|i| w(i) * (p[i] - y(i)).powi(2)).sum::<f64>() / total;
    metrics.log_loss = Some(log_loss);
    metrics.brier = Some(brier);

    // Reliability bins and the Murphy decomposition.
    let bin_of = |p: f64| ((p * CALIBRATION_BINS as f64) as usize).min(CALIBRATION_BINS - 1);
    let mut bw = [0.0; CALIBRATION_BINS];
    let mut bp = [0.0; CALIBRATION_BINS];
    let mut by = [0.0; CALIBRATION_BINS];
    for i in 0..n {
        let b = bin_of(p[i]);
        bw[b] += w(i);
        bp[b] += w(i) * p[i];
        by[b] += w(i) * y(i);
    }
    let (mut reliability, mut resolution, mut ece) = (0.0, 0.0, 0.0);
    for b in 0..CALIBRATION_BINS {
        let filled = bw[b] > 0.0;
        let (mean_p, observed) = if filled { (bp[b] / bw[b], by[b] / bw[b]) } else { (0.0, 0.0) };
        if filled {
            reliability += bw[b] * (mean_p - observed).powi(2) / total;
            resolution += bw[b] * (observed - base_rate).powi(2) / total;
            ece += bw[b] / total * (observed - mean_p).abs();
        }
        metrics.reliability.push(ReliabilityBin {
            low: b as f64 / CALIBRATION_BINS as f64,
            high: (b + 1) as f64 / CALIBRATION_BINS as f64,
            weight: bw[b],
            mean_predicted: filled.then_some(mean_p),
            observed: filled.then_some(observed),
        });
    }
    let (mut within_variance, mut within_covariance) = (0.0, 0.0);
    for i in 0..n {
        let b = bin_of(p[i]);
        if !(bw[b] > 0.0) {
            continue; // a bin of zero-weight rows contributes nothing
        }
        let (mean_p, observed) = (bp[b] / bw[b], by[b] / bw[b]);
        within_variance += w(i) * (p[i] - mean_p).powi(2) / total;
        within_covariance -= 2.0 * w(i) * (p[i] - mean_p) * (y(i) - observed) / total;
    }
    metrics.brier_decomposition = Some(BrierDecomposition {
        reliability,
        resolution,
        uncertainty: base_rate * (1.0 - base_rate),
        within_bin_variance: within_variance,
        within_bin_covariance: within_covariance,
    });
    metrics.ece = Some(ece);
    metrics.calibration_slope = recalibrate(scores.log_odds, scores.positive, scores.weights, true).map(|(_, b)| b);
    metrics.calibration_intercept =
        recalibrate(scores.log_odds, scores.positive, scores.weights, false).map(|(a, _)| a);

    // Hosmer–Lemeshow on 10 groups of about equal weight by predicted risk.
    let groups = 10;
    let group_weight = total / groups as f64;
    let mut statistic = 0.0;
    let mut used = 0;
    let mut position = 0;
    for g in 0..groups {
        let (mut count, mut observed, mut expected) = (0.0, 0.0, 0.0);
        while position < order.len() && (count < group_weight || g == groups - 1) {
            let i = order[position];
            count += w(i);
            observed += w(i) * y(i);
            expected += w(i) * p[i];
            position += 1;
        }
        if count > 0.0 && expected > 0.0 && expected < count {
            statistic += (observed - expected).powi(2) / (expected * (1.0 - expected / count));
            used += 1;
        }
    }
    if used > 2 {
        let df = (used - 2) as f64;
        metrics.hosmer_lemeshow = Some(HosmerLemeshow { statistic, df, p_value: chi_square_upper(statistic, df) });
    }
    (metrics, placed)
}

/// Curves for the report.
#[derive(Debug, Clone, PartialEq, Serialize, Default)]
pub struct Curves {
    /// ROC points.
    pub roc: Vec<CurvePoint>,
    /// Precision–recall points.
    pub precision_recall: Vec<CurvePoint>,
}

/// ROC and precision–recall curves of a sweep, thinned to about `points` points.
pub fn curves_of(s: &Sweep, points: usize) -> Curves {
    Curves { roc: s.roc(points), precision_recall: s.precision_recall(points) }
}

/// Multi-class figures: log loss, Brier, one-vs-rest AUCs and their macro mean.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct MulticlassMetrics {
    /// −(1/W)Σ w·log p(y).
    pub log_loss: f64,
    /// (1/W)Σ w·Σₖ(pₖ − yₖ)², in [0, 2].
    pub brier: f64,
    /// One-vs-rest AUC per class.
    pub auc_by_class: std::collections::BTreeMap<String, f64>,
    /// Their unweighted mean.
    pub auc_macro: f64,
}

/// Multi-class metrics from log-posteriors (rows × classes, row-major).
pub fn multiclass_metrics(
    log_posteriors: &ndarray::Array2<f64>,
    target: &[u32],
    weights: Option<&[f64]>,
    classes: &[String],
) -> MulticlassMetrics {
    let n = target.len();
    let k = classes.len();
    let w = |i: usize| weights.map_or(1.0, |w| w[i]);
    let total: f64 = (0..n).map(w).sum();
    let log_loss = -(0..n).map(|i| w(i) * log_posteriors[(i, target[i] as usize)]).sum::<f64>() / total;
    let brier = (0..n)
        .map(|i| {
            w(i) * (0..k)
                .map(|c| (log_posteriors[(i, c)].exp() - f64::from(u8::from(target[i] as usize == c))).powi(2))
                .sum::<f64>()
        })
        .sum::<f64>()
        / total;
    let mut auc_by_class = std::collections::BTreeMap::new();
    for (c, class) in classes.iter().enumerate() {
        let odds: Vec<f64> = (0..n)
            .map(|i| {
                let lp = log_posteriors[(i, c)];
                lp - (-lp.exp()).ln_1p()
            })
            .collect();
        let labels: Vec<bool> = target.iter().map(|&t| t as usize == c).collect();
        auc_by_class.insert(class.clone(), placements(&odds, &labels, weights).auc);
    }
    let auc_macro = auc_by_class.values().sum::<f64>() / k as f64;
    MulticlassMetrics { log_loss, brier, auc_by_class, auc_macro }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_auc_interval_is_made_on_the_logit_scale_and_stays_in_the_unit_interval() {
        // The closed form, evaluated in Python (math.log, math.exp):
        // logistic(logit(0.9) ∓ 1.959963984540054 · 0.05 / 0.09).
        let (low, high) = auc_interval(0.9, 0.05);
        assert!(approx::relative_eq!(low, 0.7518224354681983, max_relative = 1e-12), "{low}");
        assert!(approx::relative_eq!(high, 0.9639486410722317, max_relative = 1e-12), "{high}");
        // Near 1, where AUC ± 1.96 SE would pass 1 (0.99 + 0.039).
        let (low, high) = auc_interval(0.99, 0.02);
        assert!(approx::relative_eq!(low, 0.6537573999657866, max_relative = 1e-12), "{low}");
        assert!(approx::relative_eq!(high, 0.999807388563576, max_relative = 1e-12), "{high}");
        assert!(high < 1.0);
        assert_eq!(auc_interval(1.0, 0.0), (1.0, 1.0));
    }

    #[test]
    fn murphy_decomposition_is_exact_on_binned_forecasts() {
        // Forecasts constant within each calibration bin.
        let forecasts = [0.05, 0.05, 0.05, 0.35, 0.35, 0.75, 0.75, 0.75, 0.95, 0.95];
        let labels = [false, false, true, false, true, true, true, false, true, true];
        let z: Vec<f64> = forecasts.iter().map(|p: &f64| (p / (1.0 - p)).ln()).collect();
        let m = binary_metrics(&BinaryScores {
            log_odds: &z,
            positive: &labels,
            weights: None,
            amounts: None,
            kind: ScoreKind::Probability,
        });
        let d = m.brier_decomposition.unwrap();
        approx::assert_relative_eq!(
            d.reliability - d.resolution + d.uncertainty,
            m.brier.unwrap(),
            max_relative = 1e-12
        );
        assert!(d.within_bin_variance.abs() < 1e-15 && d.within_bin_covariance.abs() < 1e-15);
    }

    #[test]
    fn the_decomposition_adds_up_on_any_forecasts() {
        let mut rng = crate::demo::rng::Rng::new(5);
        let z: Vec<f64> = (0..2000).map(|_| 2.0 * rng.normal() - 1.0).collect();
        let labels: Vec<bool> = z.iter().map(|&z| rng.uniform() < sigmoid(0.8 * z)).collect();
        let m = binary_metrics(&BinaryScores {
            log_odds: &z,
            positive: &labels,
            weights: None,
            amounts: None,
            kind: ScoreKind::Probability,
        });
        let d = m.brier_decomposition.unwrap();
        let sum = d.reliability - d.resolution + d.uncertainty + d.within_bin_variance + d.within_bin_covariance;
        approx::assert_relative_eq!(sum, m.brier.unwrap(), max_relative = 1e-12);
        // Data made with slope 0.8 on the log-odds: the recalibration finds it.
        assert!((m.calibration_slope.unwrap() - 0.8).abs() < 0.15, "{:?}", m.calibration_slope);
        let capture: Vec<f64> = m.gains.iter().map(|g| g.cumulative_capture).collect();
        assert!(capture.windows(2).all(|w| w[0] <= w[1]) && (capture[capture.len() - 1] - 1.0).abs() < 1e-12);
    }
}
