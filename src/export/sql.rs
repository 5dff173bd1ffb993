//! SQL text: identifiers, literals, comments and the dialects.
//!
//! Every name that comes from data or a model (columns, classes, levels,
//! actions, the table) is quoted and escaped here and nowhere else, so a
//! name such as `x"; DROP TABLE t; --` can only ever be a name. Numbers
//! are written as approximate numeric literals (`1.5E0`), which standard
//! SQL types as double precision, with the shortest digits that give the
//! same double back, so the engine computes with exactly the model's
//! parameters.

use crate::error::{Error, Result, Setting};

/// The SQL spelling to write.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum Dialect {
    /// Standard SQL only (CASE, EXP, LN, CAST, window functions,
    /// GROUPING SETS): runs on PostgreSQL, DuckDB and most warehouses.
    #[default]
    Ansi,
    /// PostgreSQL: GREATEST/LEAST, escape strings where a backslash
    /// occurs, and `percentile_cont` deciles in the aggregate query.
    Postgres,
    /// Apache Spark SQL (ANSI mode, the default from Spark 4): identifiers
    /// in backticks, backslashes in string literals escaped, DOUBLE and
    /// STRING types, GREATEST/LEAST, exact `percentile` deciles, no
    /// planner fence; names that differ only in case are refused, since
    /// Spark resolves columns without regard to case.
    Spark,
}

impl std::str::FromStr for Dialect {
    type Err = String;

    fn from_str(text: &str) -> std::result::Result<Self, String> {
        [Dialect::Ansi, Dialect::Postgres, Dialect::Spark]
            .into_iter()
            .find(|d| d.name() == text)
            .ok_or_else(|| format!("'{text}' is not a SQL dialect baserate writes (ansi, postgres or spark)"))
    }
}

impl Dialect {
    /// The dialect's name.
    pub fn name(self) -> &'static str {
        match self {
            Dialect::Ansi => "ansi",
            Dialect::Postgres => "postgres",
            Dialect::Spark => "spark",
        }
    }

    /// The double-precision type's name.
    pub fn double_type(self) -> &'static str {
        match self {
            Dialect::Spark => "DOUBLE",
            _ => "DOUBLE PRECISION",
        }
    }

    /// The unbounded text type's name.
    pub fn text_type(self) -> &'static str {
        match self {
            Dialect::Spark => "STRING",
            _ => "VARCHAR",
        }
    }

    /// What ends a common table expression that must stay a stage:
    /// `OFFSET 0 ROWS` keeps PostgreSQL from inlining it (and computing a
    /// shared subexpression once per use); Spark computes each stage once
    /// without it, and an offset there could gather the rows in one task.
    pub fn stage_fence(self) -> &'static str {
        match self {
            Dialect::Spark => "",
            _ => "\n  OFFSET 0 ROWS",
        }
    }

    /// True when the engine resolves column names without regard to case.
    pub fn folds_case(self) -> bool {
        self == Dialect::Spark
    }

    /// The longest identifier the engine keeps whole (PostgreSQL cuts
    /// longer ones to 63 bytes; the standard allows 128 characters).
    pub fn identifier_limit(self) -> usize {
        match self {
            Dialect::Ansi | Dialect::Spark => 128,
            Dialect::Postgres => 63,
        }
    }
}

fn no_nul(what: &str, text: &str) -> Result<()> {
    if text.contains('\0') {
        return Err(Error::Usage(format!(
            "the {what} {:?} contains a NUL character, which SQL text cannot carry",
            text.replace('\0', "\\0")
        )));
    }
    Ok(())
}

/// A quoted identifier: `"name"` with every `"` doubled; in Spark
/// `` `name` `` with every backtick doubled.
pub fn ident(dialect: Dialect, name: &str) -> Result<String> {
    no_nul("name", name)?;
    Ok(match dialect {
        Dialect::Spark => format!("`{}`", name.replace('`', "``")),
        _ => format!("\"{}\"", name.replace('"', "\"\"")),
    })
}

/// Refuses names that the dialect's engine could not tell apart: in an
/// engine that folds case, two names equal but for case.
pub fn distinct_names<'a>(dialect: Dialect, what: &str, names: impl IntoIterator<Item = &'a str>) -> Result<()> {
    if !dialect.folds_case() {
        return Ok(());
    }
    let mut seen: std::collections::BTreeMap<String, &str> = std::collections::BTreeMap::new();
    for name in names {
        if let Some(earlier) = seen.insert(name.to_lowercase(), name) {
            if earlier != name {
                return Err(Error::Usage(format!(
                    "the {what} '{earlier}' and '{name}' differ only in case, and {} resolves names without regard to case — rename one (e.g. in a view)",
                    dialect.name()
                )));
            }
        }
    }
    Ok(())
}

/// A quoted identifier for an output column, refused when the dialect
/// would cut it (two cut names could collide silently).
pub fn output_ident(dialect: Dialect, name: &str) -> Result<String> {
    if name.len() > dialect.identifier_limit() {
        return Err(Error::Usage(format!(
            "the output column name '{name}' is {} bytes long; {} keeps {} at most — shorten the class or column name (e.g. in a view)",
            name.len(),
            dialect.name(),
            dialect.identifier_limit()
        )));
    }
    ident(dialect, name)
}

/// A table name: dotted parts (`schema.table`) each quoted.
pub fn table(dialect: Dialect, name: &str) -> Result<String> {
    let parts: Vec<&str> = name.split('.').collect();
    if parts.iter().any(|p| p.is_empty()) {
        return Err(Error::invalid(crate::error::message![
            Setting::Table,
            format!(" takes NAME or SCHEMA.NAME (parts joined by single dots), not '{name}'")
        ]));
    }
    Ok(parts.iter().map(|p| ident(dialect, p)).collect::<Result<Vec<_>>>()?.join("."))
}

/// A string literal: `'text'` with every `'` doubled. In the PostgreSQL
/// dialect a text with a backslash is written as an escape string
/// (`E'…'`, backslashes doubled), which reads the same whatever
/// `standard_conforming_strings` says; Spark reads a backslash as an
/// escape in every literal, so there it is doubled.
pub fn string(dialect: Dialect, text: &str) -> Result<String> {
    no_nul("text", text)?;
    let quoted = text.replace('\'', "''");
    Ok(match dialect {
        Dialect::Postgres if text.contains('\\') => format!("E'{}'", quoted.replace('\\', "\\\\")),
        Dialect::Spark => format!("'{}'", quoted.replace('\\', "\\\\")),
        _ => format!("'{quoted}'"),
    })
}

/// A double as an approximate numeric literal, negative values in
/// parentheses (so `a - (-1E0)` never reads as a comment `--`). Only
/// finite values are written; the model files guarantee finiteness.
pub fn number(value: f64) -> String {
    let mut buffer = ryu::Buffer::new();
    let text = buffer.format_finite(value);
    let literal = if text.contains(['e', 'E']) { text.replace('e', "E") } else { format!("{text}E0") };
    if literal.starts_with('-') {
        format!("({literal})")
    } else {
        literal
    }
}

/// The floor on exponents: exp(−700) ≈ 1e−304 is still a normal double,
/// so engines that refuse to underflow (PostgreSQL) never see one.
pub const EXPONENT_FLOOR: f64 = -700.0;

/// `EXP(x)` for x ≤ 0, as 0 below [`EXPONENT_FLOOR`] (as the library's exp
/// gives 0 there, where PostgreSQL would raise an underflow error).
pub fn floored_exp(exponent: &str) -> String {
    format!("CASE WHEN {exponent} < {} THEN 0E0 ELSE EXP({exponent}) END", number(EXPONENT_FLOOR))
}

/// A comment line: `-- text`, with line breaks and other control
/// characters turned into spaces so nothing after them can become SQL.
pub fn comment(text: &str) -> String {
    let clean: String = text.chars().map(|c| if c.is_control() { ' ' } else { c }).collect();
    format!("-- {clean}").trim_end().to_string()
}

/// The largest of `values` (all non-NULL): GREATEST in PostgreSQL and Spark, a
/// CASE elsewhere (the first branch whose value is at least every later
/// one is the first maximum).
pub fn greatest(dialect: Dialect, values: &[String]) -> String {
    match (dialect, values.len()) {
        (_, 0) => "NULL".into(),
        (_, 1) => values[0].clone(),
        (Dialect::Postgres | Dialect::Spark, _) => format!("GREATEST({})", values.join(", ")),
        (Dialect::Ansi, _) => pick_first(values, ">=", values),
    }
}

/// The smallest of `values`: LEAST in PostgreSQL and Spark, a CASE elsewhere.
pub fn least(dialect: Dialect, values: &[String]) -> String {
    match (dialect, values.len()) {
        (_, 0) => "NULL".into(),
        (_, 1) => values[0].clone(),
        (Dialect::Postgres | Dialect::Spark, _) => format!("LEAST({})", values.join(", ")),
        (Dialect::Ansi, _) => pick_first(values, "<=", values),
    }
}

/// `CASE WHEN v0 <= v1 AND v0 <= v2 THEN r0 WHEN v1 <= v2 THEN r1 ELSE r2 END`
/// (with `op`): the result of the first value that beats or ties every
/// later one — which is the first minimum (or maximum) of all of them.
pub fn pick_first(values: &[String], op: &str, results: &[String]) -> String {
    let n = values.len();
    if n == 1 {
        return results[0].clone();
    }
    let mut text = String::from("CASE");
    for i in 0..n - 1 {
        let conditions: Vec<String> = (i + 1..n).map(|j| format!("{} {op} {}", values[i], values[j])).collect();
        text.push_str(&format!(" WHEN {} THEN {}", conditions.join(" AND "), results[i]));
    }
    text.push_str(&format!(" ELSE {} END", results[n - 1]));
    text
}

/// `value` kept within [low, high] (either bound optional).
pub fn clamp(dialect: Dialect, value: &str, low: Option<f64>, high: Option<f64>) -> String {
    let mut text = value.to_string();
    if let Some(low) = low {
        text = greatest(dialect, &[text, number(low)]);
    }
    if let Some(high) = high {
        text = least(dialect, &[text, number(high)]);
    }
    text
}

/// `a0 + a1 + …`, left to right (the order the library sums in), or `0E0`.
pub fn sum(terms: &[String]) -> String {
    if terms.is_empty() {
        "0E0".into()
    } else {
        terms.join(" + ")
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn names_and_texts_are_escaped() {
        assert_eq!(ident(Dialect::Ansi, r#"x"; DROP TABLE t; --"#).unwrap(), r#""x""; DROP TABLE t; --""#);
        assert_eq!(ident(Dialect::Spark, "a`b\"c").unwrap(), "`a``b\"c`");
        assert_eq!(string(Dialect::Spark, r"a\'b").unwrap(), r"'a\\''b'");
        assert!(distinct_names(Dialect::Spark, "columns", ["Amount", "amount"]).is_err());
        assert!(distinct_names(Dialect::Postgres, "columns", ["Amount", "amount"]).is_ok());
        assert_eq!(string(Dialect::Ansi, "it's").unwrap(), "'it''s'");
        assert_eq!(string(Dialect::Postgres, r"a\'b").unwrap(), r"E'a\\''b'");
        assert!(ident(Dialect::Ansi, "a\0b").is_err());
        assert_eq!(table(Dialect::Ansi, "mart.loans").unwrap(), r#""mart"."loans""#);
        assert_eq!(table(Dialect::Spark, "mart.loans").unwrap(), "`mart`.`loans`");
        assert!(table(Dialect::Ansi, "mart..loans").is_err());
        assert_eq!(comment("one\ntwo;\rDROP"), "-- one two; DROP");
    }

    #[test]
    fn numbers_keep_every_bit() {
        for v in [0.0, 1.0, -2.5, 1e-300, 123456.789, -0.1, f64::MAX, f64::MIN_POSITIVE, 1.0 / 3.0] {
            let text = number(v);
            assert!(text.contains('E'), "{text}");
            let bare = text.trim_start_matches('(').trim_end_matches(')');
            assert_eq!(bare.parse::<f64>().unwrap().to_bits(), v.to_bits(), "{text}");
        }
        assert_eq!(number(-1.5), "(-1.5E0)");
    }

    #[test]
    fn first_extremes() {
        let v: Vec<String> = ["a", "b", "c"].iter().map(|s| s.to_string()).collect();
        assert_eq!(least(Dialect::Ansi, &v), "CASE WHEN a <= b AND a <= c THEN a WHEN b <= c THEN b ELSE c END");
        assert_eq!(greatest(Dialect::Postgres, &v), "GREATEST(a, b, c)");
    }
}
