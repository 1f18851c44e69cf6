//! Tests of `tactread train` through the built binary: a tiny simulated
//! dataset, one short training run, the model file it writes, and the
//! errors a user meets (existing output, bad options, missing data).

mod common;

use common::cli::{s, scratch, simulate_clean_dataset, tactread, tiny_train_args};

#[test]
fn trains_a_small_model_and_reports_test_figures() {
    let dir = scratch("ok");
    let data = dir.join("data");
    simulate_clean_dataset(&data, "20", "3", &["--lang", "en"]);
    let model = dir.join("m.json");
    let args = tiny_train_args(s(&data), s(&model), "2", "2");
    let out = tactread(&args);
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(out.status.success(), "{err}");
    assert!(err.contains("epoch   1"), "{err}");
    let stdout = String::from_utf8_lossy(&out.stdout);
    assert!(
        stdout.contains("test (") && stdout.contains("character accuracy"),
        "{stdout}"
    );
    let text = std::fs::read_to_string(&model).unwrap();
    let v: serde_json::Value = serde_json::from_str(&text).unwrap();
    assert_eq!(v["format"], "tactread-model");
    assert_eq!(v["version"], 1);
    assert_eq!(v["sensor"]["taxels"], 24);
    assert_eq!(v["lang"], "en");
    assert_eq!(v["architecture"]["gru"]["hidden"], 8);
    assert!(dir.join("m.json.ckpt").exists());

    // The same command again refuses to overwrite the model (exit 4).
    let again = tactread(&args);
    assert_eq!(again.status.code(), Some(4));
    assert!(String::from_utf8_lossy(&again.stderr).contains("--force"));
}

#[test]
fn bad_options_and_missing_data_are_clear_errors() {
    let dir = scratch("bad");
    let m = dir.join("m.json");
    let out = tactread(&["train", "--data", s(&dir), "--out", s(&m), "--batch", "0"]);
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("batch"));
    let out = tactread(&["train", "--data", s(&dir.join("nowhere")), "--out", s(&m)]);
    assert_ne!(out.status.code(), Some(0));
    assert!(String::from_utf8_lossy(&out.stderr).contains("nowhere"));
}

#[test]
fn a_dataset_in_several_languages_trains_one_model() {
    // `simulate dataset` without --lang draws lines in all four builtin
    // languages; each recording's text is written with its own code table
    // (German `ß` exists in the de table only, for example).
    let dir = scratch("multi");
    let data = dir.join("data");
    simulate_clean_dataset(&data, "24", "5", &[]);
    let index: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(data.join("index.json")).unwrap()).unwrap();
    let mut langs: Vec<String> = index["recordings"]
        .as_array()
        .unwrap()
        .iter()
        .map(|r| r["lang"].as_str().unwrap().to_string())
        .collect();
    langs.sort();
    langs.dedup();
    assert!(
        langs.len() > 1,
        "the dataset should mix languages: {langs:?}"
    );

    let model = dir.join("m.json");
    let out = tactread(&tiny_train_args(s(&data), s(&model), "1", "1"));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(out.status.success(), "{err}");
    assert!(err.contains(&langs.join(", ")), "{err}");
    let v: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(&model).unwrap()).unwrap();
    let listed: Vec<String> = v["training"]["languages"]
        .as_array()
        .unwrap()
        .iter()
        .map(|l| l.as_str().unwrap().to_string())
        .collect();
    assert_eq!(listed, langs);
    assert!(langs.contains(&v["lang"].as_str().unwrap().to_string()));
}
