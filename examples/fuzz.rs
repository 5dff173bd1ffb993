//! The fuzz harness at any size: `cargo run --release --example fuzz --
//! CASES [FIRST_SEED] [THREADS]`. Prints the failures (each with its seed,
//! to rerun alone) and the rate in cases per second. See `tests/fuzzing`.

#[path = "../tests/fuzzing/mod.rs"]
mod fuzzing;

use std::sync::atomic::{AtomicU64, Ordering};

fn main() {
    // `fuzz dump SEED`: the CSV case of SEED on stdout, to look at.
    if std::env::args().nth(1).as_deref() == Some("dump") {
        let seed = std::env::args().nth(2).and_then(|v| v.parse().ok()).unwrap_or(0);
        let case = fuzzing::csv_case(seed);
        eprintln!("{case:?}", case = (case.max_record_bytes, case.chunk_bytes, case.threads, case.unseen));
        std::io::Write::write_all(&mut std::io::stdout(), &case.bytes).ok();
        return;
    }
    // `fuzz model`: the harness's model file on stdout.
    if std::env::args().nth(1).as_deref() == Some("model") {
        std::io::Write::write_all(&mut std::io::stdout(), &fuzzing::Harness::new().model_bytes).ok();
        return;
    }
    let arg = |i: usize, default: u64| std::env::args().nth(i).and_then(|v| v.parse().ok()).unwrap_or(default);
    let (cases, first, threads) = (arg(1, 100_000), arg(2, 0), arg(3, 2).max(1));
    // A panic is reported as a failure with its seed; the default hook
    // would print it too.
    std::panic::set_hook(Box::new(|_| {}));
    // Cases are small: the parallel reader's idle workers would only spin.
    let _ = rayon::ThreadPoolBuilder::new().num_threads(1).build_global();
    let harness = fuzzing::Harness::new();
    let next = AtomicU64::new(first);
    let failed = AtomicU64::new(0);
    let started = std::time::Instant::now();
    std::thread::scope(|scope| {
        for slot in 0..threads as usize {
            let (harness, next, failed) = (&harness, &next, &failed);
            scope.spawn(move || loop {
                let seed = next.fetch_add(1, Ordering::Relaxed);
                if seed >= first + cases {
                    break;
                }
                if let Err(problem) = harness.run(seed, slot, None) {
                    failed.fetch_add(1, Ordering::Relaxed);
                    let shown: String = problem.chars().take(400).collect();
                    println!("seed {seed} ({:?}): {shown}", fuzzing::kind_of(seed));
                }
                if (seed + 1 - first) % 100_000 == 0 {
                    eprintln!("{} cases, {:.0} s", seed + 1 - first, started.elapsed().as_secs_f64());
                }
            });
        }
    });
    let seconds = started.elapsed().as_secs_f64();
    println!(
        "{cases} cases (seeds {first}..{}) on {threads} threads: {} failed; {seconds:.1} s, {:.0} cases/s",
        first + cases,
        failed.load(Ordering::Relaxed),
        cases as f64 / seconds
    );
}
