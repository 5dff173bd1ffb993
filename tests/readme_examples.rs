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
    }
    assert!(checked >= 3, "expected at least three command excerpts, found {checked}");
}
