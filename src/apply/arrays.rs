//! Rows held as arrays turned into a model's inputs by its schema: the
//! same plan as a file's header gets ([`Plan::new`] on the column names),
//! the same fills for missing values, and the same handling of a level the
//! training data never had. An array row that cannot be scored is an
//! error naming its row (arrays have no reject file).

use ndarray::{Array2, ArrayView2};

use crate::apply::in_memory::ScoringData;
use crate::apply::plan::{Fill, Plan, PlanRequest};
use crate::apply::row::{Policies, Problem, RowCounts, RowRules};
use crate::apply::{RejectReason, UnseenPolicy};
use crate::data::arrays::{ColumnDescription, ARRAYS_PATH};
use crate::data::options::MissingPolicy;
use crate::data::schema::ColumnKind;
use crate::error::{Error, Result};
use crate::records::Dialect;
use crate::train::file::ModelFile;

/// The inputs the model of `file` takes from `features` (rows ×
/// columns, described by `columns`; categorical columns hold codes into
/// their described levels, `NaN` is missing). `missing` defaults to the
/// training policy; `unseen` may be `Error` or `Missing` (`Reject` is an
/// error here: arrays have no reject file).
pub fn inputs_from_arrays(
    file: &ModelFile,
    features: ArrayView2<'_, f64>,
    columns: &[ColumnDescription],
    missing: Option<MissingPolicy>,
    unseen: UnseenPolicy,
) -> Result<ScoringData> {
    let (rows, width) = features.dim();
    if width != columns.len() {
        return Err(Error::SchemaMismatch {
            path: ARRAYS_PATH.to_string(),
            message: format!("the matrix has {width} columns but {} are described", columns.len()).into(),
        });
    }
    let schema = &file.schema;
    let names: Vec<String> = columns.iter().map(|c| c.name.clone()).collect();
    let missing = missing.unwrap_or(schema.missing_policy);
    let request = PlanRequest { missing, input_bounds: file.input_bounds(), ..PlanRequest::default() };
    let plan = Plan::new(ARRAYS_PATH, &names, schema, &request)?;
    let policies = Policies { unseen, missing, keep_rejects: false };
    let rules = RowRules::new(ARRAYS_PATH, &plan, Dialect::default(), &[], policies);
    let mut numeric = Array2::zeros((rows, plan.input_width));
    let mut categorical = vec![Vec::with_capacity(rows); plan.categorical.len()];
    let mut counts = RowCounts::new(&plan);
    let problem = |reason, column: &str, message: String| Problem { reason, column: column.to_string(), message };
    for r in 0..rows {
        for (i, usage) in plan.fields.iter().enumerate() {
            let x = features[(r, i)];
            let description = &columns[i];
            if let Some(j) = usage.numeric {
                if description.kind != ColumnKind::Numeric {
                    return Err(Error::SchemaMismatch {
                        path: ARRAYS_PATH.to_string(),
                        message: format!("column '{}' is numeric in the model", description.name).into(),
                    });
                }
                let feature = &plan.numeric[j];
                if x.is_nan() {
                    match feature.fill {
                        Fill::Value(v) => {
                            numeric[(r, j)] = v;
                            if let Some(indicator) = feature.indicator {
                                numeric[(r, indicator)] = 1.0;
                            }
                            counts.filled[j] += 1;
                        }
                        Fill::Unfillable => {
                            let message = "the value is missing and the model has no fill for it".to_string();
                            return Err(
                                rules.error(r as u64 + 1, problem(RejectReason::MissingValue, &feature.name, message))
                            );
                        }
                    }
                } else {
                    numeric[(r, j)] =
                        feature.check_value(x, || x.to_string()).map_err(|p| rules.error(r as u64 + 1, p))?;
                }
            }
            if let Some(c) = usage.categorical {
                let feature = &plan.categorical[c];
                if description.kind != ColumnKind::Categorical {
                    return Err(Error::SchemaMismatch {
                        path: ARRAYS_PATH.to_string(),
                        message: format!("column '{}' is categorical in the model", description.name).into(),
                    });
                }
                let code = if x.is_nan() {
                    counts.filled[plan.numeric.len() + c] += 1;
                    feature.missing_code
                } else {
                    let level = (x >= 0.0 && x.fract() == 0.0).then(|| description.levels.get(x as usize)).flatten();
                    let Some(level) = level else {
                        let message = format!("{x} is not the code of one of its {} levels", description.levels.len());
                        return Err(
                            rules.error(r as u64 + 1, problem(RejectReason::NotANumber, &feature.name, message))
                        );
                    };
                    match feature.codes.get(level.as_bytes()) {
                        Some(&code) => Some(code),
                        None if unseen == UnseenPolicy::Missing => {
                            counts.unseen_as_missing[c] += 1;
                            feature.missing_code
                        }
                        None => {
                            let unseen = problem(RejectReason::UnseenCategory, &feature.name, level.clone());
                            return Err(rules.error(r as u64 + 1, unseen));
                        }
                    }
                };
                let Some(code) = code else {
                    let message = "the value is missing and the model has no level for missing values".to_string();
                    return Err(rules.error(r as u64 + 1, problem(RejectReason::MissingValue, &feature.name, message)));
                };
                categorical[c].push(code);
            }
        }
    }
    counts.rows_read = rows as u64;
    counts.rows_kept = rows as u64;
    let imputed = counts.imputed(&plan);
    let lines = (1..=rows as u64).collect();
    Ok(ScoringData { numeric, categorical, ids: Vec::new(), imputed, counts, rejects: Vec::new(), lines })
}
