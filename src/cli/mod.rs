//! The command line: one file per command, each with an `Args` struct whose
//! field docs are the `--help` text, and a `run` that calls the library.
//!
//! This is the only part of the crate that knows about terminals, files on
//! disk and exit codes (see the command-line contract: 0 success, 1 data or
//! model error, 2 usage error, 3 limit breached, 4 internal error).

use std::io::Write;
use std::process::ExitCode;

use baserate::error::Setting;
use clap::{Parser, Subcommand};

pub mod compare;
pub mod data_args;
pub mod demo;
pub mod describe;
pub mod export_sql;
pub mod family_args;
pub mod fit;
pub mod inspect;
pub mod judge;
pub mod memory_arg;
pub mod model_arg;
pub mod output;
pub mod progress;
pub mod score;
pub mod shift;
pub mod stats_sql;

/// Bayes-rule classifiers for credit and fraud work, with base-rate
/// correction and expected-cost decisions. Decision support, not a decision.
#[derive(Debug, Parser)]
#[command(name = "baserate", version, about, long_about = None)]
pub struct Cli {
    /// The command to run.
    #[command(subcommand)]
    pub command: Command,
}

/// The commands. (Each holds its parsed arguments; one lives per run, so
/// their sizes do not matter.)
#[derive(Debug, Subcommand)]
#[allow(clippy::large_enum_variant)]
pub enum Command {
    /// Generate the invented demo scenarios and run the job on them.
    Demo(demo::Args),
    /// Read a file as a training file would be read and show its schema.
    Describe(describe::Args),
    /// Fit families side by side on the same splits and evaluate them out of sample.
    Compare(compare::Args),
    /// Evaluate scores made elsewhere (columns of a file) the same way.
    Judge(judge::Args),
    /// Fit one family and write a model file.
    Fit(fit::Args),
    /// Show what a model file holds.
    Inspect(inspect::Args),
    /// Posteriors for every row of a file.
    Score(score::Args),
    /// Estimate the class mix (base rate) of an unlabeled new portfolio.
    Shift(shift::Args),
    /// Write the scoring job as one SQL statement for the engine where the data lives.
    ExportSql(export_sql::Args),
    /// Write the aggregate query that fits lda, qda or naive-bayes inside the engine.
    StatsSql(stats_sql::Args),
}

/// What a command failed with: a library error, or an internal one.
#[derive(Debug)]
pub enum Failure {
    /// A data, model or usage error, with its own exit code.
    Library(baserate::Error),
    /// Writing to stdout failed because the reader went away: not an error.
    BrokenPipe,
}

impl From<baserate::Error> for Failure {
    fn from(e: baserate::Error) -> Self {
        Failure::Library(e)
    }
}

impl From<std::io::Error> for Failure {
    fn from(e: std::io::Error) -> Self {
        if e.kind() == std::io::ErrorKind::BrokenPipe {
            Failure::BrokenPipe
        } else {
            Failure::Library(baserate::Error::io("<stdout>", e))
        }
    }
}

/// The command line's name for a library setting: its flag, with the
/// value after a space (`--missing impute`). Library messages hold settings,
/// not flags; this is where they become flags.
pub fn flag(setting: Setting, value: Option<&str>) -> String {
    let flag = match setting {
        Setting::Target => "--target",
        Setting::AcceptEdited => "--accept-edited-model",
        Setting::MemoryLimit => "--memory-limit",
        Setting::RefuseAliased => "--refuse-aliased",
        Setting::Categories => "--category-model",
        Setting::Bootstrap => "--bootstrap",
        Setting::Threads => "--threads",
        Setting::Delimiter => "--delimiter",
        Setting::Ids => "--id",
        Setting::Weight => "--weight",
        Setting::Exclude => "--exclude",
        Setting::Categorical => "--categorical",
        Setting::Numeric => "--numeric",
        Setting::NaTokens => "--na",
        Setting::Missing => "--missing",
        Setting::Positive => "--positive",
        Setting::Keep => "--keep",
        Setting::Unseen => "--unseen",
        Setting::Rejects => "--rejects",
        Setting::Scores => "-o",
        Setting::Output => "-o",
        Setting::Json => "--json",
        Setting::Report => "--report",
        Setting::Predictions => "--predictions",
        Setting::Summary => "--summary",
        Setting::Reasons => "--reasons",
        Setting::L2 => "--newton-ridge",
        Setting::ClassWeight => "--reweight",
        Setting::MaxIterations => "--max-iterations",
        Setting::Tolerance => "--tolerance",
        Setting::Penalty => "--penalty",
        Setting::Mixing => "--mixing",
        Setting::Lambda => "--lambda",
        Setting::PathLength => "--path-length",
        Setting::LambdaFloor => "--lambda-floor",
        Setting::CvFolds => "--cv-folds",
        Setting::Smoothing => "--smoothing",
        Setting::VarianceFloor => "--variance-floor",
        Setting::Shrinkage => "--diagonal-weight",
        Setting::Reg => "--pooled-weight",
        Setting::FromAggregates => "--from-stats",
        Setting::Family => "--family",
        Setting::Folds => "--folds",
        Setting::Repeats => "--repeats",
        Setting::TestFraction => "--test-fraction",
        Setting::TestFrom => "--test-from",
        Setting::Gap => "--gap",
        Setting::BaseRate => "--base-rate",
        Setting::Prior => "--prior",
        Setting::Table => "--table",
        Setting::ScoreColumns => "--score",
        Setting::ScoreKind => "--score-type",
        Setting::TrainPrior => "--train-prior",
        Setting::Amount => "--amount",
        Setting::By => "--by",
        Setting::SplitBy => "--split-by",
        Setting::Holdout => "--holdout",
        // The enum is non-exhaustive: a setting added later shows its parameter name.
        other => return baserate::error::parameter_names(other, value),
    };
    match value {
        Some(v) => format!("{flag} {v}"),
        None => flag.to_string(),
    }
}

/// An error as the command line states it: settings named by their flags.
pub fn error_text(error: &baserate::Error) -> String {
    error.describe(&flag)
}

/// Runs a parsed command line.
pub fn run(cli: Cli) -> Result<ExitCode, Failure> {
    match cli.command {
        Command::Demo(args) => demo::run(args),
        Command::Describe(args) => describe::run(args),
        Command::Compare(args) => compare::run(args),
        Command::Judge(args) => judge::run(args),
        Command::Fit(args) => fit::run(args),
        Command::Inspect(args) => inspect::run(args),
        Command::Score(args) => score::run(args),
        Command::Shift(args) => shift::run(args),
        Command::ExportSql(args) => export_sql::run(args),
        Command::StatsSql(args) => stats_sql::run(args),
    }
}

/// The binary's whole life: parse, run, report, exit.
pub fn main() -> ExitCode {
    let cli = match Cli::try_parse() {
        Ok(cli) => cli,
        Err(e) => {
            let _ = e.print();
            return ExitCode::from(if e.use_stderr() { 2 } else { 0 });
        }
    };
    // An interrupted run removes its temporary files and output locks.
    baserate::io::signals::remove_on_signal();
    // A panic is a bug: say so plainly and exit with 4, never a backtrace.
    std::panic::set_hook(Box::new(|info| {
        let _ = writeln!(
            std::io::stderr(),
            "internal error: {info}. This is a bug in baserate, not in your data; please report it with the command you ran."
        );
    }));
    let outcome = match std::panic::catch_unwind(|| run(cli)) {
        Ok(outcome) => outcome,
        Err(_) => return ExitCode::from(4),
    };
    match outcome {
        Ok(code) => code,
        Err(Failure::BrokenPipe) => ExitCode::SUCCESS,
        Err(Failure::Library(error)) => {
            let _ = writeln!(std::io::stderr(), "error: {}", error_text(&error));
            ExitCode::from(error.exit_code())
        }
    }
}
