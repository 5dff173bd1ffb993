//! `baserate describe DATA --target COL [data options] [--json FILE]`
//!
//! Reads a file exactly as `fit` will (same roles, kinds and missing-value
//! policy) and shows the schema: each column's role and kind, missing
//! values, levels and summaries, the class mix and the positive class, and
//! anything worth a second look. Holds the whole file in memory.

use std::path::PathBuf;
use std::process::ExitCode;

use serde::Serialize;

use crate::cli::data_args::DataArgs;
use crate::cli::output::write_atomic;
use crate::cli::Failure;
use baserate::data::schema::Schema;
use baserate::data::Dataset;
use baserate::report::describe::render_schema;

/// Arguments of `describe`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The CSV file to read.
    pub data: PathBuf,
    /// Data options.
    #[command(flatten)]
    pub data_args: DataArgs,
    /// Write the schema and notices as JSON to FILE (`-` for stdout).
    #[arg(long, value_name = "FILE")]
    pub json: Option<PathBuf>,
}

#[derive(Serialize)]
struct DescribeJson<'a> {
    path: String,
    rows: usize,
    schema: &'a Schema,
    notices: Vec<String>,
}

/// Runs `describe`.
pub fn run(args: Args) -> Result<ExitCode, Failure> {
    let _claim = crate::cli::output::claim_outputs(
        &[("the data file", Some(&args.data))],
        &[(baserate::error::Setting::Json, args.json.as_deref())],
    )?;
    let options = args.data_args.to_options()?;
    let (dataset, mut notices) = Dataset::read(&args.data, &options)?;
    notices.extend(baserate::data::integer_coded::integer_coded_notices(&dataset));
    notices.extend(baserate::model::collinearity::collinearity_notices(&dataset));
    let path = args.data.display().to_string();
    if let Some(json_path) = &args.json {
        let body = DescribeJson {
            path: path.clone(),
            rows: dataset.rows(),
            schema: &dataset.schema,
            notices: notices.iter().map(|n| n.describe(&crate::cli::flag)).collect(),
        };
        let text = serde_json::to_string_pretty(&body).map_err(|e| baserate::Error::Usage(e.to_string()))?;
        write_atomic(json_path, format!("{text}\n").as_bytes())?;
        if json_path.as_os_str() == "-" {
            return Ok(ExitCode::SUCCESS);
        }
    }
    let text = render_schema(
        &path,
        &dataset.schema,
        &notices.iter().map(|n| n.describe(&crate::cli::flag)).collect::<Vec<_>>(),
    );
    print!("{text}");
    Ok(ExitCode::SUCCESS)
}
