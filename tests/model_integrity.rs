//! A model file carries a checksum of its content: an edited file is
//! refused with exit 1 naming it, unless the edit is accepted, and then the
//! acceptance is recorded; a file of the earlier format (no checksum)
//! loads with a warning; a file larger than any model is refused before
//! it is parsed.

mod common;

use common::{run, temp_dir, write};
use serde_json::Value;

fn fitted(dir: &std::path::Path) -> String {
    let files = baserate::demo::generate(baserate::demo::DEFAULT_SEED, baserate::demo::DemoSize::uniform(400));
    write(dir, "train.csv", files[0].contents.as_bytes());
    write(dir, "new.csv", files[1].contents.as_bytes());
    let args = ["fit", "train.csv", "--target", "outcome", "--id", "application_id,application_month"];
    let mut args = args.to_vec();
    args.extend(["--missing", "impute", "--family", "logistic", "-o", "m.json"]);
    let (code, _, err) = run(dir, &args);
    assert_eq!(code, 0, "{err}");
    std::fs::read_to_string(dir.join("m.json")).expect("model")
}

/// The model with its intercept moved by `delta` (the edit that once
/// scored silently with posteriors 55 times smaller), edited as text, as a
/// person with an editor would.
fn with_intercept_moved(text: &str, delta: f64) -> String {
    let start = text.find("\"intercept\": ").expect("intercept") + "\"intercept\": ".len();
    let end = start + text[start..].find([',', '\n']).expect("end");
    let moved = text[start..end].parse::<f64>().expect("number") + delta;
    format!("{}{moved}{}", &text[..start], &text[end..])
}

/// The file without its checksum line (the last member).
fn without_checksum(text: &str) -> String {
    let start = text.find(",\n  \"checksum\"").expect("checksum");
    let end = start + 2 + text[start + 2..].find('\n').expect("line end");
    format!("{}{}", &text[..start], &text[end..])
}

/// The file as one line, whitespace outside strings removed.
fn minified(text: &str) -> String {
    let (mut out, mut in_string, mut escaped) = (String::new(), false, false);
    for c in text.chars() {
        if in_string {
            in_string = escaped || c != '"';
            escaped = !escaped && c == '\\';
        } else if c.is_whitespace() {
            continue;
        } else {
            in_string = c == '"';
        }
        out.push(c);
    }
    out
}

#[test]
fn an_edited_model_is_refused_unless_accepted_and_then_recorded() {
    let dir = temp_dir();
    let d = dir.path();
    let good = fitted(d);
    let model: Value = serde_json::from_str(&good).expect("json");
    assert_eq!(model["format_version"], 2);
    assert!(model["checksum"].as_str().is_some_and(|c| c.starts_with("sha256:") && c.len() == 71));

    // Layout is not content: on one line, the file still verifies.
    let compact = minified(&good);
    assert!(compact.len() < good.len() && !compact.contains('\n'));
    write(d, "compact.json", compact.as_bytes());
    let (code, json, err) = run(d, &["inspect", "compact.json", "--json", "-"]);
    assert_eq!(code, 0, "{err}");
    assert_eq!(serde_json::from_str::<Value>(&json).expect("json")["integrity"], "verified");

    write(d, "edited.json", with_intercept_moved(&good, -4.0).as_bytes());
    for args in [
        vec!["score", "edited.json", "new.csv", "-o", "out.csv"],
        vec!["inspect", "edited.json"],
        vec!["export-sql", "edited.json", "--table", "t"],
        vec!["shift", "edited.json", "new.csv"],
    ] {
        let (code, _, err) = run(d, &args);
        assert_eq!(code, 1, "{args:?}: {err}");
        assert!(err.contains("edited.json") && err.contains("does not match its checksum"), "{args:?}: {err}");
        assert!(err.contains("--accept-edited-model"), "{err}");
    }
    assert!(!d.join("out.csv").exists());

    let (code, _, err) =
        run(d, &["score", "edited.json", "new.csv", "-o", "out.csv", "--summary", "s.json", "--accept-edited-model"]);
    assert_eq!(code, 0, "{err}");
    assert!(err.contains("warning: edited.json has been edited"), "{err}");
    let summary: Value = serde_json::from_str(&std::fs::read_to_string(d.join("s.json")).expect("s")).expect("json");
    assert_eq!(summary["model_integrity"], "edit-accepted");
    let (_, sql, _) = run(d, &["export-sql", "edited.json", "--table", "t", "--accept-edited-model"]);
    assert!(sql.contains("-- model file content: edit-accepted"), "{sql}");
    let (_, shift, _) = run(d, &["shift", "edited.json", "new.csv", "--json", "-", "--accept-edited-model"]);
    assert_eq!(serde_json::from_str::<Value>(&shift).expect("json")["model_integrity"], "edit-accepted");

    // Unedited, the run says so.
    let (code, _, err) = run(d, &["score", "m.json", "new.csv", "-o", "out.csv", "--summary", "s.json"]);
    assert_eq!(code, 0, "{err}");
    let summary: Value = serde_json::from_str(&std::fs::read_to_string(d.join("s.json")).expect("s")).expect("json");
    assert_eq!(summary["model_integrity"], "verified");

    // A version 2 file without its checksum is an edit too; a field the
    // format does not have (a padding array) is refused as corrupt.
    write(d, "stripped.json", without_checksum(&good).as_bytes());
    let (code, _, err) = run(d, &["inspect", "stripped.json"]);
    assert!(code == 1 && err.contains("has no checksum"), "{err}");
    let padding = format!("{{\n  \"padding\": [{}],", vec!["0"; 1000].join(","));
    write(d, "padded.json", good.replacen('{', &padding, 1).as_bytes());
    let (code, _, err) = run(d, &["inspect", "padded.json"]);
    assert!(code == 1 && err.contains("padded.json") && err.contains("does not match its checksum"), "{err}");
    let (code, _, err) = run(d, &["inspect", "padded.json", "--accept-edited-model"]);
    assert!(code == 1 && err.contains("unknown field `padding`"), "{err}");
}

#[test]
fn a_file_of_the_earlier_format_loads_with_a_warning() {
    let dir = temp_dir();
    let d = dir.path();
    let good = fitted(d);
    let v1 = without_checksum(&good).replacen("\"format_version\": 2", "\"format_version\": 1", 1);
    write(d, "v1.json", v1.as_bytes());
    let (code, _, err) = run(d, &["score", "v1.json", "new.csv", "-o", "a.csv", "--summary", "s.json"]);
    assert_eq!(code, 0, "{err}");
    assert!(err.contains("v1.json") && err.contains("format version 1, which carries no checksum"), "{err}");
    let summary: Value = serde_json::from_str(&std::fs::read_to_string(d.join("s.json")).expect("s")).expect("json");
    assert_eq!(summary["model_integrity"], "no-checksum");
    // It scores exactly as the file it came from.
    assert_eq!(run(d, &["score", "m.json", "new.csv", "-o", "b.csv"]).0, 0);
    assert_eq!(std::fs::read(d.join("a.csv")).expect("a"), std::fs::read(d.join("b.csv")).expect("b"));
}

#[test]
fn a_file_larger_than_any_model_is_refused_before_parsing() {
    let dir = temp_dir();
    let d = dir.path();
    fitted(d);
    // A sparse file of 1 GiB: refused on its size alone, so the test
    // neither writes nor reads a gigabyte.
    let huge = std::fs::File::create(d.join("huge.json")).expect("create");
    huge.set_len(1 << 30).expect("sparse");
    let (code, _, err) = run(d, &["score", "huge.json", "new.csv", "-o", "out.csv"]);
    assert_eq!(code, 1, "{err}");
    assert!(err.contains("huge.json") && err.contains("larger than 256 MiB"), "{err}");
    assert!(!d.join("out.csv").exists());
    // Within the size bound, values packed densely (a known field padded
    // with zeros) are refused on the first pass's count, before anything
    // is built from them.
    let good = std::fs::read_to_string(d.join("m.json")).expect("model");
    let zeros = vec!["0"; 20_000_000].join(",");
    let dense = good.replacen("\"prior\": [", &format!("\"prior\": [{zeros},"), 1);
    write(d, "dense.json", dense.as_bytes());
    let (code, _, err) = run(d, &["inspect", "dense.json", "--accept-edited-model"]);
    assert!(code == 1 && err.contains("packed more densely than any model file"), "{err}");
}
