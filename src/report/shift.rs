//! The `shift` screen: the estimates of the new class mix, the test of an
//! unchanged mix, the verdict and the caution.

use crate::format::percent;
use crate::prior::shift::{p_value_text, ShiftEstimate};
use crate::prior::EM_TOLERANCE;
use crate::report::{wrap, CAUTION};

/// What the screen says about the method's assumptions.
const ASSUMPTIONS: &str = "EM starts from the class mix the posteriors are calibrated to (the model's training class mix, or its fit-time prior for the class-conditional families); both estimates assume the new portfolio differs only in its class mix and that the posteriors are calibrated (fit with --calibrate to make sure).";

/// The screen for `estimate`, whose intervals took `bootstrap` draws from
/// `seed`.
pub fn render_shift(estimate: &ShiftEstimate, bootstrap: usize, seed: u64) -> String {
    let mut out = String::new();
    let iterations = estimate.estimate("em").and_then(|e| e.iterations).unwrap_or(0);
    out.push_str(&format!(
        "{} new rows; EM took {} iterations (tolerance {EM_TOLERANCE:e}){}\n",
        estimate.rows,
        iterations,
        if estimate.em_converged { "" } else { ", NOT converged" }
    ));
    for e in &estimate.estimates {
        let share = e.prior.get(&estimate.positive).copied().unwrap_or(f64::NAN);
        let ci = match (e.ci_low, e.ci_high) {
            (Some(a), Some(b)) => {
                format!(" (95% interval {}–{}, {bootstrap} bootstrap draws, seed {seed})", percent(a), percent(b))
            }
            _ => String::new(),
        };
        out.push_str(&format!("  {:<20} {}{ci}\n", e.method, percent(share)));
    }
    let test = &estimate.unchanged_test;
    out.push_str(&format!(
        "likelihood-ratio test of an unchanged class mix: {:.2} on {} df, {}\n",
        test.statistic,
        test.df,
        p_value_text(test.p_value)
    ));
    out.push_str(&format!("\n{}\n\n", wrap(&estimate.verdict, 100, 0)));
    out.push_str(&format!("{}\n", wrap(ASSUMPTIONS, 100, 0)));
    out.push_str(&format!("\n{}\n", wrap(CAUTION, 100, 0)));
    out
}
