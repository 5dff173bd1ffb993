//! `baserate demo [--out DIR] [--seed N] [--rows N]`
//!
//! Generates the two invented scenarios (lending and payments) into DIR and
//! runs the job on them end to end. The same seed gives the same bytes.
//! Holds each generated file in memory while writing it.

use std::path::PathBuf;
use std::process::ExitCode;

use crate::cli::output::{create_dir, write_atomic};
use crate::cli::Failure;
use baserate::apply::in_memory::{estimate_portfolio_shift, ScoringRequest};
use baserate::apply::UnseenPolicy;
use baserate::batch::{Outputs, ScoreJob};
use baserate::data::{Dataset, MissingPolicy, ReadOptions};
use baserate::demo::{DemoSize, DEFAULT_SEED};
use baserate::evaluate::compare::{compare_families, Candidate, ComparisonRequest, SplitChoice, StudyOptions};
use baserate::export::scoring::{scoring_sql, ScoringRequest as SqlRequest};
use baserate::export::sql::Dialect as SqlDialect;
use baserate::format::{count, percent};
use baserate::model::discriminant::QdaParams;
use baserate::model::{Family, FamilyParams};
use baserate::prior::shift::ShiftOptions;
use baserate::report::study::{compared_data_description, study_html, study_screen};
use baserate::report::table::{Align, Table};
use baserate::report::{wrap, CAUTION};
use baserate::train::{train, CalibrationMethod, TrainRequest, TrainingSource};
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
    let (lending, lending_notices, lending_sha256) = Dataset::read_with_hash(&lending_training, &options)?;
    let mut options = ReadOptions::new("label");
    options.ids = vec!["transaction_id".into(), "transaction_day".into()];
    let payments_path = args.out.join("payments/transactions.csv");
    let (payments_data, payments_notices) = Dataset::read(&payments_path, &options)?;

    let (scenarios, method) = baserate::report::demo::scenario_summary(&lending, &payments_data, args.seed);
    for paragraph in scenarios {
        println!("{}\n", wrap(&paragraph, 100, 2));
    }
    println!("{}\n", wrap(&method, 100, 0));
    // The families side by side on both scenarios, with a report each.
    let lending_report = args.out.join("lending/report.html");
    let payments_report = args.out.join("payments/report.html");
    let families = || -> Vec<Candidate> {
        Family::ALL.into_iter().map(|f| Candidate::new(f.name(), FamilyParams::defaults(f))).collect()
    };
    let mut payments_candidates = families();
    payments_candidates.push(Candidate::new(
        "qda:pooled-weight=0.2",
        FamilyParams::Qda(QdaParams { reg: 0.2, ..QdaParams::default() }),
    ));
    let studies = [
        (
            "lending: the four families, 5-fold cross-validation",
            &lending_training,
            &lending,
            &lending_notices,
            ComparisonRequest {
                candidates: families(),
                split: SplitChoice::KFold { folds: 5, repeats: 1 },
                options: StudyOptions {
                    seed: args.seed,
                    costs: Some(args.out.join("lending/costs.toml")),
                    ..StudyOptions::default()
                },
                learning_curve: true,
                penalised_paths: true,
                predictions: false,
                memory_limit: None,
                progress: baserate::progress::Progress::silent(),
            },
            &lending_report,
        ),
        (
            "payments: the families (and a regularised QDA), 5-fold cross-validation",
            &payments_path,
            &payments_data,
            &payments_notices,
            ComparisonRequest {
                candidates: payments_candidates,
                split: SplitChoice::KFold { folds: 5, repeats: 1 },
                options: StudyOptions {
                    seed: args.seed,
                    amount: Some("amount".into()),
                    costs: Some(args.out.join("payments/costs.toml")),
                    ..StudyOptions::default()
                },
                learning_curve: false,
                penalised_paths: true,
                predictions: false,
                memory_limit: None,
                progress: baserate::progress::Progress::silent(),
            },
            &payments_report,
        ),
    ];
    for (title, path, dataset, notices, request, report) in studies {
        println!("== {title}");
        crate::cli::output::print_notices(notices);
        let description = compared_data_description(&path.display().to_string(), dataset);
        // A small --rows can leave too few events for every family: say so
        // and go on with the rest of the demo.
        let header = baserate::report::header::ReportHeader::new(
            &std::env::args().collect::<Vec<_>>(),
            &[Some(path.as_path()), request.options.costs.as_deref()],
            request.settings(),
            notices,
            &crate::cli::flag,
        )?;
        match compare_families(dataset.clone(), &request) {
            Ok(study) => {
                write_atomic(report, study_html(&study, &crate::cli::flag, &description, &header).as_bytes())?;
                print!("{}", study_screen(&study, &crate::cli::flag, false));
            }
            Err(e) => println!("comparison skipped: {}\n", wrap(&crate::cli::error_text(&e), 100, 2)),
        }
    }
    // The new portfolio's base rate, estimated from its unlabelled rows,
    // beside the withheld truth; then the portfolio rescored with it.
    let model_path = args.out.join("lending/lda.json");
    let shift_path = args.out.join("lending/shift.json");
    // A stale estimate from an earlier run must not be shown.
    let _ = std::fs::remove_file(&shift_path);
    // The training file's notes were printed with its comparison above.
    let source = TrainingSource { input_path: lending_training.display().to_string(), input_sha256: lending_sha256 };
    if let Err(e) = base_rate_steps(&args, &lending, source, &model_path, &shift_path) {
        println!("base-rate step skipped: {}\n", wrap(&crate::cli::error_text(&e), 100, 2));
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

/// The lending scenario's deployment: fit LDA with Platt calibration,
/// estimate the new portfolio's base rate, rescore it at that rate (with
/// reasons, rejects and a summary), and write the same job as SQL.
fn base_rate_steps(
    args: &Args,
    lending: &Dataset,
    source: TrainingSource,
    model_path: &std::path::Path,
    shift_path: &std::path::Path,
) -> baserate::Result<()> {
    let new_portfolio = args.out.join("lending/new_portfolio.csv");
    let mut request = TrainRequest::new(FamilyParams::defaults(Family::Lda));
    request.calibration = Some(CalibrationMethod::Platt);
    request.seed = args.seed;
    request.source = source;
    train(lending, &request)?.save(model_path)?;
    // Scored as written, checksum and all.
    let (file, integrity) = baserate::train::file::ModelFile::open(model_path, false)?;

    let shift_options = ShiftOptions { bootstrap: 200, seed: args.seed, ..ShiftOptions::default() };
    let (estimate, _) = estimate_portfolio_shift(&file, &new_portfolio, &ScoringRequest::default(), &shift_options)?;
    let text = serde_json::to_string_pretty(&estimate).map_err(|e| baserate::Error::Usage(e.to_string()))?;
    write_atomic(shift_path, format!("{text}\n").as_bytes())?;
    let shift_spec = shift_path.display().to_string();
    let prior = baserate::prior::shift::prior_from_shift_file(&shift_spec, &file.classes)?;

    // The decisions go beside the posteriors, as in the SQL job below.
    let costs = file.read_costs(&args.out.join("lending/costs.toml"))?;
    let scores_path = args.out.join("lending/new_portfolio_scores.csv");
    let job = ScoreJob {
        data: new_portfolio,
        prior: prior.clone(),
        costs: Some(costs.clone()),
        ids: vec!["application_id".into()],
        keep: Vec::new(),
        delimiter: b',',
        na_tokens: None,
        unseen: UnseenPolicy::Error,
        missing: None,
        reasons: 3,
        threads: 0,
        chunk_bytes: baserate::batch::DEFAULT_CHUNK_BYTES,
        max_record_bytes: baserate::records::DEFAULT_MAX_RECORD_BYTES,
        model_integrity: integrity,
    };
    let outputs = Outputs {
        scores: scores_path.clone(),
        rejects: Some(args.out.join("lending/new_portfolio_rejects.csv")),
        summary: Some(args.out.join("lending/new_portfolio_summary.json")),
    };
    let summary = baserate::batch::run(&file, &job, &outputs, &|_, _| {})?;
    eprint!(
        "{}",
        baserate::report::score::render_score_summary(&file, &job, &summary, &scores_path.display().to_string())
    );

    // The same job, with the decisions, as SQL for the database.
    let sql_path = args.out.join("lending/new_portfolio_scoring.sql");
    let sql_request = SqlRequest {
        table: "new_portfolio".into(),
        dialect: SqlDialect::Ansi,
        prior,
        costs: Some(costs),
        ids: vec!["application_id".into()],
        missing: None,
        unseen: UnseenPolicy::Error,
        na_tokens: None,
        integrity,
    };
    write_atomic(&sql_path, scoring_sql(&file, &sql_request)?.as_bytes())?;
    eprintln!("{}", baserate::report::score::sql_written(&file, &sql_request, &sql_path.display().to_string()));
    Ok(())
}
