//! Enforces the crate's import layering. Every top-level module under `src/` sits on a floor, and a
//! file may use its own module or a module on a lower floor, never one above it or beside it on the
//! same floor (which would let two folders depend on each other). The module import graph must also
//! be free of cycles, and every top-level module must be given a floor.
//!
//! `FLOORS` below is the one place the layering is defined: to add a folder, give it a floor there.
//!
//! The check reads source text, not compiler output: it drops comments and string literals, then
//! follows every `crate::`, `super::` and `self::` path, both in `use` trees and inline in code.
//! The crate root (`src/lib.rs`) may declare and re-export anything; names it defines count as floor 0.

use std::collections::{BTreeMap, BTreeSet};
use std::fs;
use std::path::Path;

/// Top-level modules and their floors, lowest first.
const FLOORS: &[(&str, u32)] = &[
    ("error", 0),    // the library's error type
    ("rng", 0),      // small utility: seeded random numbers
    ("progress", 0), // small utility: counts of finished work for a callback
    ("format", 1),   // number formatting
    ("io", 1),       // small utility: atomic files, hashes and timestamps
    ("tails", 1),    // tail probabilities of the normal and chi-square distributions
    ("records", 2),  // the one CSV record splitter and field parser
    ("demo", 2),     // invented scenarios: only generate data
    ("data", 3),     // datasets, schemas and reading them
    ("model", 4),    // families, moments, calibration maps, training-distribution summary
    ("prior", 5),    // prior specs, odds correction, shift estimation
    ("decide", 6),   // expected-cost decisions
    ("evaluate", 7), // metrics, ROC and model comparison
    ("train", 8),    // training and the model file
    ("apply", 9),    // a model's schema applied to rows: header check, fills, reject reasons
    ("batch", 10),   // deployment wing: batch scoring
    ("export", 10),  // deployment wing: SQL export
    ("interop", 10), // the families behind linfa's traits (feature linfa)
    ("report", 11),  // tables and reports
    ("cli", 12),     // the binary (src/main.rs and src/cli/): may import anything
];

/// A token of source text and the line it is on.
type Token = (String, usize);

/// The floor of a top-level module, or `None` if it has not been given one.
fn floor(module: &str) -> Option<u32> {
    FLOORS.iter().find(|(name, _)| *name == module).map(|&(_, floor)| floor)
}

/// The module path a file defines: `src/batch/chunk.rs` -> `[batch, chunk]`, `src/lib.rs` -> `[]`.
fn module_path(path: &str) -> Vec<String> {
    let inner = path.strip_prefix("src/").unwrap_or(path).trim_end_matches(".rs");
    let mut parts: Vec<String> = inner.split('/').map(str::to_string).collect();
    if parts.last().map(String::as_str) == Some("mod") || inner == "lib" || inner == "main" {
        parts.pop();
    }
    parts
}

/// Splits source text into words, `::` and single punctuation marks, each with its line. Comments,
/// string literals (normal and raw) and char literals are dropped, so text in them never counts.
fn tokens(text: &str) -> Vec<Token> {
    let chars: Vec<char> = text.chars().collect();
    let at = |i: usize| chars.get(i).copied().unwrap_or('\0');
    let is_word = |c: char| c.is_alphanumeric() || c == '_';
    let mut out = Vec::new();
    let (mut i, mut line) = (0, 1);
    while i < chars.len() {
        let c = chars[i];
        let end = if c == '/' && at(i + 1) == '/' {
            (i..chars.len()).find(|&j| chars[j] == '\n').unwrap_or(chars.len())
        } else if c == '/' && at(i + 1) == '*' {
            block_comment_end(&chars, i)
        } else if c == '"' {
            string_end(&chars, i + 1, None)
        } else if c == '\'' && at(i + 1) == '\\' {
            (i + 3..chars.len()).find(|&j| chars[j] == '\'').map_or(chars.len(), |j| j + 1)
        } else if c == '\'' && at(i + 2) == '\'' {
            i + 3 // a char literal such as '"'; a lifetime such as 'a has no closing quote
        } else if is_word(c) {
            let word_end = (i..chars.len()).find(|&j| !is_word(chars[j])).unwrap_or(chars.len());
            let word: String = chars[i..word_end].iter().collect();
            let hashes = (word_end..chars.len()).take_while(|&j| chars[j] == '#').count();
            if matches!(word.as_str(), "r" | "br" | "cr") && at(word_end + hashes) == '"' {
                string_end(&chars, word_end + hashes + 1, Some(hashes))
            } else {
                out.push((word, line));
                word_end
            }
        } else if c == ':' && at(i + 1) == ':' {
            out.push(("::".to_string(), line));
            i + 2
        } else {
            if !c.is_whitespace() {
                out.push((c.to_string(), line));
            }
            i + 1
        };
        line += chars[i..end].iter().filter(|&&c| c == '\n').count();
        i = end;
    }
    out
}

/// The index just past the block comment that starts at `from`; block comments nest.
fn block_comment_end(chars: &[char], from: usize) -> usize {
    let (mut j, mut depth) = (from, 0);
    while j + 1 < chars.len() {
        match (chars[j], chars[j + 1]) {
            ('/', '*') => depth += 1,
            ('*', '/') => depth -= 1,
            _ => {
                j += 1;
                continue;
            }
        }
        j += 2;
        if depth == 0 {
            return j;
        }
    }
    chars.len()
}

/// The index just past a string literal whose text starts at `from`: a normal string ends at an
/// unescaped `"`, a raw string with `n` hashes at a `"` followed by `n` times `#`.
fn string_end(chars: &[char], from: usize, raw: Option<usize>) -> usize {
    let mut j = from;
    while j < chars.len() {
        match (chars[j], raw) {
            ('\\', None) => j += 2,
            ('"', None) => return j + 1,
            ('"', Some(n)) if chars[j + 1..].iter().take_while(|&&c| c == '#').count() >= n => return j + 1 + n,
            _ => j += 1,
        }
    }
    chars.len()
}

/// Where a path lands, seen from module `here`: the line and the top-level module below the crate
/// root (`crate` for the root itself), or `None` if the path does not start at `crate`, `super` or
/// `self`, or stays inside `here`'s top-level module.
fn resolve(path: &[Token], here: &[String]) -> Option<(usize, String)> {
    let (mut module, mut rest) = match path.first()?.0.as_str() {
        "crate" => (Vec::new(), &path[1..]),
        "self" => (here.to_vec(), &path[1..]),
        "super" => (here.to_vec(), path),
        _ => return None,
    };
    while rest.first().is_some_and(|(word, _)| word == "super") {
        module.pop();
        rest = &rest[1..];
    }
    match rest.first() {
        _ if !module.is_empty() => None,
        Some((name, line)) if name != "self" => Some((*line, name.clone())),
        _ => path.last().map(|(_, line)| (*line, "crate".to_string())),
    }
}

/// Reads the path or use tree at token `i` (below `prefix`, inside a group), records where each
/// full path lands, and returns the index of the first token after it.
fn tree(toks: &[Token], mut i: usize, prefix: &[Token], here: &[String], found: &mut Vec<(usize, String)>) -> usize {
    let at = |i: usize| toks.get(i).map_or("", |t| t.0.as_str());
    let mut path = prefix.to_vec();
    loop {
        if at(i) == "{" {
            i += 1;
            while !matches!(at(i), "}" | "") {
                let next = tree(toks, i, &path, here, found);
                i = if at(next) == "," { next + 1 } else { next.max(i + 1) };
            }
            return i + 1;
        }
        if at(i).starts_with(|c: char| c.is_alphabetic() || c == '_') {
            path.push(toks[i].clone());
            i += 1;
            if at(i) == "::" {
                i += 1;
                continue;
            }
        } else if at(i) == "*" {
            i += 1;
        }
        if path.len() > prefix.len() {
            found.extend(resolve(&path, here));
        }
        if at(i) == "as" {
            i += 2;
        }
        return i;
    }
}

/// Every path in a file that leaves its top-level module: (line, first module below the crate root).
fn crate_paths(file: &str, text: &str) -> Vec<(usize, String)> {
    let toks = tokens(text);
    let at = |i: usize| toks.get(i).map_or("", |t| t.0.as_str());
    let mut here = module_path(file);
    let mut open = Vec::new(); // the brace depth outside each inline `mod name { ... }`
    let (mut found, mut depth, mut i) = (Vec::new(), 0, 0);
    while i < toks.len() {
        match at(i) {
            "use" => {
                i = tree(&toks, i + 1, &[], &here, &mut found);
                continue;
            }
            "crate" | "super" | "self" if at(i + 1) == "::" => {
                i = tree(&toks, i, &[], &here, &mut found);
                continue;
            }
            "mod" if at(i + 2) == "{" => {
                here.push(at(i + 1).to_string());
                open.push(depth);
            }
            "{" => depth += 1,
            "}" => {
                depth -= 1;
                if open.last() == Some(&depth) {
                    open.pop();
                    here.pop();
                }
            }
            _ => {}
        }
        i += 1;
    }
    found
}

/// The names `src/lib.rs` defines or re-exports at its top level (not its `mod` declarations).
fn root_items(text: &str) -> BTreeSet<String> {
    let toks = tokens(text);
    let at = |i: usize| toks.get(i).map_or("", |t| t.0.as_str());
    let (mut items, mut depth, mut in_use) = (BTreeSet::new(), 0, false);
    for i in 0..toks.len() {
        match at(i) {
            "{" => depth += 1,
            "}" => depth -= 1,
            "use" if depth == 0 => in_use = true,
            ";" => in_use = false,
            "fn" | "const" | "static" | "struct" | "enum" | "trait" | "type" | "union" if depth == 0 && !in_use => {
                items.insert(at(i + 1).to_string());
            }
            word if in_use && matches!(at(i + 1), "," | "}" | ";") => {
                items.insert(word.to_string());
            }
            _ => {}
        }
    }
    items
}

/// Groups of modules that import each other, directly or through others, each group sorted.
fn cycles(graph: &BTreeMap<String, BTreeSet<String>>) -> Vec<Vec<String>> {
    let reach = |start: &String| -> BTreeSet<String> {
        let (mut seen, mut stack) = (BTreeSet::new(), vec![start.clone()]);
        while let Some(module) = stack.pop() {
            for next in graph.get(&module).into_iter().flatten() {
                if seen.insert(next.clone()) {
                    stack.push(next.clone());
                }
            }
        }
        seen
    };
    let reachable: BTreeMap<&String, BTreeSet<String>> = graph.keys().map(|module| (module, reach(module))).collect();
    let mut groups = BTreeSet::new();
    for (module, seen) in &reachable {
        let back = |other: &&String| reachable.get(other).is_some_and(|theirs| theirs.contains(*module));
        let group: Vec<String> = seen.iter().filter(back).cloned().collect();
        if group.len() > 1 {
            groups.insert(group);
        }
    }
    groups.into_iter().collect()
}

/// Checks the layering of (path relative to the crate root, text) pairs and returns one line per
/// problem: an import that does not go down a floor, a module without a floor, an import cycle.
fn check(files: &[(String, String)]) -> Vec<String> {
    let items = files.iter().find(|(path, _)| path == "src/lib.rs").map(|(_, text)| root_items(text));
    let items = items.unwrap_or_default();
    let mut problems = BTreeSet::new();
    let mut graph: BTreeMap<String, BTreeSet<String>> = BTreeMap::new();
    // lib.rs may declare and re-export anything; main.rs reaches the library as `baserate::`.
    for (path, text) in files.iter().filter(|(path, _)| path != "src/lib.rs" && path != "src/main.rs") {
        let from = module_path(path).into_iter().next().unwrap_or_default(); // src/cli/ is `cli`
        let Some(from_floor) = floor(&from) else {
            problems.insert((path.clone(), 1, format!("module {from} is not in the floor list")));
            continue;
        };
        for (line, name) in crate_paths(path, text) {
            let (to, to_floor) = match floor(&name) {
                Some(to_floor) => (name, to_floor),
                None if name == "crate" || items.contains(&name) => ("crate".to_string(), 0),
                None => {
                    problems.insert((path.clone(), line, format!("module {name} is not in the floor list")));
                    continue;
                }
            };
            if to == from {
                continue;
            }
            if to_floor >= from_floor {
                let message = format!("{from} (floor {from_floor}) imports {to} (floor {to_floor})");
                problems.insert((path.clone(), line, message));
            }
            graph.entry(from.clone()).or_default().insert(to);
        }
    }
    let loops = cycles(&graph).into_iter().map(|group| format!("import cycle between modules: {}", group.join(", ")));
    problems.into_iter().map(|(path, line, text)| format!("{path}:{line}: {text}")).chain(loops).collect()
}

/// Every `.rs` file under `dir`, as (path relative to `root` with `/` separators, text), sorted.
fn rust_files(root: &Path, dir: &Path, files: &mut Vec<(String, String)>) {
    let entries = fs::read_dir(dir).unwrap_or_else(|e| panic!("read {}: {e}", dir.display()));
    let mut paths: Vec<_> = entries.map(|entry| entry.expect("read a folder entry").path()).collect();
    paths.sort();
    for path in paths {
        if path.is_dir() {
            rust_files(root, &path, files);
        } else if path.extension().is_some_and(|ext| ext == "rs") {
            let relative = path.strip_prefix(root).expect("a source file under the crate root");
            let parts: Vec<_> = relative.components().map(|part| part.as_os_str().to_string_lossy()).collect();
            let text = fs::read_to_string(&path).unwrap_or_else(|e| panic!("read {}: {e}", path.display()));
            files.push((parts.join("/"), text));
        }
    }
}

#[test]
fn imports_only_go_down_the_floors() {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let mut files = Vec::new();
    rust_files(root, &root.join("src"), &mut files);
    assert!(files.iter().any(|(path, _)| path == "src/lib.rs"), "no src/lib.rs among {} files", files.len());
    let problems = check(&files);
    assert!(
        problems.is_empty(),
        "{} layering problem(s); the floors are defined in FLOORS at the top of tests/layers.rs:\n{}\n",
        problems.len(),
        problems.join("\n")
    );
}

#[test]
fn the_checker_catches_an_upward_import() {
    let data = r##"//! Docs may mention crate::report::table without it counting.
use crate::report::table;
use crate::{
    error::Error,
    rng::{self, Rng},
    export::sql as to_sql,
};
// use crate::decide::Cost;
/* crate::evaluate::roc /* nested */ crate::prior::Spec */
fn f<'a>(name: &'a str) -> Result<String, Error> {
    let message = "see crate::decide::decide and \"crate::apply\"";
    let raw = r#"crate::train::Model "quoted""#;
    crate::batch::run(name, message, raw, '"', crate::data::Dataset::default())
}
"##;
    let demo = "use super::super::records::split;\nuse super::scenario::Scenario;\n\
                mod tests {\n    use super::*;\n    use crate::warehouse::Table;\n}\n";
    let report = "use crate::data::Dataset;\npub use super::rng::Rng;\n";
    let cli = "use crate::report::table;\nuse crate::cli::Args;\n";
    let files: Vec<(String, String)> =
        [("src/data/x.rs", data), ("src/demo/y.rs", demo), ("src/report/mod.rs", report), ("src/cli/run.rs", cli)]
            .iter()
            .map(|&(path, text)| (path.to_string(), text.to_string()))
            .collect();
    let expected = [
        "src/data/x.rs:2: data (floor 3) imports report (floor 11)",
        "src/data/x.rs:6: data (floor 3) imports export (floor 10)",
        "src/data/x.rs:13: data (floor 3) imports batch (floor 10)",
        "src/demo/y.rs:1: demo (floor 2) imports records (floor 2)",
        "src/demo/y.rs:5: module warehouse is not in the floor list",
        "import cycle between modules: data, report",
    ];
    assert_eq!(check(&files), expected);
}
