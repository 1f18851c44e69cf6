//! Greedy CTC decoding and the two validation figures, for choosing the
//! best epoch. (The full beam decoder and the metrics report live in their
//! own modules; this is the small, fast path training needs.)

use crate::braille::CodeTable;
use crate::metrics::{align, char_edit_counts, EditCounts};
use crate::net::BLANK;
use crate::Cell;
use ndarray::ArrayView2;

/// Best-path decoding (Graves et al. 2006, section 3.2): the most probable
/// class of every frame, repeats merged, blanks dropped.
/// `log_probs`: `[T, 65]`.
pub(crate) fn greedy_cells(log_probs: ArrayView2<f32>) -> Vec<Cell> {
    let mut out = Vec::new();
    let mut prev = BLANK;
    for row in log_probs.outer_iter() {
        let mut best = BLANK;
        let mut best_v = f32::NEG_INFINITY;
        for (k, &v) in row.iter().enumerate() {
            if v > best_v {
                best_v = v;
                best = k;
            }
        }
        if best != prev && best != BLANK {
            out.push(Cell::from_mask(best as u8));
        }
        prev = best;
    }
    out
}

/// Scores a hypothesis: `(dots right, dots counted, character edit
/// counts)`. Dots are counted over the aligned (matched or substituted)
/// cell pairs of a minimum edit alignment, 6 per pair, as the metrics
/// module defines dot accuracy; characters compare the hypothesis read
/// back to text with `table` against the reference text.
pub(crate) fn score(
    reference: &[Cell],
    hypothesis: &[Cell],
    reference_text: &str,
    table: &CodeTable,
) -> (u64, u64, EditCounts) {
    let a = align(reference, hypothesis);
    let mut right = 0u64;
    let mut total = 0u64;
    for (r, h) in a.pairs() {
        let diff = (reference[r].mask() ^ hypothesis[h].mask()) & 0x3F;
        right += 6 - diff.count_ones() as u64;
        total += 6;
    }
    let text = table.decode(hypothesis).text;
    (right, total, char_edit_counts(reference_text, &text))
}

#[cfg(test)]
mod tests {
    use super::*;
    use ndarray::Array2;

    #[test]
    fn greedy_merges_repeats_and_drops_blanks() {
        // Frame classes: 3 3 - 3 5 5 -  → cells 3, 3, 5 (the blank
        // separates the two 3s; Graves et al. 2006, the map B).
        let classes = [3usize, 3, BLANK, 3, 5, 5, BLANK];
        let mut lp = Array2::from_elem((classes.len(), 65), -10.0f32);
        for (t, &k) in classes.iter().enumerate() {
            lp[[t, k]] = -0.1;
        }
        let cells = greedy_cells(lp.view());
        assert_eq!(
            cells,
            vec![Cell::from_mask(3), Cell::from_mask(3), Cell::from_mask(5)]
        );
    }

    #[test]
    fn score_counts_dots_of_aligned_pairs_and_characters() {
        let table = CodeTable::builtin("en").unwrap();
        // UEB: a = dot 1, b = dots 12, c = dots 14 (The Rules of Unified
        // English Braille, 2013).
        let reference = table.encode("abc").unwrap();
        let hyp = vec![
            Cell::from_dots(&[1]).unwrap(),
            Cell::from_dots(&[1, 2]).unwrap(),
            Cell::from_dots(&[1]).unwrap(),
        ];
        let (right, total, chars) = score(&reference, &hyp, "abc", &table);
        // Third pair: dots 14 vs 1, one dot of six wrong.
        assert_eq!((right, total), (17, 18));
        assert_eq!(chars.substitutions, 1);
        assert_eq!(chars.hits, 2);
    }
}
