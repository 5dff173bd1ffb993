//! The learning curve: out-of-fold figures as the training share grows.

use rayon::prelude::*;
use serde::Serialize;

use crate::data::split::Assignment;
use crate::data::Dataset;
use crate::evaluate::metrics::{binary_metrics, BinaryScores, ScoreKind};
use crate::model::fit_weighted;
use crate::rng::Rng;

use crate::evaluate::cross_validation::Candidate;
use crate::evaluate::paired::*;

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
    progress: &crate::progress::Progress,
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
    let fits = progress.counter("learning-curve fits", Some(tasks.len() as u64));
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
            let fitted = fit_weighted(
                dataset,
                &candidates[c].params,
                Some(&weights),
                None,
                &crate::progress::Progress::silent(),
            );
            fits.step();
            match fitted {
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
