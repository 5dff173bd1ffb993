//! The training dataset: a file as read, turned into model inputs under the
//! missing-value policy, with its schema.

use ndarray::{Array2, ShapeBuilder};
use rayon::prelude::*;

use crate::data::csv_read::{ColumnValues, ReadColumn, ReadTable, MISSING_CODE};
use crate::data::options::{MissingPolicy, ReadOptions};
use crate::data::schema::{
    CategoricalSummary, ColumnKind, ColumnRole, ColumnSchema, Imputation, KindSource, NumericSummary, PositiveRule,
    Schema, TargetSchema,
};
use crate::data::summary::summarize;
use crate::error::{Error, Message, Position, Result, Setting, SettingNames};

/// The level name given to missing categorical values under `--missing impute`.
pub const MISSING_LEVEL: &str = "<missing>";

/// Suffix of the 0/1 indicator input added for an imputed numeric column.
pub const MISSING_INDICATOR_SUFFIX: &str = "_is_missing";

/// Model inputs for every training row.
#[derive(Debug, Clone)]
pub struct Dataset {
    /// What the file held.
    pub schema: Schema,
    /// Numeric inputs, one row per training row, columns as
    /// [`Schema::numeric_inputs`], stored column-major (each column
    /// contiguous). Never NaN.
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
pub struct DataNotice(pub Message);

impl DataNotice {
    /// The notice, settings named by `names`.
    pub fn describe(&self, names: SettingNames<'_>) -> String {
        self.0.render(names)
    }
}

impl std::fmt::Display for DataNotice {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        self.0.fmt(f)
    }
}

/// A view of model inputs for a set of rows: the numeric inputs (rows ×
/// columns, any layout) and the codes of each categorical input.
#[derive(Debug, Clone, Copy)]
pub struct Inputs<'a> {
    /// Numeric inputs, columns as [`Schema::numeric_inputs`].
    pub numeric: ndarray::ArrayView2<'a, f64>,
    /// Codes of each categorical input, in [`Schema::categorical_inputs`] order.
    pub categorical: &'a [Vec<u32>],
}

impl Inputs<'_> {
    /// Number of rows.
    pub fn rows(&self) -> usize {
        self.numeric.nrows()
    }
}

impl Dataset {
    /// The model inputs of every row.
    pub fn inputs(&self) -> Inputs<'_> {
        Inputs { numeric: self.numeric.view(), categorical: &self.categorical }
    }

    /// Reads a training file from disk.
    pub fn read(path: &std::path::Path, options: &ReadOptions) -> Result<(Dataset, Vec<DataNotice>)> {
        let table = crate::data::csv_read::read_path(path, options)?;
        Dataset::from_table(table, options)
    }

    /// [`Dataset::read`], with the SHA-256 of exactly the bytes parsed (one
    /// open, so a pipe works and is hashed as read).
    pub fn read_with_hash(path: &std::path::Path, options: &ReadOptions) -> Result<(Dataset, Vec<DataNotice>, String)> {
        let (table, hash) = crate::data::csv_read::read_path_with_hash(path, options)?;
        let (dataset, notices) = Dataset::from_table(table, options)?;
        Ok((dataset, notices, hash))
    }

    /// Number of rows.
    pub fn rows(&self) -> usize {
        self.target.len()
    }

    /// Builds the dataset from a table as read: applies the missing-value
    /// policy, checks the target, and summarises every column.
    pub fn from_table(table: ReadTable, options: &ReadOptions) -> Result<(Dataset, Vec<DataNotice>)> {
        let ReadTable { path, rows: rows_read, columns, numeric } = table;
        let mut notices = Vec::new();
        let features: Vec<&ReadColumn> = columns.iter().filter(|c| c.role == ColumnRole::Feature).collect();

        // Rows to keep under the policy (None: all of them).
        let keep: Option<Vec<bool>> = match options.missing {
            MissingPolicy::Error => {
                if let Some((line, column)) =
                    features.iter().filter_map(|c| c.facts.first_missing_line.map(|l| (l, c.name.clone()))).min()
                {
                    return Err(Error::MissingValue { at: Position { path, line }, column });
                }
                None
            }
            MissingPolicy::Impute => None,
            MissingPolicy::DropRows if features.iter().all(|c| c.facts.missing == 0) => None,
            MissingPolicy::DropRows => {
                let mut keep = vec![true; rows_read];
                for column in numeric.columns() {
                    keep.iter_mut().zip(column).for_each(|(k, x)| *k &= !x.is_nan());
                }
                for column in &features {
                    if let ColumnValues::Categorical { codes, .. } = &column.values {
                        keep.iter_mut().zip(codes).for_each(|(k, c)| *k &= *c != MISSING_CODE);
                    }
                }
                Some(keep)
            }
        };
        let rows_dropped = keep.as_ref().map_or(0, |k| k.iter().filter(|&&x| !x).count());
        if rows_dropped > 0 {
            notices.push(DataNotice(crate::error::message![
                format!("{rows_dropped} of {rows_read} rows dropped for missing feature values ("),
                Setting::Missing.set_to("drop-rows"),
                ")"
            ]));
        }
        let rows = rows_read - rows_dropped;
        if rows == 0 {
            return Err(Error::HeaderOnly { path });
        }
        let kept = |i: usize| keep.as_ref().is_none_or(|k| k[i]);
        let mut numeric = match &keep {
            None => numeric,
            Some(_) => {
                let mut filtered = Array2::zeros((rows, numeric.ncols()).f());
                for (mut to, from) in filtered.columns_mut().into_iter().zip(numeric.columns()) {
                    let values = from.iter().enumerate().filter(|(i, _)| kept(*i)).map(|(_, v)| *v);
                    to.iter_mut().zip(values).for_each(|(t, v)| *t = v);
                }
                filtered
            }
        };

        // Summaries are the expensive part: all numeric features in parallel.
        let summaries: Vec<Option<NumericSummary>> = (0..numeric.ncols())
            .into_par_iter()
            .map(|j| {
                let column = numeric.column(j);
                match column.as_slice() {
                    Some(values) => summarize(values),
                    None => summarize(&column.to_vec()),
                }
            })
            .collect();

        let header_names: Vec<String> = columns.iter().map(|c| c.name.clone()).collect();
        let mut schema_columns = Vec::with_capacity(columns.len());
        let mut indicator_columns: Vec<Vec<f64>> = Vec::new();
        let mut categorical = Vec::new();
        let mut target_info = None;
        let mut weights = None;
        let mut ids = Vec::new();
        let filter_codes = |v: &[u32]| -> Vec<u32> {
            match &keep {
                None => v.to_vec(),
                Some(k) => v.iter().zip(k).filter(|(_, &k)| k).map(|(x, _)| *x).collect(),
            }
        };

        for column in &columns {
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
                (ColumnRole::Feature, ColumnValues::NumericFeature { index }) => {
                    entry.kind = Some(ColumnKind::Numeric);
                    entry.kind_source = kind_source;
                    let Some(summary) = summaries[*index].clone() else {
                        return Err(Error::Malformed {
                            at: Position { path, line: column.facts.first_missing_line.unwrap_or(2) },
                            column: column.name.clone(),
                            message: "every value of this column is missing; leave the column out".to_string(),
                        });
                    };
                    if summary.std_dev == 0.0 {
                        notices.push(DataNotice(crate::error::message![
                            format!(
                                "column '{}' is constant ({}); it carries no information (consider ",
                                column.name, summary.min
                            ),
                            Setting::Exclude,
                            format!(" {})", column.name)
                        ]));
                    }
                    if options.missing == MissingPolicy::Impute && column.facts.missing > 0 {
                        let indicator = format!("{}{}", column.name, MISSING_INDICATOR_SUFFIX);
                        if header_names.contains(&indicator) {
                            return Err(Error::invalid(crate::error::message![
                                Setting::Missing.set_to("impute"),
                                format!(" would add the indicator column '{indicator}', but the file already has a column of that name; rename it")
                            ]));
                        }
                        let median = summary.median;
                        let mut values = numeric.column_mut(*index);
                        indicator_columns.push(values.iter().map(|v| f64::from(u8::from(v.is_nan()))).collect());
                        values.iter_mut().filter(|v| v.is_nan()).for_each(|v| *v = median);
                        entry.imputation = Some(Imputation::Median { value: median, indicator });
                        notices.push(DataNotice(
                            format!(
                                "column '{}': {} missing values set to the median {} with an indicator input",
                                column.name, column.facts.missing, median
                            )
                            .into(),
                        ));
                    }
                    entry.numeric = Some(summary);
                }
                (ColumnRole::Feature, ColumnValues::Categorical { codes, levels, .. }) => {
                    entry.kind = Some(ColumnKind::Categorical);
                    entry.kind_source = kind_source;
                    let mut codes = filter_codes(codes);
                    let mut levels = levels.clone();
                    if options.missing == MissingPolicy::Impute && column.facts.missing > 0 {
                        if levels.iter().any(|l| l == MISSING_LEVEL) {
                            return Err(Error::invalid(crate::error::message![
                                format!("column '{}' already has a level named '{MISSING_LEVEL}', which ", column.name),
                                Setting::Missing.set_to("impute"),
                                " uses for missing values"
                            ]));
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
                (ColumnRole::Target, ColumnValues::Categorical { codes, levels, .. }) => {
                    target_info = Some((filter_codes(codes), levels.clone()));
                }
                (ColumnRole::Weight, ColumnValues::Weights(values)) => {
                    weights =
                        Some(values.iter().enumerate().filter(|(i, _)| kept(*i)).map(|(_, w)| *w).collect::<Vec<f64>>())
                }
                (ColumnRole::Id, ColumnValues::Text(values)) => ids.push((
                    column.name.clone(),
                    values.iter().enumerate().filter(|(i, _)| kept(*i)).map(|(_, x)| x.clone()).collect(),
                )),
                _ => {}
            }
            schema_columns.push(entry);
        }

        let Some((target_codes, classes)) = target_info else {
            return Err(Error::Usage("no target column was read".to_string()));
        };
        let target = build_target(&path, &options.target, &target_codes, &classes, weights.as_deref(), options)?;

        if !indicator_columns.is_empty() {
            let width = numeric.ncols();
            let mut widened = Array2::zeros((rows, width + indicator_columns.len()).f());
            widened.slice_mut(ndarray::s![.., ..width]).assign(&numeric);
            for (k, indicator) in indicator_columns.iter().enumerate() {
                widened.column_mut(width + k).iter_mut().zip(indicator).for_each(|(t, v)| *t = *v);
            }
            numeric = widened;
        }
        let schema = Schema {
            columns: schema_columns,
            target,
            na_tokens: options.na_tokens.clone(),
            missing_policy: options.missing,
            rows,
            rows_dropped,
        };
        Ok((Dataset { schema, numeric, categorical, target: target_codes, weights, ids }, notices))
    }
}

/// Warnings about a categorical column: one inferred categorical though
/// nearly all its values are numbers, and one with very many levels.
fn categorical_notices(column: &ReadColumn, levels: usize, rows: usize) -> Vec<DataNotice> {
    let mut notices = Vec::new();
    let present = rows.saturating_sub(column.facts.missing).max(1);
    if !column.kind_forced && column.facts.number_like * 10 >= present * 9 {
        if let Some((line, value)) = &column.facts.first_text {
            notices.push(DataNotice(crate::error::message![
                format!(
                    "column '{}' was read as categorical because of values such as '{}' (line {}), though {} of its values are numbers; use ",
                    column.name, value, line, column.facts.number_like
                ),
                Setting::Numeric,
                format!(" {} to make such values an error, or ", column.name),
                Setting::NaTokens,
                " to declare them missing"
            ]));
        }
    }
    if levels > 100 && levels * 2 > present {
        notices.push(DataNotice(crate::error::message![
            format!(
                "column '{}' has {levels} levels for {rows} rows: it looks like an identifier (consider ",
                column.name
            ),
            Setting::Ids,
            " or ",
            Setting::Exclude,
            ")"
        ]));
    }
    if levels == 1 {
        notices
            .push(DataNotice(format!("column '{}' has a single level; it carries no information", column.name).into()));
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
    settle_target(path, column, classes, counts, weighted_counts, options.positive.as_deref())
}

/// The target's schema from its per-class row counts and weights: at least
/// two classes with rows, and the positive class as stated or the minority
/// one (ties to the later class in byte order). Shared by every way of
/// fitting: from a file, or from an engine's aggregates.
pub fn settle_target(
    path: &str,
    column: &str,
    classes: &[String],
    counts: Vec<usize>,
    weighted_counts: Vec<f64>,
    positive: Option<&str>,
) -> Result<TargetSchema> {
    // A class whose rows were all dropped is not a class of the training data.
    let present: Vec<usize> = (0..classes.len()).filter(|&k| counts[k] > 0).collect();
    if present.len() < 2 {
        return Err(Error::TooFewClasses {
            path: path.to_string(),
            column: column.to_string(),
            classes: present.iter().map(|&k| classes[k].clone()).collect(),
        });
    }
    let (positive, positive_rule) = match positive {
        Some(p) => {
            if !classes.iter().any(|c| c == p) {
                return Err(Error::UnknownClass {
                    path: path.to_string(),
                    column: column.to_string(),
                    class: p.to_string(),
                    classes: classes.to_vec(),
                });
            }
            (p.to_string(), PositiveRule::Stated)
        }
        None => {
            // Among the classes with rows (a class whose rows were all
            // dropped, or weigh nothing, is not a candidate).
            let candidates: Vec<usize> = present.iter().copied().filter(|&k| weighted_counts[k] > 0.0).collect();
            let mut minority = candidates.first().copied().unwrap_or(present[0]);
            for &k in &candidates {
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
