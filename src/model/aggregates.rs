//! Fitting the class-conditional families from aggregates an SQL engine
//! computes: the aggregates as read, and the fit from them. (The query
//! that computes them and its reader are the warehouse path's, a floor
//! above.)
//!
//! LDA, QDA and Gaussian naive Bayes depend on the rows only through each
//! class's weight, mean and centred cross-products (and, for naive Bayes,
//! each categorical level's weight per class). `stats_sql` writes one
//! statement that computes those in a single GROUP BY over the table:
//!
//! - **Centring in one pass.** The engine sums in one pass, and the naive
//!   one-pass form Σxy − ΣxΣy/n loses every digit when a column's mean is
//!   large against its spread. So every value is first shifted by one
//!   row's value of its column (the shifted-data algorithm; Chan, Golub &
//!   LeVeque 1983, "Algorithms for computing the sample variance: analysis
//!   and recommendations", The American Statistician 37(3)): with
//!   x′ = x − K the sums Σw·x′ and Σw·x′y′ stay of the size of the spread,
//!   and the centred moment is M = Σw·x′y′ − (Σw·x′)(Σw·y′)/W. A shift
//!   within a few standard deviations of the mean loses at most a digit or
//!   two; picking it costs one row, not a pass.
//! - **Categorical inputs.** GROUPING SETS give, in the same scan, the sums
//!   per (class, level) — the cross-products of the numeric inputs with a
//!   level's 0/1 column — and, for LDA and QDA, the counts per (class,
//!   level, level of another input), their cross-products with each other.
//! - **Deciles** come from `percentile_cont` (type 7, as the library's own
//!   summaries) in the PostgreSQL dialect; without them the model says that
//!   median imputation and feature drift are unavailable.
//!
//! The result has one row per class and grouping, with generated column
//! names (`sum_1`, `cross_1_2`, …) and the columns' own names as values,
//! so no name ever has to fit an engine's identifier limit. `read_stats`
//! reads it back (errors name the line and column) and [`fit_from_aggregates`]
//! fits the family exactly as `fit` would on the rows summarised.

use std::collections::BTreeMap;

use crate::data::dataset::settle_target;
use crate::data::options::MissingPolicy;
use crate::data::schema::{
    CategoricalSummary, ColumnKind, ColumnRole, ColumnSchema, KindSource, NumericSummary, Schema,
};
use crate::error::{Error, Message, Result, Setting};
use crate::model::design::Encoding;
use crate::model::discriminant::{gaussian_encoding, lda_from_moments, qda_from_moments};
use crate::model::drift::{DriftReference, FeatureBins};
use crate::model::levels::LevelCounts;
use crate::model::moments::Moments;
use crate::model::naive_bayes::{fit_summaries, NaiveBayesSummaries};
use crate::model::{Diagnostics, Family, FamilyParams, FittedModel};

/// The rank accuracy of approximate deciles (the query's, stated here for
/// the model's warning).
pub const APPROXIMATE_RANK_ACCURACY: u32 = 10_000;

/// One class's sums: weight, rows, shifted sums and cross-products.
#[derive(Debug, Clone, Default)]
pub(crate) struct Sums {
    pub(crate) rows: f64,
    pub(crate) weight: f64,
    pub(crate) sums: Vec<f64>,
}

/// One class's row of a statistics result.
#[derive(Debug, Clone, Default)]
pub(crate) struct ClassRow {
    pub(crate) sums: Sums,
    pub(crate) cross: BTreeMap<(usize, usize), f64>,
    pub(crate) incomplete: f64,
    pub(crate) unlabelled: f64,
    pub(crate) negative: f64,
    pub(crate) min: Vec<f64>,
    pub(crate) max: Vec<f64>,
    pub(crate) shift: Vec<f64>,
    pub(crate) missing: Vec<f64>,
    pub(crate) level_missing: Vec<f64>,
    pub(crate) plain: Vec<(f64, f64)>,
}

/// A statistics result as read.
#[derive(Debug, Clone)]
pub struct Aggregates {
    /// The file, as named.
    pub path: String,
    /// The family the query was written for.
    pub family: Family,
    /// The target column.
    pub target: String,
    /// Numeric inputs, in order.
    pub numeric: Vec<String>,
    /// Categorical inputs, in order.
    pub categorical: Vec<String>,
    /// Whether the sums are weighted.
    pub weighted: bool,
    pub(crate) classes: BTreeMap<String, ClassRow>,
    /// (class, categorical, level) → sums.
    pub(crate) levels: BTreeMap<(String, usize, String), Sums>,
    /// (class, a, level of a, b, level of b) → weight.
    pub(crate) pairs: BTreeMap<(String, usize, String, usize, String), f64>,
    pub(crate) deciles: Option<Vec<Vec<f64>>>,
    /// The deciles are Spark's approximate ones (`--deciles approximate`).
    pub(crate) approximate_deciles: bool,
    /// Per numeric input, the complete rows in each of the ten decile bins.
    pub(crate) bins: Option<Vec<Vec<f64>>>,
}

/// The drift reference of a model fitted from aggregates: numeric inputs
/// binned at their deciles (repeats merged, as `fit` bins them) with the
/// counted training shares, categorical inputs by level; no score bins.
fn drift_reference(
    aggregates: &Aggregates,
    levels: &[Vec<String>],
    level_rows: &dyn Fn(usize, &str) -> f64,
    total: f64,
) -> Option<DriftReference> {
    let (deciles, bins) = (aggregates.deciles.as_ref()?, aggregates.bins.as_ref()?);
    let mut features = Vec::new();
    for (j, name) in aggregates.numeric.iter().enumerate() {
        // Raw bin r (r deciles below the value) is merged bin "distinct
        // deciles among the first r".
        let mut edges: Vec<f64> = Vec::new();
        let mut counts = vec![0.0];
        for (r, &count) in bins[j].iter().enumerate() {
            if r > 0 && edges.last() != Some(&deciles[j][r - 1]) {
                edges.push(deciles[j][r - 1]);
                counts.push(0.0);
            }
            if let Some(last) = counts.last_mut() {
                *last += count;
            }
        }
        counts.push(0.0); // the missing-value bin: no complete row is in it
        features.push(FeatureBins { feature: name.clone(), edges, shares: counts.iter().map(|c| c / total).collect() });
    }
    for (g, name) in aggregates.categorical.iter().enumerate() {
        let mut shares: Vec<f64> = levels[g].iter().map(|l| level_rows(g, l) / total).collect();
        shares.push(0.0);
        features.push(FeatureBins { feature: name.clone(), edges: Vec::new(), shares });
    }
    Some(DriftReference { features, score: None })
}

/// How to fit from aggregates.
#[derive(Debug, Clone)]
pub struct FromAggregates {
    /// The family's hyperparameters.
    pub params: FamilyParams,
    /// The event class [default: the minority class].
    pub positive: Option<String>,
    /// `Error` refuses aggregates with incomplete rows; `DropRows` leaves
    /// them out (and says how many).
    pub missing: MissingPolicy,
    /// The missing-value tokens recorded in the schema.
    pub na_tokens: Vec<String>,
}

/// What a fit from aggregates gives: the schema `fit` would have recorded
/// for the rows summarised, the fitted family and its diagnostics, and the
/// drift reference where the aggregates hold deciles.
#[derive(Debug, Clone)]
pub struct AggregateFit {
    /// The training schema.
    pub schema: Schema,
    /// The fitted family.
    pub model: FittedModel,
    /// How the fit went.
    pub diagnostics: Diagnostics,
    /// The inputs' training distribution, binned.
    pub drift: Option<DriftReference>,
    /// Rows summarised.
    pub rows: usize,
}

/// Only the class-conditional families are fitted from aggregates.
fn from_aggregates_families() -> Error {
    Error::invalid(crate::error::message![Setting::FromAggregates, " fits lda, qda or naive-bayes"])
}

/// Fits the family of `request.params` from `aggregates` as `fit` would on
/// the rows they summarise.
pub fn fit_from_aggregates(aggregates: &Aggregates, request: &FromAggregates) -> Result<AggregateFit> {
    let path = &aggregates.path;
    let bad = |message: Message| Error::SchemaMismatch { path: path.clone(), message };
    let family = request.params.family();
    if !family.is_class_conditional() {
        return Err(from_aggregates_families());
    }
    if family != Family::NaiveBayes && aggregates.family == Family::NaiveBayes {
        return Err(bad(crate::error::message![
            format!("these aggregates were written for naive-bayes and lack the cross-products {} needs; write the query with ", family.name()),
            Setting::Family.set_to(family.name()),
        ]));
    }
    if family != Family::NaiveBayes && aggregates.numeric.is_empty() {
        return Err(bad(format!("{} needs at least one numeric input", family.name()).into()));
    }
    let unlabelled: f64 = aggregates.classes.values().map(|r| r.unlabelled).sum();
    if unlabelled > 0.0 {
        return Err(bad(format!(
            "{unlabelled} rows of the table have no value in the target '{}'; every training row needs a label (filter them in a view)",
            aggregates.target
        )
        .into()));
    }
    let negative: f64 = aggregates.classes.values().map(|r| r.negative).sum();
    if negative > 0.0 {
        return Err(bad(format!("{negative} rows have a negative weight; weights must be ≥ 0").into()));
    }
    let incomplete: f64 = aggregates.classes.values().map(|r| r.incomplete).sum();
    if incomplete > 0.0 && request.missing != MissingPolicy::DropRows {
        let columns: Vec<String> = aggregates
            .numeric
            .iter()
            .enumerate()
            .map(|(j, n)| (n, aggregates.classes.values().map(|r| r.missing[j]).sum::<f64>()))
            .chain(
                aggregates
                    .categorical
                    .iter()
                    .enumerate()
                    .map(|(g, n)| (n, aggregates.classes.values().map(|r| r.level_missing[g]).sum::<f64>())),
            )
            .filter(|(_, m)| *m > 0.0)
            .map(|(n, m)| format!("'{n}' {m}"))
            .collect();
        return Err(bad(crate::error::message![
            format!("{incomplete} rows have a missing value ({}); refit with ", columns.join(", ")),
            Setting::Missing.set_to("drop-rows"),
            " to leave them out, as fit would",
        ]));
    }
    let classes: Vec<String> =
        aggregates.classes.iter().filter(|(_, r)| r.sums.rows > 0.0).map(|(c, _)| c.clone()).collect();
    let rows_of = |c: &str| aggregates.classes.get(c).map(|r| r.sums.clone()).unwrap_or_default();
    let target = settle_target(
        path,
        &aggregates.target,
        &classes,
        classes.iter().map(|c| rows_of(c).rows as usize).collect(),
        classes.iter().map(|c| rows_of(c).weight).collect(),
        request.positive.as_deref(),
    )?;
    // Levels: every level with a complete row, in byte order.
    let mut levels: Vec<Vec<String>> = vec![Vec::new(); aggregates.categorical.len()];
    for ((class, g, level), sums) in &aggregates.levels {
        if sums.rows > 0.0 && classes.contains(class) && !levels[*g].contains(level) {
            levels[*g].push(level.clone());
        }
    }
    levels.iter_mut().for_each(|l| l.sort());
    let level_sums = |class: &str, g: usize, level: &str| {
        aggregates.levels.get(&(class.to_string(), g, level.to_string())).cloned().unwrap_or_default()
    };

    // The schema, as `fit` would have recorded it.
    let p = aggregates.numeric.len();
    let mut columns = vec![ColumnSchema {
        name: aggregates.target.clone(),
        role: ColumnRole::Target,
        kind: None,
        kind_source: None,
        missing: 0,
        numeric: None,
        categorical: None,
        imputation: None,
    }];
    let total_rows: f64 = classes.iter().map(|c| rows_of(c).rows).sum();
    let class_rows: Vec<&ClassRow> = classes.iter().filter_map(|c| aggregates.classes.get(c)).collect();
    for (j, name) in aggregates.numeric.iter().enumerate() {
        // Unweighted mean and spread of the rows (the schema's summaries are
        // unweighted), from shifted sums merged over the classes.
        let shift = class_rows.first().map_or(0.0, |r| r.shift[j]);
        let (sum, square) = class_rows.iter().fold((0.0, 0.0), |(s, q), r| match r.plain.get(j) {
            Some((ps, pq)) => (s + ps, q + pq),
            None => (s + r.sums.sums[j], q + r.cross.get(&(j, j)).copied().unwrap_or(0.0)),
        });
        let n = total_rows;
        let mean = shift + sum / n;
        let variance = if n > 1.0 { ((square - sum * sum / n) / (n - 1.0)).max(0.0) } else { 0.0 };
        let deciles = aggregates.deciles.as_ref().map(|d| d[j].clone()).unwrap_or_default();
        let median = deciles.get(4).copied().unwrap_or(0.0);
        columns.push(ColumnSchema {
            name: name.clone(),
            role: ColumnRole::Feature,
            kind: Some(ColumnKind::Numeric),
            kind_source: Some(KindSource::Declared),
            missing: aggregates.classes.values().map(|r| r.missing[j]).sum::<f64>() as usize,
            numeric: Some(NumericSummary {
                count: n as usize,
                mean,
                std_dev: variance.sqrt(),
                min: class_rows.iter().map(|r| r.min[j]).fold(f64::INFINITY, f64::min),
                max: class_rows.iter().map(|r| r.max[j]).fold(f64::NEG_INFINITY, f64::max),
                deciles,
                median,
            }),
            categorical: None,
            imputation: None,
        });
    }
    for (g, name) in aggregates.categorical.iter().enumerate() {
        let counts: Vec<usize> =
            levels[g].iter().map(|l| classes.iter().map(|c| level_sums(c, g, l).rows).sum::<f64>() as usize).collect();
        columns.push(ColumnSchema {
            name: name.clone(),
            role: ColumnRole::Feature,
            kind: Some(ColumnKind::Categorical),
            kind_source: Some(KindSource::Declared),
            missing: aggregates.classes.values().map(|r| r.level_missing[g]).sum::<f64>() as usize,
            numeric: None,
            categorical: Some(CategoricalSummary { levels: levels[g].clone(), counts }),
            imputation: None,
        });
    }
    let schema = Schema {
        columns,
        target,
        na_tokens: request.na_tokens.clone(),
        missing_policy: request.missing,
        rows: total_rows as usize,
        rows_dropped: if request.missing == MissingPolicy::DropRows { incomplete as usize } else { 0 },
    };

    // The moments of each class's design columns (naive Bayes and the level
    // frequencies of LDA and QDA: the numeric inputs alone; their
    // categorical inputs are counted, not one-hot).
    let encoding = match &request.params {
        FamilyParams::Lda(p) => gaussian_encoding(&schema, p.categories),
        FamilyParams::Qda(p) => gaussian_encoding(&schema, p.categories),
        _ => Encoding { numeric: schema.numeric_inputs(), one_hot: Vec::new() },
    };
    // Level counts of the inputs the design leaves out.
    let level_counts: Vec<LevelCounts> = aggregates
        .categorical
        .iter()
        .enumerate()
        .filter(|(_, name)| !encoding.one_hot.iter().any(|h| &h.column == *name))
        .map(|(g, name)| {
            let counts =
                classes.iter().map(|c| levels[g].iter().map(|l| level_sums(c, g, l).weight).collect()).collect();
            (name.clone(), levels[g].clone(), counts)
        })
        .collect();
    let moments: Vec<Moments> = classes
        .iter()
        .map(|class| {
            let row = &aggregates.classes[class];
            design_moments(
                row,
                &encoding,
                |g, level| level_sums(class, g, level),
                |a, la, b, lb| {
                    let key = (class.clone(), a, la.to_string(), b, lb.to_string());
                    aggregates.pairs.get(&key).copied().unwrap_or(0.0)
                },
                family == Family::NaiveBayes,
            )
        })
        .collect::<std::result::Result<_, String>>()
        .map_err(|m: String| bad(m.into()))?;
    let (model, mut diagnostics) = match &request.params {
        FamilyParams::Lda(params) => {
            let (m, d) = lda_from_moments(&classes, params, encoding, moments, level_counts, None)?;
            (FittedModel::Lda(m), d)
        }
        FamilyParams::Qda(params) => {
            let (m, d) = qda_from_moments(&classes, params, encoding, moments, level_counts)?;
            (FittedModel::Qda(m), d)
        }
        FamilyParams::NaiveBayes(params) => {
            let summaries = NaiveBayesSummaries {
                numeric: aggregates.numeric.clone(),
                moments,
                indicators: Vec::new(),
                categorical: level_counts,
            };
            let (m, d) = fit_summaries(&classes, params, &summaries)?;
            (FittedModel::NaiveBayes(m), d)
        }
        FamilyParams::Logistic(_) => return Err(from_aggregates_families()),
    };
    let level_rows = |g: usize, level: &str| classes.iter().map(|c| level_sums(c, g, level).rows).sum::<f64>();
    let drift = drift_reference(aggregates, &levels, &level_rows, total_rows);
    if aggregates.approximate_deciles && drift.is_some() {
        diagnostics.warnings.push(format!(
            "the deciles are approximate (Spark's percentile_approx, rank within 1/{} of the rows): the medians for --missing impute and the drift bins are values of the column near the exact deciles, not the exact ones",
            crate::format::count(APPROXIMATE_RANK_ACCURACY as usize)
        ));
    }
    diagnostics.warnings.push(format!(
        "fitted from aggregates ({path}): no out-of-fold predictions (so no BBSE shift estimate and no calibration){}",
        match (&drift, p > 0) {
            (Some(_), _) =>
                "; drift is checked for the inputs, not for the score (the training scores were never seen)",
            (None, true) => "; no deciles either, so median imputation and drift figures are unavailable",
            (None, false) => "; no drift reference",
        }
    ));
    Ok(AggregateFit { schema, model, diagnostics, drift, rows: total_rows as usize })
}

/// A class's moments of the design columns from its sums: numeric columns
/// from the shifted sums, one-hot columns from the level sums and pair
/// counts (the centred cross-product of two 0/1 columns is
/// W_ab − W_a·W_b/W; of a numeric and a 0/1 column S_xa − S_x·W_a/W).
fn design_moments(
    row: &ClassRow,
    encoding: &Encoding,
    level: impl Fn(usize, &str) -> Sums,
    pair: impl Fn(usize, &str, usize, &str) -> f64,
    diagonal: bool,
) -> std::result::Result<Moments, String> {
    let p = encoding.numeric.len();
    let w = row.sums.weight;
    if !(w > 0.0) {
        return Err("a class has no weight".into());
    }
    // Design columns: numeric, then (categorical, level) one-hot.
    let mut one_hot: Vec<(usize, String)> = Vec::new();
    for (g, h) in encoding.one_hot.iter().enumerate() {
        one_hot.extend(h.levels.iter().skip(1).map(|l| (g, l.clone())));
    }
    let d = p + one_hot.len();
    let mut moments = Moments::empty(d, diagonal);
    moments.weight = w;
    moments.rows = row.sums.rows as usize;
    let s = &row.sums.sums;
    let level_sums: Vec<Sums> = one_hot.iter().map(|(g, l)| level(*g, l)).collect();
    for j in 0..p {
        moments.mean[j] = row.shift[j] + s[j] / w;
    }
    for (a, sums) in level_sums.iter().enumerate() {
        moments.mean[p + a] = sums.weight / w;
    }
    let cross = |i: usize, j: usize| -> std::result::Result<f64, String> {
        let key = if i <= j { (i, j) } else { (j, i) };
        row.cross
            .get(&key)
            .copied()
            .ok_or_else(|| format!("the cross-product of inputs {} and {} is missing", i + 1, j + 1))
    };
    let scatter = |i: usize, j: usize| -> std::result::Result<f64, String> {
        match (i < p, j < p) {
            (true, true) => Ok(cross(i, j)? - s[i] * s[j] / w),
            (true, false) => {
                let b = &level_sums[j - p];
                Ok(b.sums[i] - s[i] * b.weight / w)
            }
            (false, true) => {
                let a = &level_sums[i - p];
                Ok(a.sums[j] - s[j] * a.weight / w)
            }
            (false, false) => {
                let (ga, la) = &one_hot[i - p];
                let (gb, lb) = &one_hot[j - p];
                let (wa, wb) = (level_sums[i - p].weight, level_sums[j - p].weight);
                let joint = if ga == gb {
                    if la == lb {
                        wa
                    } else {
                        0.0
                    }
                } else if ga < gb {
                    pair(*ga, la, *gb, lb)
                } else {
                    pair(*gb, lb, *ga, la)
                };
                Ok(joint - wa * wb / w)
            }
        }
    };
    if diagonal {
        for j in 0..d {
            moments.scatter[j] = scatter(j, j)?;
        }
    } else {
        for i in 0..d {
            for j in i..d {
                let v = scatter(i, j)?;
                moments.scatter[i * d + j] = v;
                moments.scatter[j * d + i] = v;
            }
        }
    }
    Ok(moments)
}
