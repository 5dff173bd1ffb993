//! Families side by side on the same splits, judged out of sample.
//!
//! Every (family, fold) fit runs in parallel; a fold's training rows are the
//! dataset's weights with the fold's rows set to 0 (a weight of 0 leaves a
//! row out exactly), so no data is copied. Logistic fits start from the
//! fit on all rows (a warm start: two to four Newton steps per fold).
//! Predictions are the out-of-fold log-posteriors; with repeats, each
//! repeat's out-of-fold predictions cover every row once.
//!
//! Paired comparisons use the same rows: DeLong's test of two correlated
//! AUCs, seeded paired-bootstrap intervals of the differences in log loss
//! and Brier score (with the first-order standard error beside them), and
//! McNemar's test at the 0.5 rule.

use std::collections::BTreeMap;

use ndarray::Array2;
use rayon::prelude::*;
use serde::Serialize;

use crate::data::split::{Assignment, LEFT_OUT};
use crate::data::Dataset;
use crate::error::Result;
use crate::evaluate::metrics::{
    binary_metrics, binary_metrics_with_placements, multiclass_metrics, BinaryMetrics, BinaryScores, Curves,
    MulticlassMetrics, ScoreKind,
};
use crate::evaluate::roc::{paired_delong, placements, Placements};
use crate::model::discriminant::{fit_lda_from_moments, fit_qda_from_moments};
use crate::model::moments::{grouped_class_moments, Moments};
use crate::model::{fit_weighted, Family, FamilyParams, FittedModel};
use crate::rng::Rng;
use crate::tails::{chi_square_upper, NORMAL_975};

/// One family (with its options) to compare, under a unique name.
#[derive(Debug, Clone, PartialEq)]
pub struct Candidate {
    /// Unique label, e.g. `qda:reg=0.1`.
    pub name: String,
    /// What to fit.
    pub params: FamilyParams,
    /// A calibration map fitted inside each training fold, on that fold's own
    /// out-of-fold predictions (nested 5-fold), and applied to its test rows.
    pub calibration: Option<Calibration>,
}

/// The calibration methods.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Calibration {
    /// Platt's logistic map.
    Platt,
    /// Isotonic regression.
    Isotonic,
}

impl Candidate {
    /// A candidate without calibration.
    pub fn new(name: impl Into<String>, params: FamilyParams) -> Self {
        Candidate { name: name.into(), params, calibration: None }
    }
}

/// Folds over the training rows of (repeat, fold) only — every other row
/// left out — for a nested cross-validation inside that training fold.
fn inner_assignment(
    assignment: &Assignment,
    repeat: usize,
    fold: usize,
    target: &[u32],
    classes: usize,
    seed: u64,
) -> Assignment {
    const INNER_FOLDS: usize = 5;
    let mut rng = Rng::new(Rng::stream_seed(seed, 5000 + (repeat * 100 + fold) as u64));
    let mut members: Vec<Vec<usize>> = vec![Vec::new(); classes];
    for i in 0..target.len() {
        if assignment.trains(repeat, fold, i) {
            members[target[i] as usize].push(i);
        }
    }
    let mut folds = vec![LEFT_OUT; target.len()];
    let mut offset = 0;
    for m in members.iter_mut() {
        for i in (1..m.len()).rev() {
            let j = (rng.next_u64() % (i as u64 + 1)) as usize;
            m.swap(i, j);
        }
        for (position, &i) in m.iter().enumerate() {
            folds[i] = ((offset + position) % INNER_FOLDS) as u32;
        }
        offset += m.len();
    }
    Assignment { folds: vec![folds], tested_folds: INNER_FOLDS, description: String::new() }
}

/// Out-of-fold predictions of one candidate: log-posteriors per repeat
/// (rows × classes; rows never tested are NaN).
#[derive(Debug, Clone)]
pub struct Predictions {
    /// The candidate's name.
    pub name: String,
    /// Its family.
    pub family: Option<Family>,
    /// Per repeat.
    pub log_posteriors: Vec<Array2<f64>>,
    /// Warnings from any fold's fit.
    pub warnings: Vec<String>,
}

/// One fold's predictions: (candidate, repeat, test rows, log-posteriors, warnings).
type FoldPrediction = (usize, usize, Vec<usize>, Array2<f64>, Vec<String>);

/// Fits every candidate on every training fold and predicts the fold's test
/// rows. `prior`: the class mix posteriors are stated at (each training
/// fold's own class mix when `None`).
pub fn cross_predict(
    dataset: &Dataset,
    candidates: &[Candidate],
    assignment: &Assignment,
    prior: Option<&[f64]>,
) -> Result<Vec<Predictions>> {
    let n = dataset.rows();
    let k = dataset.schema.target.classes.len();
    let stated_prior: Option<Vec<f64>> = prior.map(<[f64]>::to_vec);
    // Warm starts for logistic candidates: one fit on every row.
    let starts: Vec<Option<FittedModel>> = candidates
        .par_iter()
        .map(|c| match c.params {
            FamilyParams::Logistic(_) => {
                fit_weighted(dataset, &c.params, dataset.weights.as_deref(), None).ok().map(|(m, _)| m)
            }
            _ => None,
        })
        .collect();
    // LDA and QDA need only per-class moments: one pass per repeat gives
    // every fold's, and a fold's training moments are the merge of the
    // other folds' (Chan, Golub & LeVeque's update: exact, with no
    // cancellation, unlike subtracting the fold from the total).
    let uses_moments = |c: &Candidate| match &c.params {
        FamilyParams::Lda(p) => p.shrinkage != crate::model::discriminant::Shrinkage::LedoitWolf,
        FamilyParams::Qda(_) => true,
        _ => false,
    };
    let encoding = crate::model::design::Encoding::from_schema(&dataset.schema);
    let groups = assignment
        .folds
        .first()
        .map_or(0, |f| f.iter().filter(|&&g| g != LEFT_OUT).map(|&g| g as usize + 1).max().unwrap_or(0));
    let fold_moments: Vec<Vec<Vec<Moments>>> = if candidates.iter().any(uses_moments) {
        assignment
            .folds
            .iter()
            .map(|fold_of| {
                grouped_class_moments(
                    &encoding,
                    &dataset.inputs(),
                    &dataset.target,
                    dataset.weights.as_deref(),
                    k,
                    false,
                    Some(fold_of),
                    groups,
                )
            })
            .collect()
    } else {
        Vec::new()
    };
    let training_moments = |repeat: usize, fold: usize| -> Vec<Moments> {
        let mut total: Vec<Moments> = (0..k).map(|_| Moments::empty(encoding.width(), false)).collect();
        for (g, group) in fold_moments[repeat].iter().enumerate() {
            if g != fold {
                for (t, m) in total.iter_mut().zip(group) {
                    t.merge(m);
                }
            }
        }
        total
    };
    // Folds one after another, the candidates of a fold in parallel (and
    // every fit parallel inside): running every (candidate, fold) task at
    // once would hold every task's fold weights and predictions in memory.
    let splits: Vec<(usize, usize)> =
        (0..assignment.folds.len()).flat_map(|r| (0..assignment.tested_folds).map(move |f| (r, f))).collect();
    let fit_fold = |c: usize, repeat: usize, fold: usize| -> Result<FoldPrediction> {
        let (model, diagnostics) = match &candidates[c].params {
            FamilyParams::Lda(p) if uses_moments(&candidates[c]) => {
                let (m, d) = fit_lda_from_moments(dataset, p, None, encoding.clone(), training_moments(repeat, fold))?;
                (FittedModel::Lda(m), d)
            }
            FamilyParams::Qda(p) => {
                let (m, d) = fit_qda_from_moments(dataset, p, encoding.clone(), training_moments(repeat, fold))?;
                (FittedModel::Qda(m), d)
            }
            params => {
                let weights: Vec<f64> = (0..n)
                    .map(|i| {
                        if assignment.trains(repeat, fold, i) {
                            dataset.weights.as_ref().map_or(1.0, |w| w[i])
                        } else {
                            0.0
                        }
                    })
                    .collect();
                fit_weighted(dataset, params, Some(&weights), starts[c].as_ref())?
            }
        };
        let rows = assignment.test_rows(repeat, fold);
        // Posteriors at the stated prior, else at the training fold's own
        // class mix (never the test rows', which would leak their base rate).
        let prior = stated_prior.clone().unwrap_or_else(|| {
            let mut mix = vec![0.0; k];
            for i in 0..n {
                if assignment.trains(repeat, fold, i) {
                    mix[dataset.target[i] as usize] += dataset.weights.as_ref().map_or(1.0, |w| w[i]);
                }
            }
            let total: f64 = mix.iter().sum();
            mix.iter().map(|m| m / total).collect()
        });
        let mut predictions = model.log_posteriors_of(&dataset.inputs(), &rows, &prior);
        if let Some(method) = candidates[c].calibration {
            if k != 2 {
                return Err(crate::Error::Usage(format!("{}: calibration is for two classes", candidates[c].name)));
            }
            let positive = dataset.schema.target.positive_index();
            let inner = inner_assignment(assignment, repeat, fold, &dataset.target, k, 17);
            let plain = Candidate::new(candidates[c].name.clone(), candidates[c].params.clone());
            let inner_predictions = cross_predict(dataset, &[plain], &inner, Some(&prior))?;
            let (mut log_odds, mut labels, mut weights) = (Vec::new(), Vec::new(), Vec::new());
            for (i, row) in inner_predictions[0].log_posteriors[0].rows().into_iter().enumerate() {
                if !row[0].is_nan() {
                    log_odds.push(log_odds_of(&row.to_vec(), positive));
                    labels.push(dataset.target[i] as usize == positive);
                    weights.push(dataset.weights.as_ref().map_or(1.0, |w| w[i]));
                }
            }
            let map = match method {
                Calibration::Platt => crate::model::calibration::fit_platt(&log_odds, &labels, Some(&weights)),
                Calibration::Isotonic => crate::model::calibration::fit_isotonic(&log_odds, &labels, Some(&weights)),
            };
            if let Some(values) = predictions.as_slice_mut() {
                for row in values.chunks_mut(2) {
                    let p = map.apply(row[positive] - row[1 - positive]).clamp(1e-300, 1.0 - 1e-16);
                    row[positive] = p.ln();
                    row[1 - positive] = (-p).ln_1p();
                }
            }
        }
        let warnings =
            diagnostics.warnings.iter().map(|w| format!("repeat {} fold {}: {w}", repeat + 1, fold + 1)).collect();
        Ok((c, repeat, rows, predictions, warnings))
    };
    let fitted: Vec<Result<FoldPrediction>> = splits
        .iter()
        .flat_map(|&(repeat, fold)| {
            (0..candidates.len()).into_par_iter().map(|c| fit_fold(c, repeat, fold)).collect::<Vec<_>>()
        })
        .collect();

    let mut out: Vec<Predictions> = candidates
        .iter()
        .map(|c| Predictions {
            name: c.name.clone(),
            family: Some(c.params.family()),
            log_posteriors: (0..assignment.folds.len()).map(|_| Array2::from_elem((n, k), f64::NAN)).collect(),
            warnings: Vec::new(),
        })
        .collect();
    for result in fitted {
        let (c, repeat, rows, predictions, warnings) = result?;
        let target = &mut out[c].log_posteriors[repeat];
        for (i, &r) in rows.iter().enumerate() {
            for class in 0..k {
                target[(r, class)] = predictions[(i, class)];
            }
        }
        out[c].warnings.extend(warnings);
    }
    Ok(out)
}

/// The evaluation of one candidate (or one external score).
#[derive(Debug, Clone, Serialize)]
pub struct ResultEntry {
    /// Unique label.
    pub name: String,
    /// The family (absent for `assess`).
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

/// Everything `compare` and `assess` report.
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
    fn bootstrap_draws(&self, rows: usize) -> usize {
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
                metrics.auc_ci_low = Some(metrics.auc - crate::tails::NORMAL_975 * se);
                metrics.auc_ci_high = Some(metrics.auc + crate::tails::NORMAL_975 * se);
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
                let events: f64 =
                    idx.iter().filter(|&&i| options.target[rows[i]] as usize == options.positive).map(|&i| w(i)).sum();
                let flagged: f64 = idx.iter().filter(|&&i| s.log_odds[0][i] >= 0.0).map(|&i| w(i)).sum();
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

/// One point of a learning curve.
#[derive(Debug, Clone, Serialize)]
pub struct LearningPoint {
    /// The candidate.
    pub name: String,
    /// Training rows used.
    pub training_rows: usize,
    /// Holdout log loss.
    pub log_loss: Option<f64>,
    /// Holdout AUC.
    pub auc: Option<f64>,
}

/// Learning curves: each candidate fitted on stratified subsamples of the
/// first split's training rows, log-spaced from about 30 rows per class up
/// to all of them, judged on that split's test rows (Ng & Jordan 2002, "On
/// discriminative vs. generative classifiers").
pub fn learning_curve(
    dataset: &Dataset,
    candidates: &[Candidate],
    assignment: &Assignment,
    seed: u64,
    points: usize,
) -> Vec<LearningPoint> {
    let n = dataset.rows();
    let k = dataset.schema.target.classes.len();
    let positive = dataset.schema.target.positive_index();
    let training: Vec<usize> = (0..n).filter(|&i| assignment.trains(0, 0, i)).collect();
    let test = assignment.test_rows(0, 0);
    let mut rng = Rng::new(Rng::stream_seed(seed, 55));
    // A stratified random order of the training rows: every prefix keeps the class mix.
    let mut by_class: Vec<Vec<usize>> = vec![Vec::new(); k];
    for &i in &training {
        by_class[dataset.target[i] as usize].push(i);
    }
    for members in by_class.iter_mut() {
        for i in (1..members.len()).rev() {
            let j = (rng.next_u64() % (i as u64 + 1)) as usize;
            members.swap(i, j);
        }
    }
    let smallest = by_class.iter().map(Vec::len).min().unwrap_or(0).max(1);
    let start = (30.0 * training.len() as f64 / smallest as f64).min(training.len() as f64).max(2.0 * k as f64);
    let sizes: Vec<usize> = (0..points)
        .map(|p| (start * (training.len() as f64 / start).powf(p as f64 / (points - 1).max(1) as f64)).round() as usize)
        .collect();
    let labels: Vec<bool> = test.iter().map(|&r| dataset.target[r] as usize == positive).collect();
    let mut out = Vec::new();
    let tasks: Vec<(usize, usize)> = (0..candidates.len()).flat_map(|c| sizes.iter().map(move |&s| (c, s))).collect();
    let computed: Vec<LearningPoint> = tasks
        .par_iter()
        .map(|&(c, size)| {
            let mut weights = vec![0.0; n];
            for members in &by_class {
                let take = ((members.len() as f64) * size as f64 / training.len() as f64).round().max(1.0) as usize;
                for &i in members.iter().take(take.min(members.len())) {
                    weights[i] = dataset.weights.as_ref().map_or(1.0, |w| w[i]);
                }
            }
            let used = weights.iter().filter(|&&w| w > 0.0).count();
            match fit_weighted(dataset, &candidates[c].params, Some(&weights), None) {
                Ok((model, _)) => {
                    let lp = model.log_posteriors_of(&dataset.inputs(), &test, &dataset.schema.target.class_mix());
                    let lo: Vec<f64> = lp.rows().into_iter().map(|r| log_odds_of(&r.to_vec(), positive)).collect();
                    let m = binary_metrics(&BinaryScores {
                        log_odds: &lo,
                        positive: &labels,
                        weights: None,
                        amounts: None,
                        kind: ScoreKind::Probability,
                    });
                    LearningPoint {
                        name: candidates[c].name.clone(),
                        training_rows: used,
                        log_loss: m.log_loss,
                        auc: Some(m.auc),
                    }
                }
                Err(_) => {
                    LearningPoint { name: candidates[c].name.clone(), training_rows: used, log_loss: None, auc: None }
                }
            }
        })
        .collect();
    out.extend(computed);
    out
}

/// What a score's decisions cost on the tested rows, under a loss
/// specification: the realised cost C(action, true class, row) of the
/// Bayes-rule action, per row and in total.
#[derive(Debug, Clone, Serialize)]
pub struct CostFigures {
    /// The result's name.
    pub name: String,
    /// Mean realised cost per tested row.
    pub expected_cost: f64,
    /// Its first-order standard error (per-row SD / √n).
    pub expected_cost_se: f64,
    /// A 95% interval for the cost per row (see `cost_interval_method`).
    pub expected_cost_ci: [f64; 2],
    /// Total realised cost over the tested rows.
    pub total_cost: f64,
    /// The same interval for the total (the per-row interval × the rows' weight).
    pub total_cost_ci: [f64; 2],
    /// How the intervals were found: a seeded bootstrap over rows, or the
    /// normal interval above [`BOOTSTRAP_ROW_LIMIT`] rows.
    pub cost_interval_method: String,
    /// Rows per action.
    pub actions: BTreeMap<String, f64>,
    /// For two actions with fixed costs: the cutoff of the Bayes rule.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub theoretical_cutoff: Option<f64>,
    /// The cutoff that minimised the realised cost on these rows.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub best_cutoff_on_holdout: Option<f64>,
    /// The decisions at a ladder of posterior cutoffs.
    pub cutoff_table: Vec<CutoffRow>,
}

/// One line of the cutoff table. At cutoff t a row whose posterior of the
/// positive class is below t is approved: it takes the action that costs
/// least when the row is truly negative, the rest take the action that costs
/// least when it is truly positive (each judged with the row's own costs).
/// With two actions and fixed costs this is exactly the cutoff rule.
#[derive(Debug, Clone, Serialize)]
pub struct CutoffRow {
    /// The posterior cutoff t.
    pub cutoff: f64,
    /// Weighted share of tested rows below t.
    pub approval_rate: f64,
    /// Share of positives among the approved rows (none when none approved).
    pub bad_rate_among_approved: Option<f64>,
    /// Realised cost per row of the rule at t.
    pub expected_cost: f64,
}

/// Cutoffs every table shows, beside the theoretical and the best one.
const CUTOFF_LADDER: [f64; 11] = [0.01, 0.02, 0.05, 0.1, 0.15, 0.2, 0.25, 0.3, 0.4, 0.5, 0.7];

/// The 95% percentile interval of a weighted mean from `draws` seeded
/// bootstrap resamples of the rows, or the normal interval when `draws` is 0.
fn mean_interval(values: &[f64], w: &[f64], draws: usize, seed: u64, se: f64, mean: f64) -> ([f64; 2], String) {
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
fn bootstrap_mean_intervals(series: &[&[f64]], w: &[f64], draws: usize, rng: &mut Rng) -> Vec<[f64; 2]> {
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

/// Cost figures of each score. `values(column, row)` gives a row's value of
/// a cost column; the posteriors are those of the scores (binary: from the
/// log odds). `fold_of[row]` (the first repeat's test fold) makes each fold
/// a separate run for capacity limits.
pub fn cost_figures(
    scores: &[TestedScore],
    options: &EvaluationOptions<'_>,
    spec: &crate::decide::CostSpec,
    values: &dyn Fn(&str, usize) -> f64,
    fold_of: Option<&[u32]>,
) -> Vec<CostFigures> {
    let positive = options.positive;
    scores
        .iter()
        .map(|s| {
            let rows = &s.rows[0];
            // The posterior of the positive class: the rule, the best-cutoff
            // sweep and the cutoff table all use these same numbers, so that
            // scores which round to the same probability stay tied.
            let probabilities: Vec<f64> = s.log_odds[0].iter().map(|&z| 1.0 / (1.0 + (-z).exp())).collect();
            let posterior = |p: f64| {
                let mut row = vec![0.0; 2];
                row[positive] = p;
                row[1 - positive] = 1.0 - p;
                row
            };
            let costs: Vec<Vec<f64>> = rows
                .iter()
                .zip(&probabilities)
                .map(|(&r, &p)| spec.expected_costs(&posterior(p), &|c| values(c, r)))
                .collect();
            // Capacity is a per-run limit: each test fold is one run.
            let decisions = match fold_of {
                Some(folds) => {
                    let group: Vec<u32> = rows.iter().map(|&r| folds[r]).collect();
                    crate::decide::decide_in_groups(spec, &costs, &group)
                }
                None => crate::decide::decide(spec, &costs),
            };
            // C(action, class, row), the cost a decision realises.
            let cost_of = |action: usize, class: usize, r: usize| {
                spec.actions[action].costs[class].for_row(&|col| values(col, r))
            };
            // What an action realises on a row, given the row's true class.
            let realised_of = |action: usize, r: usize| cost_of(action, options.target[r] as usize, r);
            let realised: Vec<f64> = rows.iter().zip(&decisions.action).map(|(&r, &a)| realised_of(a, r)).collect();
            let w: Vec<f64> = rows.iter().map(|&r| options.weights.map_or(1.0, |w| w[r])).collect();
            let total_weight: f64 = w.iter().sum();
            let total: f64 = realised.iter().zip(&w).map(|(c, w)| c * w).sum();
            let mean = total / total_weight;
            let variance = realised.iter().zip(&w).map(|(c, w)| w * (c - mean).powi(2)).sum::<f64>()
                / (total_weight - 1.0).max(1.0);
            let mut actions = BTreeMap::new();
            for (a, action) in spec.actions.iter().enumerate() {
                let count: f64 = decisions.action.iter().zip(&w).filter(|(x, _)| **x == a).map(|(_, w)| w).sum();
                actions.insert(action.name.clone(), count);
            }
            // The cutoff that minimises the realised cost, for the two-action
            // fixed-cost case: sweep the sorted scores.
            let theoretical = spec.cutoff(positive);
            let best = theoretical.as_ref().map(|(name, _)| {
                let a = spec.actions.iter().position(|x| &x.name == name).unwrap_or(0);
                let b = 1 - a;
                let mut order: Vec<usize> = (0..rows.len()).collect();
                order.sort_by(|&i, &j| probabilities[j].total_cmp(&probabilities[i]));
                // Start with every row taking b; flag rows as `a` from the top.
                let mut current: f64 = (0..rows.len()).map(|i| w[i] * realised_of(b, rows[i])).sum();
                // Flagging none is cutoff 1 (no probability reaches above it).
                let (mut best_cost, mut best_p) = (current, 1.0);
                // Tied scores move together: a cutoff cannot split them, so
                // a candidate is judged only after the last row of a tie.
                for (k, &i) in order.iter().enumerate() {
                    current += w[i] * (realised_of(a, rows[i]) - realised_of(b, rows[i]));
                    let p = probabilities[i];
                    let tie_continues = order.get(k + 1).is_some_and(|&j| probabilities[j] == p);
                    if !tie_continues && current < best_cost {
                        best_cost = current;
                        best_p = p;
                    }
                }
                best_p
            });
            let se = (variance / total_weight).sqrt();
            let draws = options.bootstrap_draws(rows.len());
            let (ci, method) = mean_interval(&realised, &w, draws, options.seed, se, mean);
            // The cutoff table: per row, the realised cost of the action for a
            // certain negative and for a certain positive.
            let cheapest_for = |class: usize, r: usize| {
                (0..spec.actions.len())
                    .min_by(|&a, &b| cost_of(a, class, r).total_cmp(&cost_of(b, class, r)))
                    .unwrap_or(0)
            };
            let mut cutoffs: Vec<f64> = CUTOFF_LADDER.to_vec();
            cutoffs.extend(theoretical.as_ref().map(|(_, c)| *c));
            cutoffs.extend(best);
            cutoffs.sort_by(f64::total_cmp);
            cutoffs.dedup();
            let cutoff_table = cutoffs
                .into_iter()
                .filter(|t| t.is_finite())
                .map(|t| {
                    let (mut approved, mut approved_bad, mut cost) = (0.0, 0.0, 0.0);
                    for (i, &r) in rows.iter().enumerate() {
                        if probabilities[i] < t {
                            approved += w[i];
                            if options.target[r] as usize == positive {
                                approved_bad += w[i];
                            }
                            cost += w[i] * realised_of(cheapest_for(1 - positive, r), r);
                        } else {
                            cost += w[i] * realised_of(cheapest_for(positive, r), r);
                        }
                    }
                    CutoffRow {
                        cutoff: t,
                        approval_rate: approved / total_weight,
                        bad_rate_among_approved: (approved > 0.0).then(|| approved_bad / approved),
                        expected_cost: cost / total_weight,
                    }
                })
                .collect();
            CostFigures {
                name: s.name.clone(),
                expected_cost: mean,
                expected_cost_se: se,
                expected_cost_ci: ci,
                total_cost: total,
                total_cost_ci: [ci[0] * total_weight, ci[1] * total_weight],
                cost_interval_method: method,
                actions,
                theoretical_cutoff: theoretical.map(|(_, c)| c),
                best_cutoff_on_holdout: best,
                cutoff_table,
            }
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A cutoff cannot split rows with the same score: one bad row and six
    /// good ones all at p = 0.5 under the German Credit costs (5 for
    /// approving a bad, 1 for declining a good). Declining only the bad row
    /// would cost 0 but no cutoff does that; declining all seven costs 6,
    /// approving all costs 5 — so the best realisable cutoff approves all.
    #[test]
    fn the_best_cutoff_does_not_split_ties() {
        let classes = vec!["bad".to_string(), "good".to_string()];
        let text = "[actions.approve]\ngood = 0\nbad = 5\n[actions.decline]\ngood = 1\nbad = 0\n";
        let spec = crate::decide::CostSpec::parse("c.toml", text, &classes).expect("spec");
        let target = [0, 1, 1, 1, 1, 1, 1];
        let options = EvaluationOptions {
            target: &target,
            positive: 0,
            classes: &classes,
            weights: None,
            amounts: None,
            bootstrap: Some(0),
            seed: 1,
            segments: None,
            split: String::new(),
        };
        let score = TestedScore {
            name: "tied".into(),
            family: None,
            log_odds: vec![vec![0.0; 7]],
            rows: vec![(0..7).collect()],
            kind: ScoreKind::Probability,
            warnings: Vec::new(),
        };
        let figures = cost_figures(&[score], &options, &spec, &|_, _| 0.0, None);
        let f = &figures[0];
        // The Bayes rule at p = 0.5 >= 1/6 declines all seven: cost 6/7 per row.
        approx::assert_relative_eq!(f.expected_cost, 6.0 / 7.0, max_relative = 1e-12);
        assert_eq!(f.best_cutoff_on_holdout, Some(1.0));
        let at_best = f.cutoff_table.iter().find(|r| r.cutoff == 1.0).expect("best in the table");
        approx::assert_relative_eq!(at_best.expected_cost, 5.0 / 7.0, max_relative = 1e-12);
        assert!(f.cutoff_table.iter().all(|r| at_best.expected_cost <= r.expected_cost + 1e-12));
    }
}
