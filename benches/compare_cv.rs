//! Comparison benchmark: `baserate compare --folds 5` with all four
//! families on the reference workload (1,000,000 × 20, `y`), against the
//! reference stack's equivalent (`../shared/bench/sk_cv5.py`: pandas read,
//! 5-fold cross_val_predict of the four scikit-learn estimators, AUC and
//! log loss), both as separate processes in the same run: wall time and
//! peak resident memory (the maximum RSS of the child process).
//!
//! Run: `cargo bench --bench compare_cv` (rows: `BASERATE_BENCH_ROWS`).

mod common;

fn main() {
    let rows = common::workload_rows();
    let path = common::workload_file(rows);
    let path_text = path.display().to_string();
    let binary = env!("CARGO_BIN_EXE_baserate");
    println!("file: {path_text} ({rows} rows), 2 cores");
    let ours = common::measure(&[binary, "compare", &path_text, "--target", "y", "--folds", "5"]);
    match ours {
        Some((s, m)) => println!("baserate compare --folds 5 (all four families): {s:.2} s, peak {m:.0} MB"),
        None => {
            println!("baserate: could not measure (python3 is needed for the peak-memory probe)");
            return;
        }
    }
    let reference = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("../shared/bench/sk_cv5.py");
    if !reference.exists() || !common::python_has("sklearn") {
        println!("scikit-learn or sk_cv5.py absent: no reference figures");
        return;
    }
    if let (Some((s, m)), Some((ours_s, ours_m))) =
        (common::measure(&["python3", &reference.display().to_string(), &path_text]), ours)
    {
        println!("scikit-learn sk_cv5.py: {s:.2} s, peak {m:.0} MB");
        println!(
            "ratio time {:.1}x faster (target ≥ 10x); memory {:.2} of the reference's (target < 0.33)",
            s / ours_s,
            ours_m / m
        );
    }
}
