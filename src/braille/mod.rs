//! Braille: cells, their Unicode patterns, and the language packs' code
//! tables that turn text into cells and cells back into text.
//!
//! A [`CodeTable`] is one uncontracted (grade 1) code, loaded from a
//! language pack's `lexicons/<lang>/code.txt` (the four packs en, de, fr and
//! es are built in). It [encodes](CodeTable::encode) text into cells and
//! [decodes](CodeTable::decode) cells into text; a [`CellReader`] does the
//! decoding one cell at a time, exposing its [`ReaderState`] so a beam
//! search can merge hypotheses.

mod cell;
mod encode;
mod reader;
mod table;

pub use cell::{cells_to_unicode, Cell, SIX_DOT_PATTERNS, UNICODE_BASE};
pub use reader::{CellReader, Decoded, ReaderState};
pub use table::CodeTable;
