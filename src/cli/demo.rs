//! `baserate demo [--out DIR] [--seed N] [--rows N]`
//!
//! Generates the two invented scenarios (lending and payments) into DIR and
//! runs the job on them end to end. The same seed gives the same bytes.
//! Holds each generated file in memory while writing it.

use std::path::PathBuf;
use std::process::ExitCode;

use crate::cli::output::{create_dir, write_atomic};
use crate::cli::Failure;
use crate::data::{Dataset, MissingPolicy, ReadOptions};
use crate::demo::{lending, payments, DemoSize, DEFAULT_SEED};
use crate::report::table::{Align, Table};
use crate::report::{count, percent, CAUTION};

/// Monte-Carlo draws for the Bayes-error figures printed by the demo.
const BAYES_ERROR_DRAWS: usize = 400_000;

/// Arguments of `demo`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// Folder to write the scenarios into.
    #[arg(long, short = 'o', value_name = "DIR", default_value = "baserate-demo")]
    pub out: PathBuf,
    /// Seed of every random step.
    #[arg(long, value_name = "N", default_value_t = DEFAULT_SEED)]
    pub seed: u64,
    /// Rows of every generated file (default: 5,000 lending training and
    /// new-portfolio rows, 50,000 payments rows).
    #[arg(long, value_name = "N")]
    pub rows: Option<usize>,
}

/// Runs `demo`.
pub fn run(args: Args) -> Result<ExitCode, Failure> {
    let size = match args.rows {
        Some(0) => return Err(crate::Error::Usage("--rows must be at least 1".to_string()).into()),
        Some(n) => DemoSize::uniform(n),
        None => DemoSize::standard(),
    };
    let files = crate::demo::generate(args.seed, size);
    let mut table = Table::new(&[("file", Align::Left), ("rows", Align::Right), ("what it is", Align::Left)]);
    for file in &files {
        let path = args.out.join(file.path);
        if let Some(parent) = path.parent() {
            create_dir(parent)?;
        }
        write_atomic(&path, file.contents.as_bytes())?;
        let rows = file.contents.lines().count().saturating_sub(1);
        table.row(vec![path.display().to_string(), count(rows), file.description.to_string()]);
    }
    println!("baserate demo (seed {})\n", args.seed);
    println!("{}", table.render());

    let lending_training = args.out.join("lending/train.csv");
    let mut options = ReadOptions::new("outcome");
    options.ids = vec!["application_id".into(), "application_month".into()];
    options.missing = MissingPolicy::Impute;
    let (lending, _) = Dataset::read(&lending_training, &options)?;
    let mut options = ReadOptions::new("label");
    options.ids = vec!["transaction_id".into(), "transaction_day".into()];
    let (payments_data, _) = Dataset::read(&args.out.join("payments/transactions.csv"), &options)?;

    let (lending_error, lending_se) =
        lending::bayes_error(lending::TRAINING_DEFAULT_RATE, BAYES_ERROR_DRAWS, args.seed);
    let (new_error, new_se) =
        lending::bayes_error(lending::NEW_PORTFOLIO_DEFAULT_RATE, BAYES_ERROR_DRAWS, args.seed);
    let (payments_error, payments_se) = payments::bayes_error(payments::FRAUD_RATE, BAYES_ERROR_DRAWS, args.seed);

    let share = |d: &Dataset| {
        let t = &d.schema.target;
        t.class_mix()[t.positive_index()]
    };
    println!(
        "lending: {} training applications, default rate {} ({} defaults); the new portfolio's rate is withheld\n\
         \x20        Bayes-optimal error of the true model: {:.4} ± {:.4} at the 10% training rate, {:.4} ± {:.4} at the new rate\n\
         payments: {} transactions, fraud rate {} ({} frauds)\n\
         \x20         Bayes-optimal error of the true model: {:.5} ± {:.5} (always saying 'genuine' errs 0.00500: rank and cost, not error rate, tell models apart)\n",
        count(lending.rows()),
        percent(share(&lending)),
        count(lending.schema.target.counts[lending.schema.target.positive_index()]),
        lending_error,
        lending_se,
        new_error,
        new_se,
        count(payments_data.rows()),
        percent(share(&payments_data)),
        count(payments_data.schema.target.counts[payments_data.schema.target.positive_index()]),
        payments_error,
        payments_se,
    );
    println!("(Bayes errors by Monte Carlo over {} draws of each true model; ± one standard error)", count(BAYES_ERROR_DRAWS));
    println!("\nTry: baserate describe {} --target outcome --id application_id,application_month --missing impute", lending_training.display());
    println!("\n{CAUTION}");
    Ok(ExitCode::SUCCESS)
}
