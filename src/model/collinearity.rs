//! Collinearity among a file's numeric inputs, for `describe`: inputs that
//! are exact linear combinations of earlier ones (which logistic regression
//! and LDA drop from their fits) and groups whose variance inflation
//! factor exceeds [`VIF_LIMIT`].
//!
//! The variance inflation factor of input j is 1/(1 − R²ⱼ), R²ⱼ that of j
//! regressed on the other inputs: the j-th diagonal entry of the inverse
//! correlation matrix.

use nalgebra::DMatrix;

use crate::data::{DataNotice, Dataset};
use crate::error::Setting;
use crate::model::design::Encoding;
use crate::model::linalg::aliased_columns;

/// Variance inflation above 10 marks a near-collinear input (common
/// practice).
pub const VIF_LIMIT: f64 = 10.0;

/// A partner of a near-collinear input: its standardised coefficient in
/// that input's regression on the others is at least this share of the
/// largest.
const PARTNER_SHARE: f64 = 0.25;

/// What [`collinearity`] finds.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Collinearity {
    /// Each aliased input with the earlier inputs it is a combination of.
    pub aliased: Vec<(String, Vec<String>)>,
    /// The variance inflation factor of every other non-constant input.
    pub inflation: Vec<(String, f64)>,
    /// Groups of near-collinear inputs: each input above [`VIF_LIMIT`] with
    /// its strongest partners, overlapping groups merged.
    pub groups: Vec<Vec<String>>,
}

/// The aliased and near-collinear numeric inputs of `dataset` (weighted by
/// its row weights).
pub fn collinearity(dataset: &Dataset) -> Collinearity {
    let names = dataset.schema.numeric_inputs();
    let p = names.len();
    let mut found = Collinearity::default();
    if p < 2 {
        return found;
    }
    let encoding = Encoding { numeric: names.clone(), one_hot: Vec::new() };
    let one_class = vec![0u32; dataset.rows()];
    let moments = crate::model::moments::class_moments(
        &encoding,
        &dataset.inputs(),
        &one_class,
        dataset.weights.as_deref(),
        1,
        false,
    );
    let m = &moments[0];
    let covariance = DMatrix::from_fn(p, p, |i, j| m.scatter_at(i, j));
    let aliased = aliased_columns(&covariance);
    found.aliased = aliased
        .iter()
        .map(|a| (names[a.column].clone(), a.involved.iter().map(|&c| names[c].clone()).collect()))
        .collect();
    // Variance inflation among the rest (constant inputs have their own notice).
    let kept: Vec<usize> =
        (0..p).filter(|&j| covariance[(j, j)] > 0.0 && !aliased.iter().any(|a| a.column == j)).collect();
    if kept.len() < 2 {
        return found;
    }
    let sd: Vec<f64> = kept.iter().map(|&j| covariance[(j, j)].sqrt()).collect();
    let correlation = DMatrix::from_fn(kept.len(), kept.len(), |a, b| covariance[(kept[a], kept[b])] / (sd[a] * sd[b]));
    let Some(inverse) = correlation.try_inverse() else { return found };
    let vif: Vec<f64> = (0..kept.len()).map(|a| inverse[(a, a)]).collect();
    found.inflation = kept.iter().zip(&vif).map(|(&j, &v)| (names[j].clone(), v)).collect();
    let mut groups: Vec<Vec<usize>> = Vec::new();
    for a in (0..kept.len()).filter(|&a| vif[a] > VIF_LIMIT) {
        // Standardised coefficients of a on the others: −R⁻¹[a, b]/R⁻¹[a, a].
        let coefficient = |b: usize| (inverse[(a, b)] / inverse[(a, a)]).abs();
        let largest = (0..kept.len()).filter(|&b| b != a).map(coefficient).fold(0.0, f64::max);
        let mut group: Vec<usize> =
            (0..kept.len()).filter(|&b| b == a || coefficient(b) >= PARTNER_SHARE * largest).collect();
        let mut merged = Vec::new();
        groups.retain(|g| {
            let overlaps = g.iter().any(|x| group.contains(x));
            if overlaps {
                merged.extend(g.iter().copied());
            }
            !overlaps
        });
        group.extend(merged);
        group.sort_unstable();
        group.dedup();
        groups.push(group);
    }
    groups.sort();
    found.groups = groups.into_iter().map(|g| g.iter().map(|&a| names[kept[a]].clone()).collect()).collect();
    found
}

/// [`collinearity`] as notices for `describe`.
pub fn collinearity_notices(dataset: &Dataset) -> Vec<DataNotice> {
    let found = collinearity(dataset);
    let mut notices = Vec::new();
    for (name, of) in &found.aliased {
        let of: Vec<String> = of.iter().map(|c| format!("'{c}'")).collect();
        notices.push(DataNotice(crate::error::message![
            format!(
                "'{name}' is a linear combination of {}: logistic and lda fits drop it (aliased), or refuse with ",
                of.join(", ")
            ),
            Setting::RefuseAliased
        ]));
    }
    let inflation = |name: &str| found.inflation.iter().find(|(n, _)| n == name).map_or(0.0, |(_, v)| *v);
    for group in &found.groups {
        let members: Vec<String> = group
            .iter()
            .map(|name| {
                let v = inflation(name);
                let shown =
                    if v > VIF_LIMIT { format!(" (VIF {})", crate::format::number(v, 3)) } else { String::new() };
                format!("'{name}'{shown}")
            })
            .collect();
        notices.push(DataNotice(crate::error::message![
            format!(
                "near-collinear inputs {}: variance inflation above {VIF_LIMIT} makes their coefficients unstable; keep one of them, combine them, or fit with a penalty (",
                members.join(", ")
            ),
            Setting::L2,
            ")"
        ]));
    }
    notices
}
