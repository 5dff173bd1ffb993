//! The evaluation of out-of-fold scores side by side, with paired tests on
//! the same rows: DeLong's test of two correlated AUCs, seeded
//! paired-bootstrap intervals of the differences in log loss and Brier
//! score (with the first-order standard error beside them), McNemar's test
//! at the 0.5 rule, figures by segment, and the multi-class figures.

use ndarray::Array2;
use rayon::prelude::*;
use serde::Serialize;

use crate::data::Dataset;
use crate::evaluate::metrics::{
    binary_metrics_with_placements, multiclass_metrics, BinaryMetrics, BinaryScores, Curves, MulticlassMetrics,
    ScoreKind,
};
use crate::evaluate::roc::{paired_delong, placements, Placements};
use crate::model::Family;
use crate::rng::Rng;
use crate::tails::{chi_square_upper, NORMAL_975};

use crate::evaluate::cost_figures::CostFigures;
use crate::evaluate::cross_validation::Predictions;

/// The evaluation of one candidate (or one external score).
#[derive(Debug, Clone, Serialize)]
pub struct ResultEntry {
    /// Unique label.
    pub name: String,
    /// The family (absent for `judge`).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub family: Option<String>,
    /// Binary metrics (on the first repeat's out-of-fold predictions; with
    /// repeats, `auc` and `auc_se` are the means over repeats).
    pub metrics: serde_json::Value,
    /// AUC of each repeat, with repeats.
    #[serde(skip_serializing_if = "Vec::is_empty")]
    pub auc_by_repeat: Vec<f64>,
    /// Fit warnings.
    #[serde(skip_serializing_if = "Vec::is_empty")]
    pub warnings: Vec<String>,
    /// The full binary metrics, for reports.
    #[serde(skip)]
    pub binary: Option<BinaryMetrics>,
    /// Curves, for reports.
    #[serde(skip)]
    pub curves: Option<Curves>,
    /// Log-odds of the positive class and labels of (a systematic sample of
    /// at most 20,000 of) the tested rows, for score-distribution charts
    /// (first repeat).
    #[serde(skip)]
    pub scores: Vec<(f64, bool)>,
}

/// A paired comparison of two results on the same rows.
#[derive(Debug, Clone, Serialize)]
pub struct PairedEntry {
    /// First.
    pub a: String,
    /// Second.
    pub b: String,
    /// AUC(a) − AUC(b).
    pub auc_diff: f64,
    /// DeLong's z (with the sign of the difference).
    pub z: f64,
    /// Two-sided p-value.
    pub p_value: f64,
    /// Log loss(a) − log loss(b).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub log_loss_diff: Option<f64>,
    /// First-order standard error of that difference (per-row SD / √n).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub log_loss_diff_se: Option<f64>,
    /// 95% interval of the log-loss difference (see `interval_method`).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub log_loss_diff_ci: Option<[f64; 2]>,
    /// Brier(a) − Brier(b).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub brier_diff: Option<f64>,
    /// 95% interval of the Brier difference.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub brier_diff_ci: Option<[f64; 2]>,
    /// How the intervals were found: a seeded paired bootstrap, or the
    /// normal interval from the first-order standard error.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub interval_method: Option<String>,
    /// McNemar's statistic at the 0.5 rule (continuity-corrected).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub mcnemar_statistic: Option<f64>,
    /// Its p-value (χ², 1 df).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub mcnemar_p_value: Option<f64>,
}

/// A binary score on the tested rows, ready for metrics.
#[derive(Debug, Clone)]
pub struct TestedScore {
    /// Name.
    pub name: String,
    /// Family, when a fitted candidate.
    pub family: Option<Family>,
    /// Per repeat: the tested rows' log odds of the positive class.
    pub log_odds: Vec<Vec<f64>>,
    /// Per repeat: the tested rows' indices.
    pub rows: Vec<Vec<usize>>,
    /// Probability or rank.
    pub kind: ScoreKind,
    /// Warnings.
    pub warnings: Vec<String>,
}

/// Log odds of class `positive` from a row of log-posteriors.
pub fn log_odds_of(row: &[f64], positive: usize) -> f64 {
    if row.len() == 2 {
        return row[positive] - row[1 - positive];
    }
    // log(1 − p) from the other classes, in log space.
    let others = || row.iter().enumerate().filter(|(i, _)| *i != positive).map(|(_, v)| *v);
    let max = others().fold(f64::NEG_INFINITY, f64::max);
    let rest = max + others().map(|v| (v - max).exp()).sum::<f64>().ln();
    row[positive] - rest
}

impl TestedScore {
    /// From out-of-fold predictions.
    pub fn from_predictions(p: &Predictions, positive: usize) -> Self {
        let mut log_odds = Vec::new();
        let mut rows = Vec::new();
        for lp in &p.log_posteriors {
            let mut lo = Vec::new();
            let mut rs = Vec::new();
            let k = lp.ncols();
            if let Some(values) = lp.as_slice() {
                for (i, row) in values.chunks(k).enumerate() {
                    if !row[0].is_nan() {
                        lo.push(log_odds_of(row, positive));
                        rs.push(i);
                    }
                }
            }
            log_odds.push(lo);
            rows.push(rs);
        }
        TestedScore {
            name: p.name.clone(),
            family: p.family,
            log_odds,
            rows,
            kind: ScoreKind::Probability,
            warnings: p.warnings.clone(),
        }
    }
}

/// Everything `compare` and `judge` report.
#[derive(Debug, Clone, Serialize)]
pub struct Evaluation {
    /// The positive class.
    pub positive: String,
    /// Rows in the data.
    pub rows: usize,
    /// Rows tested (per repeat).
    pub tested_rows: usize,
    /// How the rows were split.
    pub split: String,
    /// Repeats.
    pub repeats: usize,
    /// One entry per candidate or score.
    pub results: Vec<ResultEntry>,
    /// Pairwise comparisons.
    pub paired: Vec<PairedEntry>,
    /// Multi-class figures per candidate (three or more classes); in JSON
    /// they are part of each result's metrics.
    #[serde(skip)]
    pub multiclass: Vec<(String, MulticlassMetrics)>,
    /// Per-segment figures (`--by`).
    #[serde(skip_serializing_if = "Vec::is_empty")]
    pub segments: Vec<SegmentEntry>,
    /// What each result's decisions cost (`--costs`); in JSON they are part
    /// of each result's metrics.
    #[serde(skip)]
    pub costs: Vec<CostFigures>,
    /// The caution for credit and fraud decisions.
    pub caution: String,
}

/// The segment table's flag rule without costs.
pub const FLAG_AT_HALF: &str = "posterior of the positive class at least 0.5";

/// Figures of one result in one segment.
#[derive(Debug, Clone, Serialize)]
pub struct SegmentEntry {
    /// The segment column.
    pub column: String,
    /// The segment's value.
    pub segment: String,
    /// The result's name.
    pub name: String,
    /// Weighted rows.
    pub rows: f64,
    /// Event rate.
    pub base_rate: f64,
    /// AUC in the segment (absent when a class is missing there).
    pub auc: Option<f64>,
    /// Share of rows flagged at the 0.5 rule.
    pub flag_rate: f64,
    /// What counts as flagged: the 0.5 rule, or with costs the decisions.
    pub flag_rule: String,
    /// Mean predicted probability.
    pub mean_predicted: f64,
}

/// Above this many tested rows the default interval is the normal one from
/// the first-order standard error (exact to first order for a mean over
/// rows, and O(n)); the bootstrap costs rows × draws.
pub const BOOTSTRAP_ROW_LIMIT: usize = 200_000;

/// Options of an evaluation.
#[derive(Debug, Clone)]
pub struct EvaluationOptions<'a> {
    /// Labels of all rows (class index).
    pub target: &'a [u32],
    /// Index of the positive class.
    pub positive: usize,
    /// Class names.
    pub classes: &'a [String],
    /// Frequency weights of all rows.
    pub weights: Option<&'a [f64]>,
    /// Amounts of all rows.
    pub amounts: Option<&'a [f64]>,
    /// Bootstrap draws for paired intervals; `None`: 200 draws up to
    /// [`BOOTSTRAP_ROW_LIMIT`] tested rows, the normal interval above it;
    /// `Some(0)`: the normal interval.
    pub bootstrap: Option<usize>,
    /// Seed of the bootstrap.
    pub seed: u64,
    /// Segments: (column, value of each row).
    pub segments: Option<(&'a str, &'a [String])>,
    /// Split description.
    pub split: String,
}

impl EvaluationOptions<'_> {
    /// Bootstrap draws for intervals over `rows` tested rows: as asked, or
    /// 200 up to [`BOOTSTRAP_ROW_LIMIT`] rows and 0 (the normal interval) above.
    pub(crate) fn bootstrap_draws(&self, rows: usize) -> usize {
        self.bootstrap.unwrap_or(if rows <= BOOTSTRAP_ROW_LIMIT { 200 } else { 0 })
    }
}

fn gather<T: Copy>(values: Option<&[T]>, rows: &[usize]) -> Option<Vec<T>> {
    values.map(|v| rows.iter().map(|&r| v[r]).collect())
}

/// Evaluates binary scores side by side.
pub fn evaluate(scores: &[TestedScore], options: &EvaluationOptions<'_>) -> Evaluation {
    // Every score's figures in parallel.
    let computed: Vec<(ResultEntry, Placements)> = scores
        .par_iter()
        .map(|s| {
            let rows = &s.rows[0];
            let labels: Vec<bool> = rows.iter().map(|&r| options.target[r] as usize == options.positive).collect();
            let weights = gather(options.weights, rows);
            let amounts = gather(options.amounts, rows);
            let (mut metrics, placed) = binary_metrics_with_placements(&BinaryScores {
                log_odds: &s.log_odds[0],
                positive: &labels,
                weights: weights.as_deref(),
                amounts: amounts.as_deref(),
                kind: s.kind,
            });
            let mut auc_by_repeat = Vec::new();
            if s.log_odds.len() > 1 {
                let mut ses = Vec::new();
                for (lo, rs) in s.log_odds.iter().zip(&s.rows) {
                    let labels: Vec<bool> =
                        rs.iter().map(|&r| options.target[r] as usize == options.positive).collect();
                    let w = gather(options.weights, rs);
                    let p = placements(lo, &labels, w.as_deref());
                    auc_by_repeat.push(p.auc);
                    ses.push(p.variance().map(f64::sqrt).unwrap_or(f64::NAN));
                }
                metrics.auc = auc_by_repeat.iter().sum::<f64>() / auc_by_repeat.len() as f64;
                let se = ses.iter().sum::<f64>() / ses.len() as f64;
                metrics.auc_se = Some(se);
                let (low, high) = crate::evaluate::metrics::auc_interval(metrics.auc, se);
                metrics.auc_ci_low = Some(low);
                metrics.auc_ci_high = Some(high);
                metrics.auc_interval = Some(crate::evaluate::metrics::AUC_INTERVAL);
                metrics.gini = 2.0 * metrics.auc - 1.0;
            }
            let curve = metrics.curves.clone();
            let entry = ResultEntry {
                name: s.name.clone(),
                family: s.family.map(|f| f.name().to_string()),
                metrics: serde_json::to_value(&metrics).unwrap_or(serde_json::Value::Null),
                auc_by_repeat,
                warnings: s.warnings.clone(),
                binary: Some(metrics),
                curves: Some(curve),
                // A systematic sample of at most 20,000 rows is enough to draw
                // the score distributions.
                scores: {
                    let step = s.log_odds[0].len().div_ceil(20_000).max(1);
                    s.log_odds[0].iter().copied().zip(labels.iter().copied()).step_by(step).collect()
                },
            };
            (entry, placed)
        })
        .collect();
    let (results, first_placements): (Vec<ResultEntry>, Vec<Placements>) = computed.into_iter().unzip();
    let pairs: Vec<(usize, usize)> =
        (0..scores.len()).flat_map(|a| (a + 1..scores.len()).map(move |b| (a, b))).collect();
    let paired: Vec<PairedEntry> = pairs
        .par_iter()
        .filter_map(|&(a, b)| {
            if scores[a].rows[0] != scores[b].rows[0] {
                return None;
            }
            let test = paired_delong(&first_placements[a], &first_placements[b])?;
            let mut entry = PairedEntry {
                a: scores[a].name.clone(),
                b: scores[b].name.clone(),
                auc_diff: test.auc_diff,
                z: test.z,
                p_value: test.p_value,
                log_loss_diff: None,
                log_loss_diff_se: None,
                log_loss_diff_ci: None,
                brier_diff: None,
                brier_diff_ci: None,
                interval_method: None,
                mcnemar_statistic: None,
                mcnemar_p_value: None,
            };
            if scores[a].kind == ScoreKind::Probability && scores[b].kind == ScoreKind::Probability {
                paired_probability(&mut entry, &scores[a], &scores[b], options);
            }
            Some(entry)
        })
        .collect();
    let mut segments = Vec::new();
    if let Some((column, values)) = options.segments {
        for s in scores {
            let rows = &s.rows[0];
            let mut names: Vec<&String> = rows.iter().map(|&r| &values[r]).collect();
            names.sort();
            names.dedup();
            for segment in names {
                let idx: Vec<usize> = (0..rows.len()).filter(|&i| values[rows[i]] == *segment).collect();
                let w = |i: usize| options.weights.map_or(1.0, |w| w[rows[i]]);
                let total: f64 = idx.iter().map(|&i| w(i)).sum();
                // Folded from +0: an empty f64 sum is −0, which JSON and
                // tables would show as a negative rate.
                let events = idx
                    .iter()
                    .filter(|&&i| options.target[rows[i]] as usize == options.positive)
                    .fold(0.0, |acc, &i| acc + w(i));
                let flagged = idx.iter().filter(|&&i| s.log_odds[0][i] >= 0.0).fold(0.0, |acc, &i| acc + w(i));
                let mean: f64 = idx.iter().map(|&i| w(i) / (1.0 + (-s.log_odds[0][i]).exp())).sum::<f64>() / total;
                let labels: Vec<bool> =
                    idx.iter().map(|&i| options.target[rows[i]] as usize == options.positive).collect();
                let lo: Vec<f64> = idx.iter().map(|&i| s.log_odds[0][i]).collect();
                let ws: Option<Vec<f64>> = options.weights.map(|_| idx.iter().map(|&i| w(i)).collect());
                let auc = (events > 0.0 && events < total).then(|| placements(&lo, &labels, ws.as_deref()).auc);
                segments.push(SegmentEntry {
                    column: column.to_string(),
                    segment: segment.clone(),
                    name: s.name.clone(),
                    rows: total,
                    base_rate: events / total,
                    auc,
                    flag_rate: flagged / total,
                    flag_rule: FLAG_AT_HALF.to_string(),
                    mean_predicted: mean,
                });
            }
        }
    }
    Evaluation {
        positive: options.classes[options.positive].clone(),
        rows: options.target.len(),
        tested_rows: scores.first().map_or(0, |s| s.rows[0].len()),
        split: options.split.clone(),
        repeats: scores.first().map_or(1, |s| s.rows.len()),
        results,
        paired,
        multiclass: Vec::new(),
        segments,
        costs: Vec::new(),
        caution: crate::CAUTION.to_string(),
    }
}

/// The evaluation again with the tested rows reweighted by class to the
/// target class mix `to` (importance weights π′ₖ/πₖ, π the tested rows'
/// own class mix), so that the figures describe a portfolio at that mix.
pub fn evaluate_reweighted(scores: &[TestedScore], options: &EvaluationOptions<'_>, to: &[f64]) -> Evaluation {
    let k = options.classes.len();
    let tested: Vec<usize> = scores.first().map(|s| s.rows[0].clone()).unwrap_or_default();
    let mut mix = vec![0.0; k];
    for &r in &tested {
        mix[options.target[r] as usize] += options.weights.map_or(1.0, |w| w[r]);
    }
    let total: f64 = mix.iter().sum();
    let ratio: Vec<f64> = (0..k).map(|c| if mix[c] > 0.0 { to[c] / (mix[c] / total) } else { 0.0 }).collect();
    let weights: Vec<f64> = (0..options.target.len())
        .map(|r| options.weights.map_or(1.0, |w| w[r]) * ratio[options.target[r] as usize])
        .collect();
    let reweighted = EvaluationOptions {
        weights: Some(&weights),
        segments: None,
        split: format!("{}; reweighted to the target class mix", options.split),
        ..options.clone()
    };
    evaluate(scores, &reweighted)
}

/// Per-row log loss and Brier of a binary score.
fn per_row_losses(log_odds: &[f64], labels: &[bool]) -> (Vec<f64>, Vec<f64>) {
    let log_loss = log_odds
        .iter()
        .zip(labels)
        .map(|(&z, &y)| {
            let s = if y { z } else { -z };
            if s >= 0.0 {
                (-s).exp().ln_1p()
            } else {
                -s + s.exp().ln_1p()
            }
        })
        .collect();
    let brier = log_odds
        .iter()
        .zip(labels)
        .map(|(&z, &y)| (1.0 / (1.0 + (-z).exp()) - f64::from(u8::from(y))).powi(2))
        .collect();
    (log_loss, brier)
}

fn paired_probability(entry: &mut PairedEntry, a: &TestedScore, b: &TestedScore, options: &EvaluationOptions<'_>) {
    let rows = &a.rows[0];
    let labels: Vec<bool> = rows.iter().map(|&r| options.target[r] as usize == options.positive).collect();
    let w: Vec<f64> = rows.iter().map(|&r| options.weights.map_or(1.0, |w| w[r])).collect();
    let (la, ba) = per_row_losses(&a.log_odds[0], &labels);
    let (lb, bb) = per_row_losses(&b.log_odds[0], &labels);
    let dl: Vec<f64> = la.iter().zip(&lb).map(|(x, y)| x - y).collect();
    let db: Vec<f64> = ba.iter().zip(&bb).map(|(x, y)| x - y).collect();
    let total: f64 = w.iter().sum();
    let mean = |d: &[f64]| d.iter().zip(&w).map(|(v, w)| v * w).sum::<f64>() / total;
    let (mean_l, mean_b) = (mean(&dl), mean(&db));
    let se = |d: &[f64], m: f64| {
        (d.iter().zip(&w).map(|(v, w)| w * (v - m).powi(2)).sum::<f64>() / (total - 1.0).max(1.0) / total).sqrt()
    };
    let (se_l, se_b) = (se(&dl, mean_l), se(&db, mean_b));
    entry.log_loss_diff = Some(mean_l);
    entry.log_loss_diff_se = Some(se_l);
    entry.brier_diff = Some(mean_b);
    let draws = options.bootstrap_draws(rows.len());
    if draws == 0 {
        entry.log_loss_diff_ci = Some([mean_l - NORMAL_975 * se_l, mean_l + NORMAL_975 * se_l]);
        entry.brier_diff_ci = Some([mean_b - NORMAL_975 * se_b, mean_b + NORMAL_975 * se_b]);
        entry.interval_method = Some("normal, from the first-order standard error".into());
    } else {
        entry.interval_method = Some(format!("paired bootstrap, {draws} draws, seed {}", options.seed));
        // Paired: both differences are resampled with the same rows.
        let mut rng = Rng::new(Rng::stream_seed(options.seed, 77));
        let intervals = bootstrap_mean_intervals(&[&dl, &db], &w, draws, &mut rng);
        entry.log_loss_diff_ci = Some(intervals[0]);
        entry.brier_diff_ci = Some(intervals[1]);
    }
    // McNemar at the 0.5 rule (Edwards' continuity correction).
    let (mut only_a, mut only_b) = (0.0, 0.0);
    for i in 0..rows.len() {
        let right_a = (a.log_odds[0][i] >= 0.0) == labels[i];
        let right_b = (b.log_odds[0][i] >= 0.0) == labels[i];
        if right_a && !right_b {
            only_a += w[i];
        } else if right_b && !right_a {
            only_b += w[i];
        }
    }
    if only_a + only_b > 0.0 {
        let statistic = ((only_a - only_b).abs() - 1.0).max(0.0).powi(2) / (only_a + only_b);
        entry.mcnemar_statistic = Some(statistic);
        entry.mcnemar_p_value = Some(chi_square_upper(statistic, 1.0));
    }
}

impl Evaluation {
    /// Adds multi-class figures (`log_loss`, `brier`, `auc_by_class`,
    /// `auc_macro`) to each result's metrics.
    pub fn set_multiclass(&mut self, figures: Vec<(String, MulticlassMetrics)>) {
        for (name, m) in &figures {
            if let Some(r) = self.results.iter_mut().find(|r| &r.name == name) {
                if let (Some(object), Ok(serde_json::Value::Object(extra))) =
                    (r.metrics.as_object_mut(), serde_json::to_value(m))
                {
                    for (key, value) in extra {
                        object.insert(
                            if key == "log_loss" || key == "brier" { format!("multiclass_{key}") } else { key },
                            value,
                        );
                    }
                }
            }
        }
        self.multiclass = figures;
    }
}

/// Multi-class figures of out-of-fold predictions (first repeat).
pub fn multiclass(predictions: &[Predictions], dataset: &Dataset) -> Vec<(String, MulticlassMetrics)> {
    predictions
        .iter()
        .map(|p| {
            let lp = &p.log_posteriors[0];
            let rows: Vec<usize> = (0..lp.nrows()).filter(|&i| !lp[(i, 0)].is_nan()).collect();
            let sub = Array2::from_shape_fn((rows.len(), lp.ncols()), |(i, c)| lp[(rows[i], c)]);
            let target: Vec<u32> = rows.iter().map(|&r| dataset.target[r]).collect();
            let weights = gather(dataset.weights.as_deref(), &rows);
            (p.name.clone(), multiclass_metrics(&sub, &target, weights.as_deref(), &dataset.schema.target.classes))
        })
        .collect()
}

/// The 95% percentile interval of a weighted mean from `draws` seeded
/// bootstrap resamples of the rows, or the normal interval when `draws` is 0.
pub(crate) fn mean_interval(
    values: &[f64],
    w: &[f64],
    draws: usize,
    seed: u64,
    se: f64,
    mean: f64,
) -> ([f64; 2], String) {
    if draws == 0 || values.is_empty() {
        return (
            [mean - NORMAL_975 * se, mean + NORMAL_975 * se],
            "normal, from the first-order standard error".into(),
        );
    }
    let intervals = bootstrap_mean_intervals(&[values], w, draws, &mut Rng::new(seed));
    (intervals[0], format!("bootstrap over rows, {draws} draws, seed {seed}"))
}

/// Seeded bootstrap over rows (frequency weights kept): the 95% percentile
/// interval of the weighted mean of each series, every series resampled
/// with the same rows in each draw (`draws` > 0, series of equal length).
pub(crate) fn bootstrap_mean_intervals(series: &[&[f64]], w: &[f64], draws: usize, rng: &mut Rng) -> Vec<[f64; 2]> {
    let n = w.len();
    let mut means: Vec<Vec<f64>> = vec![Vec::with_capacity(draws); series.len()];
    let mut sums = vec![0.0; series.len()];
    for _ in 0..draws {
        sums.fill(0.0);
        let mut weight = 0.0;
        for _ in 0..n {
            let i = (rng.next_u64() % n as u64) as usize;
            for (sum, values) in sums.iter_mut().zip(series) {
                *sum += w[i] * values[i];
            }
            weight += w[i];
        }
        for (m, sum) in means.iter_mut().zip(&sums) {
            m.push(sum / weight);
        }
    }
    means
        .into_iter()
        .map(|mut d| {
            d.sort_by(f64::total_cmp);
            let at = |q: f64| d[((q * (d.len() - 1) as f64).round() as usize).min(d.len() - 1)];
            [at(0.025), at(0.975)]
        })
        .collect()
}
