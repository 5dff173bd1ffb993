//! A dataset from arrays a program already holds: a matrix of feature
//! values, a description of each column (name, kind, levels), and the
//! labels. It goes through the same missing-value policy, target checks and
//! summaries as a file ([`Dataset::from_table`]), so a model fitted on
//! arrays is the model fitted on the same values read from a file.
//!
//! Categorical columns hold level codes (0, 1, … into the column's levels,
//! as `f64`); a missing value is `NaN` in either kind of column.

use ndarray::{Array2, ArrayView2, ShapeBuilder};

use crate::data::csv_chunk::ColumnFacts;
use crate::data::csv_read::{ColumnValues, ReadColumn, ReadTable, MISSING_CODE};
use crate::data::dataset::{DataNotice, Dataset};
use crate::data::options::ReadOptions;
use crate::data::schema::{ColumnKind, ColumnRole};
use crate::error::{Error, Position, Result};

/// The name under which arrays appear in messages (rows are "lines" there:
/// row r is line r + 1).
pub const ARRAYS_PATH: &str = "<arrays>";

/// One feature column of the matrix.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct ColumnDescription {
    /// The column's name (the model file and reason codes use it).
    pub name: String,
    /// Numbers, or codes of levels.
    pub kind: ColumnKind,
    /// The levels a categorical column's codes stand for (empty for a
    /// numeric column).
    pub levels: Vec<String>,
}

impl ColumnDescription {
    /// A numeric column.
    pub fn numeric(name: impl Into<String>) -> Self {
        ColumnDescription { name: name.into(), kind: ColumnKind::Numeric, levels: Vec::new() }
    }

    /// A categorical column whose codes index `levels`.
    pub fn categorical(name: impl Into<String>, levels: &[&str]) -> Self {
        ColumnDescription {
            name: name.into(),
            kind: ColumnKind::Categorical,
            levels: levels.iter().map(|l| l.to_string()).collect(),
        }
    }
}

/// Labelled rows held as arrays.
#[derive(Debug, Clone, Copy)]
pub struct LabelledArrays<'a> {
    /// Feature values, rows × columns (any layout).
    pub features: ArrayView2<'a, f64>,
    /// One description per column of `features`.
    pub columns: &'a [ColumnDescription],
    /// The label column's name.
    pub target_name: &'a str,
    /// The class names.
    pub classes: &'a [String],
    /// Each row's class, an index into `classes`.
    pub target: &'a [usize],
    /// Frequency weights, one per row (non-negative).
    pub weights: Option<&'a [f64]>,
}

fn at(row: usize) -> Position {
    Position { path: ARRAYS_PATH.to_string(), line: row as u64 + 1 }
}

impl Dataset {
    /// A dataset from arrays; `options` supply the missing-value policy and
    /// the positive class (their file-reading fields are not used).
    pub fn from_arrays(data: &LabelledArrays<'_>, options: &ReadOptions) -> Result<(Dataset, Vec<DataNotice>)> {
        let (rows, width) = data.features.dim();
        let shape = |message: String| Error::SchemaMismatch { path: ARRAYS_PATH.to_string(), message: message.into() };
        if width != data.columns.len() {
            return Err(shape(format!("the matrix has {width} columns but {} are described", data.columns.len())));
        }
        if data.target.len() != rows {
            return Err(shape(format!("the matrix has {rows} rows but there are {} labels", data.target.len())));
        }
        if let Some(w) = data.weights {
            if w.len() != rows {
                return Err(shape(format!("the matrix has {rows} rows but there are {} weights", w.len())));
            }
        }
        let mut names: Vec<&str> = data.columns.iter().map(|c| c.name.as_str()).collect();
        names.push(data.target_name);
        for (i, name) in names.iter().enumerate() {
            if name.is_empty() {
                return Err(Error::EmptyColumnName { at: at(0), position: i + 1 });
            }
            if let Some(first) = names[..i].iter().position(|n| n == name) {
                let at = Position { path: ARRAYS_PATH.to_string(), line: 0 };
                return Err(Error::DuplicateColumn { at, column: name.to_string(), first: first + 1, second: i + 1 });
            }
        }

        let numeric_count = data.columns.iter().filter(|c| c.kind == ColumnKind::Numeric).count();
        let mut numeric = Array2::zeros((rows, numeric_count).f());
        let mut columns = Vec::with_capacity(width + 2);
        let mut next_numeric = 0;
        for (j, description) in data.columns.iter().enumerate() {
            let values = data.features.column(j);
            let mut facts = ColumnFacts::default();
            let note_missing = |r: usize, facts: &mut ColumnFacts| {
                facts.missing += 1;
                facts.first_missing_line.get_or_insert(r as u64 + 1);
            };
            let column_values = match description.kind {
                ColumnKind::Numeric => {
                    for (r, &x) in values.iter().enumerate() {
                        if x.is_nan() {
                            note_missing(r, &mut facts);
                        } else if !x.is_finite() {
                            return Err(Error::NonFiniteValue {
                                at: at(r),
                                column: description.name.clone(),
                                value: x.to_string(),
                            });
                        } else {
                            facts.number_like += 1;
                        }
                    }
                    numeric.column_mut(next_numeric).assign(&values);
                    next_numeric += 1;
                    ColumnValues::NumericFeature { index: next_numeric - 1 }
                }
                ColumnKind::Categorical => {
                    let (levels, order) = sorted_levels(&description.name, &description.levels)?;
                    let mut codes = Vec::with_capacity(rows);
                    let mut first_lines = vec![u64::MAX; levels.len()];
                    for (r, &x) in values.iter().enumerate() {
                        if x.is_nan() {
                            note_missing(r, &mut facts);
                            codes.push(MISSING_CODE);
                            continue;
                        }
                        let code = order.get(x as usize).copied().filter(|_| x >= 0.0 && x.fract() == 0.0);
                        let Some(code) = code else {
                            return Err(Error::BadRow {
                                at: at(r),
                                column: description.name.clone(),
                                message: format!("{x} is not the code of one of its {} levels", levels.len()),
                            });
                        };
                        first_lines[code as usize] = first_lines[code as usize].min(r as u64 + 1);
                        codes.push(code);
                    }
                    ColumnValues::Categorical { codes, levels, first_lines }
                }
            };
            columns.push(ReadColumn {
                name: description.name.clone(),
                role: ColumnRole::Feature,
                values: column_values,
                facts,
                kind_forced: true,
            });
        }
        let (classes, order) = sorted_levels(data.target_name, data.classes)?;
        let mut codes = Vec::with_capacity(rows);
        let mut first_lines = vec![u64::MAX; classes.len()];
        for (r, &y) in data.target.iter().enumerate() {
            let Some(&code) = order.get(y) else {
                return Err(Error::BadRow {
                    at: at(r),
                    column: data.target_name.to_string(),
                    message: format!("label {y} is not the index of one of the {} classes", classes.len()),
                });
            };
            first_lines[code as usize] = first_lines[code as usize].min(r as u64 + 1);
            codes.push(code);
        }
        columns.push(ReadColumn {
            name: data.target_name.to_string(),
            role: ColumnRole::Target,
            values: ColumnValues::Categorical { codes, levels: classes, first_lines },
            facts: ColumnFacts::default(),
            kind_forced: false,
        });
        if let Some(weights) = data.weights {
            if let Some(r) = weights.iter().position(|w| !(w.is_finite() && *w >= 0.0)) {
                return Err(Error::InvalidWeight {
                    at: at(r),
                    column: "weights".to_string(),
                    value: weights[r].to_string(),
                    reason: "weights must be finite and not negative".to_string(),
                });
            }
            columns.push(ReadColumn {
                name: "weights".to_string(),
                role: ColumnRole::Weight,
                values: ColumnValues::Weights(weights.to_vec()),
                facts: ColumnFacts::default(),
                kind_forced: false,
            });
        }
        let mut options = options.clone();
        options.target = data.target_name.to_string();
        let table = ReadTable { path: ARRAYS_PATH.to_string(), rows, columns, numeric };
        if rows == 0 {
            return Err(Error::HeaderOnly { path: ARRAYS_PATH.to_string() });
        }
        Dataset::from_table(table, &options)
    }
}

/// The levels in byte order (as a file's levels are kept), and for each
/// given level its code in that order. Levels must be distinct.
fn sorted_levels(column: &str, given: &[String]) -> Result<(Vec<String>, Vec<u32>)> {
    let mut sorted = given.to_vec();
    sorted.sort();
    if let Some(pair) = sorted.windows(2).find(|w| w[0] == w[1]) {
        return Err(Error::SchemaMismatch {
            path: ARRAYS_PATH.to_string(),
            message: format!("column '{column}' names the level '{}' twice", pair[0]).into(),
        });
    }
    let order = given.iter().map(|l| sorted.binary_search(l).map_or(0, |i| i as u32)).collect();
    Ok((sorted, order))
}
