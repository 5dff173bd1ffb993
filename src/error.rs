//! The library's error type.
//!
//! Every variant carries the context a user needs to fix the problem: the
//! file, the 1-based line and the column name where those exist. The binary
//! turns an [`Error`] into one paragraph on stderr and an exit code
//! ([`Error::exit_code`]) as fixed by the command-line contract.
//!
//! Messages that name one of the library's settings hold it as a
//! [`Setting`], not as text: [`Display`](fmt::Display) names it by its
//! parameter (`missing`), and a front end names it its own way with
//! [`Error::describe`] (the command line shows its flag, `--missing`).

use std::fmt;

/// A setting of the library that a message may name.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
#[non_exhaustive]
pub enum Setting {
    /// The target column (`DataOptions::target`).
    Target,
    /// Identifier columns (`DataOptions::ids`, `BatchRequest::ids`).
    Ids,
    /// The row-weight column (`DataOptions::weight`).
    Weight,
    /// Columns left out (`DataOptions::exclude`).
    Exclude,
    /// Columns forced categorical (`DataOptions::categorical`).
    Categorical,
    /// Columns forced numeric (`DataOptions::numeric`).
    Numeric,
    /// Missing-value tokens (`DataOptions::na_tokens`).
    NaTokens,
    /// The missing-value policy (`DataOptions::missing`, `ApplyRules::missing`).
    Missing,
    /// The positive class (`DataOptions::positive`).
    Positive,
    /// Input columns passed through to the output (`BatchRequest::keep`).
    Keep,
    /// The policy for levels the model never saw (`ApplyRules::unseen`).
    Unseen,
    /// Where rows set aside go (`BatchRequest::rejects`).
    Rejects,
    /// Where the scores go (`Outputs::scores`).
    Scores,
    /// Where a command's one output goes (a model file, SQL, JSON).
    Output,
    /// Where every figure goes as JSON.
    Json,
    /// Where the HTML report goes.
    Report,
    /// Where out-of-fold predictions go (`ComparisonRequest::predictions`).
    Predictions,
    /// Where the run's summary goes (`BatchRequest::summary`).
    Summary,
    /// Per-row reason codes (`BatchRequest::reasons`).
    Reasons,
    /// Logistic ridge penalty (`LogisticParams::l2`).
    L2,
    /// Logistic class weights (`LogisticParams::class_weight`).
    ClassWeight,
    /// Newton iterations at most (`LogisticParams::max_iterations`).
    MaxIterations,
    /// Newton convergence tolerance (`LogisticParams::tolerance`).
    Tolerance,
    /// The coordinate-descent penalty (`LogisticParams::penalty`).
    Penalty,
    /// Elastic-net mixing (`LogisticParams::mixing`).
    Mixing,
    /// λ of the penalty (`LogisticParams::lambda`).
    Lambda,
    /// Points on the λ path (`LogisticParams::path_length`).
    PathLength,
    /// The path's last λ as a share of λ_max (`LogisticParams::lambda_floor`).
    LambdaFloor,
    /// Folds of the λ cross-validation (`LogisticParams::cv_folds`).
    CvFolds,
    /// Naive Bayes additive smoothing (`NaiveBayesParams::smoothing`).
    Smoothing,
    /// Naive Bayes variance floor (`NaiveBayesParams::variance_floor`).
    VarianceFloor,
    /// LDA shrinkage (`LdaParams::shrinkage`).
    Shrinkage,
    /// QDA regularisation (`QdaParams::reg`).
    Reg,
    /// Fitting from an engine's aggregates (`train_from_aggregates`).
    FromAggregates,
    /// The family the aggregates are written for (`stats_query`'s family).
    Family,
    /// Cross-validation folds (`SplitPlan::KFold::folds`).
    Folds,
    /// Repeats of K-fold (`SplitPlan::KFold::repeats`).
    Repeats,
    /// The holdout share (`SplitPlan::Holdout::test_fraction`).
    TestFraction,
    /// Where an out-of-time test set starts (`SplitPlan::OutOfTime::test_from`).
    TestFrom,
    /// Where an out-of-time training set ends (`SplitPlan::OutOfTime::gap_from`).
    Gap,
    /// A binary base rate (`PriorSpec::BaseRate`).
    BaseRate,
    /// A class mix (`PriorSpec`).
    Prior,
    /// The table a query reads (`table` of the SQL writers).
    Table,
    /// Score columns made elsewhere (`JudgeRequest::scores`).
    ScoreColumns,
    /// What outside scores are: probabilities or ranks (`JudgeRequest::kind`).
    ScoreKind,
    /// The class mix outside scores are calibrated to (`JudgeRequest::train_prior`).
    TrainPrior,
    /// A column of amounts (`StudyOptions::amount`).
    Amount,
    /// A column whose values are segments (`StudyOptions::by`).
    By,
    /// The column of an out-of-time split (`SplitChoice::OutOfTime::column`).
    SplitBy,
    /// A holdout file (`Dataset::read_with_holdout`).
    Holdout,
    /// Bootstrap draws (`ShiftOptions::bootstrap`).
    Bootstrap,
    /// Worker threads (`ScoreJob::threads`).
    Threads,
    /// The field delimiter (`Dialect::delimiter`).
    Delimiter,
    /// Loading a model whose content no longer matches its checksum
    /// (`ModelFile::open`'s `accept_edited`).
    AcceptEdited,
    /// The most memory a fit may take (`TrainRequest::memory_limit`).
    MemoryLimit,
    /// Refusing aliased inputs rather than dropping them
    /// (`LogisticParams::refuse_aliased`, `LdaParams::refuse_aliased`).
    RefuseAliased,
    /// How LDA and QDA take categorical inputs (`LdaParams::categories`,
    /// `QdaParams::categories`).
    Categories,
}

impl Setting {
    /// The setting's name in the library: the parameter that holds it.
    pub fn parameter(self) -> &'static str {
        match self {
            Setting::Target => "target",
            Setting::Ids => "ids",
            Setting::Weight => "weight",
            Setting::Exclude => "exclude",
            Setting::Categorical => "categorical",
            Setting::Numeric => "numeric",
            Setting::NaTokens => "na_tokens",
            Setting::Missing => "missing",
            Setting::Positive => "positive",
            Setting::Keep => "keep",
            Setting::Unseen => "unseen",
            Setting::Rejects => "rejects",
            Setting::Scores => "scores",
            Setting::Output => "output",
            Setting::Json => "json",
            Setting::Report => "report",
            Setting::Predictions => "predictions",
            Setting::Summary => "summary",
            Setting::Reasons => "reasons",
            Setting::L2 => "newton_ridge",
            Setting::ClassWeight => "reweight",
            Setting::MaxIterations => "max_iterations",
            Setting::Tolerance => "tolerance",
            Setting::Penalty => "penalty",
            Setting::Mixing => "mixing",
            Setting::Lambda => "lambda",
            Setting::PathLength => "path_length",
            Setting::LambdaFloor => "lambda_floor",
            Setting::CvFolds => "cv_folds",
            Setting::Smoothing => "smoothing",
            Setting::VarianceFloor => "variance_floor",
            Setting::Shrinkage => "diagonal_weight",
            Setting::Reg => "pooled_weight",
            Setting::FromAggregates => "from_aggregates",
            Setting::Family => "family",
            Setting::Folds => "folds",
            Setting::Repeats => "repeats",
            Setting::TestFraction => "test_fraction",
            Setting::TestFrom => "test_from",
            Setting::Gap => "gap_from",
            Setting::BaseRate => "base_rate",
            Setting::Prior => "prior",
            Setting::Table => "table",
            Setting::ScoreColumns => "scores",
            Setting::ScoreKind => "kind",
            Setting::TrainPrior => "train_prior",
            Setting::Amount => "amount",
            Setting::By => "by",
            Setting::SplitBy => "split_by",
            Setting::Holdout => "holdout",
            Setting::AcceptEdited => "accept_edited",
            Setting::Bootstrap => "bootstrap",
            Setting::Threads => "threads",
            Setting::Delimiter => "delimiter",
            Setting::MemoryLimit => "memory_limit",
            Setting::RefuseAliased => "refuse_aliased",
            Setting::Categories => "categories",
        }
    }

    /// The setting with a value, as a message names it (`missing = impute`).
    pub fn set_to(self, value: &'static str) -> Part {
        Part::Choice(self, value)
    }
}

/// How a front end names settings: `(setting, value)` to text.
pub type SettingNames<'a> = &'a dyn Fn(Setting, Option<&str>) -> String;

/// The library's own naming: the parameter, then ` = value`.
pub fn parameter_names(setting: Setting, value: Option<&str>) -> String {
    match value {
        Some(v) => format!("{} = {v}", setting.parameter()),
        None => setting.parameter().to_string(),
    }
}

/// One piece of a [`Message`].
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Part {
    /// Plain text.
    Text(String),
    /// A setting, named by the front end.
    Setting(Setting),
    /// A setting with a value (`missing = impute`, `--missing impute`).
    Choice(Setting, &'static str),
}

impl From<Setting> for Part {
    fn from(s: Setting) -> Part {
        Part::Setting(s)
    }
}

impl From<&str> for Part {
    fn from(s: &str) -> Part {
        Part::Text(s.to_string())
    }
}

impl From<String> for Part {
    fn from(s: String) -> Part {
        Part::Text(s)
    }
}

impl Part {
    /// The text, a setting named by `names`.
    pub fn render(&self, names: SettingNames<'_>) -> String {
        match self {
            Part::Text(t) => t.clone(),
            Part::Setting(s) => names(*s, None),
            Part::Choice(s, v) => names(*s, Some(v)),
        }
    }
}

/// Text that may name settings; see [`Setting`].
#[derive(Debug, Clone, PartialEq, Eq, Default)]
pub struct Message(pub Vec<Part>);

impl Message {
    /// The text, settings named by `names`.
    pub fn render(&self, names: SettingNames<'_>) -> String {
        self.0.iter().map(|part| part.render(names)).collect()
    }
}

impl fmt::Display for Message {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.render(&parameter_names))
    }
}

impl From<&str> for Message {
    fn from(s: &str) -> Message {
        Message(vec![Part::from(s)])
    }
}

impl From<String> for Message {
    fn from(s: String) -> Message {
        Message(vec![Part::from(s)])
    }
}

/// A [`Message`] from pieces: text, [`Setting`]s and
/// [`Setting::set_to`] choices.
macro_rules! message {
    ($($part:expr),* $(,)?) => {
        $crate::error::Message(vec![$($crate::error::Part::from($part)),*])
    };
}

pub(crate) use message;

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

    /// Another run holds an output this run would write.
    #[error("{path}: another run{} is writing this output; wait for it to finish or write elsewhere (its lock is {lock}; a run that has ended holds no lock)", holder.map(|p| format!(" (process {p})")).unwrap_or_default())]
    OutputBusy {
        /// The output.
        path: String,
        /// The holder's process id, when its lock file says.
        holder: Option<u32>,
        /// The lock file.
        lock: String,
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
    #[error("{}", self.describe(&parameter_names))]
    UnknownColumn {
        /// The file involved.
        path: String,
        /// What named it: a setting such as [`Setting::Target`], or text
        /// ("the model").
        named_by: Part,
        /// The name as given.
        column: String,
        /// The closest existing column name, if one is close.
        suggestion: Option<String>,
    },

    /// One column was given two roles or two kinds.
    #[error("{}", self.describe(&parameter_names))]
    ConflictingRoles {
        /// The column.
        column: String,
        /// The first setting naming it.
        first: Setting,
        /// The second setting naming it.
        second: Setting,
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
        hint: Message,
    },

    /// A score column read as probabilities holds a number outside [0, 1]
    /// (or, where every row needs a score, no value: `value` empty).
    #[error("{}", self.describe(&parameter_names))]
    NotAProbability {
        /// Where the value is.
        at: Position,
        /// The column.
        column: String,
        /// The value as written.
        value: String,
    },

    /// A numeric column holds an `inf` or `nan` literal.
    #[error("{}", self.describe(&parameter_names))]
    NonFiniteValue {
        /// Where the value is.
        at: Position,
        /// The column.
        column: String,
        /// The value as written.
        value: String,
    },

    /// A feature value is missing and the missing-value policy is `error`.
    #[error("{}", self.describe(&parameter_names))]
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

    /// The positive class named is not one the target has.
    #[error("{}", self.describe(&parameter_names))]
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
    #[error("{}", self.describe(&parameter_names))]
    SingularCovariance {
        /// The family being fitted.
        family: String,
        /// "of class 'X'" or "pooled over the classes".
        whose: String,
        /// The columns involved.
        columns: Vec<String>,
        /// What to do about it.
        hint: Message,
    },

    /// A class has too few rows for the family.
    #[error("{}", self.describe(&parameter_names))]
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
        hint: Message,
    },

    /// A fit failed for a reason stated in the message.
    #[error("{}", self.describe(&parameter_names))]
    FitFailed {
        /// The family being fitted.
        family: String,
        /// What went wrong.
        message: Message,
    },

    /// Every candidate of a comparison failed: each one's name, the fold
    /// where it failed and the error.
    #[error("{}", self.describe(&parameter_names))]
    EveryCandidateFailed(Vec<(String, String, std::sync::Arc<Error>)>),

    /// A model file's content no longer matches the checksum written with it.
    #[error("{}", self.describe(&parameter_names))]
    EditedModel {
        /// The file.
        path: String,
        /// What was found.
        detail: String,
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
    #[error("{}", self.describe(&parameter_names))]
    SchemaMismatch {
        /// The data file.
        path: String,
        /// What does not match.
        message: Message,
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
    #[error("{}", self.describe(&parameter_names))]
    UnfillableMissing {
        /// Where it first appears.
        at: Position,
        /// The column.
        column: String,
        /// Why it cannot be filled.
        reason: Message,
    },

    /// A row of a file being scored cannot be scored, and no reject file
    /// was given to set it aside.
    #[error("{}", self.describe(&parameter_names))]
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

    /// A setting's value is invalid, or settings do not go together (a
    /// usage error); the message names the settings.
    #[error("{0}")]
    Invalid(Message),
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
            Error::Usage(_)
            | Error::Invalid(_)
            | Error::ConflictingRoles { .. }
            | Error::InvalidPrior(_)
            | Error::OutputBusy { .. } => 2,
            _ => 1,
        }
    }

    /// The message, settings named by `names` (the library's own
    /// [`Display`](fmt::Display) uses [`parameter_names`]).
    pub fn describe(&self, names: SettingNames<'_>) -> String {
        let name = |s: Setting| names(s, None);
        match self {
            Error::UnknownColumn { path, named_by, column, suggestion } => format!(
                "{path}: {} names column '{column}', which the header does not have{}",
                named_by.render(names),
                suggestion_text(suggestion)
            ),
            Error::ConflictingRoles { column, first, second } => format!(
                "column '{column}' is named by both {} and {}; give each column one role and one kind",
                name(*first),
                name(*second)
            ),
            Error::NotANumber { at, column, value, hint } => {
                format!("{at}, column '{column}': '{value}' is not a number, but the column is numeric{}", hint.render(names))
            }
            Error::NotAProbability { at, column, value } if value.is_empty() => {
                format!("{at}, column '{column}': the score is missing; every row needs a probability from 0 to 1")
            }
            Error::NotAProbability { at, column, value } => format!(
                "{at}, column '{column}': '{value}' is not a probability from 0 to 1, which a {} column must hold (for points or grades, judge takes {})",
                name(Setting::ScoreColumns),
                names(Setting::ScoreKind, Some("rank"))
            ),
            Error::NonFiniteValue { at, column, value } => format!(
                "{at}, column '{column}': '{value}' is not a finite number; numeric data must be finite (declare it a missing-value token with {} if that is what it means)",
                name(Setting::NaTokens)
            ),
            Error::MissingValue { at, column } => format!(
                "{at}, column '{column}': the value is missing; choose {} or {}, or fix the data",
                names(Setting::Missing, Some("impute")),
                names(Setting::Missing, Some("drop-rows"))
            ),
            Error::UnknownClass { path, column, class, classes } => format!(
                "{path}, column '{column}': {} names class '{class}', but the target's classes are {}",
                name(Setting::Positive),
                classes.join(", ")
            ),
            Error::SingularCovariance { family, whose, columns, hint } => format!(
                "the {family} fit failed: the covariance {whose} is singular (columns involved: {}); {}",
                first_of(columns),
                hint.render(names)
            ),
            Error::TooFewRows { family, class, rows, needed, hint } => format!(
                "the {family} fit failed: class '{class}' has {rows} rows with positive weight, and needs at least {needed}; {}",
                hint.render(names)
            ),
            Error::FitFailed { family, message } => format!("the {family} fit failed: {}", message.render(names)),
            Error::UnfillableMissing { at, column, reason } => {
                format!("{at}, column '{column}': the value is missing, and {}", reason.render(names))
            }
            Error::BadRow { at, column, message } => format!(
                "{at}, column '{column}': {message}; give {} FILE to set such rows aside and score the rest",
                name(Setting::Rejects)
            ),
            Error::SchemaMismatch { path, message } => format!("{path}: {}", message.render(names)),
            Error::Invalid(message) => message.render(names),
            Error::EveryCandidateFailed(failures) => {
                let each: Vec<String> = failures
                    .iter()
                    .map(|(candidate, place, error)| format!("{candidate} failed in {place}: {}", error.describe(names)))
                    .collect();
                format!("no candidate could be evaluated; {}", each.join("; "))
            }
            Error::EditedModel { path, detail } => format!(
                "{path}: {detail}, so the model is not the one that was fitted; fit it again, or, if the edit was deliberate, load it with {} (the acceptance is recorded in what the run writes)",
                name(Setting::AcceptEdited)
            ),
            other => other.to_string(),
        }
    }

    /// A usage error from a message naming settings.
    pub fn invalid(message: Message) -> Self {
        Error::Invalid(message)
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
