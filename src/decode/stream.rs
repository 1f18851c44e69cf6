//! Streaming decoding: the CTC prefix beam search of [`super::search`] run
//! one frame at a time, words committed as soon as they are final, and
//! each committed word rescored with the lexicon on its own frames.
//!
//! The search step is the offline search's own step ([`BeamSearch`] in
//! `search.rs`: Graves 2012, section 7.5; Hannun et al. 2014, algorithm 1), with the
//! braille code's reader inside every hypothesis and the same merging of
//! hypotheses of equal text, reader state and last cell, so that a stream
//! reads what [`Decoder::decode`] reads on the whole recording (see
//! "How close to offline" below).
//!
//! ## When a word is final (the commit rule)
//!
//! 1. **Agreement** (the normal rule): after each frame, when every live
//!    hypothesis of the beam within [`StreamParams::agree_margin`] nats of
//!    the leading one (default 10) shares the same prefix of cells up to and
//!    including a space cell (the empty cell, the word space of braille;
//!    common practice), the words of that prefix are final. The hypotheses
//!    further below are dropped: together they hold less than
//!    `beam_width * e^-10` (about 7e-4 at beam 16) of the beam's
//!    probability, and to overtake the leader later they would need the
//!    frames after the space to favour them by that margin, although both
//!    go on with the same frames. (With a margin of infinity the rule waits
//!    for the whole beam, which on real output takes hundreds of frames:
//!    readings 20-30 nats below the leader linger while the beam has room.)
//! 2. **Held long enough** (the rule that usually fires on real network
//!    output): when the leading hypothesis has kept the same first space
//!    cell after the last commit for [`StreamParams::hold_frames`] network
//!    frames (default 24, two cells at the default 0.5 mm grid), its prefix
//!    up to that space is committed and the hypotheses that read otherwise
//!    are dropped. Rule 1 alone is not enough: the space pattern (no dot
//!    raised) competes with the blank at every gap, so readings with one
//!    spurious or missing space some 5-10 nats below the leader linger for
//!    the rest of the stream.
//! 3. **Too long without a space** (a bound): when no space cell has been
//!    committed for [`StreamParams::max_frames`] network frames (default
//!    4096, about 2 m of braille at 0.5 mm), the leading hypothesis's cells
//!    are emitted as a word piece without rescoring, and only that
//!    hypothesis is kept.
//!
//! ## Bounded memory
//!
//! A commit drops the frames before the committed space cell (the space's
//! own frames stay: the next word's span starts after them), and rebuilds
//! the search's prefix trees from the surviving hypotheses only. What is
//! held is therefore the frames since the last committed space plus the
//! beam, whatever the length of the stream: at most
//! [`StreamParams::max_frames`] frames of 65 probabilities.
//!
//! ## Rescoring a committed word
//!
//! At a commit, the CTC forward-backward posteriors (Graves et al. 2006,
//! equation 14) of the leading hypothesis's cells over the held frames give
//! each cell's frames, and the lexicon's rescoring
//! ([`crate::lexicon::rescore`]) scores the committed words on the frames of
//! their spans exactly as it does offline. The chosen words' cells are read
//! by one code reader running over the whole stream, so indicators work
//! across commits.
//!
//! ## How close to offline
//!
//! Without fallback commits (rules 2 and 3), the beam's reading is exactly
//! the offline one. With a lexicon, the word spans come from posteriors over
//! the held frames rather than over the whole recording; near a committed
//! word they agree to the frame in practice, so the chosen words are the
//! same unless two candidates score within a hair of each other. Words are
//! emitted one at a time: the stream's words joined by single spaces are
//! the offline text with runs of spaces collapsed.

use super::align;
use super::frames::{self, Pruned};
use super::search::{BeamSearch, CellNode, CellTree, Hyp, ROOT};
use super::{evidence, BrailleCode, CodeReader, Decoder, Reading};
use crate::{Cell, Error, Result};
use ndarray::ArrayView1;

/// Settings of the commit rule (module docs).
#[derive(Debug, Clone, PartialEq)]
pub struct StreamParams {
    /// Hypotheses more than this many nats below the leading one do not
    /// hold a commit back (and are dropped by it). Default 10.
    pub agree_margin: f64,
    /// The leading hypothesis's first space cell is committed once it has
    /// stayed the leader's for this many network frames, even if the beam
    /// disagrees. Default 24.
    pub hold_frames: usize,
    /// At most this many network frames are held without a committed space
    /// cell; the leading hypothesis is then emitted as a word piece.
    /// Default 4096.
    pub max_frames: usize,
}

impl Default for StreamParams {
    fn default() -> Self {
        StreamParams {
            agree_margin: 10.0,
            hold_frames: 24,
            max_frames: 4096,
        }
    }
}

impl StreamParams {
    /// Refuse a margin that is not positive, a zero hold, or a bound below
    /// the hold.
    pub fn check(&self) -> Result<()> {
        if self.agree_margin.is_nan() || self.agree_margin <= 0.0 {
            return Err(Error::config(
                "stream agreement margin",
                format!(
                    "{} must be a positive number of nats (default 10)",
                    self.agree_margin
                ),
            ));
        }
        if self.hold_frames == 0 || self.max_frames < self.hold_frames {
            return Err(Error::config(
                "stream commit settings",
                format!(
                    "hold {} and bound {} frames: the hold must be at least 1 and the bound at \
                     least the hold (defaults 24 and 4096)",
                    self.hold_frames, self.max_frames
                ),
            ));
        }
        Ok(())
    }
}

/// Which rule committed a word (module docs).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum CommitRule {
    /// Every live hypothesis agreed up to a space after it.
    Agreement,
    /// The leading hypothesis had held the space long enough.
    Held,
    /// Too many frames without a space: a word piece.
    Bound,
    /// End of the stream.
    End,
}

/// One word of a stream, final.
#[derive(Debug, Clone, PartialEq)]
pub struct StreamWord {
    /// The word's text (after rescoring when the decoder has a lexicon),
    /// without the space after it.
    pub text: String,
    /// The word as the beam read it.
    pub raw: String,
    /// Network frames of the word's span, counted from the start of the
    /// stream, end exclusive.
    pub frames: (u64, u64),
    /// The rule that made it final.
    pub rule: CommitRule,
}

/// The incremental search: the offline search's state ([`BeamSearch`],
/// stepped the same way) and where the last commit cut it. Node ids are
/// those of the trees, whose nodes before the last commit stay until the
/// next compaction.
struct Search<R: CodeReader> {
    core: BeamSearch<R>,
    /// The cell node after the last commit, and its text node.
    root: u32,
    root_text: u32,
}

/// The trees are rebuilt from the live hypotheses (dropping every node of
/// committed or abandoned prefixes) when they grow past this many cell
/// nodes (1 MB of nodes, plus a code reader for each), reached every few
/// hundred frames.
const COMPACT_NODES: usize = 1 << 15;

impl<R: CodeReader> Search<R> {
    fn new(reader: R, score_margin: f64) -> Self {
        Search {
            core: BeamSearch::new(reader, score_margin),
            root: ROOT,
            root_text: ROOT,
        }
    }

    fn node(&self, id: u32) -> &CellNode {
        &self.core.cells.nodes[id as usize]
    }

    /// The most probable hypothesis of the beam.
    fn leader(&self) -> Option<Hyp> {
        self.core
            .beam
            .iter()
            .copied()
            .max_by(|a, b| a.total().total_cmp(&b.total()))
    }

    fn ancestor_at(&self, mut node: u32, depth: u32) -> u32 {
        while self.node(node).depth > depth {
            node = self.node(node).parent;
        }
        node
    }

    fn common_ancestor(&self, a: u32, b: u32) -> u32 {
        let (da, db) = (self.node(a).depth, self.node(b).depth);
        let (mut a, mut b) = (self.ancestor_at(a, db), self.ancestor_at(b, da));
        while a != b {
            a = self.node(a).parent;
            b = self.node(b).parent;
        }
        a
    }

    /// Rule 1: the deepest space node that every hypothesis within
    /// `margin` (a probability ratio) of the leader descends from.
    fn agreed_space(&self, margin: f64) -> Option<u32> {
        let lead = self.leader()?;
        let root_depth = self.node(self.root).depth;
        if self.node(lead.cnode).space_depth <= root_depth {
            return None;
        }
        let floor = lead.total() * margin;
        let mut common = lead.cnode;
        for h in self.core.beam.iter().filter(|h| h.total() >= floor) {
            common = self.common_ancestor(common, h.cnode);
            if self.node(common).space_depth <= root_depth {
                return None;
            }
        }
        Some(self.ancestor_at(common, self.node(common).space_depth))
    }

    /// Rule 2: the first space node on the path to `node`.
    fn first_space(&self, mut node: u32) -> Option<u32> {
        let mut first = None;
        let root_depth = self.node(self.root).depth;
        while node != self.root {
            let n = *self.node(node);
            if n.mask == 0 {
                first = Some(node);
            }
            if n.space_depth <= root_depth {
                break;
            }
            node = n.parent;
        }
        first
    }

    /// Cells from the root to `node`.
    fn path(&self, node: u32) -> Vec<Cell> {
        self.core.cells.path(node, self.root)
    }

    fn descends(&self, mut node: u32, from: u32) -> bool {
        let d = self.node(from).depth;
        while self.node(node).depth > d {
            node = self.node(node).parent;
        }
        node == from
    }

    /// Make `node` the new root: drop the hypotheses that do not descend
    /// from it (and all but the leader when `only_leader`); rebuild the
    /// trees from the survivors when they have grown large.
    fn rebase(&mut self, node: u32, only_leader: bool) {
        let lead = self.leader().map(|h| h.cnode);
        let mut beam = std::mem::take(&mut self.core.beam);
        beam.retain(|h| {
            if only_leader {
                Some(h.cnode) == lead
            } else {
                self.descends(h.cnode, node)
            }
        });
        self.core.beam = beam;
        let Some(Some((tnode, _))) = self.core.after.get(node as usize) else {
            // Cannot happen (every beam node's reader is computed); end the
            // search rather than read on from a wrong state.
            self.core.dead = true;
            self.core.beam.clear();
            return;
        };
        self.root_text = *tnode;
        self.root = node;
        if self.core.cells.nodes.len() > COMPACT_NODES {
            self.compact();
        }
    }

    /// Rebuild the trees from the root and the live hypotheses only.
    fn compact(&mut self) {
        let node = self.root;
        let Some(Some((_, reader))) = self.core.after.get(node as usize).cloned() else {
            self.core.dead = true;
            self.core.beam.clear();
            return;
        };
        let old = std::mem::replace(&mut self.core.cells, CellTree { nodes: Vec::new() });
        self.core.clear_trees(reader, old.nodes[node as usize].born);
        self.root = ROOT;
        self.root_text = ROOT;
        let mut beam = std::mem::take(&mut self.core.beam);
        let mut path = Vec::new();
        for h in beam.iter_mut() {
            path.clear();
            let mut n = h.cnode;
            while n != node {
                path.push(n);
                n = old.nodes[n as usize].parent;
            }
            let mut cur = ROOT;
            for &o in path.iter().rev() {
                let on = old.nodes[o as usize];
                cur = self.core.cells.child(cur, on.mask, on.born);
                self.core.ensure_after(cur);
            }
            h.cnode = cur;
        }
        self.core.beam = beam;
    }

    /// The final best hypothesis's cells, grouped by text as offline
    /// (`by_text`): the text's probability is the sum over its hypotheses.
    fn best_final(&self) -> Vec<Cell> {
        let mut groups: Vec<(String, f64, u32)> = Vec::new();
        let mut order: Vec<Hyp> = self.core.beam.clone();
        order.sort_by(|a, b| b.total().total_cmp(&a.total()));
        for h in &order {
            let Some((tnode, r)) = &self.core.after[h.cnode as usize] else {
                continue;
            };
            let mut text = self.text_of(*tnode);
            text.push_str(&r.clone().finish());
            match groups.iter_mut().find(|g| g.0 == text) {
                Some(g) => g.1 += h.total(),
                None => groups.push((text, h.total(), h.cnode)),
            }
        }
        let mut best: Option<(f64, Vec<Cell>)> = None;
        for (_, p, node) in groups {
            let cells = self.path(node);
            let better = match &best {
                None => true,
                Some((bp, bc)) => p > *bp || (p == *bp && cells < *bc),
            };
            if better {
                best = Some((p, cells));
            }
        }
        best.map(|b| b.1).unwrap_or_default()
    }

    /// The text from the root's text node to `tnode`.
    fn text_of(&self, tnode: u32) -> String {
        self.core.texts.text(tnode, self.root_text)
    }
}

/// Append one checked and pruned frame to `window` (stream frame `t`).
fn push_row(window: &mut Pruned, row: &[f32], p: &super::BeamParams, t: u64) -> Result<()> {
    frames::push_frame(
        window,
        t as usize,
        &ArrayView1::from(row),
        p.min_cell_prob,
        p.max_cells_per_frame,
        p.blank_skip,
    )
}

/// Streaming word decoder over log-probability frames: feed it the
/// network's `[65]` rows one at a time with [`WordStream::push`], take the
/// words it commits, and call [`WordStream::finish`] at the end. The
/// commit rule, the memory bound and how close the words come to offline
/// decoding are described on [`StreamParams`] and in the source's module
/// docs (`src/decode/stream.rs`).
///
/// ```
/// use tactread::braille::CodeTable;
/// use tactread::decode::{BeamParams, Decoder, WordStream};
/// use tactread::Cell;
/// let en = CodeTable::builtin("en")?;
/// let decoder = Decoder::new(&en, BeamParams::default())?;
/// let mut stream = WordStream::new(&decoder, Default::default())?;
/// // Frames that clearly read `a` (dots 1), a space, `b` (dots 1-2).
/// let frame = |class: usize| {
///     let mut row = vec![(1e-4f32 / 64.0).ln(); 65];
///     row[class] = (1.0f32 - 1e-4).ln();
///     row
/// };
/// let mut words = Vec::new();
/// for class in [1, 64, 0, 64, 3, 64] {
///     stream.push(&frame(class), &mut words)?;
/// }
/// assert_eq!(words.len(), 1); // `a` is final once the space is agreed
/// assert_eq!(words[0].text, "a");
/// stream.finish(&mut words)?;
/// assert_eq!(words[1].text, "b");
/// # Ok::<(), tactread::Error>(())
/// ```
pub struct WordStream<'d, 'a, C: BrailleCode> {
    params: StreamParams,
    beam: super::BeamParams,
    search: Search<C::Reader<'a>>,
    /// Frames since the last committed space (that space's frames first).
    window: Pruned,
    /// Stream frame of `window`'s first frame.
    window_start: u64,
    /// Frames pushed so far.
    now: u64,
    /// The committed space cell at the start of the window, if any.
    carry: bool,
    /// `e^-agree_margin`.
    agree_ratio: f64,
    /// The leader's first space node and the frame since which it has been.
    candidate: Option<(u32, u64)>,
    /// The frame since which the last committed space had been the leader's.
    last_since: u64,
    /// Commits not yet rescored and emitted.
    jobs: Vec<CommitJob>,
    /// Rescores and emits the commits of [`WordStream::push`].
    finisher: WordFinisher<'d, 'a, C>,
}

impl<'d, 'a, C: BrailleCode> std::fmt::Debug for WordStream<'d, 'a, C> {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("WordStream")
            .field("frames", &self.now)
            .field("held", &self.window.blank.len())
            .finish()
    }
}

/// The words of one commit with the frames they were read from, ready to be
/// rescored and emitted by a [`WordFinisher`] (on this thread or another:
/// see [`WordStream::step`]).
#[derive(Debug, Clone)]
pub struct CommitJob {
    /// The frames of the committed cells (from the carried space on).
    frames: Pruned,
    /// Stream frame of `frames`' first frame.
    start: u64,
    /// The committed cells, the carried space first when `carry`.
    cells: Vec<Cell>,
    carry: bool,
    /// Cells aligned with `frames` (the final space of a commit is not:
    /// its frames stay for the next word).
    aligned: usize,
    rule: CommitRule,
}

/// Rescores committed words with the decoder's lexicon and reads them with
/// one code reader over the whole stream (so indicators work across
/// commits). Jobs must be run in the order they were made.
pub struct WordFinisher<'d, 'a, C: BrailleCode> {
    decoder: &'d Decoder<'a, C>,
    /// The reader over everything emitted.
    out_reader: C::Reader<'a>,
    /// Text the output reader gave that belongs to no word yet.
    pending_text: String,
}

impl<'d, 'a, C: BrailleCode> std::fmt::Debug for WordFinisher<'d, 'a, C> {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("WordFinisher").finish()
    }
}

impl<'d, 'a, C: BrailleCode> WordStream<'d, 'a, C> {
    /// A stream reading with `decoder` (its code, beam settings and
    /// lexicon) and the commit settings `params`.
    pub fn new(decoder: &'d Decoder<'a, C>, params: StreamParams) -> Result<Self> {
        params.check()?;
        let code: &'a C = decoder.code;
        Ok(WordStream {
            beam: decoder.beam.clone(),
            search: Search::new(code.reader(), decoder.beam.score_margin),
            window: empty_window(),
            window_start: 0,
            now: 0,
            carry: false,
            agree_ratio: (-params.agree_margin).exp(),
            candidate: None,
            last_since: 0,
            jobs: Vec::new(),
            finisher: WordFinisher::new(decoder),
            params,
        })
    }

    /// Frames pushed so far.
    pub fn frames_seen(&self) -> u64 {
        self.now
    }

    /// Frames held now (since the last committed space): what memory
    /// grows with.
    pub fn frames_held(&self) -> usize {
        self.window.blank.len()
    }

    /// Push one frame of natural-log probabilities, `[65]` (64 patterns
    /// then the blank), appending the words it makes final to `out`.
    pub fn push(&mut self, log_probs: &[f32], out: &mut Vec<StreamWord>) -> Result<()> {
        self.step(log_probs)?;
        for job in self.jobs.drain(..) {
            self.finisher.run(job, out);
        }
        Ok(())
    }

    /// The search part of [`Self::push`]: one frame, and the commits it
    /// makes queued as jobs (see [`Self::take_jobs`]) instead of rescored
    /// here, so that a [`WordFinisher`] on another thread can do that work
    /// while this one reads on.
    pub fn step(&mut self, log_probs: &[f32]) -> Result<()> {
        push_row(&mut self.window, log_probs, &self.beam, self.now)?;
        let t = self.window.blank.len() - 1;
        self.search.core.step(
            &self.window,
            t,
            self.now,
            self.beam.beam_width,
            self.beam.merge_equal_text,
        );
        self.now += 1;
        // Several words may be final at once (after a commit, the next
        // space may have been held long enough already).
        let mut just_committed = false;
        loop {
            if let Some(node) = self.search.agreed_space(self.agree_ratio) {
                self.commit(node, false, CommitRule::Agreement);
                just_committed = true;
                continue;
            }
            let first = self
                .search
                .leader()
                .and_then(|l| self.search.first_space(l.cnode));
            let Some(n) = first else {
                self.candidate = None;
                break;
            };
            let since = match self.candidate {
                Some((c, since)) if c == n => since,
                // Right after a commit the leader's next space has been the
                // leader's since at least its birth (and since the committed
                // one was stable).
                _ if just_committed => self.search.node(n).born.max(self.last_since),
                _ => self.now,
            };
            self.candidate = Some((n, since));
            if self.now - since >= self.params.hold_frames as u64 {
                self.last_since = since;
                self.commit(n, false, CommitRule::Held);
                just_committed = true;
                continue;
            }
            break;
        }
        if self.window.blank.len() > self.params.max_frames {
            if let Some(lead) = self.search.leader() {
                self.commit(lead.cnode, true, CommitRule::Bound);
            }
        }
        if self.search.core.cells.nodes.len() > 4 * COMPACT_NODES {
            // A long stretch without commits: drop abandoned prefixes.
            self.search.compact();
            self.candidate = None;
        }
        Ok(())
    }

    /// The commits made by [`Self::step`] since the last call, in order.
    pub fn take_jobs(&mut self) -> std::vec::Drain<'_, CommitJob> {
        self.jobs.drain(..)
    }

    /// The leading hypothesis's text since the last committed word (a
    /// running partial reading; it may still change).
    pub fn partial(&self) -> String {
        let Some(lead) = self.search.leader() else {
            return String::new();
        };
        match &self.search.core.after[lead.cnode as usize] {
            Some((tnode, _)) => self.search.text_of(*tnode),
            None => String::new(),
        }
    }

    /// End of the stream: append the remaining words to `out`.
    pub fn finish(mut self, out: &mut Vec<StreamWord>) -> Result<()> {
        // `self` goes into `finish_jobs`; the finisher (with the output
        // reader's state) is kept.
        let decoder = self.finisher.decoder;
        let mut finisher = std::mem::replace(&mut self.finisher, WordFinisher::new(decoder));
        for job in self.finish_jobs() {
            finisher.run(job, out);
        }
        Ok(())
    }

    /// End of the stream for [`Self::step`] users: the queued jobs and the
    /// last one (the rest of the best reading), in order.
    pub fn finish_jobs(mut self) -> Vec<CommitJob> {
        let rel = self.search.best_final();
        let mut cells = Vec::with_capacity(rel.len() + 1);
        if self.carry {
            cells.push(Cell::EMPTY);
        }
        cells.extend_from_slice(&rel);
        let aligned = cells.len();
        let frames = std::mem::replace(&mut self.window, empty_window());
        let mut jobs = std::mem::take(&mut self.jobs);
        jobs.push(CommitJob {
            frames,
            start: self.window_start,
            cells,
            carry: self.carry,
            aligned,
            rule: CommitRule::End,
        });
        jobs
    }

    /// Commit the prefix up to `node` (a space node unless `rule` is
    /// [`CommitRule::Bound`]): queue its job, keep only the frames from the
    /// space's first frame on, and make `node` the search's root.
    fn commit(&mut self, node: u32, only_leader: bool, rule: CommitRule) {
        let mut cells = Vec::new();
        if self.carry {
            cells.push(Cell::EMPTY);
        }
        cells.extend(self.search.path(node));
        let job = if rule == CommitRule::Bound {
            let aligned = cells.len();
            let frames = std::mem::replace(&mut self.window, empty_window());
            let n = frames.blank.len() as u64;
            let job = CommitJob {
                frames,
                start: self.window_start,
                cells,
                carry: self.carry,
                aligned,
                rule,
            };
            self.window_start += n;
            self.carry = false;
            job
        } else {
            // The space's frames start where its tree node appeared.
            let born = self.search.node(node).born;
            let cut =
                (born.saturating_sub(self.window_start) as usize).min(self.window.blank.len());
            let frames = split_front(&mut self.window, cut);
            let job = CommitJob {
                frames,
                start: self.window_start,
                aligned: cells.len() - 1,
                cells,
                carry: self.carry,
                rule,
            };
            self.window_start += cut as u64;
            self.carry = true;
            job
        };
        self.jobs.push(job);
        self.search.rebase(node, only_leader);
        self.candidate = None;
    }
}

impl<'d, 'a, C: BrailleCode> WordFinisher<'d, 'a, C> {
    /// A finisher for the words of a stream read with `decoder`.
    pub fn new(decoder: &'d Decoder<'a, C>) -> Self {
        let code: &'a C = decoder.code;
        WordFinisher {
            decoder,
            out_reader: code.reader(),
            pending_text: String::new(),
        }
    }

    /// Rescore the words of `job` and append them to `out`.
    pub fn run(&mut self, job: CommitJob, out: &mut Vec<StreamWord>) {
        let code: &'a C = self.decoder.code;
        let cells = &job.cells;
        let aligned = &cells[..job.aligned.min(cells.len())];
        let post = align::posteriors(&job.frames, aligned);
        let ev = post.as_ref().map(|(_, p)| evidence(aligned, p));
        let mut choices = Vec::new();
        if let (Some(ev), Some((lexicon, weights))) = (&ev, &self.decoder.lexicon) {
            if job.rule != CommitRule::Bound {
                let reading = Reading {
                    text: String::new(),
                    hypotheses: Vec::new(),
                    cells: ev.clone(),
                    chars: Vec::new(),
                    confidence: 0.0,
                    log_likelihood: 0.0,
                };
                let r =
                    crate::lexicon::rescore_pruned(&job.frames, &reading, code, lexicon, weights);
                choices = r.words;
            }
        }
        let n_t = job.frames.blank.len();
        let k = cells.len();
        let mut i = usize::from(job.carry);
        while i < k {
            if cells[i] == Cell::EMPTY {
                self.push_cell(cells[i]);
                i += 1;
                continue;
            }
            let s = i;
            while i < k && cells[i] != Cell::EMPTY {
                i += 1;
            }
            // A pair of words that rescoring joined into one covers this
            // word, the space and the next word.
            let choice = choices
                .iter()
                .find(|c| c.cells.0 == s && (c.cells.1 == i || (c.cells.1 > i && c.cells.1 <= k)));
            if let Some(c) = choice {
                i = c.cells.1;
            }
            let raw_cells = &cells[s..i];
            let raw = super::read_cells(code, raw_cells);
            let chosen: Vec<Cell> = match choice {
                Some(c) if c.chosen != c.raw => code
                    .encode(&c.chosen)
                    .unwrap_or_else(|_| raw_cells.to_vec()),
                _ => raw_cells.to_vec(),
            };
            let frames = match (choice, &ev) {
                (Some(c), _) => c.frames,
                (None, Some(ev)) => {
                    let from = if s > 0 { ev[s - 1].frames.1 + 1 } else { 0 };
                    let to = ev.get(i).map_or(n_t, |e| e.frames.0);
                    (from.min(n_t), to.min(n_t).max(from.min(n_t)))
                }
                (None, None) => (0, n_t),
            };
            for &c in &chosen {
                self.push_cell(c);
            }
            if i < k {
                // The space after the word: the reader may release held text.
                self.push_cell(cells[i]);
                i += 1;
            } else if job.rule == CommitRule::End {
                let tail = self.out_reader.clone().finish();
                self.pending_text.push_str(&tail);
                self.out_reader = code.reader();
            }
            let text = std::mem::take(&mut self.pending_text);
            let word = text.trim().to_string();
            if !word.is_empty() {
                out.push(StreamWord {
                    text: word,
                    raw,
                    frames: (job.start + frames.0 as u64, job.start + frames.1 as u64),
                    rule: job.rule,
                });
            }
        }
        if job.rule == CommitRule::End {
            // Text the reader held back until the end.
            let tail = self.out_reader.clone().finish();
            self.pending_text.push_str(&tail);
            let rest = std::mem::take(&mut self.pending_text);
            let end = job.start + n_t as u64;
            match out.last_mut() {
                Some(w)
                    if !rest.trim().is_empty()
                        && !rest.starts_with(' ')
                        && w.rule == CommitRule::End =>
                {
                    w.text.push_str(rest.trim_end())
                }
                _ if !rest.trim().is_empty() => out.push(StreamWord {
                    text: rest.trim().to_string(),
                    raw: String::new(),
                    frames: (end, end),
                    rule: CommitRule::End,
                }),
                _ => {}
            }
        }
    }

    fn push_cell(&mut self, cell: Cell) {
        let piece = self.out_reader.push(cell);
        self.pending_text.push_str(&piece);
    }
}

/// Split off and return the first `k` frames of `window`, which keeps the
/// rest (only the rest is copied).
fn split_front(window: &mut Pruned, k: usize) -> Pruned {
    let k = k.min(window.blank.len());
    let c0 = window.start[k];
    // The front is copied out and the window keeps its buffers, so that it
    // does not grow again from nothing (reallocating and touching fresh
    // pages on the reading thread) after every commit.
    let front = Pruned {
        blank: window.blank[..k].to_vec(),
        start: window.start[..=k].to_vec(),
        class: window.class[..c0].to_vec(),
        prob: window.prob[..c0].to_vec(),
        all: window.all[..k * 64].to_vec(),
    };
    window.blank.drain(..k);
    window.class.drain(..c0);
    window.prob.drain(..c0);
    window.all.drain(..k * 64);
    window.start.drain(..k);
    for s in window.start.iter_mut() {
        *s -= c0;
    }
    front
}

fn empty_window() -> Pruned {
    Pruned {
        blank: Vec::new(),
        start: vec![0],
        class: Vec::new(),
        prob: Vec::new(),
        all: Vec::new(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::braille::CodeTable;
    use crate::decode::{BeamParams, BLANK, N_CLASSES};
    use crate::lexicon::{Lexicon, RescoreWeights};
    use ndarray::Array2;
    use rand::{Rng, SeedableRng};
    use rand_chacha::ChaCha8Rng;

    /// Frames for cells read with the given confidence: each cell `hold`
    /// frames, then a blank frame. `(mask, p, alt)`: the cell gets
    /// probability `p` and `alt` (a mask) the rest; 1e-4 floor elsewhere,
    /// renormalised. Frame 0 is blank.
    /// Frames that read `text` in `code` with every cell at 0.97, two
    /// frames a cell.
    fn confident_frames(code: &CodeTable, text: &str) -> Array2<f32> {
        let cells: Vec<(u8, f64, Option<u8>)> = code
            .encode(text)
            .unwrap()
            .into_iter()
            .map(|c| (c.mask(), 0.97, None))
            .collect();
        frames_for(&cells, 2)
    }

    fn frames_for(cells: &[(u8, f64, Option<u8>)], hold: usize) -> Array2<f32> {
        let row = |top: usize, p: f64, alt: Option<u8>| {
            let mut r = vec![1e-4f64; N_CLASSES];
            r[top] = p;
            if let Some(a) = alt {
                r[a as usize] = 1.0 - p;
            }
            let z: f64 = r.iter().sum();
            r.into_iter()
                .map(|x| (x / z).ln() as f32)
                .collect::<Vec<f32>>()
        };
        let mut rows = vec![row(BLANK, 0.99, None)];
        for &(m, p, alt) in cells {
            for _ in 0..hold {
                rows.push(row(m as usize, p, alt));
            }
            rows.push(row(BLANK, 0.99, None));
        }
        let flat: Vec<f32> = rows.concat();
        Array2::from_shape_vec((rows.len(), N_CLASSES), flat).unwrap()
    }

    fn streamed<C: BrailleCode>(
        decoder: &Decoder<'_, C>,
        lp: &Array2<f32>,
        params: StreamParams,
    ) -> (Vec<StreamWord>, usize) {
        let mut s = WordStream::new(decoder, params).unwrap();
        let mut words = Vec::new();
        let mut most_held = 0;
        for row in lp.outer_iter() {
            s.push(row.as_slice().unwrap(), &mut words).unwrap();
            most_held = most_held.max(s.frames_held());
        }
        s.finish(&mut words).unwrap();
        (words, most_held)
    }

    fn joined(words: &[StreamWord]) -> String {
        words
            .iter()
            .map(|w| w.text.as_str())
            .collect::<Vec<_>>()
            .join(" ")
    }

    fn collapse(text: &str) -> String {
        text.split_whitespace().collect::<Vec<_>>().join(" ")
    }

    fn en() -> CodeTable {
        CodeTable::builtin("en").unwrap()
    }

    /// Random ambiguous readings of `text`: each cell is read with
    /// probability 0.55..0.99, the rest going to a random other pattern.
    fn ambiguous(code: &CodeTable, text: &str, rng: &mut ChaCha8Rng) -> Vec<(u8, f64, Option<u8>)> {
        code.encode(text)
            .unwrap()
            .into_iter()
            .map(|c| {
                let p = rng.gen_range(0.55..0.99);
                (c.mask(), p, Some(rng.gen_range(0..64u8)))
            })
            .collect()
    }

    const TEXTS: [&str; 4] = [
        "the ferry leaves the north quay at 9 and 14",
        "Otters Rest on the Shingle near the Old Boathouse",
        "keep dogs on a lead from april to july",
        "tide tables at the kiosk 42 zog",
    ];

    #[test]
    fn stream_reads_what_the_offline_beam_reads_without_a_lexicon() {
        let table = en();
        let decoder = Decoder::new(&table, BeamParams::default()).unwrap();
        let mut rng = ChaCha8Rng::seed_from_u64(11);
        let (mut early, mut total) = (0, 0);
        for trial in 0..12 {
            let text = TEXTS[trial % TEXTS.len()];
            let lp = frames_for(&ambiguous(&table, text, &mut rng), 1 + trial % 3);
            let offline = decoder.decode(lp.view()).unwrap();
            let (words, _) = streamed(&decoder, &lp, StreamParams::default());
            assert_eq!(joined(&words), collapse(&offline.text), "trial {trial}");
            // Most words are final before the end (an alternative pattern
            // that is the space holds a commit back until it is settled).
            early += words.iter().filter(|w| w.rule != CommitRule::End).count();
            total += words.len();
        }
        assert!(
            2 * early >= total,
            "{early} of {total} words final before the end"
        );
    }

    #[test]
    fn stream_rescores_words_as_the_offline_decoder_does() {
        let table = en();
        let lexicon = Lexicon::builtin("en").unwrap();
        let decoder = Decoder::new(&table, BeamParams::default())
            .unwrap()
            .with_lexicon(&lexicon, RescoreWeights::default())
            .unwrap();
        // The crafted misreadings of tests/decode.rs: `e` for the `a` of
        // "cat", `p` for the `o` of "dog"; "42" and the name "zog" stay.
        let m = |c: char| table.encode(&c.to_string()).unwrap()[0].mask();
        let sure = |t: &str| {
            table
                .encode(t)
                .unwrap()
                .into_iter()
                .map(|c| (c.mask(), 0.98, None))
                .collect::<Vec<_>>()
        };
        let mut cells = sure("the ");
        cells.extend([
            (m('c'), 0.98, None),
            (m('e'), 0.6, Some(m('a'))),
            (m('t'), 0.98, None),
        ]);
        cells.extend(sure(" sat by "));
        cells.extend([
            (m('d'), 0.98, None),
            (m('p'), 0.7, Some(m('o'))),
            (m('g'), 0.98, None),
        ]);
        cells.extend(sure(" 42 zog"));
        let lp = frames_for(&cells, 2);
        let offline = decoder.decode(lp.view()).unwrap();
        assert_eq!(offline.text, "the cat sat by dog 42 zog");
        let (words, _) = streamed(&decoder, &lp, StreamParams::default());
        assert_eq!(joined(&words), "the cat sat by dog 42 zog");
        let cat = words.iter().find(|w| w.text == "cat").unwrap();
        assert_eq!(cat.raw, "cet");
        assert_ne!(cat.rule, CommitRule::End);
        // Random ambiguity: the same text as offline.
        let mut rng = ChaCha8Rng::seed_from_u64(5);
        for trial in 0..8 {
            let text = TEXTS[trial % TEXTS.len()];
            let lp = frames_for(&ambiguous(&table, text, &mut rng), 2);
            let offline = decoder.decode(lp.view()).unwrap();
            let (words, _) = streamed(&decoder, &lp, StreamParams::default());
            assert_eq!(joined(&words), collapse(&offline.text), "trial {trial}");
        }
    }

    /// "Boats 12 at Noon" in UEB: the capital indicator (dot 6) before `B`
    /// and `N`, the numeric indicator (dots 3-4-5-6) before `12`, whose
    /// effect a space ends (ICEB, "The Rules of Unified English Braille",
    /// 2nd ed. 2013, sections 6 and 8; from memory). Each indicator's cell
    /// is read by the output reader in the same commit as what it applies
    /// to, and the state is carried from one commit to the next.
    #[test]
    fn indicators_carry_across_commits_and_the_first_word_is_final_early() {
        let table = en();
        let decoder = Decoder::new(&table, BeamParams::default()).unwrap();
        let lp = confident_frames(&table, "Boats 12 at Noon");
        let mut s = WordStream::new(&decoder, StreamParams::default()).unwrap();
        let mut words = Vec::new();
        let mut first_at = None;
        for (t, row) in lp.outer_iter().enumerate() {
            s.push(row.as_slice().unwrap(), &mut words).unwrap();
            if first_at.is_none() && !words.is_empty() {
                first_at = Some(t);
            }
        }
        // "Boats" (capital, 5 letters, then the space: cell 6, frames
        // 19-21) is final at the latest when the hold (24 frames) has run
        // from the space.
        let first_at = first_at.unwrap();
        assert!(first_at <= 21 + 24, "first word at frame {first_at}");
        s.finish(&mut words).unwrap();
        let texts: Vec<&str> = words.iter().map(|w| w.text.as_str()).collect();
        assert_eq!(texts, ["Boats", "12", "at", "Noon"]);
        // Word spans are in stream frames and in order.
        assert!(words.windows(2).all(|w| w[0].frames.1 <= w[1].frames.0 + 1));
    }

    #[test]
    fn memory_held_does_not_grow_with_the_stream() {
        let table = en();
        let decoder = Decoder::new(&table, BeamParams::default()).unwrap();
        let mut rng = ChaCha8Rng::seed_from_u64(3);
        let short = TEXTS.join(" ");
        let long = vec![short.as_str(); 20].join(" ");
        let (_, held_short) = streamed(
            &decoder,
            &frames_for(&ambiguous(&table, &short, &mut rng), 2),
            StreamParams::default(),
        );
        let (words, held_long) = streamed(
            &decoder,
            &frames_for(&ambiguous(&table, &long, &mut rng), 2),
            StreamParams::default(),
        );
        assert!(words.len() > 600);
        // Held frames depend on the words, not on the stream's length: a
        // stream 20 times longer holds less than twice as many at most.
        assert!(held_long < 2 * held_short, "{held_short} vs {held_long}");
        assert!(held_long <= StreamParams::default().max_frames + 1);
    }

    #[test]
    fn fallback_rules_commit_when_the_beam_never_agrees() {
        let table = en();
        let decoder = Decoder::new(&table, BeamParams::default()).unwrap();
        // No space ever: only the bound can commit, in pieces.
        let a = table.encode("a").unwrap()[0].mask();
        let b = table.encode("b").unwrap()[0].mask();
        let cells: Vec<(u8, f64, Option<u8>)> = (0..200)
            .map(|i| (if i % 2 == 0 { a } else { b }, 0.9, Some(7)))
            .collect();
        let lp = frames_for(&cells, 1);
        let params = StreamParams {
            hold_frames: 16,
            max_frames: 64,
            ..StreamParams::default()
        };
        let (words, held) = streamed(&decoder, &lp, params.clone());
        assert!(held <= 65, "{held}");
        assert!(words.iter().filter(|w| w.rule == CommitRule::Bound).count() >= 5);
        let offline = decoder.decode(lp.view()).unwrap();
        assert_eq!(
            words.iter().map(|w| w.text.as_str()).collect::<String>(),
            offline.text
        );
        // A space that half the beam doubts (0.5 against a letter) is held,
        // then committed by the hold rule.
        let mut cells = Vec::new();
        for _ in 0..40 {
            cells.push((a, 0.95, None));
            cells.push((0, 0.5, Some(b)));
        }
        let lp = frames_for(&cells, 1);
        let (words, held) = streamed(&decoder, &lp, params);
        assert!(held <= 65, "{held}");
        assert!(!words.is_empty());
        assert!(StreamParams {
            hold_frames: 0,
            ..StreamParams::default()
        }
        .check()
        .is_err());
    }

    #[test]
    fn deferred_jobs_give_the_words_of_push() {
        let table = en();
        let lexicon = Lexicon::builtin("en").unwrap();
        let decoder = Decoder::new(&table, BeamParams::default())
            .unwrap()
            .with_lexicon(&lexicon, RescoreWeights::default())
            .unwrap();
        let mut rng = ChaCha8Rng::seed_from_u64(9);
        let lp = frames_for(&ambiguous(&table, &TEXTS.join(" "), &mut rng), 2);
        let (inline, _) = streamed(&decoder, &lp, StreamParams::default());
        let mut s = WordStream::new(&decoder, StreamParams::default()).unwrap();
        let mut jobs = Vec::new();
        for row in lp.outer_iter() {
            s.step(row.as_slice().unwrap()).unwrap();
            jobs.extend(s.take_jobs());
        }
        jobs.extend(s.finish_jobs());
        let mut fin = WordFinisher::new(&decoder);
        let mut words = Vec::new();
        for job in jobs {
            fin.run(job, &mut words);
        }
        assert_eq!(words, inline);
    }

    #[test]
    fn partial_shows_the_word_being_read() {
        let table = en();
        let decoder = Decoder::new(&table, BeamParams::default()).unwrap();
        let lp = confident_frames(&table, "seal colony at the point");
        let params = StreamParams {
            hold_frames: 6,
            ..StreamParams::default()
        };
        let mut s = WordStream::new(&decoder, params).unwrap();
        let mut words = Vec::new();
        let mut partials = Vec::new();
        for row in lp.outer_iter() {
            s.push(row.as_slice().unwrap(), &mut words).unwrap();
            partials.push(s.partial());
        }
        assert!(partials.iter().any(|p| p == "sea"));
        // Once "seal" is final the partial starts after it.
        assert!(
            partials.iter().any(|p| p == "colo" || p == " colo"),
            "{partials:?}"
        );
        assert_eq!(words[0].text, "seal");
        assert!(s.push(&[0.0; 64], &mut words).is_err());
    }
}
