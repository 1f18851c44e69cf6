//! What each command writes (docs/outputs.md), through the built binary:
//! for every command that writes files, (a) no temporary of its atomic
//! writes is left behind, (b) an existing output is not
//! replaced without `--force` (exit 4, the file named, `--force` named)
//! and is with it, and (c) an output that is one of the command's own
//! inputs is refused even with `--force`, leaving the input as it was.

mod common;

use common::cli::{s, scratch, simulate_clean_dataset, stderr, tactread};
use std::path::{Path, PathBuf};
use std::process::Output;

/// Assert exit code 4 and a message naming `file` and containing `says`.
fn refused(o: &Output, file: &Path, says: &str) {
    let err = stderr(o);
    assert_eq!(o.status.code(), Some(4), "{err}");
    let name = file.file_name().unwrap().to_string_lossy();
    assert!(err.contains(&*name), "does not name {name}: {err}");
    assert!(err.contains(says), "does not say {says:?}: {err}");
    assert!(!err.contains("panicked"), "{err}");
}

/// (b): the message for an existing output.
const EXISTS: &str = "pass --force";
/// (c): the message for an output that is an input.
const INPUT: &str = "an input of this command";

fn ok(o: &Output) {
    assert!(o.status.success(), "{}", stderr(o));
}

/// A small dataset of simulated English lines in `dir/data`.
fn dataset(dir: &Path) -> PathBuf {
    let data = dir.join("data");
    simulate_clean_dataset(
        &data,
        "6",
        "2",
        &["--lang", "en", "--split", "0.5,0.25,0.25"],
    );
    data
}

/// The first manifest of a split folder, and its frames file.
fn first_recording(folder: &Path) -> (PathBuf, PathBuf) {
    let mut names: Vec<PathBuf> = std::fs::read_dir(folder)
        .unwrap()
        .flatten()
        .map(|e| e.path())
        .filter(|p| p.extension().is_some_and(|e| e == "json"))
        .collect();
    names.sort();
    let manifest = names.remove(0);
    let frames = manifest.with_extension("csv");
    assert!(frames.exists(), "{}", frames.display());
    (manifest, frames)
}

/// A small untrained model for the recording `manifest`, saved to `path`.
fn untrained_model(manifest: &Path, path: &Path) {
    use tactread::net::{GruConfig, Model, Network, SensorSummary, TrainingSummary};
    use tactread::prep::{Prep, PrepConfig};
    let rec = tactread::recording::Recording::load(manifest).unwrap();
    let prep = Prep::fit(&PrepConfig::default(), &[&rec]).unwrap();
    let config = GruConfig {
        inputs: rec.frames.ncols(),
        hidden: 4,
        layers: 1,
        bidirectional: false,
    };
    let net = Network::new(config, 3).unwrap();
    let sensor = SensorSummary {
        taxels: rec.frames.ncols(),
        name: None,
    };
    Model::new(net, prep, sensor, "en", TrainingSummary::default())
        .save(path)
        .unwrap();
}

/// (a): no temporary of an atomic write is left anywhere under `dir`.
fn no_temporaries(dir: &Path) {
    for entry in std::fs::read_dir(dir).unwrap().flatten() {
        let name = entry.file_name().to_string_lossy().into_owned();
        assert!(
            !name.contains(".tmp-"),
            "left behind: {}",
            entry.path().display()
        );
        if entry.path().is_dir() {
            no_temporaries(&entry.path());
        }
    }
}

fn read(p: &Path) -> Vec<u8> {
    std::fs::read(p).unwrap()
}

#[test]
fn lexicon_build() {
    let d = scratch("lexicon-build");
    let words = d.join("words.txt");
    std::fs::write(&words, "tea\t3\nferry\t2\n").unwrap();
    let lex = d.join("w.lex");
    ok(&tactread(&[
        "lexicon",
        "build",
        s(&words),
        "--out",
        s(&lex),
    ]));
    // (b)
    let again = tactread(&["lexicon", "build", s(&words), "--out", s(&lex)]);
    refused(&again, &lex, EXISTS);
    ok(&tactread(&[
        "lexicon",
        "build",
        s(&words),
        "--out",
        s(&lex),
        "--force",
    ]));
    // (c): the word list itself, spelled another way, even with --force.
    std::fs::create_dir_all(d.join("sub")).unwrap();
    let before = read(&words);
    let same = d.join("sub/../words.txt");
    let o = tactread(&["lexicon", "build", s(&words), "--out", s(&same), "--force"]);
    refused(&o, &words, INPUT);
    assert_eq!(read(&words), before);
    no_temporaries(&d);
}

#[test]
fn lexicon_tune() {
    let d = scratch("lexicon-tune");
    let rec = d.join("rec.json");
    ok(&tactread(&["simulate", "tea", "--out", s(&rec)]));
    let model = d.join("model.json");
    untrained_model(&rec, &model);
    let weights = d.join("w.json");
    std::fs::write(&weights, "{}").unwrap();
    // (b)
    let o = tactread(&["lexicon", "tune", s(&model), s(&rec), "--out", s(&weights)]);
    refused(&o, &weights, EXISTS);
    assert_eq!(read(&weights), b"{}");
    // (c): the model, and the recording's frames file.
    let before = read(&model);
    let o = tactread(&[
        "lexicon",
        "tune",
        s(&model),
        s(&rec),
        "--out",
        s(&model),
        "--force",
    ]);
    refused(&o, &model, INPUT);
    assert_eq!(read(&model), before);
    let frames = d.join("rec.csv");
    let before = read(&frames);
    let o = tactread(&[
        "lexicon",
        "tune",
        s(&model),
        s(&rec),
        "--out",
        s(&frames),
        "--force",
    ]);
    refused(&o, &frames, INPUT);
    assert_eq!(read(&frames), before);
    no_temporaries(&d);
}

#[test]
fn simulate_one_recording() {
    let d = scratch("simulate");
    let rec = d.join("r.json");
    ok(&tactread(&["simulate", "tea", "--out", s(&rec)]));
    // (b): the manifest, then the frames file alone.
    refused(
        &tactread(&["simulate", "tea", "--out", s(&rec)]),
        &rec,
        EXISTS,
    );
    std::fs::remove_file(&rec).unwrap();
    let frames = d.join("r.csv");
    refused(
        &tactread(&["simulate", "tea", "--out", s(&rec)]),
        &frames,
        EXISTS,
    );
    ok(&tactread(&["simulate", "tea", "--out", s(&rec), "--force"]));
    // (c): the text file would be the frames file of the output.
    let text = d.join("line.csv");
    std::fs::write(&text, "tea\n").unwrap();
    let o = tactread(&[
        "simulate",
        "--text-file",
        s(&text),
        "--out",
        s(&d.join("line.json")),
        "--force",
    ]);
    refused(&o, &text, INPUT);
    assert_eq!(read(&text), b"tea\n");
    assert!(!d.join("line.json").exists());
    no_temporaries(&d);
}

#[test]
fn simulate_dataset() {
    let d = scratch("simulate-dataset");
    let data = dataset(&d);
    // (b)
    let args = [
        "simulate",
        "dataset",
        "--lines",
        "2",
        "--jobs",
        "1",
        "--out",
        s(&data),
    ];
    refused(&tactread(&args), &data, "pass --force");
    let mut forced = args.to_vec();
    forced.push("--force");
    ok(&tactread(&forced));
    // A run stopped before its index (written last) leaves an unfinished
    // dataset: refused without --force, replaced with it.
    std::fs::remove_file(data.join("index.json")).unwrap();
    refused(&tactread(&args), &data, "holds an unfinished dataset");
    ok(&tactread(&forced));
    assert!(data.join("index.json").exists());
    // (c): the text file lies inside the folder that --force replaces.
    let lines = data.join("train").join("lines.txt");
    std::fs::write(&lines, "tea\nferry\n").unwrap();
    let o = tactread(&[
        "simulate",
        "dataset",
        "--text-file",
        s(&lines),
        "--out",
        s(&data),
        "--force",
    ]);
    refused(&o, &lines, INPUT);
    assert_eq!(read(&lines), b"tea\nferry\n");
    no_temporaries(&d);
}

#[test]
fn train() {
    let d = scratch("train");
    let data = dataset(&d);
    let model = d.join("m.json");
    let args = |out: &Path, force: bool| -> Output {
        let mut a = vec![
            "train",
            "--data",
            s(&data),
            "--epochs",
            "1",
            "--hidden",
            "4",
            "--layers",
            "1",
            "--step-mm",
            "1.0",
            "--out",
        ];
        a.push(s(out));
        if force {
            a.push("--force");
        }
        tactread(&a)
    };
    // (b): the model, or its checkpoint alone.
    std::fs::write(&model, "x").unwrap();
    refused(&args(&model, false), &model, EXISTS);
    assert_eq!(read(&model), b"x");
    std::fs::remove_file(&model).unwrap();
    let ckpt = d.join("m.json.ckpt");
    std::fs::write(&ckpt, "x").unwrap();
    refused(&args(&model, false), &ckpt, EXISTS);
    assert_eq!(read(&ckpt), b"x");
    // (c): the dataset's index, a manifest and a frames file.
    let index = data.join("index.json");
    let (manifest, frames) = first_recording(&data.join("train"));
    for input in [&index, &manifest, &frames] {
        let before = read(input);
        refused(&args(input, true), input, INPUT);
        assert_eq!(&read(input), &before);
    }
    no_temporaries(&d);
}

#[test]
fn evaluate() {
    let d = scratch("evaluate");
    let data = dataset(&d);
    let (manifest, _) = first_recording(&data.join("test"));
    let model = d.join("model.json");
    untrained_model(&manifest, &model);
    let metrics = d.join("metrics.json");
    let run = |extra: &[&str]| -> Output {
        let mut a = vec![
            "evaluate",
            s(&model),
            s(&data),
            "--lexicon",
            "none",
            "--resamples",
            "20",
        ];
        a.extend_from_slice(extra);
        tactread(&a)
    };
    ok(&run(&["--json", s(&metrics)]));
    // (b)
    refused(&run(&["--json", s(&metrics)]), &metrics, EXISTS);
    let report = d.join("report.html");
    std::fs::write(&report, "x").unwrap();
    refused(&run(&["--report", s(&report)]), &report, EXISTS);
    ok(&run(&["--json", s(&metrics), "--force"]));
    // (c): the model, the dataset index, and one file for both outputs.
    for input in [&model, &data.join("index.json")] {
        let before = read(input);
        refused(&run(&["--json", s(input), "--force"]), input, INPUT);
        assert_eq!(&read(input), &before);
    }
    let o = run(&["--json", s(&report), "--report", s(&report), "--force"]);
    refused(&o, &report, "--json writes the same file");
    no_temporaries(&d);
}

#[test]
fn show() {
    let d = scratch("show");
    let rec = d.join("r.json");
    ok(&tactread(&["simulate", "tea", "--out", s(&rec)]));
    let view = d.join("v.svg");
    ok(&tactread(&["show", s(&rec), "--out", s(&view)]));
    // (b)
    refused(
        &tactread(&["show", s(&rec), "--out", s(&view)]),
        &view,
        EXISTS,
    );
    ok(&tactread(&["show", s(&rec), "--out", s(&view), "--force"]));
    // (c): a model file named like the view (an odd name, but an input).
    let model = d.join("m.svg");
    untrained_model(&rec, &model);
    let before = read(&model);
    let o = tactread(&[
        "show",
        s(&rec),
        "--model",
        s(&model),
        "--out",
        s(&model),
        "--force",
    ]);
    refused(&o, &model, INPUT);
    assert_eq!(read(&model), before);
    no_temporaries(&d);
}

#[test]
fn demo() {
    let d = scratch("demo");
    let report = d.join("report.html");
    std::fs::write(&report, "x").unwrap();
    // (b); the demo's inputs (index.json, manifests, frames files) cannot
    // be called report.html, so (c) does not arise.
    let o = tactread(&["demo", "--limit", "1", "--out", s(&d)]);
    refused(&o, &report, EXISTS);
    assert_eq!(read(&report), b"x");
    no_temporaries(&d);
}
