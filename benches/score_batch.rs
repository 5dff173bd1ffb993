//! Batch scoring benchmark: `baserate score` on the reference workload
//! (1,000,000 × 20, `../shared/bench/gen.py`) with an LDA and a logistic
//! model, as separate processes in one run, medians of interleaved runs:
//!
//! - single-thread throughput against the baseline read (a single-threaded
//!   csv-crate `StringRecord` read with `str::parse::<f64>` of every field),
//!   output writing included (target: at least 60% of the baseline's rate);
//! - 2 threads against 1 (target: at least 1.7× faster);
//! - peak memory at 1M and at 5M rows (the 1M file five times over, same
//!   distribution; target: within 20%);
//! - end to end against pandas + scikit-learn (`../shared/bench/sk_score.py`:
//!   read, predict_proba, to_csv; target: at least 3× faster).
//!
//! Run: `cargo bench --bench score_batch` (rows: `BASERATE_BENCH_ROWS`).

mod common;

use std::path::Path;
use std::process::Command;
use std::time::Instant;

fn baseline(path: &Path) -> f64 {
    let mut reader = csv::Reader::from_path(path).expect("open");
    let mut record = csv::StringRecord::new();
    let mut total = 0.0;
    while reader.read_record(&mut record).expect("read") {
        for field in record.iter() {
            total += field.parse::<f64>().expect("number");
        }
    }
    total
}

fn seconds(command: &[&str]) -> f64 {
    let start = Instant::now();
    let status = Command::new(command[0]).args(&command[1..]).status().expect("run");
    assert!(status.success(), "{command:?} failed");
    start.elapsed().as_secs_f64()
}

fn median(mut v: Vec<f64>) -> f64 {
    v.sort_by(f64::total_cmp);
    v[v.len() / 2]
}

fn main() {
    let rows = common::workload_rows();
    let path = common::workload_file(rows);
    let data = path.display().to_string();
    let directory = path.parent().expect("benches/data").to_path_buf();
    let binary = env!("CARGO_BIN_EXE_baserate");
    println!("file: {data} ({rows} rows), 2 cores");
    let models: Vec<(String, String)> = ["lda", "logistic"]
        .iter()
        .map(|family| {
            let model = directory.join(format!("score_{family}.json")).display().to_string();
            seconds(&[binary, "fit", &data, "--target", "y", "--family", family, "-o", &model]);
            (family.to_string(), model)
        })
        .collect();
    let out = directory.join("score_out.csv").display().to_string();
    // Warm the page cache.
    let _ = std::fs::read(&path);
    let base = common::median_seconds(3, || {
        std::hint::black_box(baseline(&path));
    });
    println!("baseline csv StringRecord + parse::<f64> (1 thread): {base:.3} s");
    const RUNS: usize = 5;
    for (family, model) in &models {
        let (mut one, mut two) = (Vec::new(), Vec::new());
        for _ in 0..RUNS {
            one.push(seconds(&[binary, "score", model, &data, "-o", &out, "--threads", "1", "-q"]));
            two.push(seconds(&[binary, "score", model, &data, "-o", &out, "--threads", "2", "-q"]));
        }
        let (one, two) = (median(one), median(two));
        println!(
            "score {family}: 1 thread {one:.3} s ({:.0}% of the baseline's rate; target >= 60%), \
             2 threads {two:.3} s ({:.2}x; target >= 1.7x)",
            100.0 * base / one,
            one / two
        );
    }

    // Peak memory, 1M rows against five times as many.
    let big = directory.join(format!("reference_{rows}_x5.csv"));
    if !big.exists() {
        let text = std::fs::read_to_string(&path).expect("read workload");
        let (header, body) = text.split_once('\n').expect("header");
        let mut all = String::with_capacity(text.len() * 5);
        all.push_str(header);
        all.push('\n');
        for _ in 0..5 {
            all.push_str(body);
        }
        std::fs::write(&big, all).expect("write 5x file");
    }
    let big_text = big.display().to_string();
    let (lda_model, logistic_model) = (&models[0].1, &models[1].1);
    let small = common::measure(&[binary, "score", lda_model, &data, "-o", &out, "-q"]);
    let large = common::measure(&[binary, "score", lda_model, &big_text, "-o", &out, "-q"]);
    match (small, large) {
        (Some((s1, m1)), Some((s5, m5))) => println!(
            "peak memory (lda, 2 threads): {rows} rows {m1:.0} MB in {s1:.2} s, {} rows {m5:.0} MB in {s5:.2} s \
             ({:+.0}%; target within 20%)",
            5 * rows,
            100.0 * (m5 / m1 - 1.0)
        ),
        _ => println!("peak memory: python3 is needed for the probe"),
    }
    let _ = logistic_model;

    // The reference stack.
    let reference = Path::new(env!("CARGO_MANIFEST_DIR")).join("../shared/bench/sk_score.py");
    if !reference.exists() || !common::python_has("sklearn, pandas") {
        println!("scikit-learn, pandas or sk_score.py absent: no reference figures");
        return;
    }
    let script = reference.display().to_string();
    let pickle = directory.join("sk_lda.pkl").display().to_string();
    seconds(&["python3", &script, "fit", &data, &pickle]);
    let sk_out = directory.join("sk_out.csv").display().to_string();
    let (mut ours, mut theirs) = (Vec::new(), Vec::new());
    for _ in 0..3 {
        ours.push(seconds(&[binary, "score", lda_model, &data, "-o", &out, "-q"]));
        theirs.push(seconds(&["python3", &script, "score", &pickle, &data, &sk_out]));
    }
    let (ours, theirs) = (median(ours), median(theirs));
    println!(
        "end to end, lda: baserate {ours:.3} s, pandas + scikit-learn {theirs:.3} s ({:.1}x faster; target >= 3x)",
        theirs / ours
    );
}
