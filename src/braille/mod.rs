//! Braille: cells, their Unicode patterns, and the language packs' code
//! tables that turn text into cells and cells back into text.

mod cell;

pub use cell::{cells_to_unicode, Cell, SIX_DOT_PATTERNS, UNICODE_BASE};
