//! The library's error type.
//!
//! Every variant carries the context a user needs to fix the problem: the
//! file, the 1-based line and the column name where those exist. The binary
//! turns an [`Error`] into one paragraph on stderr and an exit code
//! ([`Error::exit_code`]) as fixed by the command-line contract.

use std::fmt;

/// A location in an input file: the file as the user named it and a 1-based
/// line number (the line where the offending record starts).
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Position {
    /// The path as given on the command line (`<stdin>` for standard input).
    pub path: String,
    /// 1-based line number in the file.
    pub line: u64,
}

impl fmt::Display for Position {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}, line {}", self.path, self.line)
    }
}

/// Everything that can go wrong in the library.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum Error {
    /// The file could not be opened, read or written.
    #[error("{path}: {source}")]
    Io {
        /// The file involved.
        path: String,
        /// The operating system's error.
        #[source]
        source: std::io::Error,
    },

    /// The file holds no bytes at all (or only a byte-order mark).
    #[error("{path}: the file is empty; a header row naming the columns is expected")]
    EmptyFile {
        /// The file involved.
        path: String,
    },

    /// The file has a header row but no data rows.
    #[error("{path}: the file has a header row but no data rows")]
    HeaderOnly {
        /// The file involved.
        path: String,
    },

    /// A header cell is empty.
    #[error("{at}, column {position}: the header cell is empty; every column needs a name")]
    EmptyColumnName {
        /// Where the header is.
        at: Position,
        /// 1-based position of the column in the header.
        position: usize,
    },

    /// Two header cells carry the same name.
    #[error("{at}: column name '{column}' appears twice (columns {first} and {second}); column names must be unique")]
    DuplicateColumn {
        /// Where the header is.
        at: Position,
        /// The repeated name.
        column: String,
        /// 1-based position of the first occurrence.
        first: usize,
        /// 1-based position of the second occurrence.
        second: usize,
    },

    /// An option names a column that the header does not have.
    #[error("{path}: {flag} names column '{column}', which the header does not have{}", suggestion_text(.suggestion))]
    UnknownColumn {
        /// The file involved.
        path: String,
        /// The option that named it, e.g. `--target`.
        flag: String,
        /// The name as given.
        column: String,
        /// The closest existing column name, if one is close.
        suggestion: Option<String>,
    },

    /// One column was given two roles or two kinds.
    #[error("column '{column}' is named by both {first} and {second}; give each column one role and one kind")]
    ConflictingRoles {
        /// The column.
        column: String,
        /// The first option naming it.
        first: String,
        /// The second option naming it.
        second: String,
    },

    /// A row has a different number of fields from the header.
    #[error("{at}: the row has {found} fields but the header has {expected}; check for an unquoted delimiter or a missing field")]
    RaggedRow {
        /// Where the row is.
        at: Position,
        /// Fields in the header.
        expected: usize,
        /// Fields in this row.
        found: usize,
    },

    /// The CSV itself is malformed (e.g. invalid UTF-8).
    #[error("{at}, column '{column}': {message}")]
    Malformed {
        /// Where the problem is.
        at: Position,
        /// The column involved.
        column: String,
        /// What is wrong.
        message: String,
    },

    /// A value in a column declared (or required to be) numeric does not parse as a number.
    #[error("{at}, column '{column}': '{value}' is not a number, but the column is numeric{hint}")]
    NotANumber {
        /// Where the value is.
        at: Position,
        /// The column.
        column: String,
        /// The value as written.
        value: String,
        /// What to do about it.
        hint: String,
    },

    /// A numeric column holds an `inf` or `nan` literal.
    #[error("{at}, column '{column}': '{value}' is not a finite number; numeric data must be finite (declare it a missing-value token with --na if that is what it means)")]
    NonFiniteValue {
        /// Where the value is.
        at: Position,
        /// The column.
        column: String,
        /// The value as written.
        value: String,
    },

    /// A feature value is missing and the policy is `--missing error`.
    #[error("{at}, column '{column}': the value is missing; choose --missing impute or --missing drop-rows, or fix the data")]
    MissingValue {
        /// Where the value is.
        at: Position,
        /// The column.
        column: String,
    },

    /// A row has no value in the target column.
    #[error("{at}, column '{column}': the target value is missing; every training row needs a label")]
    MissingTarget {
        /// Where the row is.
        at: Position,
        /// The target column.
        column: String,
    },

    /// A weight is negative, missing or not finite.
    #[error("{at}, column '{column}': weight '{value}' is not allowed: {reason}")]
    InvalidWeight {
        /// Where the row is.
        at: Position,
        /// The weight column.
        column: String,
        /// The value as written.
        value: String,
        /// Why it is rejected.
        reason: String,
    },

    /// The target column has fewer than two distinct classes.
    #[error("{path}, column '{column}': the target has {} ({}); a classifier needs at least two classes", class_count_text(.classes.len()), .classes.join(", "))]
    TooFewClasses {
        /// The file involved.
        path: String,
        /// The target column.
        column: String,
        /// The classes found.
        classes: Vec<String>,
    },

    /// `--positive` names a class the target does not have.
    #[error("{path}, column '{column}': --positive names class '{class}', but the target's classes are {}", .classes.join(", "))]
    UnknownClass {
        /// The file involved.
        path: String,
        /// The target column.
        column: String,
        /// The class as given.
        class: String,
        /// The classes found.
        classes: Vec<String>,
    },

    /// A prior specification is invalid (a usage error).
    #[error("invalid prior: {0}")]
    InvalidPrior(String),

    /// A covariance matrix is singular: constant or collinear columns, or a
    /// class with too few rows.
    #[error("the {family} fit failed: the covariance {whose} is singular (columns involved: {}); {hint}", first_of(.columns))]
    SingularCovariance {
        /// The family being fitted.
        family: String,
        /// "of class 'X'" or "pooled over the classes".
        whose: String,
        /// The columns involved.
        columns: Vec<String>,
        /// What to do about it.
        hint: String,
    },

    /// A class has too few rows for the family.
    #[error("the {family} fit failed: class '{class}' has {rows} rows with positive weight, and needs at least {needed}; {hint}")]
    TooFewRows {
        /// The family being fitted.
        family: String,
        /// The class.
        class: String,
        /// Its rows.
        rows: usize,
        /// The minimum.
        needed: usize,
        /// What to do about it.
        hint: String,
    },

    /// A fit failed for a reason stated in the message.
    #[error("the {family} fit failed: {message}")]
    FitFailed {
        /// The family being fitted.
        family: String,
        /// What went wrong.
        message: String,
    },

    /// A model file is unreadable, corrupt, or from a newer version.
    #[error("{path}: {message}")]
    ModelFile {
        /// The file.
        path: String,
        /// What is wrong with it.
        message: String,
    },

    /// A data file does not match the model's schema.
    #[error("{path}: {message}")]
    SchemaMismatch {
        /// The data file.
        path: String,
        /// What does not match.
        message: String,
    },

    /// A file to score has a category the training data never had.
    #[error("{at}, column '{column}': level '{level}' was not in the training data (the model knows {}); fix the value, or refit with it in the training data", .known.join(", "))]
    UnseenCategory {
        /// Where it first appears.
        at: Position,
        /// The column.
        column: String,
        /// The unseen value.
        level: String,
        /// The levels the model knows.
        known: Vec<String>,
    },

    /// A file to score has a missing value the model cannot fill.
    #[error("{at}, column '{column}': the value is missing, and {reason}")]
    UnfillableMissing {
        /// Where it first appears.
        at: Position,
        /// The column.
        column: String,
        /// Why it cannot be filled.
        reason: String,
    },

    /// A row of a file being scored cannot be scored, and no reject file
    /// was given to set it aside.
    #[error("{at}, column '{column}': {message}; give --rejects FILE to set such rows aside and score the rest")]
    BadRow {
        /// Where the row is.
        at: Position,
        /// The column involved (empty for the whole row).
        column: String,
        /// What is wrong.
        message: String,
    },

    /// An argument value is invalid (a usage error).
    #[error("{0}")]
    Usage(String),
}

fn suggestion_text(suggestion: &Option<String>) -> String {
    match suggestion {
        Some(name) => format!(" (did you mean '{name}'?)"),
        None => String::new(),
    }
}

fn class_count_text(count: usize) -> String {
    match count {
        0 => "no classes".to_string(),
        1 => "only one class".to_string(),
        n => format!("{n} classes"),
    }
}

impl Error {
    /// The process exit code for this error (see the command-line contract):
    /// 2 for usage errors, 1 for data and model errors.
    pub fn exit_code(&self) -> u8 {
        match self {
            Error::Usage(_) | Error::ConflictingRoles { .. } | Error::InvalidPrior(_) => 2,
            _ => 1,
        }
    }

    /// Wraps an I/O error with the path it concerns.
    pub fn io(path: impl Into<String>, source: std::io::Error) -> Self {
        Error::Io { path: path.into(), source }
    }
}

/// The library's result type.
pub type Result<T, E = Error> = std::result::Result<T, E>;

/// The first few names of a long list, and how many more: an error message
/// stays readable when a high-cardinality column is behind it.
fn first_of(names: &[String]) -> String {
    const SHOWN: usize = 12;
    if names.len() <= SHOWN {
        return names.join(", ");
    }
    format!("{}, and {} more", names[..SHOWN].join(", "), names.len() - SHOWN)
}
