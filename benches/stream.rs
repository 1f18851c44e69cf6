//! Streaming latency: the time of each raw frame's trip through the whole
//! streaming pipeline (resampler, `Network::step`, head, incremental beam
//! search with the English code reader, commits with lexicon rescoring),
//! median and 99th percentile over more than 10,000 network frames, beside
//! `Network::step` alone.
//!
//! Rows:
//! - `step_uni_in24_h128_l2`: `Network::step` alone at the reference size
//!   (24 taxels, hidden 128, 2 layers), 10,000 frames.
//! - `stream_ref_untrained_in24_h128_l2`: the whole pipeline with a
//!   reference-size network that is untrained (seed 0): the network cost
//!   is the reference one, but its outputs are noise, so the search tries
//!   many patterns on every frame (a heavy case for the search).
//! - `stream_ref_trained_in24_h128_l2`: the whole pipeline with a trained
//!   reference-size network (`benches/models/typical-en-2x128.json`,
//!   English, simulated `typical` preset): the reference network cost with
//!   a realistic search and commit load. This is the row the streaming
//!   latency goal is measured on.
//! - `search_only_ref_trained_in24_h128_l2`: the incremental search alone
//!   (`WordStream::step`, no network, no rescoring) on that trained
//!   model's log-probabilities, read beforehand: the search's own cost,
//!   for comparison with the pipeline, where network and search share a
//!   core and its caches.
//! - `stream_default_in24_h64_l2`: the whole pipeline with the embedded
//!   default model (trained, 2 x 64): a realistic search and commit load.
//!
//! Input: the four English demo recordings, repeated end to end (time and
//! position continued) until more than 10,000 network frames. Latency is
//! taken per raw frame that produced at least one network frame (the
//! others only update the resampler), with wall time (`Instant`) and the
//! thread's CPU time (which leaves out waits for a core on a busy machine).
//! Run with `cargo bench --bench stream`; `TACTREAD_BENCH_QUICK=1` for a
//! smoke run.

mod common;
use common::thread_cpu;
use ndarray::Array2;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use std::path::Path;
use std::time::Instant;
use tactread::braille::CodeTable;
use tactread::decode::{BeamParams, CommitJob, Decoder, StreamParams, WordFinisher, WordStream};
use tactread::lexicon::{Lexicon, RescoreWeights};
use tactread::net::{GruConfig, Model, Network, SensorSummary, TrainingSummary};
use tactread::recording::Recording;
use tactread::stream::StreamReader;

/// The English demo recordings, in split and name order.
fn english_demo() -> Vec<Recording> {
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-data");
    let mut recs = Vec::new();
    for split in ["train", "validation", "test"] {
        let mut names: Vec<_> = std::fs::read_dir(root.join(split))
            .expect("demo-data")
            .map(|e| e.expect("entry").path())
            .filter(|p| p.to_string_lossy().ends_with("-en.json"))
            .collect();
        names.sort();
        for p in names {
            recs.push(Recording::load(&p).expect("demo recording"));
        }
    }
    recs
}

/// (coordinate, frame) pairs: the English demo recordings end to end,
/// `repeats` times, each continuing the previous one's position and time.
fn frames(repeats: usize, by_position: bool) -> Vec<(f64, Vec<f32>)> {
    let recs = english_demo();
    let mut out = Vec::new();
    let mut offset = 0.0;
    for _ in 0..repeats {
        for r in &recs {
            let coords: &[f64] = if by_position {
                r.position_mm.as_deref().expect("position")
            } else {
                &r.time_s
            };
            let c0 = coords[0];
            for (row, &c) in r.frames.outer_iter().zip(coords) {
                out.push((offset + c - c0, row.to_vec()));
            }
            offset += coords[coords.len() - 1] - c0 + 1.0;
        }
    }
    out
}

fn percentile(v: &mut [f64], p: usize) -> f64 {
    v.sort_by(|a, b| a.total_cmp(b));
    v[(v.len() * p / 100).min(v.len() - 1)]
}

fn decoder_parts() -> (CodeTable, Lexicon) {
    (
        CodeTable::builtin("en").expect("en"),
        Lexicon::builtin("en").expect("lexicon"),
    )
}

fn report(
    name: &str,
    frames: usize,
    net_frames: u64,
    words: usize,
    wall: &mut [f64],
    cpu: &mut [f64],
    total: f64,
) {
    println!(
        "{name}: {frames} raw frames, {net_frames} network frames, {words} words; \
         per network-frame push: wall median {:.2} us, p99 {:.2} us, max {:.0} us; \
         cpu median {:.2} us, p99 {:.2} us; whole run {:.3} s",
        percentile(wall, 50),
        percentile(wall, 99),
        percentile(wall, 100),
        percentile(cpu, 50),
        percentile(cpu, 99),
        total
    );
}

/// The decoder of the pipeline rows: beam 16 and the builtin lexicon.
fn with_lexicon<'a>(en: &'a CodeTable, lexicon: &'a Lexicon) -> Decoder<'a, CodeTable> {
    Decoder::new(en, BeamParams::default())
        .expect("beam")
        .with_lexicon(lexicon, RescoreWeights::default())
        .expect("weights")
}

/// Everything on one thread: each push rescores the words it commits.
fn bench_inline(name: &str, model: &Model, frames: &[(f64, Vec<f32>)]) {
    let (en, lexicon) = decoder_parts();
    let decoder = with_lexicon(&en, &lexicon);
    let mut reader = StreamReader::new(model, &decoder, StreamParams::default()).expect("uni");
    let mut words = Vec::new();
    let (mut wall, mut cpu) = (Vec::new(), Vec::new());
    let mut n_words = 0;
    let t_all = Instant::now();
    for (c, f) in frames {
        let (t0, c0) = (Instant::now(), thread_cpu());
        let n = reader.push(*c, f, &mut words).expect("valid frame");
        let (dw, dc) = (t0.elapsed(), thread_cpu().saturating_sub(c0));
        if n > 0 {
            wall.push(dw.as_secs_f64() * 1e6);
            cpu.push(dc.as_secs_f64() * 1e6);
        }
        n_words += words.len();
        words.clear();
    }
    let total = t_all.elapsed().as_secs_f64();
    let net_frames = reader.network_frames();
    reader.finish(&mut words).expect("finish");
    n_words += words.len();
    assert!(net_frames > 0 && n_words > 0);
    report(
        &format!("{name}_inline"),
        frames.len(),
        net_frames,
        n_words,
        &mut wall,
        &mut cpu,
        total,
    );
}

/// The reading thread as `tactread decode --stream` runs it: the search
/// on this thread, each commit's rescoring sent to a second thread. The
/// latency is the reading thread's (resampler, step, head, search, commit
/// bookkeeping and the hand-over).
fn bench_threaded(name: &str, model: &Model, frames: &[(f64, Vec<f32>)]) {
    let (en, lexicon) = decoder_parts();
    let decoder = with_lexicon(&en, &lexicon);
    let mut reader = StreamReader::new(model, &decoder, StreamParams::default()).expect("uni");
    let (mut wall, mut cpu) = (Vec::new(), Vec::new());
    let mut most_held = 0;
    let (mut commit_cpu, mut plain_cpu) = (Vec::new(), Vec::new());
    let (net_frames, n_words, total, job_us) = std::thread::scope(|s| {
        let (tx, rx) = std::sync::mpsc::channel::<CommitJob>();
        let worker = s.spawn(|| {
            let mut fin = WordFinisher::new(&decoder);
            let mut words = Vec::new();
            let mut job_us = Vec::new();
            for job in rx {
                let t0 = Instant::now();
                fin.run(job, &mut words);
                job_us.push(t0.elapsed().as_secs_f64() * 1e6);
            }
            (words.len(), job_us)
        });
        let t_all = Instant::now();
        for (c, f) in frames {
            let (t0, c0) = (Instant::now(), thread_cpu());
            let n = reader.step(*c, f).expect("valid frame");
            let mut committed = false;
            for job in reader.take_jobs() {
                tx.send(job).expect("worker");
                committed = true;
            }
            let (dw, dc) = (t0.elapsed(), thread_cpu().saturating_sub(c0));
            if n > 0 {
                wall.push(dw.as_secs_f64() * 1e6);
                cpu.push(dc.as_secs_f64() * 1e6);
                if committed {
                    commit_cpu.push(dc.as_secs_f64() * 1e6);
                } else {
                    plain_cpu.push(dc.as_secs_f64() * 1e6);
                }
            }
            most_held = most_held.max(reader.frames_held());
        }
        let total = t_all.elapsed().as_secs_f64();
        let net_frames = reader.network_frames();
        for job in reader.finish_jobs() {
            tx.send(job).expect("worker");
        }
        drop(tx);
        let (n_words, job_us) = worker.join().expect("worker");
        (net_frames, n_words, total, job_us)
    });
    assert!(net_frames > 0 && n_words > 0);
    report(
        &format!("{name}_threaded"),
        frames.len(),
        net_frames,
        n_words,
        &mut wall,
        &mut cpu,
        total,
    );
    let mut job_us = job_us;
    if !commit_cpu.is_empty() {
        println!(
            "{name}_threaded: cpu of frames without a commit: median {:.2} us, p99 {:.2} us; \
             of the {} frames with one: median {:.2} us, p99 {:.2} us",
            percentile(&mut plain_cpu, 50),
            percentile(&mut plain_cpu, 99),
            commit_cpu.len(),
            percentile(&mut commit_cpu, 50),
            percentile(&mut commit_cpu, 99),
        );
    }
    println!(
        "{name}_threaded: {} commits, rescoring per commit on the second thread: median {:.0} us, p99 {:.0} us; most frames held {most_held}",
        job_us.len(),
        percentile(&mut job_us, 50),
        percentile(&mut job_us, 99),
    );
}

/// The search alone (`WordStream::step`, commits queued, not rescored)
/// on the trained model's log-probabilities of the demo recordings, each
/// read offline beforehand and `repeats` times in all: what the search
/// costs on a core that does nothing else.
fn bench_search_only(name: &str, model: &Model, repeats: usize) {
    let (en, _) = decoder_parts();
    let decoder = Decoder::new(&en, BeamParams::default()).expect("beam");
    let rows: Vec<Vec<f32>> = english_demo()
        .iter()
        .flat_map(|r| {
            let lp = tactread::pipeline::log_probs(model, r, "demo").expect("log-probs");
            lp.outer_iter().map(|row| row.to_vec()).collect::<Vec<_>>()
        })
        .collect();
    let mut stream = WordStream::new(&decoder, StreamParams::default()).expect("stream");
    let (mut all, mut plain) = (Vec::new(), Vec::new());
    for _ in 0..repeats {
        for row in &rows {
            // Wall time only: the thread CPU clock is a system call, about
            // as long as a typical step here.
            let t0 = Instant::now();
            stream.step(row).expect("valid row");
            let committed = stream.take_jobs().count() > 0;
            let dc = t0.elapsed().as_secs_f64() * 1e6;
            all.push(dc);
            if !committed {
                plain.push(dc);
            }
        }
    }
    println!(
        "{name}: {} network frames; search step wall median {:.2} us, p99 {:.2} us; \
         frames without a commit: median {:.2} us, p99 {:.2} us",
        all.len(),
        percentile(&mut all, 50),
        percentile(&mut all, 99),
        percentile(&mut plain, 50),
        percentile(&mut plain, 99),
    );
}

fn bench_step(n: usize) {
    let c = GruConfig {
        inputs: 24,
        hidden: 128,
        layers: 2,
        bidirectional: false,
    };
    let net = Network::new(c, 0).expect("valid config");
    let mut rng = ChaCha8Rng::seed_from_u64(9);
    let x = Array2::from_shape_fn((n, 24), |_| rng.gen_range(-1.0f32..1.0));
    let mut state = net.zero_state().expect("unidirectional");
    let (mut wall, mut cpu) = (Vec::with_capacity(n), Vec::with_capacity(n));
    let mut check = 0.0f32;
    for row in x.outer_iter() {
        let frame = row.to_vec();
        let (t0, c0) = (Instant::now(), thread_cpu());
        let z = net.step(&mut state, &frame).expect("valid frame");
        wall.push(t0.elapsed().as_secs_f64() * 1e6);
        cpu.push(thread_cpu().saturating_sub(c0).as_secs_f64() * 1e6);
        check += z[0];
    }
    assert!(check.is_finite());
    println!(
        "step_uni_in24_h128_l2_frames{n}: wall median {:.2} us, p99 {:.2} us; cpu median {:.2} us, p99 {:.2} us",
        percentile(&mut wall, 50),
        percentile(&mut wall, 99),
        percentile(&mut cpu, 50),
        percentile(&mut cpu, 99),
    );
}

fn main() {
    let quick = std::env::var_os("TACTREAD_BENCH_QUICK").is_some();
    let repeats = if quick { 1 } else { 6 };
    bench_step(if quick { 1000 } else { 10_000 });

    let default = Model::from_json(
        include_str!("../models/default.json"),
        Path::new("models/default.json"),
    )
    .expect("default model");
    let by_position = matches!(default.prep.grid, tactread::prep::Grid::Position { .. });
    let input = frames(repeats, by_position);

    // The reference size with the default model's preprocessing.
    let c = GruConfig {
        inputs: 24,
        hidden: 128,
        layers: 2,
        bidirectional: false,
    };
    let sensor = SensorSummary {
        taxels: 24,
        name: None,
    };
    let reference = Model::new(
        Network::new(c, 0).expect("valid config"),
        default.prep.clone(),
        sensor,
        "en",
        TrainingSummary::default(),
    );
    // The reference size trained (English, simulated `typical` preset; see
    // docs/benchmarks.md "Streaming" for the command that made it): the
    // reference network cost with a realistic search load.
    let trained = Model::from_json(
        include_str!("models/typical-en-2x128.json"),
        Path::new("benches/models/typical-en-2x128.json"),
    )
    .expect("reference-size trained model");
    assert_eq!(
        trained.prep.grid, default.prep.grid,
        "same preprocessing grid"
    );
    bench_search_only("search_only_ref_trained_in24_h128_l2", &trained, repeats);
    for (name, model) in [
        ("stream_ref_trained_in24_h128_l2", &trained),
        ("stream_ref_untrained_in24_h128_l2", &reference),
        ("stream_default_in24_h64_l2", &default),
    ] {
        bench_threaded(name, model, &input);
        bench_inline(name, model, &input);
    }
}
