//! `tactread demo` through the built binary: the results table, the caution
//! and the HTML report, and the refusal to overwrite a report.

use std::process::Command;

fn tmpdir(name: &str) -> std::path::PathBuf {
    let d = std::env::temp_dir().join(format!("tactread-demo-test-{}-{name}", std::process::id()));
    let _ = std::fs::remove_dir_all(&d);
    d
}

#[test]
fn demo_prints_table_and_writes_report() {
    let out = tmpdir("report");
    let run = Command::new(env!("CARGO_BIN_EXE_tactread"))
        .args(["demo", "--limit", "1", "--out"])
        .arg(&out)
        .output()
        .expect("run tactread");
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
    let again = Command::new(env!("CARGO_BIN_EXE_tactread"))
        .args(["demo", "--limit", "1", "--out"])
        .arg(&out)
        .output()
        .expect("run tactread");
    assert!(!again.status.success());
    assert!(String::from_utf8_lossy(&again.stderr).contains("--force"));
    let _ = std::fs::remove_dir_all(&out);
}
