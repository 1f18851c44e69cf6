//! Fuzz target: the word list parser ([`tactread::lexicon::parse_word_list`])
//! and the lexicon compiler on arbitrary text.
//!
//! A word list that parses compiles into a lexicon, which must survive its
//! own file format (`to_bytes` then `from_bytes` give the same words and
//! counts), find every listed word, and find a listed word near itself.
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
    // The fst crate builds the Levenshtein automaton eagerly, at a cost that
    // grows with the query (milliseconds under the sanitizer), so search
    // near two words of natural length only: queries longer than every
    // listed word are cut short by `near` itself, but a fuzzed list can list
    // a word of thousands of letters.
    for e in entries.iter().filter(|e| e.word.len() <= 64).take(2) {
        assert!(lex
            .near(&e.word, 1)
            .iter()
            .any(|n| n.word == e.word && n.edits == 0));
    }
});
