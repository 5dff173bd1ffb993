//! Reading a file to score against a training schema: the same inputs, in
//! the same order, with the same levels and the same missing-value policy.
//!
//! Every column the model needs must be present (an error names the first
//! one missing, before anything is scored); other columns are ignored.
//! Columns may come in any order. A category the training data never had is
//! an error naming its first line; so is a missing value the training
//! policy cannot fill. This first scoring path holds the file in memory.

use ndarray::{Array2, ShapeBuilder};

use crate::data::csv_read::{read_path, ColumnValues, ReadTable, MISSING_CODE};
use crate::data::dataset::{Inputs, MISSING_LEVEL};
use crate::data::options::{MissingPolicy, ReadOptions};
use crate::data::schema::{ColumnKind, ColumnRole, Imputation, Schema};
use crate::error::{Error, Position, Result};

/// Rows ready for a model trained on `schema`.
#[derive(Debug, Clone)]
pub struct ScoringData {
    /// Numeric inputs, columns as [`Schema::numeric_inputs`].
    pub numeric: Array2<f64>,
    /// Categorical codes in the schema's levels.
    pub categorical: Vec<Vec<u32>>,
    /// Identifier columns: (name, values).
    pub ids: Vec<(String, Vec<String>)>,
    /// Missing values filled under the training policy, per column.
    pub imputed: Vec<(String, usize)>,
}

impl ScoringData {
    /// The model inputs.
    pub fn inputs(&self) -> Inputs<'_> {
        Inputs { numeric: self.numeric.view(), categorical: &self.categorical }
    }

    /// Number of rows.
    pub fn rows(&self) -> usize {
        self.numeric.nrows()
    }
}

/// Reads `path` for scoring with a model trained on `schema`.
/// `delimiter` and `na_tokens` default to the training file's conventions
/// (the schema's tokens) when `None`.
pub fn read_for_scoring(
    path: &std::path::Path,
    schema: &Schema,
    ids: &[String],
    delimiter: u8,
    na_tokens: Option<Vec<String>>,
) -> Result<ScoringData> {
    let mut options = ReadOptions::new(String::new());
    options.delimiter = delimiter;
    options.na_tokens = na_tokens.unwrap_or_else(|| schema.na_tokens.clone());
    options.ids = ids.to_vec();
    let features: Vec<_> = schema.features().collect();
    options.model_columns = Some(features.iter().map(|c| c.name.clone()).collect());
    options.numeric = features.iter().filter(|c| c.kind == Some(ColumnKind::Numeric)).map(|c| c.name.clone()).collect();
    options.categorical =
        features.iter().filter(|c| c.kind == Some(ColumnKind::Categorical)).map(|c| c.name.clone()).collect();
    let table = read_path(path, &options)?;
    from_table(table, schema)
}

fn from_table(table: ReadTable, schema: &Schema) -> Result<ScoringData> {
    let rows = table.rows;
    let path = table.path.clone();
    let column = |name: &str| table.columns.iter().find(|c| c.name == name);
    let policy = schema.missing_policy;
    let missing_error = |name: &str, line: u64, why: &str| Error::UnfillableMissing {
        at: Position { path: path.clone(), line },
        column: name.to_string(),
        reason: why.to_string(),
    };
    let mut imputed = Vec::new();

    let numeric_features: Vec<_> = schema.features().filter(|c| c.kind == Some(ColumnKind::Numeric)).collect();
    let indicators =
        numeric_features.iter().filter(|c| matches!(c.imputation, Some(Imputation::Median { .. }))).count();
    let width = numeric_features.len() + indicators;
    let mut numeric = Array2::zeros((rows, width).f());
    let mut indicator_column = numeric_features.len();
    for (j, feature) in numeric_features.iter().enumerate() {
        let Some(read) = column(&feature.name) else {
            return Err(Error::SchemaMismatch { path, message: format!("the model needs column '{}'", feature.name) });
        };
        let ColumnValues::NumericFeature { index } = read.values else {
            return Err(Error::SchemaMismatch {
                path,
                message: format!("column '{}' is numeric in the model but was not read as numbers", feature.name),
            });
        };
        let source = table.numeric.column(index);
        if let Some(line) = read.facts.first_missing_line {
            let fill =
                match (&feature.imputation, policy) {
                    (Some(Imputation::Median { value, .. }), _) => *value,
                    (_, MissingPolicy::Impute) => match feature.numeric.as_ref().and_then(|s| s.known_median()) {
                        Some(median) => median,
                        None => return Err(missing_error(
                            &feature.name,
                            line,
                            "the model was fitted from aggregates without deciles, so it has no median to fill with",
                        )),
                    },
                    (_, MissingPolicy::Error) => {
                        return Err(missing_error(&feature.name, line, "the model was fitted with --missing error"))
                    }
                    (_, MissingPolicy::DropRows) => {
                        return Err(missing_error(
                            &feature.name,
                            line,
                            "the model was fitted with --missing drop-rows, and scoring never drops rows",
                        ))
                    }
                };
            imputed.push((feature.name.clone(), read.facts.missing));
            numeric.column_mut(j).iter_mut().zip(source).for_each(|(t, v)| *t = if v.is_nan() { fill } else { *v });
        } else {
            numeric.column_mut(j).assign(&source);
        }
        if let Some(Imputation::Median { .. }) = feature.imputation {
            numeric
                .column_mut(indicator_column)
                .iter_mut()
                .zip(source)
                .for_each(|(t, v)| *t = f64::from(u8::from(v.is_nan())));
            indicator_column += 1;
        }
    }

    let mut categorical = Vec::new();
    for feature in schema.features().filter(|c| c.kind == Some(ColumnKind::Categorical)) {
        let Some(read) = column(&feature.name) else {
            return Err(Error::SchemaMismatch { path, message: format!("the model needs column '{}'", feature.name) });
        };
        let ColumnValues::Categorical { codes, levels, first_lines } = &read.values else {
            return Err(Error::SchemaMismatch {
                path,
                message: format!("column '{}' is categorical in the model but was not read so", feature.name),
            });
        };
        let known = feature.categorical.as_ref().map(|c| c.levels.clone()).unwrap_or_default();
        let missing_code = known.iter().position(|l| l == MISSING_LEVEL && feature.imputation.is_some());
        let mut map = Vec::with_capacity(levels.len());
        for (level, &line) in levels.iter().zip(first_lines) {
            match known.iter().position(|k| k == level) {
                Some(code) => map.push(code as u32),
                None => {
                    return Err(Error::UnseenCategory {
                        at: Position { path, line },
                        column: feature.name.clone(),
                        level: level.clone(),
                        known: known.iter().filter(|k| k.as_str() != MISSING_LEVEL).cloned().collect(),
                    })
                }
            }
        }
        if let Some(line) = read.facts.first_missing_line {
            if missing_code.is_none() {
                return Err(missing_error(
                    &feature.name,
                    line,
                    "the training data had no missing values in this column, so the model has no level for them",
                ));
            }
            imputed.push((feature.name.clone(), read.facts.missing));
        }
        categorical.push(
            codes
                .iter()
                .map(|&c| if c == MISSING_CODE { missing_code.unwrap_or(0) as u32 } else { map[c as usize] })
                .collect(),
        );
    }
    let ids = table
        .columns
        .iter()
        .filter(|c| c.role == ColumnRole::Id)
        .filter_map(|c| match &c.values {
            ColumnValues::Text(values) => Some((c.name.clone(), values.clone())),
            _ => None,
        })
        .collect();
    Ok(ScoringData { numeric, categorical, ids, imputed })
}
