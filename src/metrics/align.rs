//! Edit-distance alignment of two sequences: the Levenshtein distance with a
//! backtrace that says which items match, which were substituted, and which
//! were inserted or deleted.
//!
//! The algorithm is the dynamic programme of Wagner and Fischer, "The
//! string-to-string correction problem", Journal of the ACM 21(1), 1974,
//! with unit costs for substitution, insertion and deletion. It takes
//! `O(n m)` time and, for the alignment, `O(n m)` memory (one `u32` per
//! pair); [`edit_distance`] needs only two rows.
//!
//! Vocabulary (common practice in speech and text recognition): the
//! *reference* is the ground truth, the *hypothesis* is what was read. An
//! *insertion* is a hypothesis item with no reference counterpart, a
//! *deletion* a reference item the hypothesis lacks.

use serde::{Deserialize, Serialize};

/// One step of an alignment. Indices are 0-based positions in the
/// reference and hypothesis sequences.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum EditOp {
    /// `reference[reference]` equals `hypothesis[hypothesis]`.
    Match {
        /// Position in the reference.
        reference: usize,
        /// Position in the hypothesis.
        hypothesis: usize,
    },
    /// `reference[reference]` was read as the different `hypothesis[hypothesis]`.
    Substitute {
        /// Position in the reference.
        reference: usize,
        /// Position in the hypothesis.
        hypothesis: usize,
    },
    /// `hypothesis[hypothesis]` has no counterpart in the reference.
    Insert {
        /// Position in the hypothesis.
        hypothesis: usize,
    },
    /// `reference[reference]` has no counterpart in the hypothesis.
    Delete {
        /// Position in the reference.
        reference: usize,
    },
}

impl EditOp {
    /// The aligned pair `(reference, hypothesis)` of a match or
    /// substitution, `None` for an insertion or deletion.
    pub fn pair(self) -> Option<(usize, usize)> {
        match self {
            EditOp::Match {
                reference,
                hypothesis,
            }
            | EditOp::Substitute {
                reference,
                hypothesis,
            } => Some((reference, hypothesis)),
            EditOp::Insert { .. } | EditOp::Delete { .. } => None,
        }
    }
}

/// Counts of an alignment: hits (matches), substitutions, deletions and
/// insertions. Counts add up over recordings.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
pub struct EditCounts {
    /// Reference items read correctly.
    pub hits: u64,
    /// Reference items read as something else.
    pub substitutions: u64,
    /// Reference items missing from the hypothesis.
    pub deletions: u64,
    /// Hypothesis items with no reference counterpart.
    pub insertions: u64,
}

impl EditCounts {
    /// Substitutions + deletions + insertions: the edit distance.
    pub fn errors(&self) -> u64 {
        self.substitutions + self.deletions + self.insertions
    }

    /// Length of the reference: hits + substitutions + deletions.
    pub fn reference_len(&self) -> u64 {
        self.hits + self.substitutions + self.deletions
    }

    /// Error rate, errors / reference length (can exceed 1 when the
    /// hypothesis has many insertions). `None` for an empty reference.
    pub fn error_rate(&self) -> Option<f64> {
        let n = self.reference_len();
        (n > 0).then(|| self.errors() as f64 / n as f64)
    }

    /// Accuracy, 1 - error rate (negative when errors outnumber reference
    /// items). `None` for an empty reference.
    pub fn accuracy(&self) -> Option<f64> {
        self.error_rate().map(|e| 1.0 - e)
    }

    pub(crate) fn add(&mut self, other: &EditCounts) {
        self.hits += other.hits;
        self.substitutions += other.substitutions;
        self.deletions += other.deletions;
        self.insertions += other.insertions;
    }
}

/// A minimum-cost alignment of a reference and a hypothesis sequence.
#[derive(Debug, Clone, PartialEq, Eq, Default)]
pub struct Alignment {
    /// The steps in sequence order: every reference index appears exactly
    /// once (in a match, substitution or deletion) and so does every
    /// hypothesis index (match, substitution or insertion).
    pub ops: Vec<EditOp>,
}

impl Alignment {
    /// The edit distance: substitutions + insertions + deletions.
    pub fn distance(&self) -> usize {
        self.ops
            .iter()
            .filter(|op| !matches!(op, EditOp::Match { .. }))
            .count()
    }

    /// Hits, substitutions, deletions and insertions.
    pub fn counts(&self) -> EditCounts {
        let mut c = EditCounts::default();
        for op in &self.ops {
            match op {
                EditOp::Match { .. } => c.hits += 1,
                EditOp::Substitute { .. } => c.substitutions += 1,
                EditOp::Delete { .. } => c.deletions += 1,
                EditOp::Insert { .. } => c.insertions += 1,
            }
        }
        c
    }

    /// The aligned `(reference, hypothesis)` index pairs: matches and
    /// substitutions, in order.
    pub fn pairs(&self) -> impl Iterator<Item = (usize, usize)> + '_ {
        self.ops.iter().filter_map(|op| op.pair())
    }
}

/// Align `hypothesis` to `reference` with unit-cost Levenshtein edits
/// (Wagner and Fischer 1974) and return one minimum-cost alignment.
///
/// Where several alignments have the same cost, the backtrace (walking from
/// the ends of both sequences) prefers a match or substitution, then a
/// deletion, then an insertion. So `align("ab", "ba")` gives two
/// substitutions rather than a deletion and an insertion.
///
/// Memory is one `u32` per pair of items: fine for the lines and pages of a
/// recording (a few thousand items), not meant for whole books.
///
/// ```
/// use tactread::metrics::{align, EditOp};
/// let a = align(&['c', 'a', 't'], &['c', 'u', 't', 's']);
/// assert_eq!(a.distance(), 2);
/// assert_eq!(a.ops[1], EditOp::Substitute { reference: 1, hypothesis: 1 });
/// assert_eq!(a.ops[3], EditOp::Insert { hypothesis: 3 });
/// ```
pub fn align<T: PartialEq>(reference: &[T], hypothesis: &[T]) -> Alignment {
    let n = reference.len();
    let m = hypothesis.len();
    let w = m + 1;
    // cost[i * w + j]: distance between reference[..i] and hypothesis[..j].
    let mut cost = vec![0u32; (n + 1) * w];
    for (j, c) in cost.iter_mut().take(w).enumerate() {
        *c = j as u32;
    }
    for i in 1..=n {
        cost[i * w] = i as u32;
        for j in 1..=m {
            let sub = cost[(i - 1) * w + j - 1] + u32::from(reference[i - 1] != hypothesis[j - 1]);
            let del = cost[(i - 1) * w + j] + 1;
            let ins = cost[i * w + j - 1] + 1;
            cost[i * w + j] = sub.min(del).min(ins);
        }
    }

    let mut ops = Vec::with_capacity(n.max(m));
    let (mut i, mut j) = (n, m);
    while i > 0 || j > 0 {
        let here = cost[i * w + j];
        if i > 0 && j > 0 {
            let same = reference[i - 1] == hypothesis[j - 1];
            if here == cost[(i - 1) * w + j - 1] + u32::from(!same) {
                ops.push(if same {
                    EditOp::Match {
                        reference: i - 1,
                        hypothesis: j - 1,
                    }
                } else {
                    EditOp::Substitute {
                        reference: i - 1,
                        hypothesis: j - 1,
                    }
                });
                i -= 1;
                j -= 1;
                continue;
            }
        }
        if i > 0 && here == cost[(i - 1) * w + j] + 1 {
            ops.push(EditOp::Delete { reference: i - 1 });
            i -= 1;
        } else {
            // Only an insertion is left: here == cost[i][j - 1] + 1, j > 0.
            ops.push(EditOp::Insert { hypothesis: j - 1 });
            j -= 1;
        }
    }
    ops.reverse();
    Alignment { ops }
}

/// The unit-cost Levenshtein distance between two sequences (Wagner and
/// Fischer 1974), in `O(n m)` time and `O(m)` memory.
///
/// ```
/// assert_eq!(tactread::metrics::edit_distance(b"kitten", b"sitting"), 3);
/// ```
pub fn edit_distance<T: PartialEq>(reference: &[T], hypothesis: &[T]) -> usize {
    let mut prev: Vec<usize> = (0..=hypothesis.len()).collect();
    let mut row = vec![0usize; hypothesis.len() + 1];
    for (i, r) in reference.iter().enumerate() {
        row[0] = i + 1;
        for (j, h) in hypothesis.iter().enumerate() {
            let sub = prev[j] + usize::from(r != h);
            row[j + 1] = sub.min(prev[j + 1] + 1).min(row[j] + 1);
        }
        std::mem::swap(&mut prev, &mut row);
    }
    prev[hypothesis.len()]
}

/// Hits, substitutions, deletions and insertions between two texts,
/// aligned character by character (Unicode scalar values, spaces included,
/// nothing normalised). The character error rate is
/// `char_edit_counts(r, h).error_rate()`.
///
/// ```
/// let c = tactread::metrics::char_edit_counts("room 12", "rom 12");
/// assert_eq!((c.deletions, c.errors(), c.reference_len()), (1, 1, 7));
/// ```
pub fn char_edit_counts(reference: &str, hypothesis: &str) -> EditCounts {
    let r: Vec<char> = reference.chars().collect();
    let h: Vec<char> = hypothesis.chars().collect();
    align(&r, &h).counts()
}

/// Hits, substitutions, deletions and insertions between two texts,
/// aligned word by word, words being the runs between whitespace
/// (`str::split_whitespace`). The word error rate is
/// `word_edit_counts(r, h).error_rate()`.
///
/// ```
/// let c = tactread::metrics::word_edit_counts("take two  tablets", "take too tablets");
/// assert_eq!((c.substitutions, c.reference_len()), (1, 3));
/// ```
pub fn word_edit_counts(reference: &str, hypothesis: &str) -> EditCounts {
    let r: Vec<&str> = reference.split_whitespace().collect();
    let h: Vec<&str> = hypothesis.split_whitespace().collect();
    align(&r, &h).counts()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn check_consistent<T: PartialEq>(r: &[T], h: &[T], a: &Alignment) {
        let mut ri = 0;
        let mut hi = 0;
        for op in &a.ops {
            match *op {
                EditOp::Match {
                    reference,
                    hypothesis,
                } => {
                    assert_eq!((reference, hypothesis), (ri, hi));
                    assert!(r[ri] == h[hi]);
                    ri += 1;
                    hi += 1;
                }
                EditOp::Substitute {
                    reference,
                    hypothesis,
                } => {
                    assert_eq!((reference, hypothesis), (ri, hi));
                    assert!(r[ri] != h[hi]);
                    ri += 1;
                    hi += 1;
                }
                EditOp::Delete { reference } => {
                    assert_eq!(reference, ri);
                    ri += 1;
                }
                EditOp::Insert { hypothesis } => {
                    assert_eq!(hypothesis, hi);
                    hi += 1;
                }
            }
        }
        assert_eq!((ri, hi), (r.len(), h.len()));
    }

    #[test]
    fn empty_sides() {
        let e: [u8; 0] = [];
        assert_eq!(align(&e, &e).ops, vec![]);
        let a = align(b"abc", &e);
        assert_eq!(a.counts().deletions, 3);
        let a = align(&e, b"ab");
        assert_eq!(a.counts().insertions, 2);
        assert_eq!(EditCounts::default().error_rate(), None);
    }

    #[test]
    fn ties_prefer_substitution() {
        let a = align(b"ab", b"ba");
        assert_eq!(a.counts().substitutions, 2);
        assert_eq!(a.distance(), 2);
    }

    #[test]
    fn backtrace_is_consistent_and_minimal() {
        // Worked example (by hand): "kitten" -> "sitting" is 2 substitutions
        // and 1 insertion, distance 3 (a textbook example, from memory).
        let a = align(b"kitten", b"sitting");
        check_consistent(b"kitten", b"sitting", &a);
        let c = a.counts();
        assert_eq!((c.substitutions, c.insertions, c.deletions), (2, 1, 0));
        let pairs = [
            ("", "x"),
            ("flaw", "lawn"),
            ("abcdef", "azced"),
            ("aaaa", "aa"),
            ("dosage", "dosg"),
        ];
        for (r, h) in pairs {
            let a = align(r.as_bytes(), h.as_bytes());
            check_consistent(r.as_bytes(), h.as_bytes(), &a);
            assert_eq!(a.distance(), edit_distance(r.as_bytes(), h.as_bytes()));
        }
    }

    #[test]
    fn rates() {
        let c = word_edit_counts("one two three", "one three four five");
        assert_eq!(c.reference_len(), 3);
        assert_eq!(
            c.errors(),
            edit_distance(&["one", "two", "three"], &["one", "three", "four", "five"]) as u64
        );
        assert!(c.accuracy().unwrap() < 0.5);
    }
}
