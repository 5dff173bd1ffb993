//! Categorical inputs as smoothed class-conditional level frequencies:
//! P(level l | k) = (cₖₗ + α)/(Wₖ + α·L), cₖₗ the weighted count of level l
//! in class k, Wₖ the class weight, L the number of levels, α the additive
//! smoothing. Naive Bayes models every categorical input this way, and so
//! do LDA and QDA under the level-frequency treatment (the location model),
//! so the rule lives here once.

use serde::{Deserialize, Serialize};

use crate::data::Dataset;

/// The smallest probability a smoothed level can have: with α = 0 a level
/// never seen in a class gets 2.2e-308 (the smallest normal double)
/// rather than 0, so posteriors stay finite.
pub const SMALLEST_PROBABILITY: f64 = f64::MIN_POSITIVE;

/// A categorical input's class-conditional probabilities.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct CategoricalLikelihood {
    /// The column.
    pub column: String,
    /// Its levels.
    pub levels: Vec<String>,
    /// log P(level | class), one row per class.
    pub log_probabilities: Vec<Vec<f64>>,
}

/// A categorical input's weighted level counts: (column, levels, weight
/// per class and level).
pub type LevelCounts = (String, Vec<String>, Vec<Vec<f64>>);

/// The weighted level counts of every categorical input of `dataset`
/// (in [`crate::data::schema::Schema::categorical_inputs`] order), per
/// class, each row counted with its weight in `weights` (1 when `None`),
/// as the moments of the numeric inputs count it.
pub fn level_counts(dataset: &Dataset, weights: Option<&[f64]>, classes: usize) -> Vec<LevelCounts> {
    let weight = |r: usize| weights.map_or(1.0, |w| w[r]);
    dataset
        .schema
        .categorical_inputs()
        .iter()
        .zip(&dataset.categorical)
        .map(|(column, codes)| {
            let levels = column.categorical.as_ref().map(|s| s.levels.clone()).unwrap_or_default();
            let mut counts = vec![vec![0.0; levels.len()]; classes];
            for (r, &code) in codes.iter().enumerate() {
                counts[dataset.target[r] as usize][code as usize] += weight(r);
            }
            (column.name.clone(), levels, counts)
        })
        .collect()
}

/// The smoothed log-frequencies of each input's levels, per class of
/// weight `class_weights`, and Σ count·log P over them (the categorical
/// part of the training log-likelihood).
pub fn level_likelihoods(
    counts: &[LevelCounts],
    class_weights: &[f64],
    smoothing: f64,
) -> (Vec<CategoricalLikelihood>, f64) {
    let mut log_likelihood = 0.0;
    let tables = counts
        .iter()
        .map(|(column, levels, counts)| {
            let log_probabilities: Vec<Vec<f64>> = counts
                .iter()
                .zip(class_weights)
                .map(|(row, weight)| {
                    let denominator = weight + smoothing * levels.len() as f64;
                    row.iter().map(|count| ((count + smoothing) / denominator).max(SMALLEST_PROBABILITY).ln()).collect()
                })
                .collect();
            for (row, lp) in counts.iter().zip(&log_probabilities) {
                log_likelihood += row.iter().zip(lp).map(|(c, l)| c * l).sum::<f64>();
            }
            CategoricalLikelihood { column: column.clone(), levels: levels.clone(), log_probabilities }
        })
        .collect();
    (tables, log_likelihood)
}

/// Whether a table's shapes match `classes` and its values are finite.
pub fn valid(table: &CategoricalLikelihood, classes: usize) -> bool {
    table.log_probabilities.len() == classes
        && table.log_probabilities.iter().all(|r| r.len() == table.levels.len() && r.iter().all(|v| v.is_finite()))
}

/// Σ over the tables of log P(level of row r | class), into `out`.
#[inline]
pub fn add_level_terms(tables: &[CategoricalLikelihood], codes: &[Vec<u32>], r: usize, class: usize, out: &mut f64) {
    for (table, codes) in tables.iter().zip(codes) {
        *out += table.log_probabilities[class][codes[r] as usize];
    }
}
