//! The README's command excerpts stay true: every fenced block that starts
//! with `$ baserate ...` is run (after `baserate demo` has made the demo
//! files), and every line the README shows must appear in the output, in
//! order, with the same text.

mod common;

#[test]
fn readme_excerpts_match_the_program() {
    let readme =
        std::fs::read_to_string(std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("README.md")).expect("README.md");
    let dir = common::temp_dir();
    let made = common::baserate(dir.path(), &["demo"]);
    assert!(made.status.success());
    let demo_text = format!("{}{}", String::from_utf8_lossy(&made.stdout), String::from_utf8_lossy(&made.stderr));
    // Fenced blocks, as lists of lines.
    let mut blocks: Vec<Vec<&str>> = Vec::new();
    let mut current: Option<Vec<&str>> = None;
    for line in readme.lines() {
        if line.starts_with("```") {
            match current.take() {
                Some(block) => blocks.push(block),
                None => current = Some(Vec::new()),
            }
        } else if let Some(block) = current.as_mut() {
            block.push(line);
        }
    }
    let mut checked = 0;
    for block in &blocks {
        let mut lines = block.iter().copied();
        let Some(command) = lines.next().and_then(|l| l.strip_prefix("$ baserate ")) else {
            continue;
        };
        let args: Vec<&str> = command.split_whitespace().collect();
        let output = common::baserate(dir.path(), &args);
        let text = format!("{}{}", String::from_utf8_lossy(&output.stdout), String::from_utf8_lossy(&output.stderr));
        let produced: Vec<&str> = text.lines().collect();
        let mut at = 0;
        for expected in lines {
            match produced[at..].iter().position(|l| l.trim_end() == expected.trim_end()) {
                Some(offset) => at += offset + 1,
                None => panic!("README line not produced by `baserate {command}`:\n{expected}\n--- output ---\n{text}"),
            }
        }
        checked += 1;
        tour_matches_the_demo(command, block, &demo_text);
    }
    assert!(checked >= 3, "expected at least three command excerpts, found {checked}");
}

/// The tour runs with the demo's seed, so its figures are the ones the
/// demo printed: the lending comparison's table and the base-rate estimate.
fn tour_matches_the_demo(command: &str, block: &[&str], demo: &str) {
    let demo_lines: Vec<&str> = demo.lines().map(str::trim_end).collect();
    if command.starts_with("compare baserate-demo/lending/train.csv") && command.contains("--report") {
        assert!(command.contains("--seed 20261201"), "the tour's comparison uses the demo's seed: {command}");
        for line in &block[1..] {
            assert!(demo_lines.contains(&line.trim_end()), "the demo does not print the tour's line:\n{line}\n{demo}");
        }
    }
    if command.starts_with("shift ") {
        let em = block.iter().find(|l| l.trim_start().starts_with("em ")).expect("the EM line");
        let share = em.split_whitespace().nth(1).expect("the EM share");
        let interval = em.split("interval ").nth(1).and_then(|r| r.split(',').next()).expect("the interval");
        let expected = format!("share {share} (95% interval {interval})");
        assert!(demo.contains(&expected), "the demo's estimate is not the tour's ({expected}):\n{demo}");
    }
}

/// The README's Rust example is the crate documentation's doctest, which
/// `cargo test` compiles and runs: the two copies must not drift apart.
#[test]
fn the_rust_example_is_the_doctest() {
    let root = std::path::Path::new(env!("CARGO_MANIFEST_DIR"));
    let readme = std::fs::read_to_string(root.join("README.md")).expect("README.md");
    let lib = std::fs::read_to_string(root.join("src/lib.rs")).expect("src/lib.rs");
    let shown = readme.split("```rust\n").nth(1).and_then(|rest| rest.split("\n```").next()).expect("a rust block");
    let doc: Vec<&str> =
        lib.lines().filter_map(|l| l.strip_prefix("//!")).map(|l| l.strip_prefix(' ').unwrap_or(l)).collect();
    let start = doc.iter().position(|l| *l == "```").expect("the doctest's fence") + 1;
    let end = start + doc[start..].iter().position(|l| *l == "```").expect("its closing fence");
    let doctest: Vec<&str> = doc[start..end].iter().copied().filter(|l| !l.starts_with("# ")).collect();
    assert_eq!(shown, doctest.join("\n"), "README.md's Rust example differs from the doctest in src/lib.rs");
}
