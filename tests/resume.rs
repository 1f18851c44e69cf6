//! Training survives being killed: a `tactread train` run killed with
//! SIGKILL in the middle of an epoch leaves a model file that loads whole
//! and a checkpoint of its last finished epoch; `--resume` continues from
//! the epoch after it and ends with the same model, bit for bit, as a run
//! that was never interrupted. Through the built binary. (Timing is never
//! asserted: the test waits for the run's own progress lines.)

mod common;

use common::cli::{s, scratch, simulate_clean_dataset, stderr, tactread};
use std::io::{BufRead, BufReader};
use std::path::Path;
use std::process::{Command, Stdio};
use std::sync::mpsc;
use std::time::Duration;
use tactread::net::Model;

/// The `train` arguments shared by every run: a tiny network on a tiny
/// dataset, the same seed and threads (so runs are reproducible).
fn train_args<'a>(data: &'a str, out: &'a str) -> Vec<&'a str> {
    vec![
        "train",
        "--data",
        data,
        "--out",
        out,
        "--epochs",
        "4",
        "--hidden",
        "8",
        "--layers",
        "1",
        "--batch",
        "4",
        "--threads",
        "2",
        "--step-mm",
        "1.0",
        "--patience",
        "10",
        "--seed",
        "7",
    ]
}

/// The epochs a run printed (`epoch   3  train loss ...`), in order.
fn epochs_printed(stderr: &str) -> Vec<usize> {
    stderr
        .lines()
        .filter_map(|l| l.strip_prefix("epoch "))
        .filter_map(|rest| rest.split_whitespace().next()?.parse().ok())
        .collect()
}

fn checkpoint_epoch(model: &Path) -> u64 {
    let ckpt = tactread::train::checkpoint_path(model);
    let text = std::fs::read_to_string(&ckpt).expect("the checkpoint exists");
    let v: serde_json::Value = serde_json::from_str(&text).expect("the checkpoint is whole JSON");
    v["epoch"].as_u64().expect("the checkpoint has an epoch")
}

/// Temporary files of an atomic write beside `model` or its checkpoint.
fn temporaries(dir: &Path) -> Vec<String> {
    std::fs::read_dir(dir)
        .unwrap()
        .flatten()
        .map(|e| e.file_name().to_string_lossy().into_owned())
        .filter(|n| n.starts_with('.') && n.contains(".tmp"))
        .collect()
}

#[cfg(unix)]
#[test]
fn killed_mid_epoch_resumes_from_its_checkpoint_and_matches_an_uninterrupted_run() {
    use std::os::unix::process::ExitStatusExt;
    let dir = scratch("kill");
    let data = dir.join("data");
    simulate_clean_dataset(&data, "24", "5", &["--lang", "en"]);

    // The uninterrupted run.
    let full = dir.join("full.json");
    let run = tactread(&train_args(s(&data), s(&full)));
    assert!(run.status.success(), "{}", stderr(&run));
    assert_eq!(epochs_printed(&stderr(&run)), [1, 2, 3, 4]);

    // The same run, killed with SIGKILL as soon as epoch 1 is reported,
    // i.e. early in epoch 2. (`Child::kill` sends SIGKILL on Unix, per the
    // standard library's documentation; the exit status below confirms it.)
    let killed = dir.join("killed.json");
    let mut child = Command::new(env!("CARGO_BIN_EXE_tactread"))
        .args(train_args(s(&data), s(&killed)))
        .stdout(Stdio::null())
        .stderr(Stdio::piped())
        .spawn()
        .expect("the binary runs");
    let pipe = child.stderr.take().expect("stderr is piped");
    let (tx, rx) = mpsc::channel::<String>();
    let reader = std::thread::spawn(move || {
        for line in BufReader::new(pipe).lines().map_while(Result::ok) {
            if tx.send(line).is_err() {
                break;
            }
        }
    });
    let mut seen = Vec::new();
    loop {
        // Generous: the machine may be busy; no timing is asserted.
        let line = rx
            .recv_timeout(Duration::from_secs(300))
            .expect("the run reports epoch 1");
        seen.push(line.clone());
        if epochs_printed(&line) == [1] {
            break;
        }
    }
    child.kill().expect("the run can be killed");
    let status = child.wait().expect("the killed run is reaped");
    reader.join().expect("the reader thread ends");
    assert_eq!(
        status.signal(),
        Some(9),
        "the run must end by SIGKILL, not finish: {status:?}\n{}",
        seen.join("\n")
    );

    // The model file is whole (it was written atomically) and holds epoch
    // 1's model; the checkpoint is of the last finished epoch (1, or 2 if
    // epoch 2 ended between the report and the kill).
    let m = Model::load(&killed).expect("the model file loads completely");
    assert!(m.training.best_epoch >= 1, "{:?}", m.training);
    let k = checkpoint_epoch(&killed);
    assert!((1..4).contains(&k), "checkpoint of epoch {k}");
    // A temporary left by a writer killed half-way (planted here, as the
    // kill rarely lands inside a write) must not trouble the next run.
    let stale = dir.join(".killed.json.tmp-4000000-0");
    std::fs::write(&stale, "{\"format\": \"tactread-mo").unwrap();

    // Resume: the next epoch is k + 1, so at most the epoch in progress
    // was lost.
    let mut resume = train_args(s(&data), s(&killed));
    resume.push("--resume");
    let run = tactread(&resume);
    let err = stderr(&run);
    assert!(run.status.success(), "{err}");
    let expected: Vec<usize> = (k as usize + 1..=4).collect();
    eprintln!(
        "killed in epoch {}; resumed with epochs {expected:?}",
        k + 1
    );
    assert_eq!(epochs_printed(&err), expected, "{err}");
    assert_eq!(checkpoint_epoch(&killed), 4);
    assert!(
        temporaries(&dir).is_empty(),
        "temporaries left: {:?}",
        temporaries(&dir)
    );

    // The resumed model equals the uninterrupted one: parameters bit for
    // bit (JSON floats round-trip exactly), best epoch and epoch count.
    let a = Model::load(&full).unwrap();
    let b = Model::load(&killed).unwrap();
    assert_eq!(a.training.best_epoch, b.training.best_epoch);
    assert_eq!(a.training.epochs, b.training.epochs);
    let net = |p: &Path| -> serde_json::Value {
        let v: serde_json::Value =
            serde_json::from_str(&std::fs::read_to_string(p).unwrap()).unwrap();
        v["network"].clone()
    };
    assert!(
        net(&full) == net(&killed),
        "the resumed run's parameters differ from the uninterrupted run's"
    );
}
