//! Population drift: the population stability index (PSI) of each feature
//! and of the score, new rows against the training rows.
//!
//! PSI = Σᵢ (aᵢ − eᵢ) ln(aᵢ / eᵢ) over bins, with eᵢ the training share and
//! aᵢ the new share of bin i — the symmetrised Kullback–Leibler divergence
//! J(a, e) = KL(a‖e) + KL(e‖a) of the two binned distributions (Jeffreys
//! 1946; the PSI form is common practice in credit scoring, see Yurdakul
//! 2018, "Statistical properties of the population stability index",
//! dissertation, Western Michigan University). Bins of a numeric feature are
//! cut at its training deciles (repeated deciles merged), plus one bin for
//! missing values; a categorical feature has one bin per training level
//! plus one for anything else. The score is the positive class's posterior
//! at the model's own prior, cut at the deciles of the training rows'
//! scores. A share of 0 is taken as [`EMPTY_SHARE`], so an empty bin gives
//! a large but finite term (common practice; the floor is our choice).
//! Bands: below 0.1 stable, 0.1 to 0.25 watch, above 0.25 act (common
//! practice, no single source).

use serde::{Deserialize, Serialize};

use crate::data::dataset::Dataset;
use crate::data::schema::ColumnKind;

/// The share an empty bin is taken to have.
pub const EMPTY_SHARE: f64 = 1e-4;

/// The training distribution of one feature, binned.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct FeatureBins {
    /// The feature.
    pub feature: String,
    /// Numeric features: the cut points; bin i holds values in
    /// (edges[i−1], edges[i]], the last bin those above every edge, and one
    /// more bin the missing values. Empty for a categorical feature.
    #[serde(default)]
    pub edges: Vec<f64>,
    /// Training share of each bin (numeric: edges + 2 bins; categorical:
    /// one per training level in the schema's order, then "other").
    pub shares: Vec<f64>,
}

/// The training distribution of the score, binned at its deciles.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ScoreBins {
    /// The class whose posterior is the score.
    pub class: String,
    /// The deciles of the training rows' scores (repeats merged).
    pub edges: Vec<f64>,
    /// Training share of each bin (edges + 1 bins).
    pub shares: Vec<f64>,
}

/// What a model file keeps of the training distribution for drift checks.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct DriftReference {
    /// One entry per feature, in the schema's order.
    pub features: Vec<FeatureBins>,
    /// The score; absent for a model fitted from aggregates, which never
    /// saw the training rows' scores.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub score: Option<ScoreBins>,
}

/// The bin of a value among `edges` (sorted): the count of edges below
/// it. Counted without branches: a binary search over ten edges costs
/// more in mispredicted jumps than ten comparisons.
#[inline]
pub fn value_bin(edges: &[f64], value: f64) -> usize {
    edges.iter().map(|&e| usize::from(e < value)).sum()
}

/// Type 7 deciles of `values` (sorted in place), repeats merged.
pub fn decile_edges(values: &mut [f64]) -> Vec<f64> {
    values.sort_by(f64::total_cmp);
    let n = values.len();
    let mut edges: Vec<f64> = Vec::with_capacity(9);
    if n == 0 {
        return edges;
    }
    for i in 1..10 {
        let h = (n - 1) as f64 * i as f64 / 10.0;
        let low = h.floor() as usize;
        let high = (low + 1).min(n - 1);
        let q = values[low] + (h - low as f64) * (values[high] - values[low]);
        if edges.last() != Some(&q) {
            edges.push(q);
        }
    }
    edges
}

fn shares(counts: &[u64]) -> Vec<f64> {
    let total: u64 = counts.iter().sum();
    counts.iter().map(|&c| if total == 0 { 0.0 } else { c as f64 / total as f64 }).collect()
}

/// The training distribution of a fitted dataset's features and of the
/// scores `score` (one per training row).
pub fn reference(dataset: &Dataset, score_class: &str, score: &[f64]) -> DriftReference {
    let schema = &dataset.schema;
    let inputs = dataset.inputs();
    let numeric_count = schema.numeric_inputs().len();
    let mut features = Vec::new();
    let (mut numeric_index, mut categorical_index, mut indicator_index) = (0, 0, 0);
    let feature_numeric: Vec<_> = schema.features().filter(|f| f.kind == Some(ColumnKind::Numeric)).collect();
    let indicators: Vec<Option<usize>> = feature_numeric
        .iter()
        .map(|f| {
            matches!(f.imputation, Some(crate::data::schema::Imputation::Median { .. })).then(|| {
                indicator_index += 1;
                feature_numeric.len() + indicator_index - 1
            })
        })
        .collect();
    for feature in schema.features() {
        if feature.kind == Some(ColumnKind::Numeric) {
            let j = numeric_index;
            numeric_index += 1;
            let column = inputs.numeric.column(j);
            let missing = |r: usize| indicators[j].is_some_and(|i| i < numeric_count && inputs.numeric[(r, i)] > 0.5);
            let mut present: Vec<f64> = (0..column.len()).filter(|&r| !missing(r)).map(|r| column[r]).collect();
            let edges = decile_edges(&mut present);
            let mut counts = vec![0u64; edges.len() + 2];
            for r in 0..column.len() {
                let bin = if missing(r) { edges.len() + 1 } else { value_bin(&edges, column[r]) };
                counts[bin] += 1;
            }
            features.push(FeatureBins { feature: feature.name.clone(), edges, shares: shares(&counts) });
        } else {
            let c = categorical_index;
            categorical_index += 1;
            let levels = feature.categorical.as_ref().map_or(0, |s| s.levels.len());
            let mut counts = vec![0u64; levels + 1];
            for &code in &inputs.categorical[c] {
                counts[(code as usize).min(levels)] += 1;
            }
            features.push(FeatureBins { feature: feature.name.clone(), edges: Vec::new(), shares: shares(&counts) });
        }
    }
    let mut sorted = score.to_vec();
    let edges = decile_edges(&mut sorted);
    let mut counts = vec![0u64; edges.len() + 1];
    for &s in score {
        counts[value_bin(&edges, s)] += 1;
    }
    DriftReference {
        features,
        score: Some(ScoreBins { class: score_class.to_string(), edges, shares: shares(&counts) }),
    }
}

/// The population stability index of new bin counts against training
/// shares; `None` when there are no new rows.
pub fn psi(expected: &[f64], counts: &[u64]) -> Option<f64> {
    let total: u64 = counts.iter().sum();
    if total == 0 || expected.len() != counts.len() {
        return None;
    }
    Some(
        expected
            .iter()
            .zip(counts)
            .map(|(&e, &c)| {
                let a = (c as f64 / total as f64).max(EMPTY_SHARE);
                let e = e.max(EMPTY_SHARE);
                (a - e) * (a / e).ln()
            })
            .sum(),
    )
}

/// The band of a PSI value (common practice, no single source).
pub fn band(psi: f64) -> &'static str {
    if psi < 0.1 {
        "stable"
    } else if psi <= 0.25 {
        "watch"
    } else {
        "act"
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A worked example by hand: training shares 0.25 each, new counts
    /// 10/20/30/40 of 100: Σ (a − e) ln(a/e) =
    /// −0.15 ln 0.4 − 0.05 ln 0.8 + 0.05 ln 1.2 + 0.15 ln 1.6.
    #[test]
    fn psi_by_hand_and_as_symmetrised_divergence() {
        let e = [0.25; 4];
        let counts = [10, 20, 30, 40];
        let by_hand = -0.15 * 0.4f64.ln() - 0.05 * 0.8f64.ln() + 0.05 * 1.2f64.ln() + 0.15 * 1.6f64.ln();
        let value = psi(&e, &counts).unwrap_or(f64::NAN);
        assert!((value - by_hand).abs() <= 1e-12 * by_hand, "{value} vs {by_hand}");
        // KL(a‖e) + KL(e‖a) (Jeffreys 1946).
        let a = [0.1, 0.2, 0.3, 0.4];
        let kl = |p: &[f64], q: &[f64]| p.iter().zip(q).map(|(p, q)| p * (p / q).ln()).sum::<f64>();
        assert!((value - (kl(&a, &e) + kl(&e, &a))).abs() <= 1e-12 * value);
        assert_eq!(psi(&e, &[25, 25, 25, 25]), Some(0.0));
        assert_eq!(psi(&e, &[0, 0, 0, 0]), None);
        assert_eq!((band(0.05), band(0.1), band(0.25), band(0.26)), ("stable", "watch", "watch", "act"));
    }

    #[test]
    fn deciles_merge_repeats_and_bins_are_right_closed() {
        let mut v: Vec<f64> = (1..=10).map(f64::from).collect();
        let edges = decile_edges(&mut v);
        // numpy.quantile(range(1, 11), 0.1) = 1.9 (type 7).
        assert!((edges[0] - 1.9).abs() < 1e-12);
        assert_eq!(value_bin(&edges, 1.9), 0);
        assert_eq!(value_bin(&edges, 1.95), 1);
        let mut constant = vec![3.0; 20];
        assert_eq!(decile_edges(&mut constant), vec![3.0]);
    }
}
