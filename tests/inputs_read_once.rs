//! Each input is opened and read once: `fit` from a pipe (a FIFO, as
//! `<(…)` gives) neither hangs nor records the hash of empty input; the
//! recorded `input_sha256` is that of exactly the bytes parsed.

mod common;

use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

use common::{temp_dir, write};

/// Runs `baserate args` in `dir` while another thread writes `contents`
/// into the FIFO `fifo`; fails if the run takes more than a minute.
#[cfg(unix)]
fn fit_through_fifo(dir: &std::path::Path, fifo: &str, contents: Vec<u8>, args: &[&str]) -> (i32, String) {
    let made = Command::new("mkfifo").arg(dir.join(fifo)).status().expect("mkfifo");
    assert!(made.success());
    let path = dir.join(fifo);
    let writer = std::thread::spawn(move || std::fs::write(path, contents).expect("write the fifo"));
    let mut child = Command::new(env!("CARGO_BIN_EXE_baserate"))
        .args(args)
        .current_dir(dir)
        .stdout(Stdio::null())
        .stderr(Stdio::piped())
        .spawn()
        .expect("baserate");
    let start = Instant::now();
    let status = loop {
        if let Some(status) = child.try_wait().expect("wait") {
            break status;
        }
        if start.elapsed() > Duration::from_secs(60) {
            let _ = child.kill();
            panic!("{args:?} did not finish reading the FIFO");
        }
        std::thread::sleep(Duration::from_millis(20));
    };
    writer.join().expect("writer");
    let mut err = String::new();
    if let Some(mut e) = child.stderr.take() {
        let _ = std::io::Read::read_to_string(&mut e, &mut err);
    }
    (status.code().unwrap_or(-1), err)
}

fn recorded_hash(model: &std::path::Path) -> String {
    let text = std::fs::read_to_string(model).expect("model");
    let v: serde_json::Value = serde_json::from_str(&text).expect("json");
    v["training"]["input_sha256"].as_str().or_else(|| v["input_sha256"].as_str()).unwrap_or_default().to_string()
}

#[cfg(unix)]
#[test]
fn fit_reads_a_fifo_once_and_hashes_what_it_read() {
    let dir = temp_dir();
    let d = dir.path();
    let mut text = String::from("x,y\n");
    for i in 0..60 {
        text.push_str(&format!("{},{}\n", (i % 9) as f64 / 2.0, if i % 3 == 0 { "a" } else { "b" }));
    }
    let regular = write(d, "rows.csv", text.as_bytes());
    // The reference: the SHA-256 of the same bytes read from a regular file,
    // by Python's hashlib where present, else by the file-hashing routine.
    let expected = Command::new("python3")
        .args(["-c", "import hashlib,sys; print(hashlib.sha256(open(sys.argv[1],'rb').read()).hexdigest())"])
        .arg(&regular)
        .output()
        .ok()
        .filter(|o| o.status.success())
        .map(|o| String::from_utf8_lossy(&o.stdout).trim().to_string())
        .unwrap_or_else(|| baserate::io::sha256_file(&regular).expect("hash"));
    let args = ["fit", "pipe.csv", "--target", "y", "--family", "lda", "-o", "m.json"];
    let (code, err) = fit_through_fifo(d, "pipe.csv", text.into_bytes(), &args);
    assert_eq!(code, 0, "{err}");
    let hash = recorded_hash(&d.join("m.json"));
    assert_eq!(hash, expected, "the model records the hash of the bytes parsed");
    assert_ne!(hash, "e3b0c44298fc1c149afbf4c8996fb92427ae41e4649b934ca495991b7852b855", "not the empty input's");
}
