//! Shared by the benchmarks: the reference workload file and timing helpers.
//!
//! The reference workload is 1,000,000 rows × 20 correlated Gaussian
//! features `f1..f20` and a 0/1 label `y` with about 5% positives, the
//! classes differing in means and covariances. When Python with numpy is
//! present the file is made by the team's generator (`../shared/bench/gen.py`),
//! so that our figures compare with the published reference runs; otherwise
//! by a generator of the same design written here (same layout, same
//! formatting, its own random draws).

#![allow(dead_code)]

use std::path::{Path, PathBuf};
use std::process::Command;
use std::time::Instant;

use baserate::demo::gaussian::Gaussian;
use baserate::demo::rng::Rng;

/// Rows of the workload: `BASERATE_BENCH_ROWS`, default 1,000,000.
pub fn workload_rows() -> usize {
    std::env::var("BASERATE_BENCH_ROWS").ok().and_then(|v| v.parse().ok()).unwrap_or(1_000_000)
}

/// The shared reference generator, when it is there.
pub fn shared_generator() -> Option<PathBuf> {
    let path = Path::new(env!("CARGO_MANIFEST_DIR")).join("../shared/bench/gen.py");
    path.exists().then_some(path)
}

/// True when `python3 -c "import MODULES"` works.
pub fn python_has(modules: &str) -> bool {
    Command::new("python3")
        .args(["-c", &format!("import {modules}")])
        .output()
        .map(|o| o.status.success())
        .unwrap_or(false)
}

/// The workload file for `rows` rows, made once and kept under
/// `benches/data/` (ignored by git).
pub fn workload_file(rows: usize) -> PathBuf {
    let directory = Path::new(env!("CARGO_MANIFEST_DIR")).join("benches/data");
    std::fs::create_dir_all(&directory).expect("create benches/data");
    let path = directory.join(format!("reference_{rows}.csv"));
    if path.exists() {
        return path;
    }
    match shared_generator() {
        Some(generator) if python_has("numpy") => {
            eprintln!("generating {} with {}", path.display(), generator.display());
            let status =
                Command::new("python3").arg(&generator).arg(rows.to_string()).arg(&path).status().expect("run gen.py");
            assert!(status.success(), "gen.py failed");
        }
        _ => {
            eprintln!("generating {} with the built-in generator (numpy or gen.py absent)", path.display());
            std::fs::write(&path, own_workload(rows, 20_240_611)).expect("write workload");
        }
    }
    path
}

/// A workload of the same design as gen.py: block-correlated covariances
/// (4 blocks of 5, within-block correlation 0.5 for class 0 and 0.2 for
/// class 1), a modest mean shift, 5% positives, `f1` and `f2` rescaled.
pub fn own_workload(rows: usize, seed: u64) -> String {
    const D: usize = 20;
    let mut parameters = Rng::new(12345);
    let block = |rho: f64| -> Vec<Vec<f64>> {
        (0..D)
            .map(|i| {
                (0..D)
                    .map(|j| {
                        if i == j {
                            1.0
                        } else if i / 5 == j / 5 {
                            rho
                        } else {
                            0.0
                        }
                    })
                    .collect()
            })
            .collect()
    };
    let shift: Vec<f64> = (0..D).map(|_| 0.35 * parameters.normal()).collect();
    let sd0: Vec<f64> = (0..D).map(|_| 0.8 + 0.4 * parameters.uniform()).collect();
    let sd1: Vec<f64> = (0..D).map(|_| 0.9 + 0.7 * parameters.uniform()).collect();
    let c0 = block(0.5);
    let c1 = block(0.2);
    let r0: Vec<&[f64]> = c0.iter().map(|r| &r[..]).collect();
    let r1: Vec<&[f64]> = c1.iter().map(|r| &r[..]).collect();
    let g0 = Gaussian::new(&[0.0; D], &sd0, &r0).expect("positive definite");
    let g1 = Gaussian::new(&shift, &sd1, &r1).expect("positive definite");
    let mut rng = Rng::new(seed);
    let mut out = String::with_capacity(rows * 200);
    let header: Vec<String> = (1..=D).map(|i| format!("f{i}")).collect();
    out.push_str(&header.join(","));
    out.push_str(",y\n");
    use std::fmt::Write;
    for _ in 0..rows {
        let positive = rng.bernoulli(0.05);
        let mut x = if positive { g1.sample(&mut rng) } else { g0.sample(&mut rng) };
        x[0] = 50.0 + 10.0 * x[0];
        x[1] = 3.0 * x[1] - 7.0;
        for v in &x {
            let _ = write!(out, "{v:.6},");
        }
        out.push_str(if positive { "1\n" } else { "0\n" });
    }
    out
}

/// The median wall time of `runs` calls, in seconds.
pub fn median_seconds(runs: usize, mut f: impl FnMut()) -> f64 {
    let mut times: Vec<f64> = (0..runs)
        .map(|_| {
            let start = Instant::now();
            f();
            start.elapsed().as_secs_f64()
        })
        .collect();
    times.sort_by(f64::total_cmp);
    times[times.len() / 2]
}

/// Runs a Python snippet that prints one number (seconds) and returns it.
pub fn python_seconds(script: &str, args: &[&str]) -> Option<f64> {
    let output = Command::new("python3").arg("-c").arg(script).args(args).output().ok()?;
    if !output.status.success() {
        eprintln!("python failed: {}", String::from_utf8_lossy(&output.stderr));
        return None;
    }
    String::from_utf8_lossy(&output.stdout).trim().lines().last()?.trim().parse().ok()
}

/// Runs a command under Python's resource module and returns (seconds,
/// peak RSS in MB) of the child.
pub fn measure(command: &[&str]) -> Option<(f64, f64)> {
    let script = r#"
import resource, subprocess, sys, time
t = time.perf_counter()
r = subprocess.run(sys.argv[1:], stdout=subprocess.DEVNULL)
elapsed = time.perf_counter() - t
if r.returncode != 0:
    sys.exit(r.returncode)
print(elapsed, resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss / 1024.0)
"#;
    let output = Command::new("python3").arg("-c").arg(script).args(command).output().ok()?;
    if !output.status.success() {
        eprintln!("failed: {:?}: {}", command, String::from_utf8_lossy(&output.stderr));
        return None;
    }
    let text = String::from_utf8_lossy(&output.stdout);
    let mut parts = text.split_whitespace();
    Some((parts.next()?.parse().ok()?, parts.next()?.parse().ok()?))
}

/// A sparse logistic design made once under `benches/data/`: `p`
/// independent standard normal inputs `x1..xp`, the first `effects` with
/// alternating slopes from 0.5 to 1.0, the rest noise, the label drawn
/// from the logistic model with this `intercept`, all from our seeded
/// generator.
pub fn sparse_logistic_file(rows: usize, p: usize, effects: usize, intercept: f64, seed: u64) -> PathBuf {
    use std::io::Write;
    let directory = Path::new(env!("CARGO_MANIFEST_DIR")).join("benches/data");
    std::fs::create_dir_all(&directory).expect("create benches/data");
    let path = directory.join(format!("sparse_{rows}x{p}_{effects}_{intercept}_{seed}.csv"));
    if path.exists() {
        return path;
    }
    let mut rng = Rng::new(seed);
    let slopes: Vec<f64> = (0..effects)
        .map(|j| (0.5 + 0.5 * j as f64 / (effects.max(2) - 1) as f64) * if j % 2 == 0 { 1.0 } else { -1.0 })
        .collect();
    let mut out = std::io::BufWriter::new(std::fs::File::create(&path).expect("create"));
    let header: Vec<String> = (1..=p).map(|j| format!("x{j}")).collect();
    writeln!(out, "{},y", header.join(",")).expect("write");
    for _ in 0..rows {
        let x: Vec<f64> = (0..p).map(|_| rng.normal()).collect();
        let eta: f64 = intercept + slopes.iter().zip(&x).map(|(b, v)| b * v).sum::<f64>();
        let y = u8::from(rng.uniform() < 1.0 / (1.0 + (-eta).exp()));
        let fields: Vec<String> = x.iter().map(|v| format!("{v:.6}")).collect();
        writeln!(out, "{},{y}", fields.join(",")).expect("write");
    }
    path
}
