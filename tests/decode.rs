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

// ---------------------------------------------------------------------------
// Word rescoring with a small stand-in code (used until the language packs'
// code tables are on main; the pack tests below use the real ones).

use tactread::decode::{BrailleCode, Decoder};
use tactread::lexicon::{parse_word_list, Lexicon, RescoreWeights};
use tactread::{Error, Result};

/// Letters a-z as in Unified English Braille grade 1 (ICEB, "The Rules of
/// Unified English Braille", 2nd ed. 2013, section 3; dot patterns from
/// memory, matching shared/domain.md's description: a-j top two rows, k-t
/// add dot 3, u v x y z add dots 3 6 to a-e, w = 2456).
const UEB_LETTERS: [&[u8]; 26] = [
    &[1],
    &[1, 2],
    &[1, 4],
    &[1, 4, 5],
    &[1, 5],
    &[1, 2, 4],
    &[1, 2, 4, 5],
    &[1, 2, 5],
    &[2, 4],
    &[2, 4, 5],
    &[1, 3],
    &[1, 2, 3],
    &[1, 3, 4],
    &[1, 3, 4, 5],
    &[1, 3, 5],
    &[1, 2, 3, 4],
    &[1, 2, 3, 4, 5],
    &[1, 2, 3, 5],
    &[2, 3, 4],
    &[2, 3, 4, 5],
    &[1, 3, 6],
    &[1, 2, 3, 6],
    &[2, 4, 5, 6],
    &[1, 3, 4, 6],
    &[1, 3, 4, 5, 6],
    &[1, 3, 5, 6],
];
const CAPITAL: u8 = 0b10_0000; // dots 6
const NUMERIC: u8 = 0b11_1100; // dots 3456

fn letter_mask(ch: char) -> Option<u8> {
    let i = (ch as u32).checked_sub('a' as u32)? as usize;
    UEB_LETTERS
        .get(i)
        .map(|d| Cell::from_dots(d).unwrap().mask())
}

struct StandIn;

#[derive(Clone, Copy, Default)]
struct StandInReader {
    capital: bool,
    numeric: bool,
}

impl CodeReader for StandInReader {
    type State = (bool, bool);
    fn push(&mut self, cell: Cell) -> String {
        let m = cell.mask();
        if m == 0 {
            self.numeric = false;
            self.capital = false;
            return " ".into();
        }
        if m == CAPITAL {
            self.capital = true;
            return String::new();
        }
        if m == NUMERIC {
            self.numeric = true;
            return String::new();
        }
        let letter = (0..26u8).find(|&i| letter_mask((b'a' + i) as char) == Some(m));
        let out = match letter {
            Some(i) if self.numeric && i < 10 => ((b'0' + (i + 1) % 10) as char).to_string(),
            Some(i) => {
                self.numeric = false;
                let c = (b'a' + i) as char;
                if self.capital {
                    c.to_ascii_uppercase().to_string()
                } else {
                    c.to_string()
                }
            }
            None => cell.to_char().to_string(),
        };
        self.capital = false;
        out
    }
    fn state(&self) -> (bool, bool) {
        (self.capital, self.numeric)
    }
    fn finish(self) -> String {
        String::new()
    }
}

impl BrailleCode for StandIn {
    type Reader<'a> = StandInReader;
    fn reader(&self) -> StandInReader {
        StandInReader::default()
    }
    fn encode(&self, text: &str) -> Result<Vec<Cell>> {
        let mut out = Vec::new();
        let mut numeric = false;
        for (i, ch) in text.chars().enumerate() {
            if ch == ' ' {
                out.push(Cell::EMPTY);
                numeric = false;
            } else if let Some(d) = ch.to_digit(10) {
                if !numeric {
                    out.push(Cell::from_mask(NUMERIC));
                    numeric = true;
                }
                let letter = (b'a' + ((d + 9) % 10) as u8) as char;
                out.push(Cell::from_mask(letter_mask(letter).unwrap()));
            } else if let Some(m) = letter_mask(ch.to_ascii_lowercase()) {
                if ch.is_ascii_uppercase() {
                    out.push(Cell::from_mask(CAPITAL));
                }
                out.push(Cell::from_mask(m));
            } else {
                return Err(Error::Unencodable {
                    ch,
                    code: ch as u32,
                    position: i + 1,
                    lang: "stand-in".into(),
                    hint: "test code: letters, digits and spaces only".into(),
                });
            }
        }
        Ok(out)
    }
}

/// Frames for cells read with the given confidence: each cell two frames,
/// a blank frame after it. `(mask, p, alt)`: the network gives the cell
/// probability `p` and the rest to `alt` (mask) when given; 1e-4 floor
/// elsewhere, renormalised.
fn frames_for(cells: &[(u8, f64, Option<u8>)]) -> Array2<f32> {
    let floor = 1e-4;
    let mut rows: Vec<Vec<f64>> = Vec::new();
    let row = |top: usize, p: f64, alt: Option<u8>| {
        let mut r = vec![floor; N_CLASSES];
        r[top] = p;
        if let Some(a) = alt {
            r[a as usize] = 1.0 - p;
        }
        let z: f64 = r.iter().sum();
        r.iter().map(|x| x / z).collect::<Vec<f64>>()
    };
    rows.push(row(BLANK, 0.99, None));
    for &(m, p, alt) in cells {
        rows.push(row(m as usize, p, alt));
        rows.push(row(m as usize, p, alt));
        rows.push(row(BLANK, 0.99, None));
    }
    let mut a = Array2::zeros((rows.len(), N_CLASSES));
    for (t, r) in rows.iter().enumerate() {
        for (c, &p) in r.iter().enumerate() {
            a[[t, c]] = p.ln() as f32;
        }
    }
    a
}

/// Cells of `text` as the stand-in code writes it, all read with
/// probability 0.98.
fn confident(text: &str) -> Vec<(u8, f64, Option<u8>)> {
    StandIn
        .encode(text)
        .unwrap()
        .into_iter()
        .map(|c| (c.mask(), 0.98, None))
        .collect()
}

fn mask_of(ch: char) -> u8 {
    letter_mask(ch).unwrap()
}

#[test]
fn rescoring_repairs_misread_words_and_keeps_numbers_and_names() {
    let lexicon = Lexicon::builtin("en").unwrap();
    // "the cat sat by dog 42 zog": the network reads the `a` of "cat" as
    // `e` (0.6 against 0.4: the reading "cet" is itself a rare listed word),
    // and the `o` of "dog" as `p` (dots 1234 for 135). "42" is a number and
    // "zog" a name nobody listed, both read confidently.
    let mut cells = confident("the ");
    cells.push((mask_of('c'), 0.98, None));
    cells.push((mask_of('e'), 0.6, Some(mask_of('a'))));
    cells.push((mask_of('t'), 0.98, None));
    cells.extend(confident(" sat by "));
    cells.push((mask_of('d'), 0.98, None));
    cells.push((mask_of('p'), 0.7, Some(mask_of('o'))));
    cells.push((mask_of('g'), 0.98, None));
    cells.extend(confident(" 42 zog"));
    let lp = frames_for(&cells);

    let plain = Decoder::new(&StandIn, BeamParams::default()).unwrap();
    let raw = plain.decode(lp.view()).unwrap();
    assert_eq!(raw.text, "the cet sat by dpg 42 zog");

    let decoder = Decoder::new(&StandIn, BeamParams::default())
        .unwrap()
        .with_lexicon(&lexicon, RescoreWeights::default())
        .unwrap();
    let fixed = decoder.decode(lp.view()).unwrap();
    assert_eq!(fixed.text, "the cat sat by dog 42 zog");
    let changed: Vec<(&str, &str)> = fixed
        .words
        .iter()
        .filter(|w| w.raw != w.chosen)
        .map(|w| (w.raw.as_str(), w.chosen.as_str()))
        .collect();
    assert_eq!(changed, vec![("cet", "cat"), ("dpg", "dog")]);
    // "42" has no letters: it is not even a rescoring slot.
    assert!(fixed.words.iter().all(|w| w.raw != "42"));
    // "zog" was considered (its neighbours in the lexicon, e.g. "dog",
    // "log", were scored) and kept.
    let zog = fixed.words.iter().find(|w| w.raw == "zog").unwrap();
    assert!(zog.candidates.len() > 1);
    assert_eq!(zog.chosen, "zog");
}

#[test]
fn rescoring_keeps_capitals() {
    let lexicon = Lexicon::builtin("en").unwrap();
    let mut cells = vec![(CAPITAL, 0.98, None), (mask_of('c'), 0.98, None)];
    cells.push((mask_of('e'), 0.6, Some(mask_of('a'))));
    cells.push((mask_of('t'), 0.98, None));
    let lp = frames_for(&cells);
    let decoder = Decoder::new(&StandIn, BeamParams::default())
        .unwrap()
        .with_lexicon(&lexicon, RescoreWeights::default())
        .unwrap();
    assert_eq!(decoder.decode(lp.view()).unwrap().text, "Cat");
}

#[test]
fn tuning_finds_weights_at_least_as_good_as_no_lexicon() {
    use tactread::lexicon::{tune, TuneItem, WeightGrid};
    let lexicon = Lexicon::builtin("en").unwrap();
    let texts = ["the cat sat", "a red dog ran", "zog saw 12 owls"];
    let mut arrays = Vec::new();
    for (k, text) in texts.iter().enumerate() {
        let mut cells = confident(text);
        // Misread the second letter of the second word in the first two.
        if k < 2 {
            let space = cells.iter().position(|c| c.0 == 0).unwrap();
            let (m, _, _) = cells[space + 2];
            cells[space + 2] = (m ^ 0b01_0000, 0.6, Some(m)); // dot 5 flipped
        }
        arrays.push(frames_for(&cells));
    }
    let items: Vec<TuneItem> = arrays
        .iter()
        .zip(texts)
        .map(|(a, t)| TuneItem {
            log_probs: a.view(),
            truth: t,
        })
        .collect();
    let tuned = tune(
        &items,
        &StandIn,
        &lexicon,
        &BeamParams::default(),
        &RescoreWeights::default(),
        &WeightGrid::default(),
    )
    .unwrap();
    // 11 words, 2 misread by the beam.
    assert!(
        (tuned.raw_word_accuracy - 9.0 / 11.0).abs() < 1e-9,
        "{tuned:?}"
    );
    assert!((tuned.word_accuracy - 1.0).abs() < 1e-9, "{tuned:?}");
    assert_eq!(tuned.tried, 6 * 4 * 3 * 5);
    // With the lexicon weight at 0 nothing can beat the raw evidence, so the
    // first grid point (lm 0) cannot be the winner.
    assert!(tuned.weights.lm_weight > 0.0);
}

#[test]
fn lexicon_file_round_trip_and_version_check() {
    let dir = std::env::temp_dir().join(format!("tactread-lex-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let path = dir.join("small.lex");
    let entries = parse_word_list(
        "Straße\t7\nhaus\t3\nhaus\t1\n",
        std::path::Path::new("w.txt"),
    )
    .unwrap();
    let lex = Lexicon::from_entries(&entries, "de").unwrap();
    lex.save(&path).unwrap();
    let back = Lexicon::load(&path).unwrap();
    assert_eq!(
        back.words(),
        vec![("haus".to_string(), 4), ("straße".to_string(), 7)]
    );
    assert_eq!(back.lang(), "de");
    // A file written by a future version is refused with a format error.
    let mut bytes = std::fs::read(&path).unwrap();
    bytes[16..20].copy_from_slice(&99u32.to_le_bytes());
    std::fs::write(&path, &bytes).unwrap();
    let err = Lexicon::load(&path).unwrap_err();
    assert!(matches!(err, Error::Format { .. }), "{err}");
    assert_eq!(err.exit_code(), 3);
    assert!(err.to_string().contains("version 99"), "{err}");
    std::fs::remove_dir_all(&dir).unwrap();
}

#[test]
fn builtin_lexicons_load_for_every_language() {
    for lang in tactread::lexicon::BUILTIN_LANGS {
        let lex = Lexicon::builtin(lang).unwrap();
        assert!(lex.len() > 30_000, "{lang}: {}", lex.len());
        assert_eq!(lex.lang(), lang);
    }
    // Everyday words of each language are listed (common practice).
    let en = Lexicon::builtin("en").unwrap();
    assert!(en.count("house").is_some());
    let de = Lexicon::builtin("de").unwrap();
    // wordfreq case-folds German ß to "ss" (its tokenizer does), so the
    // list holds "strasse" and no word with ß: see lexicons/WORDLISTS.md.
    assert!(de.count("strasse").is_some() && de.count("über").is_some());
    assert!(de.count("straße").is_none());
    let fr = Lexicon::builtin("fr").unwrap();
    assert!(fr.count("été").is_some() && fr.count("français").is_some());
    let es = Lexicon::builtin("es").unwrap();
    assert!(es.count("año").is_some() && es.count("también").is_some());
    assert!(Lexicon::builtin("xx").is_err());
}
