//! LDA and QDA against the Bayes error of known Gaussian problems.
//!
//! Two Gaussian classes with a shared covariance, Mahalanobis distance Δ
//! between their means and equal priors have Bayes error Φ(−Δ/2) (textbook
//! result, e.g. Duda, Hart & Stork, Pattern Classification, 2nd ed., §2.8).
//! LDA is the Bayes rule's form there, so its holdout error must lie within
//! Monte-Carlo error of Φ(−Δ/2); when the covariances differ, QDA must beat
//! LDA. Data from our seeded generator; release-mode sizes.

use baserate::data::csv_read::read_bytes;
use baserate::data::{Dataset, ReadOptions};
use baserate::demo::gaussian::Gaussian;
use baserate::demo::rng::Rng;
use baserate::model::{fit, Family, FamilyParams};
use statrs::distribution::{ContinuousCDF, Normal};

fn sample(rows: usize, seed: u64, classes: &[Gaussian; 2]) -> Dataset {
    let mut rng = Rng::new(seed);
    let mut text = String::from("x1,x2,x3,y\n");
    for _ in 0..rows {
        let k = usize::from(rng.bernoulli(0.5));
        let x = classes[k].sample(&mut rng);
        text.push_str(&format!("{},{},{},{}\n", x[0], x[1], x[2], ["a", "b"][k]));
    }
    let options = ReadOptions::new("y");
    Dataset::from_table(read_bytes("sim.csv", text.as_bytes(), &options).expect("read"), &options).expect("dataset").0
}

fn error_rate(family: Family, train: &Dataset, test: &Dataset) -> f64 {
    let (model, _) = fit(train, &FamilyParams::defaults(family)).expect("fit");
    let p = model.posteriors(&test.inputs(), &[0.5, 0.5]);
    let wrong = p.rows().into_iter().zip(&test.target).filter(|(row, &y)| (row[1] > row[0]) != (y == 1)).count();
    wrong as f64 / test.rows() as f64
}

#[test]
fn lda_reaches_the_bayes_error_of_a_shared_covariance_problem() {
    // Correlation 0.5 between x1 and x2; means differ by (1, 0.5, 0.8).
    let correlation: [&[f64]; 3] = [&[1.0, 0.5, 0.0], &[0.5, 1.0, 0.0], &[0.0, 0.0, 1.0]];
    let sd = [1.0, 2.0, 1.5];
    let classes = [
        Gaussian::new(&[0.0, 0.0, 0.0], &sd, &correlation).expect("pd"),
        Gaussian::new(&[1.0, 0.5, 0.8], &sd, &correlation).expect("pd"),
    ];
    // Δ² = δᵀΣ⁻¹δ with δ = (1, 0.5, 0.8): in standard units (1, 0.25, 0.533),
    // and for the correlated pair [1 0.5; 0.5 1]⁻¹ = (4/3)[1 −0.5; −0.5 1]:
    // (4/3)(1 − 0.25 + 0.0625) + 0.533² = 1.08333 + 0.28444.
    let delta = ((4.0 / 3.0) * (1.0 - 0.25 + 0.0625) + (0.8f64 / 1.5).powi(2)).sqrt();
    let bayes = Normal::new(0.0, 1.0).expect("normal").cdf(-delta / 2.0);
    let train = sample(200_000, 1, &classes);
    let test = sample(200_000, 2, &classes);
    let error = error_rate(Family::Lda, &train, &test);
    // Monte-Carlo standard error of an error rate over 200,000 rows; the fit's
    // own error adds far less at this size. Allow four standard errors.
    let se = (bayes * (1.0 - bayes) / 200_000.0).sqrt();
    assert!((error - bayes).abs() < 4.0 * se, "LDA holdout error {error} vs Bayes error {bayes} (SE {se})");
}

#[test]
fn qda_beats_lda_when_the_covariances_differ() {
    let identity: [&[f64]; 3] = [&[1.0, 0.0, 0.0], &[0.0, 1.0, 0.0], &[0.0, 0.0, 1.0]];
    let opposite: [&[f64]; 3] = [&[1.0, -0.6, 0.0], &[-0.6, 1.0, 0.0], &[0.0, 0.0, 1.0]];
    let classes = [
        Gaussian::new(&[0.0, 0.0, 0.0], &[1.0, 1.0, 1.0], &identity).expect("pd"),
        Gaussian::new(&[0.3, 0.3, 0.0], &[2.0, 2.0, 0.5], &opposite).expect("pd"),
    ];
    let train = sample(50_000, 3, &classes);
    let test = sample(50_000, 4, &classes);
    let lda = error_rate(Family::Lda, &train, &test);
    let qda = error_rate(Family::Qda, &train, &test);
    assert!(qda + 0.02 < lda, "QDA {qda} should clearly beat LDA {lda}");
}
