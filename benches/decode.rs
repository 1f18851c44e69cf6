//! Decoder benchmark: greedy decoding vs beam 16 vs beam 16 + lexicon
//! rescoring, on synthetic network outputs (`[n_frames, 65]`) made from
//! English text with a fixed seed, outside the timed part. Prints medians
//! per frame, the overhead ratios against a GRU forward pass, and (as a side result)
//! word accuracy with and without the lexicon on these synthetic outputs.
//!
//! `cargo bench --bench decode` (full) or `cargo bench --bench decode --
//! --quick` (smoke run, as CI does).

mod common;
use common::thread_cpu;
use ndarray::Array2;
use rand::seq::SliceRandom;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use std::time::{Duration, Instant};
use tactread::decode::{beam_search, greedy_decode, BeamParams, Decoder, N_CLASSES};
use tactread::lexicon::{Lexicon, RescoreWeights};
use tactread::Cell;

mod code {
    //! The code used to write and read the synthetic text.
    pub use tactread::braille::CodeTable;
    pub fn english() -> CodeTable {
        CodeTable::builtin("en").expect("builtin en code table")
    }
}

/// Synthetic network output for `cells`: every cell spans `per_cell`
/// frames, of which 2 carry the cell (a CTC spike) and the rest are blank.
/// The head is factorised like the network's: P(pattern) = (1 - P(blank)) *
/// product of six per-dot Bernoulli terms. Dots are confident (0.97/0.03)
/// except that with probability `p_doubt` a dot of a cell is doubtful
/// (0.35-0.65, so the reading may flip), and with probability `p_flip` a dot
/// is read wrongly with confidence 0.75. Blank frames give the cells a
/// non-blank mass drawn log-uniformly from `10^log10_mass`.
fn synth(
    cells: &[Cell],
    per_cell: usize,
    p_doubt: f64,
    p_flip: f64,
    log10_mass: (f64, f64),
    rng: &mut ChaCha8Rng,
) -> Array2<f32> {
    let n = cells.len() * per_cell + 4;
    let mut a = Array2::<f32>::zeros((n, N_CLASSES));
    let mut dots = [0f64; 6];
    let fill = |t: usize, blank: f64, dots: &[f64; 6], a: &mut Array2<f32>| {
        for m in 0..64usize {
            let mut p = 1.0 - blank;
            for (k, &d) in dots.iter().enumerate() {
                p *= if m & (1 << k) != 0 { d } else { 1.0 - d };
            }
            a[[t, m]] = (p.max(1e-30)).ln() as f32;
        }
        a[[t, 64]] = blank.ln() as f32;
    };
    let mut t = 0;
    let blank_row =
        |rng: &mut ChaCha8Rng| 1.0 - 10f64.powf(rng.gen_range(log10_mass.0..log10_mass.1));
    for _ in 0..2 {
        fill(t, blank_row(rng), &[0.5; 6], &mut a);
        t += 1;
    }
    for &c in cells {
        for (k, d) in dots.iter_mut().enumerate() {
            let on = c.mask() & (1 << k) != 0;
            let r: f64 = rng.gen();
            let truth = if r < p_flip {
                0.25
            } else if r < p_flip + p_doubt {
                rng.gen_range(0.35..0.65)
            } else {
                0.97
            };
            *d = if on { truth } else { 1.0 - truth };
        }
        let spike_at = rng.gen_range(0..per_cell - 1);
        for f in 0..per_cell {
            let blank = if f == spike_at || f == spike_at + 1 {
                rng.gen_range(0.02..0.2)
            } else {
                blank_row(rng)
            };
            fill(t, blank, &dots, &mut a);
            t += 1;
        }
    }
    while t < n {
        fill(t, blank_row(rng), &[0.5; 6], &mut a);
        t += 1;
    }
    a
}

fn median(mut v: Vec<Duration>) -> Duration {
    v.sort();
    v[v.len() / 2]
}

/// A named method under test.
type Method<'a> = (&'a str, Box<dyn FnMut() -> usize + 'a>);

/// Time every method `reps` times, round robin (so a busy machine slows
/// them alike): median wall time and median thread CPU time of each. Each
/// method returns a count that must be non-zero (the result is checked
/// inside the timed part). Everything runs on this thread (the network's
/// batch-1 forward pass included), so CPU time is the method's own cost.
fn time_all(reps: usize, methods: &mut [Method<'_>]) -> Vec<(Duration, Duration)> {
    let mut wall = vec![Vec::with_capacity(reps); methods.len()];
    let mut cpu = vec![Vec::with_capacity(reps); methods.len()];
    for _ in 0..reps {
        for (i, (name, f)) in methods.iter_mut().enumerate() {
            let (t0, c0) = (Instant::now(), thread_cpu());
            let n = f();
            cpu[i].push(thread_cpu().saturating_sub(c0));
            wall[i].push(t0.elapsed());
            assert!(n > 0, "{name} produced nothing");
        }
    }
    wall.into_iter()
        .zip(cpu)
        .map(|(w, c)| (median(w), median(c)))
        .collect()
}

fn word_errors(hyp: &str, truth: &str) -> (usize, usize) {
    let h: Vec<&str> = hyp.split_whitespace().collect();
    let t: Vec<&str> = truth.split_whitespace().collect();
    let mut prev: Vec<usize> = (0..=h.len()).collect();
    for i in 1..=t.len() {
        let mut cur = vec![i; h.len() + 1];
        for j in 1..=h.len() {
            let sub = usize::from(t[i - 1] != h[j - 1]);
            cur[j] = (prev[j - 1] + sub).min(prev[j] + 1).min(cur[j - 1] + 1);
        }
        prev = cur;
    }
    (t.len(), prev[h.len()])
}

/// One synthetic regime: how blank frames look.
struct Regime {
    name: &'static str,
    /// Range of log10 of the non-blank mass on blank frames.
    log10_mass: (f64, f64),
}

const REGIMES: [Regime; 2] = [
    Regime {
        name: "peaky (blank frames: non-blank mass 1e-5..1e-2, log-uniform)",
        log10_mass: (-5.0, -2.0),
    },
    Regime {
        name: "smeared (blank frames: non-blank mass 5e-4..3e-2, log-uniform)",
        log10_mass: (-3.3, -1.5),
    },
];

fn main() {
    let quick = std::env::args().any(|a| a == "--quick");
    let (n_recordings, reps) = if quick { (3, 3) } else { (12, 11) };
    let words_per_recording = 40;
    let per_cell = 20;

    let t0 = Instant::now();
    let lexicon = Lexicon::builtin("en").expect("builtin lexicon");
    let lexicon_build = t0.elapsed();
    let table = code::english();
    let mut vocab = lexicon.words();
    vocab.sort_by_key(|w| std::cmp::Reverse(w.1));
    let vocab: Vec<String> = vocab.into_iter().take(3000).map(|(w, _)| w).collect();
    println!(
        "decoder benchmark: {n_recordings} recordings x {words_per_recording} words of English \
         (3 of them numbers), {per_cell} frames per cell, medians of {reps} round-robin runs; \
         builtin en lexicon ({} words) compiled in {:.1} ms",
        lexicon.len(),
        lexicon_build.as_secs_f64() * 1e3
    );

    // The network's forward pass, for the overhead ratio: randomly
    // initialised GRU stacks (Cho et al. 2014) of two plausible sizes on a
    // 24-taxel input, batch 1.
    let mut rng = ChaCha8Rng::seed_from_u64(2024);
    let n_frames = 5000;
    let mut x = Array2::<f32>::zeros((n_frames, 24));
    x.mapv_inplace(|_| rng.gen_range(-1.0..1.0));
    let nets: Vec<(usize, tactread::net::Network)> = [64usize, 128]
        .iter()
        .map(|&hidden| {
            let config = tactread::net::GruConfig {
                inputs: 24,
                hidden,
                layers: 2,
                bidirectional: false,
            };
            (
                hidden,
                tactread::net::Network::new(config, 1).expect("network"),
            )
        })
        .collect();
    let mut fwd_methods: Vec<Method<'_>> = Vec::new();
    for (_, net) in &nets {
        let x = &x;
        fwd_methods.push((
            "forward",
            Box::new(move || net.forward(&[x.view()]).unwrap()[0].nrows()),
        ));
    }
    let fwd = time_all(reps.min(5), &mut fwd_methods);
    let fwd_us: Vec<f64> = fwd
        .iter()
        .map(|d| d.1.as_secs_f64() * 1e6 / n_frames as f64)
        .collect();
    for ((hidden, _), (w, c)) in nets.iter().zip(&fwd) {
        println!(
            "network forward, GRU 2 x {hidden}, 24 inputs, batch 1: {:.2} us/frame CPU ({:.2} wall)",
            c.as_secs_f64() * 1e6 / n_frames as f64,
            w.as_secs_f64() * 1e6 / n_frames as f64
        );
    }

    for regime in &REGIMES {
        let mut data = Vec::new();
        for _ in 0..n_recordings {
            let mut words: Vec<String> = (0..words_per_recording)
                .map(|_| vocab.choose(&mut rng).cloned().unwrap_or_default())
                .collect();
            for _ in 0..3 {
                let i = rng.gen_range(0..words.len());
                words[i] = rng.gen_range(2..2000).to_string();
            }
            let text = words.join(" ");
            let cells = table.encode(&text).expect("encodable text");
            let lp = synth(&cells, per_cell, 0.015, 0.003, regime.log10_mass, &mut rng);
            data.push((text, lp));
        }
        let frames: usize = data.iter().map(|(_, a)| a.nrows()).sum();

        let beam = BeamParams::default();
        let plain = Decoder::new(&table, beam.clone()).expect("decoder");
        let with_lex = Decoder::new(&table, beam.clone())
            .expect("decoder")
            .with_lexicon(&lexicon, RescoreWeights::default())
            .expect("decoder");
        let data = &data;
        let (beam, plain, with_lex, lexicon) = (&beam, &plain, &with_lex, &lexicon);
        let mut methods: Vec<Method<'_>> = vec![
            (
                "greedy (argmax, collapse)",
                Box::new(move || {
                    data.iter()
                        .map(|(_, a)| greedy_decode(a.view()).unwrap().len())
                        .sum()
                }),
            ),
            (
                "beam 16, cells only",
                Box::new(move || {
                    data.iter()
                        .map(|(_, a)| beam_search(a.view(), beam).unwrap()[0].cells.len())
                        .sum()
                }),
            ),
            (
                "beam 16 + code reader + evidence",
                Box::new(move || {
                    data.iter()
                        .map(|(_, a)| plain.decode(a.view()).unwrap().text.len())
                        .sum()
                }),
            ),
            (
                "beam 16 + reader + evidence + lexicon",
                Box::new(move || {
                    // Cold near-word cache in every run: the recordings
                    // repeat from run to run, running text would not.
                    lexicon.clear_cache();
                    data.iter()
                        .map(|(_, a)| with_lex.decode(a.view()).unwrap().text.len())
                        .sum()
                }),
            ),
        ];
        let t = time_all(reps, &mut methods);
        let us = |d: Duration| d.as_secs_f64() * 1e6 / frames as f64;
        println!();
        println!("regime: {}", regime.name);
        println!(
            "{:<40} {:>13} {:>14} {:>9}",
            "method", "us/frame CPU", "us/frame wall", "x greedy"
        );
        for ((name, _), (w, c)) in methods.iter().zip(&t) {
            println!(
                "{name:<40} {:>13.3} {:>14.3} {:>9.1}",
                us(*c),
                us(*w),
                c.as_secs_f64() / t[0].1.as_secs_f64()
            );
        }
        let (g, r, f) = (us(t[0].1), us(t[2].1), us(t[3].1));
        for ((hidden, _), fw) in nets.iter().zip(&fwd_us) {
            println!(
                "with GRU 2 x {hidden} (CPU): beam 16 + reader + lexicon adds {:.0}% to network + greedy \
                 (beam 16 + reader alone {:.0}%)",
                100.0 * (f - g) / (fw + g),
                100.0 * (r - g) / (fw + g)
            );
        }

        // Side result: word accuracy on these synthetic outputs.
        let (mut words, mut e_greedy, mut e_beam, mut e_lex) = (0, 0, 0, 0);
        for (text, a) in data.iter() {
            let g = table.decode(&greedy_decode(a.view()).unwrap()).text;
            let (w, eg) = word_errors(&g, text);
            words += w;
            e_greedy += eg;
            e_beam += word_errors(&plain.decode(a.view()).unwrap().text, text).1;
            e_lex += word_errors(&with_lex.decode(a.view()).unwrap().text, text).1;
        }
        let acc = |e: usize| 100.0 * (words - e.min(words)) as f64 / words as f64;
        println!(
            "word accuracy ({words} words): greedy {:.1}%, beam 16 {:.1}%, beam 16 + lexicon {:.1}% \
             (word errors {e_greedy} / {e_beam} / {e_lex})",
            acc(e_greedy),
            acc(e_beam),
            acc(e_lex)
        );
    }
}
