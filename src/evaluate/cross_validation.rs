//! Out-of-fold predictions of candidate families on shared splits: every
//! (family, fold) fit runs in parallel; a fold's training rows are the
//! dataset's weights with the fold's rows set to 0 (a weight of 0 leaves a
//! row out exactly), so no data is copied. Logistic fits start from the
//! fit on all rows (a warm start: two to four Newton steps per fold); LDA
//! and QDA folds come from per-fold moments gathered in one pass. With
//! repeats, each repeat's out-of-fold predictions cover every row once.

use ndarray::Array2;
use rayon::prelude::*;

use crate::data::split::{Assignment, LEFT_OUT};
use crate::data::Dataset;
use crate::error::Result;
use crate::evaluate::paired::log_odds_of;
use crate::model::discriminant::{fit_lda_from_moments, fit_qda_from_moments, CategoryModel, Shrinkage};
use crate::model::moments::{grouped_class_moments, Moments};
use crate::model::{fit_weighted, Family, FamilyParams, FittedModel};
use crate::progress::Progress;
use crate::rng::Rng;

/// One family (with its options) to compare, under a unique name.
#[derive(Debug, Clone, PartialEq)]
pub struct Candidate {
    /// Unique label, e.g. `qda:pooled-weight=0.1`.
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
    /// Why the candidate could not be evaluated: the first fold whose fit
    /// failed (the other candidates are evaluated as usual).
    pub failure: Option<CandidateFailure>,
}

/// A candidate's failed fit: where, and the error.
#[derive(Debug, Clone)]
pub struct CandidateFailure {
    /// The fold, as `repeat R, fold F` (or `fold F` without repeats).
    pub place: String,
    /// What went wrong.
    pub error: std::sync::Arc<crate::Error>,
}

/// One fold's predictions: (candidate, repeat, test rows, log-posteriors, warnings).
type FoldPrediction = (usize, usize, Vec<usize>, Array2<f64>, Vec<String>);

/// Fits every candidate on every training fold and predicts the fold's test
/// rows. `prior`: the class mix posteriors are stated at (each training
/// fold's own class mix when `None`). A candidate whose fit fails in some
/// fold comes back with its [`Predictions::failure`]; the others are
/// unaffected. Each finished (candidate, fold) fit is a step of `progress`.
pub fn cross_predict(
    dataset: &Dataset,
    candidates: &[Candidate],
    assignment: &Assignment,
    prior: Option<&[f64]>,
    progress: &Progress,
) -> Result<Vec<Predictions>> {
    let n = dataset.rows();
    let k = dataset.schema.target.classes.len();
    let stated_prior: Option<Vec<f64>> = prior.map(<[f64]>::to_vec);
    // Warm starts for logistic candidates: one fit on every row.
    let starts: Vec<Option<FittedModel>> = candidates
        .par_iter()
        .map(|c| match c.params {
            FamilyParams::Logistic(_) => {
                fit_weighted(dataset, &c.params, dataset.weights.as_deref(), None, &Progress::silent())
                    .ok()
                    .map(|(m, _)| m)
            }
            _ => None,
        })
        .collect();
    // LDA and QDA need only per-class moments: one pass per repeat gives
    // every fold's, and a fold's training moments are the merge of the
    // other folds' (Chan, Golub & LeVeque's update: exact, with no
    // cancellation, unlike subtracting the fold from the total). Level
    // frequencies of categorical inputs are fitted fold by fold instead.
    let one_hot_design = |categories: CategoryModel| {
        categories == CategoryModel::OneHot || dataset.schema.categorical_inputs().is_empty()
    };
    let uses_moments = |c: &Candidate| match &c.params {
        FamilyParams::Lda(p) => p.shrinkage != Shrinkage::LedoitWolf && one_hot_design(p.categories),
        FamilyParams::Qda(p) => one_hot_design(p.categories),
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
                let moments = training_moments(repeat, fold);
                let (m, d) = fit_lda_from_moments(dataset, p, None, encoding.clone(), moments, Vec::new())?;
                (FittedModel::Lda(m), d)
            }
            FamilyParams::Qda(p) if uses_moments(&candidates[c]) => {
                let moments = training_moments(repeat, fold);
                let (m, d) = fit_qda_from_moments(dataset, p, encoding.clone(), moments, Vec::new())?;
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
                fit_weighted(dataset, params, Some(&weights), starts[c].as_ref(), &Progress::silent())?
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
            let inner_predictions = cross_predict(dataset, &[plain], &inner, Some(&prior), &Progress::silent())?;
            if let Some(failed) = &inner_predictions[0].failure {
                return Err(crate::Error::FitFailed {
                    family: candidates[c].params.family().name().into(),
                    message: format!(
                        "the calibration map's own cross-validation failed in {}: {}",
                        failed.place, failed.error
                    )
                    .into(),
                });
            }
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
        Ok((c, repeat, rows, predictions, diagnostics.warnings))
    };
    let fits = progress.counter("fits (families × folds)", Some((splits.len() * candidates.len()) as u64));
    let fitted: Vec<(usize, usize, usize, Result<FoldPrediction>)> = splits
        .iter()
        .flat_map(|&(repeat, fold)| {
            (0..candidates.len())
                .into_par_iter()
                .map(|c| {
                    let result = fit_fold(c, repeat, fold);
                    fits.step();
                    (c, repeat, fold, result)
                })
                .collect::<Vec<_>>()
        })
        .collect();

    let mut out: Vec<Predictions> = candidates
        .iter()
        .map(|c| Predictions {
            name: c.name.clone(),
            family: Some(c.params.family()),
            log_posteriors: (0..assignment.folds.len()).map(|_| Array2::from_elem((n, k), f64::NAN)).collect(),
            warnings: Vec::new(),
            failure: None,
        })
        .collect();
    let repeated = assignment.folds.len() > 1;
    let place_of = |repeat: usize, fold: usize| {
        if repeated {
            format!("repeat {}, fold {}", repeat + 1, fold + 1)
        } else {
            format!("fold {}", fold + 1)
        }
    };
    // Each candidate's warnings in fold order, one entry per text with the
    // folds that gave it.
    let mut warned: Vec<Vec<(String, Vec<String>)>> = vec![Vec::new(); candidates.len()];
    for (c, repeat, fold, result) in fitted {
        let (c, repeat, rows, predictions, warnings) = match result {
            Ok(fitted) => fitted,
            Err(error) => {
                // The first failing fold, in fold order, is the one reported.
                if out[c].failure.is_none() {
                    let place = place_of(repeat, fold);
                    out[c].failure = Some(CandidateFailure { place, error: std::sync::Arc::new(error) });
                }
                continue;
            }
        };
        let target = &mut out[c].log_posteriors[repeat];
        for (i, &r) in rows.iter().enumerate() {
            for class in 0..k {
                target[(r, class)] = predictions[(i, class)];
            }
        }
        for warning in warnings {
            match warned[c].iter_mut().find(|(text, _)| *text == warning) {
                Some((_, places)) => places.push(place_of(repeat, fold)),
                None => warned[c].push((warning, vec![place_of(repeat, fold)])),
            }
        }
    }
    for (predictions, warnings) in out.iter_mut().zip(warned) {
        predictions.warnings =
            warnings.into_iter().map(|(text, places)| format!("{}: {text}", places.join("; "))).collect();
    }
    Ok(out)
}
