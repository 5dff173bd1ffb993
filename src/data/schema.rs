//! The schema: what a training file held, column by column.
//!
//! A [`Schema`] names every header column with its role and kind, records
//! categorical levels in a stable (byte-sorted) order, and summarises each
//! numeric feature (mean, standard deviation, range, deciles) over the rows
//! used. It is serializable: a model file embeds it, and scoring checks new
//! files against it. Summaries are unweighted: they describe the rows as
//! read, whatever `--weight` says.

use serde::{Deserialize, Serialize};

use crate::data::options::MissingPolicy;

/// The role a column plays.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum ColumnRole {
    /// A model input.
    Feature,
    /// The class label.
    Target,
    /// Passed through to outputs.
    Id,
    /// Frequency weight.
    Weight,
    /// Ignored.
    Excluded,
}

/// The kind of a feature column.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum ColumnKind {
    /// Real numbers.
    Numeric,
    /// A finite set of levels.
    Categorical,
}

/// How a column's kind was settled.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum KindSource {
    /// From the values: numeric when every non-missing value is a number.
    Inferred,
    /// From `--numeric` or `--categorical`.
    Declared,
}

/// Summary of a numeric feature over its non-missing training values.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct NumericSummary {
    /// Non-missing values.
    pub count: usize,
    /// Arithmetic mean.
    pub mean: f64,
    /// Standard deviation with divisor n − 1 (0 for a single value).
    pub std_dev: f64,
    /// Smallest value.
    pub min: f64,
    /// Largest value.
    pub max: f64,
    /// The 10%, 20%, ..., 90% quantiles (Hyndman & Fan 1996 type 7, the
    /// linear interpolation R and numpy use by default).
    pub deciles: Vec<f64>,
    /// The median (type 7).
    pub median: f64,
}

impl NumericSummary {
    /// The median, when the summary has one: a model fitted from SQL
    /// aggregates without deciles records none (its deciles are empty).
    pub fn known_median(&self) -> Option<f64> {
        (!self.deciles.is_empty()).then_some(self.median)
    }
}

/// Summary of a categorical feature.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct CategoricalSummary {
    /// Levels in byte order, then the missing level when imputation made one.
    pub levels: Vec<String>,
    /// Training rows per level.
    pub counts: Vec<usize>,
}

/// What `--missing impute` did to a column.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(tag = "method", rename_all = "kebab-case")]
pub enum Imputation {
    /// Missing numbers became the training median; a 0/1 indicator column
    /// of the given name marks them.
    Median {
        /// The median used.
        value: f64,
        /// The name of the indicator input.
        indicator: String,
    },
    /// Missing categories became a level of their own.
    Level {
        /// The level's name.
        level: String,
    },
}

/// One column of the training file.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ColumnSchema {
    /// Header name.
    pub name: String,
    /// Its role.
    pub role: ColumnRole,
    /// Kind, for features.
    #[serde(skip_serializing_if = "Option::is_none", default)]
    pub kind: Option<ColumnKind>,
    /// How the kind was settled, for features.
    #[serde(skip_serializing_if = "Option::is_none", default)]
    pub kind_source: Option<KindSource>,
    /// Missing values in the file (before any policy).
    pub missing: usize,
    /// Numeric summary.
    #[serde(skip_serializing_if = "Option::is_none", default)]
    pub numeric: Option<NumericSummary>,
    /// Categorical summary.
    #[serde(skip_serializing_if = "Option::is_none", default)]
    pub categorical: Option<CategoricalSummary>,
    /// Imputation applied, if any.
    #[serde(skip_serializing_if = "Option::is_none", default)]
    pub imputation: Option<Imputation>,
}

/// How the positive (event) class was chosen.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum PositiveRule {
    /// Named with `--positive`.
    Stated,
    /// The class with the smallest (weighted) count; ties go to the later
    /// class in byte order.
    Minority,
}

/// The target column.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct TargetSchema {
    /// Column name.
    pub column: String,
    /// Classes in byte order, as written in the data.
    pub classes: Vec<String>,
    /// Training rows per class.
    pub counts: Vec<usize>,
    /// Weighted rows per class (equal to `counts` without `--weight`).
    pub weighted_counts: Vec<f64>,
    /// The event class.
    pub positive: String,
    /// How it was chosen.
    pub positive_rule: PositiveRule,
}

/// Where the positive class stands in `classes`: the one lookup every
/// part of the crate uses. A model file is refused on load when its
/// positive class is not one of its classes, so the fallback (the first
/// class) is never reached from a valid file.
pub fn positive_index(classes: &[String], positive: &str) -> usize {
    classes.iter().position(|c| c == positive).unwrap_or(0)
}

impl TargetSchema {
    /// Index of the positive class in `classes`.
    pub fn positive_index(&self) -> usize {
        positive_index(&self.classes, &self.positive)
    }

    /// The weighted class shares (the training class mix).
    pub fn class_mix(&self) -> Vec<f64> {
        let total: f64 = self.weighted_counts.iter().sum();
        self.weighted_counts.iter().map(|w| w / total).collect()
    }
}

/// Everything known about a training file's columns.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Schema {
    /// Every header column, in file order.
    pub columns: Vec<ColumnSchema>,
    /// The target.
    pub target: TargetSchema,
    /// The missing-value tokens in force (besides the empty field).
    pub na_tokens: Vec<String>,
    /// The missing-value policy applied.
    pub missing_policy: MissingPolicy,
    /// Rows used.
    pub rows: usize,
    /// Rows dropped by `--missing drop-rows`.
    pub rows_dropped: usize,
}

impl Schema {
    /// The feature columns, in file order.
    pub fn features(&self) -> impl Iterator<Item = &ColumnSchema> {
        self.columns.iter().filter(|c| c.role == ColumnRole::Feature)
    }

    /// The names of the numeric inputs in the order of the dataset's numeric
    /// matrix: numeric features in file order, then the missing-value
    /// indicators in the same order.
    pub fn numeric_inputs(&self) -> Vec<String> {
        let numeric: Vec<&ColumnSchema> = self.features().filter(|c| c.kind == Some(ColumnKind::Numeric)).collect();
        let mut names: Vec<String> = numeric.iter().map(|c| c.name.clone()).collect();
        names.extend(numeric.iter().filter_map(|c| match &c.imputation {
            Some(Imputation::Median { indicator, .. }) => Some(indicator.clone()),
            _ => None,
        }));
        names
    }

    /// The categorical features, in file order.
    pub fn categorical_inputs(&self) -> Vec<&ColumnSchema> {
        self.features().filter(|c| c.kind == Some(ColumnKind::Categorical)).collect()
    }

    /// The identifier columns, in file order.
    pub fn id_columns(&self) -> Vec<String> {
        self.columns.iter().filter(|c| c.role == ColumnRole::Id).map(|c| c.name.clone()).collect()
    }

    /// The weight column, if any.
    pub fn weight_column(&self) -> Option<&str> {
        self.columns.iter().find(|c| c.role == ColumnRole::Weight).map(|c| c.name.as_str())
    }
}
