//! Synthetic test sets and recordings shared by the report and CLI tests:
//! invented shelf and signage labels read by an imaginary sensor whose
//! errors grow with sliding speed. Seeded (ChaCha8), small, fast.
#![allow(dead_code)]

pub mod cli;

use ndarray::Array2;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use std::collections::BTreeMap;
use tactread::metrics::{EvalRecording, Hypothesis, Reference};
use tactread::recording::{Manifest, Recording, SensorInfo, MANIFEST_FORMAT, MANIFEST_VERSION};
use tactread::Cell;

/// Letters a-z in Unified English Braille grade 1 (common practice; the
/// rule "k-t add dot 3 to a-j, u v x y z add dots 3 and 6 to a-e, w is
/// 2456" from ICEB, The Rules of Unified English Braille, 2013).
pub fn letter_cell(c: char) -> Cell {
    const A_J: [&[u8]; 10] = [
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
    ];
    let i = (c as u8).wrapping_sub(b'a') as usize;
    let dots: Vec<u8> = match c {
        'a'..='j' => A_J[i].to_vec(),
        'k'..='t' => [A_J[i - 10], &[3]].concat(),
        'u' | 'v' | 'x' | 'y' | 'z' => {
            let base = match c {
                'u' => 0,
                'v' => 1,
                'x' => 2,
                'y' => 3,
                _ => 4,
            };
            [A_J[base], &[3, 6]].concat()
        }
        'w' => vec![2, 4, 5, 6],
        _ => vec![],
    };
    Cell::from_dots(&dots).unwrap_or(Cell::EMPTY)
}

/// The cell whose letter is `c`, or the empty cell.
pub fn cells_of(text: &str) -> Vec<Cell> {
    text.chars().map(letter_cell).collect()
}

fn letter_of(cell: Cell) -> char {
    (b'a'..=b'z')
        .map(char::from)
        .find(|&c| letter_cell(c) == cell)
        .unwrap_or(if cell == Cell::EMPTY { ' ' } else { '?' })
}

const WORDS: [&str; 16] = [
    "take", "two", "tablets", "daily", "store", "cool", "dry", "place", "exit", "lift", "level",
    "platform", "north", "south", "keep", "closed",
];

/// `n` recordings at speeds 10-40 mm/s. `skill` scales the error rate
/// down (1 = the baseline reader, 2 = half the errors). With dot probabilities,
/// alternatives, and a lexicon reading that fixes most misread words.
pub fn synthetic_set(n: usize, seed: u64, skill: f64) -> Vec<EvalRecording> {
    // Texts from one stream, reading noise from another: the same seed
    // gives the same labels whatever the skill.
    let mut texts = ChaCha8Rng::seed_from_u64(seed);
    let mut rng = ChaCha8Rng::seed_from_u64(seed ^ 0x5eed_0fe7);
    let mut out = Vec::with_capacity(n);
    for i in 0..n {
        let speed = [10.0, 20.0, 30.0, 40.0][i % 4];
        let flip = 0.004 * speed / skill.max(1e-3);
        let k = texts.gen_range(2..5);
        let words: Vec<&str> = (0..k)
            .map(|_| WORDS[texts.gen_range(0..WORDS.len())])
            .collect();
        let text = words.join(" ");
        let truth = cells_of(&text);
        let mut cells = Vec::new();
        let mut probs = Vec::new();
        for &c in &truth {
            if c != Cell::EMPTY && rng.gen_bool((flip * 0.3).min(0.5)) {
                continue; // a dropped cell
            }
            let mut mask = c.mask();
            let mut p = [0f32; 6];
            for (d, pd) in p.iter_mut().enumerate() {
                let raised = mask & (1 << d) != 0;
                let wrong = c != Cell::EMPTY && rng.gen_bool(flip.min(0.5));
                let read = raised != wrong;
                // Over-confident probabilities: the reader is surer than it should be.
                let conf: f64 = rng.gen_range(0.75..1.0);
                *pd = if read {
                    conf as f32
                } else {
                    (1.0 - conf) as f32
                };
                if wrong {
                    mask ^= 1 << d;
                }
            }
            cells.push(Cell::from_mask(mask));
            probs.push(p);
        }
        let read: String = cells.iter().map(|&c| letter_of(c)).collect();
        let alternatives: Vec<Vec<char>> = read
            .chars()
            .map(|c| {
                let second = if rng.gen_bool(0.5) {
                    WORDS[0].chars().next().unwrap_or('t')
                } else {
                    'e'
                };
                let mut v = vec![c, second, 'o'];
                v.dedup();
                v
            })
            .collect();
        // The lexicon puts back whole words that are one edit away.
        let fixed: Vec<String> = read
            .split(' ')
            .map(|w| {
                WORDS
                    .iter()
                    .find(|cand| strsim::levenshtein(cand, w) <= 1)
                    .map(|s| s.to_string())
                    .unwrap_or_else(|| w.to_string())
            })
            .collect();
        let lex_text = fixed.join(" ");
        out.push(EvalRecording {
            id: format!("shelf-{i:03}"),
            reference: Reference {
                text: text.clone(),
                cells: truth,
            },
            without_lexicon: Hypothesis {
                text: read,
                cells: cells.clone(),
                dot_probabilities: Some(probs),
                alternatives: Some(alternatives),
            },
            with_lexicon: Some(Hypothesis {
                cells: cells_of(&lex_text),
                text: lex_text,
                dot_probabilities: None,
                alternatives: None,
            }),
            tags: BTreeMap::from([("speed_mm_s".to_string(), speed)]),
        });
    }
    out
}

/// A recording of `text` in UEB letters: 12 taxels in 3 rows of 4 sliding
/// over cells 6.2 mm apart, each raised dot a Gaussian bump.
pub fn toy_recording(text: &str) -> Recording {
    let cells = cells_of(text);
    let pitch = 6.2;
    let spacing = 2.34;
    let first = 4.0;
    let length = first + pitch * cells.len() as f64 + 2.0;
    let n = (length / 0.05) as usize;
    let taxels = 12;
    let taxel_pos: Vec<[f64; 2]> = (0..taxels)
        .map(|t| {
            [
                (t % 4) as f64 * 1.0 - 1.5,
                (t / 4) as f64 * spacing - spacing,
            ]
        })
        .collect();
    let mut dots: Vec<[f64; 2]> = Vec::new();
    for (k, c) in cells.iter().enumerate() {
        for d in c.dots() {
            let col = if d <= 3 {
                -spacing / 2.0
            } else {
                spacing / 2.0
            };
            let row = [-spacing, 0.0, spacing][((d - 1) % 3) as usize];
            dots.push([first + pitch * k as f64 + col, row]);
        }
    }
    let frames = Array2::from_shape_fn((n, taxels), |(i, t)| {
        let x = i as f64 * 0.05;
        let p = taxel_pos[t];
        let v: f64 = dots
            .iter()
            .map(|d| {
                let dx = x + p[0] - d[0];
                let dy = p[1] - d[1];
                (-(dx * dx + dy * dy) / (2.0 * 0.45 * 0.45)).exp()
            })
            .sum();
        (2.0 + 10.0 * v + 0.3 * ((i * 31 + t * 17) % 7) as f64 / 7.0) as f32
    });
    Recording {
        manifest: Manifest {
            format: MANIFEST_FORMAT.into(),
            version: MANIFEST_VERSION,
            frames: "frames.csv".into(),
            npy_columns: None,
            sensor: SensorInfo {
                name: Some("grid12".into()),
                taxels,
                positions_mm: Some(taxel_pos),
                sample_rate_hz: 200.0,
                units: "kPa".into(),
            },
            text: Some(text.into()),
            lang: Some("en".into()),
            notes: None,
            tags: BTreeMap::from([
                ("speed_mm_s".to_string(), serde_json::json!(10.0)),
                ("first_cell_mm".to_string(), serde_json::json!(first)),
            ]),
        },
        time_s: (0..n).map(|i| i as f64 * 0.005).collect(),
        position_mm: Some((0..n).map(|i| i as f64 * 0.05).collect()),
        frames,
    }
}
