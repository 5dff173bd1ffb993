//! The four families through linfa's traits (`Fit`, `PredictInplace`) give
//! the posteriors of the library's own fit to 1e-12: the same arithmetic on
//! the same values, only the way in differs. Data: iris as scikit-learn
//! ships it (R. A. Fisher 1936), the copy in tests/reference/data/.

#![cfg(feature = "linfa")]

use baserate::data::{Dataset, ReadOptions};
use baserate::interop::BayesRule;
use baserate::model::discriminant::{LdaParams, QdaParams};
use baserate::model::logistic::LogisticParams;
use baserate::model::naive_bayes::NaiveBayesParams;
use baserate::model::FamilyParams;
use baserate::train::file::{ModelFile, TrainingInfo};
use linfa::traits::{Fit, Predict};
use ndarray::{Array1, Array2};

fn iris() -> Dataset {
    let path = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/reference/data/iris.csv");
    Dataset::read(&path, &ReadOptions::new("target")).expect("iris").0
}

/// The library's own fit and its posteriors at its own prior.
fn ours(dataset: &Dataset, params: &FamilyParams) -> Array2<f64> {
    let (model, diagnostics) = baserate::model::fit(dataset, params).expect("fit");
    let training = TrainingInfo {
        input_path: "iris.csv".into(),
        input_sha256: String::new(),
        rows: dataset.rows(),
        class_counts: dataset.schema.target.counts.clone(),
        weighted_class_counts: dataset.schema.target.weighted_counts.clone(),
    };
    let file = ModelFile::builder(params.clone(), dataset.schema.clone(), model, diagnostics, training)
        .build()
        .expect("model file");
    file.log_posteriors(&dataset.inputs(), &file.prior).mapv(f64::exp)
}

#[test]
fn every_family_through_linfa_matches_its_own_fit() {
    let dataset = iris();
    let records: Array2<f64> = dataset.numeric.to_owned();
    // Classes in byte order, as the library keeps them: setosa, versicolor, virginica.
    let labels: Array1<usize> = dataset.target.iter().map(|&c| c as usize).collect();
    let classes = dataset.schema.target.classes.clone();
    let training = linfa::Dataset::new(records.clone(), labels);
    let families = [
        FamilyParams::Lda(LdaParams::default()),
        FamilyParams::Qda(QdaParams::default()),
        FamilyParams::NaiveBayes(NaiveBayesParams::default()),
        FamilyParams::Logistic(LogisticParams::default()),
    ];
    for params in families {
        let expected = ours(&dataset, &params);
        let model = BayesRule::new(params.clone()).classes(classes.clone()).fit(&training).expect("linfa fit");
        let posteriors: Array2<f64> = model.predict(&records);
        let predicted: Array1<usize> = model.predict(&records);
        let worst = (&posteriors - &expected).iter().fold(0.0f64, |m, d| m.max(d.abs()));
        assert!(worst <= 1e-12, "{}: worst difference {worst:e}", params.family().name());
        for (r, row) in expected.rows().into_iter().enumerate() {
            let best = (0..row.len()).max_by(|&a, &b| row[a].total_cmp(&row[b]).then(b.cmp(&a))).unwrap_or(0);
            assert_eq!(predicted[r], best, "{}: row {r}", params.family().name());
        }
    }
}

/// Labels keep the caller's numbering even when the class names sort the
/// other way: label 0 is "zeta", label 1 "alpha".
#[test]
fn labels_come_back_in_the_callers_numbering() {
    let records = ndarray::array![[0.1], [0.3], [0.2], [0.4], [2.1], [2.4], [2.2], [2.3]];
    let labels = ndarray::array![0usize, 0, 0, 0, 1, 1, 1, 1];
    let training = linfa::Dataset::new(records.clone(), labels.clone());
    let model =
        BayesRule::new(FamilyParams::Lda(LdaParams::default())).classes(["zeta", "alpha"]).fit(&training).expect("fit");
    let predicted: Array1<usize> = model.predict(&records);
    assert_eq!(predicted, labels);
    let posteriors: Array2<f64> = model.predict(&records);
    assert!(posteriors[(0, 0)] > 0.5 && posteriors[(7, 1)] > 0.5);
}
