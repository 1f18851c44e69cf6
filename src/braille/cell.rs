//! The braille cell: a set of raised dots, and its Unicode Braille Pattern.
//!
//! Dots are numbered the way the trade numbers them: 1-2-3 down the left
//! column, 4-5-6 down the right, and 7 (left) and 8 (right) below them in
//! 8-dot braille. A [`Cell`] stores them as a bit mask in which dot `k` sets
//! bit `k - 1`, which is exactly the offset of the cell's character from
//! U+2800 in the Unicode Braille Patterns block (The Unicode Standard,
//! chapter 21, block U+2800..U+28FF; dot numbering per ISO/TR 11548-1).

use std::fmt;

/// First code point of the Unicode Braille Patterns block (the empty cell).
pub const UNICODE_BASE: u32 = 0x2800;

/// Number of distinct 6-dot patterns, including the empty cell.
pub const SIX_DOT_PATTERNS: usize = 64;

/// One braille cell: which of dots 1-8 are raised.
///
/// Most of tactread works with 6-dot cells (mask below 64); 8-dot cells are
/// representable so Unicode text round-trips.
///
/// ```
/// use tactread::Cell;
/// let c = Cell::from_dots(&[1, 2, 5]).unwrap(); // "h" in many codes
/// assert_eq!(c.to_char(), '\u{2813}');
/// assert_eq!(c.dots(), vec![1, 2, 5]);
/// assert_eq!(Cell::from_char('\u{2813}'), Some(c));
/// ```
#[derive(Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord, Default)]
pub struct Cell(u8);

impl Cell {
    /// The empty cell (no dots raised): a space between words.
    pub const EMPTY: Cell = Cell(0);

    /// A cell from its bit mask (dot `k` is bit `k - 1`).
    pub const fn from_mask(mask: u8) -> Cell {
        Cell(mask)
    }

    /// The bit mask (dot `k` is bit `k - 1`).
    pub const fn mask(self) -> u8 {
        self.0
    }

    /// A cell from a list of dot numbers 1-8. Returns `None` for a number
    /// outside 1-8. Repeated dots are allowed and count once.
    pub fn from_dots(dots: &[u8]) -> Option<Cell> {
        let mut mask = 0u8;
        for &d in dots {
            if !(1..=8).contains(&d) {
                return None;
            }
            mask |= 1 << (d - 1);
        }
        Some(Cell(mask))
    }

    /// Whether dot `d` (1-8) is raised. Dots outside 1-8 are never raised.
    pub fn has_dot(self, d: u8) -> bool {
        (1..=8).contains(&d) && self.0 & (1 << (d - 1)) != 0
    }

    /// The raised dots in increasing order.
    pub fn dots(self) -> Vec<u8> {
        (1..=8).filter(|&d| self.has_dot(d)).collect()
    }

    /// Whether the cell uses only dots 1-6.
    pub const fn is_six_dot(self) -> bool {
        self.0 < 64
    }

    /// The Unicode Braille Pattern character, U+2800 + mask.
    pub fn to_char(self) -> char {
        // Every value 0x2800..=0x28FF is a valid scalar value.
        char::from_u32(UNICODE_BASE + self.0 as u32).unwrap_or('\u{2800}')
    }

    /// The cell of a Unicode Braille Pattern character, or `None` for any
    /// character outside U+2800..U+28FF.
    pub fn from_char(ch: char) -> Option<Cell> {
        let cp = ch as u32;
        if (UNICODE_BASE..UNICODE_BASE + 256).contains(&cp) {
            Some(Cell((cp - UNICODE_BASE) as u8))
        } else {
            None
        }
    }

    /// The dots written the way tables write them: "1245", or "0" for the
    /// empty cell.
    pub fn dot_string(self) -> String {
        if self.0 == 0 {
            return "0".to_string();
        }
        self.dots().iter().map(|d| char::from(b'0' + d)).collect()
    }
}

impl fmt::Debug for Cell {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "Cell({})", self.dot_string())
    }
}

impl fmt::Display for Cell {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}", self.to_char())
    }
}

/// Cells written as a string of Unicode Braille Patterns.
pub fn cells_to_unicode(cells: &[Cell]) -> String {
    cells.iter().map(|c| c.to_char()).collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn mask_and_dots_agree() {
        for m in 0..=255u8 {
            let c = Cell::from_mask(m);
            assert_eq!(Cell::from_dots(&c.dots()), Some(c));
            assert_eq!(Cell::from_char(c.to_char()), Some(c));
        }
    }

    #[test]
    fn rejects_bad_dots_and_chars() {
        assert_eq!(Cell::from_dots(&[0]), None);
        assert_eq!(Cell::from_dots(&[9]), None);
        assert_eq!(Cell::from_char('a'), None);
        assert_eq!(Cell::from_char('\u{2900}'), None);
        assert!(!Cell::from_mask(0xFF).has_dot(9));
    }

    #[test]
    fn dot_string_form() {
        assert_eq!(Cell::EMPTY.dot_string(), "0");
        assert_eq!(Cell::from_dots(&[3, 4, 5, 6]).unwrap().dot_string(), "3456");
    }
}
