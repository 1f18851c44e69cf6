//! Decoder benchmark: greedy decoding vs beam 16 vs beam 16 + lexicon
//! rescoring, on synthetic network outputs (`[n_frames, 65]`) made from
//! English text with a fixed seed, outside the timed part. Prints medians
//! per recording and per frame, the overhead ratios, and (as a side result)
//! word accuracy with and without the lexicon on these synthetic outputs.
//!
//! `cargo bench --bench decode` (full) or `cargo bench --bench decode --
//! --quick` (smoke run, as CI does).

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
/// is read wrongly with confidence 0.75.
fn synth(
    cells: &[Cell],
    per_cell: usize,
    p_doubt: f64,
    p_flip: f64,
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
    let blank_row = |rng: &mut ChaCha8Rng| rng.gen_range(0.97..0.9995);
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

fn time<F: FnMut() -> usize>(reps: usize, mut f: F) -> Duration {
    let mut out = Vec::with_capacity(reps);
    let mut check = 0;
    for _ in 0..reps {
        let t0 = Instant::now();
        check += f();
        out.push(t0.elapsed());
    }
    assert!(check > 0, "decoders produced nothing");
    median(out)
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

fn main() {
    let quick = std::env::args().any(|a| a == "--quick");
    let (n_recordings, reps) = if quick { (3, 3) } else { (20, 15) };
    let words_per_recording = 40;
    let per_cell = 20;
    let mut rng = ChaCha8Rng::seed_from_u64(2024);

    let t0 = Instant::now();
    let lexicon = Lexicon::builtin("en").expect("builtin lexicon");
    let lexicon_build = t0.elapsed();
    let table = code::english();
    let mut vocab = lexicon.words();
    vocab.sort_by_key(|w| std::cmp::Reverse(w.1));
    let vocab: Vec<String> = vocab.into_iter().take(3000).map(|(w, _)| w).collect();

    let mut data = Vec::new();
    for _ in 0..n_recordings {
        let mut words: Vec<String> = (0..words_per_recording)
            .map(|_| vocab.choose(&mut rng).cloned().unwrap_or_default())
            .collect();
        // Some numbers, which the lexicon must leave alone.
        for _ in 0..3 {
            let i = rng.gen_range(0..words.len());
            words[i] = rng.gen_range(2..2000).to_string();
        }
        let text = words.join(" ");
        let cells = table.encode(&text).expect("encodable text");
        let lp = synth(&cells, per_cell, 0.015, 0.003, &mut rng);
        data.push((text, lp));
    }
    let frames: usize = data.iter().map(|(_, a)| a.nrows()).sum();
    let per_rec = frames as f64 / data.len() as f64;

    let beam = BeamParams::default();
    let plain = Decoder::new(&table, beam.clone()).expect("decoder");
    let weights = RescoreWeights::default();
    let with_lex = Decoder::new(&table, beam.clone())
        .expect("decoder")
        .with_lexicon(&lexicon, weights)
        .expect("decoder");

    let greedy = time(reps, || {
        data.iter()
            .map(|(_, a)| greedy_decode(a.view()).unwrap().len())
            .sum()
    });
    let cells16 = time(reps, || {
        data.iter()
            .map(|(_, a)| beam_search(a.view(), &beam).unwrap()[0].cells.len())
            .sum()
    });
    let read16 = time(reps, || {
        data.iter()
            .map(|(_, a)| plain.decode(a.view()).unwrap().text.len())
            .sum()
    });
    let full = time(reps, || {
        data.iter()
            .map(|(_, a)| with_lex.decode(a.view()).unwrap().text.len())
            .sum()
    });

    let us_frame = |d: Duration| d.as_secs_f64() * 1e6 / frames as f64;
    let ms_rec = |d: Duration| d.as_secs_f64() * 1e3 / data.len() as f64;
    println!(
        "decoder benchmark: {} recordings x {words_per_recording} words, {per_rec:.0} frames each ({per_cell} frames per cell), medians of {reps} runs",
        data.len()
    );
    println!(
        "{:<44} {:>12} {:>12} {:>8}",
        "method", "ms/recording", "us/frame", "x greedy"
    );
    for (name, d) in [
        ("greedy (argmax, collapse)", greedy),
        ("beam 16, cells only", cells16),
        ("beam 16 + code reader + evidence", read16),
        ("beam 16 + code reader + evidence + lexicon", full),
    ] {
        println!(
            "{name:<44} {:>12.3} {:>12.3} {:>8.1}",
            ms_rec(d),
            us_frame(d),
            d.as_secs_f64() / greedy.as_secs_f64()
        );
    }
    println!(
        "rescoring adds {:.1}% to beam 16 + reader; builtin en lexicon compiled in {:.1} ms",
        100.0 * (full.as_secs_f64() / read16.as_secs_f64() - 1.0),
        lexicon_build.as_secs_f64() * 1e3
    );

    // Side result: word accuracy on these synthetic outputs.
    let (mut words, mut e_greedy, mut e_beam, mut e_lex) = (0, 0, 0, 0);
    for (text, a) in &data {
        let g = table.decode(&greedy_decode(a.view()).unwrap()).text;
        let b = plain.decode(a.view()).unwrap().text;
        let l = with_lex.decode(a.view()).unwrap().text;
        let (w, eg) = word_errors(&g, text);
        words += w;
        e_greedy += eg;
        e_beam += word_errors(&b, text).1;
        e_lex += word_errors(&l, text).1;
    }
    let acc = |e: usize| 100.0 * (words - e.min(words)) as f64 / words as f64;
    println!(
        "word accuracy on the synthetic outputs ({words} words): greedy {:.1}%, beam 16 {:.1}%, beam 16 + lexicon {:.1}% (word errors {e_greedy} / {e_beam} / {e_lex})",
        acc(e_greedy),
        acc(e_beam),
        acc(e_lex)
    );
}
