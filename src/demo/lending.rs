//! The *lending* scenario: loan applications to Quillmere Lending, an
//! invented consumer lender.
//!
//! ## The true generating model
//!
//! Each application's outcome is drawn first: `defaulted` with probability
//! π (10% for the training year 2025, 3% for the new portfolio), otherwise
//! `repaid`. Given the outcome, the features are drawn from fixed
//! class-conditional distributions, the same in both files, so the new
//! portfolio differs from the training data by its class mix alone (a pure
//! label shift, the assumption base-rate estimation rests on).
//!
//! - Five latent normals z with a correlation matrix shared by both classes
//!   and class-specific means ([`LATENT_MEANS`], [`LATENT_SD`],
//!   [`LATENT_CORRELATION`]) become the numeric columns: `income` = e^z₀
//!   rounded to 100, `debt_to_income` = 0.8·σ(z₁), `revolving_utilisation` =
//!   σ(z₂) (σ the logistic function), `months_at_address` = ⌊e^z₃⌋,
//!   `amount_requested` = e^z₄ rounded to 50.
//! - `channel`, `housing` and `purpose` are drawn independently of z and of
//!   each other given the outcome ([`CHANNEL`], [`HOUSING`], [`PURPOSE`]).
//! - `months_at_address` is missing completely at random in 1% of rows and
//!   `housing` in 0.5%.
//!
//! On the latent scale the log-likelihood ratio is linear in z plus one
//! term per categorical column, so the Bayes-optimal rule is known exactly;
//! its error rate is estimated by Monte Carlo in [`bayes_error`] (the
//! rounding of the published columns is ignored there).

use std::fmt::Write;

use crate::demo::gaussian::Gaussian;
use crate::rng::Rng;

/// Default rate of the training year.
pub const TRAINING_DEFAULT_RATE: f64 = 0.10;
/// Default rate of the new portfolio (withheld from the analyst).
pub const NEW_PORTFOLIO_DEFAULT_RATE: f64 = 0.03;

/// Latent means: row 0 repaid, row 1 defaulted; columns log income,
/// logit(debt-to-income / 0.8), logit(utilisation), log months at address,
/// log amount.
pub const LATENT_MEANS: [[f64; 5]; 2] = [[10.9, -0.9, -0.6, 3.4, 9.2], [10.6, -0.4, 0.5, 2.9, 9.35]];
/// Latent standard deviations (both classes).
pub const LATENT_SD: [f64; 5] = [0.45, 0.8, 1.1, 0.9, 0.6];
/// Latent correlations (both classes).
pub const LATENT_CORRELATION: [[f64; 5]; 5] = [
    [1.0, -0.30, -0.15, 0.20, 0.45],
    [-0.30, 1.0, 0.35, -0.05, 0.25],
    [-0.15, 0.35, 1.0, -0.10, 0.10],
    [0.20, -0.05, -0.10, 1.0, 0.05],
    [0.45, 0.25, 0.10, 0.05, 1.0],
];
/// `channel` levels and their probabilities given repaid / defaulted.
pub const CHANNEL: (&[&str], [&[f64]; 2]) =
    (&["branch", "broker", "online"], [&[0.35, 0.25, 0.40], &[0.25, 0.40, 0.35]]);
/// `housing` levels and their probabilities given repaid / defaulted.
pub const HOUSING: (&[&str], [&[f64]; 2]) = (&["mortgage", "own", "rent"], [&[0.45, 0.25, 0.30], &[0.35, 0.15, 0.50]]);
/// `purpose` levels and their probabilities given repaid / defaulted.
pub const PURPOSE: (&[&str], [&[f64]; 2]) = (
    &["car", "debt_consolidation", "home_improvement", "other"],
    [&[0.30, 0.35, 0.20, 0.15], &[0.20, 0.50, 0.10, 0.20]],
);
const MONTHS_MISSING_RATE: f64 = 0.01;
const HOUSING_MISSING_RATE: f64 = 0.005;

/// The scenario's sizes and seed.
#[derive(Debug, Clone, Copy)]
pub struct Lending {
    /// Seed of every random step.
    pub seed: u64,
    /// Rows of the training file.
    pub training_rows: usize,
    /// Rows of the new-portfolio file.
    pub new_rows: usize,
}

/// The scenario's three files, as CSV text.
#[derive(Debug, Clone)]
pub struct LendingFiles {
    /// Labelled applications from 2025 (`outcome` is the target).
    pub training: String,
    /// Unlabelled applications from the new channel.
    pub new_portfolio: String,
    /// The withheld outcomes of the new portfolio.
    pub answers: String,
}

struct Application {
    latent: Vec<f64>,
    categories: [usize; 3],
    defaulted: bool,
}

fn class_models() -> [Gaussian; 2] {
    let correlation: Vec<&[f64]> = LATENT_CORRELATION.iter().map(|r| &r[..]).collect();
    // The constants above are positive definite (checked by a test), so
    // both factors exist.
    let make = |k: usize| Gaussian::new(&LATENT_MEANS[k], &LATENT_SD, &correlation);
    match (make(0), make(1)) {
        (Some(a), Some(b)) => [a, b],
        _ => unreachable!("the lending correlation matrix is positive definite"),
    }
}

fn draw(rng: &mut Rng, models: &[Gaussian; 2], default_rate: f64) -> Application {
    let defaulted = rng.bernoulli(default_rate);
    let k = usize::from(defaulted);
    let latent = models[k].sample(rng);
    let categories = [rng.choose(CHANNEL.1[k]), rng.choose(HOUSING.1[k]), rng.choose(PURPOSE.1[k])];
    Application { latent, categories, defaulted }
}

fn logistic(z: f64) -> f64 {
    1.0 / (1.0 + (-z).exp())
}

/// log p(x | defaulted) − log p(x | repaid) under the true model, on the
/// latent scale.
fn log_likelihood_ratio(models: &[Gaussian; 2], a: &Application) -> f64 {
    let mut llr = models[1].log_density(&a.latent) - models[0].log_density(&a.latent);
    for (table, &level) in [CHANNEL.1, HOUSING.1, PURPOSE.1].iter().zip(&a.categories) {
        llr += (table[1][level] / table[0][level]).ln();
    }
    llr
}

/// Monte-Carlo estimate of the Bayes-optimal error rate at the given
/// default rate: the mean over draws of min(p(defaulted | x), p(repaid | x))
/// under the true model, with its standard error.
pub fn bayes_error(default_rate: f64, draws: usize, seed: u64) -> (f64, f64) {
    let models = class_models();
    crate::demo::bayes_error_by_simulation(default_rate, draws, seed, |rng| {
        let a = draw(rng, &models, default_rate);
        log_likelihood_ratio(&models, &a)
    })
}

const HEADER: &str = "application_id,application_month,channel,housing,purpose,income,debt_to_income,revolving_utilisation,months_at_address,amount_requested";

fn write_row(out: &mut String, rng: &mut Rng, id: &str, month: &str, a: &Application) {
    let housing = if rng.bernoulli(HOUSING_MISSING_RATE) { "" } else { HOUSING.0[a.categories[1]] };
    let months =
        if rng.bernoulli(MONTHS_MISSING_RATE) { String::new() } else { format!("{}", a.latent[3].exp().floor()) };
    let z = &a.latent;
    let _ = write!(
        out,
        "{id},{month},{},{housing},{},{:.0},{:.3},{:.3},{months},{:.0}",
        CHANNEL.0[a.categories[0]],
        PURPOSE.0[a.categories[2]],
        (z[0].exp() / 100.0).round() * 100.0,
        0.8 * logistic(z[1]),
        logistic(z[2]),
        (z[4].exp() / 50.0).round() * 50.0,
    );
}

impl Lending {
    /// The committed demo size with the given seed.
    pub fn standard(seed: u64) -> Self {
        Lending { seed, training_rows: 5_000, new_rows: 5_000 }
    }

    /// Generates the three files.
    pub fn generate(&self) -> LendingFiles {
        let models = class_models();
        let mut training = format!("{HEADER},outcome\n");
        let mut rng = Rng::new(crate::demo::stream_seed(self.seed, 1));
        for i in 0..self.training_rows {
            let a = draw(&mut rng, &models, TRAINING_DEFAULT_RATE);
            let month = format!("2025-{:02}", 1 + (rng.uniform() * 12.0) as u32);
            write_row(&mut training, &mut rng, &format!("QL25-{:06}", i + 1), &month, &a);
            training.push_str(if a.defaulted { ",defaulted\n" } else { ",repaid\n" });
        }
        let mut new_portfolio = format!("{HEADER}\n");
        let mut answers = String::from("application_id,outcome\n");
        let mut rng = Rng::new(crate::demo::stream_seed(self.seed, 2));
        for i in 0..self.new_rows {
            let a = draw(&mut rng, &models, NEW_PORTFOLIO_DEFAULT_RATE);
            let month = format!("2026-{:02}", 2 + (rng.uniform() * 3.0) as u32);
            let id = format!("QL26-{:06}", i + 1);
            write_row(&mut new_portfolio, &mut rng, &id, &month, &a);
            new_portfolio.push('\n');
            let _ = writeln!(answers, "{id},{}", if a.defaulted { "defaulted" } else { "repaid" });
        }
        LendingFiles { training, new_portfolio, answers }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_correlation_is_positive_definite() {
        let correlation: Vec<&[f64]> = LATENT_CORRELATION.iter().map(|r| &r[..]).collect();
        assert!(Gaussian::new(&LATENT_MEANS[0], &LATENT_SD, &correlation).is_some());
        for table in [CHANNEL.1, HOUSING.1, PURPOSE.1] {
            for row in table {
                approx::assert_relative_eq!(row.iter().sum::<f64>(), 1.0, max_relative = 1e-12);
            }
        }
    }

    #[test]
    fn bayes_error_is_below_the_base_rate() {
        let (error, se) = bayes_error(TRAINING_DEFAULT_RATE, 50_000, 3);
        assert!(error < TRAINING_DEFAULT_RATE && error > 0.0 && se < 0.002, "{error} {se}");
    }
}
