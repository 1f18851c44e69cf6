//! The built-in corpus: invented text of signs, leaflets and timetables of
//! Quillmouth Sound, an invented coastal nature reserve, and its island
//! ferry, in English, German, French and Spanish.
//!
//! Each language has an embedded template file (`corpus/<lang>.txt` beside
//! this module). Its lines are:
//! - `# ...`: a comment;
//! - `@name = word one | word two | ...`: a slot and its fillers;
//! - anything else: a template, in which `{name}` is replaced by a random
//!   filler of slot `name`, `{name:cap}` by one with its first letter in
//!   capitals, `{name:upper}` by one all in capitals, and `{A-B}` by a
//!   random whole number from A to B.
//!
//! [`corpus_lines`] expands the templates with a fixed seed per language,
//! drops repeats and lines longer than [`MAX_LINE_CHARS`], and returns the
//! first [`CORPUS_LINES`] distinct lines: the same lines on every machine.

use crate::error::{Error, Location, Result};
use rand::Rng;
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use std::collections::{BTreeMap, HashSet};

/// Languages of the built-in corpus.
pub const CORPUS_LANGS: [&str; 4] = ["en", "de", "fr", "es"];

/// Lines per language in the built-in corpus.
pub(crate) const CORPUS_LINES: usize = 4000;

/// Longest line in characters (a braille line holds about 40 cells).
pub(crate) const MAX_LINE_CHARS: usize = 40;

fn template_file(lang: &str) -> Option<&'static str> {
    match lang {
        "en" => Some(include_str!("corpus/en.txt")),
        "de" => Some(include_str!("corpus/de.txt")),
        "fr" => Some(include_str!("corpus/fr.txt")),
        "es" => Some(include_str!("corpus/es.txt")),
        _ => None,
    }
}

/// A parsed template file.
struct Templates {
    slots: BTreeMap<String, Vec<String>>,
    templates: Vec<(usize, String)>,
}

fn parse(lang: &str, text: &str) -> Result<Templates> {
    let origin = format!("<built-in corpus {lang}>");
    let mut slots = BTreeMap::new();
    let mut templates = Vec::new();
    for (k, raw) in text.lines().enumerate() {
        let line = raw.trim();
        if line.is_empty() || line.starts_with('#') {
            continue;
        }
        if let Some(rest) = line.strip_prefix('@') {
            let Some((name, fillers)) = rest.split_once('=') else {
                return Err(Error::input(
                    Location::file(&origin).line(k + 1),
                    "slot line lacks `=`: write `@name = a | b`",
                ));
            };
            let fillers: Vec<String> = fillers
                .split('|')
                .map(|s| s.trim().to_string())
                .filter(|s| !s.is_empty())
                .collect();
            if fillers.is_empty() {
                return Err(Error::input(
                    Location::file(&origin).line(k + 1),
                    "slot has no fillers",
                ));
            }
            slots.insert(name.trim().to_string(), fillers);
        } else {
            templates.push((k + 1, line.to_string()));
        }
    }
    if templates.is_empty() {
        return Err(Error::input(Location::file(&origin), "holds no templates"));
    }
    Ok(Templates { slots, templates })
}

fn capitalise(s: &str) -> String {
    let mut c = s.chars();
    match c.next() {
        Some(first) => first.to_uppercase().chain(c).collect(),
        None => String::new(),
    }
}

/// Fill one template.
fn expand(
    lang: &str,
    t: &Templates,
    line_no: usize,
    template: &str,
    rng: &mut ChaCha8Rng,
) -> Result<String> {
    let err = |msg: String| {
        Error::input(
            Location::file(format!("<built-in corpus {lang}>")).line(line_no),
            msg,
        )
    };
    let mut out = String::new();
    let mut rest = template;
    while let Some(open) = rest.find('{') {
        out.push_str(&rest[..open]);
        let Some(close) = rest[open..].find('}') else {
            return Err(err("`{` without `}`".into()));
        };
        let spec = &rest[open + 1..open + close];
        rest = &rest[open + close + 1..];
        let (name, modifier) = spec.split_once(':').unwrap_or((spec, ""));
        let filler = if let Some((a, b)) = name.split_once('-').filter(|(a, _)| !a.is_empty()) {
            let (a, b) = match (a.parse::<u32>(), b.parse::<u32>()) {
                (Ok(a), Ok(b)) if a <= b => (a, b),
                _ => return Err(err(format!("bad number range `{{{spec}}}`"))),
            };
            rng.gen_range(a..=b).to_string()
        } else {
            let Some(fillers) = t.slots.get(name) else {
                return Err(err(format!("unknown slot `{name}`")));
            };
            fillers[rng.gen_range(0..fillers.len())].clone()
        };
        match modifier {
            "" => out.push_str(&filler),
            "cap" => out.push_str(&capitalise(&filler)),
            "upper" => out.push_str(&filler.to_uppercase()),
            other => return Err(err(format!("unknown modifier `{other}`"))),
        }
    }
    out.push_str(rest);
    Ok(out)
}

/// The built-in corpus of `lang` (one of [`CORPUS_LANGS`]): 4000 distinct
/// invented lines of at most 40 characters, in a fixed order.
pub fn corpus_lines(lang: &str) -> Result<Vec<String>> {
    let Some(file) = template_file(lang) else {
        return Err(Error::config(
            "lang",
            format!(
                "no built-in corpus for `{lang}`: use one of {}, or give your own lines with --text-file",
                CORPUS_LANGS.join(", ")
            ),
        ));
    };
    let t = parse(lang, file)?;
    let lang_index = CORPUS_LANGS.iter().position(|l| *l == lang).unwrap_or(0) as u64;
    let mut rng = ChaCha8Rng::seed_from_u64(0x5EA_C0A57 + lang_index);
    let mut seen = HashSet::new();
    let mut lines = Vec::with_capacity(CORPUS_LINES);
    let mut attempts = 0usize;
    while lines.len() < CORPUS_LINES && attempts < 100 * CORPUS_LINES {
        attempts += 1;
        let (line_no, template) = &t.templates[rng.gen_range(0..t.templates.len())];
        let line = expand(lang, &t, *line_no, template, &mut rng)?;
        if line.chars().count() <= MAX_LINE_CHARS && seen.insert(line.clone()) {
            lines.push(line);
        }
    }
    Ok(lines)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_language_has_thousands_of_distinct_lines() {
        for lang in CORPUS_LANGS {
            let lines = corpus_lines(lang).unwrap();
            assert_eq!(lines.len(), CORPUS_LINES, "{lang}");
            assert!(lines.iter().all(|l| l.chars().count() <= MAX_LINE_CHARS));
            assert!(lines.iter().all(|l| !l.contains('{') && !l.contains('}')));
            let words: HashSet<&str> = lines.iter().flat_map(|l| l.split(' ')).collect();
            assert!(
                words.len() > 300,
                "{lang}: only {} distinct words",
                words.len()
            );
            assert!(lines.iter().any(|l| l.chars().any(|c| c.is_ascii_digit())));
            assert!(lines.iter().any(|l| l.chars().any(char::is_uppercase)));
        }
    }

    #[test]
    fn every_line_is_encodable_and_reads_back() {
        let mut failures = Vec::new();
        for lang in CORPUS_LANGS {
            let table = crate::braille::CodeTable::builtin(lang).unwrap();
            for (k, line) in corpus_lines(lang).unwrap().iter().enumerate() {
                match table.encode(line) {
                    Ok(cells) => assert_eq!(table.decode(&cells).text, *line, "{lang} line {k}"),
                    Err(e) => failures.push(format!("{lang} line {k} {line:?}: {e}")),
                }
            }
        }
        assert!(
            failures.is_empty(),
            "{} lines fail, e.g.\n{}",
            failures.len(),
            failures[..failures.len().min(12)].join("\n")
        );
    }

    #[test]
    fn corpus_is_stable() {
        assert_eq!(corpus_lines("fr").unwrap(), corpus_lines("fr").unwrap());
        assert_ne!(
            corpus_lines("en").unwrap()[0],
            corpus_lines("de").unwrap()[0]
        );
    }

    #[test]
    fn unknown_language_is_named() {
        let msg = corpus_lines("xx").unwrap_err().to_string();
        assert!(msg.contains("`xx`") && msg.contains("--text-file"), "{msg}");
    }

    #[test]
    fn expansion_handles_modifiers_and_ranges() {
        let t = parse("en", "@w = sea kale\n{w:cap} {w:upper} {3-3}\n").unwrap();
        let mut rng = ChaCha8Rng::seed_from_u64(1);
        let (n, tpl) = &t.templates[0];
        assert_eq!(
            expand("en", &t, *n, tpl, &mut rng).unwrap(),
            "Sea kale SEA KALE 3"
        );
        let t = parse("en", "{nope}\n").unwrap();
        let (n, tpl) = &t.templates[0];
        let msg = expand("en", &t, *n, tpl, &mut rng).unwrap_err().to_string();
        assert!(msg.contains("line 1") && msg.contains("nope"), "{msg}");
    }
}
