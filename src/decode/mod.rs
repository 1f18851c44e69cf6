//! Decoding: from the network's per-frame log-probabilities to ranked cell
//! sequences and ranked character strings.
//!
//! The input is a `[n_frames, 65]` array of natural-log probabilities:
//! column `m` (0..=63) is the six-dot pattern with bit mask `m`
//! ([`Cell::from_mask`]), column 64 the CTC blank (Graves et al. 2006).
//!
//! * [`greedy_decode`]: the most probable class per frame, collapsed.
//! * [`beam_search`]: CTC prefix beam search (Graves 2012; Hannun et al.
//!   2014) returning the N best cell sequences with their log scores.
//! * [`read`]: the same search with the braille code's reader inside every
//!   hypothesis, so that indicators (capital, numeric) are applied as the
//!   search goes and hypotheses are ranked character strings; the best one
//!   comes with per-cell dot probabilities, alternative patterns and
//!   per-character alternatives ([`Reading`]).
//! * [`cell_evidence`]: those per-cell figures for any cell sequence.
//! * [`WordStream`]: the same search fed one frame at a time, committing
//!   words as soon as they are final (the commit rule is in its docs).
//!
//! ## Per-cell evidence, defined
//!
//! For a cell sequence `l`, the CTC forward-backward pass gives, for every
//! frame `t` and cell `i`, the posterior `w_t(i)` that frame `t` emits cell
//! `i` on an alignment of `l` (Graves et al. 2006, equation 14). The cell's
//! pattern distribution is the `w`-weighted mean of the frames' pattern
//! distributions given "not blank":
//!
//! ```text
//! q_i(m) = sum_t w_t(i) * y_t(m) / (1 - y_t(blank))  /  sum_t w_t(i)
//! ```
//!
//! Its dot probabilities are the marginals of `q_i` (the probability of dot
//! `k` is the sum of `q_i(m)` over masks `m` with bit `k - 1` set), its
//! probability is `q_i(cell)`, and its alternatives are the other patterns
//! in decreasing `q_i`.
//!
//! ## Example
//!
//! ```
//! use ndarray::Array2;
//! use tactread::decode::{beam_search, greedy_decode, BeamParams};
//! use tactread::Cell;
//! // Three frames: dots 1 (mask 1), blank, dots 1-2 (mask 3).
//! let mut lp = Array2::from_elem((3, 65), (0.01f32 / 64.0).ln());
//! lp[[0, 1]] = 0.99f32.ln();
//! lp[[1, 64]] = 0.99f32.ln();
//! lp[[2, 3]] = 0.99f32.ln();
//! let want = vec![Cell::from_mask(1), Cell::from_mask(3)];
//! assert_eq!(greedy_decode(lp.view()).unwrap(), want);
//! let best = &beam_search(lp.view(), &BeamParams::default()).unwrap()[0];
//! assert_eq!(best.cells, want);
//! ```

mod align;
mod code;
mod frames;
mod search;
#[cfg(test)]
mod search_reference;
mod stream;

pub use frames::{BLANK, N_CLASSES};
pub use search::BeamParams;
pub use stream::{CommitJob, CommitRule, StreamParams, StreamWord, WordFinisher, WordStream};

pub(crate) use align::span_log_likelihood;
pub(crate) use frames::Pruned;

use crate::{Cell, Result};
use ndarray::ArrayView2;
use std::hash::Hash;

/// What the decoder needs from a braille code's reader: the text each cell
/// produces given the cells before it. Implemented for the code tables'
/// reader; the search clones one per hypothesis.
pub trait CodeReader: Clone {
    /// The reader's indicator state (e.g. numeric mode, capital pending).
    type State: Copy + Eq + Hash;
    /// Read one more cell; returns the text it produced (empty for an
    /// indicator).
    fn push(&mut self, cell: Cell) -> String;
    /// Like [`CodeReader::push`], appending the text to `out` (the search
    /// calls this once per new prefix, so readers should not allocate).
    fn push_into(&mut self, cell: Cell, out: &mut String) {
        out.push_str(&self.push(cell));
    }
    /// The current state.
    fn state(&self) -> Self::State;
    /// End of input: any text still held back.
    fn finish(self) -> String;
}

/// What the decoder and word rescoring need from a braille code: a reader,
/// and the cells that write a text.
pub trait BrailleCode {
    /// The code's reader.
    type Reader<'a>: CodeReader
    where
        Self: 'a;
    /// A reader in its initial state.
    fn reader(&self) -> Self::Reader<'_>;
    /// The cells that write `text`, or [`crate::Error::Unencodable`].
    fn encode(&self, text: &str) -> Result<Vec<Cell>>;
}

/// The text a fresh reader of `code` makes of `cells`.
pub(crate) fn read_cells<C: BrailleCode>(code: &C, cells: &[Cell]) -> String {
    let mut r = code.reader();
    let mut out = String::new();
    for &c in cells {
        out.push_str(&r.push(c));
    }
    out.push_str(&r.finish());
    out
}

/// One of the N best cell sequences of [`beam_search`].
#[derive(Debug, Clone, PartialEq)]
pub struct CellHypothesis {
    /// The cells, in reading order.
    pub cells: Vec<Cell>,
    /// Natural log of the probability of this cell sequence given the
    /// frames, summed over the alignments the beam kept.
    pub log_score: f64,
}

/// One of the N best readings of [`read`].
#[derive(Debug, Clone, PartialEq)]
pub struct TextHypothesis {
    /// The text.
    pub text: String,
    /// The most probable cell sequence that reads as this text.
    pub cells: Vec<Cell>,
    /// Natural log of the probability of the text given the frames, summed
    /// over the cell sequences and alignments the beam kept.
    pub log_score: f64,
}

/// The evidence for one emitted cell (see the module docs for the
/// definitions).
#[derive(Debug, Clone, PartialEq)]
pub struct CellEvidence {
    /// The cell read.
    pub cell: Cell,
    /// The text the code's reader gave out when this cell was read (empty
    /// for an indicator, or while the reader waits to see whether a sign of
    /// several cells follows; always empty from [`cell_evidence`]).
    pub text: String,
    /// `q(cell)`: the probability of the pattern read.
    pub prob: f64,
    /// Probability that dot 1..=6 is raised (index 0 is dot 1).
    pub dot_probs: [f64; 6],
    /// The most probable other patterns with their probabilities, most
    /// probable first.
    pub alternatives: Vec<(Cell, f64)>,
    /// First and last frame (0-based, inclusive) whose posterior of emitting
    /// this cell is at least 0.5; the single most likely frame when none is.
    pub frames: (usize, usize),
}

/// One character (or the text of one cell) of the best reading, with its
/// alternatives.
#[derive(Debug, Clone, PartialEq)]
pub struct CharReading {
    /// The text read (usually one character).
    pub text: String,
    /// Index into [`Reading::cells`] of the cell that produced it.
    pub cell: usize,
    /// Probability of this text at this cell: the sum of `q(m)` over the
    /// patterns `m` that would have produced it in the same reader state.
    pub prob: f64,
    /// Up to three other texts the cell could have produced in the same
    /// reader state, with their probabilities, most probable first.
    pub alternatives: Vec<(String, f64)>,
}

/// The result of [`read`]: ranked readings and the evidence for the best.
#[derive(Debug, Clone, PartialEq)]
pub struct Reading {
    /// The best text.
    pub text: String,
    /// The N best texts, best first.
    pub hypotheses: Vec<TextHypothesis>,
    /// Evidence for every cell of the best hypothesis.
    pub cells: Vec<CellEvidence>,
    /// Every non-empty piece of text of the best hypothesis, with
    /// alternatives.
    pub chars: Vec<CharReading>,
    /// Share of the best text in the probability of all texts left in the
    /// final beam (0..=1). 1 means the beam found no competitor, not that
    /// the reading is certainly right.
    pub confidence: f64,
    /// Exact CTC log-likelihood of the best hypothesis's cells (forward
    /// algorithm over all alignments); `-inf` for an empty input.
    pub log_likelihood: f64,
}

/// Number of alternative patterns reported per cell.
const CELL_ALTERNATIVES: usize = 3;
/// Number of alternative texts reported per character.
const CHAR_ALTERNATIVES: usize = 3;
/// Patterns tried when looking for a character's alternatives.
const PATTERNS_FOR_CHARS: usize = 8;

/// Greedy best-path decoding of `log_probs` (`[n_frames, 65]`): the most
/// probable class of every frame, repeats collapsed, blanks removed
/// (Graves et al. 2006, section 3.2).
pub fn greedy_decode(log_probs: ArrayView2<f32>) -> Result<Vec<Cell>> {
    frames::check(&log_probs)?;
    Ok(search::greedy(&log_probs))
}

/// CTC prefix beam search over `log_probs` (`[n_frames, 65]`): the
/// `params.n_best` most probable cell sequences, best first.
pub fn beam_search(log_probs: ArrayView2<f32>, params: &BeamParams) -> Result<Vec<CellHypothesis>> {
    params.check()?;
    let pruned = prune(&log_probs, params)?;
    let found = search::search(&pruned, search::NoReader, params, false, false);
    Ok(found
        .into_iter()
        .take(params.n_best)
        .map(|f| CellHypothesis {
            cells: f.cells,
            log_score: f.log_score,
        })
        .collect())
}

/// Per-cell evidence for `cells` against `log_probs` (`[n_frames, 65]`),
/// with the sequence's exact CTC log-likelihood. Fails with
/// [`crate::Error::Mismatch`] when the cells cannot be aligned with the
/// frames at all (probability 0, e.g. more cells than frames).
pub fn cell_evidence(
    log_probs: ArrayView2<f32>,
    cells: &[Cell],
) -> Result<(f64, Vec<CellEvidence>)> {
    let pruned = frames::prune(&log_probs, 1.0, 1, 0.0)?;
    let (ll, post) = align::posteriors(&pruned, cells)
        .ok_or_else(|| unalignable(cells.len(), pruned.n_frames()))?;
    Ok((ll, evidence(cells, &post)))
}

fn unalignable(n_cells: usize, n_frames: usize) -> crate::Error {
    crate::Error::Mismatch {
        what: "cells and frames".into(),
        expected: "a cell sequence with non-zero probability under the frames".into(),
        got: format!("{n_cells} cells that no alignment with {n_frames} frames can produce"),
        hint: "check that the cells belong to this recording".into(),
    }
}

/// Check `log_probs` and keep only its probabilities (no candidate lists).
pub(crate) fn checked_probabilities(log_probs: &ArrayView2<f32>) -> Result<Pruned> {
    frames::prune(log_probs, 1.0, 1, 0.0)
}

/// Check `log_probs` and prune its frames for a search with `params`.
pub(crate) fn checked_pruned(log_probs: &ArrayView2<f32>, params: &BeamParams) -> Result<Pruned> {
    prune(log_probs, params)
}

fn prune(log_probs: &ArrayView2<f32>, params: &BeamParams) -> Result<Pruned> {
    frames::prune(
        log_probs,
        params.min_cell_prob,
        params.max_cells_per_frame,
        params.blank_skip,
    )
}

fn evidence(cells: &[Cell], post: &[align::CellPosterior]) -> Vec<CellEvidence> {
    cells
        .iter()
        .zip(post)
        .map(|(&cell, p)| {
            let mut dot_probs = [0f64; 6];
            for (m, &q) in p.q.iter().enumerate() {
                for (k, d) in dot_probs.iter_mut().enumerate() {
                    if m & (1 << k) != 0 {
                        *d += q;
                    }
                }
            }
            let mut alternatives: Vec<(Cell, f64)> = top_patterns(&p.q, CELL_ALTERNATIVES + 1)
                .into_iter()
                .filter(|&(c, _)| c != cell)
                .collect();
            alternatives.truncate(CELL_ALTERNATIVES);
            CellEvidence {
                cell,
                text: String::new(),
                prob: p.q[cell.mask() as usize & 63],
                dot_probs,
                alternatives,
                frames: p.frames,
            }
        })
        .collect()
}

/// The `n` most probable patterns of a distribution over the 64 masks.
fn top_patterns(q: &[f64; 64], n: usize) -> Vec<(Cell, f64)> {
    let mut all: Vec<(Cell, f64)> = q
        .iter()
        .enumerate()
        .filter(|(_, &p)| p > 0.0)
        .map(|(m, &p)| (Cell::from_mask(m as u8), p))
        .collect();
    let order = |a: &(Cell, f64), b: &(Cell, f64)| b.1.total_cmp(&a.1).then(a.0.cmp(&b.0));
    if all.len() > n && n > 0 {
        all.select_nth_unstable_by(n - 1, order);
        all.truncate(n);
    }
    all.sort_by(order);
    all
}

/// Decode `log_probs` (`[n_frames, 65]`) with a braille code's `reader`
/// applied inside the beam search: the N best texts, and for the best one
/// its per-cell evidence and per-character alternatives.
pub fn read<R: CodeReader>(
    log_probs: ArrayView2<f32>,
    reader: R,
    params: &BeamParams,
) -> Result<Reading> {
    params.check()?;
    let pruned = prune(&log_probs, params)?;
    read_pruned(&pruned, reader, params)
}

pub(crate) fn read_pruned<R: CodeReader>(
    pruned: &Pruned,
    reader: R,
    params: &BeamParams,
) -> Result<Reading> {
    let found = search::search(
        pruned,
        reader.clone(),
        params,
        params.merge_equal_text,
        true,
    );
    let Some(best) = found.first() else {
        return Ok(Reading {
            text: String::new(),
            hypotheses: Vec::new(),
            cells: Vec::new(),
            chars: Vec::new(),
            confidence: 0.0,
            log_likelihood: f64::NEG_INFINITY,
        });
    };
    let top = best.log_score;
    let z: f64 = found.iter().map(|f| (f.log_score - top).exp()).sum();
    let confidence = 1.0 / z;
    let cells = best.cells.clone();
    let (log_likelihood, post) = align::posteriors(pruned, &cells)
        .ok_or_else(|| unalignable(cells.len(), pruned.n_frames()))?;
    let mut evidence = evidence(&cells, &post);
    let mut chars = Vec::new();
    let mut r = reader;
    for (i, ev) in evidence.iter_mut().enumerate() {
        let before = r.clone();
        ev.text = r.push(ev.cell);
        if ev.text.is_empty() {
            continue;
        }
        // Texts with their summed probabilities, the read one first (a few
        // entries: a list is cheaper than a map).
        let mut by_text: Vec<(String, f64)> =
            vec![(ev.text.clone(), post[i].q[ev.cell.mask() as usize & 63])];
        for (alt, p) in top_patterns(&post[i].q, PATTERNS_FOR_CHARS) {
            if alt == ev.cell {
                continue;
            }
            let piece = before.clone().push(alt);
            if piece.is_empty() {
                continue;
            }
            match by_text.iter_mut().find(|(t, _)| *t == piece) {
                Some(e) => e.1 += p,
                None => by_text.push((piece, p)),
            }
        }
        let prob = by_text[0].1;
        let mut alternatives: Vec<(String, f64)> = by_text.split_off(1);
        alternatives.sort_by(|a, b| b.1.total_cmp(&a.1).then_with(|| a.0.cmp(&b.0)));
        alternatives.truncate(CHAR_ALTERNATIVES);
        chars.push(CharReading {
            text: ev.text.clone(),
            cell: i,
            prob,
            alternatives,
        });
    }
    let hypotheses: Vec<TextHypothesis> = found
        .into_iter()
        .take(params.n_best)
        .map(|f| TextHypothesis {
            text: f.text,
            cells: f.cells,
            log_score: f.log_score,
        })
        .collect();
    Ok(Reading {
        text: hypotheses[0].text.clone(),
        hypotheses,
        cells: evidence,
        chars,
        confidence,
        log_likelihood,
    })
}

/// Everything [`Decoder::decode`] gives.
#[derive(Debug, Clone, PartialEq)]
pub struct Decoded {
    /// The final text: the best reading, with words rescored when the
    /// decoder has a lexicon.
    pub text: String,
    /// The beam's reading (ranked texts, per-cell and per-character
    /// evidence) before rescoring.
    pub reading: Reading,
    /// What rescoring did with each word (empty without a lexicon).
    pub words: Vec<crate::lexicon::WordChoice>,
}

/// A ready decoder: a braille code, beam settings and optionally a lexicon
/// with rescoring weights, all checked when built.
///
/// ```no_run
/// # fn demo<C: tactread::decode::BrailleCode>(code: &C, lp: ndarray::ArrayView2<f32>) -> tactread::Result<()> {
/// use tactread::decode::{BeamParams, Decoder};
/// use tactread::lexicon::{Lexicon, RescoreWeights};
/// let lexicon = Lexicon::builtin("en")?;
/// let decoder = Decoder::new(code, BeamParams::default())?
///     .with_lexicon(&lexicon, RescoreWeights::default())?;
/// println!("{}", decoder.decode(lp)?.text);
/// # Ok(()) }
/// ```
#[derive(Debug)]
pub struct Decoder<'a, C: BrailleCode> {
    code: &'a C,
    beam: BeamParams,
    lexicon: Option<(&'a crate::lexicon::Lexicon, crate::lexicon::RescoreWeights)>,
}

impl<'a, C: BrailleCode> Decoder<'a, C> {
    /// A decoder without a lexicon; fails on bad beam settings.
    pub fn new(code: &'a C, beam: BeamParams) -> Result<Self> {
        beam.check()?;
        Ok(Decoder {
            code,
            beam,
            lexicon: None,
        })
    }

    /// The same decoder, rescoring words with `lexicon` and `weights`.
    pub fn with_lexicon(
        mut self,
        lexicon: &'a crate::lexicon::Lexicon,
        weights: crate::lexicon::RescoreWeights,
    ) -> Result<Self> {
        weights.check()?;
        self.lexicon = Some((lexicon, weights));
        Ok(self)
    }

    /// Decode one recording's network output, `[n_frames, 65]`.
    pub fn decode(&self, log_probs: ArrayView2<f32>) -> Result<Decoded> {
        let pruned = checked_pruned(&log_probs, &self.beam)?;
        let reading = read_pruned(&pruned, self.code.reader(), &self.beam)?;
        match &self.lexicon {
            None => Ok(Decoded {
                text: reading.text.clone(),
                reading,
                words: Vec::new(),
            }),
            Some((lexicon, weights)) => {
                let r =
                    crate::lexicon::rescore_pruned(&pruned, &reading, self.code, lexicon, weights);
                Ok(Decoded {
                    text: r.text,
                    reading,
                    words: r.words,
                })
            }
        }
    }
}
