//! Penalised logistic benchmark: the lasso path (100 λ, λ_max down to
//! 1e-4·λ_max, stopping early as the deviance settles) with 5-fold
//! cross-validation on 100,000 rows × 200 features (10 with an effect, 190
//! noise; independent standard normals, made here with our seeded
//! generator), timed beside scikit-learn's LogisticRegressionCV with the
//! same folds, the same penalty and the same λ grid (C = 1/(n·λ), n the
//! training rows of a fold), solver 'saga', when Python is present.
//!
//! Run: `cargo bench --bench penalised_path` (rows: `BASERATE_BENCH_ROWS`,
//! default 100,000; `BASERATE_BENCH_SKLEARN_TIMEOUT` seconds, default 1800).

mod common;

use std::time::Instant;

use baserate::data::{Dataset, ReadOptions};
use baserate::model::logistic::LogisticParams;
use baserate::model::penalised::{LambdaChoice, Penalty};
use baserate::model::{fit, FamilyParams, FittedModel};

fn main() {
    let rows: usize = std::env::var("BASERATE_BENCH_ROWS").ok().and_then(|v| v.parse().ok()).unwrap_or(100_000);
    let (p, effects) = (200, 10);
    let path = common::sparse_logistic_file(rows, p, effects, -2.0, 2010);
    let directory = path.parent().expect("benches/data").to_path_buf();
    let data = Dataset::read(&path, &ReadOptions::new("y")).expect("read").0;
    println!("file: {} ({rows} rows × {p} features), 2 cores", path.display());
    let params = LogisticParams {
        penalty: Penalty::Lasso,
        lambda: LambdaChoice::Auto,
        path_length: Some(100),
        lambda_floor: Some(1e-4),
        cv_folds: 5,
        ..LogisticParams::default()
    };
    let start = Instant::now();
    let (model, _) = fit(&data, &FamilyParams::Logistic(params)).expect("fit");
    let ours = start.elapsed().as_secs_f64();
    let FittedModel::Logistic(model) = model else { unreachable!("logistic") };
    let record = model.penalty.expect("record");
    let kept = model.coefficients[0].slopes.iter().filter(|b| **b != 0.0).count();
    let true_kept = model.coefficients[0].slopes[..effects].iter().filter(|b| **b != 0.0).count();
    println!(
        "baserate lasso path + 5-fold CV: {ours:.2} s; {} λ on the path (stopped early from 100), one-SE λ {:.5}, \
         {kept} slopes kept ({true_kept} of {effects} true)",
        record.path.len(),
        record.lambda
    );
    if !common::python_has("sklearn, numpy, pandas") {
        println!("scikit-learn absent: no reference figures");
        return;
    }
    // The same folds and λ grid for scikit-learn.
    let grid: Vec<String> = record.path.iter().map(|p| format!("{:e}", p.lambda)).collect();
    let grid_path = directory.join("wide_lambdas.txt");
    std::fs::write(&grid_path, grid.join("\n")).expect("grid");
    let assignment = baserate::data::split::assign(
        &baserate::data::split::SplitPlan::KFold { folds: 5, repeats: 1 },
        &data.target,
        2,
        LogisticParams::default().cv_seed,
    )
    .expect("folds");
    let folds_path = directory.join("wide_folds.txt");
    let folds: Vec<String> = assignment.folds[0].iter().map(|f| f.to_string()).collect();
    std::fs::write(&folds_path, folds.join("\n")).expect("folds");
    let script = r#"
import sys, time, warnings
import numpy as np, pandas as pd
from sklearn.linear_model import LogisticRegressionCV
from sklearn.model_selection import PredefinedSplit
df = pd.read_csv(sys.argv[1]); y = df.pop("y").to_numpy(); x = df.to_numpy()
x = (x - x.mean(axis=0)) / x.std(axis=0)
lambdas = np.loadtxt(sys.argv[2]); folds = np.loadtxt(sys.argv[3]).astype(int)
n_train = len(y) * 4 / 5
t = time.perf_counter()
with warnings.catch_warnings():
    warnings.simplefilter("ignore")
    LogisticRegressionCV(Cs=1.0 / (n_train * lambdas), l1_ratios=(1.0,), solver="saga", cv=PredefinedSplit(folds),
                         scoring="neg_log_loss", tol=1e-4, max_iter=1000, n_jobs=2, random_state=0).fit(x, y)
print(time.perf_counter() - t)
"#;
    let timeout: u64 =
        std::env::var("BASERATE_BENCH_SKLEARN_TIMEOUT").ok().and_then(|v| v.parse().ok()).unwrap_or(1800);
    let mut child = std::process::Command::new("timeout")
        .arg(timeout.to_string())
        .args(["python3", "-c", script])
        .arg(&path)
        .arg(&grid_path)
        .arg(&folds_path)
        .stdout(std::process::Stdio::piped())
        .spawn()
        .expect("python3");
    let output = child.wait().ok().filter(|s| s.success()).and_then(|_| {
        let mut text = String::new();
        std::io::Read::read_to_string(&mut child.stdout.take()?, &mut text).ok()?;
        text.trim().lines().last()?.trim().parse::<f64>().ok()
    });
    match output {
        Some(theirs) => println!(
            "scikit-learn LogisticRegressionCV (saga, l1, same folds and λ grid, tol 1e-4): {theirs:.2} s ({:.1}x ours)",
            theirs / ours
        ),
        None => println!("scikit-learn LogisticRegressionCV did not finish within {timeout} s (more than {:.0}x ours)", timeout as f64 / ours),
    }
}
