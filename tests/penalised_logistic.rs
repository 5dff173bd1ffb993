//! Penalised logistic regression (coordinate descent along a λ path) against
//! its optimality conditions, the Newton ridge fit, scikit-learn's saga
//! solver, and a simulated selection problem. Each check names its source.

mod common;

use std::path::Path;

use baserate::data::{Dataset, ReadOptions};
use baserate::model::logistic::{LogisticModel, LogisticParams};
use baserate::model::penalised::{LambdaChoice, LambdaRule, Penalty};
use baserate::model::{fit, FamilyParams, FittedModel};
use serde_json::Value;

fn breast_cancer() -> Dataset {
    let path = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/reference/data/breast_cancer.csv");
    Dataset::read(&path, &ReadOptions::new("target")).expect("read").0
}

fn logistic(dataset: &Dataset, params: LogisticParams) -> LogisticModel {
    match fit(dataset, &FamilyParams::Logistic(params)).expect("fit").0 {
        FittedModel::Logistic(m) => m,
        _ => unreachable!("a logistic fit"),
    }
}

fn penalised(penalty: Penalty, mixing: Option<f64>, lambda: LambdaChoice) -> LogisticParams {
    LogisticParams { penalty, mixing, lambda, ..LogisticParams::default() }
}

/// The numeric design columns, standardised with divisor n, and 0/1 labels
/// for the positive class.
fn standardised(dataset: &Dataset) -> (Vec<Vec<f64>>, Vec<f64>) {
    let x = dataset.inputs().numeric;
    let n = x.nrows();
    let positive = dataset.schema.target.positive_index() as u32;
    let labels = dataset.target.iter().map(|&y| f64::from(u8::from(y == positive))).collect();
    let columns = (0..x.ncols())
        .map(|j| {
            let c = x.column(j);
            let mean = c.sum() / n as f64;
            let sd = (c.iter().map(|v| (v - mean) * (v - mean)).sum::<f64>() / n as f64).sqrt();
            c.iter().map(|v| (v - mean) / sd).collect()
        })
        .collect();
    (columns, labels)
}

/// Slopes and intercept carried to the standardised columns.
fn to_standardised(dataset: &Dataset, intercept: f64, slopes: &[f64]) -> (f64, Vec<f64>) {
    let x = dataset.inputs().numeric;
    let n = x.nrows() as f64;
    let mut b0 = intercept;
    let mut b = Vec::new();
    for (j, slope) in slopes.iter().enumerate() {
        let c = x.column(j);
        let mean = c.sum() / n;
        let sd = (c.iter().map(|v| (v - mean) * (v - mean)).sum::<f64>() / n).sqrt();
        b0 += slope * mean;
        b.push(slope * sd);
    }
    (b0, b)
}

fn probabilities(columns: &[Vec<f64>], b0: f64, b: &[f64]) -> Vec<f64> {
    (0..columns[0].len())
        .map(|i| 1.0 / (1.0 + (-(b0 + b.iter().zip(columns).map(|(b, c)| b * c[i]).sum::<f64>())).exp()))
        .collect()
}

/// (1/n)·Σ log-loss + λ(α‖b‖₁ + (1−α)/2‖b‖²) on the standardised columns.
fn objective(columns: &[Vec<f64>], labels: &[f64], b0: f64, b: &[f64], lambda: f64, alpha: f64) -> f64 {
    let p = probabilities(columns, b0, b);
    let n = labels.len() as f64;
    let loss: f64 = p.iter().zip(labels).map(|(p, y)| -(y * p.ln() + (1.0 - y) * (1.0 - p).ln())).sum::<f64>() / n;
    let l1: f64 = b.iter().map(|v| v.abs()).sum();
    let l2: f64 = b.iter().map(|v| v * v).sum();
    loss + lambda * (alpha * l1 + 0.5 * (1.0 - alpha) * l2)
}

/// The Karush–Kuhn–Tucker conditions of the elastic-net objective
/// (Friedman, Hastie & Tibshirani 2010, J. Stat. Softw. 33(1), eq. 5 and
/// section 3): with G the gradient of the mean log-likelihood on the
/// standardised columns, Gⱼ − λ(1−α)bⱼ = λα·sign(bⱼ) where bⱼ ≠ 0 and
/// |Gⱼ| ≤ λα where bⱼ = 0; the intercept's gradient is 0. Returns the
/// largest violation.
fn kkt_violation(columns: &[Vec<f64>], labels: &[f64], b0: f64, b: &[f64], lambda: f64, alpha: f64) -> f64 {
    let p = probabilities(columns, b0, b);
    let n = labels.len() as f64;
    let residual: Vec<f64> = labels.iter().zip(&p).map(|(y, p)| y - p).collect();
    let mut worst = (residual.iter().sum::<f64>() / n).abs();
    for (j, c) in columns.iter().enumerate() {
        let g: f64 = c.iter().zip(&residual).map(|(x, r)| x * r).sum::<f64>() / n;
        let violation = if b[j] != 0.0 {
            (g - lambda * (1.0 - alpha) * b[j] - lambda * alpha * b[j].signum()).abs()
        } else {
            (g.abs() - lambda * alpha).max(0.0)
        };
        worst = worst.max(violation);
    }
    worst
}

#[test]
fn kkt_conditions_hold_at_every_lambda_of_the_path() {
    let data = breast_cancer();
    let (columns, labels) = standardised(&data);
    for (penalty, mixing) in [(Penalty::Lasso, None), (Penalty::ElasticNet, Some(0.5)), (Penalty::Ridge, None)] {
        let model =
            logistic(&data, LogisticParams { path_length: Some(40), ..penalised(penalty, mixing, LambdaChoice::Auto) });
        let record = model.penalty.as_ref().expect("a penalised fit");
        let alpha = record.mixing;
        // The walk may stop early (the deviance settled, or the
        // cross-validated deviance rose past its minimum).
        assert!((10..=40).contains(&record.path.len()), "{}", record.path.len());
        for point in &record.path {
            let (b0, b) = to_standardised(&data, point.intercepts[0], &point.slopes);
            let worst = kkt_violation(&columns, &labels, b0, &b, point.lambda, alpha);
            assert!(worst < 1e-6, "{penalty:?} at λ = {}: KKT violated by {worst:e}", point.lambda);
        }
        // At λ_max every slope is zero (the path's first point), and the
        // intercept is the log odds of the class mix.
        assert_eq!(record.path[0].lambda, record.lambda_max);
        if alpha > 0.0 {
            assert!(record.path[0].slopes.iter().all(|b| *b == 0.0), "{penalty:?}");
            assert!(record.path[1].slopes.iter().any(|b| *b != 0.0), "{penalty:?}: something enters below λ_max");
        }
    }
}

/// λ_max is the smallest λ at which every slope is zero: a fit at it is
/// all zeros, one just below it is not.
#[test]
fn lambda_max_is_where_the_first_slope_enters() {
    let data = breast_cancer();
    let auto =
        logistic(&data, LogisticParams { path_length: Some(5), ..penalised(Penalty::Lasso, None, LambdaChoice::Auto) });
    let lambda_max = auto.penalty.as_ref().expect("record").lambda_max;
    let at = logistic(&data, penalised(Penalty::Lasso, None, LambdaChoice::Value(lambda_max)));
    assert!(at.coefficients[0].slopes.iter().all(|b| *b == 0.0));
    let below = logistic(&data, penalised(Penalty::Lasso, None, LambdaChoice::Value(0.999 * lambda_max)));
    assert_eq!(below.coefficients[0].slopes.iter().filter(|b| **b != 0.0).count(), 1);
}

/// Ridge by coordinate descent and the Newton fit's --newton-ridge minimise the same
/// objective (the module docs of logistic.rs and penalised.rs): the same
/// coefficients to 1e-8.
#[test]
fn ridge_by_coordinate_descent_equals_the_newton_fit() {
    let data = breast_cancer();
    for lambda in [0.1, 0.01] {
        let newton = logistic(&data, LogisticParams { l2: lambda, tolerance: 1e-12, ..LogisticParams::default() });
        // Ridge on these correlated columns is ill-conditioned along a few
        // directions, where coordinate descent creeps: a tight tolerance
        // (1e-13 in gradient units) for a 1e-8 agreement of coefficients.
        let descent = logistic(
            &data,
            LogisticParams { tolerance: 1e-12, ..penalised(Penalty::Ridge, None, LambdaChoice::Value(lambda)) },
        );
        let (a, b) = (&newton.coefficients[0], &descent.coefficients[0]);
        let scale = a.slopes.iter().fold(a.intercept.abs(), |m, v| m.max(v.abs()));
        assert!((a.intercept - b.intercept).abs() <= 1e-8 * scale, "λ {lambda}: {} vs {}", a.intercept, b.intercept);
        for (j, (x, y)) in a.slopes.iter().zip(&b.slopes).enumerate() {
            assert!((x - y).abs() <= 1e-8 * scale, "λ {lambda}, slope {j}: {x} vs {y}");
        }
    }
}

/// scikit-learn 1.9.1 LogisticRegression(l1_ratio=α, C=1/(nλ),
/// solver='saga', tol=1e-12) on breast_cancer standardised by
/// tests/reference/generate.py: our penalised objective is not higher than
/// at its solution by more than 1e-8 relative.
#[test]
fn objective_not_above_scikit_learn_saga() {
    let text =
        std::fs::read_to_string(Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/reference/expected/python.json"))
            .expect("python.json");
    let fixtures: Value = serde_json::from_str(&text).expect("json");
    let data = breast_cancer();
    let (columns, labels) = standardised(&data);
    let cases = fixtures["fixtures"]["penalised_logistic"]["cases"].as_object().expect("cases").clone();
    assert_eq!(cases.len(), 3);
    for (name, case) in cases {
        let alpha = case["alpha"].as_f64().expect("alpha");
        let lambda = case["lambda"].as_f64().expect("lambda");
        let theirs: Vec<f64> =
            case["coef"].as_array().expect("coef").iter().map(|v| v.as_f64().unwrap_or(f64::NAN)).collect();
        let their_objective =
            objective(&columns, &labels, case["intercept"].as_f64().expect("intercept"), &theirs, lambda, alpha);
        let penalty = if alpha == 1.0 { Penalty::Lasso } else { Penalty::ElasticNet };
        let mixing = (alpha < 1.0).then_some(alpha);
        let model = logistic(&data, penalised(penalty, mixing, LambdaChoice::Value(lambda)));
        let c = &model.coefficients[0];
        let (b0, b) = to_standardised(&data, c.intercept, &c.slopes);
        let ours = objective(&columns, &labels, b0, &b, lambda, alpha);
        assert!(ours <= their_objective * (1.0 + 1e-8), "{name}: ours {ours} vs scikit-learn's {their_objective}");
        let zeros_theirs = theirs.iter().filter(|v| **v == 0.0).count();
        let zeros_ours = b.iter().filter(|v| **v == 0.0).count();
        eprintln!("{name}: objective ours {ours:.12} scikit-learn {their_objective:.12}; zero slopes {zeros_ours} vs {zeros_theirs}");
    }
}

/// A simulated design (our generator; the check is of the method, not of a
/// dataset): 10 true features with slopes ±0.5 to ±1 and 190 noise
/// features, independent standard normal, 3,000 rows. The lasso's one-SE
/// model keeps most true features and few noise ones.
#[test]
fn lasso_one_se_model_finds_the_true_features() {
    let mut rng = baserate::rng::Rng::new(2010);
    let (rows, p, true_features) = (3000, 200, 10);
    let slopes: Vec<f64> =
        (0..true_features).map(|j| (0.5 + 0.5 * j as f64 / 9.0) * if j % 2 == 0 { 1.0 } else { -1.0 }).collect();
    let mut text = (1..=p).map(|j| format!("x{j}")).collect::<Vec<_>>().join(",") + ",y\n";
    for _ in 0..rows {
        let x: Vec<f64> = (0..p).map(|_| rng.normal()).collect();
        let eta: f64 = -1.0 + slopes.iter().zip(&x).map(|(b, v)| b * v).sum::<f64>();
        let y = rng.uniform() < 1.0 / (1.0 + (-eta).exp());
        text.push_str(&x.iter().map(|v| format!("{v:.6}")).collect::<Vec<_>>().join(","));
        text.push_str(if y { ",yes\n" } else { ",no\n" });
    }
    let dir = common::temp_dir();
    let path = common::write(dir.path(), "simulated.csv", text.as_bytes());
    let data = Dataset::read(&path, &ReadOptions::new("y")).expect("read").0;
    let model = logistic(
        &data,
        LogisticParams {
            lambda_rule: LambdaRule::SparsestWithinSe,
            ..penalised(Penalty::Lasso, None, LambdaChoice::Auto)
        },
    );
    let kept: Vec<usize> = (0..p).filter(|&j| model.coefficients[0].slopes[j] != 0.0).collect();
    let true_kept = kept.iter().filter(|&&j| j < true_features).count();
    let noise_kept = kept.len() - true_kept;
    let record = model.penalty.as_ref().expect("record");
    eprintln!(
        "one-SE λ = {:.5} (min {:.5}): {true_kept} of 10 true features kept, {noise_kept} of 190 noise",
        record.lambda,
        record.lambda_lowest_deviance.unwrap_or(f64::NAN)
    );
    assert!(true_kept >= 9, "{true_kept} true features kept");
    assert!(noise_kept <= 10, "{noise_kept} noise features kept");
    assert!(record.lambda >= record.lambda_lowest_deviance.unwrap_or(f64::INFINITY));
}

/// The multinomial fit (classes against the reference class, each class's
/// coefficients a block of the coordinate descent) meets the same KKT
/// conditions, class by class, on scikit-learn's wine data (three
/// cultivars, 13 measurements) along its path.
#[test]
fn multinomial_kkt_conditions_hold() {
    let path = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/reference/data/wine.csv");
    let data = Dataset::read(&path, &ReadOptions::new("target")).expect("read").0;
    let (columns, _) = standardised(&data);
    let model = logistic(
        &data,
        LogisticParams { path_length: Some(20), ..penalised(Penalty::Lasso, None, LambdaChoice::Auto) },
    );
    let record = model.penalty.as_ref().expect("record");
    assert!((10..=20).contains(&record.path.len()), "{}", record.path.len());
    let classes = data.schema.target.classes.len();
    let others: Vec<usize> = (0..classes).filter(|&c| c != model.reference).collect();
    let n = data.rows() as f64;
    let d = columns.len();
    for point in &record.path {
        // Standardised coefficients and class probabilities.
        let blocks: Vec<(f64, Vec<f64>)> = (0..others.len())
            .map(|q| to_standardised(&data, point.intercepts[q], &point.slopes[q * d..(q + 1) * d]))
            .collect();
        let mut worst = 0.0f64;
        let mut gradient = vec![vec![0.0; d]; others.len()];
        let mut intercept_gradient = vec![0.0; others.len()];
        for i in 0..data.rows() {
            let eta: Vec<f64> =
                blocks.iter().map(|(b0, b)| b0 + b.iter().zip(&columns).map(|(b, c)| b * c[i]).sum::<f64>()).collect();
            let total = 1.0 + eta.iter().map(|e| e.exp()).sum::<f64>();
            for (q, &class) in others.iter().enumerate() {
                let residual = f64::from(u8::from(data.target[i] as usize == class)) - eta[q].exp() / total;
                intercept_gradient[q] += residual / n;
                for (g, column) in gradient[q].iter_mut().zip(&columns) {
                    *g += column[i] * residual / n;
                }
            }
        }
        for q in 0..others.len() {
            worst = worst.max(intercept_gradient[q].abs());
            for (&g, &b) in gradient[q].iter().zip(&blocks[q].1) {
                let violation =
                    if b != 0.0 { (g - point.lambda * b.signum()).abs() } else { (g.abs() - point.lambda).max(0.0) };
                worst = worst.max(violation);
            }
        }
        assert!(worst < 1e-6, "λ = {}: KKT violated by {worst:e}", point.lambda);
    }
}
