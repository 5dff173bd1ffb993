//! The training dataset: a file as read, turned into model inputs under the
//! missing-value policy, with its schema.

use ndarray::Array2;
use rayon::prelude::*;

use crate::data::csv_read::{ColumnValues, ReadColumn, ReadTable, MISSING_CODE};
use crate::data::options::{MissingPolicy, ReadOptions};
use crate::data::schema::{
    CategoricalSummary, ColumnKind, ColumnRole, ColumnSchema, Imputation, KindSource, PositiveRule, Schema,
    TargetSchema,
};
use crate::data::summary::summarize;
use crate::error::{Error, Position, Result};

/// The level name given to missing categorical values under `--missing impute`.
pub const MISSING_LEVEL: &str = "(missing)";

/// Suffix of the 0/1 indicator input added for an imputed numeric column.
pub const MISSING_INDICATOR_SUFFIX: &str = "_is_missing";

/// Model inputs for every training row.
#[derive(Debug, Clone)]
pub struct Dataset {
    /// What the file held.
    pub schema: Schema,
    /// Numeric inputs, one row per training row, columns as
    /// [`Schema::numeric_inputs`]. Never NaN.
    pub numeric: Array2<f64>,
    /// Level codes of each categorical input (in
    /// [`Schema::categorical_inputs`] order), indices into that column's
    /// levels. Never missing.
    pub categorical: Vec<Vec<u32>>,
    /// Class index of each row into `schema.target.classes`.
    pub target: Vec<u32>,
    /// Frequency weights, when `--weight` was given.
    pub weights: Option<Vec<f64>>,
    /// Identifier columns: (name, values).
    pub ids: Vec<(String, Vec<String>)>,
}

/// Something worth telling the user about the data that is not an error.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct DataNotice(pub String);

impl std::fmt::Display for DataNotice {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(&self.0)
    }
}

impl Dataset {
    /// Reads a training file from disk.
    pub fn read(path: &std::path::Path, options: &ReadOptions) -> Result<(Dataset, Vec<DataNotice>)> {
        let table = crate::data::csv_read::read_path(path, options)?;
        Dataset::from_table(table, options)
    }

    /// Number of rows.
    pub fn rows(&self) -> usize {
        self.target.len()
    }

    /// Builds the dataset from a table as read: applies the missing-value
    /// policy, checks the target, and summarises every column.
    pub fn from_table(table: ReadTable, options: &ReadOptions) -> Result<(Dataset, Vec<DataNotice>)> {
        let path = table.path.clone();
        let mut notices = Vec::new();
        let features: Vec<&ReadColumn> = table.columns.iter().filter(|c| c.role == ColumnRole::Feature).collect();

        // Rows to keep under the policy.
        let keep: Option<Vec<bool>> = match options.missing {
            MissingPolicy::Error => {
                if let Some((line, column)) = features
                    .iter()
                    .filter_map(|c| c.facts.first_missing_line.map(|l| (l, c.name.clone())))
                    .min()
                {
                    return Err(Error::MissingValue {
                        at: Position { path, line },
                        column,
                    });
                }
                None
            }
            MissingPolicy::Impute => None,
            MissingPolicy::DropRows => {
                let mut keep = vec![true; table.rows];
                for column in &features {
                    match &column.values {
                        ColumnValues::Numeric(v) => keep.iter_mut().zip(v).for_each(|(k, x)| *k &= !x.is_nan()),
                        ColumnValues::Categorical { codes, .. } => {
                            keep.iter_mut().zip(codes).for_each(|(k, c)| *k &= *c != MISSING_CODE)
                        }
                        _ => {}
                    }
                }
                Some(keep)
            }
        };
        let rows_dropped = keep.as_ref().map_or(0, |k| k.iter().filter(|&&x| !x).count());
        if rows_dropped > 0 {
            notices.push(DataNotice(format!(
                "{rows_dropped} of {} rows dropped for missing feature values (--missing drop-rows)",
                table.rows
            )));
        }
        let rows = table.rows - rows_dropped;
        if rows == 0 {
            return Err(Error::HeaderOnly { path });
        }
        let filter_f64 = |v: &[f64]| -> Vec<f64> {
            match &keep {
                None => v.to_vec(),
                Some(k) => v.iter().zip(k).filter(|(_, &k)| k).map(|(x, _)| *x).collect(),
            }
        };
        let filter_codes = |v: &[u32]| -> Vec<u32> {
            match &keep {
                None => v.to_vec(),
                Some(k) => v.iter().zip(k).filter(|(_, &k)| k).map(|(x, _)| *x).collect(),
            }
        };

        let header_names: Vec<String> = table.columns.iter().map(|c| c.name.clone()).collect();
        let mut schema_columns = Vec::with_capacity(table.columns.len());
        let mut numeric_columns: Vec<Vec<f64>> = Vec::new();
        let mut indicator_columns: Vec<Vec<f64>> = Vec::new();
        let mut categorical = Vec::new();
        let mut target_info = None;
        let mut weights = None;
        let mut ids = Vec::new();

        // Summaries are the expensive part: compute them for all numeric
        // features in parallel.
        let numeric_kept: Vec<Option<Vec<f64>>> = table
            .columns
            .par_iter()
            .map(|c| match (&c.role, &c.values) {
                (ColumnRole::Feature | ColumnRole::Weight, ColumnValues::Numeric(v)) => Some(filter_f64(v)),
                _ => None,
            })
            .collect();
        let summaries: Vec<_> = numeric_kept
            .par_iter()
            .zip(table.columns.par_iter())
            .map(|(v, c)| match (v, c.role) {
                (Some(v), ColumnRole::Feature) => summarize(v),
                _ => None,
            })
            .collect();

        for ((column, kept), summary) in table.columns.iter().zip(numeric_kept).zip(summaries) {
            let kind_source = Some(if column.kind_forced { KindSource::Declared } else { KindSource::Inferred });
            let mut entry = ColumnSchema {
                name: column.name.clone(),
                role: column.role,
                kind: None,
                kind_source: None,
                missing: column.facts.missing,
                numeric: None,
                categorical: None,
                imputation: None,
            };
            match (column.role, &column.values) {
                (ColumnRole::Feature, ColumnValues::Numeric(_)) => {
                    let mut values = kept.unwrap_or_default();
                    entry.kind = Some(ColumnKind::Numeric);
                    entry.kind_source = kind_source;
                    let Some(summary) = summary else {
                        return Err(Error::Malformed {
                            at: Position { path, line: 2 },
                            column: column.name.clone(),
                            message: "every value of this column is missing; exclude it with --exclude".to_string(),
                        });
                    };
                    if summary.std_dev == 0.0 {
                        notices.push(DataNotice(format!(
                            "column '{}' is constant ({}); it carries no information (consider --exclude {})",
                            column.name, summary.min, column.name
                        )));
                    }
                    if options.missing == MissingPolicy::Impute && column.facts.missing > 0 {
                        let indicator = format!("{}{}", column.name, MISSING_INDICATOR_SUFFIX);
                        if header_names.contains(&indicator) {
                            return Err(Error::Usage(format!(
                                "--missing impute would add the indicator column '{indicator}', but the file already has a column of that name; rename it"
                            )));
                        }
                        let median = summary.median;
                        indicator_columns.push(values.iter().map(|v| f64::from(u8::from(v.is_nan()))).collect());
                        values.iter_mut().filter(|v| v.is_nan()).for_each(|v| *v = median);
                        entry.imputation = Some(Imputation::Median { value: median, indicator });
                        notices.push(DataNotice(format!(
                            "column '{}': {} missing values set to the median {} with an indicator input",
                            column.name, column.facts.missing, median
                        )));
                    }
                    entry.numeric = Some(summary);
                    numeric_columns.push(values);
                }
                (ColumnRole::Feature, ColumnValues::Categorical { codes, levels }) => {
                    entry.kind = Some(ColumnKind::Categorical);
                    entry.kind_source = kind_source;
                    let mut codes = filter_codes(codes);
                    let mut levels = levels.clone();
                    if options.missing == MissingPolicy::Impute && column.facts.missing > 0 {
                        if levels.iter().any(|l| l == MISSING_LEVEL) {
                            return Err(Error::Usage(format!(
                                "column '{}' already has a level named '{MISSING_LEVEL}', which --missing impute uses for missing values",
                                column.name
                            )));
                        }
                        let code = levels.len() as u32;
                        levels.push(MISSING_LEVEL.to_string());
                        codes.iter_mut().filter(|c| **c == MISSING_CODE).for_each(|c| *c = code);
                        entry.imputation = Some(Imputation::Level { level: MISSING_LEVEL.to_string() });
                    }
                    let mut counts = vec![0usize; levels.len()];
                    for &c in &codes {
                        counts[c as usize] += 1;
                    }
                    notices.extend(categorical_notices(column, levels.len(), rows));
                    entry.categorical = Some(CategoricalSummary { levels, counts });
                    categorical.push(codes);
                }
                (ColumnRole::Target, ColumnValues::Categorical { codes, levels }) => {
                    target_info = Some((filter_codes(codes), levels.clone()));
                }
                (ColumnRole::Weight, ColumnValues::Numeric(_)) => weights = kept,
                (ColumnRole::Id, ColumnValues::Text(values)) => ids.push((
                    column.name.clone(),
                    match &keep {
                        None => values.clone(),
                        Some(k) => values.iter().zip(k).filter(|(_, &k)| k).map(|(x, _)| x.clone()).collect(),
                    },
                )),
                _ => {}
            }
            schema_columns.push(entry);
        }

        let Some((target_codes, classes)) = target_info else {
            return Err(Error::Usage("no target column was read".to_string()));
        };
        let target = build_target(&path, &options.target, &target_codes, &classes, weights.as_deref(), options)?;

        numeric_columns.extend(indicator_columns);
        let numeric = row_major(&numeric_columns, rows);
        let schema = Schema {
            columns: schema_columns,
            target,
            na_tokens: options.na_tokens.clone(),
            missing_policy: options.missing,
            rows,
            rows_dropped,
        };
        Ok((
            Dataset {
                schema,
                numeric,
                categorical,
                target: target_codes,
                weights,
                ids,
            },
            notices,
        ))
    }
}

/// Warnings about a categorical column: one inferred categorical though
/// nearly all its values are numbers, and one with very many levels.
fn categorical_notices(column: &ReadColumn, levels: usize, rows: usize) -> Vec<DataNotice> {
    let mut notices = Vec::new();
    let present = rows.saturating_sub(column.facts.missing).max(1);
    if !column.kind_forced && column.facts.number_like * 10 >= present * 9 {
        if let Some((line, value)) = &column.facts.first_text {
            notices.push(DataNotice(format!(
                "column '{}' was read as categorical because of values such as '{}' (line {}), though {} of its values are numbers; \
                 use --numeric {} to make such values an error, or --na to declare them missing",
                column.name, value, line, column.facts.number_like, column.name
            )));
        }
    }
    if levels > 100 && levels * 2 > present {
        notices.push(DataNotice(format!(
            "column '{}' has {levels} levels for {rows} rows: it looks like an identifier (consider --id or --exclude)",
            column.name
        )));
    }
    if levels == 1 {
        notices.push(DataNotice(format!("column '{}' has a single level; it carries no information", column.name)));
    }
    notices
}

/// Checks the classes and settles the positive class.
fn build_target(
    path: &str,
    column: &str,
    codes: &[u32],
    classes: &[String],
    weights: Option<&[f64]>,
    options: &ReadOptions,
) -> Result<TargetSchema> {
    let mut counts = vec![0usize; classes.len()];
    let mut weighted_counts = vec![0f64; classes.len()];
    for (i, &c) in codes.iter().enumerate() {
        counts[c as usize] += 1;
        weighted_counts[c as usize] += weights.map_or(1.0, |w| w[i]);
    }
    // A class whose rows were all dropped is not a class of the training data.
    let present: Vec<usize> = (0..classes.len()).filter(|&k| counts[k] > 0).collect();
    if present.len() < 2 {
        return Err(Error::TooFewClasses {
            path: path.to_string(),
            column: column.to_string(),
            classes: present.iter().map(|&k| classes[k].clone()).collect(),
        });
    }
    let (positive, positive_rule) = match &options.positive {
        Some(p) => {
            if !classes.contains(p) {
                return Err(Error::UnknownClass {
                    path: path.to_string(),
                    column: column.to_string(),
                    class: p.clone(),
                    classes: classes.to_vec(),
                });
            }
            (p.clone(), PositiveRule::Stated)
        }
        None => {
            let mut minority = 0;
            for k in 1..classes.len() {
                if weighted_counts[k] <= weighted_counts[minority] {
                    minority = k;
                }
            }
            (classes[minority].clone(), PositiveRule::Minority)
        }
    };
    Ok(TargetSchema {
        column: column.to_string(),
        classes: classes.to_vec(),
        counts,
        weighted_counts,
        positive,
        positive_rule,
    })
}

/// Interleaves columns into a row-major matrix, in parallel over row blocks.
fn row_major(columns: &[Vec<f64>], rows: usize) -> Array2<f64> {
    let width = columns.len();
    let mut data = vec![0.0; rows * width];
    if width > 0 {
        const BLOCK: usize = 8192;
        data.par_chunks_mut(BLOCK * width).enumerate().for_each(|(b, out)| {
            let first = b * BLOCK;
            for (r, row) in out.chunks_mut(width).enumerate() {
                for (j, cell) in row.iter_mut().enumerate() {
                    *cell = columns[j][first + r];
                }
            }
        });
    }
    Array2::from_shape_vec((rows, width), data).unwrap_or_else(|_| Array2::zeros((rows, width)))
}
