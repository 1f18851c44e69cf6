//! Code tables (the language packs' `code.txt`): parsing, validation, and the
//! built-in tables for en, de, fr and es.
//!
//! A table lists the signs of one uncontracted (grade 1) braille code: letters,
//! digits, punctuation and indicators, each as a sequence of cells. The loader
//! checks every line (dot numbers, duplicate characters, two signs on one
//! sequence of cells where a reader could not tell them apart, unknown
//! keywords, missing required indicators, the format version) and builds
//! three small tries, one per reading context (plain text, inside a
//! capitalised word, inside a number), that [`CellReader`](super::CellReader)
//! walks one cell at a time.
//!
//! The file format is described, with a worked example, in
//! `lexicons/README.md`.

use std::collections::HashMap;
use std::fmt;
use std::path::{Path, PathBuf};

use crate::{Error, Location, Result};

/// Format tag on the first meaningful line of every code table.
pub(crate) const FORMAT_TAG: &str = "tactread-code";
/// The code table format version this build reads.
pub(crate) const FORMAT_VERSION: u32 = 1;
/// Longest sign, in cells, that a table may define.
pub(crate) const MAX_SIGN_CELLS: usize = 4;
/// "No entry / no node" marker in the tries.
pub(crate) const NONE: u16 = u16::MAX;
/// Index of the built-in space sign (the empty cell) in every table.
pub(crate) const SPACE: u16 = 0;

/// The built-in language packs, embedded in the binary.
const BUILTIN: [(&str, &str); 4] = [
    ("en", include_str!("../../lexicons/en/code.txt")),
    ("de", include_str!("../../lexicons/de/code.txt")),
    ("fr", include_str!("../../lexicons/fr/code.txt")),
    ("es", include_str!("../../lexicons/es/code.txt")),
];

const BUILTIN_LANGS: [&str; 4] = ["en", "de", "fr", "es"];

const KEYWORDS: &str = "format, language, title, source, letter, digit, sign, indicator";

/// What an indicator does.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub(crate) enum Role {
    /// Starts numeric mode: the digit signs are read until a sign that is
    /// not a digit (or a `number` sign such as the decimal comma).
    Numeric,
    /// The next letter is a capital.
    Capital,
    /// The letters up to the next sign that is not a letter are capitals.
    CapitalWord,
    /// Ends a capitalised word before its letters end.
    CapitalEnd,
    /// Ends numeric mode before a letter whose cell is also a digit
    /// (the grade 1 indicator in UEB).
    Letter,
}

impl Role {
    const ALL: [Role; 5] = [
        Role::Numeric,
        Role::Capital,
        Role::CapitalWord,
        Role::CapitalEnd,
        Role::Letter,
    ];

    pub(crate) fn name(self) -> &'static str {
        match self {
            Role::Numeric => "numeric",
            Role::Capital => "capital",
            Role::CapitalWord => "capital-word",
            Role::CapitalEnd => "capital-end",
            Role::Letter => "letter",
        }
    }

    pub(crate) fn index(self) -> usize {
        match self {
            Role::Numeric => 0,
            Role::Capital => 1,
            Role::CapitalWord => 2,
            Role::CapitalEnd => 3,
            Role::Letter => 4,
        }
    }
}

/// What a sign means.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub(crate) enum Kind {
    /// The empty cell, a space between words (built in, never in a file).
    Space,
    /// A letter, with its capital form when it has one.
    Letter { lower: char, upper: Option<char> },
    /// A digit, read only in numeric mode.
    Digit(char),
    /// Punctuation or another symbol. `number`: it keeps numeric mode going.
    /// `opening`: it shares its cells with a plain twin and is the reading
    /// at the start of a word.
    Sign {
        ch: char,
        number: bool,
        opening: bool,
    },
    /// An indicator.
    Indicator(Role),
}

/// A sequence of 1 to [`MAX_SIGN_CELLS`] six-dot cells, as masks.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub(crate) struct Seq {
    cells: [u8; MAX_SIGN_CELLS],
    len: u8,
}

impl Seq {
    pub(crate) fn as_slice(&self) -> &[u8] {
        &self.cells[..self.len as usize]
    }

    /// Dot numbers as written in tables: `5-126`.
    pub(crate) fn dots(&self) -> String {
        let parts: Vec<String> = self
            .as_slice()
            .iter()
            .map(|&m| crate::Cell::from_mask(m).dot_string())
            .collect();
        parts.join("-")
    }
}

/// One sign of the table.
#[derive(Clone, Debug)]
pub(crate) struct Entry {
    pub(crate) kind: Kind,
    pub(crate) seq: Seq,
    /// Line in the table file (0 for the built-in space).
    pub(crate) line: usize,
    /// Whether the sign reads as itself inside a number (false when its
    /// cells are, or begin, or are the start of, a digit).
    pub(crate) in_num: bool,
    /// The opening/plain twin sharing the same cells, or [`NONE`].
    pub(crate) partner: u16,
}

impl Entry {
    fn describe(&self) -> String {
        match self.kind {
            Kind::Space => "the space".to_string(),
            Kind::Letter { lower, .. } => format!("letter `{lower}`"),
            Kind::Digit(d) => format!("digit `{d}`"),
            Kind::Sign { ch, .. } => format!("sign `{ch}`"),
            Kind::Indicator(r) => format!("indicator `{}`", r.name()),
        }
    }

    fn is_indicator(&self) -> bool {
        matches!(self.kind, Kind::Indicator(_))
    }
}

/// One trie node: children by cell mask (6-dot cells only), and the signs
/// ending here (a plain one and, for shared cells, an opening one).
#[derive(Clone)]
pub(crate) struct Node {
    next: [u16; 64],
    plain: u16,
    opening: u16,
    pub(crate) has_next: bool,
}

impl Node {
    fn new() -> Node {
        Node {
            next: [NONE; 64],
            plain: NONE,
            opening: NONE,
            has_next: false,
        }
    }

    /// The sign ending at this node, choosing the opening twin at the start
    /// of a word; [`NONE`] if no sign ends here.
    pub(crate) fn pick(&self, word_start: bool) -> u16 {
        match (self.plain, self.opening) {
            (NONE, o) => o,
            (p, NONE) => p,
            (p, o) => {
                if word_start {
                    o
                } else {
                    p
                }
            }
        }
    }
}

/// Signs readable in one context, keyed by their cells.
#[derive(Clone)]
pub(crate) struct Trie {
    nodes: Vec<Node>,
}

impl Trie {
    fn new() -> Trie {
        Trie {
            nodes: vec![Node::new()],
        }
    }

    fn insert(&mut self, seq: &[u8], entry: u16, opening: bool) {
        let mut at = 0usize;
        for &m in seq {
            let m = m as usize;
            if self.nodes[at].next[m] == NONE {
                self.nodes.push(Node::new());
                let id = (self.nodes.len() - 1) as u16;
                self.nodes[at].next[m] = id;
                self.nodes[at].has_next = true;
            }
            at = self.nodes[at].next[m] as usize;
        }
        if opening {
            self.nodes[at].opening = entry;
        } else {
            self.nodes[at].plain = entry;
        }
    }

    /// The node reached by following `cells` from the root, if any.
    pub(crate) fn walk(&self, cells: &[u8]) -> Option<&Node> {
        let mut at = 0usize;
        for &m in cells {
            if m >= 64 {
                return None;
            }
            let next = self.nodes[at].next[m as usize];
            if next == NONE {
                return None;
            }
            at = next as usize;
        }
        self.nodes.get(at)
    }
}

/// An uncontracted (grade 1) braille code: which cells write which letters,
/// digits, punctuation and indicators, for one language.
///
/// Load one of the built-in language packs with [`CodeTable::builtin`] or a
/// table file with [`CodeTable::from_file`]; then [`encode`](CodeTable::encode)
/// text into cells and [`decode`](CodeTable::decode) cells back into text, or
/// read cells one at a time with a [`CellReader`](super::CellReader).
///
/// ```
/// use tactread::{cells_to_unicode, CodeTable};
/// let en = CodeTable::builtin("en")?;
/// let cells = en.encode("Room 12B")?;
/// assert_eq!(cells_to_unicode(&cells), "⠠⠗⠕⠕⠍⠀⠼⠁⠃⠠⠃");
/// assert_eq!(en.decode(&cells).text, "Room 12B");
/// # Ok::<(), tactread::Error>(())
/// ```
///
/// # How the indicators work
///
/// The same rules hold for every table; a table chooses the cells.
///
/// - **Capitals.** A capital letter is written as the capital indicator and
///   the letter. Two or more capitals in a row, up to the end of the letters
///   (any sign that is not a letter ends them), are written once with the
///   capitalised-word indicator. If capitals stop before the letters do
///   ("ABCdef"), the capitals terminator (`capital-end`) closes them when the
///   table has one; otherwise each capital gets its own capital indicator.
///   In UEB this follows the Rules of UEB (2013), section 8, from memory; for
///   de, fr and es it is our choice, with their capital signs (dots 46).
/// - **Numbers.** A run of digits starts with the numeric indicator. Digits
///   continue until a sign that is not a digit; signs marked `number` (the
///   decimal point or comma, the thousands separator) keep the number going,
///   so "3.5" needs one indicator.
/// - **A letter right after a number.** If the letter's cells are also a digit
///   ("12b" in en, where b is also 2), the letter indicator (`letter`, the UEB
///   grade 1 indicator, dots 56) ends the number first. Letters that are not
///   digits ("12k") end the number by themselves. A capital ("Room 12B") needs
///   nothing more: the capital indicator is not a digit, so it ends the number.
///   The fr and es tables define no letter indicator (we could not confirm it
///   from memory), so there a lowercase letter whose cells are also a digit
///   cannot directly follow a number: [`encode`](CodeTable::encode) refuses it.
/// - **Shared cells.** Two signs may share cells when one is marked `opening`
///   (in en, “ and ? are both dots 236; in es, ¿ and ? are both 26): the
///   opening sign is the reading at the start of a word, the other one
///   elsewhere. Text with a plain twin at the start of a word, or an opening
///   sign inside a word, is refused.
///
/// # Characters it cannot encode
///
/// [`encode`](CodeTable::encode) returns [`Error::Unencodable`] naming the
/// first character the table has no sign for (or cannot write where it
/// stands), its 1-based position and the language. Only the space U+0020 has
/// a cell (the empty cell); other whitespace, combining accents (write the
/// precomposed letter) and characters of other scripts are refused.
/// [`encode_lossy`](CodeTable::encode_lossy) drops such characters instead
/// (whitespace becomes an empty cell) and reports each one.
/// Before returning, `encode` reads its own cells back and checks that they
/// give the text, so what it returns always decodes to the input.
///
/// # Cells it cannot read
///
/// [`decode`](CodeTable::decode) never fails. A cell that starts no sign in
/// the current context (an unassigned pattern, an 8-dot pattern, a digit cell
/// outside a number), or an indicator that has nothing to apply to (a capital
/// indicator before a space, a numeric indicator before a letter), is kept in
/// the text as its Unicode braille pattern character, so nothing is lost, and
/// its index goes into [`Decoded::unreadable`](super::Decoded::unreadable).
/// Such a cell ends any pending indicator and otherwise leaves the reading
/// state as it was.
#[derive(Clone)]
pub struct CodeTable {
    lang: String,
    title: String,
    source: String,
    origin: PathBuf,
    pub(crate) entries: Vec<Entry>,
    pub(crate) text: Trie,
    pub(crate) word: Trie,
    pub(crate) num: Trie,
    /// Character -> (entry, is the capital form).
    pub(crate) chars: HashMap<char, (u16, bool)>,
    /// Indicator entry by [`Role::index`], or [`NONE`].
    pub(crate) roles: [u16; 5],
    /// Whether any two signs share cells (so the reader tracks word starts).
    pub(crate) has_opening: bool,
}

impl fmt::Debug for CodeTable {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.debug_struct("CodeTable")
            .field("lang", &self.lang)
            .field("origin", &self.origin)
            .field("signs", &(self.entries.len() - 1))
            .finish()
    }
}

impl CodeTable {
    /// The built-in table of a language pack: `"en"`, `"de"`, `"fr"` or `"es"`
    /// (see [`builtin_langs`](CodeTable::builtin_langs)). The packs are
    /// embedded in the binary, so this works from any folder. An unknown name
    /// is an [`Error::Config`] naming the available ones.
    pub fn builtin(lang: &str) -> Result<CodeTable> {
        match BUILTIN.iter().find(|(name, _)| *name == lang) {
            Some((name, text)) => {
                let origin = PathBuf::from(format!("lexicons/{name}/code.txt"));
                CodeTable::parse(text, &origin)
            }
            None => Err(Error::config(
                "language",
                format!(
                    "no built-in code table for `{lang}`: built in are {}; or load a code table file",
                    BUILTIN_LANGS.join(", ")
                ),
            )),
        }
    }

    /// A built-in pack by language tag (`en`, `de`, `fr`, `es`), or a code
    /// table file by path: what a `--lang` option takes. Anything that is
    /// neither gives an [`Error::Config`] naming the built-in packs.
    pub fn resolve(lang_or_path: &str) -> Result<CodeTable> {
        if Self::builtin_langs().contains(&lang_or_path) {
            return Self::builtin(lang_or_path);
        }
        let path = Path::new(lang_or_path);
        if path.exists() || lang_or_path.contains(['/', '\\', '.']) {
            return Self::from_file(path);
        }
        Err(Error::config(
            "--lang",
            format!(
                "unknown language `{lang_or_path}`: built in are {}; or give the path of a code table file (see lexicons/README.md)",
                Self::builtin_langs().join(", ")
            ),
        ))
    }

    /// Names of the built-in language packs, in a fixed order.
    pub fn builtin_langs() -> &'static [&'static str] {
        &BUILTIN_LANGS
    }

    /// Load and validate a code table file (UTF-8 text, format in
    /// `lexicons/README.md`).
    pub fn from_file(path: &Path) -> Result<CodeTable> {
        let text = crate::fsutil::read_utf8(path, "save the file as UTF-8")?;
        CodeTable::parse(&text, path)
    }

    /// Parse and validate a code table from `text`; `origin` names it in
    /// error messages. Every problem is an [`Error::Input`] naming the line
    /// and field and saying how to fix it.
    pub fn parse(text: &str, origin: &Path) -> Result<CodeTable> {
        Loader::new(origin).run(text)
    }

    /// The language tag of the table, e.g. `"en"`.
    pub fn lang(&self) -> &str {
        &self.lang
    }

    /// The table's `title` line (empty if it has none).
    pub fn title(&self) -> &str {
        &self.title
    }

    /// The table's `source` line: the published code it follows (empty if
    /// it has none).
    pub fn source(&self) -> &str {
        &self.source
    }

    pub(crate) fn role(&self, role: Role) -> Option<u16> {
        match self.roles[role.index()] {
            NONE => None,
            e => Some(e),
        }
    }
}

/// Turns the lines of a table into a [`CodeTable`].
struct Loader<'p> {
    origin: &'p Path,
    entries: Vec<Entry>,
    /// Character (lowercase and capital forms) -> line that defined it.
    char_lines: HashMap<char, usize>,
    roles: [u16; 5],
    lang: Option<String>,
    title: Option<String>,
    source: Option<String>,
    format_line: usize,
}

impl<'p> Loader<'p> {
    fn new(origin: &'p Path) -> Self {
        let space = Entry {
            kind: Kind::Space,
            seq: Seq {
                cells: [0; MAX_SIGN_CELLS],
                len: 1,
            },
            line: 0,
            in_num: true,
            partner: NONE,
        };
        Loader {
            origin,
            entries: vec![space],
            char_lines: HashMap::new(),
            roles: [NONE; 5],
            lang: None,
            title: None,
            source: None,
            format_line: 0,
        }
    }

    fn err(&self, line: usize, field: &str, message: impl Into<String>) -> Error {
        Error::input(Location::file(self.origin).line(line).field(field), message)
    }

    fn run(mut self, text: &str) -> Result<CodeTable> {
        let text = text.strip_prefix('\u{feff}').unwrap_or(text);
        let mut last_line = 0;
        for (i, raw) in text.lines().enumerate() {
            let no = i + 1;
            last_line = no;
            let content = strip_comment(raw);
            let fields: Vec<&str> = content.split_whitespace().collect();
            let Some(&keyword) = fields.first() else {
                continue;
            };
            if self.format_line == 0 {
                self.format(no, &fields)?;
                continue;
            }
            match keyword {
                "format" => {
                    return Err(self.err(
                        no,
                        "format",
                        format!(
                            "a second `format` line (the first is line {}): keep only one",
                            self.format_line
                        ),
                    ))
                }
                "language" => self.language(no, &fields)?,
                "title" | "source" => self.free_text(no, keyword, content)?,
                "letter" => self.letter(no, &fields)?,
                "digit" => self.digit(no, &fields)?,
                "sign" => self.sign(no, &fields)?,
                "indicator" => self.indicator(no, &fields)?,
                other => {
                    return Err(self.err(
                        no,
                        "keyword",
                        format!("unknown keyword `{other}`: a line starts with one of {KEYWORDS}"),
                    ))
                }
            }
        }
        if self.format_line == 0 {
            return Err(self.err(
                last_line.max(1),
                "format",
                format!(
                    "the table is empty: its first line must be `format {FORMAT_TAG} {FORMAT_VERSION}`"
                ),
            ));
        }
        self.finish()
    }

    fn format(&mut self, no: usize, fields: &[&str]) -> Result<()> {
        let want = format!("`format {FORMAT_TAG} {FORMAT_VERSION}`");
        if fields[0] != "format" {
            return Err(self.err(
                no,
                "format",
                format!(
                    "the first line that is not blank or a comment must be {want}, found `{}`",
                    fields[0]
                ),
            ));
        }
        if fields.len() != 3 || fields[1] != FORMAT_TAG {
            return Err(self.err(
                no,
                "format",
                format!(
                    "expected {want}: this is not a tactread code table, or the line is mistyped"
                ),
            ));
        }
        match fields[2].parse::<u32>() {
            Ok(FORMAT_VERSION) => {
                self.format_line = no;
                Ok(())
            }
            Ok(v) => Err(self.err(
                no,
                "format",
                format!(
                    "format version {v}, but this build reads version {FORMAT_VERSION}: use a tactread release that reads version {v}, or rewrite the table for version {FORMAT_VERSION}"
                ),
            )),
            Err(_) => Err(self.err(
                no,
                "format",
                format!("the version `{}` is not a whole number: expected {want}", fields[2]),
            )),
        }
    }

    fn language(&mut self, no: usize, fields: &[&str]) -> Result<()> {
        if self.lang.is_some() {
            return Err(self.err(no, "language", "a second `language` line: keep only one"));
        }
        let [_, tag] = fields else {
            return Err(self.err(
                no,
                "language",
                "write one language tag after `language`, e.g. `language en`",
            ));
        };
        let ok = (2..=12).contains(&tag.len())
            && tag
                .chars()
                .all(|c| c.is_ascii_lowercase() || c.is_ascii_digit() || c == '-')
            && tag.starts_with(|c: char| c.is_ascii_lowercase());
        if !ok {
            return Err(self.err(
                no,
                "language",
                format!("`{tag}` is not a language tag: use 2-12 lowercase letters, digits or '-', starting with a letter (e.g. `en`, `pt-br`)"),
            ));
        }
        self.lang = Some(tag.to_string());
        Ok(())
    }

    fn free_text(&mut self, no: usize, keyword: &str, content: &str) -> Result<()> {
        let value = content.trim_start()[keyword.len()..].trim().to_string();
        if value.is_empty() {
            return Err(self.err(no, keyword, format!("write some text after `{keyword}`")));
        }
        let slot = if keyword == "title" {
            &mut self.title
        } else {
            &mut self.source
        };
        if slot.is_some() {
            return Err(self.err(
                no,
                keyword,
                format!("a second `{keyword}` line: keep only one"),
            ));
        }
        *slot = Some(value);
        Ok(())
    }

    fn claim_char(&mut self, no: usize, field: &str, ch: char) -> Result<()> {
        if let Some(&first) = self.char_lines.get(&ch) {
            return Err(self.err(
                no,
                field,
                format!("`{ch}` is already defined on line {first}: a character has one sign; remove one of the lines"),
            ));
        }
        self.char_lines.insert(ch, no);
        Ok(())
    }

    fn push(&mut self, kind: Kind, seq: Seq, line: usize) {
        self.entries.push(Entry {
            kind,
            seq,
            line,
            in_num: true,
            partner: NONE,
        });
    }

    fn letter(&mut self, no: usize, fields: &[&str]) -> Result<()> {
        let usage = "write `letter <character> <dots>`, optionally followed by `upper <capital>`, e.g. `letter a 1`";
        let (ch_f, dots_f, upper_f) = match fields {
            [_, c, d] => (*c, *d, None),
            [_, c, d, "upper", u] => (*c, *d, Some(*u)),
            [_, _, _, flag, ..] if *flag != "upper" => {
                return Err(self.err(
                    no,
                    "flag",
                    format!("unknown word `{flag}` after the dots: {usage}"),
                ))
            }
            _ => return Err(self.err(no, "letter", usage)),
        };
        let lower = parse_char(ch_f).map_err(|m| self.err(no, "character", m))?;
        if !lower.is_alphabetic() {
            return Err(self.err(
                no,
                "character",
                format!("`{lower}` is not a letter: write digits with `digit` and punctuation with `sign`"),
            ));
        }
        if !lower.to_lowercase().eq(std::iter::once(lower)) {
            return Err(self.err(
                no,
                "character",
                format!(
                    "`{lower}` is a capital: write the lowercase letter (`{}`); capitals are written with the capital indicator",
                    lower.to_lowercase()
                ),
            ));
        }
        let seq = parse_seq(dots_f).map_err(|m| self.err(no, "dots", m))?;
        let upper = match upper_f {
            Some(u) => {
                let u = parse_char(u).map_err(|m| self.err(no, "upper", m))?;
                if !u.to_lowercase().eq(std::iter::once(lower)) {
                    return Err(self.err(
                        no,
                        "upper",
                        format!(
                            "`{u}` is not the capital of `{lower}`: Unicode lowercases it to `{}`",
                            u.to_lowercase()
                        ),
                    ));
                }
                Some(u)
            }
            None => {
                let mut up = lower.to_uppercase();
                match (up.next(), up.next()) {
                    (Some(u), None) if u != lower => Some(u),
                    _ => None,
                }
            }
        };
        self.claim_char(no, "character", lower)?;
        if let Some(u) = upper {
            self.claim_char(no, "upper", u)?;
        }
        self.push(Kind::Letter { lower, upper }, seq, no);
        Ok(())
    }

    fn digit(&mut self, no: usize, fields: &[&str]) -> Result<()> {
        let [_, ch_f, dots_f] = fields else {
            return Err(self.err(
                no,
                "digit",
                "write `digit <digit> <dots>`, e.g. `digit 1 1`",
            ));
        };
        let ch = parse_char(ch_f).map_err(|m| self.err(no, "character", m))?;
        if !ch.is_numeric() {
            return Err(self.err(
                no,
                "character",
                format!("`{ch}` is not a digit: write letters with `letter` and punctuation with `sign`"),
            ));
        }
        let seq = parse_seq(dots_f).map_err(|m| self.err(no, "dots", m))?;
        self.claim_char(no, "character", ch)?;
        self.push(Kind::Digit(ch), seq, no);
        Ok(())
    }

    fn sign(&mut self, no: usize, fields: &[&str]) -> Result<()> {
        if fields.len() < 3 {
            return Err(self.err(
                no,
                "sign",
                "write `sign <character> <dots>`, optionally followed by `number` and/or `opening`, e.g. `sign . 256 number`",
            ));
        }
        let ch = parse_char(fields[1]).map_err(|m| self.err(no, "character", m))?;
        if ch.is_alphanumeric() || ch.is_whitespace() || ch.is_control() {
            return Err(self.err(
                no,
                "character",
                format!("`{}` cannot be a sign: letters go on `letter` lines, digits on `digit` lines, and the space is always the empty cell", ch.escape_debug()),
            ));
        }
        if crate::Cell::from_char(ch).is_some() {
            return Err(self.err(
                no,
                "character",
                "a braille pattern character cannot be a sign: the reader writes those for cells it cannot read",
            ));
        }
        let seq = parse_seq(fields[2]).map_err(|m| self.err(no, "dots", m))?;
        let (mut number, mut opening) = (false, false);
        for &flag in &fields[3..] {
            let slot = match flag {
                "number" => &mut number,
                "opening" => &mut opening,
                other => {
                    return Err(self.err(
                        no,
                        "flag",
                        format!("unknown flag `{other}`: a sign takes `number` (keeps a number going) and `opening` (the reading at the start of a word)"),
                    ))
                }
            };
            if *slot {
                return Err(self.err(no, "flag", format!("`{flag}` given twice: write it once")));
            }
            *slot = true;
        }
        self.claim_char(no, "character", ch)?;
        self.push(
            Kind::Sign {
                ch,
                number,
                opening,
            },
            seq,
            no,
        );
        Ok(())
    }

    fn indicator(&mut self, no: usize, fields: &[&str]) -> Result<()> {
        let names: Vec<&str> = Role::ALL.iter().map(|r| r.name()).collect();
        let [_, role_f, dots_f] = fields else {
            return Err(self.err(
                no,
                "indicator",
                format!("write `indicator <role> <dots>` with a role among {}, e.g. `indicator numeric 3456`", names.join(", ")),
            ));
        };
        let Some(role) = Role::ALL.iter().copied().find(|r| r.name() == *role_f) else {
            return Err(self.err(
                no,
                "role",
                format!(
                    "unknown indicator `{role_f}`: the roles are {}",
                    names.join(", ")
                ),
            ));
        };
        let seq = parse_seq(dots_f).map_err(|m| self.err(no, "dots", m))?;
        if self.roles[role.index()] != NONE {
            let first = self.entries[self.roles[role.index()] as usize].line;
            return Err(self.err(
                no,
                "role",
                format!("indicator `{role_f}` is already defined on line {first}: remove one of the lines"),
            ));
        }
        self.push(Kind::Indicator(role), seq, no);
        self.roles[role.index()] = (self.entries.len() - 1) as u16;
        Ok(())
    }

    fn first_line(&self, pred: impl Fn(&Entry) -> bool) -> Option<usize> {
        self.entries
            .iter()
            .filter(|e| pred(e))
            .map(|e| e.line)
            .min()
    }

    fn finish(mut self) -> Result<CodeTable> {
        let Some(lang) = self.lang.clone() else {
            return Err(self.err(
                self.format_line,
                "language",
                "no `language` line: add one after the format line, e.g. `language en`",
            ));
        };
        if self
            .first_line(|e| matches!(e.kind, Kind::Letter { .. }))
            .is_none()
        {
            return Err(self.err(
                self.format_line,
                "letter",
                "the table defines no letters: add `letter` lines, e.g. `letter a 1`",
            ));
        }
        let has = |r: Role| self.roles[r.index()] != NONE;
        if let Some(line) = self.first_line(|e| matches!(e.kind, Kind::Digit(_))) {
            if !has(Role::Numeric) {
                return Err(self.err(
                    line,
                    "indicator",
                    "the table has digits but no numeric indicator: add `indicator numeric <dots>`, e.g. `indicator numeric 3456`",
                ));
            }
        }
        if let Some(line) =
            self.first_line(|e| matches!(e.kind, Kind::Letter { upper: Some(_), .. }))
        {
            if !has(Role::Capital) {
                return Err(self.err(
                    line,
                    "indicator",
                    "the table has letters with capitals but no capital indicator: add `indicator capital <dots>`, e.g. `indicator capital 6`",
                ));
            }
        }
        let no_digits = self
            .first_line(|e| matches!(e.kind, Kind::Digit(_)))
            .is_none();
        for r in [Role::CapitalEnd, Role::Numeric, Role::Letter] {
            let line = match self.roles[r.index()] {
                NONE => continue,
                e => self.entries[e as usize].line,
            };
            if r == Role::CapitalEnd && !has(Role::CapitalWord) {
                return Err(self.err(
                    line,
                    "role",
                    "a `capital-end` indicator needs a `capital-word` indicator to end: add one or remove this line",
                ));
            }
            if r != Role::CapitalEnd && no_digits {
                return Err(self.err(
                    line,
                    "role",
                    format!("indicator `{}` is about numbers, but the table has no digits: add `digit` lines or remove this line", r.name()),
                ));
            }
        }
        if let Some(line) = self.first_line(|e| matches!(e.kind, Kind::Sign { number: true, .. })) {
            if no_digits {
                return Err(self.err(
                    line,
                    "flag",
                    "`number` keeps a number going, but the table has no digits: add `digit` lines or drop the flag",
                ));
            }
        }

        let all: Vec<usize> = (0..self.entries.len()).collect();
        let is_digit = |e: &Entry| matches!(e.kind, Kind::Digit(_));
        let is_end = |e: &Entry| matches!(e.kind, Kind::Indicator(Role::CapitalEnd));
        let text: Vec<usize> = all
            .iter()
            .copied()
            .filter(|&i| !is_digit(&self.entries[i]) && !is_end(&self.entries[i]))
            .collect();
        let word: Vec<usize> = all
            .iter()
            .copied()
            .filter(|&i| !is_digit(&self.entries[i]))
            .collect();
        self.check_context(&text, "in text")?;
        self.check_context(&word, "inside a capitalised word")?;

        // Inside numbers: digits, plus every text sign not tangled with a
        // digit. Signs that must work in numbers are checked strictly.
        let digits: Vec<usize> = all
            .iter()
            .copied()
            .filter(|&i| is_digit(&self.entries[i]))
            .collect();
        let mut strict = digits.clone();
        strict.extend(text.iter().copied().filter(|&i| {
            matches!(
                self.entries[i].kind,
                Kind::Sign { number: true, .. } | Kind::Indicator(Role::Letter)
            )
        }));
        self.check_context(&strict, "inside a number")?;
        for &i in &text {
            let tangled = digits.iter().any(|&d| {
                let (a, b) = (self.entries[i].seq, self.entries[d].seq);
                a.as_slice().starts_with(b.as_slice()) || b.as_slice().starts_with(a.as_slice())
            });
            self.entries[i].in_num = !tangled;
        }
        let num: Vec<usize> = digits
            .iter()
            .copied()
            .chain(text.iter().copied().filter(|&i| self.entries[i].in_num))
            .collect();

        let build = |members: &[usize], entries: &[Entry]| {
            let mut t = Trie::new();
            for &i in members {
                let e = &entries[i];
                let opening = matches!(e.kind, Kind::Sign { opening: true, .. });
                t.insert(e.seq.as_slice(), i as u16, opening);
            }
            t
        };
        let text_trie = build(&text, &self.entries);
        let word_trie = build(&word, &self.entries);
        let num_trie = build(&num, &self.entries);

        let mut chars = HashMap::new();
        for (i, e) in self.entries.iter().enumerate() {
            let i = i as u16;
            match e.kind {
                Kind::Letter { lower, upper } => {
                    chars.insert(lower, (i, false));
                    if let Some(u) = upper {
                        chars.insert(u, (i, true));
                    }
                }
                Kind::Digit(ch) | Kind::Sign { ch, .. } => {
                    chars.insert(ch, (i, false));
                }
                Kind::Space | Kind::Indicator(_) => {}
            }
        }
        let has_opening = self.entries.iter().any(|e| e.partner != NONE);
        Ok(CodeTable {
            lang,
            title: self.title.unwrap_or_default(),
            source: self.source.unwrap_or_default(),
            origin: self.origin.to_path_buf(),
            entries: self.entries,
            text: text_trie,
            word: word_trie,
            num: num_trie,
            chars,
            roles: self.roles,
            has_opening,
        })
    }

    /// Within one reading context, no two signs may have the same cells
    /// (except an opening sign and its plain twin), and no sign may be the
    /// start of another (except indicators, which never stand before each
    /// other in encoded text).
    fn check_context(&mut self, members: &[usize], context: &str) -> Result<()> {
        for (x, &a) in members.iter().enumerate() {
            for &b in &members[x + 1..] {
                let (ea, eb) = (&self.entries[a], &self.entries[b]);
                let (sa, sb) = (ea.seq.as_slice(), eb.seq.as_slice());
                let (early, late) = if ea.line <= eb.line {
                    (ea, eb)
                } else {
                    (eb, ea)
                };
                if sa == sb {
                    let twins = match (ea.kind, eb.kind) {
                        (Kind::Sign { opening: oa, .. }, Kind::Sign { opening: ob, .. }) => {
                            oa != ob
                        }
                        _ => false,
                    };
                    if twins && (ea.partner == NONE || ea.partner == b as u16) {
                        self.entries[a].partner = b as u16;
                        self.entries[b].partner = a as u16;
                        continue;
                    }
                    return Err(self.err(
                        late.line,
                        "dots",
                        format!(
                            "dots {} are already {} (line {}) {context}: a reader could not tell {} from it; give one of them other dots{}",
                            late.seq.dots(),
                            early.describe(),
                            early.line,
                            late.describe(),
                            if twins { "" } else { ", or, if one of them is read only at the start of a word, mark that one `opening`" },
                        ),
                    ));
                }
                if (sa.starts_with(sb) || sb.starts_with(sa))
                    && !(ea.is_indicator() && eb.is_indicator())
                {
                    let (short, long) = if sa.len() < sb.len() {
                        (ea, eb)
                    } else {
                        (eb, ea)
                    };
                    return Err(self.err(
                        late.line,
                        "dots",
                        format!(
                            "{} (dots {}, line {}) is the start of {} (dots {}, line {}) {context}: a reader could not tell {} followed by another sign from {}; give one of them other dots",
                            short.describe(),
                            short.seq.dots(),
                            short.line,
                            long.describe(),
                            long.seq.dots(),
                            long.line,
                            short.describe(),
                            long.describe(),
                        ),
                    ));
                }
            }
        }
        Ok(())
    }
}

/// The line without its comment: `#` at the start or after whitespace begins
/// a comment (write the character `#` itself as `U+0023`).
fn strip_comment(line: &str) -> &str {
    let mut prev_space = true;
    for (i, c) in line.char_indices() {
        if c == '#' && prev_space {
            return &line[..i];
        }
        prev_space = c.is_whitespace();
    }
    line
}

/// One character, written as itself or as `U+XXXX`.
fn parse_char(field: &str) -> std::result::Result<char, String> {
    if let Some(hex) = field.strip_prefix("U+").filter(|h| !h.is_empty()) {
        return u32::from_str_radix(hex, 16)
            .ok()
            .filter(|_| hex.len() <= 6)
            .and_then(char::from_u32)
            .ok_or_else(|| format!("`{field}` is not a Unicode code point: write U+ and 4 to 6 hex digits, e.g. U+0023"));
    }
    let mut it = field.chars();
    match (it.next(), it.next()) {
        (Some(c), None) => Ok(c),
        _ => Err(format!(
            "`{field}` is more than one character: a sign writes exactly one character (letter groups are not supported by format version {FORMAT_VERSION})"
        )),
    }
}

/// Cells written as dot numbers, cells joined by `-`: `1245`, `5-126`.
fn parse_seq(field: &str) -> std::result::Result<Seq, String> {
    let parts: Vec<&str> = field.split('-').collect();
    if parts.len() > MAX_SIGN_CELLS {
        return Err(format!(
            "`{field}` has {} cells: a sign has at most {MAX_SIGN_CELLS}",
            parts.len()
        ));
    }
    let mut seq = Seq {
        cells: [0; MAX_SIGN_CELLS],
        len: parts.len() as u8,
    };
    for (k, part) in parts.iter().enumerate() {
        if part.is_empty() {
            return Err(format!(
                "`{field}` has an empty cell: write each cell's dots (e.g. `5-126`), joined by single '-'"
            ));
        }
        if *part == "0" {
            return Err(
                "dots `0` is the empty cell, which is always the space between words: give the sign raised dots".to_string(),
            );
        }
        let mut mask = 0u8;
        let mut last = 0u8;
        for c in part.chars() {
            let d = match c {
                '1'..='6' => c as u8 - b'0',
                '7' | '8' => {
                    return Err(format!(
                        "dot {c} in `{field}`: code tables describe 6-dot braille, so dots are 1 to 6"
                    ))
                }
                _ => {
                    return Err(format!(
                        "`{c}` in `{field}` is not a dot number: dots are 1 to 6, written together (`1245`), cells joined by '-'"
                    ))
                }
            };
            if d <= last {
                return Err(format!(
                    "`{part}` in `{field}`: write each dot once, in increasing order (e.g. `1245`)"
                ));
            }
            last = d;
            mask |= 1 << (d - 1);
        }
        seq.cells[k] = mask;
    }
    Ok(seq)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Three lines; the body starts on line 4.
    const HEAD: &str = "format tactread-code 1\nlanguage xx\nindicator capital 6\n";

    fn load(body: &str) -> Result<CodeTable> {
        CodeTable::parse(&format!("{HEAD}{body}"), Path::new("bad.txt"))
    }

    /// The error must be an Input error at `line` and `field` of bad.txt,
    /// whose message contains `words`.
    fn fails_at(body: &str, line: usize, field: &str, words: &str) {
        check(load(body), line, field, words)
    }

    fn check(r: Result<CodeTable>, line: usize, field: &str, words: &str) {
        match r {
            Err(Error::Input { at, message }) => {
                assert_eq!(at.file, Path::new("bad.txt"), "{message}");
                assert_eq!(at.line, Some(line), "{message}");
                assert_eq!(at.field.as_deref(), Some(field), "{message}");
                assert!(message.contains(words), "{message:?} lacks {words:?}");
            }
            Err(other) => panic!("expected an input error, got {other}"),
            Ok(_) => panic!("table loaded but should fail"),
        }
    }

    #[test]
    fn builtin_tables_load_and_name_their_language() {
        for &lang in CodeTable::builtin_langs() {
            let t = CodeTable::builtin(lang).unwrap();
            assert_eq!(t.lang(), lang);
            assert!(!t.source().is_empty());
        }
    }

    #[test]
    fn unknown_builtin_is_a_config_error_naming_the_packs() {
        match CodeTable::builtin("xx") {
            Err(Error::Config { message, .. }) => {
                assert!(message.contains("en, de, fr, es"), "{message}")
            }
            other => panic!("unexpected {other:?}"),
        }
    }

    #[test]
    fn minimal_table_loads() {
        let t = load("letter a 1\nletter b 12 # a comment\n").unwrap();
        assert_eq!(t.lang(), "xx");
        assert!(t.role(Role::Capital).is_some());
        assert!(t.role(Role::Numeric).is_none());
    }

    #[test]
    fn bad_dot_numbers() {
        fails_at("letter a 17\n", 4, "dots", "dots are 1 to 6");
        fails_at("letter a 1x\n", 4, "dots", "not a dot number");
        fails_at("letter a 21\n", 4, "dots", "increasing order");
        fails_at("letter a 11\n", 4, "dots", "increasing order");
        fails_at("letter a 0\n", 4, "dots", "empty cell");
        fails_at("letter a 5--1\n", 4, "dots", "empty cell");
        fails_at("letter a 1-2-3-4-5\n", 4, "dots", "at most 4");
    }

    #[test]
    fn duplicate_character() {
        fails_at("letter a 1\n\nletter a 12\n", 6, "character", "line 4");
        fails_at(
            "letter a 1\nsign - 36\nsign - 35\n",
            6,
            "character",
            "already defined on line 5",
        );
        fails_at(
            "letter a 1\nindicator capital 46\n",
            5,
            "role",
            "already defined on line 3",
        );
    }

    #[test]
    fn two_signs_on_one_cell() {
        fails_at("letter a 1\nletter b 1\n", 5, "dots", "letter `a` (line 4)");
        fails_at("letter a 1\nsign ? 1\n", 5, "dots", "could not tell");
        // A sign that is the start of another is ambiguous too.
        fails_at("letter a 1\nsign ( 1-126\n", 5, "dots", "is the start of");
        fails_at("letter a 1\nsign ( 6-126\n", 5, "dots", "is the start of");
        // Digits may share cells with letters (numeric mode tells them
        // apart), but not with each other.
        fails_at(
            "letter a 1\nindicator numeric 3456\ndigit 1 1\ndigit 2 1\n",
            7,
            "dots",
            "inside a number",
        );
        // A sign that must keep a number going cannot be a digit's cells.
        fails_at(
            "letter a 1\nindicator numeric 3456\ndigit 1 12\nsign . 12-3 number\n",
            7,
            "dots",
            "inside a number",
        );
        // An opening twin is allowed; two plain twins or a third sign are not.
        assert!(load("letter a 1\nsign ? 236\nsign “ 236 opening\n").is_ok());
        fails_at("letter a 1\nsign ? 236\nsign ! 236\n", 6, "dots", "opening");
        fails_at(
            "letter a 1\nsign ? 236\nsign “ 236 opening\nsign « 236 opening\n",
            7,
            "dots",
            "already",
        );
    }

    #[test]
    fn unknown_keywords_roles_and_flags() {
        fails_at(
            "letter a 1\nletters b 12\n",
            5,
            "keyword",
            "unknown keyword `letters`",
        );
        fails_at(
            "letter a 1\nindicator italic 46\n",
            5,
            "role",
            "unknown indicator `italic`",
        );
        fails_at(
            "letter a 1\nsign . 256 numeric\n",
            5,
            "flag",
            "unknown flag `numeric`",
        );
        fails_at(
            "letter a 1 capital A\n",
            4,
            "flag",
            "unknown word `capital`",
        );
    }

    #[test]
    fn missing_required_entries() {
        fails_at(
            "letter a 1\ndigit 1 1\n",
            5,
            "indicator",
            "numeric indicator",
        );
        fails_at(
            "letter a 1\nindicator numeric 3456\n",
            5,
            "role",
            "no digits",
        );
        fails_at("letter a 1\nsign . 256 number\n", 5, "flag", "no digits");
        fails_at(
            "indicator capital-end 6-3\nletter a 1\n",
            4,
            "role",
            "capital-word",
        );
        check(
            CodeTable::parse("format tactread-code 1\nletter a 1\n", Path::new("bad.txt")),
            1,
            "language",
            "no `language` line",
        );
        fails_at("title Nothing yet\n", 1, "letter", "no letters");
        // Letters with capitals need a capital indicator.
        check(
            CodeTable::parse(
                "format tactread-code 1\nlanguage xx\n\nletter a 1\n",
                Path::new("bad.txt"),
            ),
            4,
            "indicator",
            "capital indicator",
        );
    }

    #[test]
    fn letters_and_their_capitals() {
        // Explicit capitals are checked against Unicode case mapping.
        fails_at("letter ß 2346 upper S\n", 4, "upper", "not the capital");
        fails_at("letter A 1\n", 4, "character", "lowercase");
        fails_at("letter 7 1\n", 4, "character", "not a letter");
        let t = load("letter ß 2346 upper ẞ\n").unwrap();
        assert_eq!(t.chars.get(&'ẞ').map(|p| p.1), Some(true));
    }

    #[test]
    fn format_line_and_version() {
        let parse = |t: &str| CodeTable::parse(t, Path::new("bad.txt"));
        check(
            parse("# comment\n\nformat tactread-code 2\nlanguage xx\n"),
            3,
            "format",
            "this build reads version 1",
        );
        check(parse("language xx\n"), 1, "format", "first line");
        check(
            parse("format other-thing 1\n"),
            1,
            "format",
            "not a tactread code table",
        );
        check(
            parse("format tactread-code one\n"),
            1,
            "format",
            "whole number",
        );
        check(parse("# only a comment\n"), 1, "format", "empty");
        fails_at("format tactread-code 1\n", 4, "format", "second");
    }

    #[test]
    fn characters_by_code_point_and_comments() {
        // "x#y" is one field (no space before '#') and more than one character.
        fails_at(
            "letter a 1\nsign U+0023 3456 # number sign\nsign x#y 3\n",
            6,
            "character",
            "more than one character",
        );
        let t = load("letter a 1\nsign U+0023 3456 # number sign\n").unwrap();
        assert!(t.chars.contains_key(&'#'));
        fails_at(
            "letter a 1\nsign U+D800 3456\n",
            5,
            "character",
            "code point",
        );
        fails_at(
            "letter a 1\nsign ⠿ 3456\n",
            5,
            "character",
            "braille pattern",
        );
        fails_at(
            "letter a 1\nsign b 3456\n",
            5,
            "character",
            "cannot be a sign",
        );
    }

    #[test]
    fn not_utf8_names_the_line() {
        let dir = crate::testutil::test_dir("table");
        let path = dir.join("latin1.txt");
        std::fs::write(
            &path,
            b"format tactread-code 1\nlanguage xx\nletter \xe9 1\n",
        )
        .unwrap();
        match CodeTable::from_file(&path) {
            Err(Error::Input { at, message }) => {
                assert_eq!(at.line, Some(3));
                assert!(message.contains("UTF-8"), "{message}");
            }
            other => panic!("unexpected {other:?}"),
        }
    }
}
