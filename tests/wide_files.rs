//! What the counts rule out is refused before any pass over the rows, with
//! the remedy: QDA with no more rows in a class than inputs, LDA with at
//! least n − K inputs and no diagonal weight, and any fit whose memory
//! estimate exceeds `--memory-limit` (default: half the machine's memory).

mod common;

use common::{run, temp_dir, write};

/// `rows` rows of `columns` numeric inputs and a two-class label.
fn wide(dir: &std::path::Path, rows: usize, columns: usize) {
    let mut rng = baserate::rng::Rng::new(5);
    let mut text: String = (0..columns).map(|j| format!("c{j},")).collect();
    text.push_str("y\n");
    for i in 0..rows {
        for _ in 0..columns {
            text.push_str(&format!("{:.4},", rng.uniform()));
        }
        text.push_str(if i % 3 == 0 { "b\n" } else { "a\n" });
    }
    write(dir, "wide.csv", text.as_bytes());
}

#[test]
fn wide_files_are_refused_before_the_fit_starts() {
    let dir = temp_dir();
    let d = dir.path();
    wide(d, 200, 5000);
    let (code, _, err) = run(d, &["fit", "wide.csv", "--target", "y", "--family", "lda", "-o", "m.json"]);
    assert_eq!(code, 1, "{err}");
    assert!(
        err.contains("200 rows in 2 classes leave 198 degrees of freedom for a pooled covariance of 5000 inputs"),
        "{err}"
    );
    assert!(err.contains("--diagonal-weight ledoit-wolf"), "{err}");
    let (code, _, err) = run(d, &["fit", "wide.csv", "--target", "y", "--family", "qda", "-o", "m.json"]);
    assert_eq!(code, 1, "{err}");
    assert!(err.contains("class 'a' has 133 rows with positive weight, and needs at least 5001"), "{err}");
    assert!(err.contains("--pooled-weight"), "{err}");
    let (code, _, err) =
        run(d, &["fit", "wide.csv", "--target", "y", "--family", "qda", "--pooled-weight", "0.1", "-o", "m.json"]);
    assert_eq!(code, 1, "{err}");
    assert!(err.contains("pooled covariance of 5000 inputs") && err.contains("cannot mend"), "{err}");
    let (code, _, err) =
        run(d, &["fit", "wide.csv", "--target", "y", "--family", "logistic", "--memory-limit", "100M", "-o", "m.json"]);
    assert_eq!(code, 1, "{err}");
    assert!(err.contains("above the limit of 0.1 GiB") && err.contains("--memory-limit"), "{err}");
    assert!(!d.join("m.json").exists());
    // In a comparison the refused families are failed results, decided
    // before any fold; naive Bayes is evaluated.
    let (code, out, err) = run(
        d,
        &["compare", "wide.csv", "--target", "y", "--family", "naive-bayes", "--family", "lda", "--family", "qda"],
    );
    assert_eq!(code, 0, "{err}");
    assert!(out.contains("lda          FAILED in the checks before fitting"), "{out}");
    assert!(out.contains("qda          FAILED in the checks before fitting"), "{out}");
}

#[test]
fn a_memory_limit_must_be_a_size() {
    let dir = temp_dir();
    let d = dir.path();
    wide(d, 30, 3);
    let (code, _, err) =
        run(d, &["fit", "wide.csv", "--target", "y", "--family", "lda", "--memory-limit", "lots", "-o", "m.json"]);
    assert_eq!(code, 2, "{err}");
    assert!(err.contains("'lots' is not a size"), "{err}");
    let (code, _, err) =
        run(d, &["fit", "wide.csv", "--target", "y", "--family", "lda", "--memory-limit", "1G", "-o", "m.json"]);
    assert_eq!(code, 0, "{err}");
}
