//! Integration tests of `tactread::metrics`: the figures checked against
//! references from outside the project, plus the public behaviour of
//! evaluation files and paired comparisons.
//!
//! Outside references used here:
//! * character and word error rates of worked examples computed by the
//!   `jiwer` library from PyPI (tests/fixtures/jiwer_cases.json, written by
//!   scripts/make_wer_fixtures.py, which records jiwer's name and version
//!   inside the file);
//! * edit distances against the `strsim` crate's `levenshtein` and
//!   `generic_levenshtein` on many random strings;
//! * the expected calibration error (Naeini et al. 2015) against a worked
//!   example computed by hand in a comment;
//! * the percentile bootstrap (Efron 1979): sanity properties any correct
//!   implementation has (the interval holds the point estimate and narrows
//!   as the data grow).

mod common;

use approx::assert_abs_diff_eq;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use std::collections::BTreeMap;
use tactread::metrics::{
    align, char_edit_counts, compare, edit_distance, evaluate, reliability, word_edit_counts,
    CompareSettings, EditCounts, EvalRecording, EvalSettings, Evaluation, Hypothesis, Metric,
    Reference,
};
use tactread::{Cell, Error};

fn text_only(id: &str, reference: &str, hypothesis: &str) -> EvalRecording {
    EvalRecording {
        id: id.to_string(),
        reference: Reference {
            text: reference.to_string(),
            cells: Vec::new(),
        },
        without_lexicon: Hypothesis {
            text: hypothesis.to_string(),
            ..Hypothesis::default()
        },
        ..EvalRecording::default()
    }
}

fn fast() -> EvalSettings {
    EvalSettings {
        resamples: 200,
        ..EvalSettings::default()
    }
}

/// Source: jiwer (PyPI), version recorded in the fixture, via
/// scripts/make_wer_fixtures.py.
#[test]
fn cer_and_wer_match_jiwer() {
    let path = concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/tests/fixtures/jiwer_cases.json"
    );
    let doc: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(path).unwrap()).unwrap();
    assert_eq!(doc["source"]["library"], "jiwer");
    assert!(doc["source"]["version"]
        .as_str()
        .is_some_and(|v| !v.is_empty()));
    let cases = doc["cases"].as_array().unwrap();
    assert!(cases.len() >= 8);
    for case in cases {
        let name = case["name"].as_str().unwrap();
        let refs: Vec<&str> = case["references"]
            .as_array()
            .unwrap()
            .iter()
            .map(|v| v.as_str().unwrap())
            .collect();
        let hyps: Vec<&str> = case["hypotheses"]
            .as_array()
            .unwrap()
            .iter()
            .map(|v| v.as_str().unwrap())
            .collect();
        let get = |k: &str| case[k].as_u64().unwrap();

        let mut chars = EditCounts::default();
        let mut words = EditCounts::default();
        for (r, h) in refs.iter().zip(&hyps) {
            let c = char_edit_counts(r, h);
            let w = word_edit_counts(r, h);
            chars.hits += c.hits;
            chars.substitutions += c.substitutions;
            chars.deletions += c.deletions;
            chars.insertions += c.insertions;
            words.hits += w.hits;
            words.substitutions += w.substitutions;
            words.deletions += w.deletions;
            words.insertions += w.insertions;
        }
        // The edit distance and the reference length are the same for every
        // minimum-cost alignment; how errors split into S, D and I is not
        // (jiwer reads "ab" -> "ba" as a deletion and an insertion, we as
        // two substitutions), so the split is not compared.
        let jiwer_char_errors =
            get("char_substitutions") + get("char_deletions") + get("char_insertions");
        let jiwer_char_n = get("char_hits") + get("char_substitutions") + get("char_deletions");
        assert_eq!(chars.errors(), jiwer_char_errors, "{name}: character edits");
        assert_eq!(chars.reference_len(), jiwer_char_n, "{name}: characters");
        let jiwer_word_errors =
            get("word_substitutions") + get("word_deletions") + get("word_insertions");
        assert_eq!(words.errors(), jiwer_word_errors, "{name}: word edits");
        assert_abs_diff_eq!(
            chars.error_rate().unwrap(),
            case["cer"].as_f64().unwrap(),
            epsilon = 1e-12
        );
        assert_abs_diff_eq!(
            words.error_rate().unwrap(),
            case["wer"].as_f64().unwrap(),
            epsilon = 1e-12
        );

        // The same through `evaluate`, which sums over recordings before dividing.
        let recs: Vec<EvalRecording> = refs
            .iter()
            .zip(&hyps)
            .enumerate()
            .map(|(i, (r, h))| text_only(&format!("{i}"), r, h))
            .collect();
        let e = evaluate(name, &recs, &fast()).unwrap();
        let head = &e.without_lexicon.headline;
        assert_abs_diff_eq!(
            head[&Metric::CharAccuracy].value,
            1.0 - case["cer"].as_f64().unwrap(),
            epsilon = 1e-12
        );
        assert_abs_diff_eq!(
            head[&Metric::WordAccuracy].value,
            1.0 - case["wer"].as_f64().unwrap(),
            epsilon = 1e-12
        );
    }
}

/// Source: the strsim crate (crates.io), `levenshtein` on strings (counted
/// in chars) and `generic_levenshtein` on cell sequences.
#[test]
fn edit_distances_match_strsim() {
    let mut rng = ChaCha8Rng::seed_from_u64(11);
    let alphabet: Vec<char> = "abcé ⠁⠃".chars().collect();
    for _ in 0..2000 {
        let n = rng.gen_range(0..24);
        let m = rng.gen_range(0..24);
        let a: String = (0..n)
            .map(|_| alphabet[rng.gen_range(0..alphabet.len())])
            .collect();
        let b: String = (0..m)
            .map(|_| alphabet[rng.gen_range(0..alphabet.len())])
            .collect();
        let ac: Vec<char> = a.chars().collect();
        let bc: Vec<char> = b.chars().collect();
        let expected = strsim::levenshtein(&a, &b);
        assert_eq!(edit_distance(&ac, &bc), expected, "{a:?} vs {b:?}");
        let al = align(&ac, &bc);
        assert_eq!(al.distance(), expected, "{a:?} vs {b:?}");
        assert_eq!(char_edit_counts(&a, &b).errors() as usize, expected);
        let c = al.counts();
        assert_eq!(c.reference_len() as usize, ac.len());
        assert_eq!((c.hits + c.substitutions + c.insertions) as usize, bc.len());

        let ca: Vec<Cell> = (0..n)
            .map(|_| Cell::from_mask(rng.gen_range(0..4)))
            .collect();
        let cb: Vec<Cell> = (0..m)
            .map(|_| Cell::from_mask(rng.gen_range(0..4)))
            .collect();
        assert_eq!(
            align(&ca, &cb).distance(),
            strsim::generic_levenshtein(&ca, &cb)
        );
    }
}

/// Worked example by hand, 10 equal-width bins (Naeini et al. 2015):
///
/// | bin | events (p, raised) | n | mean p | observed | n/N x gap |
/// | --- | --- | --- | --- | --- | --- |
/// | [0.0, 0.1) | (0.05, no) (0.05, no) | 2 | 0.05 | 0 | 0.2 x 0.05 = 0.010 |
/// | [0.1, 0.2) | (0.15, yes) | 1 | 0.15 | 1 | 0.1 x 0.85 = 0.085 |
/// | [0.3, 0.4) | (0.35, no) (0.35, yes) | 2 | 0.35 | 0.5 | 0.2 x 0.15 = 0.030 |
/// | [0.7, 0.8) | (0.75, yes) x2, (0.75, no) | 3 | 0.75 | 2/3 | 0.3 x 1/12 = 0.025 |
/// | [0.9, 1.0] | (0.95, yes) x2 | 2 | 0.95 | 1 | 0.2 x 0.05 = 0.010 |
///
/// ECE = 0.010 + 0.085 + 0.030 + 0.025 + 0.010 = 0.160.
#[test]
fn ece_matches_hand_worked_example() {
    let p = [0.05, 0.05, 0.15, 0.35, 0.35, 0.75, 0.75, 0.75, 0.95, 0.95];
    let o = [
        false, false, true, false, true, true, true, false, true, true,
    ];
    let c = reliability(&p, &o, 10).unwrap();
    assert_abs_diff_eq!(c.ece.unwrap(), 0.160, epsilon = 1e-12);
    assert_eq!(c.events, 10);
    let counts: Vec<u64> = c.bins.iter().map(|b| b.count).collect();
    assert_eq!(counts, vec![2, 1, 0, 2, 0, 0, 0, 3, 0, 2]);
    assert_abs_diff_eq!(
        c.bins[7].observed_frequency.unwrap(),
        2.0 / 3.0,
        epsilon = 1e-12
    );
    assert_eq!(c.bins[2].mean_probability, None);
}

/// The same worked example through `evaluate`: two aligned cells of 6 dots
/// give 12 events, the 10 of the table plus two (0.0, flat). Those join
/// bin [0.0, 0.1) and leave its |sum p - raised| = 0.1 as it was, so by
/// hand ECE = (sum over bins of |sum p - raised|) / N = 1.6 / 12 = 0.1333...
#[test]
fn ece_through_evaluate() {
    // Cell 1: dots 1, 3 raised; cell 2: dots 1, 2, 4, 5 raised.
    let r1 = Cell::from_dots(&[1, 3]).unwrap();
    let r2 = Cell::from_dots(&[1, 2, 4, 5]).unwrap();
    // r1: dot 1 raised 0.75, 2 flat 0.05, 3 raised 0.15, 4 flat 0.05, 5 flat 0.0, 6 flat 0.0
    let p1 = [0.75, 0.05, 0.15, 0.05, 0.0, 0.0];
    // r2: dot 1 raised 0.75, 2 raised 0.95, 3 flat 0.75, 4 raised 0.35, 5 raised 0.95, 6 flat 0.35
    let p2 = [0.75, 0.95, 0.75, 0.35, 0.95, 0.35];
    let rec = EvalRecording {
        id: "cal".into(),
        reference: Reference {
            text: "xy".into(),
            cells: vec![r1, r2],
        },
        without_lexicon: Hypothesis {
            text: "xy".into(),
            cells: vec![r1, r2],
            dot_probabilities: Some(vec![p1, p2]),
            alternatives: None,
        },
        ..EvalRecording::default()
    };
    let e = evaluate("cal", &[rec], &fast()).unwrap();
    let cal = e.without_lexicon.calibration.as_ref().unwrap();
    assert_eq!(cal.events, 12);
    assert_abs_diff_eq!(cal.ece.unwrap(), 10.0 / 12.0 * 0.160, epsilon = 1e-6);
    assert_abs_diff_eq!(
        e.without_lexicon.headline[&Metric::CalibrationError].value,
        10.0 / 12.0 * 0.160,
        epsilon = 1e-6
    );
}

/// A test set of `n` recordings, each a shelf label read with about 10%
/// of its characters misread (seeded).
fn noisy_set(n: usize, seed: u64) -> Vec<EvalRecording> {
    let words = [
        "take", "two", "tablets", "daily", "with", "food", "store", "cool", "dry", "place",
    ];
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    (0..n)
        .map(|i| {
            let len = rng.gen_range(3..7);
            let text: Vec<&str> = (0..len)
                .map(|_| words[rng.gen_range(0..words.len())])
                .collect();
            let text = text.join(" ");
            let read: String = text
                .chars()
                .map(|c| {
                    if c != ' ' && rng.gen_bool(0.1) {
                        'x'
                    } else {
                        c
                    }
                })
                .collect();
            let mut r = text_only(&format!("label-{i:04}"), &text, &read);
            r.tags = BTreeMap::from([("speed_mm_s".to_string(), 10.0 + (i % 4) as f64 * 10.0)]);
            r
        })
        .collect()
}

/// Percentile bootstrap (Efron 1979): the interval holds the point
/// estimate and is narrower with 16 times the data (about 4 times, by the
/// square-root law; asserted with a wide margin).
#[test]
fn bootstrap_interval_holds_estimate_and_narrows() {
    let settings = EvalSettings {
        resamples: 500,
        ..EvalSettings::default()
    };
    let small = evaluate("small", &noisy_set(20, 1), &settings).unwrap();
    let large = evaluate("large", &noisy_set(320, 2), &settings).unwrap();
    for m in [Metric::CharAccuracy, Metric::WordAccuracy] {
        let s = small.without_lexicon.headline[&m];
        let l = large.without_lexicon.headline[&m];
        for e in [s, l] {
            assert!(e.low <= e.value && e.value <= e.high, "{m:?}: {e:?}");
            assert!(e.high > e.low, "{m:?}: a degenerate interval {e:?}");
        }
        assert!(
            (l.high - l.low) < 0.6 * (s.high - s.low),
            "{m:?}: {s:?} vs {l:?}"
        );
    }
    // The same seed gives the same intervals.
    let again = evaluate("small", &noisy_set(20, 1), &settings).unwrap();
    assert_eq!(again, small);
    // The speed breakdown puts the 4 speeds in 4 bins.
    let b = large.without_lexicon.breakdown.as_ref().unwrap();
    assert_eq!(b.tag, "speed_mm_s");
    assert_eq!(b.bins.iter().map(|b| b.recordings).sum::<usize>(), 320);
    assert!(b.bins.iter().all(|b| b.recordings == 80));
}

#[test]
fn paired_comparison_sees_a_real_improvement_and_refuses_other_sets() {
    let base = noisy_set(60, 3);
    // B reads every recording perfectly.
    let better: Vec<EvalRecording> = base
        .iter()
        .map(|r| {
            let mut r = r.clone();
            r.without_lexicon.text = r.reference.text.clone();
            r
        })
        .collect();
    let a = evaluate("A", &base, &fast()).unwrap();
    let b = evaluate("B", &better, &fast()).unwrap();
    let settings = CompareSettings {
        resamples: 300,
        ..CompareSettings::default()
    };
    let c = compare(&a, &b, &settings).unwrap();
    let d = c.sets[0]
        .differences
        .iter()
        .find(|d| d.metric == Metric::CharAccuracy)
        .unwrap();
    assert_abs_diff_eq!(d.b, 1.0, epsilon = 1e-12);
    assert!(d.difference > 0.0 && d.low > 0.0, "{d:?}");
    assert_eq!(d.share_b_better, 1.0);
    // A against itself: no difference, a zero-width interval.
    let same = compare(&a, &a, &settings).unwrap();
    for d in &same.sets[0].differences {
        assert_eq!((d.difference, d.low, d.high), (0.0, 0.0, 0.0));
    }
    // Recordings shuffled in B still match by id.
    let mut shuffled = better.clone();
    shuffled.reverse();
    let bs = evaluate("B shuffled", &shuffled, &fast()).unwrap();
    let cs = compare(&a, &bs, &settings).unwrap();
    assert_eq!(cs.sets[0].differences, c.sets[0].differences);
    // A different test set is refused.
    let other = evaluate("other", &noisy_set(60, 4), &fast()).unwrap();
    assert!(matches!(
        compare(&a, &other, &settings),
        Err(Error::Mismatch { .. })
    ));
    let fewer = evaluate("fewer", &base[..59], &fast()).unwrap();
    assert!(matches!(
        compare(&a, &fewer, &settings),
        Err(Error::Mismatch { .. })
    ));
}

#[test]
fn metrics_file_round_trips_and_rejects_other_formats() {
    let dir = common::cli::test_dir("metrics-test");
    let recs = noisy_set(5, 9);
    let e = evaluate("round trip", &recs, &fast()).unwrap();
    let p = dir.join("m.json");
    e.save(&p).unwrap();
    let back = Evaluation::load(&p).unwrap();
    assert_eq!(back, e);
    let text = std::fs::read_to_string(&p).unwrap();
    assert!(text.contains("\"format\": \"tactread-metrics\""));

    std::fs::write(&p, text.replace("\"version\": 1", "\"version\": 99")).unwrap();
    let err = Evaluation::load(&p).unwrap_err();
    assert!(matches!(err, Error::Format { .. }), "{err}");
    assert!(err.to_string().contains("version 99"), "{err}");

    std::fs::write(
        &p,
        "{\n \"format\": \"tactread-metrics\",\n \"version\": 1,\n oops\n}",
    )
    .unwrap();
    let err = Evaluation::load(&p).unwrap_err();
    assert!(
        matches!(&err, Error::Input { at, .. } if at.line == Some(4)),
        "{err}"
    );
}

#[test]
fn bad_inputs_are_clear_errors() {
    let mut r = text_only("a", "ab", "ab");
    r.without_lexicon.cells = vec![Cell::from_mask(1)];
    r.without_lexicon.dot_probabilities = Some(vec![]);
    let err = evaluate("x", &[r.clone()], &fast()).unwrap_err();
    assert!(
        err.to_string()
            .contains("dot probabilities of recording `a`"),
        "{err}"
    );

    r.without_lexicon.dot_probabilities = Some(vec![[0.5, 0.5, f32::NAN, 0.5, 0.5, 0.5]]);
    let err = evaluate("x", &[r.clone()], &fast()).unwrap_err();
    assert!(err.to_string().contains("dot_probabilities[0][2]"), "{err}");

    r.without_lexicon.dot_probabilities = None;
    r.without_lexicon.alternatives = Some(vec![vec!['a'], vec!['x', 'b']]);
    let err = evaluate("x", &[r.clone()], &fast()).unwrap_err();
    assert!(err.to_string().contains("alternatives[1]"), "{err}");

    let dup = vec![text_only("same", "a", "a"), text_only("same", "b", "b")];
    assert!(evaluate("x", &dup, &fast())
        .unwrap_err()
        .to_string()
        .contains("twice"));
    assert!(matches!(
        evaluate("x", &[], &fast()),
        Err(Error::Config { .. })
    ));
    let mut half = vec![text_only("1", "a", "a"), text_only("2", "b", "b")];
    half[0].with_lexicon = Some(Hypothesis::default());
    assert!(matches!(
        evaluate("x", &half, &fast()),
        Err(Error::Mismatch { .. })
    ));
    let bad = EvalSettings {
        confidence: 1.5,
        ..EvalSettings::default()
    };
    assert!(matches!(
        evaluate("x", &[text_only("1", "a", "a")], &bad),
        Err(Error::Config { .. })
    ));
}

/// Top-k accuracy and dot figures on a small case worked by hand.
#[test]
fn top_k_and_dots_by_hand() {
    // Reference "cab", read "cob" with alternatives o>a>e at position 1, and
    // an extra "s" at the end: 1 substitution + 1 insertion in 3 chars.
    let c = |d: &[u8]| Cell::from_dots(d).unwrap();
    let mut r = text_only("k", "cab", "cobs");
    r.without_lexicon.alternatives = Some(vec![
        vec!['c'],
        vec!['o', 'a', 'e'],
        vec!['b', 'h'],
        vec!['s'],
    ]);
    // Cells (UEB letters, common practice): c 14, a 1, b 12 | read c 14, o 135, b 12, s 234.
    r.reference.cells = vec![c(&[1, 4]), c(&[1]), c(&[1, 2])];
    r.without_lexicon.cells = vec![c(&[1, 4]), c(&[1, 3, 5]), c(&[1, 2]), c(&[2, 3, 4])];
    let e = evaluate("k", &[r], &fast()).unwrap();
    let h = &e.without_lexicon.headline;
    assert_abs_diff_eq!(
        h[&Metric::CharAccuracy].value,
        1.0 - 2.0 / 3.0,
        epsilon = 1e-12
    );
    assert_abs_diff_eq!(
        h[&Metric::Top1CharAccuracy].value,
        1.0 - 2.0 / 3.0,
        epsilon = 1e-12
    );
    // Top-2 rescues the substitution (a is second); the insertion stays.
    assert_abs_diff_eq!(
        h[&Metric::Top2CharAccuracy].value,
        1.0 - 1.0 / 3.0,
        epsilon = 1e-12
    );
    assert_abs_diff_eq!(
        h[&Metric::Top3CharAccuracy].value,
        1.0 - 1.0 / 3.0,
        epsilon = 1e-12
    );
    // Aligned cell pairs: (14,14) (1,135) (12,12); the inserted 234 is not a pair.
    // 18 dot decisions, 2 wrong (dots 3 and 5 read as raised).
    assert_abs_diff_eq!(h[&Metric::DotAccuracy].value, 16.0 / 18.0, epsilon = 1e-12);
    assert_abs_diff_eq!(
        h[&Metric::CellAccuracy].value,
        1.0 - 2.0 / 3.0,
        epsilon = 1e-12
    );
    let dots = &e.without_lexicon.per_dot;
    assert_eq!(dots[2].counts.false_positives, 1);
    assert_eq!(dots[2].precision, Some(0.0));
    assert_eq!(dots[0].recall, Some(1.0));
    assert_eq!(dots[3].recall, Some(1.0));
    let conf = &e.without_lexicon.confusions;
    assert_eq!(
        (conf[0].reference, conf[0].hypothesis, conf[0].count),
        ('a', 'o', 1)
    );
}
