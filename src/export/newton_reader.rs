//! Reading a Newton step query's result back (CSV with a header, as the
//! engine wrote it) against the model it was written for, with errors that
//! name the line and column.

use std::collections::BTreeMap;
use std::path::Path;

use crate::error::{Error, Position, Result};
use crate::export::newton_query::NEWTON_FORMAT;
use crate::model::logistic_aggregates::{LabelSums, StepSums};
use crate::train::file::ModelFile;
use crate::train::newton::{fingerprint, newton_start};

/// Reads the result of the step query written for `start`, with the
/// SHA-256 of exactly the bytes parsed.
pub fn read_newton_with_hash(path: &Path, start: &ModelFile) -> Result<(StepSums, String)> {
    let shown = path.display().to_string();
    let bytes = std::fs::read(path).map_err(|e| Error::io(&shown, e))?;
    let hash = crate::io::sha256_hex(&bytes);
    parse(&shown, &bytes, start).map(|sums| (sums, hash))
}

fn parse(shown: &str, bytes: &[u8], start: &ModelFile) -> Result<StepSums> {
    let model = newton_start(start)?;
    let expected = fingerprint(start)?;
    let bad = |message: String| Error::SchemaMismatch { path: shown.to_string(), message: message.into() };
    let mut reader = csv::ReaderBuilder::new().has_headers(true).from_reader(bytes);
    let header: Vec<String> = reader
        .headers()
        .map_err(|e| bad(format!("the header cannot be read: {e}")))?
        .iter()
        .map(String::from)
        .collect();
    let column = |name: &str| header.iter().position(|h| h == name);
    if ["format", "kind", "start_model"].iter().any(|n| column(n).is_none()) {
        return Err(bad(
            "the header has no 'format', 'kind' or 'start_model' column: this is not the result of baserate stats-sql --family logistic (save it as CSV with its header)".into(),
        ));
    }
    let p = model.encoding.numeric.len();
    let d = model.encoding.width();
    let q = model.coefficients.len();
    let width = d + 1;
    let size = q * width;
    let groups = model.encoding.one_hot.len();
    let weighted = start.schema.weight_column().is_some();
    let at = |record: &csv::StringRecord| Position {
        path: shown.to_string(),
        line: record.position().map_or(0, |p| p.line()),
    };
    let mut sums = StepSums {
        path: shown.to_string(),
        labels: BTreeMap::new(),
        unlabelled: 0.0,
        levels: vec![BTreeMap::new(); groups],
    };
    let mut any = false;
    for record in reader.records() {
        let record = record.map_err(|e| bad(format!("the file cannot be read as CSV: {e}")))?;
        let text = |name: &str| column(name).and_then(|i| record.get(i)).unwrap_or("").to_string();
        let value = |name: &str| -> Result<f64> {
            let Some(i) = column(name) else {
                return Err(bad(format!(
                    "the header has no column '{name}': the result is incomplete, or the query was written for another model"
                )));
            };
            let raw = record.get(i).unwrap_or("");
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
        let malformed =
            |name: &str, message: String| Error::Malformed { at: at(&record), column: name.into(), message };
        if text("format") != NEWTON_FORMAT {
            return Err(malformed("format", format!("expected '{NEWTON_FORMAT}', found '{}'", text("format"))));
        }
        if text("start_model") != expected {
            return Err(malformed(
                "start_model",
                format!(
                    "the result is of the query at model {}, not at this start model ({expected}); run the query stats-sql wrote for this model",
                    text("start_model")
                ),
            ));
        }
        any = true;
        match text("kind").as_str() {
            "class" => {
                let label = text("class");
                // The rows without a label form a group of their own.
                sums.unlabelled += value("unlabelled")?;
                if label.is_empty() {
                    continue;
                }
                let mut row = LabelSums {
                    rows: value("rows")?,
                    weight: value("weight")?,
                    incomplete: value("incomplete")?,
                    negative: if weighted { value("negative_weights")? } else { 0.0 },
                    log_likelihood: value("log_likelihood")?,
                    ..LabelSums::default()
                };
                for a in 1..=d {
                    row.sums.push(value(&format!("sum_{a}"))?);
                    row.squares.push(value(&format!("square_{a}"))?);
                }
                for k in 1..=q {
                    for a in 0..=d {
                        row.probability_sums.push(value(&format!("p_sum_{k}_{a}"))?);
                    }
                }
                row.information = vec![0.0; size * size];
                for c in 1..=q {
                    for e in c..=q {
                        for a in 0..=d {
                            for b in a..=d {
                                let v = value(&format!("information_{c}_{e}_{a}_{b}"))?;
                                // Block (c, e) is symmetric in (a, b); the
                                // matrix is symmetric in (c, a), (e, b).
                                for (x, y) in [(a, b), (b, a)] {
                                    let (i, j) = ((c - 1) * width + x, (e - 1) * width + y);
                                    row.information[i * size + j] = v;
                                    row.information[j * size + i] = v;
                                }
                            }
                        }
                    }
                }
                for j in 1..=p {
                    row.min.push(value(&format!("min_{j}"))?);
                    row.max.push(value(&format!("max_{j}"))?);
                    row.shift.push(value(&format!("shift_{j}"))?);
                    row.missing.push(value(&format!("missing_{j}"))?);
                    row.plain.push((value(&format!("plain_sum_{j}"))?, value(&format!("plain_square_{j}"))?));
                }
                row.level_missing =
                    (1..=groups).map(|g| value(&format!("level_missing_{g}"))).collect::<Result<_>>()?;
                if sums.labels.insert(label.clone(), row).is_some() {
                    return Err(malformed("class", format!("the class '{label}' has two rows")));
                }
            }
            "level" => {
                let grouped: Vec<usize> = (1..=groups)
                    .map(|g| value(&format!("grouped_{g}")).map(|v| v as usize))
                    .collect::<Result<Vec<_>>>()?;
                let Some(g) = grouped.iter().position(|&v| v == 1) else {
                    return Err(malformed("grouped_1", "a level row grouped by no categorical input".into()));
                };
                let level = text(&format!("level_{}", g + 1));
                *sums.levels[g].entry(level).or_insert(0.0) += value("level_rows")?;
            }
            other => return Err(malformed("kind", format!("'{other}' is not 'class' or 'level'"))),
        }
    }
    if !any {
        return Err(bad("the result has no rows".into()));
    }
    Ok(sums)
}
