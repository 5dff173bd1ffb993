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
use baserate::report::model::{inspect_json, inspect_text, InspectOptions, OddsRatioSteps};

/// Arguments of `inspect`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The model file.
    pub model: PathBuf,
    /// Write every figure as JSON to FILE (`-` for stdout).
    #[arg(long, value_name = "FILE")]
    pub json: Option<PathBuf>,
    /// The rise in a numeric input each logistic odds ratio is for, as
    /// COL=STEP,... (inputs not named: one training standard deviation).
    #[arg(long, value_name = "COL=STEP,...")]
    pub odds_ratio_per: Option<String>,
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
    let options = InspectOptions {
        odds_ratio_per: match &args.odds_ratio_per {
            Some(text) => {
                text.parse::<OddsRatioSteps>().map_err(|e| baserate::Error::Usage(format!("--odds-ratio-per {e}")))?
            }
            None => OddsRatioSteps::default(),
        },
    };
    let (file, integrity) = args.loading.load(&args.model)?;
    options.check(&file)?;
    if let Some(path) = &args.json {
        let text = serde_json::to_string_pretty(&inspect_json(&file, integrity, &options))
            .map_err(|e| baserate::Error::Usage(e.to_string()))?;
        write_atomic(path, format!("{text}\n").as_bytes())?;
        if path.as_os_str() == "-" {
            return Ok(ExitCode::SUCCESS);
        }
    }
    print!("{}", inspect_text(&args.model.display().to_string(), &file, integrity, &options));
    Ok(ExitCode::SUCCESS)
}
