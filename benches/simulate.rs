//! Simulator speed. The goal (issue 3): one minute of recording at 1 kHz
//! from the 24-taxel sensor simulates in well under a second on one core.
//!
//! Run with `cargo bench --bench simulate` (add `-- --quick` for a smoke
//! run). Fixed seeds; the line of cells and the simulator are built outside
//! the timed part; each timed run checks its result. Reports the median of
//! the runs and the time per simulated minute. Single-threaded: one
//! recording is simulated on one core.

mod common;
use common::thread_cpu;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use std::time::{Duration, Instant};
use tactread::simulate::{Preset, SensorSpec, SimConfig, Simulator};
use tactread::Cell;

/// A line of `n` cells: random 6-dot patterns with about one space in six,
/// like text.
fn line(n: usize, seed: u64) -> Vec<Cell> {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    (0..n)
        .map(|_| {
            if rng.gen_bool(1.0 / 6.0) {
                Cell::EMPTY
            } else {
                Cell::from_mask(rng.gen_range(1..64))
            }
        })
        .collect()
}

fn median(mut v: Vec<Duration>) -> Duration {
    v.sort();
    v[v.len() / 2]
}

/// Time `runs` simulations of a line about `seconds` long; print the median.
fn bench(
    name: &str,
    sensor: &str,
    preset: Preset,
    rate_hz: Option<f64>,
    seconds: f64,
    runs: usize,
) {
    let mut cfg = SimConfig::new(preset);
    cfg.sensor = SensorSpec::builtin(sensor).expect("built-in sensor");
    if let Some(r) = rate_hz {
        cfg.sensor.sample_rate_hz = r;
    }
    // Cells for `seconds` of travel at the mean speed (margins included).
    let n_cells =
        ((seconds * cfg.kinematics.speed_mm_s - 10.0) / cfg.page.cell_spacing_mm) as usize;
    let sim = Simulator::new(cfg).expect("valid configuration");
    let cells = line(n_cells, 42);
    let _warm = sim.simulate(&cells, 1).expect("simulates");
    let mut times = Vec::with_capacity(runs);
    let mut cpu = Vec::with_capacity(runs);
    let mut duration_s = 0.0;
    let mut frames = 0;
    for run in 0..runs {
        let (t0, c0) = (Instant::now(), thread_cpu());
        let rec = sim.simulate(&cells, run as u64).expect("simulates");
        times.push(t0.elapsed());
        cpu.push(thread_cpu().saturating_sub(c0));
        // Check the result inside the timed loop's iteration.
        assert_eq!(rec.frames.nrows(), rec.time_s.len());
        assert!(rec.frames.iter().all(|v| v.is_finite()));
        frames = rec.frames.nrows();
        duration_s = frames as f64 / rec.manifest.sensor.sample_rate_hz;
    }
    let m = median(times.clone());
    let mc = median(cpu);
    let per_minute = |d: Duration| d.as_secs_f64() * 60.0 / duration_s * 1e3;
    println!(
        "{name:<34} {frames} frames = {duration_s:.1} s of recording; median wall {:.1} ms (min {:.1}, max {:.1}), median thread CPU {:.1} ms over {runs} runs; per simulated minute: wall {:.1} ms, CPU {:.1} ms",
        m.as_secs_f64() * 1e3,
        times.iter().min().map_or(0.0, |d| d.as_secs_f64() * 1e3),
        times.iter().max().map_or(0.0, |d| d.as_secs_f64() * 1e3),
        mc.as_secs_f64() * 1e3,
        per_minute(m),
        per_minute(mc),
    );
}

fn main() {
    let quick = std::env::args().any(|a| a == "--quick");
    let runs = if quick { 1 } else { 21 };
    // Run on one thread: the simulator itself is single-threaded per recording.
    bench(
        "simulate/hex24_1khz_60s_typical",
        "hex24",
        Preset::Typical,
        None,
        60.0,
        runs,
    );
    bench(
        "simulate/hex24_1khz_60s_hard",
        "hex24",
        Preset::Hard,
        None,
        60.0,
        runs,
    );
    bench(
        "simulate/pad4x3_500hz_60s_typical",
        "pad4x3",
        Preset::Typical,
        None,
        60.0,
        runs,
    );
    bench(
        "simulate/skin16_200hz_60s_typical",
        "skin16",
        Preset::Typical,
        None,
        60.0,
        runs.min(7),
    );
}
