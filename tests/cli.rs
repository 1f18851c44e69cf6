//! Tests of the built binary: each runs `tactread` as a user would (arguments,
//! standard input, exit codes, messages on stderr).

mod common;

use common::cli::{stderr, stdout, tactread_with_stdin as tactread};

fn ok(args: &[&str], stdin: Option<&str>) -> String {
    let o = tactread(args, stdin);
    assert!(o.status.success(), "{args:?}: {}", stderr(&o));
    stdout(&o)
}

#[test]
fn help_lists_cells() {
    let out = ok(&["--help"], None);
    assert!(out.contains("cells"), "{out}");
}

#[test]
fn cells_text_to_braille_and_back() {
    // UEB: capital 6, r 1235, o 135, m 134, numeric 3456, 1 = a, 2 = b.
    assert_eq!(
        ok(&["cells", "--lang", "en", "Room 12B"], None),
        "⠠⠗⠕⠕⠍⠀⠼⠁⠃⠠⠃\n"
    );
    assert_eq!(
        ok(&["cells", "--lang", "en", "--to-text", "⠠⠗⠕⠕⠍⠀⠼⠁⠃⠠⠃"], None),
        "Room 12B\n"
    );
    // en is the default; several arguments are joined by spaces; a plain
    // space in braille input is the empty cell.
    assert_eq!(ok(&["cells", "Room", "12B"], None), "⠠⠗⠕⠕⠍⠀⠼⠁⠃⠠⠃\n");
    assert_eq!(
        ok(&["cells", "--to-text", "⠠⠗⠕⠕⠍ ⠼⠁⠃⠠⠃"], None),
        "Room 12B\n"
    );
}

#[test]
fn cells_dots_both_ways() {
    assert_eq!(
        ok(&["cells", "--dots", "Room 12B"], None),
        "6-1235-135-135-134-0-3456-1-12-6-12\n"
    );
    assert_eq!(
        ok(
            &[
                "cells",
                "--dots",
                "--to-text",
                "6-1235-135-135-134-0-3456-1-12-6-12"
            ],
            None
        ),
        "Room 12B\n"
    );
}

#[test]
fn cells_reads_stdin_line_by_line() {
    let text = "Glasshouse Path\n\nBed 7B, 340 ferns\n";
    let braille = ok(&["cells"], Some(text));
    assert_eq!(braille.lines().count(), 3);
    assert_eq!(braille.lines().nth(1), Some(""), "empty line kept");
    let back = ok(&["cells", "--to-text"], Some(&braille));
    assert_eq!(back, text);
}

#[test]
fn cells_round_trips_all_four_languages() {
    for (lang, text) in [
        ("en", "The NEW Orchid Room (Bed 7B) opens at 9."),
        ("de", "Große Kübel im Palmenhaus: 12 Beete, 3,5 km Weg!"),
        (
            "fr",
            "À droite, la serre des fougères : 12 plantes et l'île.",
        ),
        ("es", "¿Dónde está la Sala 12B? ¡Sigue el camino!"),
    ] {
        let braille = ok(&["cells", "--lang", lang, text], None);
        assert!(braille
            .trim_end()
            .chars()
            .all(|c| ('\u{2800}'..='\u{28FF}').contains(&c)));
        let back = ok(&["cells", "--lang", lang, "--to-text"], Some(&braille));
        assert_eq!(back.trim_end(), text, "{lang}");
    }
}

#[test]
fn cells_lang_accepts_a_table_file() {
    let dir = common::cli::test_dir("cli");
    let path = dir.join("mini.txt");
    std::fs::write(
        &path,
        "format tactread-code 1\nlanguage xx\nindicator capital 6\nletter a 1\nletter b 12\n",
    )
    .unwrap();
    let p = path.to_str().unwrap();
    assert_eq!(
        ok(&["cells", "--lang", p, "--dots", "Ab ba"], None),
        "6-1-12-0-12-1\n"
    );
    // A broken table names its file and line.
    std::fs::write(&path, "format tactread-code 1\nlanguage xx\nletter a 9\n").unwrap();
    let o = tactread(&["cells", "--lang", p, "a"], None);
    assert_eq!(o.status.code(), Some(1));
    let err = stderr(&o);
    assert!(
        err.contains("mini.txt line 3") && err.contains("dots"),
        "{err}"
    );
}

#[test]
fn unknown_language_fails_clearly() {
    let o = tactread(&["cells", "--lang", "tlh", "qapla"], None);
    assert_eq!(o.status.code(), Some(2), "a bad option value exits 2");
    let err = stderr(&o);
    assert!(err.contains("unknown language `tlh`"), "{err}");
    assert!(err.contains("en, de, fr, es"), "{err}");
    assert!(stdout(&o).is_empty());
}

#[test]
fn unencodable_text_fails_or_is_dropped_with_lossy() {
    let o = tactread(&["cells", "Path №3"], None);
    assert_eq!(o.status.code(), Some(1));
    let err = stderr(&o);
    assert!(
        err.contains("'№'") && err.contains("character 6") && err.contains("`en`"),
        "{err}"
    );
    let o = tactread(&["cells", "--lossy", "--dots", "Path №3"], None);
    assert!(o.status.success());
    assert_eq!(stdout(&o), "6-1234-1-2345-125-0-3456-14\n");
    assert!(stderr(&o).contains("dropped '№' (character 6)"));
    // On stdin the error names the line.
    let o = tactread(&["cells"], Some("fine\nnot fine: ☺\n"));
    assert_eq!(o.status.code(), Some(1));
    assert!(stderr(&o).contains("<stdin> line 2"), "{}", stderr(&o));
}

#[test]
fn bad_braille_input_names_the_character() {
    let o = tactread(&["cells", "--to-text", "⠁x"], None);
    assert_eq!(o.status.code(), Some(1));
    let err = stderr(&o);
    assert!(
        err.contains("character 2") && err.contains("not a braille pattern"),
        "{err}"
    );
    let o = tactread(&["cells", "--to-text", "--dots", "1-19"], None);
    assert_eq!(o.status.code(), Some(1));
    assert!(stderr(&o).contains("cell 2"), "{}", stderr(&o));
}

#[test]
fn unreadable_cells_warn_but_keep_the_text() {
    // A capital indicator before a space has nothing to apply to.
    let o = tactread(&["cells", "--to-text", "⠠ ⠁"], None);
    assert!(o.status.success());
    assert_eq!(stdout(&o), "⠠ a\n");
    assert!(stderr(&o).contains("cell(s) 1"), "{}", stderr(&o));
}
