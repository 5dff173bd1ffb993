//! A test skipped because an outside tool is missing shows its notice in a
//! plain `cargo test`, where the harness hides what passing tests print
//! through `eprintln!`.

mod common;

use std::process::Command;

/// Skips for a tool that does not exist; run only as the child below.
#[test]
fn a_test_whose_tool_is_missing() {
    if std::env::var("BASERATE_SKIP_PROBE").is_err() {
        return;
    }
    assert!(!common::external_tool("baserate-no-such-tool", &mut Command::new("baserate-no-such-tool")));
}

#[test]
fn skipped_tests_show_their_notice_without_nocapture() {
    let me = std::env::current_exe().expect("the test binary");
    let output = Command::new(me)
        .args(["a_test_whose_tool_is_missing", "--exact", "--test-threads=1"])
        .env("BASERATE_SKIP_PROBE", "1")
        .env_remove("BASERATE_REQUIRE_EXTERNAL")
        .output()
        .expect("run the child");
    assert!(output.status.success(), "{}", String::from_utf8_lossy(&output.stderr));
    let stderr = String::from_utf8_lossy(&output.stderr);
    assert!(stderr.contains("notice: baserate-no-such-tool not available; test skipped"), "{stderr}");
}
