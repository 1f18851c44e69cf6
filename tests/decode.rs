//! Integration tests of the decoder and the lexicon stage: beam search
//! against greedy decoding and brute force, text hypotheses with a code
//! reader, lexicon files, word rescoring, and the language packs.

use ndarray::Array2;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use std::collections::HashMap;
use tactread::decode::{
    beam_search, cell_evidence, greedy_decode, read, BeamParams, CodeReader, BLANK, N_CLASSES,
};
use tactread::Cell;

/// `[n_frames, 65]` log-probabilities from rows of (class, probability);
/// classes not named get probability 0 (`-inf`).
fn frames(rows: &[Vec<(usize, f64)>]) -> Array2<f32> {
    let mut a = Array2::from_elem((rows.len(), N_CLASSES), f32::NEG_INFINITY);
    for (t, row) in rows.iter().enumerate() {
        for &(c, p) in row {
            a[[t, c]] = (p as f32).ln();
        }
    }
    a
}

/// Peaky frames for a cell sequence: each cell held for `hold` frames with
/// probability `peak`, then `gap` blank frames; the remaining mass spread
/// over a few random other classes. Every frame's top class has probability
/// `peak` > 0.5.
fn peaky(cells: &[u8], hold: usize, gap: usize, peak: f64, rng: &mut ChaCha8Rng) -> Array2<f32> {
    let mut rows = Vec::new();
    let mut push = |top: usize, rng: &mut ChaCha8Rng| {
        let mut row: HashMap<usize, f64> = HashMap::new();
        row.insert(top, peak);
        let rest = 1.0 - peak;
        let k = 3;
        for _ in 0..k {
            let c = rng.gen_range(0..N_CLASSES);
            *row.entry(c).or_insert(0.0) += rest / k as f64;
        }
        rows.push(row.into_iter().collect::<Vec<_>>());
    };
    push(BLANK, rng);
    for &c in cells {
        for _ in 0..hold {
            push(c as usize, rng);
        }
        for _ in 0..gap {
            push(BLANK, rng);
        }
    }
    frames(&rows)
}

fn masks(cells: &[Cell]) -> Vec<u8> {
    cells.iter().map(|c| c.mask()).collect()
}

#[test]
fn beam_width_one_equals_greedy_on_peaky_inputs() {
    // When every frame's most probable class has probability above 0.5 the
    // single surviving prefix is always the best path's prefix.
    let mut rng = ChaCha8Rng::seed_from_u64(7);
    let params = BeamParams {
        beam_width: 1,
        n_best: 1,
        ..BeamParams::default()
    };
    for trial in 0..20 {
        let n = rng.gen_range(1..12);
        let cells: Vec<u8> = (0..n).map(|_| rng.gen_range(0..64)).collect();
        let hold = rng.gen_range(1..4);
        let gap = rng.gen_range(0..3);
        let lp = peaky(&cells, hold, gap, 0.9, &mut rng);
        let greedy = greedy_decode(lp.view()).unwrap();
        let beam = beam_search(lp.view(), &params).unwrap();
        assert_eq!(masks(&beam[0].cells), masks(&greedy), "trial {trial}");
    }
}

#[test]
fn greedy_collapses_repeats_and_blanks() {
    // The CTC collapse rule (Graves et al. 2006, section 2): a a _ a b b -> a a b.
    let a = (1usize, 1.0);
    let b = (3usize, 1.0);
    let blank = (BLANK, 1.0);
    let lp = frames(&[vec![a], vec![a], vec![blank], vec![a], vec![b], vec![b]]);
    assert_eq!(masks(&greedy_decode(lp.view()).unwrap()), vec![1, 1, 3]);
}

/// Every labelling's probability by enumerating all alignments over the
/// classes with non-zero probability (the definition of CTC, Graves et al.
/// 2006, equations 2-3).
fn brute_force(lp: &Array2<f32>) -> HashMap<Vec<u8>, f64> {
    let support: Vec<Vec<(usize, f64)>> = lp
        .outer_iter()
        .map(|row| {
            row.iter()
                .enumerate()
                .filter(|(_, v)| v.is_finite())
                .map(|(c, &v)| (c, (v as f64).exp()))
                .collect()
        })
        .collect();
    let mut out: HashMap<Vec<u8>, f64> = HashMap::new();
    let mut idx = vec![0usize; support.len()];
    loop {
        let mut p = 1.0;
        let mut label = Vec::new();
        let mut prev = usize::MAX;
        for (t, &i) in idx.iter().enumerate() {
            let (c, q) = support[t][i];
            p *= q;
            if c != BLANK && c != prev {
                label.push(c as u8);
            }
            prev = c;
        }
        *out.entry(label).or_insert(0.0) += p;
        // Next alignment (odometer).
        let mut t = 0;
        loop {
            if t == idx.len() {
                return out;
            }
            idx[t] += 1;
            if idx[t] < support[t].len() {
                break;
            }
            idx[t] = 0;
            t += 1;
        }
    }
}

#[test]
fn wide_beam_finds_the_exact_most_probable_labelling() {
    let mut rng = ChaCha8Rng::seed_from_u64(11);
    let classes = [BLANK, 1, 3, 9];
    let exhaustive = BeamParams {
        beam_width: 5000,
        n_best: 5,
        min_cell_prob: 0.0,
        max_cells_per_frame: 64,
        blank_skip: 1.0,
        score_margin: 1000.0,
        merge_equal_text: false,
    };
    for trial in 0..10 {
        let t = rng.gen_range(2..=6);
        let rows: Vec<Vec<(usize, f64)>> = (0..t)
            .map(|_| {
                let w: Vec<f64> = classes.iter().map(|_| rng.gen_range(0.05..1.0)).collect();
                let z: f64 = w.iter().sum();
                classes.iter().zip(&w).map(|(&c, &x)| (c, x / z)).collect()
            })
            .collect();
        let lp = frames(&rows);
        let truth = brute_force(&lp);
        let mut ranked: Vec<(Vec<u8>, f64)> = truth.into_iter().collect();
        ranked.sort_by(|a, b| b.1.total_cmp(&a.1));
        let beam = beam_search(lp.view(), &exhaustive).unwrap();
        for (k, hyp) in beam.iter().enumerate() {
            assert_eq!(masks(&hyp.cells), ranked[k].0, "trial {trial}, rank {k}");
            assert!(
                (hyp.log_score - ranked[k].1.ln()).abs() < 1e-9,
                "trial {trial}, rank {k}: {} vs {}",
                hyp.log_score,
                ranked[k].1.ln()
            );
        }
        // The exact likelihood of the best labelling by the forward pass.
        let cells: Vec<Cell> = ranked[0].0.iter().map(|&m| Cell::from_mask(m)).collect();
        let (ll, _) = cell_evidence(lp.view(), &cells).unwrap();
        assert!((ll - ranked[0].1.ln()).abs() < 1e-9);
    }
}

/// A tiny invented code for testing the reader inside the search: dots 6
/// (mask 32) makes the next letter upper case; a = dots 1, b = dots 12,
/// c = dots 14; dots 2 and dots 3 both read as "x"; the empty cell is a
/// space; everything else reads as "?".
#[derive(Clone, Debug, Default)]
struct ToyReader {
    capital: bool,
}

impl CodeReader for ToyReader {
    type State = bool;
    fn push(&mut self, cell: Cell) -> String {
        let s = match cell.mask() {
            32 => {
                self.capital = true;
                return String::new();
            }
            0 => " ",
            1 => "a",
            3 => "b",
            9 => "c",
            2 | 4 => "x",
            _ => "?",
        };
        let out = if self.capital {
            s.to_uppercase()
        } else {
            s.to_string()
        };
        self.capital = false;
        out
    }
    fn state(&self) -> bool {
        self.capital
    }
    fn finish(self) -> String {
        String::new()
    }
}

#[test]
fn reader_state_applies_inside_the_search() {
    let lp = frames(&[
        vec![(32, 0.9), (BLANK, 0.1)],
        vec![(BLANK, 1.0)],
        vec![(1, 0.8), (3, 0.2)],
        vec![(BLANK, 1.0)],
        vec![(9, 0.7), (1, 0.3)],
    ]);
    let r = read(lp.view(), ToyReader::default(), &BeamParams::default()).unwrap();
    assert_eq!(r.text, "Ac");
    assert_eq!(r.hypotheses[0].text, "Ac");
    let texts: Vec<&str> = r.hypotheses.iter().map(|h| h.text.as_str()).collect();
    assert!(texts.contains(&"Aa") && texts.contains(&"Bc"), "{texts:?}");
    // Characters: "A" from cell 1 with alternative "B", "c" from cell 2
    // with alternative "a"; the indicator produces no character.
    assert_eq!(r.chars.len(), 2);
    assert_eq!(r.chars[0].text, "A");
    assert_eq!(r.chars[0].cell, 1);
    assert!((r.chars[0].prob - 0.8).abs() < 1e-6);
    assert_eq!(r.chars[0].alternatives[0].0, "B");
    assert!((r.chars[0].alternatives[0].1 - 0.2).abs() < 1e-6);
    assert_eq!(r.chars[1].alternatives[0].0, "a");
    // Dot probabilities of cell "c" (dots 1 4): dot 1 certain, dot 4 0.7.
    let c = &r.cells[2];
    assert!((c.dot_probs[0] - 1.0).abs() < 1e-6);
    assert!((c.dot_probs[3] - 0.7).abs() < 1e-6);
    assert!(c.dot_probs[1].abs() < 1e-6);
    // Scores: P("Ac") = 0.9 * 0.8 * 0.7 (one alignment each).
    assert!((r.hypotheses[0].log_score - (0.9f64 * 0.8 * 0.7).ln()).abs() < 1e-6);
    assert!(r.confidence > 0.0 && r.confidence < 1.0);
}

#[test]
fn equal_texts_merge_and_outrank_a_single_cell_sequence() {
    // One frame: "a" 0.4, dots 2 ("x") 0.3, dots 3 ("x") 0.3. As cells the
    // best is "a"; as text "x" has 0.6.
    let lp = frames(&[vec![(1, 0.4), (2, 0.3), (4, 0.3)]]);
    let cells = beam_search(lp.view(), &BeamParams::default()).unwrap();
    assert_eq!(masks(&cells[0].cells), vec![1]);
    let r = read(lp.view(), ToyReader::default(), &BeamParams::default()).unwrap();
    assert_eq!(r.text, "x");
    assert!((r.hypotheses[0].log_score - 0.6f64.ln()).abs() < 1e-6);
    let unmerged = BeamParams {
        merge_equal_text: false,
        ..BeamParams::default()
    };
    let r = read(lp.view(), ToyReader::default(), &unmerged).unwrap();
    // Without merging in the search the final texts are still summed.
    assert_eq!(r.text, "x");
}

#[test]
fn bad_inputs_are_errors() {
    let lp = Array2::<f32>::zeros((3, 64));
    assert!(beam_search(lp.view(), &BeamParams::default()).is_err());
    let lp = Array2::<f32>::zeros((3, 65));
    let err = greedy_decode(lp.view()).unwrap_err().to_string();
    assert!(err.contains("logits"), "{err}");
    let bad = BeamParams {
        beam_width: 0,
        ..BeamParams::default()
    };
    let lp = frames(&[vec![(BLANK, 1.0)]]);
    assert!(beam_search(lp.view(), &bad).is_err());
    // Empty input decodes to nothing.
    let empty = Array2::<f32>::zeros((0, 65));
    assert!(
        beam_search(empty.view(), &BeamParams::default()).unwrap()[0]
            .cells
            .is_empty()
    );
}
