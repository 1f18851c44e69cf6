//! Checks against published standards, tables and reference libraries. Each
//! check names its source beside it; values we could not check against the
//! document itself are marked "from memory". Expected dot numbers are written
//! out here by hand, independently of the table files in `lexicons/`.

use tactread::{Cell, CodeTable};

/// Cells from dot strings such as "1245" (test-side parser, independent of
/// the library's table loader).
fn cells(dots: &[&str]) -> Vec<Cell> {
    dots.iter()
        .map(|d| {
            let list: Vec<u8> = d.bytes().map(|b| b - b'0').collect();
            Cell::from_dots(&list).unwrap()
        })
        .collect()
}

/// `text` must encode to exactly `dots`, and `dots` must decode to `text`.
fn both_ways(table: &CodeTable, text: &str, dots: &[&str]) {
    let want = cells(dots);
    let got = table.encode(text).unwrap();
    assert_eq!(got, want, "{}: encoding {text:?}", table.lang());
    let back = table.decode(&want);
    assert_eq!(back.text, text, "{}: decoding {dots:?}", table.lang());
    assert!(back.unreadable.is_empty());
}

// ---------------------------------------------------------------------------
// The Unicode Standard, Braille Patterns block U+2800..U+28FF (character
// names per ISO/TR 11548-1), via the general-purpose `unicode_names2` crate.

#[test]
fn all_256_patterns_match_their_unicode_names() {
    for cp in 0x2800u32..=0x28FF {
        let ch = char::from_u32(cp).unwrap();
        let name = unicode_names2::name(ch)
            .map(|n| n.to_string())
            .unwrap_or_default();
        let cell = Cell::from_char(ch).expect("every character of the block is a cell");
        assert_eq!(cell.to_char(), ch);
        if cp == 0x2800 {
            assert_eq!(name, "BRAILLE PATTERN BLANK");
            assert_eq!(cell, Cell::EMPTY);
            assert!(cell.dots().is_empty());
            continue;
        }
        // "BRAILLE PATTERN DOTS-1245": the raised dots, in increasing order.
        let listed = name
            .strip_prefix("BRAILLE PATTERN DOTS-")
            .unwrap_or_else(|| panic!("unexpected name {name:?} for U+{cp:04X}"));
        let dots: Vec<u8> = listed.bytes().map(|b| b - b'0').collect();
        assert_eq!(cell.dots(), dots, "U+{cp:04X} {name}");
        assert_eq!(Cell::from_dots(&dots), Some(cell), "U+{cp:04X} {name}");
        assert_eq!(cell.dot_string(), listed, "U+{cp:04X} {name}");
        // And back: the name we build from the cell finds the character.
        let built = format!("BRAILLE PATTERN DOTS-{}", cell.dot_string());
        assert_eq!(unicode_names2::character(&built), Some(ch));
    }
}

#[test]
fn unicode_examples_of_the_block() {
    // The Unicode Standard, Braille Patterns block: U+2801 is dots-1,
    // U+283C dots-3456, U+2820 dots-6.
    assert_eq!(Cell::from_dots(&[1]).unwrap().to_char(), '\u{2801}');
    assert_eq!(
        Cell::from_dots(&[3, 4, 5, 6]).unwrap().to_char(),
        '\u{283C}'
    );
    assert_eq!(Cell::from_dots(&[6]).unwrap().to_char(), '\u{2820}');
}

// ---------------------------------------------------------------------------
// Letters a-z as in Louis Braille's system, shared by en, de, es and fr
// (w is 2456 in all four). Values: "The Rules of Unified English Braille",
// 2nd ed. 2013 (ICEB), section 4 on letters (section number from memory);
// the de, fr and es documents below list the same basic letters.

const LATIN: [(char, &str); 26] = [
    ('a', "1"),
    ('b', "12"),
    ('c', "14"),
    ('d', "145"),
    ('e', "15"),
    ('f', "124"),
    ('g', "1245"),
    ('h', "125"),
    ('i', "24"),
    ('j', "245"),
    ('k', "13"),
    ('l', "123"),
    ('m', "134"),
    ('n', "1345"),
    ('o', "135"),
    ('p', "1234"),
    ('q', "12345"),
    ('r', "1235"),
    ('s', "234"),
    ('t', "2345"),
    ('u', "136"),
    ('v', "1236"),
    ('w', "2456"),
    ('x', "1346"),
    ('y', "13456"),
    ('z', "1356"),
];

#[test]
fn latin_letters_follow_the_published_rows() {
    // The construction the rules state (Rules of UEB 2013; restated in
    // shared/domain.md): a-j use only dots 1, 2, 4, 5; k-t add dot 3 to a-j;
    // u, v, x, y, z add dots 3 and 6 to a-e; w is 2456. Checked against the
    // hand-written list above, so a typo in either shows up.
    let dots = |s: &str| Cell::from_dots(&s.bytes().map(|b| b - b'0').collect::<Vec<_>>()).unwrap();
    let add = |c: Cell, extra: u8| Cell::from_mask(c.mask() | extra);
    for i in 0..10 {
        let a_j = dots(LATIN[i].1);
        assert!(a_j.dots().iter().all(|d| [1, 2, 4, 5].contains(d)));
        assert_eq!(
            dots(LATIN[10 + i].1),
            add(a_j, 0b100),
            "{}",
            LATIN[10 + i].0
        );
    }
    for (i, letter) in ['u', 'v', 'x', 'y', 'z'].iter().enumerate() {
        let row = LATIN.iter().find(|(c, _)| c == letter).unwrap();
        assert_eq!(dots(row.1), add(dots(LATIN[i].1), 0b100100), "{letter}");
    }
    assert_eq!(LATIN[22], ('w', "2456"));
}

fn check_letters(lang: &str, extra: &[(char, &str)]) {
    let t = CodeTable::builtin(lang).unwrap();
    for &(ch, dots) in LATIN.iter().chain(extra) {
        both_ways(&t, &ch.to_string(), &[dots]);
    }
}

/// Digits after the numeric indicator.
fn check_digits(lang: &str, numeric: &str, digits: [&str; 10]) {
    let t = CodeTable::builtin(lang).unwrap();
    for (d, dots) in digits.iter().enumerate() {
        let text = char::from(b'0' + d as u8).to_string();
        both_ways(&t, &text, &[numeric, dots]);
    }
    // A number takes one numeric indicator: "1990".
    both_ways(
        &t,
        "1990",
        &[numeric, digits[1], digits[9], digits[9], digits[0]],
    );
}

/// 1-9 and 0 written with the cells of a-j.
const A_TO_J_DIGITS: [&str; 10] = [
    "245", "1", "12", "14", "145", "15", "124", "1245", "125", "24",
];

// ---------------------------------------------------------------------------
// English: "The Rules of Unified English Braille", 2nd ed. 2013, ICEB.

#[test]
fn en_letters() {
    check_letters("en", &[]);
}

#[test]
fn en_digits_numeric_indicator_3456() {
    // Rules of UEB 2013, section 6 (numeric mode; section number from
    // memory): numeric indicator 3456, then a-j read as 1-9, 0.
    check_digits("en", "3456", A_TO_J_DIGITS);
}

#[test]
fn en_capitals_and_grade_1_indicator() {
    let en = CodeTable::builtin("en").unwrap();
    // Rules of UEB 2013, section 8: capital letter indicator dot 6,
    // capitalised word indicator 6, 6 (section number from memory).
    both_ways(&en, "A", &["6", "1"]);
    both_ways(&en, "AB", &["6", "6", "1", "12"]);
    // Capitals terminator 6, 3 (from memory).
    both_ways(&en, "ABc", &["6", "6", "1", "12", "6", "3", "14"]);
    // Section 5/6: the grade 1 symbol indicator 56 before a-j after a
    // numeral (from memory); letters k-z need none.
    both_ways(&en, "2b", &["3456", "12", "56", "12"]);
    both_ways(&en, "2k", &["3456", "12", "13"]);
}

#[test]
fn en_punctuation() {
    // Rules of UEB 2013, section 7 (punctuation), from memory.
    let en = CodeTable::builtin("en").unwrap();
    for (ch, dots) in [
        (",", &["2"][..]),
        (";", &["23"]),
        (":", &["25"]),
        ("!", &["235"]),
        ("'", &["3"]),
        ("-", &["36"]),
        ("(", &["5", "126"]),
        (")", &["5", "345"]),
        ("/", &["456", "34"]),
    ] {
        both_ways(&en, &format!("a{ch}"), &[&["1"][..], dots].concat());
    }
    both_ways(&en, "a.", &["1", "256"]);
    // Opening double quote and question mark share 236; closing quote 356.
    both_ways(&en, "“a?”", &["236", "1", "236", "356"]);
}

// ---------------------------------------------------------------------------
// German: "Das System der deutschen Blindenschrift",
// Brailleschriftkomitee der deutschsprachigen Länder. The umlauts and ß as
// listed in shared/domain.md (marked there as unverified against the primary
// document); the indicators from memory.

#[test]
fn de_letters_with_umlauts_and_sharp_s() {
    check_letters(
        "de",
        &[('ä', "345"), ('ö', "246"), ('ü', "1256"), ('ß', "2346")],
    );
}

#[test]
fn de_digits_and_capital_sign_46() {
    // Numeric indicator 3456 with a-j as digits (from memory).
    check_digits("de", "3456", A_TO_J_DIGITS);
    let de = CodeTable::builtin("de").unwrap();
    // Capital sign dots 46 (shared/domain.md, citing the German system).
    both_ways(&de, "Ä", &["46", "345"]);
}

// ---------------------------------------------------------------------------
// French: "Code braille français uniformisé", 2nd ed. 2008. Accented letters
// as listed in shared/domain.md from that document.

#[test]
fn fr_letters_with_accents() {
    check_letters(
        "fr",
        &[
            ('é', "123456"),
            ('à', "12356"),
            ('è', "2346"),
            ('ù', "23456"),
            ('â', "16"),
            ('ê', "126"),
            ('î', "146"),
            ('ô', "1456"),
            ('û', "156"),
            ('ë', "1246"),
            ('ï', "12456"),
            ('ü', "1256"),
            ('œ', "246"),
            ('ç', "12346"),
        ],
    );
}

#[test]
fn fr_digits_antoine_notation() {
    // Numbers: prefix dot 6, digits in the Antoine notation (a-j plus dot 6,
    // 0 = 3456). From memory; shared/domain.md says "number notation: verify".
    check_digits(
        "fr",
        "6",
        [
            "3456", "16", "126", "146", "1456", "156", "1246", "12456", "1256", "246",
        ],
    );
    let fr = CodeTable::builtin("fr").unwrap();
    // Capital sign dots 46 (shared/domain.md, from the 2008 code).
    both_ways(&fr, "É", &["46", "123456"]);
}

// ---------------------------------------------------------------------------
// Spanish: Comisión Braille Española, basic notation. Accented letters, capital
// sign and number sign as listed in shared/domain.md (there marked as from
// secondary sources, unverified).

#[test]
fn es_letters_with_accents() {
    check_letters(
        "es",
        &[
            ('á', "12356"),
            ('é', "2346"),
            ('í', "34"),
            ('ó', "346"),
            ('ú', "23456"),
            ('ñ', "12456"),
            ('ü', "1256"),
        ],
    );
}

#[test]
fn es_digits_and_capital_sign_46() {
    check_digits("es", "3456", A_TO_J_DIGITS);
    let es = CodeTable::builtin("es").unwrap();
    both_ways(&es, "Ñ", &["46", "12456"]);
}
