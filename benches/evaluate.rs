//! Benchmark of scoring a test set: `evaluate` (three alignments per
//! recording, dot tallies, calibration bins, 1000 bootstrap resamples of
//! every figure, speed breakdown) and the paired `compare` of two systems.
//!
//! Data is made before timing (seeded); each timed run checks its result.
//! Prints medians in ms. Run with `cargo bench --bench evaluate`;
//! `-- --smoke` does one small run.

use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use std::collections::BTreeMap;
use std::time::Instant;
use tactread::metrics::{
    compare, evaluate, CompareSettings, EvalRecording, EvalSettings, Hypothesis, Metric, Reference,
};
use tactread::Cell;

fn median(mut xs: Vec<f64>) -> f64 {
    xs.sort_by(f64::total_cmp);
    xs[xs.len() / 2]
}

/// `n` recordings of `len` characters (letters a-h as cells of dots 1-6
/// by mask, spaces as empty cells), read with about `err` of the cells
/// misread in one dot.
fn test_set(n: usize, len: usize, err: f64, seed: u64) -> Vec<EvalRecording> {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    (0..n)
        .map(|i| {
            let text: String = (0..len)
                .map(|k| {
                    if k % 6 == 5 {
                        ' '
                    } else {
                        char::from(b'a' + rng.gen_range(0..8u8))
                    }
                })
                .collect();
            let cell_of = |c: char| {
                if c == ' ' {
                    Cell::EMPTY
                } else {
                    Cell::from_mask(c as u8 - b'a' + 1)
                }
            };
            let cells: Vec<Cell> = text.chars().map(cell_of).collect();
            let mut read_cells = cells.clone();
            let mut probs = Vec::with_capacity(len);
            for c in read_cells.iter_mut() {
                if *c != Cell::EMPTY && rng.gen_bool(err) {
                    *c = Cell::from_mask(c.mask() ^ (1 << rng.gen_range(0..6)));
                }
                let mut p = [0f32; 6];
                for (d, pd) in p.iter_mut().enumerate() {
                    let conf: f32 = rng.gen_range(0.6..1.0);
                    *pd = if c.has_dot(d as u8 + 1) {
                        conf
                    } else {
                        1.0 - conf
                    };
                }
                probs.push(p);
            }
            let read: String = read_cells
                .iter()
                .map(|c| {
                    if *c == Cell::EMPTY {
                        ' '
                    } else {
                        char::from(b'a' + (c.mask().wrapping_sub(1) % 26))
                    }
                })
                .collect();
            let alternatives = read
                .chars()
                .map(|c| vec![c, 'a', 'b'])
                .map(|mut v| {
                    v.dedup();
                    v
                })
                .collect();
            EvalRecording {
                id: format!("rec-{i:05}"),
                reference: Reference { text, cells },
                without_lexicon: Hypothesis {
                    text: read,
                    cells: read_cells,
                    dot_probabilities: Some(probs),
                    alternatives: Some(alternatives),
                },
                with_lexicon: None,
                tags: BTreeMap::from([("speed_mm_s".to_string(), 10.0 + (i % 4) as f64 * 10.0)]),
            }
        })
        .collect()
}

fn main() {
    let smoke = std::env::args().any(|a| a == "--smoke");
    let (n, runs) = if smoke { (50, 1) } else { (1000, 5) };
    let len = 80;
    let a_set = test_set(n, len, 0.10, 1);
    let b_set: Vec<EvalRecording> = test_set(n, len, 0.05, 1)
        .into_iter()
        .zip(&a_set)
        .map(|(mut b, a)| {
            b.reference = a.reference.clone();
            b
        })
        .collect();
    let settings = EvalSettings::default();

    let mut times = Vec::new();
    let mut last = None;
    for _ in 0..runs {
        let t = Instant::now();
        let e = evaluate("bench", &a_set, &settings).expect("evaluates");
        times.push(t.elapsed().as_secs_f64() * 1e3);
        let acc = e.without_lexicon.headline[&Metric::CharAccuracy];
        assert!(acc.low <= acc.value && acc.value <= acc.high);
        last = Some(e);
    }
    println!(
        "evaluate_{n}_recordings_{len}_chars_{}_resamples: median {:.1} ms over {runs} runs",
        settings.resamples,
        median(times)
    );

    let a = last.expect("one run");
    let b = evaluate("bench b", &b_set, &settings).expect("evaluates");
    let cs = CompareSettings::default();
    let mut times = Vec::new();
    for _ in 0..runs {
        let t = Instant::now();
        let c = compare(&a, &b, &cs).expect("compares");
        times.push(t.elapsed().as_secs_f64() * 1e3);
        assert!(!c.sets[0].differences.is_empty());
    }
    println!(
        "compare_{n}_recordings_{}_resamples: median {:.1} ms over {runs} runs",
        cs.resamples,
        median(times)
    );
}
