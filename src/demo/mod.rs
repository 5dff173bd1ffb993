//! The invented demo scenarios and their seeded generators.
//!
//! - [`lending`]: applications to an invented lender, a training year at a
//!   10% default rate and an unlabelled new portfolio at 3%;
//! - [`payments`]: card-not-present transactions of an invented merchant
//!   network at a 0.5% fraud rate, with an amount for row-dependent costs.
//!
//! Every random step draws from [`rng::Rng`] seeded from the one demo seed,
//! so the same seed gives the same bytes on every run and every machine of
//! the same platform. `demo-data/` in the repository holds the output for
//! [`DEFAULT_SEED`]; a test keeps the two equal.

pub mod gaussian;
pub mod lending;
pub mod payments;
pub use crate::rng;

/// The seed of the committed demo data.
pub const DEFAULT_SEED: u64 = 20_261_201;

/// The seed of one generator stream of a scenario, derived from the demo
/// seed so that streams are independent of each other.
pub fn stream_seed(seed: u64, stream: u64) -> u64 {
    rng::Rng::stream_seed(seed, stream)
}

/// Monte-Carlo estimate of a scenario's Bayes-optimal error rate and its
/// standard error: the mean over `draws` rows of min(p, 1 − p), p the true
/// posterior of the event class. `log_likelihood_ratio` draws one row (label
/// first, at the given base rate) and returns log p(x | event) − log p(x |
/// other) under the true model.
pub fn bayes_error_by_simulation(
    base_rate: f64,
    draws: usize,
    seed: u64,
    mut log_likelihood_ratio: impl FnMut(&mut rng::Rng) -> f64,
) -> (f64, f64) {
    let mut rng = rng::Rng::new(seed);
    let prior_log_odds = (base_rate / (1.0 - base_rate)).ln();
    let (mut sum, mut square_sum) = (0.0, 0.0);
    for _ in 0..draws {
        let p = 1.0 / (1.0 + (-(prior_log_odds + log_likelihood_ratio(&mut rng))).exp());
        let error = p.min(1.0 - p);
        sum += error;
        square_sum += error * error;
    }
    let n = draws as f64;
    let mean = sum / n;
    (mean, ((square_sum / n - mean * mean).max(0.0) / n).sqrt())
}

/// One generated file: its path relative to the demo folder and its text.
#[derive(Debug, Clone)]
pub struct DemoFile {
    /// Relative path, e.g. `lending/train.csv`.
    pub path: &'static str,
    /// The CSV text.
    pub contents: String,
    /// What the file is, for people.
    pub description: &'static str,
}

/// How many rows each scenario gets.
#[derive(Debug, Clone, Copy)]
pub struct DemoSize {
    /// Lending training rows.
    pub lending_training: usize,
    /// Lending new-portfolio rows.
    pub lending_new: usize,
    /// Payments rows.
    pub payments: usize,
}

impl DemoSize {
    /// The committed size: 5,000 + 5,000 lending rows, 50,000 payments rows.
    pub fn standard() -> Self {
        DemoSize { lending_training: 5_000, lending_new: 5_000, payments: 50_000 }
    }

    /// Every file gets `rows` rows (for benchmarks).
    pub fn uniform(rows: usize) -> Self {
        DemoSize { lending_training: rows, lending_new: rows, payments: rows }
    }
}

/// Generates every demo file for a seed and size.
pub fn generate(seed: u64, size: DemoSize) -> Vec<DemoFile> {
    let (lending_files, payments_file) = rayon::join(
        || lending::Lending { seed, training_rows: size.lending_training, new_rows: size.lending_new }.generate(),
        || payments::Payments { seed, rows: size.payments }.generate(),
    );
    vec![
        DemoFile {
            path: "lending/train.csv",
            contents: lending_files.training,
            description: "Quillmere Lending applications, 2025, with outcomes (target `outcome`)",
        },
        DemoFile {
            path: "lending/new_portfolio.csv",
            contents: lending_files.new_portfolio,
            description: "applications from the new channel, 2026, outcomes withheld",
        },
        DemoFile {
            path: "lending/new_portfolio_answers.csv",
            contents: lending_files.answers,
            description: "the withheld outcomes, to check base-rate estimates against",
        },
        DemoFile {
            path: "lending/costs.toml",
            contents: LENDING_COSTS.to_string(),
            description: "approve / refer / decline: what each action costs for each outcome",
        },
        DemoFile {
            path: "payments/transactions.csv",
            contents: payments_file,
            description: "Tarnwick Pay card-not-present transactions, September 2026 (target `label`)",
        },
        DemoFile {
            path: "payments/costs.toml",
            contents: PAYMENTS_COSTS.to_string(),
            description: "pass / step up / block: what each action costs for each outcome",
        },
    ]
}

/// The lending scenario's loss specification (invented figures).
pub const LENDING_COSTS: &str = r#"# Quillmere Lending: approve, refer to an underwriter, or decline.
# Costs are positive, benefits negative; "repaid" and "defaulted" are the target's values.
[actions.approve]
repaid = 0
defaulted = { fixed = 25, rate = 0.6, column = "amount_requested" }   # loss given default x amount

[actions.refer]
repaid = 40                       # an underwriter's time
defaulted = 40
capacity = 300                    # underwriters' hours per run

[actions.decline]
repaid = { rate = 0.08, column = "amount_requested" }    # margin forgone
defaulted = 0
"#;

/// The payments scenario's loss specification (invented figures).
pub const PAYMENTS_COSTS: &str = r#"# Tarnwick Pay: pass, step up authentication, or block.
[actions.pass]
genuine = 0
fraud = { rate = 1.0, column = "amount" }                  # the amount is lost

[actions.step_up]
genuine = 1.5                                              # friction, some abandonment
fraud = { fixed = 1.5, rate = 0.15, column = "amount" }    # most fraud fails the challenge

[actions.block]
genuine = { fixed = 5, rate = 0.03, column = "amount" }    # a lost sale and an annoyed customer
fraud = 0
"#;
