//! Whole-word rescoring of a decoded reading with a lexicon, and the grid
//! search that tunes its weights on a validation set.
//!
//! For every word of the best reading (a run of non-empty cells between
//! empty cells, the word space of braille; common practice), the lexicon
//! proposes the words within a small edit distance of the word's letters
//! (fst's Levenshtein automaton). Each candidate is written back into cells
//! with the code table, and scored on the frames of the word's span:
//!
//! ```text
//! score(w) = ln P_ctc(cells(w) | frames of the span)      evidence
//!          + lm_weight * ln P_lexicon(w)                   frequency
//!          - substitution_penalty * substitutions(raw, w)
//!          - indel_penalty * (insertions + deletions)(raw, w)
//! ```
//!
//! The raw reading competes with its own cells' evidence and its lexicon
//! log-probability, or `oov_log_prob` when the lexicon does not hold it, and
//! no edit penalty. The best score wins, so a number, name or code stays as
//! read unless a listed word explains the frames nearly as well. Words
//! without letters (numbers, punctuation) are never rescored.
//!
//! Two more kinds of candidate repair word boundaries, the commonest
//! error that one-word rescoring cannot touch (the empty cell is the
//! space, so a lost dot 1 turns `a` into a space and a spurious one a space
//! into `a`):
//!
//! - **Split**: a word the lexicon does not hold may be two listed words
//!   whose space was lost, or read as a letter. Every split of its cells
//!   whose two sides both read as listed words is a candidate `x y`, scored
//!   like any other on the word's frames, with `ln P(x) + ln P(y)` as its
//!   lexicon term (a unigram model) and the space counted as an edit.
//! - **Join**: two neighbouring words one space apart, at least one of them
//!   unlisted or a single letter, may be one listed word read in two (the
//!   space spurious, or a misread letter). The lexicon words within one
//!   edit of their letters joined (two for 6 letters or more) are scored on
//!   the frames of both words and the space, against the two words' own
//!   choices plus the space's evidence; pairs are joined left to right.
//!
//! In streaming, a join needs both words in one commit.
//!
//! To save time, [`rescore`] does not write out and score a candidate that
//! could only win if its evidence beat the beam's own cells by more than 3
//! nats (the beam's cells are, nearly always, the best explanation of the
//! span); [`tune`] scores every candidate.
//!
//! The evidence is the CTC forward probability of the candidate's cells over
//! the span's frames (Graves et al. 2006, equations 5-8); the span runs from
//! the frame after the preceding space cell's emission to the frame before
//! the next space cell's, so blank frames at its edges can absorb an extra
//! or a missing cell.

use crate::decode::{
    read_cells, span_log_likelihood, BeamParams, BrailleCode, CodeReader, Pruned, Reading,
};
use crate::lexicon::Lexicon;
use crate::{Cell, Error, Result};
use ndarray::ArrayView2;

/// Weights of word rescoring. Defaults are the values tuned on the
/// synthetic validation set of `benches/decode.rs`'s generator; tune them on
/// your own recordings with [`tune`].
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RescoreWeights {
    /// Weight of the lexicon log-probability. Default 1.0.
    pub lm_weight: f64,
    /// Penalty in nats per substituted character. Default 2.0.
    pub substitution_penalty: f64,
    /// Penalty in nats per inserted or deleted character. Default 3.0.
    pub indel_penalty: f64,
    /// Lexicon log-probability given to a raw reading the lexicon does not
    /// hold. Default -16.0 (about ln 1e-7).
    pub oov_log_prob: f64,
    /// Largest edit distance searched, for words of 5 letters or more that
    /// the lexicon does not hold (listed words and words of 2-4 letters
    /// search 1 edit: a listed reading is probably right, and the automaton
    /// for 2 edits costs milliseconds to build). Default 2.
    pub max_edits: u32,
    /// Words with fewer letters than this are left as read. Default 2.
    pub min_letters: usize,
}

impl Default for RescoreWeights {
    fn default() -> Self {
        RescoreWeights {
            lm_weight: 1.0,
            substitution_penalty: 2.0,
            indel_penalty: 3.0,
            oov_log_prob: -16.0,
            max_edits: 2,
            min_letters: 2,
        }
    }
}

impl RescoreWeights {
    /// Refuse NaN or negative weights.
    pub fn check(&self) -> Result<()> {
        for (name, v) in [
            ("lexicon weight", self.lm_weight),
            ("substitution penalty", self.substitution_penalty),
            ("insertion/deletion penalty", self.indel_penalty),
        ] {
            if !(v >= 0.0 && v.is_finite()) {
                return Err(Error::config(
                    name,
                    format!("{v} must be a finite number >= 0"),
                ));
            }
        }
        if self.oov_log_prob.is_nan() || self.oov_log_prob > 0.0 {
            return Err(Error::config(
                "out-of-lexicon log-probability",
                format!("{} must be <= 0 (default -16)", self.oov_log_prob),
            ));
        }
        Ok(())
    }

    fn edits_for(&self, letters: usize, listed: bool) -> u32 {
        if letters < self.min_letters.max(1) {
            0
        } else if letters <= 4 || listed {
            self.max_edits.min(1)
        } else {
            self.max_edits
        }
    }
}

/// One scored candidate for a word.
#[derive(Debug, Clone, PartialEq)]
pub struct WordCandidate {
    /// The candidate's text (with the raw word's case and punctuation).
    pub text: String,
    /// CTC log-likelihood of its cells over the word's frames.
    pub evidence: f64,
    /// Its lexicon log-probability (`None`: not listed).
    pub log_prob: Option<f64>,
    /// Character substitutions from the raw reading.
    pub substitutions: usize,
    /// Character insertions plus deletions from the raw reading.
    pub indels: usize,
    /// The total score (module docs).
    pub score: f64,
}

/// What rescoring did with one word.
#[derive(Debug, Clone, PartialEq)]
pub struct WordChoice {
    /// The word as the beam read it.
    pub raw: String,
    /// The word chosen (equal to `raw` when kept).
    pub chosen: String,
    /// Range of cells (into [`Reading::cells`]), end exclusive.
    pub cells: (usize, usize),
    /// Range of frames scored, end exclusive.
    pub frames: (usize, usize),
    /// The raw reading and the best candidates that were scored, best
    /// first (at most 5).
    pub candidates: Vec<WordCandidate>,
}

/// The reading after rescoring.
#[derive(Debug, Clone, PartialEq)]
pub struct Rescored {
    /// The text with the chosen words.
    pub text: String,
    /// One entry per word that had letters, in reading order.
    pub words: Vec<WordChoice>,
}

/// How far (nats) a candidate's evidence is allowed to exceed the beam's
/// own cells' when deciding which candidates are worth scoring.
const EVIDENCE_SLACK: f64 = 3.0;

/// Candidates kept in [`WordChoice::candidates`].
const REPORTED: usize = 5;

/// Weight-independent features of one word.
#[derive(Debug, Clone)]
struct Slot {
    cells: (usize, usize),
    frames: (usize, usize),
    raw: String,
    raw_cells: Vec<Cell>,
    raw_evidence: f64,
    raw_log_prob: Option<f64>,
    cands: Vec<Cand>,
}

#[derive(Debug, Clone)]
struct Cand {
    text: String,
    cells: Vec<Cell>,
    evidence: f64,
    log_prob: f64,
    subs: usize,
    indels: usize,
}

impl Slot {
    fn raw_score(&self, w: &RescoreWeights) -> f64 {
        self.raw_evidence + w.lm_weight * self.raw_log_prob.unwrap_or(w.oov_log_prob)
    }
    fn cand_score(c: &Cand, w: &RescoreWeights) -> f64 {
        c.evidence + prior(w, c.log_prob, c.subs, c.indels)
    }
    /// The score of the chosen reading.
    fn chosen_score(&self, w: &RescoreWeights) -> f64 {
        self.choose(w)
            .map_or_else(|| self.raw_score(w), |c| Slot::cand_score(c, w))
    }

    /// The chosen candidate: `None` keeps the raw reading.
    fn choose(&self, w: &RescoreWeights) -> Option<&Cand> {
        best_above(&self.cands, w, self.raw_score(w))
    }
}

/// The first candidate of `cands` with the highest score, if that score is
/// above `to_beat`.
fn best_above<'c>(cands: &'c [Cand], w: &RescoreWeights, to_beat: f64) -> Option<&'c Cand> {
    let mut best = to_beat;
    let mut pick = None;
    for c in cands {
        let s = Slot::cand_score(c, w);
        if s > best {
            best = s;
            pick = Some(c);
        }
    }
    pick
}

/// Two neighbouring words (`slots[first]` and `slots[first + 1]`, one
/// space cell apart) that may be one listed word read in two: the space
/// was spurious, or a letter read as the space. Its candidates replace
/// both words and the space; they are scored on the frames of both words
/// and the space. Weight-independent, like [`Slot`].
#[derive(Debug, Clone)]
struct Pair {
    first: usize,
    frames: (usize, usize),
    raw: String,
    /// Evidence of the space cell's frames: the raw cells' evidence over
    /// the joined frames less the two words' own, so that a pair's
    /// candidates compete with `score(first) + score(first + 1) + space`.
    space_evidence: f64,
    cands: Vec<Cand>,
}

impl Pair {
    /// The best candidate if it beats the two words' choices (`scores`).
    fn choose(&self, w: &RescoreWeights, scores: (f64, f64)) -> Option<&Cand> {
        best_above(&self.cands, w, scores.0 + scores.1 + self.space_evidence)
    }
}

/// A candidate before scoring: (text, lexicon log-probability,
/// substitutions, insertions + deletions from the reading).
type Unscored = (String, f64, usize, usize);

/// The part of a candidate's score that is not evidence: its lexicon term
/// less its edit penalties.
fn prior(w: &RescoreWeights, log_prob: f64, subs: usize, indels: usize) -> f64 {
    w.lm_weight * log_prob - w.substitution_penalty * subs as f64 - w.indel_penalty * indels as f64
}

/// `text` written in cells with `code` and scored on `frames[from..to]`:
/// `None` when the code cannot write it or no alignment can produce it.
fn scored<C: BrailleCode>(
    code: &C,
    frames: &Pruned,
    (from, to): (usize, usize),
    (text, log_prob, subs, indels): Unscored,
) -> Option<Cand> {
    let cells = code.encode(&text).ok()?;
    let evidence = span_log_likelihood(frames, from, to, &cells);
    (evidence > f64::NEG_INFINITY).then_some(Cand {
        text,
        cells,
        evidence,
        log_prob,
        subs,
        indels,
    })
}

/// Split a word into (leading non-letters, letters core, trailing
/// non-letters); the core runs from the first to the last letter.
fn split_core(word: &str) -> (&str, &str, &str) {
    let first = word
        .char_indices()
        .find(|(_, c)| c.is_alphabetic())
        .map(|(i, _)| i);
    let last = word
        .char_indices()
        .rev()
        .find(|(_, c)| c.is_alphabetic())
        .map(|(i, c)| i + c.len_utf8());
    match (first, last) {
        (Some(a), Some(b)) => (&word[..a], &word[a..b], &word[b..]),
        _ => (word, "", ""),
    }
}

/// `word` (lower case) written with the case pattern of `like`.
fn recase(word: &str, like: &str) -> String {
    let letters: Vec<char> = like.chars().filter(|c| c.is_alphabetic()).collect();
    let all_upper = letters.len() > 1 && letters.iter().all(|c| c.is_uppercase());
    if all_upper {
        return word.to_uppercase();
    }
    if letters.first().is_some_and(|c| c.is_uppercase()) {
        let mut cs = word.chars();
        return match cs.next() {
            Some(f) => f.to_uppercase().chain(cs).collect(),
            None => String::new(),
        };
    }
    word.to_string()
}

/// Substitutions and insertions+deletions of a minimum-edit alignment of
/// `a` with `b` (fewest edits, then fewest insertions and deletions).
fn edit_ops(a: &str, b: &str) -> (usize, usize) {
    let a: Vec<char> = a.chars().collect();
    let b: Vec<char> = b.chars().collect();
    // cost = (edits, indels), compared lexicographically.
    let mut prev: Vec<(usize, usize)> = (0..=b.len()).map(|j| (j, j)).collect();
    for i in 1..=a.len() {
        let mut cur = vec![(i, i); b.len() + 1];
        for j in 1..=b.len() {
            let sub = if a[i - 1] == b[j - 1] { 0 } else { 1 };
            let diag = (prev[j - 1].0 + sub, prev[j - 1].1);
            let del = (prev[j].0 + 1, prev[j].1 + 1);
            let ins = (cur[j - 1].0 + 1, cur[j - 1].1 + 1);
            cur[j] = diag.min(del).min(ins);
        }
        prev = cur;
    }
    let (edits, indels) = prev[b.len()];
    (edits - indels, indels)
}

fn slots<C: BrailleCode>(
    frames: &Pruned,
    reading: &Reading,
    code: &C,
    lexicon: &Lexicon,
    weights: &RescoreWeights,
    prefilter: bool,
) -> Vec<Slot> {
    let n_t = frames.n_frames();
    let cells = &reading.cells;
    let mut out = Vec::new();
    let mut i = 0;
    while i < cells.len() {
        if cells[i].cell.mask() == 0 {
            i += 1;
            continue;
        }
        let start = i;
        while i < cells.len() && cells[i].cell.mask() != 0 {
            i += 1;
        }
        let end = i;
        let raw_cells: Vec<Cell> = cells[start..end].iter().map(|c| c.cell).collect();
        // The word read on its own: a reader may hold a cell back until the
        // next one, so the cells' own texts need not split at the space.
        let raw = read_cells(code, &raw_cells);
        let (lead, core, trail) = split_core(&raw);
        if core.is_empty() {
            continue;
        }
        let from = if start > 0 {
            cells[start - 1].frames.1 + 1
        } else {
            0
        };
        let to = if end < cells.len() {
            cells[end].frames.0
        } else {
            n_t
        };
        let (from, to) = (from.min(n_t), to.min(n_t).max(from.min(n_t)));
        let raw_evidence = span_log_likelihood(frames, from, to, &raw_cells);
        let letters = core.chars().count();
        let raw_log_prob = lexicon.log_prob(core);
        let max_edits = weights.edits_for(letters, raw_log_prob.is_some());
        let raw_score =
            raw_evidence + weights.lm_weight * raw_log_prob.unwrap_or(weights.oov_log_prob);
        let mut unscored: Vec<Unscored> = Vec::new();
        if max_edits > 0 {
            let core_lower = core.to_lowercase();
            for near in lexicon.near(core, max_edits) {
                if near.word == core_lower {
                    continue;
                }
                let (subs, indels) = edit_ops(&core_lower, &near.word);
                let text = format!("{lead}{}{trail}", recase(&near.word, core));
                unscored.push((text, lexicon.log_prob_of_count(near.count), subs, indels));
            }
        }
        if raw_log_prob.is_none() && letters >= weights.min_letters.max(2) {
            unscored.extend(split_candidates(&raw_cells, &raw, code, lexicon));
        }
        let mut cands = Vec::new();
        for (text, log_prob, subs, indels) in unscored {
            // The beam's cells are (nearly) the best explanation of the
            // span: a candidate whose evidence would have to beat them by
            // more than EVIDENCE_SLACK to win is not scored.
            let bound = raw_evidence + EVIDENCE_SLACK + prior(weights, log_prob, subs, indels);
            if prefilter && bound <= raw_score {
                continue;
            }
            cands.extend(scored(
                code,
                frames,
                (from, to),
                (text, log_prob, subs, indels),
            ));
        }
        out.push(Slot {
            cells: (start, end),
            frames: (from, to),
            raw_log_prob,
            raw,
            raw_cells,
            raw_evidence,
            cands,
        });
    }
    out
}

/// Two listed words that a word not in the lexicon may be, read as one
/// because the space between them was lost (`raw_cells` split between two
/// cells) or read as a letter (one cell of `raw_cells` taken as the space):
/// every split whose two sides both read as listed words (their letters;
/// punctuation may lead the first or trail the second), as (text, lexicon
/// log-probability, substitutions, insertions + deletions), unscored. The
/// lexicon log-probability of a pair is the sum of its words' (a unigram
/// model); the space is an edit like any other character.
fn split_candidates<C: BrailleCode>(
    raw_cells: &[Cell],
    raw: &str,
    code: &C,
    lexicon: &Lexicon,
) -> Vec<Unscored> {
    let n = raw_cells.len();
    let raw_lower = raw.to_lowercase();
    let mut out: Vec<Unscored> = Vec::new();
    // The text of every prefix, read once with one reader.
    let mut reader = code.reader();
    let mut read = String::new();
    for i in 1..n {
        reader.push_into(raw_cells[i - 1], &mut read);
        let mut a = read.clone();
        a.push_str(&reader.clone().finish());
        // The left side first: most splits end there.
        let (_, a_core, a_trail) = split_core(&a);
        if a_core.is_empty() || !a_trail.is_empty() {
            continue;
        }
        let Some(la) = lexicon.log_prob(a_core) else {
            continue;
        };
        // The cells after: the space lost at i, or cell i read for it.
        for right in [&raw_cells[i..], raw_cells.get(i + 1..).unwrap_or(&[])] {
            if right.is_empty() {
                continue;
            }
            let b = read_cells(code, right);
            let (b_lead, b_core, _) = split_core(&b);
            if b_core.is_empty() || !b_lead.is_empty() {
                continue;
            }
            let Some(lb) = lexicon.log_prob(b_core) else {
                continue;
            };
            let text = format!("{a} {b}");
            if out.iter().any(|c| c.0 == text) {
                continue;
            }
            let (subs, indels) = edit_ops(&raw_lower, &text.to_lowercase());
            out.push((text, la + lb, subs, indels));
        }
    }
    out
}

/// Neighbouring words worth trying as one (see [`Pair`]): one space cell
/// apart, at least one of them not in the lexicon or a single letter, and
/// their letters joined within `max_edits` edits of a listed word (one more
/// edit when the space stood for a lost letter).
fn pairs<C: BrailleCode>(
    frames: &Pruned,
    reading: &Reading,
    slots: &[Slot],
    code: &C,
    lexicon: &Lexicon,
    weights: &RescoreWeights,
    prefilter: bool,
) -> Vec<Pair> {
    let mut out = Vec::new();
    if weights.max_edits == 0 {
        return out;
    }
    for k in 0..slots.len().saturating_sub(1) {
        let (a, b) = (&slots[k], &slots[k + 1]);
        if b.cells.0 != a.cells.1 + 1 {
            continue;
        }
        let (a_lead, a_core, a_trail) = split_core(&a.raw);
        let (b_lead, b_core, b_trail) = split_core(&b.raw);
        if a_core.is_empty() || b_core.is_empty() || !a_trail.is_empty() || !b_lead.is_empty() {
            continue;
        }
        let short = |c: &str| c.chars().count() == 1;
        if a.raw_log_prob.is_some() && b.raw_log_prob.is_some() && !short(a_core) && !short(b_core)
        {
            continue;
        }
        let joined = format!("{a_core}{b_core}");
        let letters = joined.chars().count();
        // Longer joins would need the slow walk of the whole fst (see
        // `Lexicon::near`); words of more than 14 letters are rare.
        if !(3..=14).contains(&letters) {
            continue;
        }
        // One edit for the space (dropped, or the letter it stood for), one
        // more for joined words of 6 letters or more.
        let edits = if letters >= 6 && weights.max_edits >= 2 {
            2
        } else {
            1
        };
        let from = a.frames.0;
        let to = b.frames.1.max(from);
        let raw = format!("{} {}", a.raw, b.raw);
        let raw_lower = format!("{} {}", a_core, b_core).to_lowercase();
        // What the two words as read score beyond their evidence (as in
        // `slots`); the evidence of the joined frames cancels out of the
        // test below, so it is computed only for a pair worth scoring.
        let raw_lm = a.raw_score(weights) - a.raw_evidence + b.raw_score(weights) - b.raw_evidence;
        let mut cands = Vec::new();
        for near in lexicon.near(&joined, edits) {
            let (subs, indels) = edit_ops(&raw_lower, &near.word);
            let log_prob = lexicon.log_prob_of_count(near.count);
            if prefilter && EVIDENCE_SLACK + prior(weights, log_prob, subs, indels) <= raw_lm {
                continue;
            }
            let text = format!("{a_lead}{}{b_trail}", recase(&near.word, a_core));
            cands.extend(scored(
                code,
                frames,
                (from, to),
                (text, log_prob, subs, indels),
            ));
        }
        if cands.is_empty() {
            continue;
        }
        let mut raw_cells = a.raw_cells.clone();
        raw_cells.push(reading.cells[a.cells.1].cell);
        raw_cells.extend_from_slice(&b.raw_cells);
        let raw_union = span_log_likelihood(frames, from, to, &raw_cells);
        if raw_union == f64::NEG_INFINITY {
            continue;
        }
        out.push(Pair {
            first: k,
            frames: (from, to),
            raw,
            space_evidence: raw_union - a.raw_evidence - b.raw_evidence,
            cands,
        });
    }
    out
}

/// What rescoring chose: a replacement per word (`None` keeps it), and the
/// pairs joined (index into the pairs, candidate), which take the place of
/// both their words.
struct Choices<'s> {
    words: Vec<Option<&'s Cand>>,
    joined: Vec<(usize, &'s Cand)>,
}

/// Choose every word's reading, then join pairs left to right where a
/// pair's candidate beats its two words' choices and the space.
fn choose_all<'s>(slots: &'s [Slot], pairs: &'s [Pair], w: &RescoreWeights) -> Choices<'s> {
    let words: Vec<Option<&Cand>> = slots.iter().map(|s| s.choose(w)).collect();
    let mut joined = Vec::new();
    let mut taken_until = 0;
    for (i, p) in pairs.iter().enumerate() {
        if p.first < taken_until {
            continue;
        }
        let scores = (
            slots[p.first].chosen_score(w),
            slots[p.first + 1].chosen_score(w),
        );
        if let Some(c) = p.choose(w, scores) {
            joined.push((i, c));
            taken_until = p.first + 2;
        }
    }
    Choices { words, joined }
}

/// The text of the reading's cells with word `slots[k]`'s cells replaced by
/// its choice's, and a joined pair's words and space by the pair's choice,
/// read again from the start with the code's reader.
fn assemble<C: BrailleCode>(
    code: &C,
    reading: &Reading,
    slots: &[Slot],
    pairs: &[Pair],
    choices: &Choices<'_>,
) -> String {
    if choices.words.iter().all(Option::is_none) && choices.joined.is_empty() {
        return reading.text.clone();
    }
    let cells = &reading.cells;
    let mut out: Vec<Cell> = Vec::with_capacity(cells.len() + 4);
    let mut joined = choices.joined.iter().peekable();
    let mut k = 0;
    let mut i = 0;
    while i < cells.len() {
        if k < slots.len() && slots[k].cells.0 == i {
            if let Some(&&(p, c)) = joined.peek() {
                if pairs[p].first == k {
                    joined.next();
                    out.extend_from_slice(&c.cells);
                    i = slots[k + 1].cells.1;
                    k += 2;
                    continue;
                }
            }
            match choices.words[k] {
                Some(c) => out.extend_from_slice(&c.cells),
                None => out.extend_from_slice(&slots[k].raw_cells),
            }
            i = slots[k].cells.1;
            k += 1;
        } else {
            out.push(cells[i].cell);
            i += 1;
        }
    }
    read_cells(code, &out)
}

fn report(slot: &Slot, weights: &RescoreWeights) -> WordChoice {
    let mut candidates = vec![WordCandidate {
        text: slot.raw.clone(),
        evidence: slot.raw_evidence,
        log_prob: slot.raw_log_prob,
        substitutions: 0,
        indels: 0,
        score: slot.raw_score(weights),
    }];
    ranked(&mut candidates, &slot.cands, weights);
    WordChoice {
        raw: slot.raw.clone(),
        chosen: slot
            .choose(weights)
            .map_or_else(|| slot.raw.clone(), |c| c.text.clone()),
        cells: slot.cells,
        frames: slot.frames,
        candidates,
    }
}

/// `cands` added to `out` (which holds the reading as read) as reported
/// candidates, best first, at most [`REPORTED`] in all.
fn ranked(out: &mut Vec<WordCandidate>, cands: &[Cand], weights: &RescoreWeights) {
    out.extend(cands.iter().map(|c| WordCandidate {
        text: c.text.clone(),
        evidence: c.evidence,
        log_prob: Some(c.log_prob),
        substitutions: c.subs,
        indels: c.indels,
        score: Slot::cand_score(c, weights),
    }));
    out.sort_by(|a, b| b.score.total_cmp(&a.score));
    out.truncate(REPORTED);
}

/// One [`WordChoice`] per word, a joined pair's two words as one entry.
fn report_all(
    slots: &[Slot],
    pairs: &[Pair],
    choices: &Choices<'_>,
    weights: &RescoreWeights,
) -> Vec<WordChoice> {
    let mut out = Vec::with_capacity(slots.len());
    let mut joined = choices.joined.iter().peekable();
    let mut k = 0;
    while k < slots.len() {
        if let Some(&&(p, chosen)) = joined.peek() {
            let pair = &pairs[p];
            if pair.first == k {
                joined.next();
                let (a, b) = (&slots[k], &slots[k + 1]);
                let mut candidates = vec![WordCandidate {
                    text: pair.raw.clone(),
                    evidence: a.raw_evidence + pair.space_evidence + b.raw_evidence,
                    log_prob: None,
                    substitutions: 0,
                    indels: 0,
                    score: a.chosen_score(weights) + pair.space_evidence + b.chosen_score(weights),
                }];
                ranked(&mut candidates, &pair.cands, weights);
                out.push(WordChoice {
                    raw: pair.raw.clone(),
                    chosen: chosen.text.clone(),
                    cells: (a.cells.0, b.cells.1),
                    frames: pair.frames,
                    candidates,
                });
                k += 2;
                continue;
            }
        }
        out.push(report(&slots[k], weights));
        k += 1;
    }
    out
}

pub(crate) fn rescore_pruned<C: BrailleCode>(
    frames: &Pruned,
    reading: &Reading,
    code: &C,
    lexicon: &Lexicon,
    weights: &RescoreWeights,
) -> Rescored {
    let slots = slots(frames, reading, code, lexicon, weights, true);
    let pairs = pairs(frames, reading, &slots, code, lexicon, weights, true);
    let choices = choose_all(&slots, &pairs, weights);
    Rescored {
        text: assemble(code, reading, &slots, &pairs, &choices),
        words: report_all(&slots, &pairs, &choices, weights),
    }
}

/// Rescore the words of `reading` (decoded from `log_probs`,
/// `[n_frames, 65]`) with `lexicon`; `code` writes candidates as cells.
pub fn rescore<C: BrailleCode>(
    log_probs: ArrayView2<f32>,
    reading: &Reading,
    code: &C,
    lexicon: &Lexicon,
    weights: &RescoreWeights,
) -> Result<Rescored> {
    weights.check()?;
    let frames = crate::decode::checked_probabilities(&log_probs)?;
    Ok(rescore_pruned(&frames, reading, code, lexicon, weights))
}

/// One recording of a validation set.
#[derive(Debug, Clone)]
pub struct TuneItem<'a> {
    /// The network's output for it, `[n_frames, 65]`.
    pub log_probs: ArrayView2<'a, f32>,
    /// What it says.
    pub truth: &'a str,
}

/// The values [`tune`] tries for each weight (every combination).
#[derive(Debug, Clone, PartialEq)]
pub struct WeightGrid {
    /// Values of [`RescoreWeights::lm_weight`]. Default 0, 0.25, 0.5, 1, 1.5, 2.
    pub lm_weight: Vec<f64>,
    /// Values of [`RescoreWeights::substitution_penalty`]. Default 0, 1, 2, 4.
    pub substitution_penalty: Vec<f64>,
    /// Values of [`RescoreWeights::indel_penalty`]. Default 1, 3, 6.
    pub indel_penalty: Vec<f64>,
    /// Values of [`RescoreWeights::oov_log_prob`]. Default -10, -13, -16, -20, -25.
    pub oov_log_prob: Vec<f64>,
}

impl Default for WeightGrid {
    fn default() -> Self {
        WeightGrid {
            lm_weight: vec![0.0, 0.25, 0.5, 1.0, 1.5, 2.0],
            substitution_penalty: vec![0.0, 1.0, 2.0, 4.0],
            indel_penalty: vec![1.0, 3.0, 6.0],
            oov_log_prob: vec![-10.0, -13.0, -16.0, -20.0, -25.0],
        }
    }
}

/// The result of [`tune`].
#[derive(Debug, Clone, PartialEq)]
pub struct Tuned {
    /// The best weights found (ties: the first in grid order).
    pub weights: RescoreWeights,
    /// Word accuracy with them.
    pub word_accuracy: f64,
    /// Word accuracy of the beam's reading without rescoring.
    pub raw_word_accuracy: f64,
    /// Grid points tried.
    pub tried: usize,
}

/// Word accuracy of `hyp` against `truth`: `1 - word edit distance / words
/// in truth` (words split at white space), summed over a set as
/// `(words - edits) / words`. Returns `(words, edits)`.
pub(crate) fn word_errors(hyp: &str, truth: &str) -> (usize, usize) {
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

fn accuracy(words: usize, edits: usize) -> f64 {
    if words == 0 {
        return 1.0;
    }
    (words as f64 - edits as f64) / words as f64
}

/// Grid search over the rescoring weights (every combination of `grid`,
/// with `base`'s `max_edits` and `min_letters`) maximising word accuracy on
/// `items`, each decoded once with `beam` and `code`.
pub fn tune<C: BrailleCode>(
    items: &[TuneItem<'_>],
    code: &C,
    lexicon: &Lexicon,
    beam: &BeamParams,
    base: &RescoreWeights,
    grid: &WeightGrid,
) -> Result<Tuned> {
    base.check()?;
    beam.check()?;
    if items.is_empty() {
        return Err(Error::config(
            "validation set",
            "is empty: give at least one recording with its text",
        ));
    }
    let mut prepared = Vec::with_capacity(items.len());
    let (mut raw_words, mut raw_edits) = (0, 0);
    for item in items {
        let frames = crate::decode::checked_pruned(&item.log_probs, beam)?;
        let reading = crate::decode::read_pruned(&frames, code.reader(), beam)?;
        // Every candidate is scored: the grid changes the weights.
        let s = slots(&frames, &reading, code, lexicon, base, false);
        let p = pairs(&frames, &reading, &s, code, lexicon, base, false);
        let (w, e) = word_errors(&reading.text, item.truth);
        raw_words += w;
        raw_edits += e;
        prepared.push((reading, s, p, item.truth));
    }
    let mut best: Option<(f64, RescoreWeights)> = None;
    let mut tried = 0;
    for &lm in &grid.lm_weight {
        for &sp in &grid.substitution_penalty {
            for &ip in &grid.indel_penalty {
                for &oov in &grid.oov_log_prob {
                    let w = RescoreWeights {
                        lm_weight: lm,
                        substitution_penalty: sp,
                        indel_penalty: ip,
                        oov_log_prob: oov,
                        ..base.clone()
                    };
                    w.check()?;
                    tried += 1;
                    let (mut words, mut edits) = (0, 0);
                    for (reading, s, p, truth) in &prepared {
                        let choices = choose_all(s, p, &w);
                        let text = assemble(code, reading, s, p, &choices);
                        let (a, b) = word_errors(&text, truth);
                        words += a;
                        edits += b;
                    }
                    let acc = accuracy(words, edits);
                    if best.as_ref().is_none_or(|(b, _)| acc > *b) {
                        best = Some((acc, w));
                    }
                }
            }
        }
    }
    let (word_accuracy, weights) = best.ok_or_else(|| {
        Error::config(
            "weight grid",
            "has no point: give at least one value for every weight",
        )
    })?;
    Ok(Tuned {
        weights,
        word_accuracy,
        raw_word_accuracy: accuracy(raw_words, raw_edits),
        tried,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn core_and_case() {
        assert_eq!(split_core("(Cat),"), ("(", "Cat", "),"));
        assert_eq!(split_core("42"), ("42", "", ""));
        assert_eq!(recase("cat", "Cot"), "Cat");
        assert_eq!(recase("cat", "COT"), "CAT");
        assert_eq!(recase("cat", "cot"), "cat");
        assert_eq!(recase("über", "Uber"), "Über");
    }

    #[test]
    fn edit_operations_by_hand() {
        // Hand-counted: kitten -> sitting is 2 substitutions + 1 insertion
        // (the classic Levenshtein example, distance 3).
        assert_eq!(edit_ops("kitten", "sitting"), (2, 1));
        assert_eq!(edit_ops("cat", "cart"), (0, 1));
        assert_eq!(edit_ops("cat", "cot"), (1, 0));
        assert_eq!(edit_ops("", "ab"), (0, 2));
    }

    #[test]
    fn word_error_counts() {
        assert_eq!(word_errors("the cat sat", "the cat sat"), (3, 0));
        assert_eq!(word_errors("the cot sat", "the cat sat"), (3, 1));
        assert_eq!(word_errors("the sat", "the cat sat"), (3, 1));
        assert_eq!(word_errors("", "a b"), (2, 2));
    }
}
