//! Cells to text: the reading state machine ([`CellReader`]) and whole-line
//! decoding ([`CodeTable::decode`]).
//!
//! The reader keeps a small state: the mode (text, number), whether a
//! capital or a capitalised word is pending, whether the next sign starts a
//! word, and up to four cells of a multi-cell sign it has not finished
//! reading. Each pushed cell walks one of the table's tries (text, inside a
//! capitalised word, inside a number); the longest sign that matches is
//! applied (maximal munch), and cells that start no sign are kept as Unicode
//! braille pattern characters and reported as unreadable. The rules are
//! described on [`CodeTable`].

use super::table::{CodeTable, Kind, Role, Trie, MAX_SIGN_CELLS, NONE};
use crate::Cell;

/// The text read from a sequence of cells.
#[derive(Debug, Clone, PartialEq, Eq, Default)]
pub struct Decoded {
    /// The text. Unreadable cells appear in it as their Unicode braille
    /// pattern characters (U+2800 + mask).
    pub text: String,
    /// Indices (into the decoded cells) of the cells that have no reading
    /// where they stand, in increasing order.
    pub unreadable: Vec<usize>,
}

#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
enum Mode {
    Text,
    /// After the numeric indicator, before its first digit.
    NumberStart,
    Number,
    /// After the letter indicator, before its letter.
    LetterSign,
}

#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
enum Caps {
    None,
    /// After the capital indicator, before its letter.
    Letter,
    /// After the capitalised-word indicator, before its first letter.
    WordStart,
    /// Inside a capitalised word.
    Word,
}

/// Everything a [`CellReader`] remembers between cells, as a small `Copy`
/// value. Two readers of the same table in equal states read every further
/// cell the same way, so a beam search may merge hypotheses whose states
/// (and texts) are equal.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub struct ReaderState {
    mode: Mode,
    caps: Caps,
    word_start: bool,
    pending: [u8; MAX_SIGN_CELLS],
    pending_len: u8,
}

impl ReaderState {
    /// Whether the reader is inside a number (after the numeric indicator).
    pub fn is_numeric(&self) -> bool {
        matches!(self.mode, Mode::NumberStart | Mode::Number)
    }

    /// Whether a capital or capitalised-word indicator waits for its first
    /// letter.
    pub fn capital_pending(&self) -> bool {
        matches!(self.caps, Caps::Letter | Caps::WordStart)
    }

    /// Whether the reader is inside a capitalised word.
    pub fn in_capital_word(&self) -> bool {
        matches!(self.caps, Caps::WordStart | Caps::Word)
    }

    /// Number of cells read but not yet turned into text (the start of a
    /// multi-cell sign), 0 to 3.
    pub fn pending_cells(&self) -> usize {
        self.pending_len as usize
    }

    /// Whether an indicator waits for what it applies to, or cells wait to
    /// complete a sign: [`CellReader::finish`] would report them.
    pub fn is_waiting(&self) -> bool {
        self.pending_len > 0
            || self.capital_pending()
            || matches!(self.mode, Mode::NumberStart | Mode::LetterSign)
    }
}

/// Reads cells one at a time into text, tracking the code's indicators.
///
/// Cheap to clone (a reference and a few bytes), so a beam search can keep
/// one per hypothesis. Get one from [`CodeTable::reader`].
///
/// ```
/// use tactread::{Cell, CodeTable};
/// let en = CodeTable::builtin("en")?;
/// let mut r = en.reader();
/// let dots = |d: &[u8]| Cell::from_dots(d).unwrap();
/// assert_eq!(r.push(dots(&[3, 4, 5, 6])), ""); // numeric indicator
/// assert!(r.state().is_numeric());
/// assert_eq!(r.push(dots(&[1])), "1");
/// assert_eq!(r.push(dots(&[6])), ""); // capital indicator: ends the number
/// assert_eq!(r.push(dots(&[1, 2])), "B");
/// assert_eq!(r.finish(), "");
/// # Ok::<(), tactread::Error>(())
/// ```
#[derive(Clone, Debug)]
pub struct CellReader<'a> {
    table: &'a CodeTable,
    state: ReaderState,
    /// Cells pushed so far.
    pos: usize,
    /// The indicator waiting for what it applies to: (index of its first
    /// cell, entry).
    dangling: Option<(usize, u16)>,
}

impl CodeTable {
    /// A reader at the start of a text.
    pub fn reader(&self) -> CellReader<'_> {
        CellReader {
            table: self,
            state: self.start_state(),
            pos: 0,
            dangling: None,
        }
    }

    fn start_state(&self) -> ReaderState {
        ReaderState {
            mode: Mode::Text,
            caps: Caps::None,
            word_start: self.has_opening,
            pending: [0; MAX_SIGN_CELLS],
            pending_len: 0,
        }
    }

    /// Read cells into text with the indicator state machine. Never fails:
    /// cells with no reading where they stand are kept as their Unicode
    /// braille pattern characters and listed in
    /// [`Decoded::unreadable`] (see "Cells it cannot read" on [`CodeTable`]).
    pub fn decode(&self, cells: &[Cell]) -> Decoded {
        let mut reader = self.reader();
        let mut text = String::with_capacity(cells.len());
        let mut unreadable = Vec::new();
        for &c in cells {
            reader.step(c, &mut text, &mut |i| unreadable.push(i));
        }
        reader.end(&mut text, &mut |i| unreadable.push(i));
        Decoded { text, unreadable }
    }

    fn trie_for(&self, st: &ReaderState) -> &Trie {
        match (st.mode, st.caps) {
            (Mode::NumberStart | Mode::Number, _) => &self.num,
            (_, Caps::Word) => &self.word,
            _ => &self.text,
        }
    }
}

impl CellReader<'_> {
    /// Read one more cell; returns the text it completes (often empty for
    /// indicators and for the first cells of a multi-cell sign).
    pub fn push(&mut self, cell: Cell) -> String {
        let mut out = String::new();
        self.push_into(cell, &mut out);
        out
    }

    /// Like [`push`](CellReader::push), appending the text to `out` instead
    /// of allocating. Returns how many cells this push found unreadable
    /// (written into `out` as braille pattern characters).
    pub fn push_into(&mut self, cell: Cell, out: &mut String) -> usize {
        let mut bad = 0;
        self.step(cell, out, &mut |_| bad += 1);
        bad
    }

    /// The current state, for comparing and merging readers.
    pub fn state(&self) -> ReaderState {
        self.state
    }

    /// Number of cells pushed so far.
    pub fn cells_read(&self) -> usize {
        self.pos
    }

    /// End of input: returns the text of any cells still pending (and of an
    /// indicator left with nothing to apply to, as braille pattern
    /// characters). The reader is then back at the start of a text.
    pub fn finish(&mut self) -> String {
        let mut out = String::new();
        self.end(&mut out, &mut |_| {});
        out
    }

    pub(crate) fn step<F: FnMut(usize)>(&mut self, cell: Cell, out: &mut String, bad: &mut F) {
        let len = self.state.pending_len as usize;
        // Invariant: pending cells are a proper prefix of some sign, so
        // shorter than MAX_SIGN_CELLS; the guard keeps bad tables harmless.
        if len >= MAX_SIGN_CELLS {
            self.resolve(true, out, bad);
        }
        let len = self.state.pending_len as usize;
        self.state.pending[len] = cell.mask();
        self.state.pending_len += 1;
        self.pos += 1;
        self.resolve(false, out, bad);
    }

    fn end<F: FnMut(usize)>(&mut self, out: &mut String, bad: &mut F) {
        self.resolve(true, out, bad);
        self.fail(out, bad);
        self.state = self.table.start_state();
    }

    /// Turn pending cells into signs while they can no longer grow into a
    /// longer sign (or always, at the end of input).
    fn resolve<F: FnMut(usize)>(&mut self, at_end: bool, out: &mut String, bad: &mut F) {
        loop {
            let len = self.state.pending_len as usize;
            if len == 0 {
                return;
            }
            let table = self.table;
            let trie = table.trie_for(&self.state);
            let cells = self.state.pending;
            let cells = &cells[..len];
            if !at_end && trie.walk(cells).is_some_and(|n| n.has_next) {
                return; // a longer sign may still come
            }
            let mut taken = 0;
            let mut entry = NONE;
            for k in (1..=len).rev() {
                if let Some(node) = trie.walk(&cells[..k]) {
                    let e = node.pick(self.state.word_start);
                    if e != NONE {
                        taken = k;
                        entry = e;
                        break;
                    }
                }
            }
            let first = self.pos - len;
            if taken == 0 {
                self.fail(out, bad);
                out.push(Cell::from_mask(cells[0]).to_char());
                bad(first);
                taken = 1;
            } else {
                self.apply(entry, first, out, bad);
            }
            let st = &mut self.state;
            st.pending.copy_within(taken..len, 0);
            for c in &mut st.pending[len - taken..] {
                *c = 0;
            }
            st.pending_len = (len - taken) as u8;
        }
    }

    /// The dangling indicator had nothing to apply to: write it out as
    /// unreadable and drop what it started.
    fn fail<F: FnMut(usize)>(&mut self, out: &mut String, bad: &mut F) {
        if let Some((at, e)) = self.dangling.take() {
            self.reject(e, at, out, bad);
        }
        let st = &mut self.state;
        if matches!(st.mode, Mode::NumberStart | Mode::LetterSign) {
            st.mode = Mode::Text;
        }
        if matches!(st.caps, Caps::Letter | Caps::WordStart) {
            st.caps = Caps::None;
        }
    }

    /// Write sign `e` (starting at cell `at`) out as unreadable.
    fn reject<F: FnMut(usize)>(&self, e: u16, at: usize, out: &mut String, bad: &mut F) {
        let seq = self.table.entries[e as usize].seq;
        for (k, &m) in seq.as_slice().iter().enumerate() {
            out.push(Cell::from_mask(m).to_char());
            bad(at + k);
        }
    }

    fn apply<F: FnMut(usize)>(&mut self, e: u16, at: usize, out: &mut String, bad: &mut F) {
        let table = self.table;
        let kind = table.entries[e as usize].kind;
        let track_start = table.has_opening;
        match kind {
            Kind::Space => {
                self.fail(out, bad);
                self.state.mode = Mode::Text;
                self.state.caps = Caps::None;
                self.state.word_start = track_start;
                out.push(' ');
            }
            Kind::Letter { lower, upper } => {
                match self.state.mode {
                    Mode::NumberStart => self.fail(out, bad),
                    Mode::LetterSign => self.dangling = None,
                    Mode::Text | Mode::Number => {}
                }
                self.state.mode = Mode::Text;
                let ch = match (self.state.caps, upper) {
                    (Caps::None, _) => lower,
                    (Caps::Letter, Some(u)) => {
                        self.dangling = None;
                        self.state.caps = Caps::None;
                        u
                    }
                    (Caps::WordStart | Caps::Word, Some(u)) => {
                        self.dangling = None;
                        self.state.caps = Caps::Word;
                        u
                    }
                    (Caps::Word, None) => lower,
                    (Caps::Letter | Caps::WordStart, None) => {
                        self.fail(out, bad);
                        lower
                    }
                };
                self.state.word_start = false;
                out.push(ch);
            }
            Kind::Digit(d) => {
                if self.state.mode == Mode::NumberStart {
                    self.dangling = None;
                } else if self.state.capital_pending() {
                    self.fail(out, bad);
                }
                self.state.mode = Mode::Number;
                self.state.caps = Caps::None;
                self.state.word_start = false;
                out.push(d);
            }
            Kind::Sign {
                ch,
                number,
                opening,
            } => {
                if number && self.state.is_numeric() {
                    // "3.5", and UEB's ".5" (decimal point right after the
                    // numeric indicator).
                    self.dangling = None;
                    self.state.mode = Mode::Number;
                } else {
                    self.fail(out, bad);
                    self.state.mode = Mode::Text;
                }
                if self.state.caps == Caps::Word {
                    self.state.caps = Caps::None;
                }
                self.state.word_start = track_start && opening;
                out.push(ch);
            }
            Kind::Indicator(Role::Numeric) => {
                self.fail(out, bad);
                self.state.caps = Caps::None;
                self.state.mode = Mode::NumberStart;
                self.dangling = Some((at, e));
            }
            Kind::Indicator(role @ (Role::Capital | Role::CapitalWord)) => {
                match self.state.mode {
                    Mode::NumberStart => self.fail(out, bad),
                    Mode::LetterSign => self.dangling = None,
                    Mode::Text | Mode::Number => {}
                }
                // A capital indicator is not a digit: it ends a number.
                self.state.mode = Mode::Text;
                match self.state.caps {
                    Caps::Word => {
                        // Capitals inside a capitalised word mean nothing
                        // more (and nothing is dangling to keep in order).
                        self.reject(e, at, out, bad);
                        return;
                    }
                    // A new indicator before the last one found its letter.
                    Caps::Letter | Caps::WordStart => self.fail(out, bad),
                    Caps::None => {}
                }
                self.state.caps = if role == Role::Capital {
                    Caps::Letter
                } else {
                    Caps::WordStart
                };
                self.dangling = Some((at, e));
            }
            Kind::Indicator(Role::CapitalEnd) => {
                // Only in the capitalised-word trie, so caps is Word.
                self.state.caps = Caps::None;
            }
            Kind::Indicator(Role::Letter) => {
                self.fail(out, bad);
                self.state.mode = Mode::LetterSign;
                self.dangling = Some((at, e));
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::path::Path;

    fn c(d: &[u8]) -> Cell {
        Cell::from_dots(d).unwrap()
    }

    fn toy() -> CodeTable {
        // A small table with a multi-cell sign, a sign sharing a prefix with
        // an indicator only by indicators, and shared opening/plain cells.
        let text = "format tactread-code 1\nlanguage xx\n\
            indicator capital 6\nindicator capital-word 6-6\nindicator capital-end 6-3\n\
            indicator numeric 3456\nindicator letter 56\n\
            letter a 1\nletter b 12\nletter k 13\n\
            digit 1 1\ndigit 2 12\n\
            sign . 256 number\nsign ? 236\nsign “ 236 opening\nsign ' 3\nsign ( 5-126\n";
        CodeTable::parse(text, Path::new("toy.txt")).unwrap()
    }

    #[test]
    fn multi_cell_sign_waits_then_emits() {
        let t = toy();
        let mut r = t.reader();
        assert_eq!(r.push(c(&[5])), "");
        assert_eq!(r.state().pending_cells(), 1);
        assert_eq!(r.push(c(&[1, 2, 6])), "(");
        assert_eq!(r.state().pending_cells(), 0);
        // A lone 5 followed by a letter: 5 is unreadable, the letter reads.
        let d = t.decode(&[c(&[5]), c(&[1])]);
        assert_eq!(d.text, "\u{2810}a");
        assert_eq!(d.unreadable, vec![0]);
    }

    #[test]
    fn states_merge_and_split() {
        let t = toy();
        let mut a = t.reader();
        let mut b = t.reader();
        a.push(c(&[1]));
        b.push(c(&[1, 2]));
        assert_eq!(a.state(), b.state(), "two letters leave the same state");
        b.push(c(&[6]));
        // 6 may still grow into 6-6 (capitalised word): one cell pending.
        assert_ne!(a.state(), b.state());
        assert_eq!(b.state().pending_cells(), 1);
        assert!(b.state().is_waiting());
        assert_eq!(b.push(c(&[1])), "A");
        assert!(!b.state().is_waiting());
    }

    #[test]
    fn capitals_word_and_terminator() {
        let t = toy();
        let cells = [
            c(&[6]),
            c(&[6]),
            c(&[1]),
            c(&[1, 2]),
            c(&[6]),
            c(&[3]),
            c(&[1, 3]),
        ];
        assert_eq!(t.decode(&cells).text, "ABk");
        // Outside a capitalised word, 6-3 is a capital indicator with nothing
        // to apply to, then an apostrophe.
        let d = t.decode(&[c(&[1]), c(&[6]), c(&[3])]);
        assert_eq!(d.text, "a\u{2820}'");
        assert_eq!(d.unreadable, vec![1]);
    }

    #[test]
    fn indicators_left_hanging_are_unreadable() {
        let t = toy();
        let d = t.decode(&[c(&[3, 4, 5, 6]), Cell::EMPTY, c(&[6])]);
        assert_eq!(d.text, "\u{283c} \u{2820}");
        assert_eq!(d.unreadable, vec![0, 2]);
        let mut r = t.reader();
        r.push(c(&[6]));
        assert_eq!(r.finish(), "\u{2820}");
        assert_eq!(r.state(), t.reader().state(), "finish resets the state");
    }

    #[test]
    fn opening_twin_read_at_word_start() {
        let t = toy();
        let q = c(&[2, 3, 6]);
        assert_eq!(t.decode(&[q, c(&[1]), q]).text, "“a?");
        assert_eq!(t.decode(&[c(&[1]), q, Cell::EMPTY, q]).text, "a? “");
    }

    #[test]
    fn push_into_counts_unreadable_cells() {
        let t = toy();
        let mut r = t.reader();
        let mut out = String::new();
        assert_eq!(r.push_into(Cell::from_mask(0xFF), &mut out), 1);
        assert_eq!(out, "\u{28ff}");
        assert_eq!(r.cells_read(), 1);
    }
}
