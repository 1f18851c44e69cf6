//! Fuzz target: reading a lexicon file ([`tactread::lexicon::Lexicon::from_bytes`],
//! what `Lexicon::load` runs on a file's bytes) and then using it.
//!
//! The input is a whole lexicon file. One that loads is then listed and
//! searched, as the decoder would: a damaged file must be refused at load
//! time, not panic later.
#![no_main]

use libfuzzer_sys::fuzz_target;
use std::path::Path;
use tactread::lexicon::Lexicon;

fuzz_target!(|data: &[u8]| {
    let Ok(lex) = Lexicon::from_bytes(data.to_vec(), Path::new("fuzz.lex")) else {
        return;
    };
    let words = lex.words();
    assert_eq!(words.len(), lex.len());
    // A crafted file may hold keys a word list never gives (capitals, bytes
    // that are not UTF-8), so lookups are only run, not checked.
    for (w, _) in &words {
        let _ = lex.count(w);
        let _ = lex.log_prob(w);
    }
    // Near-word search costs milliseconds a query under the sanitizer (the
    // fst crate builds its automaton eagerly): two short queries.
    if let Some((w, _)) = words.iter().find(|(w, _)| w.len() <= 32) {
        let _ = lex.near(w, 1);
    }
    let _ = lex.near("tea", 2);
});
