//! Fitting the class-conditional families from aggregates an SQL engine
//! computes.
//!
//! LDA, QDA and Gaussian naive Bayes depend on the rows only through each
//! class's weight, mean and centred cross-products (and, for naive Bayes,
//! each categorical level's weight per class). [`stats_sql`] writes one
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
//! so no name ever has to fit an engine's identifier limit. [`read_stats`]
//! reads it back (errors name the line and column) and [`model_from_stats`]
//! fits the family exactly as `fit` would on the rows summarised.

use std::collections::BTreeMap;
use std::path::Path;

use crate::data::dataset::settle_target;
use crate::data::options::MissingPolicy;
use crate::data::schema::{
    CategoricalSummary, ColumnKind, ColumnRole, ColumnSchema, KindSource, NumericSummary, Schema,
};
use crate::error::{Error, Position, Result};
use crate::export::sql::{self, ident, number, string, Dialect};
use crate::model::design::Encoding;
use crate::model::discriminant::{lda_from_moments, qda_from_moments};
use crate::model::moments::Moments;
use crate::model::naive_bayes::{fit_summaries, NaiveBayesSummaries};
use crate::model::{Diagnostics, Family, FamilyParams, FittedModel};
use crate::prior::PriorSpec;
use crate::train::file::{ModelFile, TrainingInfo, FORMAT, FORMAT_VERSION};

/// The value of the `format` column of a statistics result.
pub const STATS_FORMAT: &str = "baserate-stats-1";

/// What the aggregate query is for.
#[derive(Debug, Clone)]
pub struct StatsRequest {
    /// LDA, QDA or naive Bayes.
    pub family: Family,
    /// The table: NAME or SCHEMA.NAME.
    pub table: String,
    /// The class label column.
    pub target: String,
    /// Numeric inputs.
    pub numeric: Vec<String>,
    /// Categorical inputs.
    pub categorical: Vec<String>,
    /// A frequency-weight column.
    pub weight: Option<String>,
    /// Text values that count as missing in categorical columns (besides NULL and '').
    pub na_tokens: Vec<String>,
    /// The SQL spelling.
    pub dialect: Dialect,
}

/// The aggregate query for `request`.
pub fn stats_sql(request: &StatsRequest) -> Result<String> {
    let dialect = request.dialect;
    if !request.family.is_class_conditional() {
        return Err(Error::Usage(
            "stats-sql is for lda, qda and naive-bayes: logistic regression has no sufficient statistics short of the rows (fit it on an extract)".into(),
        ));
    }
    let mut seen = vec![request.target.as_str()];
    for name in request.numeric.iter().chain(&request.categorical).chain(&request.weight) {
        if seen.contains(&name.as_str()) {
            return Err(Error::Usage(format!("column '{name}' is named twice (as target, input or weight)")));
        }
        seen.push(name);
    }
    if request.numeric.is_empty() && request.categorical.is_empty() {
        return Err(Error::Usage("name the input columns: stats-sql --table T --target Y COLUMN...".into()));
    }
    if request.family != Family::NaiveBayes && request.numeric.is_empty() {
        return Err(Error::Usage(format!("{} needs at least one numeric input", request.family.name())));
    }
    let full = request.family != Family::NaiveBayes;
    let table = sql::table(&request.table)?;
    let target = ident(&request.target)?;
    let numeric: Vec<String> = request.numeric.iter().map(|n| ident(n)).collect::<Result<_>>()?;
    let categorical: Vec<String> = request.categorical.iter().map(|n| ident(n)).collect::<Result<_>>()?;
    let level = |g: &str| format!("TRIM(CAST({g} AS VARCHAR))");
    let mut missing_level = Vec::new();
    for g in &categorical {
        let tokens: Vec<String> = std::iter::once(String::new())
            .chain(request.na_tokens.iter().cloned())
            .map(|t| string(dialect, &t))
            .collect::<Result<_>>()?;
        missing_level.push(format!("({g} IS NULL OR {} IN ({}))", level(g), tokens.join(", ")));
    }
    let mut complete: Vec<String> = vec![format!("{target} IS NOT NULL")];
    complete.extend(numeric.iter().map(|x| format!("{x} IS NOT NULL")));
    complete.extend(missing_level.iter().map(|m| format!("NOT {m}")));
    let weight = match &request.weight {
        Some(w) => {
            let w = ident(w)?;
            complete.push(format!("{w} IS NOT NULL"));
            format!("CAST({w} AS DOUBLE PRECISION)")
        }
        None => "1E0".into(),
    };
    let complete = complete.join(" AND ");

    let mut text = String::new();
    for line in [
        format!("baserate {} aggregates for fitting {} on table {}", env!("CARGO_PKG_VERSION"), request.family.name(), request.table),
        "save the result as CSV with a header (e.g. psql: \\copy (...) TO 'stats.csv' CSV HEADER), then: baserate fit stats.csv --from-stats --family F -o MODEL".into(),
        "values are shifted by one complete row's values before summing, so one pass keeps the centred moments accurate".into(),
    ] {
        text.push_str(&sql::comment(&line));
        text.push('\n');
    }
    let p = numeric.len();
    let shift: Vec<String> =
        (1..=p).map(|j| format!("CAST({} AS DOUBLE PRECISION) AS \"__br_k{j}\"", numeric[j - 1])).collect();
    // With no numeric input the shift row only has to exist.
    let shift = if shift.is_empty() { vec!["1 AS \"__br_k0\"".to_string()] } else { shift };
    text.push_str(&format!(
        "WITH\n\"__br_shift\" AS (\n  SELECT\n    {}\n  FROM {table}\n  WHERE {complete}\n  FETCH FIRST 1 ROWS ONLY\n),\n",
        shift.join(",\n    ")
    ));
    // Two row-wise stages, each ending in OFFSET 0 ROWS so that the engine
    // evaluates every expression once per row: folded into the aggregate,
    // PostgreSQL would evaluate the completeness test and the cast once per
    // use — in every cross-product — which made the LDA query five times
    // slower on a million rows.
    let mut flags = vec![
        format!("CAST({target} AS VARCHAR) AS \"__br_y\""),
        format!("CASE WHEN {target} IS NULL THEN 1 ELSE 0 END AS \"__br_nolabel\""),
        format!("CASE WHEN {complete} THEN 1 ELSE 0 END AS \"__br_ok\""),
        format!("{weight} AS \"__br_raw_w\""),
    ];
    for (c, g) in categorical.iter().enumerate() {
        flags.push(format!("{} AS \"__br_g{}\"", level(g), c + 1));
        flags.push(format!("CASE WHEN {} THEN 1 ELSE 0 END AS \"__br_m{}\"", missing_level[c], c + 1));
    }
    for (j, x) in numeric.iter().enumerate() {
        let j = j + 1;
        flags.push(format!("CAST({x} AS DOUBLE PRECISION) AS \"__br_raw{j}\""));
        flags.push(format!("\"__br_shift\".\"__br_k{j}\" AS \"__br_s{j}\""));
        flags.push(format!("CASE WHEN {x} IS NULL THEN 1 ELSE 0 END AS \"__br_n{j}\""));
    }
    text.push_str(&format!(
        "\"__br_flags\" AS (\n  SELECT\n    {}\n  FROM {table} CROSS JOIN \"__br_shift\"\n  OFFSET 0 ROWS\n),\n",
        flags.join(",\n    ")
    ));
    let mut rows = vec![
        "\"__br_flags\".*".to_string(),
        "CASE WHEN \"__br_ok\" = 1 THEN \"__br_raw_w\" ELSE 0E0 END AS \"__br_w\"".to_string(),
    ];
    if request.weight.is_some() {
        rows.push("CASE WHEN \"__br_raw_w\" < 0E0 THEN 1 ELSE 0 END AS \"__br_negative\"".into());
    }
    for j in 1..=p {
        rows.push(format!(
            "CASE WHEN \"__br_ok\" = 1 THEN \"__br_raw{j}\" - \"__br_s{j}\" ELSE 0E0 END AS \"__br_x{j}\""
        ));
        rows.push(format!("CASE WHEN \"__br_ok\" = 1 THEN \"__br_raw{j}\" END AS \"__br_v{j}\""));
    }
    text.push_str(&format!(
        "\"__br_rows\" AS (\n  SELECT\n    {}\n  FROM \"__br_flags\"\n  OFFSET 0 ROWS\n),\n",
        rows.join(",\n    ")
    ));

    let mut select = vec![
        format!("{} AS \"format\"", string(dialect, STATS_FORMAT)?),
        format!("{} AS \"family\"", string(dialect, request.family.name())?),
        format!("{} AS \"target\"", string(dialect, &request.target)?),
        "\"__br_y\" AS \"class\"".to_string(),
    ];
    for (c, name) in request.categorical.iter().enumerate() {
        let c = c + 1;
        select.push(format!("{} AS \"categorical_{c}\"", string(dialect, name)?));
        select.push(format!("1 - GROUPING(\"__br_g{c}\") AS \"grouped_{c}\""));
        select.push(format!("\"__br_g{c}\" AS \"level_{c}\""));
        select.push(format!("SUM(\"__br_m{c}\") AS \"level_missing_{c}\""));
    }
    for (j, name) in request.numeric.iter().enumerate() {
        select.push(format!("{} AS \"feature_{}\"", string(dialect, name)?, j + 1));
    }
    select.push("SUM(CASE WHEN \"__br_w\" > 0E0 THEN 1 ELSE 0 END) AS \"rows\"".into());
    select.push("SUM(1 - \"__br_ok\") AS \"incomplete\"".into());
    select.push("SUM(\"__br_nolabel\") AS \"unlabelled\"".into());
    select.push("SUM(\"__br_w\") AS \"weight\"".into());
    if request.weight.is_some() {
        select.push("SUM(\"__br_negative\") AS \"negative_weights\"".into());
    }
    for j in 1..=p {
        select.push(format!("SUM(\"__br_w\" * \"__br_x{j}\") AS \"sum_{j}\""));
    }
    for i in 1..=p {
        for j in i..=p {
            if full || i == j {
                select.push(format!("SUM(\"__br_w\" * \"__br_x{i}\" * \"__br_x{j}\") AS \"cross_{i}_{j}\""));
            }
        }
    }
    for j in 1..=p {
        select.push(format!("MIN(\"__br_v{j}\") AS \"min_{j}\""));
        select.push(format!("MAX(\"__br_v{j}\") AS \"max_{j}\""));
        select.push(format!("MIN(\"__br_s{j}\") AS \"shift_{j}\""));
        select.push(format!("SUM(\"__br_n{j}\") AS \"missing_{j}\""));
        if request.weight.is_some() {
            select.push(format!("SUM(\"__br_ok\" * \"__br_x{j}\") AS \"plain_sum_{j}\""));
            select.push(format!("SUM(\"__br_ok\" * \"__br_x{j}\" * \"__br_x{j}\") AS \"plain_square_{j}\""));
        }
    }
    let c = categorical.len();
    let mut sets = vec!["(\"__br_y\")".to_string()];
    sets.extend((1..=c).map(|g| format!("(\"__br_y\", \"__br_g{g}\")")));
    if full {
        for a in 1..=c {
            for b in a + 1..=c {
                sets.push(format!("(\"__br_y\", \"__br_g{a}\", \"__br_g{b}\")"));
            }
        }
    }
    let aggregate = format!(
        "SELECT\n    {}\n  FROM \"__br_rows\"\n  GROUP BY GROUPING SETS ({})",
        select.join(",\n    "),
        sets.join(", ")
    );
    match dialect {
        Dialect::Postgres if p > 0 => {
            let fractions: Vec<String> = (1..10).map(|i| number(i as f64 / 10.0)).collect();
            let deciles: Vec<String> = (1..=p)
                .map(|j| {
                    format!(
                        "percentile_cont(CAST(ARRAY[{}] AS DOUBLE PRECISION[])) WITHIN GROUP (ORDER BY \"__br_v{j}\") AS \"deciles_{j}\"",
                        fractions.join(", ")
                    )
                })
                .collect();
            text.push_str(&format!(
                "\"__br_deciles\" AS (\n  SELECT\n    {}\n  FROM \"__br_rows\"\n  WHERE \"__br_ok\" = 1\n),\n",
                deciles.join(",\n    ")
            ));
            // Each row's decile bin (the count of deciles below its value, as
            // the drift check bins new rows), counted per bin: the training
            // shares of the drift reference.
            let binned: Vec<String> = (1..=p)
                .map(|j| {
                    let above: Vec<String> = (1..10)
                        .map(|i| {
                            format!(
                                "CASE WHEN \"__br_v{j}\" > (\"__br_deciles\".\"deciles_{j}\")[{i}] THEN 1 ELSE 0 END"
                            )
                        })
                        .collect();
                    format!("{} AS \"__br_b{j}\"", above.join(" + "))
                })
                .collect();
            let counts: Vec<String> = (1..=p)
                .map(|j| {
                    let bins: Vec<String> =
                        (0..10).map(|b| format!("SUM(CASE WHEN \"__br_b{j}\" = {b} THEN 1 ELSE 0 END)")).collect();
                    format!("ARRAY[{}] AS \"bins_{j}\"", bins.join(", "))
                })
                .collect();
            text.push_str(&format!(
                "\"__br_binned\" AS (\n  SELECT\n    {}\n  FROM \"__br_rows\" CROSS JOIN \"__br_deciles\"\n  WHERE \"__br_ok\" = 1\n  OFFSET 0 ROWS\n),\n\"__br_bins\" AS (\n  SELECT\n    {}\n  FROM \"__br_binned\"\n),\n",
                binned.join(",\n    "),
                counts.join(",\n    ")
            ));
            text.push_str(&format!("\"__br_sums\" AS (\n  {aggregate}\n)\n"));
            text.push_str("SELECT \"__br_sums\".*, \"__br_deciles\".*, \"__br_bins\".*\nFROM \"__br_sums\" CROSS JOIN \"__br_deciles\" CROSS JOIN \"__br_bins\";\n");
        }
        _ => {
            text.push_str(&format!("\"__br_sums\" AS (\n  {aggregate}\n)\nSELECT * FROM \"__br_sums\";\n"));
        }
    }
    Ok(text)
}

/// One class's sums: weight, rows, shifted sums and cross-products.
#[derive(Debug, Clone, Default)]
struct Sums {
    rows: f64,
    weight: f64,
    sums: Vec<f64>,
}

/// One class's row of a statistics result.
#[derive(Debug, Clone, Default)]
struct ClassRow {
    sums: Sums,
    cross: BTreeMap<(usize, usize), f64>,
    incomplete: f64,
    unlabelled: f64,
    negative: f64,
    min: Vec<f64>,
    max: Vec<f64>,
    shift: Vec<f64>,
    missing: Vec<f64>,
    level_missing: Vec<f64>,
    plain: Vec<(f64, f64)>,
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
    classes: BTreeMap<String, ClassRow>,
    /// (class, categorical, level) → sums.
    levels: BTreeMap<(String, usize, String), Sums>,
    /// (class, a, level of a, b, level of b) → weight.
    pairs: BTreeMap<(String, usize, String, usize, String), f64>,
    deciles: Option<Vec<Vec<f64>>>,
    /// Per numeric input, the complete rows in each of the ten decile bins.
    bins: Option<Vec<Vec<f64>>>,
}

/// Reads a statistics result (CSV with a header, as the engine wrote it).
pub fn read_stats(path: &Path) -> Result<Aggregates> {
    let shown = path.display().to_string();
    let bad = |message: String| Error::SchemaMismatch { path: shown.clone(), message };
    let mut reader = csv::ReaderBuilder::new().has_headers(true).from_path(path).map_err(|e| match e.into_kind() {
        csv::ErrorKind::Io(io) => Error::io(&shown, io),
        other => bad(format!("not a CSV file: {other:?}")),
    })?;
    let header: Vec<String> = reader
        .headers()
        .map_err(|e| bad(format!("the header cannot be read: {e}")))?
        .iter()
        .map(String::from)
        .collect();
    let column = |name: &str| header.iter().position(|h| h == name);
    for needed in ["format", "family", "target", "class", "rows", "incomplete", "unlabelled", "weight"] {
        if column(needed).is_none() {
            return Err(bad(format!(
                "the header has no column '{needed}': this is not the result of baserate stats-sql (save it as CSV with its header)"
            )));
        }
    }
    let p = (1..).take_while(|j| column(&format!("feature_{j}")).is_some()).count();
    let c = (1..).take_while(|g| column(&format!("categorical_{g}")).is_some()).count();
    let weighted = column("negative_weights").is_some();
    let has_deciles = column("deciles_1").is_some();
    let mut per_feature = Vec::new();
    for prefix in ["sum", "min", "max", "shift", "missing"] {
        for j in 1..=p {
            per_feature.push(format!("{prefix}_{j}"));
        }
    }
    for prefix in ["grouped", "level", "level_missing"] {
        for g in 1..=c {
            per_feature.push(format!("{prefix}_{g}"));
        }
    }
    if let Some(absent) = per_feature.iter().find(|n| column(n).is_none()) {
        return Err(bad(format!("the header has no column '{absent}'; the result is incomplete")));
    }
    let at =
        |record: &csv::StringRecord| Position { path: shown.clone(), line: record.position().map_or(0, |p| p.line()) };
    let mut aggregates = Aggregates {
        path: shown.clone(),
        family: Family::Lda,
        target: String::new(),
        numeric: Vec::new(),
        categorical: Vec::new(),
        weighted,
        classes: BTreeMap::new(),
        levels: BTreeMap::new(),
        pairs: BTreeMap::new(),
        deciles: None,
        bins: None,
    };
    let mut first = true;
    for record in reader.records() {
        let record = record.map_err(|e| bad(format!("the file cannot be read as CSV: {e}")))?;
        let text = |name: &str| column(name).and_then(|i| record.get(i)).unwrap_or("").to_string();
        let value = |name: &str| -> Result<f64> {
            let raw = text(name);
            let parsed = if raw.is_empty() { Some(0.0) } else { raw.trim().parse::<f64>().ok() };
            match parsed {
                Some(v) if v.is_finite() => Ok(v),
                _ => Err(Error::Malformed {
                    at: at(&record),
                    column: name.to_string(),
                    message: format!("'{raw}' is not a finite number"),
                }),
            }
        };
        if first {
            if text("format") != STATS_FORMAT {
                return Err(Error::Malformed {
                    at: at(&record),
                    column: "format".into(),
                    message: format!("expected '{STATS_FORMAT}', found '{}'", text("format")),
                });
            }
            aggregates.family = match text("family").as_str() {
                "lda" => Family::Lda,
                "qda" => Family::Qda,
                "naive-bayes" => Family::NaiveBayes,
                other => {
                    return Err(Error::Malformed {
                        at: at(&record),
                        column: "family".into(),
                        message: format!("'{other}' is not lda, qda or naive-bayes"),
                    })
                }
            };
            aggregates.target = text("target");
            aggregates.numeric = (1..=p).map(|j| text(&format!("feature_{j}"))).collect();
            aggregates.categorical = (1..=c).map(|g| text(&format!("categorical_{g}"))).collect();
            // Per numeric input, an SQL array of `len` numbers that pass `valid`.
            let arrays = |prefix: &str, len: usize, valid: fn(f64) -> bool, what: &str| -> Result<Vec<Vec<f64>>> {
                (1..=p)
                    .map(|j| {
                        let name = format!("{prefix}_{j}");
                        let raw = text(&name);
                        braced_numbers(&raw).filter(|v| v.len() == len && v.iter().all(|&x| valid(x))).ok_or_else(
                            || Error::Malformed {
                                at: at(&record),
                                column: name,
                                message: format!("'{raw}' is not a list of {what} in braces"),
                            },
                        )
                    })
                    .collect()
            };
            if has_deciles {
                aggregates.deciles = Some(arrays("deciles", 9, f64::is_finite, "nine finite numbers")?);
            }
            if column("bins_1").is_some() {
                aggregates.bins = Some(arrays("bins", 10, |x| x >= 0.0, "ten counts")?);
            }
            first = false;
        }
        let grouped: Vec<usize> = (1..=c)
            .map(|g| value(&format!("grouped_{g}")).map(|v| v as usize))
            .collect::<Result<Vec<_>>>()?
            .iter()
            .enumerate()
            .filter(|(_, &v)| v == 1)
            .map(|(g, _)| g)
            .collect();
        let class = text("class");
        let sums = Sums {
            rows: value("rows")?,
            weight: value("weight")?,
            sums: (1..=p).map(|j| value(&format!("sum_{j}"))).collect::<Result<_>>()?,
        };
        match grouped.as_slice() {
            [] => {
                let mut row = ClassRow {
                    sums,
                    incomplete: value("incomplete")?,
                    unlabelled: value("unlabelled")?,
                    negative: if weighted { value("negative_weights")? } else { 0.0 },
                    ..ClassRow::default()
                };
                for i in 1..=p {
                    for j in i..=p {
                        let name = format!("cross_{i}_{j}");
                        if column(&name).is_some() {
                            row.cross.insert((i - 1, j - 1), value(&name)?);
                        }
                    }
                    row.min.push(value(&format!("min_{i}"))?);
                    row.max.push(value(&format!("max_{i}"))?);
                    row.shift.push(value(&format!("shift_{i}"))?);
                    row.missing.push(value(&format!("missing_{i}"))?);
                    if weighted {
                        row.plain.push((value(&format!("plain_sum_{i}"))?, value(&format!("plain_square_{i}"))?));
                    }
                }
                row.level_missing = (1..=c).map(|g| value(&format!("level_missing_{g}"))).collect::<Result<_>>()?;
                aggregates.classes.insert(class, row);
            }
            [g] => {
                aggregates.levels.insert((class, *g, text(&format!("level_{}", g + 1))), sums);
            }
            [a, b] => {
                let key = (class, *a, text(&format!("level_{}", a + 1)), *b, text(&format!("level_{}", b + 1)));
                aggregates.pairs.insert(key, sums.weight);
            }
            _ => {
                return Err(Error::Malformed {
                    at: at(&record),
                    column: "grouped_1".into(),
                    message: "a row grouped by more than two categorical columns is not one this query writes".into(),
                })
            }
        }
    }
    if first {
        return Err(bad("the result has no rows: the table has no row with every input and the label".into()));
    }
    Ok(aggregates)
}

/// `{1,2.5,3}` (an SQL array as PostgreSQL writes it) as numbers.
fn braced_numbers(raw: &str) -> Option<Vec<f64>> {
    let inner = raw.trim().strip_prefix('{')?.strip_suffix('}')?;
    inner.split(',').map(|v| v.trim().parse::<f64>().ok()).collect()
}

/// The drift reference of a model fitted from aggregates: numeric inputs
/// binned at their deciles (repeats merged, as `fit` bins them) with the
/// counted training shares, categorical inputs by level; no score bins.
fn drift_reference(
    aggregates: &Aggregates,
    levels: &[Vec<String>],
    level_rows: &dyn Fn(usize, &str) -> f64,
    total: f64,
) -> Option<crate::model::drift::DriftReference> {
    use crate::model::drift::{DriftReference, FeatureBins};
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
pub struct FromStats {
    /// The family's hyperparameters.
    pub params: FamilyParams,
    /// The prior [default: the training class mix].
    pub prior: Option<PriorSpec>,
    /// The event class [default: the minority class].
    pub positive: Option<String>,
    /// `Error` refuses aggregates with incomplete rows; `DropRows` leaves
    /// them out (and says how many).
    pub missing: MissingPolicy,
    /// The missing-value tokens recorded in the schema.
    pub na_tokens: Vec<String>,
}

/// Fits the family of `request.params` from `aggregates` as `fit` would on
/// the rows they summarise, and assembles the model file.
pub fn model_from_stats(aggregates: &Aggregates, request: &FromStats, input_sha256: String) -> Result<ModelFile> {
    let path = &aggregates.path;
    let bad = |message: String| Error::SchemaMismatch { path: path.clone(), message };
    let family = request.params.family();
    if !family.is_class_conditional() {
        return Err(Error::Usage("--from-stats fits lda, qda or naive-bayes".into()));
    }
    if family != Family::NaiveBayes && aggregates.family == Family::NaiveBayes {
        return Err(bad(format!(
            "these aggregates were written for naive-bayes and lack the cross-products {} needs; run stats-sql --family {}",
            family.name(),
            family.name()
        )));
    }
    if family != Family::NaiveBayes && aggregates.numeric.is_empty() {
        return Err(bad(format!("{} needs at least one numeric input", family.name())));
    }
    let unlabelled: f64 = aggregates.classes.values().map(|r| r.unlabelled).sum();
    if unlabelled > 0.0 {
        return Err(bad(format!(
            "{unlabelled} rows of the table have no value in the target '{}'; every training row needs a label (filter them in a view)",
            aggregates.target
        )));
    }
    let negative: f64 = aggregates.classes.values().map(|r| r.negative).sum();
    if negative > 0.0 {
        return Err(bad(format!("{negative} rows have a negative weight; weights must be ≥ 0")));
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
        return Err(bad(format!(
            "{incomplete} rows have a missing value ({}); refit with --missing drop-rows to leave them out, as fit would",
            columns.join(", ")
        )));
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

    // The moments of each class's design columns (naive Bayes: the numeric
    // inputs alone; its categorical inputs are counted, not one-hot).
    let encoding = match family {
        Family::NaiveBayes => Encoding { numeric: schema.numeric_inputs(), one_hot: Vec::new() },
        _ => Encoding::from_schema(&schema),
    };
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
        .map_err(bad)?;
    let (model, mut diagnostics) = match &request.params {
        FamilyParams::Lda(params) => {
            let (m, d) = lda_from_moments(&classes, params, encoding, moments, None)?;
            (FittedModel::Lda(m), d)
        }
        FamilyParams::Qda(params) => {
            let (m, d) = qda_from_moments(&classes, params, encoding, moments)?;
            (FittedModel::Qda(m), d)
        }
        FamilyParams::NaiveBayes(params) => {
            let categorical = aggregates
                .categorical
                .iter()
                .enumerate()
                .map(|(g, name)| {
                    let counts = classes
                        .iter()
                        .map(|c| levels[g].iter().map(|l| level_sums(c, g, l).weight).collect())
                        .collect();
                    (name.clone(), levels[g].clone(), counts)
                })
                .collect();
            let summaries = NaiveBayesSummaries {
                numeric: aggregates.numeric.clone(),
                moments,
                indicators: Vec::new(),
                categorical,
            };
            let (m, d) = fit_summaries(&classes, params, &summaries)?;
            (FittedModel::NaiveBayes(m), d)
        }
        FamilyParams::Logistic(_) => return Err(Error::Usage("--from-stats fits lda, qda or naive-bayes".into())),
    };
    let level_rows = |g: usize, level: &str| classes.iter().map(|c| level_sums(c, g, level).rows).sum::<f64>();
    let drift = drift_reference(aggregates, &levels, &level_rows, total_rows);
    diagnostics.warnings.push(format!(
        "fitted from aggregates ({path}): no out-of-fold predictions (so no BBSE shift estimate and no calibration){}",
        match (&drift, p > 0) {
            (Some(_), _) =>
                "; drift is checked for the inputs, not for the score (the training scores were never seen)",
            (None, true) => "; no deciles either, so median imputation and drift figures are unavailable",
            (None, false) => "; no drift reference",
        }
    ));
    let class_mix = schema.target.class_mix();
    let prior = request.prior.clone().unwrap_or(PriorSpec::Empirical).resolve(
        &classes,
        &class_mix,
        schema.target.positive_index(),
    )?;
    let (positive, counts, weighted_counts) =
        (schema.target.positive.clone(), schema.target.counts.clone(), schema.target.weighted_counts.clone());
    let file = ModelFile {
        format: FORMAT.to_string(),
        format_version: FORMAT_VERSION,
        tool_version: env!("CARGO_PKG_VERSION").to_string(),
        created: crate::io::utc_timestamp(),
        family,
        params: request.params.clone(),
        schema,
        classes: classes.clone(),
        positive,
        prior,
        training_class_mix: class_mix,
        training: TrainingInfo {
            input_path: path.clone(),
            input_sha256,
            rows: total_rows as usize,
            class_counts: counts,
            weighted_class_counts: weighted_counts,
        },
        diagnostics: Diagnostics { ..diagnostics },
        model,
        held_out: None,
        calibration: None,
        sampling_rates: None,
        drift_reference: drift,
    };
    file.validate().map_err(|m| Error::FitFailed { family: family.name().into(), message: m })?;
    Ok(file)
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
