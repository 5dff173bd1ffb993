//! The data options every command that reads a training file shares.

use clap::Args as ClapArgs;

use baserate::data::options::{MissingPolicy, ReadOptions, DEFAULT_NA_TOKENS};
use baserate::error::{Error, Result};

/// `--missing` values.
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum MissingArg {
    /// Stop at the first missing feature value, naming file, line and column.
    Error,
    /// Numeric: training median plus an indicator input; categorical: a level of its own.
    Impute,
    /// Drop rows with a missing feature value (the count is reported).
    DropRows,
}

/// Options describing a data file.
#[derive(Debug, Clone, ClapArgs)]
pub struct DataArgs {
    /// The class label column (required, except by `fit --from-stats`, where the aggregates name it).
    #[arg(long, value_name = "COL")]
    pub target: Option<String>,
    /// Field delimiter: one character, or `tab`.
    #[arg(long, value_name = "C", default_value = ",")]
    pub delimiter: String,
    /// Columns passed through to outputs (comma-separated; repeatable).
    #[arg(long = "id", value_name = "COLS", value_delimiter = ',')]
    pub ids: Vec<String>,
    /// Column of non-negative frequency weights.
    #[arg(long, value_name = "COL")]
    pub weight: Option<String>,
    /// Columns to ignore (comma-separated; repeatable).
    #[arg(long, value_name = "COLS", value_delimiter = ',')]
    pub exclude: Vec<String>,
    /// Columns to read as categorical whatever their values.
    #[arg(long, value_name = "COLS", value_delimiter = ',')]
    pub categorical: Vec<String>,
    /// Columns that must be numeric (a non-number is then an error).
    #[arg(long, value_name = "COLS", value_delimiter = ',')]
    pub numeric: Vec<String>,
    /// Missing-value tokens, replacing the default list NA,N/A,null,? (an empty field is always missing).
    #[arg(long, value_name = "TOKENS", value_delimiter = ',', allow_hyphen_values = true)]
    pub na: Option<Vec<String>>,
    /// What to do with missing feature values.
    #[arg(long, value_enum, default_value = "error")]
    pub missing: MissingArg,
    /// The event class (default: the minority class, stated in the output).
    #[arg(long, value_name = "CLASS")]
    pub positive: Option<String>,
}

/// How the commands that apply a model (`score`, `shift`) read a file and
/// what they do with a row they cannot score: declared once for both.
#[derive(Debug, Clone, ClapArgs)]
pub struct ApplyArgs {
    /// Field delimiter: one character, or `tab`.
    #[arg(long, value_name = "C", default_value = ",")]
    pub delimiter: String,
    /// Missing-value tokens [default: the training file's].
    #[arg(long, value_name = "TOKENS", value_delimiter = ',', allow_hyphen_values = true)]
    pub na: Option<Vec<String>>,
    /// Rows that cannot be scored go here (CSV: line, column, reason, message, row); without it such a row stops the run.
    #[arg(long, value_name = "FILE")]
    pub rejects: Option<std::path::PathBuf>,
    /// The policies for unseen and missing values.
    #[command(flatten)]
    pub policies: PolicyArgs,
}

/// The policies for values a model has not seen, shared by `score`, `shift`
/// and `export-sql`.
#[derive(Debug, Clone, ClapArgs)]
pub struct PolicyArgs {
    /// A category the training data never had: stop (error), set the row aside (reject), or take it as missing.
    #[arg(long, value_name = "POLICY", default_value = "error")]
    pub unseen: baserate::apply::UnseenPolicy,
    /// A missing value the model has no fill for: stop (error), fill with the training median or the missing level (impute), or set the row aside (drop-rows) [default: the training policy].
    #[arg(long, value_name = "POLICY")]
    pub missing: Option<String>,
}

/// Parses `--delimiter`: a single byte character, or `tab` / `\t`.
pub fn parse_delimiter(text: &str) -> Result<u8> {
    match text {
        "tab" | "\\t" | "\t" => Ok(b'\t'),
        t if t.len() == 1 && t.is_ascii() => {
            baserate::records::Dialect::check_delimiter(t.as_bytes()[0])?;
            Ok(t.as_bytes()[0])
        }
        t => Err(Error::Usage(format!("--delimiter takes one ASCII character or 'tab', not '{t}'"))),
    }
}

impl DataArgs {
    /// `--missing` for a fit from aggregates, where imputing is not (yet) a stage of the query.
    pub fn missing_policy_from_aggregates(&self) -> Result<baserate::data::MissingPolicy> {
        match self.missing {
            MissingArg::Error => Ok(baserate::data::MissingPolicy::Error),
            MissingArg::DropRows => Ok(baserate::data::MissingPolicy::DropRows),
            MissingArg::Impute => Err(Error::Usage(
                "--missing impute needs each column's median before the sums, which one aggregate pass cannot give; use drop-rows or error".into(),
            )),
        }
    }

    /// Turns the raw arguments into the library's read options.
    pub fn to_options(&self) -> Result<ReadOptions> {
        let target = self
            .target
            .clone()
            .ok_or_else(|| Error::Usage("--target COL is required: name the class label column".into()))?;
        let mut options = ReadOptions::new(target);
        options.delimiter = parse_delimiter(&self.delimiter)?;
        options.ids = self.ids.clone();
        options.weight = self.weight.clone();
        options.exclude = self.exclude.clone();
        options.categorical = self.categorical.clone();
        options.numeric = self.numeric.clone();
        options.na_tokens = match &self.na {
            Some(tokens) => tokens.iter().filter(|t| !t.is_empty()).cloned().collect(),
            None => DEFAULT_NA_TOKENS.iter().map(|s| s.to_string()).collect(),
        };
        options.missing = match self.missing {
            MissingArg::Error => MissingPolicy::Error,
            MissingArg::Impute => MissingPolicy::Impute,
            MissingArg::DropRows => MissingPolicy::DropRows,
        };
        options.positive = self.positive.clone();
        Ok(options)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use clap::Parser;

    #[derive(Parser)]
    struct Wrapper {
        #[command(flatten)]
        data: DataArgs,
    }

    #[test]
    fn raw_arguments_become_options() {
        let w = Wrapper::parse_from([
            "x",
            "--target",
            "y",
            "--id",
            "a,b",
            "--id",
            "c",
            "--delimiter",
            "tab",
            "--na",
            "-999,NA",
            "--missing",
            "drop-rows",
        ]);
        let o = w.data.to_options().unwrap();
        assert_eq!(o.ids, vec!["a", "b", "c"]);
        assert_eq!(o.delimiter, b'\t');
        assert_eq!(o.na_tokens, vec!["-999", "NA"]);
        assert_eq!(o.missing, MissingPolicy::DropRows);
    }

    #[test]
    fn rejects_a_long_delimiter() {
        assert!(matches!(parse_delimiter(";;"), Err(Error::Usage(_))));
        assert_eq!(parse_delimiter(";").unwrap(), b';');
    }
}
