#![cfg(feature = "linfa")]
//! The four families through linfa's traits (the `linfa` feature) against
//! the library's own fit of the same rows, and the label numbering the
//! caller gets back.

use std::path::Path;

use baserate::data::{Dataset, ReadOptions};
use baserate::interop::{BayesRule, FittedBayesRule};
use baserate::model::discriminant::{LdaParams, QdaParams};
use baserate::model::logistic::LogisticParams;
use baserate::model::naive_bayes::NaiveBayesParams;
use baserate::model::{fit, FamilyParams};
use baserate::train::file::{ModelFile, TrainingInfo};
use linfa::traits::{Fit, Predict};
use ndarray::{array, Array1, Array2, ArrayView1};

const IRIS_CLASSES: [&str; 3] = ["setosa", "versicolor", "virginica"];

fn families() -> [FamilyParams; 4] {
    [
        FamilyParams::Logistic(LogisticParams::default()),
        FamilyParams::NaiveBayes(NaiveBayesParams::default()),
        FamilyParams::Lda(LdaParams::default()),
        FamilyParams::Qda(QdaParams::default()),
    ]
}

/// Fisher's iris (R. A. Fisher 1936), the copy scikit-learn ships, as in
/// tests/reference/data/.
fn iris() -> Dataset {
    let path = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/reference/data/iris.csv");
    Dataset::read(&path, &ReadOptions::new("target")).expect("read iris").0
}

/// Posteriors of our own fit, at the model file's prior (the training
/// class mix), columns in the file's class order.
fn our_posteriors(data: &Dataset, params: &FamilyParams) -> Array2<f64> {
    let (model, diagnostics) = fit(data, params).expect("fit");
    let training = TrainingInfo {
        input_path: "iris.csv".into(),
        input_sha256: String::new(),
        rows: data.rows(),
        class_counts: data.schema.target.counts.clone(),
        weighted_class_counts: data.schema.target.weighted_counts.clone(),
    };
    let file =
        ModelFile::builder(params.clone(), data.schema.clone(), model, diagnostics, training).build().expect("build");
    file.log_posteriors(&data.inputs(), &file.prior).mapv(f64::exp)
}

/// The most probable column, ties to the lower one.
fn argmax(row: ArrayView1<'_, f64>) -> usize {
    let mut best = 0;
    for (k, &p) in row.iter().enumerate() {
        if p > row[best] {
            best = k;
        }
    }
    best
}

/// Two invented, well separated clusters: label 0 low, label 1 high.
fn two_clusters() -> (Array2<f64>, Array1<usize>) {
    let records = array![
        [0.1, 1.2],
        [0.4, 0.9],
        [0.3, 1.5],
        [0.0, 1.1],
        [0.2, 0.7],
        [2.1, 3.0],
        [2.5, 2.6],
        [1.9, 3.3],
        [2.2, 2.9],
        [2.6, 3.4],
    ];
    (records, array![0, 0, 0, 0, 0, 1, 1, 1, 1, 1])
}

fn fit_two_clusters(params: FamilyParams) -> FittedBayesRule {
    let (records, labels) = two_clusters();
    let name = params.family().name();
    BayesRule::new(params).classes(["zeta", "alpha"]).fit(&linfa::Dataset::new(records, labels)).expect(name)
}

/// Iris (Fisher 1936, scikit-learn's copy): each family fitted through
/// linfa's `Fit` gives the posteriors of our own fit of the file. Logistic
/// regression separates setosa and warns, but still returns a fit, the
/// same one on both paths.
#[test]
fn linfa_fit_matches_our_fit_on_iris() {
    let data = iris();
    // The labels are class indices in byte order of the names:
    // setosa = 0, versicolor = 1, virginica = 2.
    assert_eq!(data.schema.target.classes, IRIS_CLASSES);
    let records = data.numeric.as_standard_layout().to_owned();
    assert_eq!(records.ncols(), 4);
    let labels: Array1<usize> = data.target.iter().map(|&c| c as usize).collect();
    let training = linfa::Dataset::new(records.clone(), labels);
    for params in families() {
        let family = params.family().name();
        let ours = our_posteriors(&data, &params);
        let fitted = BayesRule::new(params).classes(IRIS_CLASSES).fit(&training).expect(family);
        assert_eq!(fitted.class_names(), IRIS_CLASSES);
        let theirs: Array2<f64> = fitted.predict(&records);
        let predicted: Array1<usize> = fitted.predict(&records);
        assert_eq!(theirs, fitted.posteriors(records.view()).expect("posteriors"), "{family}");
        assert_eq!(theirs.dim(), ours.dim(), "{family}");
        // The same arithmetic on the same values, only the way in differs
        // (a file versus arrays), so the posteriors agree to rounding;
        // probabilities lie in [0, 1], so the tolerance is absolute.
        for ((r, k), &p) in ours.indexed_iter() {
            let difference = (p - theirs[(r, k)]).abs();
            assert!(difference <= 1e-12, "{family}, row {r}, class {k}: {p} vs {}", theirs[(r, k)]);
        }
        for (r, row) in ours.rows().into_iter().enumerate() {
            assert_eq!(predicted[r], argmax(row), "{family}, row {r}");
        }
    }
}

/// Class names whose byte order ("alpha" < "zeta") is not their label
/// order: predictions and posterior columns come back in the caller's
/// numbering.
#[test]
fn labels_come_back_in_the_callers_numbering() {
    let (records, labels) = two_clusters();
    for params in families() {
        let family = params.family().name();
        let fitted = fit_two_clusters(params);
        assert_eq!(fitted.file.classes, ["alpha", "zeta"], "{family}");
        assert_eq!(fitted.class_names(), ["zeta", "alpha"], "{family}");
        let posteriors: Array2<f64> = fitted.predict(&records);
        let predicted: Array1<usize> = fitted.predict(&records);
        for (r, row) in posteriors.rows().into_iter().enumerate() {
            assert!((row.sum() - 1.0).abs() < 1e-12, "{family}, row {r}");
            assert_eq!(predicted[r], argmax(row), "{family}, row {r}");
        }
        // The clusters are far apart: every training row gets its own label.
        assert_eq!(predicted, labels, "{family}");
    }
}

/// linfa's predictions cannot fail: a record the model cannot score gets
/// `usize::MAX` and a row of NaN, the others are scored as usual; the
/// library's own call says what is wrong instead.
#[test]
fn a_record_that_cannot_be_scored_is_marked() {
    let fitted = fit_two_clusters(FamilyParams::Lda(LdaParams::default()));
    let records = array![[0.2, 1.0], [f64::NAN, 1.0], [2.3, 3.0]];
    let predicted: Array1<usize> = fitted.predict(&records);
    assert_eq!(predicted.to_vec(), vec![0, usize::MAX, 1]);
    let posteriors: Array2<f64> = fitted.predict(&records);
    assert!(posteriors.row(1).iter().all(|p| p.is_nan()));
    assert!(posteriors.row(0).iter().all(|p| p.is_finite()));
    assert!(fitted.posteriors(records.view()).is_err());
}

/// A label with no class name is an error, not a panic.
#[test]
fn a_label_without_a_class_is_an_error() {
    let (records, _) = two_clusters();
    let labels: Array1<usize> = array![0, 0, 0, 0, 0, 1, 1, 1, 1, 2];
    let result = BayesRule::new(FamilyParams::Lda(LdaParams::default()))
        .classes(["zeta", "alpha"])
        .fit(&linfa::Dataset::new(records, labels));
    assert!(result.is_err());
}
