//! Network benchmarks at the reference size (24 taxels, hidden 128, 2 GRU
//! layers): training frames/s at batch 32 x 400 frames (1 and 2 threads,
//! unidirectional and bidirectional), batch-1 inference over one
//! 100,000-frame stream, and the frame-by-frame step latency.
//!
//! Plain `std::time::Instant`, fixed seeds, data made outside the timed
//! part, medians over several runs. FLOPs count the matrix products only
//! (the convention of the PyTorch peer in `shared/peers/`): forward
//! `Σ_layers D · 2 · 3H · (n_in + H) + 2 · D·H · 7` per frame, training 3x
//! forward. Run with `cargo bench --bench net`; set `TACTREAD_BENCH_QUICK=1`
//! for a smoke run.

use ndarray::Array2;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use std::time::Instant;
use tactread::net::{Adam, AdamConfig, GruConfig, Network};

const TAXELS: usize = 24;
const HIDDEN: usize = 128;
const LAYERS: usize = 2;
const BATCH: usize = 32;
const SEQ: usize = 400;
const STREAM: usize = 100_000;

fn config(bidirectional: bool) -> GruConfig {
    GruConfig {
        inputs: TAXELS,
        hidden: HIDDEN,
        layers: LAYERS,
        bidirectional,
    }
}

fn fwd_flop_per_frame(c: GruConfig) -> f64 {
    let d = c.directions() as f64;
    let h = c.hidden as f64;
    let mut f = 0.0;
    for l in 0..c.layers {
        let n_in = if l == 0 { c.inputs } else { c.outputs() } as f64;
        f += d * 2.0 * 3.0 * h * (n_in + h);
    }
    f + 2.0 * c.outputs() as f64 * 7.0
}

/// CPU time used so far by the whole process (all threads), in seconds:
/// on a machine shared with other jobs, frames per CPU-second shows what
/// the code does when it runs, apart from how often it was scheduled.
fn cpu_seconds() -> f64 {
    // SAFETY: getrusage writes into the zeroed struct we pass.
    let mut u: libc::rusage = unsafe { std::mem::zeroed() };
    unsafe { libc::getrusage(libc::RUSAGE_SELF, &mut u) };
    let tv = |t: libc::timeval| t.tv_sec as f64 + t.tv_usec as f64 * 1e-6;
    tv(u.ru_utime) + tv(u.ru_stime)
}

fn median(v: &mut [f64]) -> f64 {
    v.sort_by(|a, b| a.total_cmp(b));
    v[v.len() / 2]
}

fn frames(n: usize, seed: u64) -> Array2<f32> {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    Array2::from_shape_fn((n, TAXELS), |_| rng.gen_range(-1.0f32..1.0))
}

fn bench_train(bidirectional: bool, threads: usize, steps: usize) {
    let c = config(bidirectional);
    let mut net = Network::new(c, 0).expect("valid config");
    let xs: Vec<Array2<f32>> = (0..BATCH).map(|i| frames(SEQ, 100 + i as u64)).collect();
    let mut rng = ChaCha8Rng::seed_from_u64(1);
    let ts: Vec<Vec<usize>> = (0..BATCH)
        .map(|_| (0..40).map(|_| rng.gen_range(0..64)).collect())
        .collect();
    let views: Vec<_> = xs.iter().map(|x| x.view()).collect();
    let targets: Vec<&[usize]> = ts.iter().map(|t| t.as_slice()).collect();
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(threads)
        .build()
        .expect("thread pool");
    let mut adam = Adam::new(AdamConfig::default(), &net.param_sizes());
    let mut times = Vec::new();
    let mut cpu = Vec::new();
    pool.install(|| {
        for i in 0..steps + 2 {
            let c0 = cpu_seconds();
            let t0 = Instant::now();
            let mut r = net
                .loss_and_grad(&views, &targets, threads)
                .expect("valid batch");
            net.apply_gradients(&mut r.grads, &mut adam, 1e-3, 5.0);
            let dt = t0.elapsed().as_secs_f64();
            let dc = cpu_seconds() - c0;
            assert!(r.loss.is_finite() && r.skipped == 0);
            if i >= 2 {
                times.push(dt);
                cpu.push(dc);
            }
        }
    });
    let med = median(&mut times);
    let fps = (BATCH * SEQ) as f64 / med;
    let gflops = 3.0 * fwd_flop_per_frame(c) * fps / 1e9;
    let dir = if bidirectional { "bi" } else { "uni" };
    println!(
        "train_{dir}_in{TAXELS}_h{HIDDEN}_l{LAYERS}_b{BATCH}_t{SEQ}_threads{threads}: \
         step {:.1} ms, {:.0} frames/s, {:.1} GFLOP/s (min step {:.1} ms, {} steps; \
         {:.0} frames per CPU-second)",
        med * 1e3,
        fps,
        gflops,
        times[0] * 1e3,
        times.len(),
        (BATCH * SEQ) as f64 / median(&mut cpu)
    );
}

fn bench_infer(repeats: usize, stream: usize) {
    let c = config(false);
    let net = Network::new(c, 0).expect("valid config");
    let x = frames(stream, 7);
    let mut times = Vec::new();
    let mut check = 0.0f32;
    for i in 0..repeats + 1 {
        let t0 = Instant::now();
        let z = net.logits_one(x.view()).expect("valid input");
        let dt = t0.elapsed().as_secs_f64();
        assert_eq!(z.nrows(), stream);
        check += z[[stream - 1, 0]];
        if i >= 1 {
            times.push(dt);
        }
    }
    assert!(check.is_finite());
    let med = median(&mut times);
    let fps = stream as f64 / med;
    println!(
        "infer_uni_in{TAXELS}_h{HIDDEN}_l{LAYERS}_b1_stream{stream}_threads1: \
         {:.0} frames/s, {:.2} us/frame, {:.1} GFLOP/s",
        fps,
        med / stream as f64 * 1e6,
        fwd_flop_per_frame(c) * fps / 1e9
    );
}

fn bench_step(n: usize) {
    let c = config(false);
    let net = Network::new(c, 0).expect("valid config");
    let x = frames(n, 9);
    let mut state = net.zero_state().expect("unidirectional");
    let mut lat = Vec::with_capacity(n);
    let mut check = 0.0f32;
    let t_all = Instant::now();
    for t in 0..n {
        let frame = x.row(t);
        let frame = frame.as_slice().expect("contiguous");
        let t0 = Instant::now();
        let z = net.step(&mut state, frame).expect("valid frame");
        lat.push(t0.elapsed().as_secs_f64());
        check += z[0];
    }
    let total = t_all.elapsed().as_secs_f64();
    assert!(check.is_finite());
    lat.sort_by(|a, b| a.total_cmp(b));
    let p50 = lat[n / 2];
    let p99 = lat[(n * 99) / 100];
    println!(
        "step_uni_in{TAXELS}_h{HIDDEN}_l{LAYERS}_frames{n}_threads1: median {:.2} us, p99 {:.2} us, \
         {:.0} frames/s, {:.1} GFLOP/s",
        p50 * 1e6,
        p99 * 1e6,
        n as f64 / total,
        fwd_flop_per_frame(c) / p50 / 1e9
    );
}

fn main() {
    let quick = std::env::var_os("TACTREAD_BENCH_QUICK").is_some();
    let only = std::env::args().skip(1).find(|a| !a.starts_with('-'));
    let want = |name: &str| only.as_deref().is_none_or(|o| name.contains(o));
    let steps = if quick { 1 } else { 8 };
    if want("train") {
        for bi in [false, true] {
            for threads in [1, 2] {
                bench_train(bi, threads, steps);
            }
        }
    }
    if want("infer") {
        bench_infer(
            if quick { 1 } else { 5 },
            if quick { 5_000 } else { STREAM },
        );
    }
    if want("step") {
        bench_step(if quick { 1_000 } else { 10_000 });
    }
}
