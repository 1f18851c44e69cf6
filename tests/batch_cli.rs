//! `tactread decode` on many recordings, through the built binary: the
//! embedded default model (`default`), folders, dataset folders and
//! `--list` files as inputs, `--jobs`, `--format jsonl`, input order kept,
//! and a bad recording failing alone (error line, message, exit code).

mod common;

use common::cli::{test_dir, TestDir};
use std::path::{Path, PathBuf};
use std::process::Output;
use tactread::recording::FramesKind;
use tactread::simulate::{Preset, SimConfig, Simulator};
use tactread::CodeTable;

fn tactread(dir: &Path, args: &[&str]) -> Output {
    std::process::Command::new(env!("CARGO_BIN_EXE_tactread"))
        .current_dir(dir)
        .args(args)
        .output()
        .expect("the tactread binary runs")
}

fn stderr(o: &Output) -> String {
    String::from_utf8_lossy(&o.stderr).into_owned()
}

/// Invented pantry labels (our own scenario), simulated on the default
/// sensor at 100 Hz like the default model's training data.
const LINES: [&str; 4] = ["jam jar", "oats", "rice tin", "tea box"];

fn fresh_dir(name: &str) -> TestDir {
    let dir = test_dir(&format!("batch-{name}"));
    std::fs::create_dir_all(dir.join("scans")).unwrap();
    dir
}

/// Writes `scans/NN.json` (+ `.csv`) for every line, in reverse name
/// order of writing so that sorting is what puts them in order.
fn write_scans(dir: &Path) -> Vec<PathBuf> {
    let mut config = SimConfig::new(Preset::Clean);
    config.sensor.sample_rate_hz = 100.0;
    let sim = Simulator::new(config).unwrap();
    let table = CodeTable::builtin("en").unwrap();
    let mut paths = Vec::new();
    for (i, text) in LINES.iter().enumerate().rev() {
        let rec = sim.simulate_text(text, &table, 40 + i as u64).unwrap();
        let p = dir.join("scans").join(format!("{i:02}.json"));
        rec.save(&p, FramesKind::Csv).unwrap();
        paths.push(p);
    }
    paths.reverse();
    paths
}

/// JSON Lines: every line is one complete JSON value (JSON Lines
/// specification, https://jsonlines.org, "Each Line is a Valid JSON
/// Value"; from memory).
fn json_lines(o: &Output) -> Vec<serde_json::Value> {
    String::from_utf8_lossy(&o.stdout)
        .lines()
        .map(|l| serde_json::from_str(l).unwrap_or_else(|e| panic!("not a JSON line ({e}): {l}")))
        .collect()
}

#[test]
fn folder_list_and_files_read_in_order_with_the_default_model() {
    let dir = fresh_dir("order");
    let paths = write_scans(&dir);

    // One file at a time: the reference readings.
    let single: Vec<String> = paths
        .iter()
        .map(|p| {
            let o = tactread(&dir, &["decode", "default", p.to_str().unwrap()]);
            assert!(o.status.success(), "{}", stderr(&o));
            String::from_utf8_lossy(&o.stdout).trim_end().to_string()
        })
        .collect();
    // The default model reads clean simulated labels of its own sensor
    // (a check that `default` really is the trained model, not an empty one).
    let right = single.iter().zip(LINES).filter(|(a, b)| a == b).count();
    assert!(right >= 3, "default model read {single:?}");

    // A folder, on two threads, as JSON lines: same readings, name order.
    let o = tactread(
        &dir,
        &[
            "decode", "default", "scans", "--jobs", "2", "--format", "jsonl",
        ],
    );
    assert!(o.status.success(), "{}", stderr(&o));
    let lines = json_lines(&o);
    assert_eq!(lines.len(), LINES.len());
    for (i, v) in lines.iter().enumerate() {
        let name = format!("scans/{i:02}.json");
        assert_eq!(v["recording"].as_str(), Some(name.as_str()));
        assert_eq!(v["text"].as_str(), Some(single[i].as_str()));
        let c = v["confidence"].as_f64().unwrap();
        assert!((0.0..=1.0).contains(&c));
        assert!(!v["n_best"].as_array().unwrap().is_empty());
        // 100 Hz: duration is frames / rate.
        let frames = v["frames"].as_u64().unwrap() as f64;
        let d = v["duration_s"].as_f64().unwrap();
        assert!(
            (d - frames / 100.0).abs() < 1e-3,
            "{d} s for {frames} frames"
        );
    }

    // A list file (comments, blank lines, paths relative to its folder)
    // after a file argument: input order, not name order.
    std::fs::write(
        dir.join("scans").join("pick.txt"),
        "# two of them\n\n03.json\n  01.json  \n",
    )
    .unwrap();
    let o = tactread(
        &dir,
        &[
            "decode",
            "default",
            "scans/02.json",
            "--list",
            "scans/pick.txt",
        ],
    );
    assert!(o.status.success(), "{}", stderr(&o));
    let text = String::from_utf8_lossy(&o.stdout);
    let got: Vec<(&str, &str)> = text
        .lines()
        .map(|l| l.split_once('\t').expect("name TAB text"))
        .collect();
    assert_eq!(
        got,
        vec![
            ("scans/02.json", single[2].as_str()),
            ("scans/03.json", single[3].as_str()),
            ("scans/01.json", single[1].as_str()),
        ]
    );
}

#[test]
fn a_bad_recording_fails_alone() {
    let dir = fresh_dir("bad");
    let paths = write_scans(&dir);
    // Damage row 3 of the second recording's frames.
    let csv = paths[1].with_extension("csv");
    let text = std::fs::read_to_string(&csv).unwrap();
    let mut rows: Vec<String> = text.lines().map(String::from).collect();
    let first = rows[3].split(',').next().unwrap().to_string();
    rows[3] = rows[3].replacen(&first, "x", 1);
    std::fs::write(&csv, rows.join("\n") + "\n").unwrap();

    let o = tactread(&dir, &["decode", "default", "scans", "--format", "jsonl"]);
    assert_eq!(o.status.code(), Some(1), "{}", stderr(&o));
    let lines = json_lines(&o);
    assert_eq!(lines.len(), LINES.len());
    for (i, v) in lines.iter().enumerate() {
        if i == 1 {
            let e = v["error"].as_str().expect("an error line");
            assert!(e.contains("01.csv line 4"), "{e}");
            assert!(v.get("text").is_none());
        } else {
            assert!(v["text"].is_string(), "{v}");
        }
    }
    let err = stderr(&o);
    assert!(err.contains("01.csv line 4"), "{err}");
    assert!(err.contains("1 of 4 recordings could not be read"), "{err}");

    // Bad inputs found before any work: a missing list entry names the
    // list file and line; --jobs 0 is refused.
    std::fs::write(
        dir.join("list.txt"),
        "scans/00.json\n# gone\nscans/09.json\n",
    )
    .unwrap();
    let o = tactread(&dir, &["decode", "default", "--list", "list.txt"]);
    assert_eq!(o.status.code(), Some(1));
    assert!(stderr(&o).contains("list.txt line 3"), "{}", stderr(&o));
    assert!(o.stdout.is_empty());
    let o = tactread(&dir, &["decode", "default", "scans", "--jobs", "0"]);
    assert_eq!(o.status.code(), Some(2));
    std::fs::create_dir_all(dir.join("empty")).unwrap();
    let o = tactread(&dir, &["decode", "default", "empty"]);
    assert_eq!(o.status.code(), Some(2));
    assert!(stderr(&o).contains("no *.json"), "{}", stderr(&o));
}

#[test]
fn each_recording_is_read_in_its_own_language() {
    let dir = fresh_dir("langs");
    let mut config = SimConfig::new(Preset::Clean);
    config.sensor.sample_rate_hz = 100.0;
    let sim = Simulator::new(config).unwrap();
    // Invented shop labels; German `ß` and `ü` need the German code table.
    for (name, lang, text) in [("a", "en", "tea box"), ("b", "de", "süße Äpfel")] {
        let table = CodeTable::builtin(lang).unwrap();
        let rec = sim.simulate_text(text, &table, 7).unwrap();
        rec.save(
            &dir.join("scans").join(format!("{name}.json")),
            FramesKind::Csv,
        )
        .unwrap();
    }
    let o = tactread(&dir, &["decode", "default", "scans", "--format", "jsonl"]);
    assert!(o.status.success(), "{}", stderr(&o));
    let lines = json_lines(&o);
    let langs: Vec<&str> = lines.iter().map(|v| v["lang"].as_str().unwrap()).collect();
    assert_eq!(langs, ["en", "de"]);
    // The same as reading the German one alone with --lang de.
    let o = tactread(&dir, &["decode", "default", "scans/b.json", "--lang", "de"]);
    assert!(o.status.success(), "{}", stderr(&o));
    assert_eq!(
        lines[1]["text"].as_str().unwrap(),
        String::from_utf8_lossy(&o.stdout).trim_end()
    );
    // --lang reads every one in that language.
    let o = tactread(
        &dir,
        &[
            "decode", "default", "scans", "--format", "jsonl", "--lang", "en",
        ],
    );
    assert!(o.status.success(), "{}", stderr(&o));
    assert!(json_lines(&o).iter().all(|v| v["lang"] == "en"));
}
