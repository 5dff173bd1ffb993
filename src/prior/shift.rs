//! The class mix of an unlabeled new portfolio, estimated from posteriors:
//! EM (Saerens, Latinne & Decaestecker 2002) and, where held-out
//! predictions exist, black-box shift estimation (Lipton, Wang & Smola
//! 2018), each with a seeded bootstrap interval; the mean posterior and
//! classify-and-count for reference; and the likelihood-ratio test of
//! "class mix unchanged". Both estimates rest on calibrated posteriors and
//! on the class-conditional distributions being the same in the new
//! portfolio (label shift).

use std::collections::BTreeMap;

use serde::Serialize;

use crate::error::{Error, Result, Setting};
use crate::format::percent;
use crate::prior::{bbse, bootstrap_interval, em_probabilities, EM_TOLERANCE};
use crate::tails::chi_square_upper;

/// The posteriors to estimate from.
#[derive(Debug, Clone, Copy)]
pub struct ShiftInput<'a> {
    /// The class names.
    pub classes: &'a [String],
    /// The positive class (its share is the one given intervals and named
    /// in the verdict).
    pub positive: usize,
    /// The class mix the posteriors are calibrated to (EM's start).
    pub training_prior: &'a [f64],
    /// Posteriors of the new rows at `training_prior`, row-major (rows ×
    /// classes).
    pub posteriors: &'a [f64],
    /// The held-out joint distribution of (predicted class, true class)
    /// on training rows, for BBSE.
    pub confusion: Option<&'a [Vec<f64>]>,
}

/// The fewest bootstrap draws whose 2.5% and 97.5% quantiles are distinct
/// order statistics (common practice asks for hundreds; 200 is the default).
pub const MIN_BOOTSTRAP: usize = 40;

/// How the intervals are drawn.
#[derive(Debug, Clone)]
pub struct ShiftOptions {
    /// Bootstrap draws for the intervals.
    pub bootstrap: usize,
    /// Seed of the bootstrap (BBSE's draws use `seed + 1`).
    pub seed: u64,
    /// Where the count of bootstrap draws goes.
    pub progress: crate::progress::Progress,
}

impl Default for ShiftOptions {
    fn default() -> Self {
        ShiftOptions { bootstrap: 200, seed: 1, progress: crate::progress::Progress::silent() }
    }
}

/// One estimate of the new class mix.
#[derive(Debug, Clone, Serialize)]
pub struct Estimate {
    /// `em`, `bbse`, `mean_posterior` or `classify_and_count`.
    pub method: String,
    /// The estimated prior.
    pub prior: BTreeMap<String, f64>,
    /// Lower end of the 95% interval of the positive class's share.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub ci_low: Option<f64>,
    /// Upper end.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub ci_high: Option<f64>,
    /// 95% interval of every class's share.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub ci: Option<BTreeMap<String, [f64; 2]>>,
    /// EM iterations.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub iterations: Option<usize>,
    /// BBSE: condition number of the held-out confusion.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub condition_number: Option<f64>,
    /// BBSE: whether a negative weight was clipped.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub clipped: Option<bool>,
}

/// The likelihood-ratio test of "class mix unchanged".
#[derive(Debug, Clone, Serialize)]
pub struct UnchangedTest {
    /// 2 × the log-likelihood ratio at the EM estimate.
    pub statistic: f64,
    /// Degrees of freedom (classes − 1).
    pub df: f64,
    /// χ² upper tail.
    pub p_value: f64,
}

/// Everything `shift` estimates (its JSON is this record).
#[derive(Debug, Clone, Serialize)]
pub struct ShiftEstimate {
    /// The class mix the posteriors are calibrated to (EM's starting point).
    pub training_prior: BTreeMap<String, f64>,
    /// The estimates: EM first, then BBSE where it could be made, then
    /// the mean posterior and classify-and-count.
    pub estimates: Vec<Estimate>,
    /// The test.
    pub unchanged_test: UnchangedTest,
    /// Rows of the new portfolio.
    pub rows: usize,
    /// A plain-language summary.
    pub verdict: String,
    /// How the model file stood against its checksum (the model form:
    /// `verified`, `no-checksum` or `edit-accepted`).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub model_integrity: Option<String>,
    /// Whether EM converged within its iteration limit.
    #[serde(skip)]
    pub em_converged: bool,
    /// The positive class.
    #[serde(skip)]
    pub positive: String,
}

impl ShiftEstimate {
    /// The estimate by `method`, if made.
    pub fn estimate(&self, method: &str) -> Option<&Estimate> {
        self.estimates.iter().find(|e| e.method == method)
    }
}

fn by_class(classes: &[String], values: &[f64]) -> BTreeMap<String, f64> {
    classes.iter().cloned().zip(values.iter().copied()).collect()
}

/// The condition number past which BBSE's estimate is flagged.
const ILL_CONDITIONED: f64 = 50.0;

/// Estimates the new portfolio's class mix from its posteriors.
pub fn estimate_shift(input: &ShiftInput<'_>, options: &ShiftOptions) -> Result<ShiftEstimate> {
    estimate(input, options)
}

/// Probabilities are clipped to [1e-15, 1 − 1e-15]: a score of exactly 0
/// or 1 would make EM's likelihood infinite.
const SCORE_CLIP: f64 = 1e-15;

/// The shift of a portfolio scored elsewhere: `scores` are its
/// probabilities of the positive class, calibrated to `train_prior`.
/// `reference`, a labelled sample with the same score (score, is
/// positive), gives BBSE its confusion matrix at the 0.5 cutoff.
pub fn estimate_shift_from_scores(
    scores: &[f64],
    train_prior: f64,
    reference: Option<(&[f64], &[bool])>,
    options: &ShiftOptions,
) -> Result<ShiftEstimate> {
    if !(train_prior > 0.0 && train_prior < 1.0) {
        return Err(Error::invalid(crate::error::message![
            crate::error::Setting::TrainPrior,
            " must lie strictly between 0 and 1"
        ]));
    }
    let confusion = reference.map(|(scores, positive)| {
        let mut c = vec![vec![0.0; 2]; 2];
        for (p, y) in scores.iter().zip(positive) {
            c[usize::from(*p < 0.5)][usize::from(!*y)] += 1.0 / scores.len() as f64;
        }
        c
    });
    let posteriors: Vec<f64> = scores
        .iter()
        .flat_map(|&p| [p.clamp(SCORE_CLIP, 1.0 - SCORE_CLIP), 1.0 - p.clamp(SCORE_CLIP, 1.0 - SCORE_CLIP)])
        .collect();
    let classes = vec!["1".to_string(), "0".to_string()];
    let input = ShiftInput {
        classes: &classes,
        positive: 0,
        training_prior: &[train_prior, 1.0 - train_prior],
        posteriors: &posteriors,
        confusion: confusion.as_deref(),
    };
    estimate(&input, options)
}

fn estimate(input: &ShiftInput<'_>, options: &ShiftOptions) -> Result<ShiftEstimate> {
    let classes = input.classes;
    let k = classes.len();
    let positive = input.positive;
    let training = input.training_prior;
    let posteriors = input.posteriors;
    if k < 2 || training.len() != k || positive >= k || !posteriors.len().is_multiple_of(k) {
        return Err(Error::Usage("the shift estimate needs posteriors for two or more classes".into()));
    }
    let n = posteriors.len() / k;
    if n == 0 {
        return Err(Error::Usage("the new portfolio has no rows".into()));
    }
    if options.bootstrap < MIN_BOOTSTRAP {
        return Err(Error::invalid(crate::error::message![
            Setting::Bootstrap,
            format!(" must be at least {MIN_BOOTSTRAP} draws for a 95% interval; got {}", options.bootstrap)
        ]));
    }
    let em = em_probabilities(posteriors, k, training, None, EM_TOLERANCE, None);
    let draws = options.progress.counter("bootstrap draws (EM)", Some(options.bootstrap as u64));
    let em_ci = bootstrap_interval(n, k, options.bootstrap, options.seed, |rows| {
        draws.step();
        Some(em_probabilities(posteriors, k, training, Some(rows), 1e-8, Some(&em.prior)).prior)
    });
    let interval =
        |ci: &[[f64; 2]]| -> BTreeMap<String, [f64; 2]> { classes.iter().cloned().zip(ci.iter().copied()).collect() };
    let mut estimates = vec![Estimate {
        method: "em".into(),
        prior: by_class(classes, &em.prior),
        ci_low: Some(em_ci[positive][0]),
        ci_high: Some(em_ci[positive][1]),
        ci: Some(interval(&em_ci)),
        iterations: Some(em.iterations),
        condition_number: None,
        clipped: None,
    }];
    let predicted_mix = |rows: &[usize]| -> Vec<f64> {
        let mut mix = vec![0.0; k];
        for &r in rows {
            let row = &posteriors[r * k..(r + 1) * k];
            let best = (0..k).max_by(|&a, &b| row[a].total_cmp(&row[b])).unwrap_or(0);
            mix[best] += 1.0 / rows.len() as f64;
        }
        mix
    };
    let all: Vec<usize> = (0..n).collect();
    let mut bbse_note = String::new();
    if let Some(c) = input.confusion {
        if let Some(b) = bbse(c, &predicted_mix(&all), training) {
            let draws = options.progress.counter("bootstrap draws (BBSE)", Some(options.bootstrap as u64));
            let ci = bootstrap_interval(n, k, options.bootstrap, options.seed + 1, |rows| {
                draws.step();
                bbse(c, &predicted_mix(rows), training).map(|e| e.prior)
            });
            if b.condition_number > ILL_CONDITIONED {
                bbse_note = format!(
                    " (BBSE warning: the held-out confusion is ill-conditioned, condition number {:.0})",
                    b.condition_number
                );
            }
            estimates.push(Estimate {
                method: "bbse".into(),
                prior: by_class(classes, &b.prior),
                ci_low: Some(ci[positive][0]),
                ci_high: Some(ci[positive][1]),
                ci: Some(interval(&ci)),
                iterations: None,
                condition_number: Some(b.condition_number),
                clipped: Some(b.clipped),
            });
        }
    }
    let mean: Vec<f64> = (0..k).map(|c| (0..n).map(|r| posteriors[r * k + c]).sum::<f64>() / n as f64).collect();
    for (method, prior) in [("mean_posterior", mean), ("classify_and_count", predicted_mix(&all))] {
        estimates.push(Estimate {
            method: method.into(),
            prior: by_class(classes, &prior),
            ci_low: None,
            ci_high: None,
            ci: None,
            iterations: None,
            condition_number: None,
            clipped: None,
        });
    }
    let statistic = 2.0 * em.log_likelihood_ratio.max(0.0);
    let df = (k - 1) as f64;
    let p_value = chi_square_upper(statistic, df);
    let verdict = format!(
        "estimated {} share {} (95% interval {}–{}); training {}; {} ({}){bbse_note}",
        classes[positive],
        percent(em.prior[positive]),
        percent(em_ci[positive][0]),
        percent(em_ci[positive][1]),
        percent(training[positive]),
        if p_value < 0.05 { "the shift is significant" } else { "no significant shift" },
        p_value_text(p_value),
    );
    Ok(ShiftEstimate {
        training_prior: by_class(classes, training),
        estimates,
        unchanged_test: UnchangedTest { statistic, df, p_value },
        rows: n,
        verdict,
        model_integrity: None,
        em_converged: em.converged,
        positive: classes[positive].clone(),
    })
}

/// "p < 0.001" or "p = 0.123".
pub fn p_value_text(p_value: f64) -> String {
    if p_value < 0.001 {
        "p < 0.001".to_string()
    } else {
        format!("p = {p_value:.3}")
    }
}

/// `PATH` or `PATH:METHOD` as (path, method); the method is EM unless named.
pub fn split_shift_spec(spec: &str) -> (&str, &str) {
    match spec.rsplit_once(':') {
        Some((p, m)) if ["em", "bbse", "mean_posterior", "classify_and_count"].contains(&m) => (p, m),
        _ => (spec, "em"),
    }
}

/// Reads the prior a `shift` result estimated: `PATH` (the EM estimate) or
/// `PATH:METHOD` (`em`, `bbse`, `mean_posterior`, `classify_and_count`),
/// in the order of `classes`.
pub fn prior_from_shift_file(spec: &str, classes: &[String]) -> Result<Vec<f64>> {
    let (path, method) = split_shift_spec(spec);
    let text = std::fs::read_to_string(path).map_err(|e| Error::io(path, e))?;
    let value: serde_json::Value = serde_json::from_str(&text)
        .map_err(|e| Error::ModelFile { path: path.into(), message: format!("not a shift file: {e}") })?;
    let estimate = value["estimates"]
        .as_array()
        .and_then(|a| a.iter().find(|e| e["method"] == method))
        .ok_or_else(|| Error::ModelFile { path: path.into(), message: format!("has no '{method}' estimate") })?;
    let prior: Option<Vec<f64>> = classes.iter().map(|c| estimate["prior"][c].as_f64()).collect();
    let prior = prior.ok_or_else(|| Error::ModelFile {
        path: path.into(),
        message: format!("its estimate does not name every class ({})", classes.join(", ")),
    })?;
    crate::prior::PriorSpec::Explicit(classes.iter().cloned().zip(prior).collect()).resolve(classes, &[], 0)
}
