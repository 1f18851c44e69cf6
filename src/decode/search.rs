//! CTC prefix beam search over the 64 six-dot cell patterns, optionally
//! carrying the braille code's reader state inside every hypothesis.
//!
//! The algorithm is the prefix search of Graves (2012, "Supervised Sequence
//! Labelling with Recurrent Neural Networks", section 7.5) in the form given
//! by Hannun et al. (2014, "First-pass large vocabulary continuous speech
//! recognition using bi-directional recurrent DNNs", algorithm 1): every
//! prefix keeps the probability of all alignments ending in a blank (`p_b`)
//! and of those ending in its last cell (`p_nb`), so that a repeated cell is
//! only a new cell when a blank separates the two (the CTC collapse rule of
//! Graves et al. 2006).
//!
//! Probabilities are kept in linear space in `f64` and rescaled after every
//! frame (the running log of the scale factors is added back at the end);
//! hypotheses more than `score_margin` nats below the best are dropped, so the
//! rescaled values never underflow.
//!
//! With a code reader, a hypothesis also carries a clone of the reader and
//! the text its cells produced. Two hypotheses with the same text, the same
//! reader state and the same last cell have the same future, so in
//! `merge_equal_text` mode they are merged into one (their probabilities
//! add): the beam then ranks character strings rather than cell strings.

use super::frames::Pruned;
use super::CodeReader;
use crate::{Cell, Error, Result};
use std::collections::HashMap;
use std::hash::{BuildHasherDefault, Hasher};

/// The multiply-rotate hash of rustc's `FxHasher` (from memory of the
/// rustc-hash crate): far cheaper than SipHash on the small integer keys of
/// the search, and collision attacks do not matter here.
#[derive(Default, Clone, Copy)]
pub(crate) struct FxHasher {
    hash: u64,
}

const FX_SEED: u64 = 0x51_7c_c1_b7_27_22_0a_95;

impl FxHasher {
    #[inline]
    fn add(&mut self, x: u64) {
        self.hash = (self.hash.rotate_left(5) ^ x).wrapping_mul(FX_SEED);
    }
}

impl Hasher for FxHasher {
    #[inline]
    fn write(&mut self, bytes: &[u8]) {
        let mut chunks = bytes.chunks_exact(8);
        for c in &mut chunks {
            let mut b = [0u8; 8];
            b.copy_from_slice(c);
            self.add(u64::from_le_bytes(b));
        }
        for &b in chunks.remainder() {
            self.add(b as u64);
        }
    }
    #[inline]
    fn write_u8(&mut self, i: u8) {
        self.add(i as u64);
    }
    #[inline]
    fn write_u16(&mut self, i: u16) {
        self.add(i as u64);
    }
    #[inline]
    fn write_u32(&mut self, i: u32) {
        self.add(i as u64);
    }
    #[inline]
    fn write_u64(&mut self, i: u64) {
        self.add(i);
    }
    #[inline]
    fn write_usize(&mut self, i: usize) {
        self.add(i as u64);
    }
    #[inline]
    fn finish(&self) -> u64 {
        self.hash
    }
}

/// A hash map with [`FxHasher`].
pub(crate) type FxMap<K, V> = HashMap<K, V, BuildHasherDefault<FxHasher>>;

/// Settings of the beam search. Build with [`BeamParams::default`] and change
/// fields; [`BeamParams::check`] refuses meaningless values.
#[derive(Debug, Clone, PartialEq)]
pub struct BeamParams {
    /// Hypotheses kept after each frame. Default 16. A width of 1 keeps only
    /// the most probable prefix (close to, but not always the same as, greedy
    /// best-path decoding).
    pub beam_width: usize,
    /// Hypotheses returned, at most `beam_width`. Default 5.
    pub n_best: usize,
    /// A pattern is tried as an extension at a frame only if its probability
    /// there is at least this. Default 1e-3. The frame's most probable pattern
    /// is always tried.
    pub min_cell_prob: f64,
    /// At most this many patterns are tried per frame. Default 8.
    pub max_cells_per_frame: usize,
    /// A frame whose blank probability is above this tries no extension at
    /// all (the existing hypotheses are carried over exactly). Default 0.999.
    pub blank_skip: f64,
    /// Hypotheses whose probability is more than this many nats below the
    /// best one after a frame are dropped. Default 30.
    pub score_margin: f64,
    /// Merge hypotheses whose cells produced the same text, reader state and
    /// last cell (only used when decoding with a code reader). Default true.
    pub merge_equal_text: bool,
}

impl Default for BeamParams {
    fn default() -> Self {
        BeamParams {
            beam_width: 16,
            n_best: 5,
            min_cell_prob: 1e-3,
            max_cells_per_frame: 8,
            blank_skip: 0.999,
            score_margin: 30.0,
            merge_equal_text: true,
        }
    }
}

impl BeamParams {
    /// Check the settings: widths at least 1, probabilities in range, a
    /// positive margin.
    pub fn check(&self) -> Result<()> {
        if self.beam_width == 0 {
            return Err(Error::config(
                "beam width",
                "must be at least 1 (default 16)",
            ));
        }
        if self.n_best == 0 {
            return Err(Error::config("n-best", "must be at least 1 (default 5)"));
        }
        if self.max_cells_per_frame == 0 || self.max_cells_per_frame > 64 {
            return Err(Error::config(
                "cells per frame",
                format!("{} is not in 1..=64 (default 8)", self.max_cells_per_frame),
            ));
        }
        if !(0.0..=1.0).contains(&self.min_cell_prob) {
            return Err(Error::config(
                "minimum cell probability",
                format!("{} is not in 0..=1 (default 0.001)", self.min_cell_prob),
            ));
        }
        if !(0.0..=1.0).contains(&self.blank_skip) {
            return Err(Error::config(
                "blank skip threshold",
                format!("{} is not in 0..=1 (default 0.999)", self.blank_skip),
            ));
        }
        if self.score_margin.is_nan() || self.score_margin <= 0.0 {
            return Err(Error::config(
                "score margin",
                format!(
                    "{} must be a positive number of nats (default 30)",
                    self.score_margin
                ),
            ));
        }
        Ok(())
    }
}

/// A reader that produces no text and has one state: the beam then ranks
/// cell sequences.
#[derive(Debug, Clone, Copy)]
pub(crate) struct NoReader;

impl CodeReader for NoReader {
    type State = ();
    fn push(&mut self, _cell: Cell) -> String {
        String::new()
    }
    fn push_into(&mut self, _cell: Cell, _out: &mut String) {}
    fn state(&self) -> Self::State {}
    fn finish(self) -> String {
        String::new()
    }
}

/// One result of the search.
#[derive(Debug, Clone)]
pub(crate) struct Found {
    pub cells: Vec<Cell>,
    pub text: String,
    /// Natural log of the (beam-approximated) probability of the cells (or,
    /// after text merging, of the text) given the frames.
    pub log_score: f64,
}

/// Label of the cell tree's root (no cell).
pub(crate) const NO_CELL: u8 = u8::MAX;
/// The root of both prefix trees: the empty prefix and the empty text.
pub(crate) const ROOT: u32 = 0;
/// `Hyp::cnode` of an extension whose tree node is not made yet.
const PENDING: u32 = u32::MAX;
/// End of a child or sibling list.
const NIL: u32 = u32::MAX;
/// Up to this many survivors, text merging finds equal keys by a linear
/// search instead of hashing.
const LINEAR_MERGE: usize = 48;

/// A node of the prefix tree of cells: its parent, its cell's mask, its
/// children as a linked list (first child, next sibling: a node has few
/// children, so walking the list is cheaper than hashing `(parent, mask)`),
/// and what the streaming commit rule needs (`depth`, `space_depth`,
/// `born`).
#[derive(Debug, Clone, Copy)]
pub(crate) struct CellNode {
    pub parent: u32,
    pub mask: u8,
    first_child: u32,
    next_sibling: u32,
    /// Cells from the root.
    pub depth: u32,
    /// Depth of the deepest space cell on the path (this node included); 0
    /// when there is none.
    pub space_depth: u32,
    /// Frame at which the node was made: the first frame at which its
    /// extension survived the beam's first cut.
    pub born: u64,
}

/// The prefix tree of cells; node [`ROOT`] is the empty prefix.
#[derive(Debug, Clone)]
pub(crate) struct CellTree {
    pub nodes: Vec<CellNode>,
}

impl CellTree {
    fn new(born: u64) -> Self {
        CellTree {
            nodes: vec![CellNode {
                parent: ROOT,
                mask: NO_CELL,
                first_child: NIL,
                next_sibling: NIL,
                depth: 0,
                space_depth: 0,
                born,
            }],
        }
    }

    /// The child of `parent` with cell `mask`, made (born at `now`) if new.
    pub fn child(&mut self, parent: u32, mask: u8, now: u64) -> u32 {
        let p = self.nodes[parent as usize];
        let mut k = p.first_child;
        while k != NIL {
            let node = &self.nodes[k as usize];
            if node.mask == mask {
                return k;
            }
            k = node.next_sibling;
        }
        let id = self.nodes.len() as u32;
        let depth = p.depth + 1;
        self.nodes.push(CellNode {
            parent,
            mask,
            first_child: NIL,
            next_sibling: p.first_child,
            depth,
            space_depth: if mask == 0 { depth } else { p.space_depth },
            born: now,
        });
        self.nodes[parent as usize].first_child = id;
        id
    }

    /// Cells from `from` (exclusive; an ancestor of `node`, or [`ROOT`]) to
    /// `node`.
    pub fn path(&self, mut node: u32, from: u32) -> Vec<Cell> {
        let mut out = Vec::new();
        while node != from && node != ROOT {
            let n = &self.nodes[node as usize];
            out.push(Cell::from_mask(n.mask));
            node = n.parent;
        }
        out.reverse();
        out
    }
}

/// A piece of text one cell produced. Nearly all are a character or two,
/// kept inline: the search makes one per new tree node, and allocating (and
/// later freeing) tens of thousands of small strings would cost more than
/// the search step itself.
#[derive(Debug, Clone, PartialEq, Eq)]
enum Piece {
    Inline(u8, [u8; 14]),
    Heap(Box<str>),
}

impl Piece {
    fn new(s: &str) -> Piece {
        let b = s.as_bytes();
        if b.len() <= 14 {
            let mut a = [0u8; 14];
            a[..b.len()].copy_from_slice(b);
            Piece::Inline(b.len() as u8, a)
        } else {
            Piece::Heap(s.into())
        }
    }

    fn as_str(&self) -> &str {
        match self {
            // Always the bytes of a whole `&str` (see `new`).
            Piece::Inline(n, a) => std::str::from_utf8(&a[..*n as usize]).unwrap_or_default(),
            Piece::Heap(s) => s,
        }
    }
}

/// A node of the prefix tree of texts: the text of a node is its
/// ancestors' pieces and its own, in order.
#[derive(Debug, Clone)]
struct TextNode {
    parent: u32,
    piece: Piece,
    first_child: u32,
    next_sibling: u32,
}

/// The prefix tree of texts; node [`ROOT`] is the empty text.
#[derive(Debug, Clone)]
pub(crate) struct TextTree {
    nodes: Vec<TextNode>,
}

impl TextTree {
    fn new() -> Self {
        TextTree {
            nodes: vec![TextNode {
                parent: ROOT,
                piece: Piece::new(""),
                first_child: NIL,
                next_sibling: NIL,
            }],
        }
    }

    /// The child of `parent` whose piece is `piece`, made if new.
    fn child(&mut self, parent: u32, piece: &str) -> u32 {
        let mut k = self.nodes[parent as usize].first_child;
        while k != NIL {
            let node = &self.nodes[k as usize];
            if node.piece.as_str() == piece {
                return k;
            }
            k = node.next_sibling;
        }
        let id = self.nodes.len() as u32;
        let next_sibling = self.nodes[parent as usize].first_child;
        self.nodes.push(TextNode {
            parent,
            piece: Piece::new(piece),
            first_child: NIL,
            next_sibling,
        });
        self.nodes[parent as usize].first_child = id;
        id
    }

    /// The text from `from` (exclusive; an ancestor of `node`, or [`ROOT`])
    /// to `node`.
    pub fn text(&self, mut node: u32, from: u32) -> String {
        let mut parts = Vec::new();
        while node != from && node != ROOT {
            let n = &self.nodes[node as usize];
            parts.push(n.piece.as_str());
            node = n.parent;
        }
        parts.reverse();
        parts.concat()
    }
}

/// A hypothesis: a node of the cell tree (or, for a new extension not yet
/// in the tree, [`PENDING`] with the parent node in `from`), its last cell,
/// and the probabilities of its alignments ending in a blank (`pb`) and in
/// its last cell (`pnb`).
#[derive(Debug, Clone, Copy)]
pub(crate) struct Hyp {
    pub cnode: u32,
    from: u32,
    pub last: u8,
    pub pb: f64,
    pub pnb: f64,
}

impl Hyp {
    pub fn total(&self) -> f64 {
        self.pb + self.pnb
    }
}

/// Keep the `k` most probable hypotheses (unordered).
fn keep_top(v: &mut Vec<Hyp>, k: usize) {
    if v.len() > k {
        v.select_nth_unstable_by(k - 1, |a, b| b.total().total_cmp(&a.total()));
        v.truncate(k);
    }
}

/// The prefix beam search's state between frames: the trees of cells and
/// texts, the reader after each cell node, and the beam. The offline search
/// ([`search`]) runs [`BeamSearch::step`] over a whole recording; the
/// streaming decoder (`super::stream`) runs the same step one frame at a
/// time and cuts the trees at its commits.
///
/// Within a frame hypotheses are keyed by their cell sequence (a node of
/// the cell tree). The beam's prefixes are distinct, so an extension
/// `h + c` can only meet another hypothesis of the frame if `h + c` is
/// itself in the beam: each frame links every beam member to its parent in
/// the beam (if there), and every other extension is new, with no lookup.
/// New extensions enter the tree only if they survive a first cut to twice
/// the beam width; the reader is run for them once per tree node (the
/// reader after a cell path depends only on the path); then hypotheses of
/// equal text, state and last cell merge and the beam is cut to its width.
/// The result is the same, hypothesis for hypothesis, as hashing every
/// extension (the reference search of `search_reference.rs`, compared in
/// the tests).
pub(crate) struct BeamSearch<R: CodeReader> {
    pub cells: CellTree,
    pub texts: TextTree,
    /// Text node and reader after each cell node, once computed; the
    /// root's is the initial reader.
    pub after: Vec<Option<(u32, R)>>,
    pub beam: Vec<Hyp>,
    /// Natural log of the product of the per-frame rescaling factors.
    log_scale: f64,
    /// `e^-score_margin`: hypotheses below `floor` times the best go.
    floor: f64,
    /// Every hypothesis died (only possible with degenerate settings).
    pub dead: bool,
    // Per-frame buffers, kept to avoid allocating on every frame. For beam
    // member i: its entry in `next`, its first child in the beam, and its
    // next sibling in the beam (beam indices).
    next: Vec<Hyp>,
    slot: Vec<usize>,
    kid: Vec<u32>,
    sib: Vec<u32>,
    member: FxMap<u32, u32>,
    by_key: FxMap<(u32, R::State, u8), usize>,
    keys: Vec<(u32, R::State, u8)>,
    merged: Vec<Hyp>,
    piece: String,
}

impl<R: CodeReader> BeamSearch<R> {
    /// A search at the empty prefix, reading with `reader`, dropping
    /// hypotheses more than `score_margin` nats below the best.
    pub fn new(reader: R, score_margin: f64) -> Self {
        BeamSearch {
            cells: CellTree::new(0),
            texts: TextTree::new(),
            after: vec![Some((ROOT, reader))],
            beam: vec![Hyp {
                cnode: ROOT,
                from: ROOT,
                last: NO_CELL,
                pb: 1.0,
                pnb: 0.0,
            }],
            log_scale: 0.0,
            floor: (-score_margin).exp(),
            dead: false,
            next: Vec::new(),
            slot: Vec::new(),
            kid: Vec::new(),
            sib: Vec::new(),
            member: FxMap::default(),
            by_key: FxMap::default(),
            keys: Vec::new(),
            merged: Vec::new(),
            piece: String::new(),
        }
    }

    /// Empty both trees, keeping the beam: the root becomes a node born at
    /// `born` with `reader`. The caller re-inserts the beam's paths with
    /// [`CellTree::child`] and [`Self::ensure_after`].
    pub fn clear_trees(&mut self, reader: R, born: u64) {
        self.cells = CellTree::new(born);
        self.texts = TextTree::new();
        self.after.clear();
        self.after.push(Some((ROOT, reader)));
    }

    /// Compute the text node and reader after `node` if not yet known (its
    /// parent's must be).
    pub fn ensure_after(&mut self, node: u32) {
        let n = node as usize;
        if self.after.len() <= n {
            self.after.resize_with(n + 1, || None);
        }
        if self.after[n].is_some() {
            return;
        }
        let CellNode { parent, mask, .. } = self.cells.nodes[n];
        let Some((ptext, preader)) = &self.after[parent as usize] else {
            return;
        };
        let (ptext, mut r) = (*ptext, preader.clone());
        self.piece.clear();
        r.push_into(Cell::from_mask(mask), &mut self.piece);
        let tnode = if self.piece.is_empty() {
            ptext
        } else {
            self.texts.child(ptext, &self.piece)
        };
        self.after[n] = Some((tnode, r));
    }

    /// One frame: `t` indexes `frames`; `now` (the frame's number in the
    /// whole stream) is recorded as the birth of new cell nodes.
    pub fn step(&mut self, frames: &Pruned, t: usize, now: u64, beam_width: usize, merge: bool) {
        if self.dead {
            return;
        }
        let blank = frames.blank[t];
        let (cands, probs) = frames.candidates(t);
        let row = frames.row(t);
        let floor = self.floor;
        if cands.is_empty() {
            // A frame that tries no extension (blank above `blank_skip`):
            // every prefix only stays, so the set of hypotheses is unchanged
            // and needs no hashing, merging or cutting.
            let mut max = 0f64;
            for h in self.beam.iter_mut() {
                let total = h.total();
                h.pnb = if h.last == NO_CELL {
                    0.0
                } else {
                    h.pnb * row[h.last as usize & 63]
                };
                h.pb = total * blank;
                max = max.max(h.total());
            }
            if !(max > 0.0 && max.is_finite()) {
                self.die();
                return;
            }
            self.log_scale += max.ln();
            let inv = 1.0 / max;
            for h in self.beam.iter_mut() {
                h.pb *= inv;
                h.pnb *= inv;
            }
            self.beam.retain(|h| h.total() >= floor);
            return;
        }
        // Link the beam members to their parents in the beam.
        let beam = &self.beam;
        let n = beam.len();
        let (slot, kid, sib) = (&mut self.slot, &mut self.kid, &mut self.sib);
        slot.clear();
        slot.resize(n, usize::MAX);
        kid.clear();
        kid.resize(n, NIL);
        sib.clear();
        sib.resize(n, NIL);
        if n > 1 {
            // A small beam finds parents by a linear search (cheaper than
            // hashing every member); the last match wins, as in the map.
            let linear = n <= LINEAR_MERGE;
            if !linear {
                self.member.clear();
                for (i, h) in beam.iter().enumerate() {
                    self.member.insert(h.cnode, i as u32);
                }
            }
            for (i, h) in beam.iter().enumerate() {
                if h.cnode == ROOT {
                    continue;
                }
                let parent = self.cells.nodes[h.cnode as usize].parent;
                let j = if linear {
                    beam.iter()
                        .rposition(|b| b.cnode == parent)
                        .map(|j| j as u32)
                } else {
                    self.member.get(&parent).copied()
                };
                if let Some(j) = j {
                    sib[i] = kid[j as usize];
                    kid[j as usize] = i as u32;
                }
            }
        }
        let next = &mut self.next;
        next.clear();
        let add = |next: &mut Vec<Hyp>, slot: &mut [usize], i: usize, pb: f64, pnb: f64| {
            if slot[i] == usize::MAX {
                slot[i] = next.len();
                let h = &beam[i];
                next.push(Hyp {
                    cnode: h.cnode,
                    from: h.cnode,
                    last: h.last,
                    pb,
                    pnb,
                });
            } else {
                let e = &mut next[slot[i]];
                e.pb += pb;
                e.pnb += pnb;
            }
        };
        for (hi, h) in beam.iter().enumerate() {
            let total = h.total();
            for (&c, &p) in cands.iter().zip(probs) {
                let pnb = if c == h.last { h.pb * p } else { total * p };
                if pnb > 0.0 {
                    let mut k = kid[hi];
                    while k != NIL && beam[k as usize].last != c {
                        k = sib[k as usize];
                    }
                    if k == NIL {
                        next.push(Hyp {
                            cnode: PENDING,
                            from: h.cnode,
                            last: c,
                            pb: 0.0,
                            pnb,
                        });
                    } else {
                        add(next, slot, k as usize, 0.0, pnb);
                    }
                }
            }
            // The prefix itself: a blank, or its last cell held.
            let pb = total * blank;
            let pnb = if h.last == NO_CELL {
                0.0
            } else {
                h.pnb * row[h.last as usize & 63]
            };
            if pb + pnb > 0.0 {
                add(next, slot, hi, pb, pnb);
            }
        }
        let max = next.iter().map(Hyp::total).fold(0.0, f64::max);
        if !(max > 0.0 && max.is_finite()) {
            self.die();
            return;
        }
        self.log_scale += max.ln();
        let inv = 1.0 / max;
        for h in next.iter_mut() {
            h.pb *= inv;
            h.pnb *= inv;
        }
        next.retain(|h| h.total() >= floor);
        keep_top(next, 2 * beam_width);
        // Only extensions into tree nodes that were not in the beam can
        // change the set of texts; otherwise the beam was merged already.
        let extended = next.iter().any(|h| h.cnode == PENDING);
        if extended {
            // Put the new extensions among the survivors into the tree, and
            // run the reader on the tree nodes that have none yet.
            let mut next = std::mem::take(&mut self.next);
            for h in next.iter_mut() {
                if h.cnode == PENDING {
                    h.cnode = self.cells.child(h.from, h.last, now);
                    self.ensure_after(h.cnode);
                }
            }
            if merge {
                self.merge_equal(&mut next);
            }
            self.next = next;
        }
        keep_top(&mut self.next, beam_width);
        std::mem::swap(&mut self.beam, &mut self.next);
    }

    /// Merge the hypotheses of `next` with equal text, reader state and
    /// last cell (their probabilities add; the dominant cell path is kept).
    fn merge_equal(&mut self, next: &mut Vec<Hyp>) {
        self.by_key.clear();
        self.keys.clear();
        let merged = &mut self.merged;
        merged.clear();
        // Few survivors: a linear search of the keys is cheaper than
        // hashing them (same result: the first of each key collects).
        let linear = next.len() <= LINEAR_MERGE;
        for h in next.iter() {
            let Some((tnode, r)) = &self.after[h.cnode as usize] else {
                continue;
            };
            let key = (*tnode, r.state(), h.last);
            let at = if linear {
                self.keys.iter().position(|k| *k == key)
            } else {
                self.by_key.get(&key).copied()
            };
            match at {
                Some(i) => {
                    let m: &mut Hyp = &mut merged[i];
                    if h.total() > m.total() {
                        // Report the dominant cell path.
                        m.cnode = h.cnode;
                    }
                    m.pb += h.pb;
                    m.pnb += h.pnb;
                }
                None => {
                    if linear {
                        self.keys.push(key);
                    } else {
                        self.by_key.insert(key, merged.len());
                    }
                    merged.push(*h);
                }
            }
        }
        std::mem::swap(next, merged);
    }

    fn die(&mut self) {
        self.dead = true;
        self.beam.clear();
    }

    /// The text after cell node `node`, read from the root, with whatever
    /// its reader still holds back.
    fn final_text(&self, node: u32) -> Option<String> {
        let (tnode, r) = self.after[node as usize].as_ref()?;
        let mut text = self.texts.text(*tnode, ROOT);
        text.push_str(&r.clone().finish());
        Some(text)
    }

    /// Every hypothesis of the beam, most probable first; with `by_text`,
    /// grouped by text (their probabilities add). Empty if the search died.
    pub fn results(&self, by_text: bool) -> Vec<Found> {
        if self.dead {
            return Vec::new();
        }
        let mut found: Vec<(Found, f64)> = Vec::with_capacity(self.beam.len());
        for h in &self.beam {
            let p = h.total();
            let Some(text) = self.final_text(h.cnode) else {
                continue;
            };
            found.push((
                Found {
                    cells: self.cells.path(h.cnode, ROOT),
                    text,
                    log_score: p.ln() + self.log_scale,
                },
                p,
            ));
        }
        if by_text {
            // Different last cells or final states can still read the same:
            // the text's probability is the sum over them.
            let mut by_text: HashMap<String, usize> = HashMap::new();
            let mut merged: Vec<(Found, f64)> = Vec::new();
            found.sort_by(|a, b| b.1.total_cmp(&a.1));
            for (f, p) in found {
                match by_text.get(&f.text) {
                    Some(&i) => merged[i].1 += p,
                    None => {
                        by_text.insert(f.text.clone(), merged.len());
                        merged.push((f, p));
                    }
                }
            }
            for (f, p) in merged.iter_mut() {
                f.log_score = p.ln() + self.log_scale;
            }
            found = merged;
        }
        found.sort_by(|a, b| b.1.total_cmp(&a.1).then_with(|| a.0.cells.cmp(&b.0.cells)));
        found.into_iter().map(|(f, _)| f).collect()
    }
}

/// Run the prefix beam search over pruned frames, starting from `reader`.
/// With `merge`, hypotheses of equal text, state and last cell merge during
/// the search; with `by_text`, the final hypotheses are grouped by text
/// (their probabilities add). Results are sorted by decreasing score: every
/// hypothesis of the final beam. See [`BeamSearch`] for how a frame is
/// stepped.
pub(crate) fn search<R: CodeReader>(
    frames: &Pruned,
    reader: R,
    params: &BeamParams,
    merge: bool,
    by_text: bool,
) -> Vec<Found> {
    let mut s = BeamSearch::new(reader, params.score_margin);
    for t in 0..frames.n_frames() {
        s.step(frames, t, t as u64, params.beam_width, merge);
        if s.dead {
            // Report nothing rather than invent a reading.
            return Vec::new();
        }
    }
    s.results(by_text)
}

/// Greedy best-path decoding: the most probable class of every frame, repeats
/// collapsed, blanks removed (Graves et al. 2006, section 3.2).
pub(crate) fn greedy(log_probs: &ndarray::ArrayView2<f32>) -> Vec<Cell> {
    let mut out = Vec::new();
    let mut prev = usize::MAX;
    for row in log_probs.outer_iter() {
        let mut best = 0;
        for (c, &v) in row.iter().enumerate() {
            if v > row[best] {
                best = c;
            }
        }
        if best != super::frames::BLANK && best != prev {
            out.push(Cell::from_mask(best as u8));
        }
        prev = best;
    }
    out
}

#[cfg(test)]
mod tests {
    use super::super::frames::{prune, BLANK, N_CLASSES};
    use super::super::search_reference::search_reference;
    use super::*;
    use ndarray::Array2;
    use rand::{Rng, SeedableRng};
    use rand_chacha::ChaCha8Rng;

    /// Random `[n_frames, 65]` log-probabilities of three kinds of frame:
    /// near-certain blanks, factorised cell spikes (six Bernoulli dots, as
    /// the network's head), and uniform rows (which make exact ties between
    /// hypotheses, the hardest case for reproducing the reference's order).
    fn random_frames(rng: &mut ChaCha8Rng, n: usize) -> Array2<f32> {
        let mut a = Array2::<f32>::zeros((n, N_CLASSES));
        for t in 0..n {
            let kind: f64 = rng.gen();
            if kind < 0.1 {
                a.row_mut(t).fill(-(N_CLASSES as f32).ln());
                continue;
            }
            let blank = if kind < 0.6 {
                1.0 - 10f64.powf(rng.gen_range(-6.0..-1.0))
            } else {
                rng.gen_range(0.01..0.7)
            };
            let mut dots = [0f64; 6];
            for d in dots.iter_mut() {
                *d = if rng.gen_bool(0.2) {
                    rng.gen_range(0.3..0.7)
                } else if rng.gen_bool(0.5) {
                    0.95
                } else {
                    0.05
                };
            }
            for m in 0..64usize {
                let mut p = 1.0 - blank;
                for (k, &d) in dots.iter().enumerate() {
                    p *= if m & (1 << k) != 0 { d } else { 1.0 - d };
                }
                a[[t, m]] = p.max(1e-30).ln() as f32;
            }
            a[[t, BLANK]] = blank.ln() as f32;
        }
        a
    }

    fn same(fast: &[Found], plain: &[Found]) -> bool {
        fast.len() == plain.len()
            && fast.iter().zip(plain).all(|(a, b)| {
                a.cells == b.cells
                    && a.text == b.text
                    && a.log_score.to_bits() == b.log_score.to_bits()
            })
    }

    #[test]
    fn fast_search_reproduces_the_reference_search_exactly() {
        let table = crate::braille::CodeTable::builtin("en").unwrap();
        let mut rng = ChaCha8Rng::seed_from_u64(7);
        for case in 0..120 {
            let n = rng.gen_range(1..160);
            let lp = random_frames(&mut rng, n);
            let params = BeamParams {
                beam_width: [1, 2, 3, 5, 16, 40][rng.gen_range(0..6)],
                min_cell_prob: [0.0, 1e-4, 1e-3, 0.05][rng.gen_range(0..4)],
                max_cells_per_frame: [1, 3, 8, 64][rng.gen_range(0..4)],
                blank_skip: [0.99, 0.999, 1.0][rng.gen_range(0..3)],
                score_margin: [4.0, 30.0][rng.gen_range(0..2)],
                ..BeamParams::default()
            };
            let pruned = prune(
                &lp.view(),
                params.min_cell_prob,
                params.max_cells_per_frame,
                params.blank_skip,
            )
            .unwrap();
            let merge = rng.gen_bool(0.7);
            let fast = search(&pruned, NoReader, &params, false, false);
            let plain = search_reference(&pruned, NoReader, &params, false, false);
            assert!(same(&fast, &plain), "case {case}, cells only, {params:?}");
            let fast = search(&pruned, table.reader(), &params, merge, true);
            let plain = search_reference(&pruned, table.reader(), &params, merge, true);
            assert!(
                same(&fast, &plain),
                "case {case}, with reader, merge {merge}, {params:?}"
            );
        }
    }
}
