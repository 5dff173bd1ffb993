//! What the user says about a file before it is read: delimiter, column
//! roles and kinds, missing-value tokens and policy.

use serde::{Deserialize, Serialize};

/// The missing-value tokens used when `--na` is not given. An empty field is
/// always missing, whatever the tokens.
pub const DEFAULT_NA_TOKENS: [&str; 4] = ["NA", "N/A", "null", "?"];

/// What to do with a missing feature value.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, Default)]
#[serde(rename_all = "kebab-case")]
pub enum MissingPolicy {
    /// Stop with an error naming file, line and column (the default).
    #[default]
    Error,
    /// Numeric: replace by the training median and add a 0/1 indicator
    /// column; categorical: a level of its own.
    Impute,
    /// Drop every row with a missing feature value (the count is reported).
    DropRows,
}

impl MissingPolicy {
    /// The name used on the command line.
    pub fn name(self) -> &'static str {
        match self {
            MissingPolicy::Error => "error",
            MissingPolicy::Impute => "impute",
            MissingPolicy::DropRows => "drop-rows",
        }
    }
}

/// How a file is to be read.
#[derive(Debug, Clone)]
pub struct ReadOptions {
    /// Field delimiter (one byte).
    pub delimiter: u8,
    /// Tokens that mean "missing" besides the empty field.
    pub na_tokens: Vec<String>,
    /// The class label column (empty when reading a file to score).
    pub target: String,
    /// Columns passed through to outputs untouched.
    pub ids: Vec<String>,
    /// A column of non-negative frequency weights.
    pub weight: Option<String>,
    /// Columns to ignore.
    pub exclude: Vec<String>,
    /// Columns forced to be categorical.
    pub categorical: Vec<String>,
    /// Columns forced to be numeric (a non-number is then an error).
    pub numeric: Vec<String>,
    /// Missing-value policy for features.
    pub missing: MissingPolicy,
    /// The event class; default: the minority class.
    pub positive: Option<String>,
    /// When reading a file to score: the feature columns the model needs
    /// (each must be present; every other column without a role is ignored).
    pub model_columns: Option<Vec<String>>,
    /// The longest record, in bytes (see [`crate::records::Dialect`]).
    pub max_record_bytes: usize,
    /// Score columns made elsewhere (`JudgeRequest::scores`): read as
    /// numbers, like `numeric`, and named as scores in errors.
    pub score_columns: Vec<String>,
    /// The score columns hold probabilities: a value outside [0, 1] is an
    /// error naming its line.
    pub scores_are_probabilities: bool,
    /// Where the count of parsed chunks goes (a large file's read).
    pub progress: crate::progress::Progress,
}

impl ReadOptions {
    /// Options with the defaults for everything but the target column.
    pub fn new(target: impl Into<String>) -> Self {
        ReadOptions {
            delimiter: b',',
            na_tokens: DEFAULT_NA_TOKENS.iter().map(|s| s.to_string()).collect(),
            target: target.into(),
            ids: Vec::new(),
            weight: None,
            exclude: Vec::new(),
            categorical: Vec::new(),
            numeric: Vec::new(),
            missing: MissingPolicy::Error,
            positive: None,
            model_columns: None,
            max_record_bytes: crate::records::DEFAULT_MAX_RECORD_BYTES,
            score_columns: Vec::new(),
            scores_are_probabilities: false,
            progress: crate::progress::Progress::silent(),
        }
    }

    /// How the file's records are delimited.
    pub fn dialect(&self) -> crate::records::Dialect {
        crate::records::Dialect { delimiter: self.delimiter, max_record_bytes: self.max_record_bytes }
    }
}
