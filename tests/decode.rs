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
// Word rescoring and the language packs, with the builtin code tables.

use tactread::braille::CodeTable;
use tactread::decode::Decoder;
use tactread::lexicon::{parse_word_list, Lexicon, RescoreWeights};
use tactread::Error;

fn en() -> CodeTable {
    CodeTable::builtin("en").unwrap()
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

/// Cells of `text` as `code` writes it, all read with probability 0.98.
fn confident_in(code: &CodeTable, text: &str) -> Vec<(u8, f64, Option<u8>)> {
    code.encode(text)
        .unwrap()
        .into_iter()
        .map(|c| (c.mask(), 0.98, None))
        .collect()
}

fn confident(text: &str) -> Vec<(u8, f64, Option<u8>)> {
    confident_in(&en(), text)
}

/// The one cell of a letter in `code`.
fn cell_in(code: &CodeTable, ch: char) -> u8 {
    let cells = code.encode(&ch.to_string()).unwrap();
    assert_eq!(cells.len(), 1, "{ch} is one cell");
    cells[0].mask()
}

fn mask_of(ch: char) -> u8 {
    cell_in(&en(), ch)
}

/// Dots 6, the capital indicator of UEB (ICEB, "The Rules of Unified
/// English Braille", 2nd ed. 2013, section 8).
const CAPITAL: u8 = 0b10_0000;

/// (as read, as chosen) for every word rescoring changed.
fn changed_words(d: &tactread::decode::Decoded) -> Vec<(&str, &str)> {
    d.words
        .iter()
        .filter(|w| w.raw != w.chosen)
        .map(|w| (w.raw.as_str(), w.chosen.as_str()))
        .collect()
}

#[test]
fn rescoring_repairs_misread_words_and_keeps_numbers_and_names() {
    let table = en();
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

    let plain = Decoder::new(&table, BeamParams::default()).unwrap();
    let raw = plain.decode(lp.view()).unwrap();
    assert_eq!(raw.text, "the cet sat by dpg 42 zog");

    let decoder = Decoder::new(&table, BeamParams::default())
        .unwrap()
        .with_lexicon(&lexicon, RescoreWeights::default())
        .unwrap();
    let fixed = decoder.decode(lp.view()).unwrap();
    assert_eq!(fixed.text, "the cat sat by dog 42 zog");
    let changed = changed_words(&fixed);
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
fn rescoring_joins_split_words_and_splits_merged_ones() {
    let table = en();
    let lexicon = Lexicon::builtin("en").unwrap();
    // "the harbour gate opens from the pier" (invented notice). The network
    // reads the `a` of "gate" (dot 1) as a space, the empty cell (0.6
    // against 0.4), so "gate" comes out as "g te"; and it reads the space
    // between "from" and "the" as `a` (0.6 against 0.4), so they come out as
    // one word "fromathe". Rescoring one word at a time cannot repair
    // either.
    let mut cells = confident("the harbour g");
    cells.push((0, 0.6, Some(mask_of('a'))));
    cells.extend(confident("te opens from"));
    cells.push((mask_of('a'), 0.6, Some(0)));
    cells.extend(confident("the pier"));
    let lp = frames_for(&cells);
    let plain = Decoder::new(&table, BeamParams::default()).unwrap();
    let raw = plain.decode(lp.view()).unwrap();
    assert_eq!(raw.text, "the harbour g te opens fromathe pier");

    let decoder = Decoder::new(&table, BeamParams::default())
        .unwrap()
        .with_lexicon(&lexicon, RescoreWeights::default())
        .unwrap();
    let fixed = decoder.decode(lp.view()).unwrap();
    assert_eq!(fixed.text, "the harbour gate opens from the pier");
    let changed = changed_words(&fixed);
    assert_eq!(changed, vec![("g te", "gate"), ("fromathe", "from the")]);
    // The joined entry covers both words' cells and the space between.
    let gate = fixed.words.iter().find(|w| w.chosen == "gate").unwrap();
    assert_eq!(gate.cells.1 - gate.cells.0, 4);
    // Confident neighbours stay apart ("opens" and "pier" are listed).
    assert!(fixed.words.iter().any(|w| w.chosen == "opens"));
    assert!(fixed.words.iter().any(|w| w.chosen == "pier"));
}

#[test]
fn rescoring_keeps_capitals() {
    let table = en();
    let lexicon = Lexicon::builtin("en").unwrap();
    let mut cells = vec![(CAPITAL, 0.98, None), (mask_of('c'), 0.98, None)];
    cells.push((mask_of('e'), 0.6, Some(mask_of('a'))));
    cells.push((mask_of('t'), 0.98, None));
    let lp = frames_for(&cells);
    let decoder = Decoder::new(&table, BeamParams::default())
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
        &en(),
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
    let dir = common::cli::test_dir("lex");
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

/// One crafted recording per language pack: the text's cells read with
/// confidence, except one letter of one word misread with probability 0.6
/// against 0.4 for the right letter. The plain beam reads the misread word;
/// with the pack's lexicon the word is repaired and the rest kept.
/// Letters: (misread, right) pairs differ by one dot in each pack's table
/// (checked here through the packs' encoders, not assumed).
#[test]
fn packs_decode_and_repair_in_every_language() {
    let cases = [
        // lang, truth, word index, letter index, misread letter
        ("en", "the old house stood near the river", 2, 1, 'e'),
        ("de", "das kleine haus steht über dem fluss", 2, 1, 'e'),
        ("fr", "la petite maison était près de la rivière", 2, 1, 'e'),
        ("es", "la casa pequeña está junto al río", 1, 1, 'e'),
    ];
    for (lang, truth, w, k, wrong) in cases {
        let table = CodeTable::builtin(lang).unwrap();
        let lexicon = Lexicon::builtin(lang).unwrap();
        let words: Vec<&str> = truth.split(' ').collect();
        let mut cells = Vec::new();
        let mut misread = String::new();
        for (i, word) in words.iter().enumerate() {
            if i > 0 {
                cells.push((0u8, 0.98, None));
            }
            if i == w {
                for (j, ch) in word.chars().enumerate() {
                    if j == k {
                        let right = cell_in(&table, ch);
                        let bad = cell_in(&table, wrong);
                        assert_eq!((right ^ bad).count_ones(), 1, "{lang}: {ch} vs {wrong}");
                        cells.push((bad, 0.6, Some(right)));
                        misread.push(wrong);
                    } else {
                        cells.extend(confident_in(&table, &ch.to_string()));
                        misread.push(ch);
                    }
                }
            } else {
                cells.extend(confident_in(&table, word));
            }
        }
        let lp = frames_for(&cells);
        let raw = Decoder::new(&table, BeamParams::default())
            .unwrap()
            .decode(lp.view())
            .unwrap();
        let mut want_raw: Vec<String> = words.iter().map(|s| s.to_string()).collect();
        want_raw[w] = misread.clone();
        assert_eq!(raw.text, want_raw.join(" "), "{lang}");
        let fixed = Decoder::new(&table, BeamParams::default())
            .unwrap()
            .with_lexicon(&lexicon, RescoreWeights::default())
            .unwrap()
            .decode(lp.view())
            .unwrap();
        assert_eq!(fixed.text, truth, "{lang}: misread {misread:?}");
    }
}

#[test]
fn every_builtin_word_is_written_by_its_pack() {
    // scripts/make_wordlists.py keeps only words of the packs' letters; the
    // packs' encoders must agree, or rescoring could never propose them.
    for lang in tactread::lexicon::BUILTIN_LANGS {
        let table = CodeTable::builtin(lang).unwrap();
        let lexicon = Lexicon::builtin(lang).unwrap();
        let bad: Vec<String> = lexicon
            .words()
            .into_iter()
            .filter(|(w, _)| table.encode(w).is_err())
            .map(|(w, _)| w)
            .take(5)
            .collect();
        assert!(bad.is_empty(), "{lang}: {bad:?}");
    }
}

// ---------------------------------------------------------------------------
// `tactread lexicon`, through the built binary.

mod common;

use common::cli::tactread;

#[test]
fn cli_lexicon_build_info_and_errors() {
    let dir = common::cli::test_dir("cli-lex");
    let words = dir.join("words.txt");
    let out = dir.join("w.lex");
    std::fs::write(&words, "harbour\t12\nharbor\t30\nlighthouse\n").unwrap();
    let (w, o) = (words.to_str().unwrap(), out.to_str().unwrap());
    let r = tactread(&["lexicon", "build", w, "--out", o, "--lang", "en"]);
    assert!(r.status.success(), "{}", String::from_utf8_lossy(&r.stderr));
    assert!(String::from_utf8_lossy(&r.stdout).contains("3 words"));
    let r = tactread(&["lexicon", "info", o, "--near", "harbeur"]);
    let text = String::from_utf8_lossy(&r.stdout);
    assert!(text.contains("harbour\t12\t1 edit"), "{text}");
    // No overwrite without --force (exit code 4).
    let r = tactread(&["lexicon", "build", w, "--out", o]);
    assert_eq!(r.status.code(), Some(4));
    assert!(tactread(&["lexicon", "build", w, "--out", o, "--force"])
        .status
        .success());
    // A bad line names file and line (exit code 1).
    std::fs::write(&words, "harbour\t12\nharbor\tmany\n").unwrap();
    let r = tactread(&["lexicon", "build", w, "--out", o, "--force"]);
    assert_eq!(r.status.code(), Some(1));
    let err = String::from_utf8_lossy(&r.stderr);
    assert!(
        err.contains("words.txt line 2") && err.contains("count"),
        "{err}"
    );
    // Not a lexicon file (exit code 3).
    let r = tactread(&["lexicon", "info", w]);
    assert_eq!(r.status.code(), Some(3));
}

/// A small untrained model for `recording`, saved to `path`: its readings
/// are noise, but every stage of `tactread decode` runs on real shapes.
fn untrained_model(recording: &std::path::Path, path: &std::path::Path) {
    use tactread::net::{GruConfig, Model, Network, SensorSummary, TrainingSummary};
    use tactread::prep::{Prep, PrepConfig};
    let rec = tactread::recording::Recording::load(recording).unwrap();
    let prep = Prep::fit(&PrepConfig::default(), &[&rec]).unwrap();
    let config = GruConfig {
        inputs: rec.frames.ncols(),
        hidden: 8,
        layers: 1,
        bidirectional: false,
    };
    let net = Network::new(config, 5).unwrap();
    let sensor = SensorSummary {
        taxels: rec.frames.ncols(),
        name: None,
    };
    Model::new(net, prep, sensor, "en", TrainingSummary::default())
        .save(path)
        .unwrap();
}

#[test]
fn cli_decode_text_and_json() {
    let dir = common::cli::test_dir("cli-decode");
    let rec = dir.join("rec.json");
    let model = dir.join("model.json");
    let r = tactread(&["simulate", "the cat sat", "--out", rec.to_str().unwrap()]);
    assert!(r.status.success(), "{}", String::from_utf8_lossy(&r.stderr));
    untrained_model(&rec, &model);
    let (m, p) = (model.to_str().unwrap(), rec.to_str().unwrap());

    let r = tactread(&["decode", m, p]);
    assert!(r.status.success(), "{}", String::from_utf8_lossy(&r.stderr));
    assert!(String::from_utf8_lossy(&r.stderr).contains("verify"));
    assert_eq!(String::from_utf8_lossy(&r.stdout).lines().count(), 1);

    for (lang, lexicon) in [
        ("en", "none"),
        ("de", "builtin"),
        ("fr", "builtin"),
        ("es", "none"),
    ] {
        let mut args = vec![
            "decode", m, p, "--format", "json", "--lang", lang, "--beam", "8",
        ];
        if lexicon == "none" {
            args.extend(["--lexicon", "none"]);
        }
        let r = tactread(&args);
        assert!(
            r.status.success(),
            "{lang}: {}",
            String::from_utf8_lossy(&r.stderr)
        );
        let doc: serde_json::Value = serde_json::from_slice(&r.stdout).unwrap();
        let item = &doc["recordings"][0];
        assert_eq!(item["lang"], lang);
        assert_eq!(item["rescored"], lexicon != "none");
        let n_best = item["n_best"].as_array().unwrap();
        assert!(!n_best.is_empty() && n_best.len() <= 5);
        assert_eq!(item["beam_text"], n_best[0]["text"]);
        let c = item["confidence"].as_f64().unwrap();
        assert!((0.0..=1.0).contains(&c));
        for cell in item["cells"].as_array().unwrap() {
            assert_eq!(cell["dot_probs"].as_array().unwrap().len(), 6);
        }
    }

    // A lexicon of another language is refused (exit code 3).
    let words = dir.join("w.txt");
    let lex = dir.join("de.lex");
    std::fs::write(&words, "haus\t3\n").unwrap();
    let r = tactread(&[
        "lexicon",
        "build",
        words.to_str().unwrap(),
        "--out",
        lex.to_str().unwrap(),
        "--lang",
        "de",
    ]);
    assert!(r.status.success());
    let r = tactread(&["decode", m, p, "--lexicon", lex.to_str().unwrap()]);
    assert_eq!(
        r.status.code(),
        Some(3),
        "{}",
        String::from_utf8_lossy(&r.stderr)
    );
    // A bad beam width is a usage error (exit code 2).
    let r = tactread(&["decode", m, p, "--beam", "0"]);
    assert_eq!(r.status.code(), Some(2));

    // Tuning writes weights that decode reads back. (An untrained model
    // reads nothing right, so only the mechanics are checked here.)
    let weights = dir.join("weights.json");
    let w = weights.to_str().unwrap();
    let r = tactread(&["lexicon", "tune", m, p, "--out", w, "--beam", "4"]);
    assert!(r.status.success(), "{}", String::from_utf8_lossy(&r.stderr));
    assert!(String::from_utf8_lossy(&r.stdout).contains("word accuracy"));
    let back: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(&weights).unwrap()).unwrap();
    assert!(back["lm_weight"].is_number());
    let r = tactread(&["decode", m, p, "--weights", w]);
    assert!(r.status.success(), "{}", String::from_utf8_lossy(&r.stderr));
    // No overwrite without --force; a damaged weights file names itself.
    assert_eq!(
        tactread(&["lexicon", "tune", m, p, "--out", w])
            .status
            .code(),
        Some(4)
    );
    std::fs::write(&weights, "{\"lm_weight\": \"high\"}").unwrap();
    let r = tactread(&["decode", m, p, "--weights", w]);
    assert_eq!(r.status.code(), Some(1));
    assert!(String::from_utf8_lossy(&r.stderr).contains("weights.json"));
}
