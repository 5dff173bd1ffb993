//! A bounded run of the fuzz harness (see `tests/fuzzing`): CSV files and
//! model files generated and mutated from seeds, run in-process under
//! `catch_unwind` and checked against the invariants; one case in 400 also
//! runs the program. `BASERATE_FUZZ_CASES` sets how many (default 6,000,
//! well under two minutes); `examples/fuzz.rs` runs any number.

mod fuzzing;

#[test]
fn generated_and_mutated_inputs_keep_the_invariants() {
    let cases: u64 = std::env::var("BASERATE_FUZZ_CASES").ok().and_then(|v| v.parse().ok()).unwrap_or(6_000);
    let harness = fuzzing::Harness::new();
    let program = std::path::Path::new(env!("CARGO_BIN_EXE_baserate"));
    let mut failures = Vec::new();
    for seed in 0..cases {
        // One CSV case (seed % 4 != 3) and one model case in every 400.
        let binary = (seed % 400 == 5 || seed % 400 == 7).then_some(program);
        if let Err(problem) = harness.run(seed, 0, binary) {
            failures.push(format!("seed {seed} ({:?}): {problem}", fuzzing::kind_of(seed)));
        }
    }
    assert!(failures.is_empty(), "{} of {cases} cases failed:\n{}", failures.len(), failures.join("\n"));
}
