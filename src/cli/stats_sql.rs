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
use baserate::error::Error;
use baserate::export::newton_query::newton_sql;
use baserate::export::stats_query::{stats_sql, StatsRequest};
use baserate::export::Dialect;

/// Arguments of `stats-sql`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The input columns (numeric unless named by --categorical).
    pub columns: Vec<String>,
    /// The family the aggregates are for: lda, qda, naive-bayes, or logistic (one Newton step at --start).
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
    /// Deciles of the numeric inputs: exact (postgres, spark; the default there), approximate (spark: percentile_approx, bounded memory) or none (the ansi default).
    #[arg(long, value_name = "HOW")]
    pub deciles: Option<baserate::export::stats_query::Deciles>,
    /// Logistic: the model whose coefficients the step query is at (a fit on a sample, or the last step's NEXT).
    #[arg(long, value_name = "MODEL")]
    pub start: Option<PathBuf>,
    /// Where to write the SQL (`-` for stdout).
    #[arg(long, short = 'o', value_name = "FILE", default_value = "-")]
    pub out: PathBuf,
}

/// `stats-sql --family logistic --start MODEL`: the Newton step query.
fn newton_step_sql(args: &Args, start: &std::path::Path) -> Result<ExitCode, Failure> {
    let (file, integrity) = baserate::train::file::ModelFile::open(start, false)?;
    if let Some(warning) = integrity.warning(&start.display().to_string()) {
        eprintln!("warning: {warning}");
    }
    let inputs = baserate::train::newton::newton_start(&file)?.encoding.clone();
    let mut named: Vec<String> = inputs.numeric.clone();
    named.extend(inputs.one_hot.iter().map(|h| h.column.clone()));
    let mut given: Vec<String> = args.columns.clone();
    given.extend(args.categorical.iter().filter(|c| !given.contains(c)).cloned().collect::<Vec<_>>());
    if !given.is_empty() && {
        let (mut a, mut b) = (given.clone(), named.clone());
        a.sort();
        b.sort();
        a != b
    } {
        return Err(Error::Usage(format!(
            "the step query's inputs are the start model's ({}); leave out the COLUMN list or name exactly those",
            named.join(", ")
        ))
        .into());
    }
    if args.target != file.schema.target.column || args.weight.as_deref() != file.schema.weight_column() {
        return Err(Error::Usage(format!(
            "the start model was fitted with target '{}' and {}; the step query uses the same",
            file.schema.target.column,
            file.schema.weight_column().map_or("no weight".to_string(), |w| format!("weight '{w}'"))
        ))
        .into());
    }
    let text = newton_sql(&file, &args.table, args.dialect)?;
    write_atomic(&args.out, text.as_bytes())?;
    if args.out.as_os_str() != "-" {
        eprintln!(
            "wrote {}: one Newton step at {} over {} ({} dialect); save its result as CSV with a header, then: baserate fit RESULT.csv --from-stats --family logistic --start {} -o NEXT",
            args.out.display(),
            start.display(),
            args.table,
            args.dialect.name(),
            start.display()
        );
    }
    Ok(ExitCode::SUCCESS)
}

/// Runs `stats-sql`.
pub fn run(args: Args) -> Result<ExitCode, Failure> {
    let logistic = matches!(args.family, FamilyArg::Logistic);
    match (&args.start, logistic) {
        (Some(start), true) => return newton_step_sql(&args, &start.clone()),
        (None, true) => {
            return Err(Error::Usage(
                "stats-sql --family logistic needs --start MODEL: a logistic fit (on a sample of the table, say) whose coefficients the Newton step starts from".into(),
            )
            .into())
        }
        (Some(_), false) => {
            return Err(Error::Usage("--start is for --family logistic: the class-conditional families need no start".into()).into())
        }
        (None, false) => {}
    }
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
        deciles: args.deciles,
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
