//! Fine-tuning (`tactread::train::fine_tune`, `tactread train --init`):
//! adapting the embedded default model to a small set of recordings made
//! under another condition beats both the untouched model and a model
//! trained from scratch on the same small set with the same epoch budget.
//!
//! The default model (models/default.json, see docs/default-model.md) was
//! trained on the `typical` preset, `hex24` fingertip at 100 Hz, 15-25 mm/s,
//! NLS Specification 800 dots (0.48 mm high), English, German, French and
//! Spanish lines; the target set here is English. The new condition here is the
//! `low-dots` page (0.2 mm dots, Marburg Medium spacing: 6.0 mm cells
//! instead of 6.2 mm), same sensor and rate: the signal is weaker and the
//! cells come closer together, so the untouched model misreads many cells.

mod common;

use std::ops::ControlFlow;
use std::path::Path;
use std::time::Instant;
use tactread::net::Model;
use tactread::recording::Recording;
use tactread::simulate::{corpus_lines, PageGeometry, Preset, SimConfig, Simulator};
use tactread::train::{self, Example, FineTune, TrainConfig, FINE_TUNE_LR};
use tactread::CodeTable;

const DEFAULT_MODEL: &str = include_str!("../models/default.json");

/// Recordings of the small target set: train, validation, test.
const SIZES: [usize; 3] = [32, 8, 24];
/// The epoch budget both training runs get.
const EPOCHS: usize = 12;

/// `n` low-dots recordings of corpus lines starting at `first`, speeds
/// drawn in 15-25 mm/s like the default model's training data.
fn target_set(sim: &Simulator, lines: &[String], first: usize, n: usize) -> Vec<Example> {
    let table = CodeTable::builtin("en").unwrap();
    (first..first + n)
        .map(|i| {
            let text = lines[i].clone();
            let mut kin = sim.config().kinematics.clone();
            // A fixed spread of speeds without another random stream.
            kin.speed_mm_s = 15.0 + 10.0 * ((i * 7) % 11) as f64 / 10.0;
            let cells = table.encode(&text).unwrap();
            let mut recording: Recording = sim.simulate_with(&cells, &kin, 900 + i as u64).unwrap();
            recording.manifest.text = Some(text.clone());
            recording.manifest.lang = Some("en".into());
            Example {
                name: format!("low-dots/{i:03}.json"),
                recording,
                text,
                table: None,
            }
        })
        .collect()
}

fn quiet(_: train::Event) -> ControlFlow<()> {
    ControlFlow::Continue(())
}

#[test]
fn fine_tuning_beats_the_untouched_model_and_training_from_scratch() {
    let t0 = Instant::now();
    let pre = Model::from_json(DEFAULT_MODEL, Path::new("models/default.json")).unwrap();
    assert_eq!(pre.sensor.taxels, 24);
    let mut config = SimConfig::new(Preset::Typical);
    config.page = PageGeometry::low_dots();
    config.sensor.sample_rate_hz = 100.0;
    let sim = Simulator::new(config).unwrap();
    // Lines from the end of the corpus, short enough to keep the test quick.
    let lines: Vec<String> = corpus_lines("en")
        .unwrap()
        .into_iter()
        .rev()
        .filter(|l| l.chars().count() <= 28)
        .collect();
    let train_set = target_set(&sim, &lines, 0, SIZES[0]);
    let val = target_set(&sim, &lines, SIZES[0], SIZES[1]);
    let test = target_set(&sim, &lines, SIZES[0] + SIZES[1], SIZES[2]);
    let table = CodeTable::builtin("en").unwrap();

    let dir = common::cli::test_dir("finetune");
    let g = pre.network.config();
    let base = TrainConfig {
        hidden: g.hidden,
        layers: g.layers,
        bidirectional: g.bidirectional,
        epochs: EPOCHS,
        batch: 8,
        patience: EPOCHS,
        threads: 2,
        seed: 5,
        ..TrainConfig::default()
    };

    let untouched = train::evaluate(&pre, &test, &table, 2).unwrap();

    let tuned_cfg = TrainConfig {
        lr: FINE_TUNE_LR,
        ..base.clone()
    };
    let from = FineTune {
        model: &pre,
        name: "default",
        refit_prep: false,
    };
    let tuned = train::fine_tune(
        &tuned_cfg,
        from,
        &train_set,
        &val,
        &table,
        "low-dots",
        &dir.join("tuned.json"),
        false,
        quiet,
    )
    .unwrap();
    let ft = tuned.model.training.fine_tuned_from.as_ref().unwrap();
    assert_eq!(ft.model, "default");
    assert_eq!(ft.epochs, pre.training.epochs);
    // The kept preprocessing is the default model's.
    assert_eq!(tuned.model.prep, pre.prep);
    let tuned_v = train::evaluate(&tuned.model, &test, &table, 2).unwrap();

    // From scratch: the same small set, architecture and epoch budget, the
    // from-scratch default learning rate (3e-3).
    let scratch = train::train(
        &base,
        &train_set,
        &val,
        &table,
        "low-dots",
        &dir.join("scratch.json"),
        false,
        quiet,
    )
    .unwrap();
    assert!(scratch.model.training.fine_tuned_from.is_none());
    let scratch_v = train::evaluate(&scratch.model, &test, &table, 2).unwrap();

    eprintln!(
        "character accuracy on {} held-out low-dots recordings (greedy): untouched {:.3}, \
         fine-tuned {:.3}, from scratch {:.3}; dot accuracy {:.3} / {:.3} / {:.3}; {:.1} s",
        test.len(),
        untouched.char_accuracy,
        tuned_v.char_accuracy,
        scratch_v.char_accuracy,
        untouched.dot_accuracy,
        tuned_v.dot_accuracy,
        scratch_v.dot_accuracy,
        t0.elapsed().as_secs_f64()
    );
    assert!(
        tuned_v.char_accuracy > untouched.char_accuracy,
        "fine-tuned {tuned_v:?} vs untouched {untouched:?}"
    );
    assert!(
        tuned_v.char_accuracy > scratch_v.char_accuracy,
        "fine-tuned {tuned_v:?} vs from scratch {scratch_v:?}"
    );
}

fn tactread(dir: &Path, args: &[&str]) -> std::process::Output {
    std::process::Command::new(env!("CARGO_BIN_EXE_tactread"))
        .current_dir(dir)
        .args(args)
        .output()
        .expect("the tactread binary runs")
}

#[test]
fn cli_train_init_fine_tunes_and_refuses_what_cannot_agree() {
    let dir = common::cli::test_dir("finetune-cli");
    let sim = |extra: &[&str], out: &str| {
        let mut args = vec![
            "simulate", "dataset", "--lines", "10", "--lang", "en", "--rate", "100", "--seed", "3",
            "--jobs", "1", "--out", out,
        ];
        args.extend(extra);
        let o = tactread(&dir, &args);
        assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    };
    sim(&["--page", "low-dots"], "low");
    sim(&["--sensor", "pad4x3"], "pad");
    let err = |o: &std::process::Output| String::from_utf8_lossy(&o.stderr).into_owned();

    let o = tactread(
        &dir,
        &[
            "train",
            "--init",
            "default",
            "--data",
            "low",
            "--out",
            "ft.json",
            "--epochs",
            "1",
            "--threads",
            "1",
            "--batch",
            "4",
        ],
    );
    assert!(o.status.success(), "{}", err(&o));
    assert!(err(&o).contains("fine-tuning default"), "{}", err(&o));
    let tuned = Model::load(&dir.join("ft.json")).unwrap();
    let pre = Model::from_json(DEFAULT_MODEL, Path::new("models/default.json")).unwrap();
    assert_eq!(tuned.prep, pre.prep);
    assert_eq!(tuned.network.config(), pre.network.config());
    let f = tuned.training.fine_tuned_from.as_ref().unwrap();
    assert_eq!(f.model, "default");
    assert!(!f.refit_prep);
    // The fine-tuning default peak rate; stored as f32.
    let lr = tuned.training.options["lr"].as_f64().unwrap();
    assert!((lr - 1e-3).abs() < 1e-9, "{lr}");

    // Options that disagree with the model: exit 2, naming the option.
    let o = tactread(
        &dir,
        &[
            "train", "--init", "default", "--data", "low", "--out", "x.json", "--hidden", "32",
        ],
    );
    assert_eq!(o.status.code(), Some(2), "{}", err(&o));
    assert!(
        err(&o).contains("hidden") && err(&o).contains("64"),
        "{}",
        err(&o)
    );
    // Refused before any data is loaded.
    assert!(!err(&o).contains("loaded in"), "{}", err(&o));
    for bad in [
        &["--init", "default", "--step-mm", "0.4"][..],
        &["--refit-prep"][..],
    ] {
        let mut args = vec!["train", "--data", "low", "--out", "x.json"];
        args.extend(bad);
        let o = tactread(&dir, &args);
        assert_eq!(o.status.code(), Some(2), "{bad:?}: {}", err(&o));
    }
    // Another sensor's recordings (12 taxels): exit 3, naming the file.
    let o = tactread(
        &dir,
        &[
            "train", "--init", "default", "--data", "pad", "--out", "x.json", "--epochs", "1",
        ],
    );
    assert_eq!(o.status.code(), Some(3), "{}", err(&o));
    assert!(err(&o).contains("taxel count of pad/"), "{}", err(&o));
    assert!(!dir.join("x.json").exists());
}
