//! CLI tests of the evaluation commands through the built binary:
//! `tactread compare` (table, `--json`, refusals) and `tactread show`
//! (the recording view as an SVG file).

mod common;

use common::cli::{s, scratch as temp_dir, simulate_clean_dataset, tactread, tiny_train_args};
use common::{synthetic_set, toy_recording};
use std::path::{Path, PathBuf};
use tactread::metrics::{evaluate, EvalSettings};
use tactread::recording::FramesKind;

fn write_metrics(dir: &Path) -> (PathBuf, PathBuf, PathBuf) {
    let settings = EvalSettings {
        resamples: 200,
        ..EvalSettings::default()
    };
    let a = evaluate("baseline", &synthetic_set(40, 7, 1.0), &settings).unwrap();
    // The same labels (same seed), read by a reader with half the error rate.
    let better = synthetic_set(40, 7, 2.0);
    for (b, r) in better.iter().zip(&synthetic_set(40, 7, 1.0)) {
        assert_eq!(b.reference, r.reference);
    }
    let b = evaluate("careful", &better, &settings).unwrap();
    let other = evaluate("other shelf", &synthetic_set(40, 8, 1.0), &settings).unwrap();
    let (pa, pb, po) = (
        dir.join("a.json"),
        dir.join("b.json"),
        dir.join("other.json"),
    );
    a.save(&pa).unwrap();
    b.save(&pb).unwrap();
    other.save(&po).unwrap();
    (pa, pb, po)
}

#[test]
fn compare_prints_paired_differences_and_refuses_other_sets() {
    let dir = temp_dir("compare");
    let (a, b, other) = write_metrics(&dir);

    let out = tactread(&["compare", s(&a), s(&b), "--resamples", "300"]);
    let stdout = String::from_utf8_lossy(&out.stdout);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    assert!(stdout.contains("40 recordings matched by id"), "{stdout}");
    assert!(
        stdout.contains("without lexicon") && stdout.contains("with lexicon"),
        "{stdout}"
    );
    assert!(
        stdout.contains("character accuracy") && stdout.contains("B - A"),
        "{stdout}"
    );

    let out = tactread(&["compare", s(&a), s(&b), "--json", "--resamples", "300"]);
    assert!(out.status.success());
    let doc: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(doc["format"], "tactread-comparison");
    let diffs = doc["sets"][0]["differences"].as_array().unwrap();
    let char_acc = diffs
        .iter()
        .find(|d| d["metric"] == "char_accuracy")
        .unwrap();
    // The careful reader is better, and the interval says so.
    assert!(char_acc["difference"].as_f64().unwrap() > 0.0, "{char_acc}");
    assert!(char_acc["low"].as_f64().unwrap() > 0.0, "{char_acc}");

    let out = tactread(&["compare", s(&a), s(&other)]);
    assert_eq!(out.status.code(), Some(3));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.contains("different test sets"), "{err}");

    std::fs::write(
        dir.join("bad.json"),
        "{\"format\": \"tactread-metrics\", \"version\": 1,\n]",
    )
    .unwrap();
    let out = tactread(&["compare", s(&a), s(&dir.join("bad.json"))]);
    assert_eq!(out.status.code(), Some(1));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.contains("bad.json line 2"), "{err}");

    std::fs::write(
        dir.join("model.json"),
        "{\"format\": \"tactread-model\", \"version\": 1}",
    )
    .unwrap();
    let out = tactread(&["compare", s(&dir.join("model.json")), s(&a)]);
    assert_eq!(out.status.code(), Some(3));
    assert!(String::from_utf8_lossy(&out.stderr).contains("expected tactread-metrics version 1"));
}

#[test]
fn show_draws_a_recording_view() {
    let dir = temp_dir("show");
    let rec = toy_recording("exit");
    let manifest = dir.join("door.json");
    rec.save(&manifest, FramesKind::Csv).unwrap();
    let svg = dir.join("door.svg");

    let out = tactread(&["show", s(&manifest), "--out", s(&svg)]);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let text = std::fs::read_to_string(&svg).unwrap();
    assert!(text.starts_with("<svg") && text.trim_end().ends_with("</svg>"));
    assert!(text.contains("door: \u{201c}exit\u{201d}"));
    assert!(text.contains("position along the line, mm"));
    // "exit" in UEB (common practice): e 15, x 1346, i 24, t 2345.
    for dots in ["15", "1346", "24", "2345"] {
        // plotters writes a text element's content on its own line.
        assert!(
            text.contains(&format!("\n{dots}\n</text>")),
            "cell {dots} not labelled"
        );
    }

    let out = tactread(&["show", s(&manifest), "--out", s(&svg)]);
    assert_eq!(out.status.code(), Some(4));
    assert!(String::from_utf8_lossy(&out.stderr).contains("--force"));
    let out = tactread(&[
        "show",
        s(&manifest),
        "--out",
        s(&svg),
        "--force",
        "--pitch-mm",
        "6.0",
    ]);
    assert!(out.status.success());

    let out = tactread(&["show", s(&manifest), "--out", s(&dir.join("v.png"))]);
    assert_eq!(out.status.code(), Some(2));
    let out = tactread(&[
        "show",
        s(&dir.join("missing.json")),
        "--out",
        s(&dir.join("m.svg")),
    ]);
    assert_ne!(out.status.code(), Some(0));
    assert!(String::from_utf8_lossy(&out.stderr).contains("missing.json"));
}

/// `tactread evaluate` on a tiny simulated dataset with a one-epoch model
/// trained here: the metrics file parses as an evaluation of the test
/// split, the report is a page, outputs are not overwritten without
/// `--force`, and a bad DATA path is named in the error.
#[test]
fn evaluate_scores_a_dataset_and_writes_metrics_and_report() {
    let dir = temp_dir("evaluate");
    let data = dir.join("data");
    simulate_clean_dataset(&data, "12", "5", &["--lang", "en"]);
    let model = dir.join("m.json");
    let out = tactread(&tiny_train_args(s(&data), s(&model), "1", "1"));
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );

    let (json, html) = (dir.join("metrics.json"), dir.join("report.html"));
    let args = [
        "evaluate",
        s(&model),
        s(&data),
        "--json",
        s(&json),
        "--report",
        s(&html),
        "--resamples",
        "100",
        "--threads",
        "1",
    ];
    let out = tactread(&args);
    let stdout = String::from_utf8_lossy(&out.stdout);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    assert!(
        stdout.contains("character accuracy") && stdout.contains("with lexicon"),
        "{stdout}"
    );
    assert!(stdout.contains("medicine labels"), "{stdout}");
    let eval = tactread::metrics::Evaluation::load(&json).unwrap();
    let index: serde_json::Value =
        serde_json::from_slice(&std::fs::read(data.join("index.json")).unwrap()).unwrap();
    let n_test = index["recordings"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|r| r["split"] == "test")
        .count();
    assert!(n_test > 0);
    assert_eq!(eval.recordings.len(), n_test);
    assert!(eval.with_lexicon.is_some());
    // Every test recording's ground truth is its index text.
    for r in &eval.recordings {
        assert!(!r.reference_text.is_empty());
    }
    let page = std::fs::read_to_string(&html).unwrap();
    assert!(page.starts_with("<!DOCTYPE html>") || page.starts_with("<!doctype html>"));
    assert!(page.contains("<svg") && page.contains("machine-read"));

    // Existing outputs are kept unless --force.
    let out = tactread(&args);
    assert!(!out.status.success());
    assert!(String::from_utf8_lossy(&out.stderr).contains("--force"));
    let mut forced = args.to_vec();
    forced.push("--force");
    assert!(tactread(&forced).status.success());

    // `show --model` draws the decoded cells of one test recording.
    let test_manifest = index["recordings"]
        .as_array()
        .unwrap()
        .iter()
        .find(|r| r["split"] == "test")
        .unwrap()["manifest"]
        .as_str()
        .unwrap()
        .to_string();
    let svg = dir.join("view.svg");
    let out = tactread(&[
        "show",
        s(&data.join(&test_manifest)),
        "--out",
        s(&svg),
        "--model",
        s(&model),
    ]);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    assert!(std::fs::read_to_string(&svg).unwrap().contains("<svg"));

    // A DATA path that does not exist is named in the error.
    let nowhere = dir.join("nowhere");
    let out = tactread(&["evaluate", s(&model), s(&nowhere)]);
    assert!(!out.status.success());
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.contains("nowhere"), "{err}");
}

/// A dataset in several languages: without `--lang` every recording is read
/// with its own language's code table and lexicon (demo-data has one test
/// recording in each of en, de, fr and es).
#[test]
fn evaluate_reads_each_recording_in_its_own_language() {
    let dir = temp_dir("evaluate-langs");
    let json = dir.join("m.json");
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let out = tactread(&[
        "evaluate",
        s(&root.join("models/default.json")),
        s(&root.join("demo-data")),
        "--json",
        s(&json),
        "--resamples",
        "50",
        "--threads",
        "1",
    ]);
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(out.status.success(), "{err}");
    assert!(err.contains("in 4 languages: de, en, es, fr"), "{err}");
    let eval = tactread::metrics::Evaluation::load(&json).unwrap();
    assert_eq!(eval.recordings.len(), 4);
}
