//! `baserate demo [--out DIR] [--seed N] [--rows N]`
//!
//! Generates the two invented scenarios (lending and payments) into DIR and
//! runs the job on them end to end. The same seed gives the same bytes.
//! Holds each generated file in memory while writing it.

use std::path::PathBuf;
use std::process::ExitCode;

use clap::Parser;

use crate::cli::output::{create_dir, write_atomic};
use crate::cli::Failure;
use baserate::data::{Dataset, MissingPolicy, ReadOptions};
use baserate::demo::{lending, payments, DemoSize, DEFAULT_SEED};
use baserate::format::{count, percent};
use baserate::report::table::{Align, Table};
use baserate::report::{wrap, CAUTION};

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
        Some(0) => return Err(baserate::Error::Usage("--rows must be at least 1".to_string()).into()),
        Some(n) => DemoSize::uniform(n),
        None => DemoSize::standard(),
    };
    let files = baserate::demo::generate(args.seed, size);
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
    let (new_error, new_se) = lending::bayes_error(lending::NEW_PORTFOLIO_DEFAULT_RATE, BAYES_ERROR_DRAWS, args.seed);
    let (payments_error, payments_se) = payments::bayes_error(payments::FRAUD_RATE, BAYES_ERROR_DRAWS, args.seed);

    let share = |d: &Dataset| {
        let t = &d.schema.target;
        t.class_mix()[t.positive_index()]
    };
    let events = |d: &Dataset| count(d.schema.target.counts[d.schema.target.positive_index()]);
    let lending_text = format!(
        "lending: {} training applications, default rate {} ({} defaults); the new portfolio's rate \
         is withheld (the answers file holds it). Bayes-optimal error of the true model: {:.4} ± {:.4} \
         at the {} training rate, {:.4} ± {:.4} at the new portfolio's {}.",
        count(lending.rows()),
        percent(share(&lending)),
        events(&lending),
        lending_error,
        lending_se,
        percent(lending::TRAINING_DEFAULT_RATE),
        new_error,
        new_se,
        percent(lending::NEW_PORTFOLIO_DEFAULT_RATE),
    );
    let payments_text = format!(
        "payments: {} transactions, fraud rate {} ({} frauds). Bayes-optimal error of the true model: \
         {:.5} ± {:.5}, against {:.5} for calling every transaction genuine: at this base rate the \
         error rate hardly tells models apart; ranking, calibration and cost do.",
        count(payments_data.rows()),
        percent(share(&payments_data)),
        events(&payments_data),
        payments_error,
        payments_se,
        payments::FRAUD_RATE,
    );
    println!("{}\n", wrap(&lending_text, 100, 2));
    println!("{}\n", wrap(&payments_text, 100, 2));
    println!(
        "{}\n",
        wrap(
            &format!(
                "(Bayes errors by Monte Carlo over {} draws of each true model, ± one standard error; \
                 the generating models are documented in the source, src/demo/.)",
                count(BAYES_ERROR_DRAWS)
            ),
            100,
            0
        )
    );
    // The families side by side on both scenarios, with a report each.
    let lending_report = args.out.join("lending/report.html");
    let payments_report = args.out.join("payments/report.html");
    let seed = args.seed.to_string();
    let runs: [Vec<String>; 2] = [
        [
            "compare",
            &lending_training.display().to_string(),
            "--target",
            "outcome",
            "--id",
            "application_id,application_month",
            "--missing",
            "impute",
            "--learning-curve",
            "--costs",
            &args.out.join("lending/costs.toml").display().to_string(),
            "--seed",
            &seed,
            "--report",
            &lending_report.display().to_string(),
        ]
        .iter()
        .map(|s| s.to_string())
        .collect(),
        [
            "compare",
            &args.out.join("payments/transactions.csv").display().to_string(),
            "--target",
            "label",
            "--id",
            "transaction_id,transaction_day",
            "--amount",
            "amount",
            "--costs",
            &args.out.join("payments/costs.toml").display().to_string(),
            "--family",
            "logistic",
            "--family",
            "naive-bayes",
            "--family",
            "lda",
            "--family",
            "qda",
            "--family",
            "qda:reg=0.2",
            "--seed",
            &seed,
            "--report",
            &payments_report.display().to_string(),
        ]
        .iter()
        .map(|s| s.to_string())
        .collect(),
    ];
    for (title, run) in [
        "lending: the four families, 5-fold cross-validation",
        "payments: the families (and a regularised QDA), 5-fold cross-validation",
    ]
    .iter()
    .zip(runs)
    {
        println!("== {title}");
        let cli = crate::cli::Cli::try_parse_from(std::iter::once("baserate".to_string()).chain(run))
            .map_err(|e| baserate::Error::Usage(e.to_string()))?;
        if let crate::cli::Command::Compare(compare) = cli.command {
            // A small --rows can leave too few events for every family: say so
            // and go on with the rest of the demo.
            if let Err(Failure::Library(e)) = crate::cli::compare::run_quietly(compare) {
                println!("comparison skipped: {}\n", wrap(&e.to_string(), 100, 2));
            }
        }
    }
    // The new portfolio's base rate, estimated from its unlabelled rows,
    // beside the withheld truth; then the portfolio rescored with it.
    let model_path = args.out.join("lending/lda.json");
    let shift_path = args.out.join("lending/shift.json");
    let new_portfolio = args.out.join("lending/new_portfolio.csv");
    let commands: [Vec<String>; 4] = [
        vec![
            "fit".into(),
            lending_training.display().to_string(),
            "--target".into(),
            "outcome".into(),
            "--id".into(),
            "application_id,application_month".into(),
            "--missing".into(),
            "impute".into(),
            "--family".into(),
            "lda".into(),
            "--calibrate".into(),
            "platt".into(),
            "--seed".into(),
            seed.clone(),
            "-o".into(),
            model_path.display().to_string(),
        ],
        vec![
            "shift".into(),
            model_path.display().to_string(),
            new_portfolio.display().to_string(),
            "--seed".into(),
            seed.clone(),
            "--json".into(),
            shift_path.display().to_string(),
        ],
        vec![
            "score".into(),
            model_path.display().to_string(),
            new_portfolio.display().to_string(),
            "--id".into(),
            "application_id".into(),
            "--prior-from".into(),
            shift_path.display().to_string(),
            "--reasons".into(),
            "3".into(),
            "--rejects".into(),
            args.out.join("lending/new_portfolio_rejects.csv").display().to_string(),
            "--summary".into(),
            args.out.join("lending/new_portfolio_summary.json").display().to_string(),
            "-o".into(),
            args.out.join("lending/new_portfolio_scores.csv").display().to_string(),
        ],
        // The same job, with the decisions, as SQL for the database.
        vec![
            "export-sql".into(),
            model_path.display().to_string(),
            "--table".into(),
            "new_portfolio".into(),
            "--id".into(),
            "application_id".into(),
            "--prior-from".into(),
            shift_path.display().to_string(),
            "--costs".into(),
            args.out.join("lending/costs.toml").display().to_string(),
            "-o".into(),
            args.out.join("lending/new_portfolio_scoring.sql").display().to_string(),
        ],
    ];
    // A stale estimate from an earlier run must not be shown.
    let _ = std::fs::remove_file(&shift_path);
    for command in commands {
        let cli = crate::cli::Cli::try_parse_from(std::iter::once("baserate".to_string()).chain(command))
            .map_err(|e| baserate::Error::Usage(e.to_string()))?;
        let outcome = match cli.command {
            crate::cli::Command::Fit(a) => crate::cli::fit::run_quietly(a),
            crate::cli::Command::Shift(a) => crate::cli::shift::run_quietly(a),
            crate::cli::Command::Score(a) => crate::cli::score::run(a),
            crate::cli::Command::ExportSql(a) => crate::cli::export_sql::run(a),
            _ => Ok(ExitCode::SUCCESS),
        };
        if let Err(Failure::Library(e)) = outcome {
            println!("base-rate step skipped: {}\n", wrap(&e.to_string(), 100, 2));
            break;
        }
    }
    if let Ok(text) = std::fs::read_to_string(&shift_path) {
        let answers = std::fs::read_to_string(args.out.join("lending/new_portfolio_answers.csv")).unwrap_or_default();
        let rows = answers.lines().count().saturating_sub(1).max(1);
        let defaults = answers.lines().filter(|l| l.ends_with(",defaulted")).count();
        let verdict = serde_json::from_str::<serde_json::Value>(&text)
            .ok()
            .and_then(|v| v["verdict"].as_str().map(String::from))
            .unwrap_or_default();
        println!(
            "== lending: the new portfolio's base rate\n{}\nthe withheld answer: {} of {} defaulted ({}); the portfolio was rescored with the EM estimate\n",
            wrap(&verdict, 100, 0),
            defaults,
            rows,
            percent(defaults as f64 / rows as f64)
        );
    }
    println!(
        "reports: {} and {}\n\nNext: baserate describe {} --target outcome --id application_id,application_month --missing impute\n",
        lending_report.display(),
        payments_report.display(),
        lending_training.display()
    );
    println!("{}", wrap(CAUTION, 100, 0));
    Ok(ExitCode::SUCCESS)
}
