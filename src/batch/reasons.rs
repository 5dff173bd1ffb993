//! Reason codes: for each scored row, the features that moved it most
//! toward the positive class, relative to a stated reference point.
//!
//! For the families whose log odds are a sum over features — logistic
//! regression and LDA (linear in the inputs) and naive Bayes (a sum of
//! per-feature log-likelihood ratios) — the log odds of a row split exactly
//! into one term per feature: term_f = logodds(x) − logodds(x with feature
//! f set to its reference). The reference is the training mean of a numeric
//! feature (its missing-value indicator off) and the training mode of a
//! categorical one. The terms are computed that way, by substitution, on
//! the model's own log odds (before calibration and prior correction, which
//! shift every row alike or bend the scale without reordering it). A
//! feature is a reason when its term is positive; the K largest are given,
//! ties to the earlier feature. QDA's log odds are not a sum over features
//! (they hold products of features), so it gets no reason codes.
//!
//! What this is not: an adverse-action notice. Which reasons a notice must
//! state, and in what words, is the lender's legal responsibility.

use ndarray::Array2;

use crate::data::Inputs;
use crate::error::{Error, Result, Setting};
use crate::model::Family;
use crate::train::file::ModelFile;

/// Terms this small are rounding, not evidence: a feature with no weight
/// is never a reason.
const NEGLIGIBLE: f64 = 1e-9;

/// The reference point of one feature.
#[derive(Debug, Clone, PartialEq)]
pub enum Reference {
    /// A numeric feature at this value, its indicator (if any) off.
    Numeric {
        /// The model input.
        input: usize,
        /// The indicator input, if the feature has one.
        indicator: Option<usize>,
        /// The value (the training mean).
        value: f64,
    },
    /// A categorical feature at this level code (the training mode).
    Categorical {
        /// Index among the categorical inputs.
        input: usize,
        /// The level's code.
        code: u32,
        /// The level.
        level: String,
    },
}

/// The reasons configuration of one model.
#[derive(Debug, Clone)]
pub struct ReasonCodes {
    /// Reasons per row.
    pub count: usize,
    /// Feature names, numeric features first, then categorical ones.
    pub features: Vec<String>,
    /// The reference point of each feature.
    pub references: Vec<Reference>,
    positive: usize,
}

impl ReasonCodes {
    /// Reason codes for `file`; refused for QDA and for more than two classes.
    pub fn new(file: &ModelFile, count: usize) -> Result<ReasonCodes> {
        if file.family == Family::Qda {
            return Err(Error::invalid(crate::error::message![
                Setting::Reasons,
                " is for logistic, lda and naive-bayes models: QDA's log odds hold products of features, so they do not split into one term per feature"
            ]));
        }
        if file.classes.len() != 2 {
            return Err(Error::invalid(crate::error::message![Setting::Reasons, " needs a two-class model"]));
        }
        let schema = &file.schema;
        let numeric_names = schema.numeric_inputs();
        let mut features = Vec::new();
        let mut references = Vec::new();
        let numeric: Vec<_> =
            schema.features().filter(|f| f.kind == Some(crate::data::schema::ColumnKind::Numeric)).collect();
        for (j, feature) in numeric.iter().enumerate() {
            let indicator = match &feature.imputation {
                Some(crate::data::schema::Imputation::Median { indicator, .. }) => {
                    numeric_names.iter().position(|n| n == indicator)
                }
                _ => None,
            };
            features.push(feature.name.clone());
            references.push(Reference::Numeric {
                input: j,
                indicator,
                value: feature.numeric.as_ref().map_or(0.0, |s| s.mean),
            });
        }
        for (c, feature) in schema.categorical_inputs().iter().enumerate() {
            let summary = feature.categorical.as_ref();
            let (code, level) = summary
                .and_then(|s| {
                    // The mode; ties to the first level in the schema's order.
                    let best = s.counts.iter().enumerate().rev().max_by_key(|(_, &n)| n).map(|(i, _)| i)?;
                    Some((best as u32, s.levels.get(best).cloned().unwrap_or_default()))
                })
                .unwrap_or((0, String::new()));
            features.push(feature.name.clone());
            references.push(Reference::Categorical { input: c, code, level });
        }
        let positive = file.positive_index();
        Ok(ReasonCodes { count, features, references, positive })
    }

    /// The reference point as text, per feature (for the summary).
    pub fn reference_text(&self) -> Vec<(String, String)> {
        self.features
            .iter()
            .zip(&self.references)
            .map(|(f, r)| {
                let text = match r {
                    Reference::Numeric { value, .. } => crate::format::exact(*value),
                    Reference::Categorical { level, .. } => level.clone(),
                };
                (f.clone(), text)
            })
            .collect()
    }

    fn log_odds(&self, file: &ModelFile, inputs: &Inputs<'_>) -> Vec<f64> {
        let lp = file.model.log_posteriors(inputs, &[0.5, 0.5]);
        lp.rows().into_iter().map(|row| row[self.positive] - row[1 - self.positive]).collect()
    }

    /// Each row's reasons: up to `count` feature indices, largest term first.
    pub fn reasons(&self, file: &ModelFile, inputs: &Inputs<'_>) -> Vec<Vec<usize>> {
        let rows = inputs.rows();
        let base = self.log_odds(file, inputs);
        let mut terms = Array2::<f64>::zeros((rows, self.references.len()));
        for (f, reference) in self.references.iter().enumerate() {
            let substituted = match reference {
                Reference::Numeric { input, indicator, value } => {
                    let mut numeric = inputs.numeric.to_owned();
                    numeric.column_mut(*input).fill(*value);
                    if let Some(i) = indicator {
                        numeric.column_mut(*i).fill(0.0);
                    }
                    self.log_odds(file, &Inputs { numeric: numeric.view(), categorical: inputs.categorical })
                }
                Reference::Categorical { input, code, .. } => {
                    let mut categorical = inputs.categorical.to_vec();
                    categorical[*input].iter_mut().for_each(|c| *c = *code);
                    self.log_odds(file, &Inputs { numeric: inputs.numeric.view(), categorical: &categorical })
                }
            };
            for r in 0..rows {
                terms[(r, f)] = base[r] - substituted[r];
            }
        }
        (0..rows)
            .map(|r| {
                let mut order: Vec<usize> =
                    (0..self.references.len()).filter(|&f| terms[(r, f)] > NEGLIGIBLE).collect();
                order.sort_by(|&a, &b| terms[(r, b)].total_cmp(&terms[(r, a)]).then(a.cmp(&b)));
                order.truncate(self.count);
                order
            })
            .collect()
    }
}
