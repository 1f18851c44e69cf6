//! Batch decoding benchmark: 40 simulated recordings (English corpus
//! lines, `typical` preset, `hex24` at 100 Hz, 15-25 mm/s: the default
//! model's training condition) written to a temporary folder before
//! timing, then read through `tactread::batch::read_many` (what `tactread
//! decode` runs: load manifest and CSV frames, preprocessing, network,
//! beam 16, builtin English lexicon) with the embedded default model, on 1
//! and 2 threads. Prints medians over rounds of wall-clock time:
//! recordings/s, raw frames/s and the real-time factor (recorded seconds
//! per second of compute). Each timed run checks its result (every
//! recording read, and the character accuracy of the batch).
//!
//! `cargo bench --bench batch` (5 rounds) or `cargo bench --bench batch --
//! --quick` (one round of 8 recordings, as CI does).

mod common;
use common::process_cpu_s;
use std::path::{Path, PathBuf};
use std::time::Instant;
use tactread::batch::read_many;
use tactread::decode::{BeamParams, Decoder};
use tactread::lexicon::{Lexicon, RescoreWeights};
use tactread::net::Model;
use tactread::recording::FramesKind;
use tactread::simulate::{corpus_lines, Preset, SimConfig, Simulator};
use tactread::CodeTable;

const DEFAULT_MODEL: &str = include_str!("../models/default.json");

fn median(mut xs: Vec<f64>) -> f64 {
    xs.sort_by(f64::total_cmp);
    xs[xs.len() / 2]
}

/// Writes `n` recordings to `dir`; returns their manifests and texts.
fn write_set(dir: &Path, n: usize) -> Vec<(PathBuf, String)> {
    let mut config = SimConfig::new(Preset::Typical);
    config.sensor.sample_rate_hz = 100.0;
    let sim = Simulator::new(config).expect("simulator");
    let table = CodeTable::builtin("en").expect("en table");
    let lines = corpus_lines("en").expect("en corpus");
    (0..n)
        .map(|i| {
            let text = lines[(i * 37) % lines.len()].clone();
            let mut kin = sim.config().kinematics.clone();
            kin.speed_mm_s = 15.0 + 10.0 * (i % 5) as f64 / 4.0;
            let cells = table.encode(&text).expect("corpus lines encode");
            let mut rec = sim
                .simulate_with(&cells, &kin, 500 + i as u64)
                .expect("simulate");
            rec.manifest.text = Some(text.clone());
            rec.manifest.lang = Some("en".into());
            let p = dir.join(format!("{i:03}.json"));
            rec.save(&p, FramesKind::Csv).expect("save");
            (p, text)
        })
        .collect()
}

/// Character accuracy of `got` against `want`: 1 - Levenshtein distance /
/// reference length, summed over the batch (strsim's Levenshtein).
fn char_accuracy(pairs: &[(String, &str)]) -> f64 {
    let (mut errs, mut len) = (0usize, 0usize);
    for (got, want) in pairs {
        errs += strsim::levenshtein(got, want);
        len += want.chars().count();
    }
    1.0 - errs as f64 / len.max(1) as f64
}

fn main() {
    let quick = std::env::args().any(|a| a == "--quick");
    let (n, rounds) = if quick { (8, 1) } else { (40, 5) };
    // Removed when `tmp` drops at the end of main, also if a check panics.
    let tmp = tempfile::Builder::new()
        .prefix("tactread-bench-batch-")
        .tempdir()
        .expect("temp dir");
    let dir = tmp.path();
    let set = write_set(dir, n);
    let paths: Vec<PathBuf> = set.iter().map(|(p, _)| p.clone()).collect();

    let model = Model::from_json(DEFAULT_MODEL, Path::new("models/default.json")).expect("model");
    let table = CodeTable::builtin("en").expect("en table");
    let lexicon = Lexicon::builtin("en").expect("en lexicon");
    let decoder = Decoder::new(&table, BeamParams::default())
        .and_then(|d| d.with_lexicon(&lexicon, RescoreWeights::default()))
        .expect("decoder");
    let decoders = vec![&decoder; n];

    println!(
        "batch decoding: {n} recordings, default model ({} x {} uni), beam {}, builtin en lexicon; \
         median of {rounds} round(s), wall clock",
        model.network.config().layers,
        model.network.config().hidden,
        BeamParams::default().beam_width
    );
    println!(
        "{:>8} {:>14} {:>14} {:>16} {:>16} {:>10}",
        "threads", "recordings/s", "frames/s", "real-time factor", "CPU ms/recording", "char acc"
    );
    for threads in [1usize, 2] {
        let (mut rps, mut fps, mut rtf, mut cpu) = (Vec::new(), Vec::new(), Vec::new(), Vec::new());
        let mut acc = 0.0;
        for _ in 0..rounds {
            let c0 = process_cpu_s();
            let t = Instant::now();
            let results = read_many(&model, &decoders, &paths, threads, || {}).expect("pool");
            let secs = t.elapsed().as_secs_f64();
            if let (Some(a), Some(b)) = (c0, process_cpu_s()) {
                cpu.push((b - a) * 1e3 / n as f64);
            }
            let mut frames = 0usize;
            let mut duration = 0.0;
            let mut pairs = Vec::with_capacity(n);
            for (r, (_, text)) in results.into_iter().zip(&set) {
                let b = r.expect("every recording reads");
                frames += b.frames;
                duration += b.duration_s;
                pairs.push((b.decoded.text, text.as_str()));
            }
            acc = char_accuracy(&pairs);
            assert!(
                acc > 0.8,
                "character accuracy {acc}: the model misreads its own condition"
            );
            rps.push(n as f64 / secs);
            fps.push(frames as f64 / secs);
            rtf.push(duration / secs);
        }
        let cpu = if cpu.is_empty() {
            "-".to_string()
        } else {
            format!("{:.2}", median(cpu))
        };
        println!(
            "{threads:>8} {:>14.1} {:>14.0} {:>16.0} {cpu:>16} {acc:>10.3}",
            median(rps),
            median(fps),
            median(rtf),
        );
    }
    // How much of it is reading the files (manifest + CSV), one thread.
    let mut load = Vec::new();
    for _ in 0..rounds {
        let t = Instant::now();
        for p in &paths {
            let rec = tactread::recording::Recording::load(p).expect("load");
            assert!(rec.frames.nrows() > 0);
        }
        load.push(t.elapsed().as_secs_f64() * 1e3 / n as f64);
    }
    println!(
        "loading alone (manifest + CSV frames, 1 thread): {:.2} ms/recording",
        median(load)
    );
}
