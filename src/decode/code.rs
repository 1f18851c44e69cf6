//! The language packs' code tables as the decoder's [`BrailleCode`]: their
//! [`CellReader`] runs inside the beam search.

use super::{BrailleCode, CodeReader};
use crate::braille::{CellReader, CodeTable, ReaderState};
use crate::{Cell, Result};

impl CodeReader for CellReader<'_> {
    type State = ReaderState;
    fn push(&mut self, cell: Cell) -> String {
        CellReader::push(self, cell)
    }
    fn push_into(&mut self, cell: Cell, out: &mut String) {
        CellReader::push_into(self, cell, out);
    }
    fn state(&self) -> ReaderState {
        CellReader::state(self)
    }
    fn finish(mut self) -> String {
        CellReader::finish(&mut self)
    }
}

impl BrailleCode for CodeTable {
    type Reader<'a> = CellReader<'a>;
    fn reader(&self) -> CellReader<'_> {
        CodeTable::reader(self)
    }
    fn encode(&self, text: &str) -> Result<Vec<Cell>> {
        CodeTable::encode(self, text)
    }
}
