//! The built-in code tables at work: sample sentences round-tripped in each
//! language, the indicator rules on crafted cases (numbers then letters,
//! capitalised words, shared cells), the policies for characters that cannot
//! be encoded and cells that cannot be read, and the reader contract the beam
//! decoder relies on. Checks against published tables live in
//! `outside_references.rs`.

use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use tactread::{cells_to_unicode, Cell, CodeTable, Error};

fn table(lang: &str) -> CodeTable {
    CodeTable::builtin(lang).unwrap()
}

fn dots(cells: &[Cell]) -> String {
    let parts: Vec<String> = cells.iter().map(|c| c.dot_string()).collect();
    parts.join("-")
}

fn cells(dot_text: &str) -> Vec<Cell> {
    dot_text
        .split('-')
        .map(|d| {
            if d == "0" {
                return Cell::EMPTY;
            }
            Cell::from_dots(&d.bytes().map(|b| b - b'0').collect::<Vec<_>>()).unwrap()
        })
        .collect()
}

fn round_trip(lang: &str, text: &str) {
    let t = table(lang);
    let encoded = t
        .encode(text)
        .unwrap_or_else(|e| panic!("{lang}: {text:?}: {e}"));
    let back = t.decode(&encoded);
    assert_eq!(back.text, text, "{lang}: {}", cells_to_unicode(&encoded));
    assert!(back.unreadable.is_empty());
    // The incremental reader gives the same text.
    let mut r = t.reader();
    let mut text_by_cell = String::new();
    for &c in &encoded {
        text_by_cell.push_str(&r.push(c));
    }
    text_by_cell.push_str(&r.finish());
    assert_eq!(text_by_cell, text);
}

fn unencodable(lang: &str, text: &str) -> (char, usize, String) {
    match table(lang).encode(text) {
        Err(Error::Unencodable {
            ch,
            position,
            lang: l,
            hint,
            ..
        }) => {
            assert_eq!(l, lang);
            (ch, position, hint)
        }
        other => panic!("{lang}: {text:?}: expected Unencodable, got {other:?}"),
    }
}

// Sample sentences: signs along the visitors' path of a small botanical garden.

#[test]
fn english_sentences_round_trip() {
    for s in [
        "Welcome to the Glasshouse Path: 12 beds, 340 ferns and the NEW Orchid Room (Bed 7B).",
        "Please stay on the path; the moss is 3.5 cm deep and grows 1,200 years.",
        "“Do not touch the cactus!” says the gardener. Why? It bites.",
        "Room 12B is closed on Mondays - see the map/plan at Gate 4.",
        "DON'T feed the koi & the ducks.",
    ] {
        round_trip("en", s);
    }
}

#[test]
fn german_sentences_round_trip() {
    for s in [
        "Willkommen im Palmenhaus: 12 Beete, 3,5 km Weg und große Kübel!",
        "ÖFFNUNGSZEITEN: täglich 9 bis 18 Uhr; Führung um 14 Uhr.",
        "Bitte nicht füttern - die Fische im Teich 2a sind satt.",
        "Wo ist der Ausgang? Gleich hinter der Straße bei Beet 1.000.",
    ] {
        round_trip("de", s);
    }
}

#[test]
fn french_sentences_round_trip() {
    for s in [
        "Bienvenue à la serre : 12 plantes rares, 3 bassins et l'allée des fougères.",
        "À droite, la SERRE TROPICALE (ouverte de 9 à 17 h) ; à gauche, les œillets.",
        "Ça pousse vite ! Le bambou gagne 2,5 cm par jour, même en été.",
        "Où est la sortie ? Près du maïs et de l'île aux nénuphars.",
    ] {
        round_trip("fr", s);
    }
}

#[test]
fn spanish_sentences_round_trip() {
    for s in [
        "¿Dónde está el invernadero? ¡Sigue el camino hasta la Sala 12B!",
        "Los ÁRBOLES del jardín tienen 120 años; el más alto mide 3,5 m.",
        "No des de comer al pingüino (está a dieta).",
        "¡Cuidado: el cactus pincha! Mañana abrimos a las 9.",
    ] {
        round_trip("es", s);
    }
}

// Numbers followed by letters.

#[test]
fn en_numbers_then_letters() {
    let en = table("en");
    // a-j after digits take the grade 1 indicator 56; k-z and capitals do not.
    assert_eq!(dots(&en.encode("12b").unwrap()), "3456-1-12-56-12");
    assert_eq!(dots(&en.encode("12k").unwrap()), "3456-1-12-13");
    assert_eq!(dots(&en.encode("12B").unwrap()), "3456-1-12-6-12");
    // Full stop and comma keep the number going; a space ends it.
    assert_eq!(dots(&en.encode("3.5").unwrap()), "3456-14-256-15");
    assert_eq!(dots(&en.encode("1,200").unwrap()), "3456-1-2-12-245-245");
    assert_eq!(dots(&en.encode("1 2").unwrap()), "3456-1-0-3456-12");
    // After the full stop the number is still going, so "b" needs 56.
    assert_eq!(dots(&en.encode("3.b").unwrap()), "3456-14-256-56-12");
    // Reading: without the 56, the cells read as digits.
    assert_eq!(en.decode(&cells("3456-1-12-12")).text, "122");
    // UEB writes ".5" with the decimal point after the numeric indicator.
    assert_eq!(en.decode(&cells("3456-256-15")).text, ".5");
}

#[test]
fn german_letter_sign_after_numbers() {
    let de = table("de");
    // Dot 6 before a-j after a number (from memory).
    assert_eq!(dots(&de.encode("2a").unwrap()), "3456-12-6-1");
    assert_eq!(dots(&de.encode("2A").unwrap()), "3456-12-46-1");
}

#[test]
fn french_and_spanish_refuse_digit_lookalikes_after_numbers() {
    // fr: â (16) is also the digit 1; fr has no letter indicator.
    let (ch, pos, hint) = unencodable("fr", "Allée 12â");
    assert_eq!((ch, pos), ('â', 9));
    assert!(hint.contains("no letter indicator"), "{hint}");
    // But a letter that is not a digit cell may follow, and so may a capital.
    round_trip("fr", "12a");
    round_trip("fr", "12Â");
    let (ch, pos, _) = unencodable("es", "Sala 12b");
    assert_eq!((ch, pos), ('b', 8));
    round_trip("es", "Sala 12k");
}

// Capitals.

#[test]
fn capitalised_words() {
    let en = table("en");
    assert_eq!(dots(&en.encode("NEW").unwrap()), "6-6-1345-15-2456");
    // A single capital letter word takes the capital indicator only.
    assert_eq!(dots(&en.encode("I").unwrap()), "6-24");
    // The apostrophe ends the capitalised word; "T" is a single capital.
    assert_eq!(
        dots(&en.encode("DON'T").unwrap()),
        "6-6-145-135-1345-3-6-2345"
    );
    // Mixed: single capital, lowercase, capitalised rest.
    round_trip("en", "McDONALD");
    round_trip("en", "ABCdef GHi");
    // de uses 46 and 46-46.
    assert_eq!(
        dots(&table("de").encode("ÄRA").unwrap()),
        "46-46-345-1235-1"
    );
    // The capital of ß is ẞ (U+1E9E) in de.
    round_trip("de", "STRAẞE");
}

// Shared cells (opening and plain twins).

#[test]
fn opening_twins_need_their_place() {
    // es: ¿ and ? are both 26; ¿ only at the start of a word.
    let (ch, pos, _) = unencodable("es", "a¿b");
    assert_eq!((ch, pos), ('¿', 2));
    let (ch, pos, _) = unencodable("es", "qué ?");
    assert_eq!((ch, pos), ('?', 5));
    let (ch, _, _) = unencodable("en", "? yes");
    assert_eq!(ch, '?');
    round_trip("es", "¿¡Qué!?");
}

// Characters that cannot be encoded.

#[test]
fn unencodable_characters() {
    let (ch, pos, _) = unencodable("en", "Path №3");
    assert_eq!((ch, pos), ('№', 6));
    let (ch, pos, hint) = unencodable("en", "a\tb");
    assert_eq!((ch, pos), ('\t', 2));
    assert!(hint.contains("space"), "{hint}");
    // A combining accent (not NFC): the hint says to precompose.
    let (ch, pos, hint) = unencodable("fr", "e\u{301}t\u{e9}");
    assert_eq!((ch, pos), ('\u{301}', 2));
    assert!(hint.contains("precomposed"), "{hint}");
    // Letters of another language's table.
    let (ch, _, _) = unencodable("en", "café");
    assert_eq!(ch, 'é');
    // ASCII double quote: en has only the curly ones.
    let (ch, _, _) = unencodable("en", "\"hi\"");
    assert_eq!(ch, '"');
    // The error message names character, position and language.
    let msg = table("de").encode("Zimmer ☺").unwrap_err().to_string();
    assert!(
        msg.contains("'☺'") && msg.contains("character 8") && msg.contains("`de`"),
        "{msg}"
    );
}

#[test]
fn lossy_encoding_reports_what_it_dropped() {
    let en = table("en");
    let (cells, dropped) = en.encode_lossy("Bed №7:\tcafé");
    assert_eq!(dropped, vec![(4, '№'), (7, '\t'), (11, 'é')]);
    assert_eq!(en.decode(&cells).text, "Bed 7: caf");
}

// Cells that cannot be read.

#[test]
fn unreadable_cells_are_kept_and_reported() {
    let en = table("en");
    // An 8-dot cell, then a letter.
    let d = en.decode(&[Cell::from_mask(0b1100_0001), Cell::from_dots(&[1]).unwrap()]);
    assert_eq!(d.text, "\u{28C1}a");
    assert_eq!(d.unreadable, vec![0]);
    // 456 starts "/" (456-34) but a space follows: unreadable.
    let d = en.decode(&cells("1-456-0-12"));
    assert_eq!(d.text, "a\u{2838} b");
    assert_eq!(d.unreadable, vec![1]);
    // A capital indicator before a space, and a numeric indicator before a
    // letter k: both have nothing to apply to.
    let d = en.decode(&cells("6-0-3456-13"));
    assert_eq!(d.text, "\u{2820} \u{283C}k");
    assert_eq!(d.unreadable, vec![0, 2]);
    // A pattern with no meaning in fr: 45 alone.
    let d = table("fr").decode(&cells("1-45-1"));
    assert_eq!(d.text, "a\u{2818}a");
    assert_eq!(d.unreadable, vec![1]);
}

// The reader contract used by the beam decoder.

fn random_cells(rng: &mut ChaCha8Rng, n: usize) -> Vec<Cell> {
    (0..n)
        .map(|_| {
            // Mostly 6-dot cells, with plenty of the indicators' cells.
            match rng.gen_range(0..10) {
                0 => Cell::EMPTY,
                1 => Cell::from_mask(0b100000), // 6
                2 => Cell::from_mask(0b111100), // 3456
                3 => Cell::from_mask(0b110000), // 56
                4 => Cell::from_mask(0b101000), // 46
                _ => Cell::from_mask(rng.gen_range(0..64)),
            }
        })
        .collect()
}

#[test]
fn decoding_random_cells_is_total_and_re_encodable() {
    let mut rng = ChaCha8Rng::seed_from_u64(7);
    for &lang in CodeTable::builtin_langs() {
        let t = table(lang);
        for _ in 0..300 {
            let cells = random_cells(&mut rng, 16);
            let d = t.decode(&cells);
            assert!(d.unreadable.windows(2).all(|w| w[0] < w[1]));
            assert!(d.unreadable.iter().all(|&i| i < cells.len()));
            // The unreadable cells are in the text as their pattern
            // characters, in order (no sign of a table writes a pattern).
            let kept: String = d
                .text
                .chars()
                .filter(|&c| Cell::from_char(c).is_some())
                .collect();
            let want: String = d.unreadable.iter().map(|&i| cells[i].to_char()).collect();
            assert_eq!(kept, want, "{lang}: {:?}", cells_to_unicode(&cells));
            // Fully readable cells give text that encodes to cells reading
            // the same (the cells themselves may differ, e.g. a redundant
            // indicator).
            if d.unreadable.is_empty() {
                let again = t.encode(&d.text).unwrap_or_else(|e| {
                    panic!(
                        "{lang}: {:?} read as {:?}: {e}",
                        cells_to_unicode(&cells),
                        d.text
                    )
                });
                assert_eq!(t.decode(&again).text, d.text);
            }
        }
    }
}

#[test]
fn equal_states_read_the_rest_alike() {
    // Readers in equal states must turn any continuation into the same text:
    // that is what lets a beam search merge them.
    let mut rng = ChaCha8Rng::seed_from_u64(11);
    for &lang in CodeTable::builtin_langs() {
        let t = table(lang);
        let mut by_state = std::collections::HashMap::new();
        for _ in 0..400 {
            let mut r = t.reader();
            for c in random_cells(&mut rng, 5) {
                r.push(c);
            }
            by_state.entry(r.state()).or_insert_with(Vec::new).push(r);
        }
        assert!(
            by_state.len() > 3,
            "{lang}: too few distinct states to test"
        );
        for readers in by_state.values().filter(|v| v.len() > 1) {
            let tail = random_cells(&mut rng, 8);
            let texts: Vec<String> = readers
                .iter()
                .take(4)
                .map(|r| {
                    let mut r = r.clone();
                    let mut s: String = tail.iter().map(|&c| r.push(c)).collect();
                    s.push_str(&r.finish());
                    s
                })
                .collect();
            assert!(texts.windows(2).all(|w| w[0] == w[1]), "{lang}: {texts:?}");
        }
    }
}
