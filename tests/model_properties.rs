//! Invariants of the families: probabilities, priors, labels, row order,
//! weights, and the model file round trip.

mod common;

use baserate::data::csv_read::read_bytes;
use baserate::data::{Dataset, MissingPolicy, ReadOptions};
use baserate::model::{fit, Family, FamilyParams, FittedModel};
use baserate::train::file::ModelFile;
use ndarray::Array2;

const FAMILIES: [Family; 4] = [Family::Logistic, Family::NaiveBayes, Family::Lda, Family::Qda];

fn lending(text: &str) -> Dataset {
    let mut options = ReadOptions::new("outcome");
    options.ids = vec!["application_id".into(), "application_month".into()];
    options.missing = MissingPolicy::Impute;
    let table = read_bytes("lending.csv", text.as_bytes(), &options).expect("read");
    Dataset::from_table(table, &options).expect("dataset").0
}

fn demo_lending() -> String {
    baserate::demo::generate(baserate::demo::DEFAULT_SEED, baserate::demo::DemoSize::standard())[0].contents.clone()
}

fn fitted(data: &Dataset, family: Family) -> FittedModel {
    fit(data, &FamilyParams::defaults(family)).expect("fit").0
}

fn max_difference(a: &Array2<f64>, b: &Array2<f64>) -> f64 {
    a.iter().zip(b.iter()).map(|(x, y)| (x - y).abs()).fold(0.0, f64::max)
}

#[test]
fn posteriors_are_probabilities_even_far_out() {
    let mut data = lending(&demo_lending());
    // A row 45 standard deviations out on every numeric input.
    for j in 0..data.numeric.ncols() {
        let column = data.numeric.column(j);
        let (mean, sd) = (column.mean().unwrap_or(0.0), column.std(1.0));
        data.numeric[(0, j)] = mean + 45.0 * sd.max(1.0);
    }
    for family in FAMILIES {
        let model = fitted(&lending(&demo_lending()), family);
        for prior in [vec![0.5, 0.5], vec![0.03, 0.97], vec![1e-6, 1.0 - 1e-6]] {
            let p = model.posteriors(&data.inputs(), &prior);
            for row in p.rows() {
                assert!(row.iter().all(|v| v.is_finite() && (0.0..=1.0).contains(v)), "{family:?}: {row}");
                assert!((row.sum() - 1.0).abs() < 1e-12, "{family:?}: sums to {}", row.sum());
            }
            let log = model.log_posteriors(&data.inputs(), &prior);
            assert!(log.iter().all(|v| v.is_finite()), "{family:?}: a log-posterior is not finite");
        }
    }
}

/// Changing the prior shifts every row's log posterior odds by exactly
/// log(π′₁/π′₀) − log(π₁/π₀), for every family (exact swap for the
/// class-conditional ones, odds correction for logistic); the evidence
/// itself does not move.
#[test]
fn a_prior_change_shifts_the_log_odds_exactly() {
    let data = lending(&demo_lending());
    let (from, to): (Vec<f64>, Vec<f64>) = (vec![0.1, 0.9], vec![0.03, 0.97]);
    let expected = (to[0] / to[1]).ln() - (from[0] / from[1]).ln();
    for family in FAMILIES {
        let model = fitted(&data, family);
        let a = model.log_posteriors(&data.inputs(), &from);
        let b = model.log_posteriors(&data.inputs(), &to);
        for (ra, rb) in a.rows().into_iter().zip(b.rows()) {
            let shift = (rb[0] - rb[1]) - (ra[0] - ra[1]);
            assert!((shift - expected).abs() < 1e-9, "{family:?}: shift {shift} vs {expected}");
        }
    }
}

/// A class-conditional model fitted under one prior and rescored under
/// another equals the model fitted under the other (1e-12): priors are not
/// part of the fitted parameters. Through the model file as well.
#[test]
fn refitting_with_a_prior_equals_rescoring() {
    let data = lending(&demo_lending());
    for family in [Family::NaiveBayes, Family::Lda, Family::Qda] {
        let model = fitted(&data, family);
        let again = fitted(&data, family);
        let prior = vec![0.03, 0.97];
        let a = model.posteriors(&data.inputs(), &prior);
        let b = again.posteriors(&data.inputs(), &prior);
        assert!(max_difference(&a, &b) < 1e-12);
        assert_eq!(model, again, "{family:?}: the fit does not depend on anything but the data");
    }
}

/// Renaming the classes (which reverses their byte order) permutes the
/// posteriors and changes nothing else; reordering the rows changes
/// nothing. Class-conditional families to 1e-12 (sums in another order);
/// logistic to 1e-9, since Newton stops once its step is below 1e-8 on the
/// standardised scale and another summation order ends elsewhere in the
/// last bits of that step.
#[test]
fn labels_and_row_order_change_nothing() {
    let text = demo_lending();
    let renamed = text.replace(",defaulted\n", ",b_bad\n").replace(",repaid\n", ",a_good\n");
    let mut lines: Vec<&str> = text.lines().collect();
    let header = lines.remove(0);
    lines.reverse();
    let reversed = format!("{header}\n{}\n", lines.join("\n"));
    let data = lending(&text);
    let data_renamed = lending(&renamed);
    let data_reversed = lending(&reversed);
    assert_eq!(data.schema.target.classes, vec!["defaulted", "repaid"]);
    assert_eq!(data_renamed.schema.target.classes, vec!["a_good", "b_bad"]);
    for family in FAMILIES {
        let tolerance = if family == Family::Logistic { 1e-9 } else { 1e-12 };
        let p = fitted(&data, family).posteriors(&data.inputs(), &[0.2, 0.8]);
        let q = fitted(&data_renamed, family).posteriors(&data_renamed.inputs(), &[0.8, 0.2]);
        let permuted = Array2::from_shape_fn(q.dim(), |(r, k)| q[(r, 1 - k)]);
        assert!(max_difference(&p, &permuted) < tolerance, "{family:?} renamed: {}", max_difference(&p, &permuted));
        let s = fitted(&data_reversed, family).posteriors(&data_reversed.inputs(), &[0.2, 0.8]);
        let n = p.nrows();
        let unreversed = Array2::from_shape_fn(s.dim(), |(r, k)| s[(n - 1 - r, k)]);
        assert!(
            max_difference(&p, &unreversed) < tolerance,
            "{family:?} reversed: {}",
            max_difference(&p, &unreversed)
        );
    }
}

/// Frequency weights: a weight of 2 equals a duplicated row, and a weight
/// of 0 equals dropping the row.
#[test]
fn weights_are_frequencies() {
    let text = demo_lending();
    let lines: Vec<&str> = text.lines().collect();
    let header = format!("{},w", lines[0]);
    let mut weighted = vec![header.clone()];
    let mut expanded = vec![lines[0].to_string()];
    for (i, line) in lines[1..].iter().enumerate() {
        let w = [1, 2, 0][i % 3];
        weighted.push(format!("{line},{w}"));
        for _ in 0..w {
            expanded.push(line.to_string());
        }
    }
    let mut options = ReadOptions::new("outcome");
    options.ids = vec!["application_id".into(), "application_month".into()];
    options.missing = MissingPolicy::Impute;
    let expanded_data = {
        let table = read_bytes("e.csv", (expanded.join("\n") + "\n").as_bytes(), &options).expect("read");
        Dataset::from_table(table, &options).expect("dataset").0
    };
    options.weight = Some("w".into());
    let weighted_data = {
        let table = read_bytes("w.csv", (weighted.join("\n") + "\n").as_bytes(), &options).expect("read");
        Dataset::from_table(table, &options).expect("dataset").0
    };
    for family in FAMILIES {
        let tolerance = if family == Family::Logistic { 1e-9 } else { 1e-12 };
        let a = fitted(&weighted_data, family).posteriors(&expanded_data.inputs(), &[0.1, 0.9]);
        let b = fitted(&expanded_data, family).posteriors(&expanded_data.inputs(), &[0.1, 0.9]);
        assert!(max_difference(&a, &b) < tolerance, "{family:?}: {}", max_difference(&a, &b));
    }
}

#[test]
fn model_files_round_trip_exactly() {
    let dir = common::temp_dir();
    let data_path = common::write(dir.path(), "lending.csv", demo_lending().as_bytes());
    for family in ["logistic", "naive-bayes", "lda", "qda"] {
        let output = common::baserate(
            dir.path(),
            &[
                "fit",
                "lending.csv",
                "--target",
                "outcome",
                "--id",
                "application_id,application_month",
                "--missing",
                "impute",
                "--family",
                family,
                "-o",
                "m.json",
            ],
        );
        assert!(output.status.success(), "{}", String::from_utf8_lossy(&output.stderr));
        let file = ModelFile::load(&dir.path().join("m.json")).expect("load");
        let text = file.to_json().expect("json");
        let again = ModelFile::from_json("m.json", &text).expect("reload");
        assert_eq!(file, again);
        let data = lending(&std::fs::read_to_string(&data_path).expect("read"));
        let a = file.model.posteriors(&data.inputs(), &file.prior);
        let b = again.model.posteriors(&data.inputs(), &again.prior);
        assert_eq!(a, b, "{family}: bit for bit");
    }
}

/// Fold fits from merged per-fold moments equal direct fits on the fold's
/// training rows (weights 0 elsewhere), to 1e-12: the merge is exact.
#[test]
fn fold_moments_equal_direct_fold_fits() {
    use baserate::model::design::Encoding;
    use baserate::model::discriminant::{
        fit_lda_from_moments, fit_qda, fit_qda_from_moments, CategoryModel, LdaParams, QdaParams,
    };
    use baserate::model::moments::{grouped_class_moments, Moments};
    // The moment path is the one-hot design's; the level frequencies have none.
    let qda = QdaParams { categories: CategoryModel::OneHot, ..QdaParams::default() };
    let lda_params = LdaParams { categories: CategoryModel::OneHot, ..LdaParams::default() };
    let data = lending(&demo_lending());
    let folds: Vec<u32> = (0..data.rows()).map(|i| (i * 7 % 5) as u32).collect();
    let encoding = Encoding::from_schema(&data.schema);
    let grouped = grouped_class_moments(&encoding, &data.inputs(), &data.target, None, 2, false, Some(&folds), 5);
    for fold in 0..5u32 {
        let mut merged: Vec<Moments> = (0..2).map(|_| Moments::empty(encoding.width(), false)).collect();
        for (g, group) in grouped.iter().enumerate() {
            if g as u32 != fold {
                for (t, m) in merged.iter_mut().zip(group) {
                    t.merge(m);
                }
            }
        }
        let weights: Vec<f64> = folds.iter().map(|&f| if f == fold { 0.0 } else { 1.0 }).collect();
        let (direct, _) = fit_qda(&data, &qda, Some(&weights)).expect("fit");
        let (from_moments, _) =
            fit_qda_from_moments(&data, &qda, encoding.clone(), merged.clone(), Vec::new()).expect("fit");
        let a = baserate::model::FittedModel::Qda(direct).posteriors(&data.inputs(), &[0.1, 0.9]);
        let b = baserate::model::FittedModel::Qda(from_moments).posteriors(&data.inputs(), &[0.1, 0.9]);
        assert!(max_difference(&a, &b) < 1e-12, "fold {fold}: {}", max_difference(&a, &b));
        let (lda, _) =
            fit_lda_from_moments(&data, &lda_params, None, encoding.clone(), merged, Vec::new()).expect("lda");
        let (direct, _) = baserate::model::discriminant::fit_lda(&data, &lda_params, Some(&weights)).expect("lda");
        assert_eq!(lda.classes, direct.classes);
        let a = baserate::model::FittedModel::Lda(lda).posteriors(&data.inputs(), &[0.1, 0.9]);
        let b = baserate::model::FittedModel::Lda(direct).posteriors(&data.inputs(), &[0.1, 0.9]);
        assert!(max_difference(&a, &b) < 1e-12);
    }
}

/// Naive Bayes floors a class variance at `--variance-floor` times the
/// feature's pooled within-class variance (Σₖ scatterₖ / Σₖ Wₖ): a feature
/// constant within one class gets exactly that variance there, and the other
/// class keeps its own.
#[test]
fn naive_bayes_floors_a_class_variance_at_a_share_of_the_pooled_within_class_variance() {
    use baserate::data::{Dataset, ReadOptions};
    use baserate::model::naive_bayes::{NaiveBayesParams, DEFAULT_VARIANCE_FLOOR};
    let dir = tempfile::tempdir().expect("dir");
    let path = dir.path().join("floor.csv");
    // Class a: x is 5 throughout; class b: x is 0, 1, 2, 3 (variance 1.25).
    let mut text = String::from("x,y\n");
    for _ in 0..4 {
        text.push_str("5,a\n");
    }
    for v in 0..4 {
        text.push_str(&format!("{v},b\n"));
    }
    std::fs::write(&path, text).expect("write");
    let (data, _) = Dataset::read(&path, &ReadOptions::new("y")).expect("read");
    let (model, diagnostics) =
        baserate::model::fit(&data, &baserate::model::FamilyParams::NaiveBayes(NaiveBayesParams::default()))
            .expect("fit");
    let baserate::model::FittedModel::NaiveBayes(nb) = model else { panic!("naive bayes") };
    // Pooled within-class variance: (0 + 4·1.25) / 8 = 0.625.
    let expected = DEFAULT_VARIANCE_FLOOR * 0.625;
    assert!((nb.variances[0][0] - expected).abs() <= 1e-12 * expected, "{:?}", nb.variances);
    assert!((nb.variances[1][0] - 1.25).abs() <= 1e-12, "{:?}", nb.variances);
    assert!(
        diagnostics.warnings.iter().any(|w| w.contains("nearly) constant in class 'a'")),
        "{:?}",
        diagnostics.warnings
    );
}
