//! Training, from data to model file: the fit, the out-of-fold held-out
//! summary, the calibration map fitted on those out-of-fold predictions,
//! the drift reference, and the versioned model file ([`file`]) that holds
//! them, assembled by one builder ([`file::ModelFileBuilder`]) whatever the
//! source (a file's rows or an engine's aggregates).

pub mod checksum;
pub mod file;
pub mod newton;

use crate::data::split::{assign, SplitPlan};
use crate::data::Dataset;
use crate::error::{Error, Result};
use crate::evaluate::compare::{cross_predict, log_odds_of, Candidate};
use crate::model::calibration::{fit_isotonic, fit_platt};
use crate::model::logistic::LogisticParams;
use crate::model::penalised::LambdaChoice;
use crate::model::{FamilyParams, FittedModel};
use crate::prior::PriorSpec;
use crate::train::file::{HeldOut, ModelFile, TrainingInfo};

/// Folds of the out-of-fold predictions every fit keeps a summary of.
pub const HELD_OUT_FOLDS: usize = 5;

/// A calibration map to fit on the out-of-fold predictions.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum CalibrationMethod {
    /// Platt's logistic map (Platt 1999).
    Platt,
    /// Isotonic regression by pool-adjacent-violators.
    Isotonic,
}

/// Where the training rows came from, for the model file's record.
#[derive(Debug, Clone, PartialEq, Eq, Default)]
pub struct TrainingSource {
    /// The training file as the user named it.
    pub input_path: String,
    /// SHA-256 of its bytes.
    pub input_sha256: String,
}

/// What to train.
#[derive(Debug, Clone)]
pub struct TrainRequest {
    /// The family and its hyperparameters.
    pub params: FamilyParams,
    /// The prior to score with by default [default: the training class mix,
    /// or the population mix the sampling rates imply].
    pub prior: Option<PriorSpec>,
    /// Sampling rates of classes undersampled in the training data:
    /// (class, rate in (0, 1]).
    pub sampling_rates: Vec<(String, f64)>,
    /// A calibration map fitted on the out-of-fold predictions.
    pub calibration: Option<CalibrationMethod>,
    /// Seed of the out-of-fold split.
    pub seed: u64,
    /// Where the rows came from.
    pub source: TrainingSource,
    /// The most memory the fit may take, in bytes (`None`: half the
    /// machine's); a fit estimated above it is refused before it starts.
    pub memory_limit: Option<u64>,
    /// Where the counts of finished work go (Newton iterations or λ path
    /// points, then the out-of-fold fits).
    pub progress: crate::progress::Progress,
}

impl TrainRequest {
    /// A request for `params` with every default.
    pub fn new(params: FamilyParams) -> Self {
        TrainRequest {
            params,
            prior: None,
            sampling_rates: Vec::new(),
            calibration: None,
            seed: 1,
            source: TrainingSource::default(),
            memory_limit: None,
            progress: crate::progress::Progress::silent(),
        }
    }
}

/// Parses sampling rates written `CLASS=RATE,CLASS=RATE`.
pub fn parse_sampling_rates(spec: &str) -> Result<Vec<(String, f64)>> {
    spec.split(',')
        .map(|part| {
            let (class, rate) = part
                .rsplit_once('=')
                .ok_or_else(|| Error::Usage(format!("sampling rates are CLASS=RATE,..., not '{part}'")))?;
            let r: f64 = rate
                .trim()
                .parse()
                .map_err(|_| Error::Usage(format!("'{rate}' in the sampling rates is not a number")))?;
            Ok((class.trim().to_string(), r))
        })
        .collect()
}

/// The population class mix implied by sampling rates: training mix ÷ rate,
/// renormalised (Dal Pozzolo, Caelen, Johnson & Bontempi 2015); and the
/// rate of every class (1 where none is given).
pub fn population_mix(
    classes: &[String],
    training_mix: &[f64],
    rates: &[(String, f64)],
) -> Result<(Vec<f64>, Vec<f64>)> {
    let mut all = vec![1.0; classes.len()];
    for (class, rate) in rates {
        let i = classes.iter().position(|c| c == class).ok_or_else(|| {
            Error::Usage(format!("the sampling rates name class '{class}', which is not one of {}", classes.join(", ")))
        })?;
        if !(*rate > 0.0 && *rate <= 1.0) {
            return Err(Error::Usage(format!("the sampling rate for '{class}' must lie in (0, 1]")));
        }
        all[i] = *rate;
    }
    let raw: Vec<f64> = training_mix.iter().zip(&all).map(|(m, r)| m / r).collect();
    let total: f64 = raw.iter().sum();
    Ok((raw.iter().map(|v| v / total).collect(), all))
}

/// Fits `request.params` on `dataset` and assembles the model file: the
/// fit, the held-out summary of out-of-fold predictions (5 stratified
/// folds, when every fold can be fitted), the calibration map fitted on
/// them (if asked for), and the drift reference of the training rows.
pub fn train(dataset: &Dataset, request: &TrainRequest) -> Result<ModelFile> {
    let params = &request.params;
    let family = params.family();
    let target = &dataset.schema.target;
    if request.calibration.is_some() && target.classes.len() != 2 {
        return Err(Error::Usage("calibration is for two classes".into()));
    }
    crate::model::check_memory(dataset, params, request.memory_limit)?;
    let (model, mut diagnostics) =
        crate::model::fit_weighted(dataset, params, dataset.weights.as_deref(), None, &request.progress)?;
    let training_class_mix = match &model {
        FittedModel::Logistic(m) => m.class_mix.clone(),
        _ => target.class_mix(),
    };
    diagnostics.training_log_loss = Some(crate::model::training_log_loss(&model, dataset, &training_class_mix));
    // With sampling rates, the default prior is the population mix they
    // imply; the posteriors stay calibrated to the training mix.
    let (default_mix, sampling_rates) = if request.sampling_rates.is_empty() {
        (training_class_mix.clone(), None)
    } else {
        let (mix, rates) = population_mix(&target.classes, &training_class_mix, &request.sampling_rates)?;
        (mix, Some(rates))
    };
    let prior = request.prior.clone().unwrap_or(PriorSpec::Empirical).resolve(
        &target.classes,
        &default_mix,
        target.positive_index(),
    )?;
    let training = TrainingInfo {
        input_path: request.source.input_path.clone(),
        input_sha256: request.source.input_sha256.clone(),
        rows: dataset.rows(),
        class_counts: target.counts.clone(),
        weighted_class_counts: target.weighted_counts.clone(),
    };
    let mut builder = ModelFile::builder(params.clone(), dataset.schema.clone(), model, diagnostics, training)
        .prior(prior)
        .training_class_mix(training_class_mix);
    if let Some(rates) = sampling_rates {
        builder = builder.sampling_rates(rates);
    }
    // The fitted model is checked once here, before it is used; what is
    // added below is the library's own arithmetic, checked again at the end.
    builder.check()?;
    let draft = builder.draft();
    // Out-of-fold predictions of a penalised fit use the λ chosen on all
    // rows (choosing it again inside every fold would cost a cross-
    // validation per fold for a summary of the predictions' mix).
    let fold_params = match (params, &draft.model) {
        (FamilyParams::Logistic(p), FittedModel::Logistic(m)) => match &m.penalty {
            Some(record) => {
                FamilyParams::Logistic(LogisticParams { lambda: LambdaChoice::Value(record.lambda), ..p.clone() })
            }
            None => params.clone(),
        },
        _ => params.clone(),
    };
    match held_out_summary(dataset, &fold_params, draft.calibrated_to(), request.seed, &request.progress)? {
        Some((held_out, log_odds)) => {
            if let Some(method) = request.calibration {
                let labels: Vec<bool> = dataset.target.iter().map(|&y| y as usize == target.positive_index()).collect();
                builder = builder.calibration(match method {
                    CalibrationMethod::Platt => fit_platt(&log_odds, &labels, dataset.weights.as_deref()),
                    CalibrationMethod::Isotonic => fit_isotonic(&log_odds, &labels, dataset.weights.as_deref()),
                });
            }
            builder = builder.held_out(held_out);
        }
        None if request.calibration.is_some() => return Err(Error::FitFailed {
            family: family.name().into(),
            message:
                "calibration needs out-of-fold predictions, and a fold could not be fitted (too few rows of a class)"
                    .into(),
        }),
        None => {}
    }
    // The training rows' features and scores (at the model's prior, after
    // any calibration), binned, for drift checks when scoring.
    let file = builder.draft();
    let positive = target.positive_index();
    let scores: Vec<f64> =
        file.log_posteriors(&dataset.inputs(), &file.prior).column(positive).iter().map(|v| v.exp()).collect();
    builder.drift_reference(crate::model::drift::reference(dataset, &target.positive, &scores)).build()
}

/// Out-of-fold predictions of the training rows ([`HELD_OUT_FOLDS`]
/// stratified folds), summarised as the held-out confusion and mean
/// posteriors, with each row's out-of-fold log odds; `None` when a fold
/// cannot be fitted (too few rows of a class).
fn held_out_summary(
    dataset: &Dataset,
    params: &FamilyParams,
    prior: &[f64],
    seed: u64,
    progress: &crate::progress::Progress,
) -> Result<Option<(HeldOut, Vec<f64>)>> {
    let k = dataset.schema.target.classes.len();
    let assignment = assign(&SplitPlan::KFold { folds: HELD_OUT_FOLDS, repeats: 1 }, &dataset.target, k, seed)?;
    let candidate = Candidate::new("held-out", params.clone());
    let predictions = match cross_predict(dataset, &[candidate], &assignment, Some(prior), progress) {
        Ok(p) if p[0].failure.is_none() => p,
        _ => return Ok(None),
    };
    let lp = &predictions[0].log_posteriors[0];
    let total: f64 = dataset.weights.as_ref().map_or(dataset.rows() as f64, |w| w.iter().sum());
    let mut confusion = vec![vec![0.0; k]; k];
    let mut mean_posterior = vec![0.0; k];
    let positive = dataset.schema.target.positive_index();
    let mut log_odds = Vec::with_capacity(dataset.rows());
    for (i, row) in lp.rows().into_iter().enumerate() {
        let values = row.to_vec();
        log_odds.push(log_odds_of(&values, positive));
        let w = dataset.weights.as_ref().map_or(1.0, |w| w[i]) / total;
        let predicted = (0..k).max_by(|&a, &b| row[a].total_cmp(&row[b])).unwrap_or(0);
        confusion[predicted][dataset.target[i] as usize] += w;
        for c in 0..k {
            mean_posterior[c] += w * row[c].exp();
        }
    }
    Ok(Some((HeldOut { folds: HELD_OUT_FOLDS, confusion, mean_posterior }, log_odds)))
}

/// How to fit from aggregates and what the model file says of it.
#[derive(Debug, Clone)]
pub struct FromStats {
    /// The fit itself.
    pub fit: crate::model::aggregates::FromAggregates,
    /// The prior [default: the training class mix].
    pub prior: Option<PriorSpec>,
}

/// The model file of a fit from an engine's aggregates (no held-out
/// summary and no calibration: the rows were never seen).
pub fn train_from_aggregates(
    aggregates: &crate::model::aggregates::Aggregates,
    request: &FromStats,
    input_sha256: String,
) -> Result<ModelFile> {
    let fitted = crate::model::aggregates::fit_from_aggregates(aggregates, &request.fit)?;
    let target = &fitted.schema.target;
    let class_mix = target.class_mix();
    let prior = request.prior.clone().unwrap_or(PriorSpec::Empirical).resolve(
        &target.classes,
        &class_mix,
        target.positive_index(),
    )?;
    let training = TrainingInfo {
        input_path: aggregates.path.clone(),
        input_sha256,
        rows: fitted.rows,
        class_counts: target.counts.clone(),
        weighted_class_counts: target.weighted_counts.clone(),
    };
    let mut builder = ModelFile::builder(
        request.fit.params.clone(),
        fitted.schema.clone(),
        fitted.model,
        fitted.diagnostics,
        training,
    )
    .prior(prior)
    .training_class_mix(class_mix);
    if let Some(drift) = fitted.drift {
        builder = builder.drift_reference(drift);
    }
    builder.build()
}
