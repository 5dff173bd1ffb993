//! Fitting benchmark: the four families on the reference workload
//! (1,000,000 × 20 numeric features, label `y`), after reading, against
//! scikit-learn's fits and statsmodels' Newton Logit on the same file in the
//! same run (where Python with those packages is present).
//!
//! Run: `cargo bench --bench fit_families` (rows: `BASERATE_BENCH_ROWS`).

mod common;

use baserate::data::{Dataset, ReadOptions};
use baserate::model::{fit, Family, FamilyParams};

const PYTHON: &str = r#"
import sys, time
import pandas as pd
from sklearn.linear_model import LogisticRegression
from sklearn.naive_bayes import GaussianNB
from sklearn.discriminant_analysis import LinearDiscriminantAnalysis, QuadraticDiscriminantAnalysis
df = pd.read_csv(sys.argv[1]); y = df.pop("y").to_numpy(); X = df.to_numpy()
for name, est in [("logistic", LogisticRegression(max_iter=1000)), ("naive-bayes", GaussianNB()),
                  ("lda", LinearDiscriminantAnalysis()), ("qda", QuadraticDiscriminantAnalysis())]:
    t = time.perf_counter(); est.fit(X, y); print(name, time.perf_counter() - t)
try:
    import statsmodels.api as sm
    t = time.perf_counter(); sm.Logit(y, sm.add_constant(X)).fit(method="newton", disp=0); print("statsmodels-newton", time.perf_counter() - t)
except ImportError:
    pass
"#;

fn main() {
    let rows = common::workload_rows();
    let path = common::workload_file(rows);
    println!("file: {} ({rows} rows), threads: {}", path.display(), rayon::current_num_threads());
    let (data, _) = Dataset::read(&path, &ReadOptions::new("y")).expect("read");
    let mut ours = Vec::new();
    for family in [Family::Logistic, Family::NaiveBayes, Family::Lda, Family::Qda] {
        let mut iterations = 0;
        let seconds = common::median_seconds(3, || {
            let (_, d) = fit(&data, &FamilyParams::defaults(family)).expect("fit");
            iterations = d.iterations;
        });
        println!(
            "baserate {:<12} {seconds:>7.3} s  ({iterations} iteration{})",
            family.name(),
            if iterations == 1 { "" } else { "s" }
        );
        ours.push((family.name(), seconds));
    }
    let total: f64 = ours.iter().map(|(_, s)| s).sum();
    println!("baserate all four    {total:>7.3} s");
    if !common::python_has("sklearn") {
        println!("scikit-learn: not installed; no reference figures");
        return;
    }
    let output = std::process::Command::new("python3").arg("-c").arg(PYTHON).arg(&path).output().expect("python3");
    if !output.status.success() {
        println!("python failed: {}", String::from_utf8_lossy(&output.stderr));
        return;
    }
    let text = String::from_utf8_lossy(&output.stdout);
    let reference: Vec<(String, f64)> = text
        .lines()
        .filter_map(|l| l.split_once(' ').and_then(|(n, s)| s.trim().parse().ok().map(|s| (n.to_string(), s))))
        .collect();
    let mut sklearn_total = 0.0;
    for (name, seconds) in &reference {
        let ratio = ours.iter().find(|(n, _)| n == name).map(|(_, s)| seconds / s);
        match ratio {
            Some(r) => {
                sklearn_total += seconds;
                println!("scikit-learn {name:<12} {seconds:>7.3} s   ratio {r:.1}x")
            }
            None => {
                let logistic = ours[0].1;
                println!("{name:<25} {seconds:>7.3} s   ratio to baserate logistic {:.1}x", seconds / logistic)
            }
        }
    }
    println!("scikit-learn all four{sklearn_total:>8.3} s   ratio {:.1}x (target: over 4x)", sklearn_total / total);
}
