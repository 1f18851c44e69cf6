//! `tactread demo` through the built binary: the results table, the caution
//! and the HTML report, and the refusal to overwrite a report.

mod common;

use common::cli::{s, scratch, tactread};

#[test]
fn demo_prints_table_and_writes_report() {
    let out = scratch("report");
    let run = tactread(&["demo", "--limit", "1", "--out", s(&out)]);
    let stdout = String::from_utf8_lossy(&run.stdout);
    assert!(
        run.status.success(),
        "demo failed: {}",
        String::from_utf8_lossy(&run.stderr)
    );
    for needle in [
        "without lexicon",
        "with lexicon",
        "dot accuracy",
        "character accuracy",
        "word accuracy",
        "truth:",
        "medicine",
    ] {
        assert!(stdout.contains(needle), "missing {needle:?} in:\n{stdout}");
    }
    let report = out.join("report.html");
    let html = std::fs::read_to_string(&report).expect("report written");
    assert!(
        html.contains("<html") || html.contains("<!DOCTYPE"),
        "not HTML"
    );
    assert!(
        stdout.contains(&report.display().to_string()),
        "does not say where"
    );

    // A second run refuses to overwrite without --force, and names the way out.
    let again = tactread(&["demo", "--limit", "1", "--out", s(&out)]);
    assert!(!again.status.success());
    assert!(String::from_utf8_lossy(&again.stderr).contains("--force"));
}
