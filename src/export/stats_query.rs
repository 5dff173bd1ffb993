//! The aggregate query: one statement that computes, in a single GROUP BY
//! over the table, what fitting the class-conditional families needs (see
//! [`crate::model::aggregates`] for the sums and why they are shifted).

use crate::error::{Error, Result};
use crate::export::sql::{self, ident, number, string, Dialect};
use crate::model::Family;

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
    /// Which deciles to compute; `None`: the dialect's default
    /// ([`Deciles::default_for`]).
    pub deciles: Option<Deciles>,
}

/// Rank accuracy of Spark's `percentile_approx` for approximate deciles:
/// Spark's own default, a rank error of at most 1/10,000 of the rows.
pub const APPROXIMATE_ACCURACY: u32 = crate::model::aggregates::APPROXIMATE_RANK_ACCURACY;

/// Which deciles of each numeric input the aggregate query computes.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Deciles {
    /// Type-7 deciles, as `fit` computes them from the rows
    /// (`percentile_cont` in PostgreSQL, `percentile` in Spark). Spark's
    /// exact `percentile` holds every distinct value of a column in memory.
    Exact,
    /// Spark's `percentile_approx`: values of the column whose rank is
    /// within 1/[`APPROXIMATE_ACCURACY`] of the decile's, in bounded memory.
    Approximate,
    /// No deciles: no medians for `--missing impute` and no drift reference.
    None,
}

impl Deciles {
    /// Exact where the dialect has a percentile function, none in `ansi`.
    pub fn default_for(dialect: Dialect) -> Deciles {
        match dialect {
            Dialect::Ansi => Deciles::None,
            Dialect::Postgres | Dialect::Spark => Deciles::Exact,
        }
    }

    /// The name in `--deciles` and in the result's `decile_method` column.
    pub fn name(self) -> &'static str {
        match self {
            Deciles::Exact => "exact",
            Deciles::Approximate => "approximate",
            Deciles::None => "none",
        }
    }
}

impl std::str::FromStr for Deciles {
    type Err = String;
    fn from_str(text: &str) -> std::result::Result<Self, String> {
        match text {
            "exact" => Ok(Deciles::Exact),
            "approximate" => Ok(Deciles::Approximate),
            "none" => Ok(Deciles::None),
            other => Err(format!("'{other}' is not exact, approximate or none")),
        }
    }
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
        return Err(Error::Usage("name at least one input column".into()));
    }
    if request.family != Family::NaiveBayes && request.numeric.is_empty() {
        return Err(Error::Usage(format!("{} needs at least one numeric input", request.family.name())));
    }
    let deciles = request.deciles.unwrap_or(Deciles::default_for(dialect));
    match (deciles, dialect) {
        (Deciles::Exact, Dialect::Ansi) => {
            return Err(Error::Usage(
                "the ansi dialect has no percentile function every engine shares: --deciles exact needs --dialect postgres or spark".into(),
            ))
        }
        (Deciles::Approximate, Dialect::Ansi | Dialect::Postgres) => {
            return Err(Error::Usage(
                "--deciles approximate is Spark's percentile_approx (--dialect spark); PostgreSQL's deciles are exact".into(),
            ))
        }
        _ => {}
    }
    let full = request.family != Family::NaiveBayes;
    let mut text = String::new();
    for line in [
        format!("baserate {} aggregates for fitting {} on table {}", env!("CARGO_PKG_VERSION"), request.family.name(), request.table),
        "save the result as CSV with a header (e.g. psql: \\copy (...) TO 'stats.csv' CSV HEADER), then: baserate fit stats.csv --from-stats --family F -o MODEL".into(),
        "values are shifted by one complete row's values before summing, so one pass keeps the centred moments accurate".into(),
    ] {
        text.push_str(&sql::comment(&line));
        text.push('\n');
    }
    let inputs = RowInputs {
        table: &request.table,
        target: &request.target,
        numeric: &request.numeric,
        categorical: &request.categorical,
        weight: request.weight.as_deref(),
        na_tokens: &request.na_tokens,
    };
    text.push_str(&inputs.stages(dialect)?);
    let p = request.numeric.len();
    let categorical = &request.categorical;
    let mut rows =
        vec!["__br_flags.*".to_string(), "CASE WHEN __br_ok = 1 THEN __br_raw_w ELSE 0E0 END AS __br_w".to_string()];
    if request.weight.is_some() {
        rows.push("CASE WHEN __br_raw_w < 0E0 THEN 1 ELSE 0 END AS __br_negative".into());
    }
    for j in 1..=p {
        rows.push(format!("CASE WHEN __br_ok = 1 THEN __br_raw{j} - __br_s{j} ELSE 0E0 END AS __br_x{j}"));
        rows.push(format!("CASE WHEN __br_ok = 1 THEN __br_raw{j} END AS __br_v{j}"));
    }
    text.push_str(&format!(
        "__br_rows AS (\n  SELECT\n    {}\n  FROM __br_flags{}\n),\n",
        rows.join(",\n    "),
        dialect.stage_fence()
    ));

    let mut select = vec![
        format!("{} AS format", string(dialect, STATS_FORMAT)?),
        format!("{} AS family", string(dialect, request.family.name())?),
        format!("{} AS target", string(dialect, &request.target)?),
        "__br_y AS class".to_string(),
    ];
    for (c, name) in request.categorical.iter().enumerate() {
        let c = c + 1;
        select.push(format!("{} AS categorical_{c}", string(dialect, name)?));
        select.push(format!("1 - GROUPING(__br_g{c}) AS grouped_{c}"));
        select.push(format!("__br_g{c} AS level_{c}"));
        select.push(format!("SUM(__br_m{c}) AS level_missing_{c}"));
    }
    for (j, name) in request.numeric.iter().enumerate() {
        select.push(format!("{} AS feature_{}", string(dialect, name)?, j + 1));
    }
    select.push("SUM(CASE WHEN __br_w > 0E0 THEN 1 ELSE 0 END) AS rows".into());
    select.push("SUM(1 - __br_ok) AS incomplete".into());
    select.push("SUM(__br_nolabel) AS unlabelled".into());
    select.push("SUM(__br_w) AS weight".into());
    if request.weight.is_some() {
        select.push("SUM(__br_negative) AS negative_weights".into());
    }
    for j in 1..=p {
        select.push(format!("SUM(__br_w * __br_x{j}) AS sum_{j}"));
    }
    for i in 1..=p {
        for j in i..=p {
            if full || i == j {
                select.push(format!("SUM(__br_w * __br_x{i} * __br_x{j}) AS cross_{i}_{j}"));
            }
        }
    }
    for j in 1..=p {
        select.push(format!("MIN(__br_v{j}) AS min_{j}"));
        select.push(format!("MAX(__br_v{j}) AS max_{j}"));
        select.push(format!("MIN(__br_s{j}) AS shift_{j}"));
        select.push(format!("SUM(__br_n{j}) AS missing_{j}"));
        if request.weight.is_some() {
            select.push(format!("SUM(__br_ok * __br_x{j}) AS plain_sum_{j}"));
            select.push(format!("SUM(__br_ok * __br_x{j} * __br_x{j}) AS plain_square_{j}"));
        }
    }
    let c = categorical.len();
    let mut sets = vec!["(__br_y)".to_string()];
    sets.extend((1..=c).map(|g| format!("(__br_y, __br_g{g})")));
    if full {
        for a in 1..=c {
            for b in a + 1..=c {
                sets.push(format!("(__br_y, __br_g{a}, __br_g{b})"));
            }
        }
    }
    let aggregate = format!(
        "SELECT\n    {}\n  FROM __br_rows\n  GROUP BY GROUPING SETS ({})",
        select.join(",\n    "),
        sets.join(", ")
    );
    match deciles {
        Deciles::Exact | Deciles::Approximate if p > 0 => {
            let spark = dialect == Dialect::Spark;
            let fractions: Vec<String> = (1..10).map(|i| number(i as f64 / 10.0)).collect();
            // Exact deciles with linear interpolation between order
            // statistics in both engines: PostgreSQL's percentile_cont and
            // Spark's percentile (not its percentile_approx).
            let method = deciles;
            let deciles: Vec<String> = (1..=p)
                .map(|j| {
                    if method == Deciles::Approximate {
                        format!(
                            "percentile_approx(__br_v{j}, array({}), {APPROXIMATE_ACCURACY}) AS deciles_{j}",
                            fractions.join(", ")
                        )
                    } else if spark {
                        format!("percentile(__br_v{j}, array({})) AS deciles_{j}", fractions.join(", "))
                    } else {
                        format!(
                            "percentile_cont(CAST(ARRAY[{}] AS DOUBLE PRECISION[])) WITHIN GROUP (ORDER BY __br_v{j}) AS deciles_{j}",
                            fractions.join(", ")
                        )
                    }
                })
                .collect();
            // No WHERE here or below: __br_v is NULL outside the complete
            // rows, and the percentiles skip NULLs. A filter over the
            // aliased row stages sets off Spark's constraint propagation,
            // whose sets grow with every alias: at twenty inputs its
            // planner ran out of an 8 GB heap before reading a row.
            text.push_str(&format!(
                "__br_deciles AS (\n  SELECT\n    {}\n  FROM __br_rows\n),\n",
                deciles.join(",\n    ")
            ));
            // Each row's decile bin (the count of deciles below its value, as
            // the drift check bins new rows), counted per bin: the training
            // shares of the drift reference.
            let binned: Vec<String> = (1..=p)
                .map(|j| {
                    let above: Vec<String> = (1..10)
                        .map(|i| {
                            // Spark indexes arrays from 0, PostgreSQL from 1.
                            let element =
                                if spark { format!("__br_d{j}[{}]", i - 1) } else { format!("(__br_d{j})[{i}]") };
                            format!("CASE WHEN __br_v{j} > {element} THEN 1 ELSE 0 END")
                        })
                        .collect();
                    format!("CASE WHEN __br_v{j} IS NULL THEN NULL ELSE {} END AS __br_b{j}", above.join(" + "))
                })
                .collect();
            let counts: Vec<String> = (1..=p)
                .map(|j| {
                    let bins: Vec<String> =
                        (0..10).map(|b| format!("SUM(CASE WHEN __br_b{j} = {b} THEN 1 ELSE 0 END)")).collect();
                    if spark {
                        format!("array({}) AS bins_{j}", bins.join(", "))
                    } else {
                        format!("ARRAY[{}] AS bins_{j}", bins.join(", "))
                    }
                })
                .collect();
            text.push_str(&format!(
                "__br_edges AS (\n  SELECT\n    __br_rows.*,\n    {}\n  FROM __br_rows{}\n),\n__br_binned AS (\n  SELECT\n    {}\n  FROM __br_edges{}\n),\n__br_bins AS (\n  SELECT\n    {}\n  FROM __br_binned\n),\n",
                (1..=p).map(|j| format!("(SELECT deciles_{j} FROM __br_deciles) AS __br_d{j}")).collect::<Vec<_>>().join(",\n    "),
                dialect.stage_fence(),
                binned.join(",\n    "),
                dialect.stage_fence(),
                counts.join(",\n    ")
            ));
            text.push_str(&format!("__br_sums AS (\n  {aggregate}\n)\n"));
            // The one-row lists join the sums as scalar subqueries, never
            // as a join: Spark's planner ran out of memory on the cross
            // join of the grouped sums with them (constraint propagation
            // again), where a scalar subquery is planned on its own and run
            // once, as PostgreSQL runs it as an init plan.
            let lists: Vec<String> = (1..=p)
                .flat_map(|j| {
                    [("deciles", "__br_deciles"), ("bins", "__br_bins")].map(|(what, from)| {
                        let list = format!("{what}_{j}");
                        // Spark's CSV writer takes no arrays: each list is
                        // written as PostgreSQL writes one, `{a,b,…}`,
                        // which the reader parses.
                        let value = if spark {
                            format!("CONCAT('{{', ARRAY_JOIN(TRANSFORM({list}, v -> CAST(v AS STRING)), ','), '}}')")
                        } else {
                            list.clone()
                        };
                        format!("(SELECT {value} FROM {from}) AS {list}")
                    })
                })
                .collect();
            text.push_str(&format!(
                "SELECT\n  __br_sums.*,\n  '{}' AS decile_method,\n  {}\nFROM __br_sums;\n",
                method.name(),
                lists.join(",\n  ")
            ));
        }
        _ => {
            text.push_str(&format!("__br_sums AS (\n  {aggregate}\n)\nSELECT * FROM __br_sums;\n"));
        }
    }
    Ok(text)
}

/// The columns a table's rows are read from, and the two row-wise stages
/// every aggregate query starts with: `__br_shift` (one complete row's
/// numeric values, the shift) and `__br_flags` (per row: the label as text
/// `__br_y`, `__br_nolabel`, the completeness flag `__br_ok`, the raw
/// weight `__br_raw_w`; per categorical input c its trimmed level
/// `__br_g{c}` and missing flag `__br_m{c}`; per numeric input j its value
/// `__br_raw{j}`, shift `__br_s{j}` and missing flag `__br_n{j}`).
pub(crate) struct RowInputs<'a> {
    pub(crate) table: &'a str,
    pub(crate) target: &'a str,
    pub(crate) numeric: &'a [String],
    pub(crate) categorical: &'a [String],
    pub(crate) weight: Option<&'a str>,
    pub(crate) na_tokens: &'a [String],
}

impl RowInputs<'_> {
    /// `WITH __br_shift AS (...), __br_flags AS (...),` in `dialect`.
    pub(crate) fn stages(&self, dialect: Dialect) -> Result<String> {
        let table = sql::table(dialect, self.table)?;
        let target = ident(dialect, self.target)?;
        let numeric: Vec<String> = self.numeric.iter().map(|n| ident(dialect, n)).collect::<Result<_>>()?;
        let categorical: Vec<String> = self.categorical.iter().map(|n| ident(dialect, n)).collect::<Result<_>>()?;
        sql::distinct_names(
            dialect,
            "columns",
            std::iter::once(self.target)
                .chain(self.numeric.iter().map(String::as_str))
                .chain(self.categorical.iter().map(String::as_str))
                .chain(self.weight),
        )?;
        let (double, text_type) = (dialect.double_type(), dialect.text_type());
        let level = |g: &str| format!("TRIM(CAST({g} AS {text_type}))");
        let mut missing_level = Vec::new();
        for g in &categorical {
            let tokens: Vec<String> = std::iter::once(String::new())
                .chain(self.na_tokens.iter().cloned())
                .map(|t| string(dialect, &t))
                .collect::<Result<_>>()?;
            missing_level.push(format!("({g} IS NULL OR {} IN ({}))", level(g), tokens.join(", ")));
        }
        let mut complete: Vec<String> = vec![format!("{target} IS NOT NULL")];
        complete.extend(numeric.iter().map(|x| format!("{x} IS NOT NULL")));
        complete.extend(missing_level.iter().map(|m| format!("NOT {m}")));
        let weight = match self.weight {
            Some(w) => {
                let w = ident(dialect, w)?;
                complete.push(format!("{w} IS NOT NULL"));
                format!("CAST({w} AS {double})")
            }
            None => "1E0".into(),
        };
        let complete = complete.join(" AND ");

        let p = numeric.len();
        let shift: Vec<String> =
            (1..=p).map(|j| format!("CAST({} AS {double}) AS __br_k{j}", numeric[j - 1])).collect();
        // With no numeric input the shift row only has to exist.
        let shift = if shift.is_empty() { vec!["1 AS __br_k0".to_string()] } else { shift };
        let mut text = String::new();
        text.push_str(&format!(
            "WITH\n__br_shift AS (\n  SELECT\n    {}\n  FROM {table}\n  WHERE {complete}\n  {}\n),\n",
            shift.join(",\n    "),
            if dialect == Dialect::Spark { "LIMIT 1" } else { "FETCH FIRST 1 ROWS ONLY" }
        ));
        // Two row-wise stages, each ending in the stage fence so that the engine
        // evaluates every expression once per row: folded into the aggregate,
        // PostgreSQL would evaluate the completeness test and the cast once per
        // use — in every cross-product — which made the LDA query five times
        // slower on a million rows.
        let mut flags = vec![
            format!("CAST({target} AS {text_type}) AS __br_y"),
            format!("CASE WHEN {target} IS NULL THEN 1 ELSE 0 END AS __br_nolabel"),
            format!("CASE WHEN {complete} THEN 1 ELSE 0 END AS __br_ok"),
            format!("{weight} AS __br_raw_w"),
        ];
        for (c, g) in categorical.iter().enumerate() {
            flags.push(format!("{} AS __br_g{}", level(g), c + 1));
            flags.push(format!("CASE WHEN {} THEN 1 ELSE 0 END AS __br_m{}", missing_level[c], c + 1));
        }
        for (j, x) in numeric.iter().enumerate() {
            let j = j + 1;
            flags.push(format!("CAST({x} AS {double}) AS __br_raw{j}"));
            flags.push(format!("__br_shift.__br_k{j} AS __br_s{j}"));
            flags.push(format!("CASE WHEN {x} IS NULL THEN 1 ELSE 0 END AS __br_n{j}"));
        }
        text.push_str(&format!(
            "__br_flags AS (\n  SELECT\n    {}\n  FROM {table} CROSS JOIN __br_shift{}\n),\n",
            flags.join(",\n    "),
            dialect.stage_fence()
        ));
        Ok(text)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn request(dialect: Dialect, deciles: Option<Deciles>) -> StatsRequest {
        StatsRequest {
            family: Family::Lda,
            table: "t".into(),
            target: "y".into(),
            numeric: vec!["x".into()],
            categorical: Vec::new(),
            weight: None,
            na_tokens: Vec::new(),
            dialect,
            deciles,
        }
    }

    /// Deciles are asked of a dialect only where it has them.
    #[test]
    fn deciles_follow_the_dialect() {
        assert!(stats_sql(&request(Dialect::Ansi, Some(Deciles::Exact))).is_err());
        assert!(stats_sql(&request(Dialect::Postgres, Some(Deciles::Approximate))).is_err());
        let approximate = stats_sql(&request(Dialect::Spark, Some(Deciles::Approximate))).expect("spark");
        assert!(approximate.contains("percentile_approx(") && approximate.contains("'approximate' AS decile_method"));
        let exact = stats_sql(&request(Dialect::Spark, None)).expect("spark");
        assert!(exact.contains("percentile(__br_v1") && !exact.contains("percentile_approx"));
        let none = stats_sql(&request(Dialect::Spark, Some(Deciles::None))).expect("spark");
        assert!(!none.contains("percentile") && !none.contains("decile_method"));
        assert!(!stats_sql(&request(Dialect::Ansi, None)).expect("ansi").contains("percentile"));
    }
}
