//! Fuzz target: the word list parser ([`tactread::lexicon::parse_word_list`])
//! and the lexicon compiler on arbitrary text.
//!
//! A word list that parses compiles into a lexicon, which must survive its
//! own file format (`to_bytes` then `from_bytes` give the same words and
//! counts) and find every listed word. (Near-word search runs in the
//! `lexicon_file` target: the fst crate builds its Levenshtein automaton
//! eagerly, milliseconds a query under the sanitizer, which made this
//! target run at 200 inputs a second.)
#![no_main]

use libfuzzer_sys::fuzz_target;
use std::path::Path;
use tactread::lexicon::{parse_word_list, Lexicon};

fuzz_target!(|data: &[u8]| {
    let Ok(text) = std::str::from_utf8(data) else {
        return;
    };
    let Ok(entries) = parse_word_list(text, Path::new("fuzz-words.txt")) else {
        return;
    };
    let Ok(lex) = Lexicon::from_entries(&entries, "en") else {
        return;
    };
    let again = Lexicon::from_bytes(lex.to_bytes(), Path::new("fuzz.lex"))
        .expect("a lexicon reads back its own bytes");
    assert_eq!(again.words(), lex.words());
    assert_eq!(again.total(), lex.total());
    for e in &entries {
        assert!(
            lex.count(&e.word).is_some(),
            "listed word {:?} is found",
            e.word
        );
    }
});
