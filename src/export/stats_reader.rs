//! Reading an aggregate query's result back (CSV with a header, as the
//! engine wrote it), with errors that name the line and column.

use std::collections::BTreeMap;
use std::path::Path;

use crate::error::{Error, Position, Result};
use crate::export::stats_query::STATS_FORMAT;
use crate::model::aggregates::{Aggregates, ClassRow, Sums};
use crate::model::Family;

/// Reads a statistics result (CSV with a header, as the engine wrote it).
pub fn read_stats(path: &Path) -> Result<Aggregates> {
    read_stats_with_hash(path).map(|(aggregates, _)| aggregates)
}

/// [`read_stats`], with the SHA-256 of exactly the bytes parsed: the file
/// is opened and read once (so a pipe works, and is hashed as read).
pub fn read_stats_with_hash(path: &Path) -> Result<(Aggregates, String)> {
    let shown = path.display().to_string();
    let bytes = std::fs::read(path).map_err(|e| Error::io(&shown, e))?;
    let hash = crate::io::sha256_hex(&bytes);
    parse_stats(path, &bytes).map(|aggregates| (aggregates, hash))
}

fn parse_stats(path: &Path, bytes: &[u8]) -> Result<Aggregates> {
    let shown = path.display().to_string();
    let bad = |message: String| Error::SchemaMismatch { path: shown.clone(), message: message.into() };
    let mut reader = csv::ReaderBuilder::new().has_headers(true).from_reader(bytes);
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
        approximate_deciles: false,
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
            let arrays = |prefix: &str, len: usize, valid: fn(&[f64]) -> bool, what: &str| -> Result<Vec<Vec<f64>>> {
                (1..=p)
                    .map(|j| {
                        let name = format!("{prefix}_{j}");
                        let raw = text(&name);
                        braced_numbers(&raw).filter(|v| v.len() == len && valid(v)).ok_or_else(|| Error::Malformed {
                            at: at(&record),
                            column: name,
                            message: format!("'{raw}' is not a list of {what} in braces"),
                        })
                    })
                    .collect()
            };
            aggregates.approximate_deciles = text("decile_method") == "approximate";
            if has_deciles {
                // Deciles are cut points: finite and in ascending order
                // (ties allowed, a constant stretch has equal deciles).
                let ascending = |v: &[f64]| v.iter().all(|x| x.is_finite()) && v.windows(2).all(|w| w[0] <= w[1]);
                aggregates.deciles = Some(arrays("deciles", 9, ascending, "nine finite numbers in ascending order")?);
            }
            if column("bins_1").is_some() {
                aggregates.bins = Some(arrays("bins", 10, |v| v.iter().all(|&x| x >= 0.0), "ten counts")?);
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
        if class.is_empty() {
            return Err(Error::Malformed {
                at: at(&record),
                column: "class".into(),
                message: "the class is empty; every training row needs a label (the query counts rows without one in 'unlabelled')".into(),
            });
        }
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
