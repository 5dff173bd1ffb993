//! `baserate score MODEL DATA -o OUT [--prior SPEC | --base-rate P] [--id COLS]`
//!
//! Posteriors for every row of DATA: the `--id` columns, then one column
//! `p_<class>` per class, under the model's prior or the one given. The
//! output is written atomically. This first version holds the file in
//! memory.

use std::path::PathBuf;
use std::process::ExitCode;

use crate::cli::data_args::parse_delimiter;
use crate::cli::fit::prior_spec;
use crate::cli::output::write_atomic;
use crate::cli::Failure;
use crate::data::scoring::read_for_scoring;
use crate::model::file::ModelFile;

/// Arguments of `score`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The model file.
    pub model: PathBuf,
    /// The CSV file to score.
    pub data: PathBuf,
    /// Where to write the scores (`-` for stdout).
    #[arg(long, short = 'o', value_name = "OUT")]
    pub out: PathBuf,
    /// The prior to score with: empirical, uniform, or CLASS=P,... [default: the model's].
    #[arg(long, value_name = "SPEC")]
    pub prior: Option<String>,
    /// Binary shorthand for --prior POSITIVE=P,OTHER=1-P.
    #[arg(long, value_name = "P")]
    pub base_rate: Option<f64>,
    /// The prior estimated by `shift`: SHIFT.json (the EM estimate) or SHIFT.json:bbse.
    #[arg(long, value_name = "SHIFT.json[:METHOD]")]
    pub prior_from: Option<String>,
    /// Columns passed through to the output (comma-separated; repeatable).
    #[arg(long = "id", value_name = "COLS", value_delimiter = ',')]
    pub ids: Vec<String>,
    /// Field delimiter: one character, or `tab`.
    #[arg(long, value_name = "C", default_value = ",")]
    pub delimiter: String,
    /// Missing-value tokens [default: the training file's].
    #[arg(long, value_name = "TOKENS", value_delimiter = ',', allow_hyphen_values = true)]
    pub na: Option<Vec<String>>,
}

/// Runs `score`.
pub fn run(args: Args) -> Result<ExitCode, Failure> {
    let file = ModelFile::load(&args.model)?;
    let positive = file.classes.iter().position(|c| *c == file.positive).unwrap_or(0);
    let prior = match (prior_spec(args.prior.as_deref(), args.base_rate)?, &args.prior_from) {
        (Some(_), Some(_)) => {
            return Err(crate::Error::Usage("give --prior/--base-rate or --prior-from, not both".into()).into())
        }
        (Some(spec), None) => spec.resolve(&file.classes, &file.training_class_mix, positive)?,
        (None, Some(from)) => crate::cli::shift::prior_from_file(from, &file.classes)?,
        (None, None) => file.prior.clone(),
    };
    let data =
        read_for_scoring(&args.data, &file.schema, &args.ids, parse_delimiter(&args.delimiter)?, args.na.clone())?;
    let mut posteriors = file.log_posteriors(&data.inputs(), &prior);
    posteriors.mapv_inplace(f64::exp);
    let mut writer = csv::Writer::from_writer(Vec::with_capacity(data.rows() * 40));
    let mut header: Vec<String> = data.ids.iter().map(|(name, _)| name.clone()).collect();
    header.extend(file.classes.iter().map(|c| format!("p_{c}")));
    let io_error = |e: csv::Error| crate::Error::io(args.out.display().to_string(), std::io::Error::other(e));
    writer.write_record(&header).map_err(io_error)?;
    let mut record: Vec<String> = Vec::with_capacity(header.len());
    for (r, row) in posteriors.rows().into_iter().enumerate() {
        record.clear();
        record.extend(data.ids.iter().map(|(_, values)| values[r].clone()));
        record.extend(row.iter().map(|p| crate::report::exact(*p)));
        writer.write_record(&record).map_err(io_error)?;
    }
    let bytes = writer.into_inner().map_err(|e| crate::Error::io(args.out.display().to_string(), e.into_error()))?;
    write_atomic(&args.out, &bytes)?;
    for (column, n) in &data.imputed {
        eprintln!("note: column '{column}': {n} missing values filled as in training");
    }
    if args.out.as_os_str() != "-" {
        eprintln!(
            "scored {} rows with the {} model; posteriors written to {}",
            data.rows(),
            file.family.name(),
            args.out.display()
        );
    }
    Ok(ExitCode::SUCCESS)
}
