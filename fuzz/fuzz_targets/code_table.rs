//! Fuzz target: the code table loader ([`tactread::CodeTable::parse`]) on
//! arbitrary text, then the encoder and cell reader of every table it
//! accepts.
//!
//! The input is a code table file (UTF-8; other bytes are skipped, as
//! `CodeTable::from_file` refuses them before parsing). A table that loads
//! then encodes a few fixed sentences and the input's own text, and reads
//! back cells made from the input's bytes: a table the loader accepts must
//! never make the encoder or reader panic, and `encode` must return cells
//! that decode to its input (its documented promise).
#![no_main]

use libfuzzer_sys::fuzz_target;
use std::path::Path;
use tactread::{Cell, CodeTable};

const SAMPLES: [&str; 5] = [
    "Room 12B, shelf 3.5: tea jar!",
    "THE TEA JAR holds 250 g",
    "Straße, château, niño, Ärger; «ça» ¿sí?",
    "a1 b-2 (c) \"d\" 'e' x/y 3,500",
    "",
];

fn exercise(table: &CodeTable, text: &str) {
    if let Ok(cells) = table.encode(text) {
        let back = table.decode(&cells);
        assert_eq!(back.text, text, "encode must round-trip");
    }
    let (cells, _dropped) = table.encode_lossy(text);
    let _ = table.decode(&cells);
}

fuzz_target!(|data: &[u8]| {
    let Ok(text) = std::str::from_utf8(data) else {
        return;
    };
    let Ok(table) = CodeTable::parse(text, Path::new("fuzz-code.txt")) else {
        return;
    };
    for s in SAMPLES {
        exercise(&table, s);
    }
    // The table's own lines are the most likely text to use its signs.
    for line in text.lines().take(64) {
        exercise(&table, line);
    }
    // Arbitrary cells, 6- and 8-dot, through the whole-line and the
    // cell-at-a-time readers.
    let cells: Vec<Cell> = data.iter().take(512).map(|&b| Cell::from_mask(b)).collect();
    let whole = table.decode(&cells);
    let mut reader = table.reader();
    let mut out = String::new();
    for &c in &cells {
        out.push_str(&reader.push(c));
    }
    out.push_str(&reader.finish());
    assert_eq!(out, whole.text, "reader and decode agree");
});
