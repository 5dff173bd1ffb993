//! Reading benchmark: the reference workload (1,000,000 × 20 numeric
//! features and a label) into the training matrix, against the
//! single-threaded csv-crate baseline (`StringRecord` + `str::parse::<f64>`
//! of every field) and, where Python with pandas is present, pandas'
//! `read_csv` on the same file. Median of 5 runs each, side by side.
//!
//! Run: `cargo bench --bench read_csv` (rows: `BASERATE_BENCH_ROWS`).

mod common;

use baserate::data::{Dataset, ReadOptions};

fn baseline(path: &std::path::Path) -> (usize, f64) {
    let mut reader = csv::Reader::from_path(path).expect("open");
    let mut record = csv::StringRecord::new();
    let mut values = Vec::new();
    let mut rows = 0;
    while reader.read_record(&mut record).expect("read") {
        for field in record.iter() {
            values.push(field.parse::<f64>().expect("number"));
        }
        rows += 1;
    }
    (rows, values.iter().sum())
}

fn main() {
    let rows = common::workload_rows();
    let path = common::workload_file(rows);
    let size = std::fs::metadata(&path).map(|m| m.len()).unwrap_or(0);
    println!("file: {} ({} rows, {:.0} MB)", path.display(), rows, size as f64 / 1e6);
    println!("threads: {}", rayon::current_num_threads());

    let options = ReadOptions::new("y");
    // Warm the page cache so every contender reads from memory.
    let _ = std::fs::read(&path);
    let ours = common::median_seconds(5, || {
        let (dataset, _) = Dataset::read(&path, &options).expect("read");
        assert_eq!(dataset.rows(), rows);
        std::hint::black_box(&dataset);
    });
    let single = {
        let pool = rayon::ThreadPoolBuilder::new().num_threads(1).build().expect("pool");
        common::median_seconds(3, || {
            pool.install(|| {
                let (dataset, _) = Dataset::read(&path, &options).expect("read");
                std::hint::black_box(&dataset);
            })
        })
    };
    let base = common::median_seconds(5, || {
        let (n, checksum) = baseline(&path);
        assert_eq!(n, rows);
        std::hint::black_box(checksum);
    });
    println!("baserate read (file -> training matrix + schema): {ours:.3} s");
    println!("baserate read on 1 thread:                        {single:.3} s");
    println!("baseline csv StringRecord + parse::<f64>:         {base:.3} s");
    println!("ratio baseline / baserate:                        {:.2}x", base / ours);
    if common::python_has("pandas") {
        let script = r#"
import sys, time, pandas as pd
ts = []
for _ in range(5):
    t = time.perf_counter(); df = pd.read_csv(sys.argv[1]); ts.append(time.perf_counter() - t)
ts.sort(); print(ts[len(ts)//2])
"#;
        match common::python_seconds(script, &[&path.display().to_string()]) {
            Some(pandas) => {
                println!("pandas read_csv (median of 5, in-process):        {pandas:.3} s");
                println!("ratio pandas / baserate:                          {:.2}x", pandas / ours);
            }
            None => println!("pandas: run failed"),
        }
    } else {
        println!("pandas: not installed; no pandas figure");
    }
}
