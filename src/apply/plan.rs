//! The column plan: the new file's header checked against the model's
//! schema before any row is read, and what each field of a record is for.
//!
//! Every column the model needs must be in the header (the error lists all
//! that are missing, before anything is scored). Columns may come in any
//! order; columns the model does not use are ignored unless they are asked
//! for (`--id`, `--keep`, a cost column).

use std::collections::HashMap;

use crate::apply::RejectReason;
use crate::data::dataset::MISSING_LEVEL;
use crate::data::options::MissingPolicy;
use crate::data::schema::{ColumnKind, Imputation, Schema};
use crate::error::{Error, Part, Result, Setting};

/// What one field of a record feeds.
#[derive(Debug, Clone, Default)]
pub struct FieldUse {
    /// The numeric feature it is (index into [`Plan::numeric`]).
    pub numeric: Option<usize>,
    /// The categorical feature it is (index into [`Plan::categorical`]).
    pub categorical: Option<usize>,
    /// The text slot it is copied into (ids and `--keep` columns).
    pub text: Option<usize>,
    /// The cost column it is (index into [`Plan::cost_columns`]).
    pub cost: Option<usize>,
}

/// How a missing value of a feature is filled, if it can be.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Fill {
    /// The model has a value for it (the training median).
    Value(f64),
    /// The model has no way to take it: the row cannot be scored.
    Unfillable,
}

/// A numeric feature of the model.
#[derive(Debug, Clone)]
pub struct NumericFeature {
    /// Its name.
    pub name: String,
    /// What a missing value becomes.
    pub fill: Fill,
    /// The model input of its missing-value indicator, if it has one.
    pub indicator: Option<usize>,
    /// The training range.
    pub min: f64,
    /// The training range.
    pub max: f64,
    /// The largest |value| the model scores ([`crate::model::range`]).
    pub bound: f64,
}

impl NumericFeature {
    /// A value read for this feature, checked: a number that is not finite
    /// is `not-finite`, one beyond the model's bound `out-of-range`.
    pub fn check_value(&self, x: f64, shown: impl FnOnce() -> String) -> Result<f64, super::row::Problem> {
        if !x.is_finite() {
            return Err(super::row::Problem {
                reason: RejectReason::NotFinite,
                column: self.name.clone(),
                message: format!("'{}' is not a finite number", shown()),
            });
        }
        if x.abs() > self.bound {
            return Err(super::row::Problem {
                reason: RejectReason::OutOfRange,
                column: self.name.clone(),
                message: format!(
                    "'{}' is beyond the range this model scores in this column (±{}): its evidence would pass the largest double",
                    shown(),
                    crate::format::number(self.bound, 3)
                ),
            });
        }
        Ok(x)
    }
}

/// A categorical feature of the model.
#[derive(Debug, Clone)]
pub struct CategoricalFeature {
    /// Its name.
    pub name: String,
    /// The training levels and their codes.
    pub codes: HashMap<Vec<u8>, u32>,
    /// The levels, in code order (for messages).
    pub levels: Vec<String>,
    /// The code of the missing level, when the model has one.
    pub missing_code: Option<u32>,
}

/// The plan for one file.
#[derive(Debug, Clone)]
pub struct Plan {
    /// The header's names.
    pub names: Vec<String>,
    /// One entry per header field.
    pub fields: Vec<FieldUse>,
    /// Numeric features, in the schema's order.
    pub numeric: Vec<NumericFeature>,
    /// Categorical features, in the schema's order.
    pub categorical: Vec<CategoricalFeature>,
    /// Width of a row of numeric model inputs (features, then indicators).
    pub input_width: usize,
    /// Names of the text slots: the `--id` columns, then the `--keep` ones.
    pub text_names: Vec<String>,
    /// How many of the text slots are `--id` columns.
    pub id_count: usize,
    /// The cost columns, in the order of [`crate::decide::CostSpec::columns`].
    pub cost_columns: Vec<String>,
}

/// What the plan is built from besides the header and the schema.
#[derive(Debug, Clone, Default)]
pub struct PlanRequest {
    /// Columns passed through first (`--id`).
    pub ids: Vec<String>,
    /// Columns passed through last (`--keep`).
    pub keep: Vec<String>,
    /// Columns the costs read.
    pub cost_columns: Vec<String>,
    /// The missing-value policy in force.
    pub missing: MissingPolicy,
    /// Per numeric model input, the largest |value| the model scores
    /// ([`crate::train::file::ModelFile::input_bounds`]); none when empty.
    pub input_bounds: Vec<f64>,
}

impl Plan {
    /// Checks `names` (the header of `path`) against `schema` and plans
    /// every field.
    pub fn new(path: &str, names: &[String], schema: &Schema, request: &PlanRequest) -> Result<Plan> {
        let position: HashMap<&str, usize> = names.iter().enumerate().map(|(i, n)| (n.as_str(), i)).collect();
        let features: Vec<_> = schema.features().collect();
        let absent: Vec<&str> =
            features.iter().map(|f| f.name.as_str()).filter(|n| !position.contains_key(n)).collect();
        if !absent.is_empty() {
            let hint = match crate::data::suggest::closest(absent[0], names) {
                Some(close) => format!(" (the header has '{close}')"),
                None => String::new(),
            };
            return Err(Error::SchemaMismatch {
                path: path.to_string(),
                message: format!(
                    "the model needs column{} {}, which the header does not have{hint}; nothing was scored",
                    if absent.len() == 1 { "" } else { "s" },
                    absent.iter().map(|n| format!("'{n}'")).collect::<Vec<_>>().join(", ")
                )
                .into(),
            });
        }
        let find = |named_by: Part, column: &str| {
            position.get(column).copied().ok_or_else(|| Error::UnknownColumn {
                path: path.to_string(),
                named_by,
                column: column.to_string(),
                suggestion: crate::data::suggest::closest(column, names),
            })
        };
        let mut fields = vec![FieldUse::default(); names.len()];
        let mut numeric = Vec::new();
        let mut categorical = Vec::new();
        let numeric_count = features.iter().filter(|f| f.kind == Some(ColumnKind::Numeric)).count();
        let mut next_indicator = numeric_count;
        for feature in &features {
            let at = position[feature.name.as_str()];
            match feature.kind {
                Some(ColumnKind::Numeric) => {
                    let summary = feature.numeric.as_ref();
                    let (fill, indicator) = match (&feature.imputation, request.missing) {
                        (Some(Imputation::Median { value, .. }), _) => {
                            next_indicator += 1;
                            (Fill::Value(*value), Some(next_indicator - 1))
                        }
                        // A model fitted from aggregates without deciles has no median.
                        (_, MissingPolicy::Impute) => match summary.and_then(|s| s.known_median()) {
                            Some(median) => (Fill::Value(median), None),
                            None => (Fill::Unfillable, None),
                        },
                        _ => (Fill::Unfillable, None),
                    };
                    fields[at].numeric = Some(numeric.len());
                    numeric.push(NumericFeature {
                        name: feature.name.clone(),
                        fill,
                        indicator,
                        min: summary.map_or(f64::NEG_INFINITY, |s| s.min),
                        max: summary.map_or(f64::INFINITY, |s| s.max),
                        bound: request.input_bounds.get(numeric.len()).copied().unwrap_or(f64::INFINITY),
                    });
                }
                _ => {
                    let levels = feature.categorical.as_ref().map(|c| c.levels.clone()).unwrap_or_default();
                    let missing_code = levels
                        .iter()
                        .position(|l| l == MISSING_LEVEL && feature.imputation.is_some())
                        .map(|c| c as u32);
                    fields[at].categorical = Some(categorical.len());
                    categorical.push(CategoricalFeature {
                        name: feature.name.clone(),
                        codes: levels
                            .iter()
                            .enumerate()
                            .filter(|(c, _)| Some(*c as u32) != missing_code)
                            .map(|(c, l)| (l.as_bytes().to_vec(), c as u32))
                            .collect(),
                        levels,
                        missing_code,
                    });
                }
            }
        }
        let mut text_names = Vec::new();
        let mut id_count = 0;
        for (setting, list) in [(Setting::Ids, &request.ids), (Setting::Keep, &request.keep)] {
            for column in list.iter() {
                let at = find(setting.into(), column)?;
                // A column named twice is shown once, in its first place.
                if fields[at].text.is_none() {
                    fields[at].text = Some(text_names.len());
                    text_names.push(column.clone());
                }
            }
            if setting == Setting::Ids {
                id_count = text_names.len();
            }
        }
        for (slot, column) in request.cost_columns.iter().enumerate() {
            let at = find("the costs file".into(), column)?;
            fields[at].cost = Some(slot);
        }
        Ok(Plan {
            names: names.to_vec(),
            fields,
            numeric,
            categorical,
            input_width: next_indicator,
            text_names,
            id_count,
            cost_columns: request.cost_columns.clone(),
        })
    }
}

/// What a scoring output holds besides the passed-through columns.
#[derive(Debug, Clone, Copy)]
pub struct OutputShape<'a> {
    /// The classes: one posterior column each.
    pub classes: &'a [String],
    /// `action` and `expected_cost` (costs were given).
    pub decisions: bool,
    /// `reason_1..reason_K`.
    pub reasons: usize,
    /// `reject_reason` (the SQL export's marker of a row not scored).
    pub reject_reason: bool,
}

/// The column names of a scoring output, in order: the id columns, one
/// posterior column per class, `action` and `expected_cost`, the reason
/// codes, `reject_reason`, then the kept columns. The one place the output's
/// names are made, for `score` and the SQL export alike. Two columns of one
/// name are refused, naming it, before anything is written.
pub fn output_columns(ids: &[String], shape: OutputShape<'_>, kept: &[String]) -> Result<Vec<String>> {
    let mut names: Vec<String> = ids.to_vec();
    names.extend(shape.classes.iter().map(|c| crate::model::posterior_column(c)));
    if shape.decisions {
        names.extend(["action".to_string(), "expected_cost".to_string()]);
    }
    names.extend((1..=shape.reasons).map(|i| format!("reason_{i}")));
    if shape.reject_reason {
        names.push("reject_reason".into());
    }
    names.extend(kept.iter().cloned());
    for (i, name) in names.iter().enumerate() {
        if names[..i].contains(name) {
            return Err(Error::invalid(crate::error::message![
                format!("the output would hold two columns named '{name}'; a column of "),
                Setting::Ids,
                " or ",
                Setting::Keep,
                " may not share a name with another, nor with a column the scoring writes (",
                format!("posterior_<class>, action, expected_cost, reason_<k>, reject_reason); rename it in the data")
            ]));
        }
    }
    Ok(names)
}
