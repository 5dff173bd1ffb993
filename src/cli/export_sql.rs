//! `baserate export-sql MODEL --table NAME [--prior SPEC | --base-rate P | --prior-from SHIFT.json] [--costs FILE] [--dialect D] [-o FILE]`
//!
//! Writes the scoring job as one SQL statement (see [`baserate::export::scoring`]).

use std::path::PathBuf;
use std::process::ExitCode;

use crate::cli::data_args::PolicyArgs;
use crate::cli::output::write_atomic;
use crate::cli::score::{parse_missing, PriorArgs};
use crate::cli::Failure;
use baserate::export::scoring::{scoring_sql, ScoringRequest};
use baserate::export::Dialect;

/// Arguments of `export-sql`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The model file.
    pub model: PathBuf,
    /// The table or view to score: NAME or SCHEMA.NAME (each part quoted as written).
    #[arg(long, value_name = "NAME")]
    pub table: String,
    /// The prior to score with.
    #[command(flatten)]
    pub priors: PriorArgs,
    /// A loss specification (TOML): adds the columns `action` and `expected_cost`.
    #[arg(long, value_name = "FILE")]
    pub costs: Option<PathBuf>,
    /// Columns passed through first (comma-separated; repeatable); they also break ties in a capacity's ranking.
    #[arg(long = "id", value_name = "COLS", value_delimiter = ',')]
    pub ids: Vec<String>,
    /// The SQL spelling: ansi (standard SQL), postgres or spark.
    #[arg(long, value_name = "D", default_value = "ansi")]
    pub dialect: Dialect,
    /// The policies for unseen and missing values (in SQL a row that would stop `score` is kept and marked with its reject reason).
    #[command(flatten)]
    pub policies: PolicyArgs,
    /// Text values that count as missing in categorical columns, besides NULL and '' [default: the training file's].
    #[arg(long, value_name = "TOKENS", value_delimiter = ',', allow_hyphen_values = true)]
    pub na: Option<Vec<String>>,
    /// Where to write the SQL (`-` for stdout).
    #[arg(long, short = 'o', value_name = "FILE", default_value = "-")]
    pub out: PathBuf,
    /// Loading the model.
    #[command(flatten)]
    pub loading: crate::cli::model_arg::ModelArgs,
}

/// Runs `export-sql`.
pub fn run(args: Args) -> Result<ExitCode, Failure> {
    let _claim = crate::cli::output::claim_outputs(
        &[
            ("the model file", Some(&args.model)),
            ("the costs file", args.costs.as_deref()),
            ("the shift file", args.priors.prior_from_path()),
        ],
        &[(baserate::error::Setting::Output, Some(&args.out))],
    )?;
    let (file, integrity) = args.loading.load(&args.model)?;
    let prior = args.priors.resolve(&file)?;
    let costs = args.costs.as_deref().map(|path| file.read_costs(path)).transpose()?;
    let request = ScoringRequest {
        table: args.table.clone(),
        dialect: args.dialect,
        prior,
        costs,
        ids: args.ids.clone(),
        missing: parse_missing(args.policies.missing.as_deref())?,
        unseen: args.policies.unseen,
        na_tokens: args.na.clone(),
        integrity,
    };
    let text = scoring_sql(&file, &request)?;
    write_atomic(&args.out, text.as_bytes())?;
    if args.out.as_os_str() != "-" {
        eprintln!("{}", baserate::report::score::sql_written(&file, &request, &args.out.display().to_string()));
    }
    Ok(ExitCode::SUCCESS)
}
