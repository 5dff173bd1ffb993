//! What the demo says of its two invented scenarios, for people: sizes,
//! event rates, and each true model's Bayes-optimal error rate (the floor
//! no fitted model can beat).

use crate::data::Dataset;
use crate::format::{count, percent};

/// Monte-Carlo draws behind each Bayes-error figure of [`scenario_summary`].
const BAYES_ERROR_DRAWS: usize = 400_000;

/// What the demo says of its two scenarios, one paragraph each, and how
/// the Bayes errors were found: sizes, event rates, and the error rate of
/// each true model (the floor no fitted model can beat).
pub fn scenario_summary(training: &Dataset, transactions: &Dataset, seed: u64) -> (Vec<String>, String) {
    let (lending_error, lending_se) =
        crate::demo::lending::bayes_error(crate::demo::lending::TRAINING_DEFAULT_RATE, BAYES_ERROR_DRAWS, seed);
    let (new_error, new_se) =
        crate::demo::lending::bayes_error(crate::demo::lending::NEW_PORTFOLIO_DEFAULT_RATE, BAYES_ERROR_DRAWS, seed);
    let (payments_error, payments_se) =
        crate::demo::payments::bayes_error(crate::demo::payments::FRAUD_RATE, BAYES_ERROR_DRAWS, seed);

    let share = |d: &Dataset| {
        let t = &d.schema.target;
        t.class_mix()[t.positive_index()]
    };
    let events = |d: &Dataset| count(d.schema.target.counts[d.schema.target.positive_index()]);
    let lending_text = format!(
        "lending: {} training applications, default rate {} ({} defaults); the new portfolio's rate \
         is withheld (the answers file holds it). Bayes-optimal error of the true model: {:.4} ± {:.4} \
         at the {} training rate, {:.4} ± {:.4} at the new portfolio's {}.",
        count(training.rows()),
        percent(share(training)),
        events(training),
        lending_error,
        lending_se,
        percent(crate::demo::lending::TRAINING_DEFAULT_RATE),
        new_error,
        new_se,
        percent(crate::demo::lending::NEW_PORTFOLIO_DEFAULT_RATE),
    );
    let payments_text = format!(
        "payments: {} transactions, fraud rate {} ({} frauds). Bayes-optimal error of the true model: \
         {:.5} ± {:.5}, against {:.5} for calling every transaction genuine: at this base rate the \
         error rate hardly tells models apart; ranking, calibration and cost do.",
        count(transactions.rows()),
        percent(share(transactions)),
        events(transactions),
        payments_error,
        payments_se,
        crate::demo::payments::FRAUD_RATE,
    );
    let method = format!(
        "(Bayes errors by Monte Carlo over {} draws of each true model, ± one standard error; \
         the generating models are documented in the source, src/demo/.)",
        count(BAYES_ERROR_DRAWS)
    );
    (vec![lending_text, payments_text], method)
}
