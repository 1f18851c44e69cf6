// The `tactread inspect` command, run through the built binary: what it
// prints for good recordings (text and --json), and how bad recordings end
// (one-line error naming file, row and column; exit code; no panic).

mod common;

use common::cli::{scratch, tactread};
use std::path::{Path, PathBuf};

fn compat(rel: &str) -> String {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("tests/compat")
        .join(rel)
        .display()
        .to_string()
}

/// A recording `bad.json` + `bad.csv` with a NaN in data row 3, column taxel_1.
fn nan_in_row_3(dir: &Path) -> PathBuf {
    std::fs::write(
        dir.join("bad.csv"),
        "time_s,taxel_0,taxel_1\n0.00,0.1,0.2\n0.01,0.1,0.2\n0.02,0.1,NaN\n0.03,0.1,0.2\n",
    )
    .unwrap();
    std::fs::write(
        dir.join("bad.json"),
        r#"{"format": "tactread-recording", "version": 1, "frames": "bad.csv",
            "sensor": {"taxels": 2, "sample_rate_hz": 100}}"#,
    )
    .unwrap();
    dir.join("bad.json")
}

#[test]
fn nan_in_row_3_is_a_one_line_error_naming_file_and_row() {
    let dir = scratch("nan");
    let manifest = nan_in_row_3(&dir);
    for arg in [manifest.clone(), dir.join("bad.csv")] {
        let out = tactread(&["inspect", arg.to_str().unwrap()]);
        assert_eq!(out.status.code(), Some(1), "input errors exit with 1");
        let stderr = String::from_utf8(out.stderr).unwrap();
        assert_eq!(stderr.lines().count(), 1, "one line: {stderr}");
        assert!(!stderr.contains("panicked"), "{stderr}");
        let csv = dir.join("bad.csv").display().to_string();
        assert!(
            stderr.starts_with(&format!(
                "error: {csv} line 4, field `taxel_1`: data row 3: NaN"
            )),
            "{stderr}"
        );
        assert!(out.stdout.is_empty());
    }
}

#[test]
fn inspect_summarises_the_worked_example() {
    let out = tactread(&["inspect", &compat("v1/tea-jar.json")]);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let text = String::from_utf8(out.stdout).unwrap();
    for needle in [
        "frames       5 (CSV,",
        "duration     0.080 s",
        "taxels       4 (units kPa, sensor strip4)",
        "sample rate  50 Hz in the manifest, 50.00 Hz measured",
        "position     0.000 .. 1.600 mm",
        "values       0.09 .. 4.1 kPa",
        "text         \"tea\" (en)",
    ] {
        assert!(text.contains(needle), "missing {needle:?} in\n{text}");
    }
}

#[test]
fn inspect_json_reports_each_recording() {
    let dir = scratch("json");
    let bad = nan_in_row_3(&dir);
    let out = tactread(&[
        "inspect",
        "--json",
        &compat("v1/tea-jar-npy.npy"),
        bad.to_str().unwrap(),
    ]);
    assert_eq!(out.status.code(), Some(1));
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let items = v.as_array().unwrap();
    assert_eq!(items.len(), 2);
    let good = &items[0];
    assert_eq!(good["ok"], true);
    assert_eq!(good["frames"], 5);
    assert_eq!(good["frames_kind"], "npy");
    assert_eq!(good["taxels"], 4);
    assert_eq!(good["duration_s"], 0.08);
    assert_eq!(good["position_mm"]["max"], 1.6);
    assert_eq!(good["values"]["min"], 0.09);
    assert_eq!(good["values"]["max"], 4.1);
    assert_eq!(good["text"], "tea");
    assert_eq!(items[1]["ok"], false);
    assert!(items[1]["error"].as_str().unwrap().contains("data row 3"));
}

#[test]
fn every_recording_is_checked_and_each_error_printed_once() {
    let dir = scratch("several");
    let bad = nan_in_row_3(&dir);
    let missing = dir.join("nowhere.json");
    let out = tactread(&[
        "inspect",
        bad.to_str().unwrap(),
        &compat("v1/tea-jar.json"),
        missing.to_str().unwrap(),
    ]);
    assert_ne!(out.status.code(), Some(0));
    let stdout = String::from_utf8(out.stdout).unwrap();
    assert!(
        stdout.contains("tea-jar.json"),
        "the good one is summarised: {stdout}"
    );
    let stderr = String::from_utf8(out.stderr).unwrap();
    assert_eq!(stderr.matches("data row 3").count(), 1, "{stderr}");
    assert_eq!(stderr.matches("nowhere.json").count(), 1, "{stderr}");
}

#[test]
fn newer_version_exits_with_the_format_code() {
    let dir = scratch("newer");
    let text = std::fs::read_to_string(compat("v1/tea-jar.json"))
        .unwrap()
        .replace("\"version\": 1", "\"version\": 7");
    std::fs::write(dir.join("tea-jar.json"), text).unwrap();
    let out = tactread(&["inspect", dir.join("tea-jar.json").to_str().unwrap()]);
    assert_eq!(out.status.code(), Some(3));
    let stderr = String::from_utf8(out.stderr).unwrap();
    assert!(stderr.contains("tactread-recording version 7"), "{stderr}");
}

#[test]
fn inspect_needs_a_recording() {
    let out = tactread(&["inspect"]);
    assert_eq!(out.status.code(), Some(2), "clap usage error");
}
