//! `baserate inspect MODEL [--json FILE]`
//!
//! Shows what a model file holds: family, classes, priors, training class
//! mix and counts, fit diagnostics, and the fitted parameters (logistic
//! coefficients with standard errors; LDA's linear discriminant; class
//! means; naive Bayes likelihoods).

use std::path::PathBuf;
use std::process::ExitCode;

use crate::cli::output::write_atomic;
use crate::cli::Failure;
use baserate::report::model::{inspect_json, inspect_text};

/// Arguments of `inspect`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The model file.
    pub model: PathBuf,
    /// Write every figure as JSON to FILE (`-` for stdout).
    #[arg(long, value_name = "FILE")]
    pub json: Option<PathBuf>,
    /// Loading the model.
    #[command(flatten)]
    pub loading: crate::cli::model_arg::ModelArgs,
}

/// Runs `inspect`.
pub fn run(args: Args) -> Result<ExitCode, Failure> {
    let _claim = crate::cli::output::claim_outputs(
        &[("the model file", Some(&args.model))],
        &[(baserate::error::Setting::Json, args.json.as_deref())],
    )?;
    let (file, integrity) = args.loading.load(&args.model)?;
    if let Some(path) = &args.json {
        let text = serde_json::to_string_pretty(&inspect_json(&file, integrity))
            .map_err(|e| baserate::Error::Usage(e.to_string()))?;
        write_atomic(path, format!("{text}\n").as_bytes())?;
        if path.as_os_str() == "-" {
            return Ok(ExitCode::SUCCESS);
        }
    }
    print!("{}", inspect_text(&args.model.display().to_string(), &file, integrity));
    Ok(ExitCode::SUCCESS)
}
