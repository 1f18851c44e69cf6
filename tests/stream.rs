//! Streaming decoding through the built binary (`tactread decode --stream`):
//! words printed while frames still arrive (a slow writer), the streamed
//! text against offline `decode` on the demo recordings, JSON lines, and
//! the errors (bidirectional model, a bad row mid-stream, two recordings).

mod common;

use std::io::{BufRead, BufReader, Write};
use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};
use std::sync::mpsc;
use std::time::Duration;

fn root() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

fn model() -> String {
    root().join("models/default.json").display().to_string()
}

/// The English demo recordings (decoded with the default model and the
/// English pack, which `decode --stream` uses when no --lang is given).
fn english_demo() -> Vec<PathBuf> {
    let mut out = Vec::new();
    for split in ["train", "validation", "test"] {
        let dir = root().join("demo-data").join(split);
        for e in std::fs::read_dir(&dir).unwrap() {
            let p = e.unwrap().path();
            if p.to_string_lossy().ends_with("-en.json") {
                out.push(p);
            }
        }
    }
    out.sort();
    out
}

fn tactread(args: &[&str]) -> std::process::Output {
    Command::new(env!("CARGO_BIN_EXE_tactread"))
        .args(args)
        .output()
        .unwrap()
}

fn offline_text(rec: &Path) -> String {
    let r = tactread(&["decode", &model(), rec.to_str().unwrap()]);
    assert!(r.status.success(), "{}", String::from_utf8_lossy(&r.stderr));
    String::from_utf8_lossy(&r.stdout).trim().to_string()
}

fn collapse(text: &str) -> String {
    text.split_whitespace().collect::<Vec<_>>().join(" ")
}

/// Run `decode --stream` with `input` on stdin.
fn stream_stdin(args: &[&str], input: &[u8]) -> std::process::Output {
    let mut child = Command::new(env!("CARGO_BIN_EXE_tactread"))
        .args(args)
        .stdin(Stdio::piped())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    let mut stdin = child.stdin.take().unwrap();
    let input = input.to_vec();
    let w = std::thread::spawn(move || {
        // The tool may stop reading early (an error): ignore a closed pipe.
        let _ = stdin.write_all(&input);
    });
    let out = child.wait_with_output().unwrap();
    w.join().unwrap();
    out
}

#[test]
fn words_are_printed_while_frames_still_arrive() {
    let rec = root().join("demo-data/validation/00009-en.json");
    let csv = std::fs::read_to_string(rec.with_extension("csv")).unwrap();
    let lines: Vec<&str> = csv.lines().collect();
    // The first 60% of the rows hold several words and their spaces.
    let split = lines.len() * 6 / 10;
    let first: String = lines[..split].iter().map(|l| format!("{l}\n")).collect();
    let rest: String = lines[split..].iter().map(|l| format!("{l}\n")).collect();

    let mut child = Command::new(env!("CARGO_BIN_EXE_tactread"))
        .args(["decode", &model(), "--stream"])
        .stdin(Stdio::piped())
        .stdout(Stdio::piped())
        .stderr(Stdio::null())
        .spawn()
        .unwrap();
    let mut stdin = child.stdin.take().unwrap();
    let stdout = child.stdout.take().unwrap();
    let (line_tx, line_rx) = mpsc::channel::<String>();
    let reader = std::thread::spawn(move || {
        for line in BufReader::new(stdout).lines() {
            if line_tx.send(line.unwrap()).is_err() {
                break;
            }
        }
    });
    let (go_tx, go_rx) = mpsc::channel::<()>();
    let writer = std::thread::spawn(move || {
        // A slow writer: the first part in small pieces, then nothing until
        // the test has seen a word.
        for piece in first.as_bytes().chunks(4096) {
            stdin.write_all(piece).unwrap();
            stdin.flush().unwrap();
            std::thread::sleep(Duration::from_millis(2));
        }
        if go_rx.recv().is_ok() {
            stdin.write_all(rest.as_bytes()).unwrap();
        }
    });
    // Generous: fails only if the tool waits for the end of its input.
    let first_word = line_rx
        .recv_timeout(Duration::from_secs(120))
        .expect("no word printed while the rest of the frames was held back");
    go_tx.send(()).unwrap();
    writer.join().unwrap();
    let mut words = vec![first_word];
    while let Ok(w) = line_rx.recv_timeout(Duration::from_secs(120)) {
        words.push(w);
    }
    reader.join().unwrap();
    assert!(child.wait().unwrap().success());
    assert_eq!(words[0], "Do");
    assert_eq!(words.join(" "), collapse(&offline_text(&rec)));
}

#[test]
fn streamed_text_equals_offline_text_on_the_demo_recordings() {
    let recs = english_demo();
    assert_eq!(recs.len(), 4);
    for (i, rec) in recs.iter().enumerate() {
        let offline = offline_text(rec);
        // Alternate the two inputs: stdin rows, and the file in chunks.
        let out = if i % 2 == 0 {
            let csv = std::fs::read(rec.with_extension("csv")).unwrap();
            stream_stdin(&["decode", &model(), "--stream"], &csv)
        } else {
            tactread(&["decode", &model(), rec.to_str().unwrap(), "--stream"])
        };
        assert!(
            out.status.success(),
            "{}",
            String::from_utf8_lossy(&out.stderr)
        );
        assert!(String::from_utf8_lossy(&out.stderr).contains("verify"));
        let words: Vec<String> = String::from_utf8_lossy(&out.stdout)
            .lines()
            .map(str::to_string)
            .collect();
        assert!(words.len() >= 3, "{words:?}");
        assert_eq!(words.join(" "), collapse(&offline), "{}", rec.display());
    }
}

#[test]
fn json_lines_name_word_span_and_rule() {
    let rec = root().join("demo-data/train/00007-en.json");
    let out = tactread(&[
        "decode",
        &model(),
        rec.to_str().unwrap(),
        "--stream",
        "--format",
        "json",
        "--partial",
    ]);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let mut last_end = 0;
    let mut words = Vec::new();
    for line in String::from_utf8_lossy(&out.stdout).lines() {
        let v: serde_json::Value = serde_json::from_str(line).unwrap();
        let (a, b) = (
            v["frames"][0].as_u64().unwrap(),
            v["frames"][1].as_u64().unwrap(),
        );
        assert!(a <= b && a + 1 >= last_end, "{line}");
        last_end = b;
        assert!(["agreement", "held", "bound", "end"].contains(&v["rule"].as_str().unwrap()));
        words.push(v["word"].as_str().unwrap().to_string());
    }
    assert_eq!(words.join(" "), collapse(&offline_text(&rec)));
    // --partial shows the running reading on stderr.
    assert!(String::from_utf8_lossy(&out.stderr).contains("partial: Boar"));
}

#[test]
fn a_bad_row_mid_stream_names_stdin_line_and_field_and_keeps_the_words() {
    let csv = std::fs::read_to_string(root().join("demo-data/validation/00009-en.csv")).unwrap();
    let lines: Vec<&str> = csv.lines().collect();
    let keep = lines.len() * 6 / 10;
    let mut input: String = lines[..keep].iter().map(|l| format!("{l}\n")).collect();
    let mut fields: Vec<&str> = lines[keep].split(',').collect();
    fields[3] = "oops";
    input.push_str(&fields.join(","));
    input.push('\n');
    input.extend(lines[keep + 1..].iter().map(|l| format!("{l}\n")));
    let out = stream_stdin(&["decode", &model(), "--stream"], input.as_bytes());
    assert!(!out.status.success());
    let err = String::from_utf8_lossy(&out.stderr);
    // Header is line 1, so data row `keep` is file line `keep + 1`.
    let want = format!("<stdin> line {}, field `taxel_1`", keep + 1);
    assert!(err.contains(&want), "{err}");
    // The words read before the bad row stay printed.
    let printed = String::from_utf8_lossy(&out.stdout);
    assert!(printed.lines().next() == Some("Do"), "{printed}");
}

#[test]
fn bidirectional_models_and_two_recordings_are_refused() {
    use tactread::net::{GruConfig, Model, Network, SensorSummary, TrainingSummary};
    use tactread::prep::{Prep, PrepConfig};
    let recs = english_demo();
    let rec = tactread::recording::Recording::load(&recs[0]).unwrap();
    let prep = Prep::fit(&PrepConfig::default(), &[&rec]).unwrap();
    let config = GruConfig {
        inputs: rec.frames.ncols(),
        hidden: 4,
        layers: 1,
        bidirectional: true,
    };
    let sensor = SensorSummary {
        taxels: rec.frames.ncols(),
        name: None,
    };
    let dir = common::cli::test_dir("stream");
    let path = dir.join("bi.json");
    Model::new(
        Network::new(config, 1).unwrap(),
        prep,
        sensor,
        "en",
        TrainingSummary::default(),
    )
    .save(&path)
    .unwrap();
    let r = tactread(&[
        "decode",
        path.to_str().unwrap(),
        recs[0].to_str().unwrap(),
        "--stream",
    ]);
    assert!(!r.status.success());
    let err = String::from_utf8_lossy(&r.stderr);
    assert!(
        err.contains("bidirectional") && err.contains("--direction uni"),
        "{err}"
    );
    // Offline decoding of the same model still works.
    let r = tactread(&["decode", path.to_str().unwrap(), recs[0].to_str().unwrap()]);
    assert!(r.status.success(), "{}", String::from_utf8_lossy(&r.stderr));

    let (a, b) = (recs[0].to_str().unwrap(), recs[1].to_str().unwrap());
    let r = tactread(&["decode", &model(), a, b, "--stream"]);
    assert!(!r.status.success());
    assert!(String::from_utf8_lossy(&r.stderr).contains("one recording"));
}

/// A recording file is streamed in the language its manifest names, as
/// offline `decode` reads it: the German demo recording, whose text has
/// `ä` (dots 345 in German braille, from memory; the English pack reads that cell
/// otherwise), comes out the same both ways.
#[test]
fn a_recording_file_streams_in_its_manifest_language() {
    let rec = root().join("demo-data/test/00013-de.json");
    let r = tactread(&["decode", &model(), rec.to_str().unwrap(), "--stream"]);
    assert!(r.status.success(), "{}", String::from_utf8_lossy(&r.stderr));
    let streamed = collapse(&String::from_utf8_lossy(&r.stdout));
    let offline = collapse(&offline_text(&rec));
    assert_eq!(streamed, offline);
    assert!(streamed.contains('ä'), "{streamed}");
}
