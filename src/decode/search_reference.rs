//! The plain prefix beam search, kept as the reference that the fast
//! search of `search.rs` must reproduce exactly (same hypotheses, same
//! order, same scores): the tests there compare the two on seeded random
//! inputs. Test-only code.

use super::frames::Pruned;
use super::search::{BeamParams, Found, FxMap};
use super::CodeReader;
use crate::Cell;
use std::collections::HashMap;
use std::hash::Hash;

const NO_CELL: u8 = u8::MAX;
const ROOT: u32 = 0;

/// A prefix tree: node `i` is `(parent, label)`; node 0 is the empty prefix.
struct Trie<T: Hash + Eq + Clone> {
    nodes: Vec<(u32, T)>,
    index: FxMap<(u32, T), u32>,
}

impl<T: Hash + Eq + Clone> Trie<T> {
    fn new(root_label: T) -> Self {
        Trie {
            nodes: vec![(ROOT, root_label)],
            index: FxMap::default(),
        }
    }
    fn child(&mut self, parent: u32, label: T) -> u32 {
        let key = (parent, label);
        if let Some(&id) = self.index.get(&key) {
            return id;
        }
        let id = self.nodes.len() as u32;
        self.nodes.push(key.clone());
        self.index.insert(key, id);
        id
    }
    /// Labels from the root to `node`, root excluded.
    fn path(&self, mut node: u32) -> Vec<T> {
        let mut out = Vec::new();
        while node != ROOT {
            let (parent, label) = &self.nodes[node as usize];
            out.push(label.clone());
            node = *parent;
        }
        out.reverse();
        out
    }
}

#[derive(Clone, Copy)]
struct Hyp {
    cnode: u32,
    last: u8,
    pb: f64,
    pnb: f64,
}

impl Hyp {
    fn total(&self) -> f64 {
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

/// Run the prefix beam search over pruned frames, starting from `reader`.
/// With `merge`, hypotheses of equal text, state and last cell merge during
/// the search; with `by_text`, the final hypotheses are grouped by text
/// (their probabilities add). Results are sorted by decreasing score: every
/// hypothesis of the final beam.
///
/// Within a frame hypotheses are keyed by their cell sequence (a node of a
/// prefix tree of cells). The reader is run only for the hypotheses that
/// survive a first cut to twice the beam width, once per tree node (the
/// reader after a cell path depends only on the path); then hypotheses of
/// equal text, state and last cell merge and the beam is cut to its width.
pub(crate) fn search_reference<R: CodeReader>(
    frames: &Pruned,
    reader: R,
    params: &BeamParams,
    merge: bool,
    by_text: bool,
) -> Vec<Found> {
    let mut cells: Trie<u8> = Trie::new(NO_CELL);
    let mut texts: Trie<String> = Trie::new(String::new());
    // Text node and reader after each cell-tree node, once computed; the
    // root's is the initial reader.
    let mut after: Vec<Option<(u32, R)>> = vec![Some((ROOT, reader))];
    let mut beam: Vec<Hyp> = vec![Hyp {
        cnode: ROOT,
        last: NO_CELL,
        pb: 1.0,
        pnb: 0.0,
    }];
    let mut log_scale = 0f64;
    let floor = (-params.score_margin).exp();
    let mut next: Vec<Hyp> = Vec::new();
    let mut index: FxMap<u32, usize> = FxMap::default();
    let mut by_key: FxMap<(u32, R::State, u8), usize> = FxMap::default();
    let mut merged: Vec<Hyp> = Vec::new();

    for t in 0..frames.n_frames() {
        let blank = frames.blank[t];
        let (cands, probs) = frames.candidates(t);
        if cands.is_empty() {
            // A frame that tries no extension (blank above `blank_skip`):
            // every prefix only stays, so the set of hypotheses is unchanged
            // and needs no hashing, merging or cutting.
            let mut max = 0f64;
            for h in beam.iter_mut() {
                let total = h.total();
                h.pnb = if h.last == NO_CELL {
                    0.0
                } else {
                    h.pnb * frames.p(t, h.last)
                };
                h.pb = total * blank;
                max = max.max(h.total());
            }
            if !(max > 0.0 && max.is_finite()) {
                return Vec::new();
            }
            log_scale += max.ln();
            let inv = 1.0 / max;
            for h in beam.iter_mut() {
                h.pb *= inv;
                h.pnb *= inv;
            }
            beam.retain(|h| h.total() >= floor);
            continue;
        }
        next.clear();
        index.clear();
        let mut add = |next: &mut Vec<Hyp>, cnode: u32, last: u8, pb: f64, pnb: f64| match index
            .get(&cnode)
        {
            Some(&i) => {
                next[i].pb += pb;
                next[i].pnb += pnb;
            }
            None => {
                index.insert(cnode, next.len());
                next.push(Hyp {
                    cnode,
                    last,
                    pb,
                    pnb,
                });
            }
        };
        for h in &beam {
            let total = h.total();
            for (&c, &p) in cands.iter().zip(probs) {
                let pnb = if c == h.last { h.pb * p } else { total * p };
                if pnb > 0.0 {
                    let cnode = cells.child(h.cnode, c);
                    add(&mut next, cnode, c, 0.0, pnb);
                }
            }
            // The prefix itself: a blank, or its last cell held.
            let pb = total * blank;
            let pnb = if h.last == NO_CELL {
                0.0
            } else {
                h.pnb * frames.p(t, h.last)
            };
            if pb + pnb > 0.0 {
                add(&mut next, h.cnode, h.last, pb, pnb);
            }
        }
        let max = next.iter().map(Hyp::total).fold(0.0, f64::max);
        if !(max > 0.0 && max.is_finite()) {
            // Every hypothesis died (only possible with degenerate settings):
            // report nothing rather than invent a reading.
            return Vec::new();
        }
        log_scale += max.ln();
        let inv = 1.0 / max;
        for h in next.iter_mut() {
            h.pb *= inv;
            h.pnb *= inv;
        }
        next.retain(|h| h.total() >= floor);
        keep_top(&mut next, 2 * params.beam_width);
        // Only extensions into tree nodes that were not in the beam can
        // change the set of texts; otherwise the beam was merged already.
        let extended = next
            .iter()
            .any(|h| !beam.iter().any(|b| b.cnode == h.cnode));
        if !extended {
            keep_top(&mut next, params.beam_width);
            std::mem::swap(&mut beam, &mut next);
            continue;
        }
        // Run the reader on the new tree nodes among the survivors.
        for h in &next {
            let node = h.cnode as usize;
            if after.len() <= node {
                after.resize_with(node + 1, || None);
            }
            if after[node].is_none() {
                let (parent, c) = cells.nodes[node];
                let Some((ptext, preader)) = &after[parent as usize] else {
                    continue;
                };
                let mut r = preader.clone();
                let piece = r.push(Cell::from_mask(c));
                let tnode = if piece.is_empty() {
                    *ptext
                } else {
                    texts.child(*ptext, piece)
                };
                after[node] = Some((tnode, r));
            }
        }
        if merge {
            by_key.clear();
            merged.clear();
            for h in &next {
                let Some((tnode, r)) = &after[h.cnode as usize] else {
                    continue;
                };
                match by_key.entry((*tnode, r.state(), h.last)) {
                    std::collections::hash_map::Entry::Occupied(e) => {
                        let m: &mut Hyp = &mut merged[*e.get()];
                        if h.total() > m.total() {
                            // Report the dominant cell path.
                            m.cnode = h.cnode;
                        }
                        m.pb += h.pb;
                        m.pnb += h.pnb;
                    }
                    std::collections::hash_map::Entry::Vacant(e) => {
                        e.insert(merged.len());
                        merged.push(*h);
                    }
                }
            }
            std::mem::swap(&mut next, &mut merged);
        }
        keep_top(&mut next, params.beam_width);
        std::mem::swap(&mut beam, &mut next);
    }

    let mut found: Vec<(Found, f64)> = Vec::with_capacity(beam.len());
    for h in &beam {
        let p = h.total();
        let Some((tnode, r)) = &after[h.cnode as usize] else {
            continue;
        };
        let mut text: String = texts.path(*tnode).concat();
        text.push_str(&r.clone().finish());
        let cells = cells
            .path(h.cnode)
            .into_iter()
            .map(Cell::from_mask)
            .collect();
        found.push((
            Found {
                cells,
                text,
                log_score: p.ln() + log_scale,
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
            f.log_score = p.ln() + log_scale;
        }
        found = merged;
    }
    found.sort_by(|a, b| b.1.total_cmp(&a.1).then_with(|| a.0.cells.cmp(&b.0.cells)));
    found.into_iter().map(|(f, _)| f).collect()
}
