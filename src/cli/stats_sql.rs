//! `baserate stats-sql --family F --table NAME --target COL [--categorical COLS] [--weight COL] [--dialect D] [-o FILE] COLUMN...`
//!
//! Writes the aggregate query whose result `fit --from-stats` fits (see
//! [`baserate::export::stats_query`]).

use std::path::PathBuf;
use std::process::ExitCode;

use crate::cli::family_args::FamilyArg;
use crate::cli::output::write_atomic;
use crate::cli::Failure;
use baserate::data::options::DEFAULT_NA_TOKENS;
use baserate::export::stats_query::{stats_sql, StatsRequest};
use baserate::export::Dialect;

/// Arguments of `stats-sql`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The input columns (numeric unless named by --categorical).
    pub columns: Vec<String>,
    /// The family the aggregates are for: lda, qda or naive-bayes.
    #[arg(long, value_enum)]
    pub family: FamilyArg,
    /// The table or view: NAME or SCHEMA.NAME.
    #[arg(long, value_name = "NAME")]
    pub table: String,
    /// The class label column.
    #[arg(long, value_name = "COL")]
    pub target: String,
    /// Input columns that are categorical (comma-separated; repeatable; added to the inputs).
    #[arg(long, value_name = "COLS", value_delimiter = ',')]
    pub categorical: Vec<String>,
    /// Column of non-negative frequency weights.
    #[arg(long, value_name = "COL")]
    pub weight: Option<String>,
    /// Text values that count as missing in categorical columns, besides NULL and '' [default: NA,N/A,null,?].
    #[arg(long, value_name = "TOKENS", value_delimiter = ',', allow_hyphen_values = true)]
    pub na: Option<Vec<String>>,
    /// The SQL spelling: ansi, postgres (adds deciles by percentile_cont) or spark (backticks; deciles by exact percentile).
    #[arg(long, value_name = "D", default_value = "ansi")]
    pub dialect: Dialect,
    /// Where to write the SQL (`-` for stdout).
    #[arg(long, short = 'o', value_name = "FILE", default_value = "-")]
    pub out: PathBuf,
}

/// Runs `stats-sql`.
pub fn run(args: Args) -> Result<ExitCode, Failure> {
    let numeric: Vec<String> = args.columns.iter().filter(|c| !args.categorical.contains(c)).cloned().collect();
    let request = StatsRequest {
        family: args.family.into(),
        table: args.table.clone(),
        target: args.target.clone(),
        numeric,
        categorical: args.categorical.clone(),
        weight: args.weight.clone(),
        na_tokens: args.na.clone().unwrap_or_else(|| DEFAULT_NA_TOKENS.iter().map(|s| s.to_string()).collect()),
        dialect: args.dialect,
    };
    let text = stats_sql(&request)?;
    write_atomic(&args.out, text.as_bytes())?;
    if args.out.as_os_str() != "-" {
        eprintln!(
            "wrote {}: the aggregates of {} for {} ({} dialect); save its result as CSV with a header, then: baserate fit RESULT.csv --from-stats --family {} -o MODEL",
            args.out.display(),
            args.table,
            request.family.name(),
            args.dialect.name(),
            request.family.name()
        );
    }
    Ok(ExitCode::SUCCESS)
}
