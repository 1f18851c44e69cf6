//! Lexicons: word lists with counts, compiled into an `fst` map (word ->
//! count) inside a small tagged file, near-word search (a Levenshtein
//! automaton walking the fst, then, once a run has asked enough queries, a
//! deletion-neighbourhood index: `deletes.rs`), and whole-word rescoring of
//! decoded text.
//!
//! ## Word lists
//!
//! One word per line, optionally followed by a tab and a whole-number count
//! (a word without a count counts 1). Blank lines are skipped. Words are
//! folded to lower case; a word listed twice (after folding) has its counts
//! added. A line with more than one tab, a word with a space in it, or a
//! count that is not a whole number is an error naming the file and line.
//!
//! ## Lexicon files
//!
//! ```text
//! offset  size  content
//! 0       16    b"tactread-lexicon"                 format tag
//! 16      4     u32 little-endian format version    (FORMAT_VERSION)
//! 20      8     u64 LE sum of all counts
//! 28      2     u16 LE length n of the language tag
//! 30      n     language tag, UTF-8 (empty: any language)
//! 30+n    ...   fst map bytes (word -> count), fst crate 0.4 format
//! ```
//!
//! Loading checks the tag, the version and the fst map's own CRC-32C
//! checksum (so a damaged file is refused at load instead of failing inside
//! the fst crate later) and refuses anything else with [`Error::Format`].
//!
//! ## Builtin lexicons
//!
//! The four builtin languages' word lists (`lexicons/<lang>/words.txt`,
//! made from wordfreq data by `scripts/make_wordlists.py`) are embedded in
//! the binary as text and compiled when [`Lexicon::builtin`] is called:
//! parsing 40,000 lines and building the fst takes about 0.1 s on the
//! project machine (see docs/benchmarks.md, "Decoder"), once per process and
//! about what the network needs for a few seconds of recording. That keeps
//! one source of truth in the repository (the text list, reviewable in a
//! diff) instead of a binary file that can fall out of step with it; a user
//! who decodes many short files in separate processes can build the `.lex`
//! once with `tactread lexicon build` and pass it instead.

mod deletes;
mod rescore;

pub use rescore::{
    rescore, tune, RescoreWeights, Rescored, TuneItem, Tuned, WeightGrid, WordCandidate, WordChoice,
};

pub(crate) use rescore::rescore_pruned;

use crate::fsutil::write_atomic;
use crate::{Error, Location, Result};
use fst::{IntoStreamer, Map, MapBuilder, Streamer};
use std::collections::{BTreeMap, HashMap};
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicUsize, Ordering};
use std::sync::{Mutex, OnceLock};

/// Format tag at the start of every lexicon file.
pub const FORMAT_TAG: &[u8; 16] = b"tactread-lexicon";
/// Lexicon file format version this build writes and reads.
pub const FORMAT_VERSION: u32 = 1;

/// Languages with a builtin word list.
pub const BUILTIN_LANGS: [&str; 4] = ["en", "de", "fr", "es"];

/// One line of a word list.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct WordEntry {
    /// The word, folded to lower case.
    pub word: String,
    /// Its count (1 when the line gives none).
    pub count: u64,
    /// 1-based line number in the word list.
    pub line: usize,
}

/// Parse a word list (see the module docs for the format). `source` names
/// the file in error messages.
pub fn parse_word_list(text: &str, source: &Path) -> Result<Vec<WordEntry>> {
    let mut out = Vec::new();
    for (i, raw) in text.lines().enumerate() {
        let line = i + 1;
        let at = || Location::file(source).line(line);
        let l = raw.strip_suffix('\r').unwrap_or(raw);
        if l.trim().is_empty() {
            continue;
        }
        let fields: Vec<&str> = l.split('\t').collect();
        if fields.len() > 2 {
            return Err(Error::input(
                at(),
                format!(
                    "{} tab-separated fields: write `word` or `word<TAB>count`",
                    fields.len()
                ),
            ));
        }
        let word = fields[0].trim();
        if word.is_empty() {
            return Err(Error::input(
                at().field("word"),
                "the word is empty: write `word` or `word<TAB>count`",
            ));
        }
        if word.chars().any(char::is_whitespace) {
            return Err(Error::input(
                at().field("word"),
                format!(
                    "{word:?} contains a space: one word per line, and separate a count with a tab"
                ),
            ));
        }
        let count = match fields.get(1) {
            None => 1,
            Some(c) => c.trim().parse::<u64>().map_err(|_| {
                Error::input(
                    at().field("count"),
                    format!("{:?} is not a whole number: the count after the tab must be an integer such as 42", c.trim()),
                )
            })?,
        };
        out.push(WordEntry {
            word: word.to_lowercase(),
            count,
            line,
        });
    }
    Ok(out)
}

/// Read and parse a word list file (UTF-8 text; invalid UTF-8 is an
/// [`Error::Input`] naming the line).
pub fn read_word_list(path: &Path) -> Result<Vec<WordEntry>> {
    let text = crate::text_file::read_utf8(path, "save the file as UTF-8")?;
    parse_word_list(&text, path)
}

/// A word list compiled for lookups: word -> count, in an fst map.
pub struct Lexicon {
    map: Map<Vec<u8>>,
    total: u64,
    lang: String,
    /// Results of [`Lexicon::near`] by (query, edits): running words repeat
    /// (Zipf), and building a Levenshtein automaton costs far more than a
    /// lookup. Cleared when it reaches `NEAR_CACHE` entries.
    near_cache: Mutex<HashMap<(String, u32), Vec<NearWord>>>,
    /// Length in bytes of the longest word (0 when empty): no query with
    /// more characters than this plus the edit budget can be near a word.
    max_word_bytes: usize,
    /// The deletion index that answers most [`Lexicon::near`] queries
    /// (`deletes.rs`), built after [`INDEX_AFTER`] queries went to the fst
    /// walk: a short run does not pay for it.
    deletes: OnceLock<deletes::DeleteIndex>,
    /// Queries answered by the fst walk so far.
    walks: AtomicUsize,
}

/// Queries answered by walking the fst before [`Lexicon::near`] builds its
/// deletion index (about 0.1-0.5 ms per query; the index takes about 60 ms
/// to build for the builtin `en` lexicon and answers a query in tens of
/// microseconds).
const INDEX_AFTER: usize = 16;

/// Most entries kept in a lexicon's near-word cache.
const NEAR_CACHE: usize = 20_000;

impl std::fmt::Debug for Lexicon {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("Lexicon")
            .field("words", &self.map.len())
            .field("total", &self.total)
            .field("lang", &self.lang)
            .finish()
    }
}

/// A word near a query, from [`Lexicon::near`].
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct NearWord {
    /// The lexicon's word.
    pub word: String,
    /// Its count.
    pub count: u64,
    /// Levenshtein distance (in characters) from the query.
    pub edits: usize,
}

impl Lexicon {
    /// Compile entries (duplicates add their counts). `lang` tags the
    /// lexicon with the language it was made for (empty: any).
    pub fn from_entries(entries: &[WordEntry], lang: &str) -> Result<Lexicon> {
        let mut words: BTreeMap<&str, u64> = BTreeMap::new();
        for e in entries {
            let c = words.entry(e.word.as_str()).or_insert(0);
            *c = c.saturating_add(e.count);
        }
        let mut builder = MapBuilder::memory();
        let mut total = 0u64;
        let max_word_bytes = words.keys().map(|w| w.len()).max().unwrap_or(0);
        for (w, &c) in &words {
            builder.insert(w, c).map_err(|e| {
                Error::config("word list", format!("cannot build the lexicon: {e}"))
            })?;
            total = total.saturating_add(c);
        }
        let bytes = builder
            .into_inner()
            .map_err(|e| Error::config("word list", format!("cannot build the lexicon: {e}")))?;
        let map = Map::new(bytes)
            .map_err(|e| Error::config("word list", format!("cannot build the lexicon: {e}")))?;
        Ok(Lexicon {
            map,
            total,
            lang: lang.to_string(),
            near_cache: Mutex::default(),
            max_word_bytes,
            deletes: OnceLock::new(),
            walks: AtomicUsize::new(0),
        })
    }

    /// Parse and compile a word list file.
    pub fn from_word_list_file(path: &Path, lang: &str) -> Result<Lexicon> {
        Lexicon::from_entries(&read_word_list(path)?, lang)
    }

    /// The builtin lexicon of `lang` (one of [`BUILTIN_LANGS`]), compiled
    /// from the embedded word list.
    pub fn builtin(lang: &str) -> Result<Lexicon> {
        let text = match lang {
            "en" => include_str!("../../lexicons/en/words.txt"),
            "de" => include_str!("../../lexicons/de/words.txt"),
            "fr" => include_str!("../../lexicons/fr/words.txt"),
            "es" => include_str!("../../lexicons/es/words.txt"),
            other => {
                return Err(Error::config(
                    "language",
                    format!(
                        "no builtin lexicon for `{other}`: choose one of {}, or build one with `tactread lexicon build`",
                        BUILTIN_LANGS.join(", ")
                    ),
                ))
            }
        };
        let source = PathBuf::from(format!("lexicons/{lang}/words.txt"));
        Lexicon::from_entries(&parse_word_list(text, &source)?, lang)
    }

    /// Number of distinct words.
    pub fn len(&self) -> usize {
        self.map.len()
    }

    /// Whether the lexicon holds no word.
    pub fn is_empty(&self) -> bool {
        self.map.is_empty()
    }

    /// The language tag (empty: any).
    pub fn lang(&self) -> &str {
        &self.lang
    }

    /// Sum of all counts.
    pub fn total(&self) -> u64 {
        self.total
    }

    /// The count of `word` (folded to lower case), if listed.
    pub fn count(&self, word: &str) -> Option<u64> {
        self.map.get(word.to_lowercase())
    }

    /// `ln((count + 1) / (total + words))` (add-one smoothing, so that a
    /// listed word with count 0 still has a finite value), or `None` when
    /// `word` is not listed.
    pub fn log_prob(&self, word: &str) -> Option<f64> {
        self.count(word).map(|c| self.log_prob_of_count(c))
    }

    pub(crate) fn log_prob_of_count(&self, count: u64) -> f64 {
        ((count as f64 + 1.0) / (self.total as f64 + self.map.len() as f64)).ln()
    }

    /// Every listed word within `max_edits` character edits (insertions,
    /// deletions, substitutions) of `query` (folded to lower case), found by
    /// running a Levenshtein automaton over the fst (our own lazy one, see
    /// the source for why not fst's) or, after the first 16 such walks, with
    /// a deletion-neighbourhood index built once (same answers, about ten
    /// times faster); nearest first, then most frequent.
    pub fn near(&self, query: &str, max_edits: u32) -> Vec<NearWord> {
        let q = query.to_lowercase();
        // A query longer than the longest listed word by more than
        // `max_edits` characters can be near no word.
        let reach = self.max_word_bytes.saturating_add(max_edits as usize);
        if q.chars().count() > reach {
            return Vec::new();
        }
        let key = (q, max_edits);
        if let Ok(cache) = self.near_cache.lock() {
            if let Some(hit) = cache.get(&key) {
                return hit.clone();
            }
        }
        let out = self.near_uncached(&key.0, max_edits);
        if let Ok(mut cache) = self.near_cache.lock() {
            if cache.len() >= NEAR_CACHE {
                cache.clear();
            }
            cache.insert(key, out.clone());
        }
        out
    }

    /// Forget the results [`Lexicon::near`] remembers (it keeps up to
    /// 20,000 queries, since running text repeats its words); for
    /// benchmarks that must time cold lookups.
    pub fn clear_cache(&self) {
        if let Ok(mut cache) = self.near_cache.lock() {
            cache.clear();
        }
    }

    /// The deletion index, once enough queries asked for it.
    fn deletion_index(&self) -> Option<&deletes::DeleteIndex> {
        if let Some(index) = self.deletes.get() {
            return Some(index);
        }
        if self.walks.load(Ordering::Relaxed) < INDEX_AFTER {
            return None;
        }
        Some(self.built_deletion_index())
    }

    /// The deletion index, built now if not yet.
    fn built_deletion_index(&self) -> &deletes::DeleteIndex {
        self.deletes.get_or_init(|| {
            let mut index = deletes::DeleteIndex::new();
            let mut scratch = Default::default();
            let mut stream = self.map.stream();
            while let Some((k, count)) = stream.next() {
                if let Ok(word) = std::str::from_utf8(k) {
                    index.add(word, count, &mut scratch);
                }
            }
            index.finish()
        })
    }

    fn near_uncached(&self, q: &str, max_edits: u32) -> Vec<NearWord> {
        let found = self
            .deletion_index()
            .and_then(|index| index.near(q, max_edits));
        let mut out = match found {
            Some(found) => found
                .into_iter()
                .map(|(word, count, edits)| NearWord {
                    word: word.to_string(),
                    count,
                    edits,
                })
                .collect(),
            None => {
                self.walks.fetch_add(1, Ordering::Relaxed);
                self.near_by_walk(q, max_edits)
            }
        };
        out.sort_by(|a, b| {
            a.edits
                .cmp(&b.edits)
                .then(b.count.cmp(&a.count))
                .then_with(|| a.word.cmp(&b.word))
        });
        out
    }

    /// Every word within `max_edits` of `q`, unordered, by walking the fst
    /// with a Levenshtein automaton.
    fn near_by_walk(&self, q: &str, max_edits: u32) -> Vec<NearWord> {
        let mut out = Vec::new();
        let mut collect = |k: &[u8], count: u64| {
            if let Ok(word) = std::str::from_utf8(k) {
                out.push(NearWord {
                    word: word.to_string(),
                    count,
                    edits: strsim::levenshtein(q, word),
                });
            }
        };
        // Our own lazy automaton rather than fst's `Levenshtein`: fst 0.4.7's
        // DFA misses neighbours whose differing characters share a UTF-8
        // lead byte (German "grösse" -> "grüsse", see the tests), and its
        // construction costs milliseconds for two edits. The lazy one
        // computes only the rows the search visits.
        let lev = LazyLevenshtein::new(q, max_edits);
        let mut stream = self.map.search(&lev).into_stream();
        while let Some((k, count)) = stream.next() {
            collect(k, count);
        }
        out
    }

    /// Every word with its count, in byte order.
    pub fn words(&self) -> Vec<(String, u64)> {
        let mut out = Vec::with_capacity(self.map.len());
        let mut stream = self.map.stream();
        while let Some((k, v)) = stream.next() {
            out.push((String::from_utf8_lossy(k).into_owned(), v));
        }
        out
    }

    /// The lexicon file's bytes (see the module docs for the layout).
    pub fn to_bytes(&self) -> Vec<u8> {
        let fst = self.map.as_fst().as_bytes();
        let lang = self.lang.as_bytes();
        let mut out = Vec::with_capacity(30 + lang.len() + fst.len());
        out.extend_from_slice(FORMAT_TAG);
        out.extend_from_slice(&FORMAT_VERSION.to_le_bytes());
        out.extend_from_slice(&self.total.to_le_bytes());
        out.extend_from_slice(&(lang.len() as u16).to_le_bytes());
        out.extend_from_slice(lang);
        out.extend_from_slice(fst);
        out
    }

    /// Read a lexicon from a file's bytes; `path` names it in errors.
    pub fn from_bytes(bytes: Vec<u8>, path: &Path) -> Result<Lexicon> {
        let expected = format!("tactread-lexicon version {FORMAT_VERSION}");
        let fail = |found: String| Error::Format {
            path: path.to_path_buf(),
            expected: expected.clone(),
            found,
            hint: "rebuild it from its word list with `tactread lexicon build WORDS --out PATH`"
                .into(),
        };
        if bytes.len() < 30 || &bytes[..16] != FORMAT_TAG {
            return Err(fail("a file that is not a tactread lexicon".into()));
        }
        let version = u32::from_le_bytes([bytes[16], bytes[17], bytes[18], bytes[19]]);
        if version != FORMAT_VERSION {
            return Err(fail(format!("tactread-lexicon version {version}")));
        }
        let mut total = [0u8; 8];
        total.copy_from_slice(&bytes[20..28]);
        let total = u64::from_le_bytes(total);
        let n = u16::from_le_bytes([bytes[28], bytes[29]]) as usize;
        if bytes.len() < 30 + n {
            return Err(fail("a truncated lexicon (header cut short)".into()));
        }
        let lang = std::str::from_utf8(&bytes[30..30 + n])
            .map_err(|_| fail("a language tag that is not UTF-8".into()))?
            .to_string();
        let map = Map::new(bytes[30 + n..].to_vec())
            .map_err(|e| fail(format!("a damaged word map ({})", fst_detail(&e))))?;
        // The fst crate reads its nodes without bounds checks of its own
        // beyond Rust's, so a damaged map panics on first use: check its
        // CRC-32C over every byte before handing it out.
        map.as_fst()
            .verify()
            .map_err(|e| fail(format!("a damaged word map ({})", fst_detail(&e))))?;
        let mut max_word_bytes = 0;
        let mut keys = map.keys();
        while let Some(k) = keys.next() {
            max_word_bytes = max_word_bytes.max(k.len());
        }
        Ok(Lexicon {
            map,
            total,
            lang,
            near_cache: Mutex::default(),
            max_word_bytes,
            deletes: OnceLock::new(),
            walks: AtomicUsize::new(0),
        })
    }

    /// Load a lexicon file.
    pub fn load(path: &Path) -> Result<Lexicon> {
        let bytes = std::fs::read(path).map_err(|e| Error::io("cannot read", path, e))?;
        Lexicon::from_bytes(bytes, path)
    }

    /// Write the lexicon to `path` atomically (a temporary file in the same
    /// folder, then a rename). Overwrites an existing file: callers that must
    /// not do so check first.
    pub fn save(&self, path: &Path) -> Result<()> {
        write_atomic(path, &self.to_bytes())
    }
}

/// A Levenshtein automaton over UTF-8 bytes that computes the edit-distance
/// row of each character as the fst search reaches it (the classic
/// dynamic-programming walk of a trie; Levenshtein 1966 distance, Wagner and
/// Fischer 1974 recurrence), for use with [`fst::Map::search`]. Queries of
/// more than [`MAX_QUERY`] characters match nothing.
pub(crate) struct LazyLevenshtein {
    query: Vec<char>,
    dist: u8,
}

/// Longest query [`LazyLevenshtein`] searches for.
pub(crate) const MAX_QUERY: usize = 31;

/// A row of distances from the query's prefixes (capped at `dist + 1`),
/// plus the bytes of a character not yet complete. Fixed-size, so states
/// are copied, never allocated.
#[derive(Clone, Copy, Debug)]
pub(crate) struct LevState {
    row: [u8; MAX_QUERY + 1],
    pending: [u8; 4],
    len: u8,
}

impl LazyLevenshtein {
    pub(crate) fn new(query: &str, dist: u32) -> Self {
        LazyLevenshtein {
            query: query.chars().collect(),
            dist: dist.min(254) as u8,
        }
    }
}

fn utf8_width(first: u8) -> usize {
    match first {
        0x00..=0x7F => 1,
        0xC0..=0xDF => 2,
        0xE0..=0xEF => 3,
        _ => 4,
    }
}

impl fst::Automaton for LazyLevenshtein {
    type State = Option<LevState>;

    fn start(&self) -> Option<LevState> {
        let n = self.query.len();
        if n > MAX_QUERY {
            return None;
        }
        let mut row = [0u8; MAX_QUERY + 1];
        for (i, r) in row.iter_mut().enumerate().take(n + 1) {
            *r = (i as u8).min(self.dist + 1);
        }
        Some(LevState {
            row,
            pending: [0; 4],
            len: 0,
        })
    }

    fn is_match(&self, state: &Option<LevState>) -> bool {
        state
            .as_ref()
            .is_some_and(|s| s.len == 0 && s.row[self.query.len()] <= self.dist)
    }

    fn can_match(&self, state: &Option<LevState>) -> bool {
        state.is_some()
    }

    fn accept(&self, state: &Option<LevState>, byte: u8) -> Option<LevState> {
        let s = state.as_ref()?;
        let mut next = *s;
        let len = s.len as usize;
        if len >= 4 {
            return None;
        }
        next.pending[len] = byte;
        let len = len + 1;
        if len < utf8_width(next.pending[0]) {
            next.len = len as u8;
            return Some(next);
        }
        let ch = std::str::from_utf8(&next.pending[..len])
            .ok()?
            .chars()
            .next()?;
        let cap = self.dist + 1;
        next.row[0] = s.row[0].saturating_add(1).min(cap);
        let mut alive = next.row[0] <= self.dist;
        for (i, &q) in self.query.iter().enumerate() {
            let sub = s.row[i] + u8::from(q != ch);
            let v = sub.min(s.row[i + 1] + 1).min(next.row[i] + 1).min(cap);
            next.row[i + 1] = v;
            alive |= v <= self.dist;
        }
        if !alive {
            return None;
        }
        next.pending = [0; 4];
        next.len = 0;
        Some(next)
    }
}

/// What went wrong inside the fst crate, on one line: its `Error::Fst`
/// prints only "FST error", the detail is in the wrapped error (and some of
/// those span lines).
fn fst_detail(e: &fst::Error) -> String {
    let text = match e {
        fst::Error::Fst(inner) => inner.to_string(),
        other => other.to_string(),
    };
    text.split_whitespace().collect::<Vec<_>>().join(" ")
}

#[cfg(test)]
mod tests {
    use super::*;
    use fst::automaton::Levenshtein;

    fn lex(text: &str) -> Lexicon {
        Lexicon::from_entries(&parse_word_list(text, Path::new("t.txt")).unwrap(), "en").unwrap()
    }

    #[test]
    fn parses_counts_folds_case_and_adds_duplicates() {
        let l = lex("Cat\t5\ndog\n\ncat\t2\r\n");
        assert_eq!(l.len(), 2);
        assert_eq!(l.count("cat"), Some(7));
        assert_eq!(l.count("CAT"), Some(7));
        assert_eq!(l.count("dog"), Some(1));
        assert_eq!(l.total(), 8);
        assert_eq!(l.count("cow"), None);
    }

    #[test]
    fn bad_lines_name_file_and_line() {
        let p = Path::new("w.txt");
        let e = parse_word_list("ok\nbad\tx\n", p).unwrap_err().to_string();
        assert!(e.contains("w.txt line 2") && e.contains("count"), "{e}");
        let e = parse_word_list("a\tb\tc\n", p).unwrap_err().to_string();
        assert!(e.contains("line 1") && e.contains("3 tab-separated"), "{e}");
        let e = parse_word_list("x\nnew york\t3\n", p)
            .unwrap_err()
            .to_string();
        assert!(e.contains("line 2") && e.contains("space"), "{e}");
        let e = parse_word_list("\t3\n", p).unwrap_err().to_string();
        assert!(e.contains("empty"), "{e}");
    }

    #[test]
    fn near_finds_words_within_the_distance() {
        let l = lex("cat\t10\ncar\t20\ncart\t1\ndog\t5\n");
        let got: Vec<(String, usize)> = l
            .near("cat", 1)
            .into_iter()
            .map(|n| (n.word, n.edits))
            .collect();
        // Levenshtein distances by hand: cat 0, car 1, cart 1, dog 3.
        assert_eq!(
            got,
            vec![("cat".into(), 0), ("car".into(), 1), ("cart".into(), 1)]
        );
        assert!(l.near("dgo", 1).is_empty());
        assert_eq!(l.near("dgo", 2)[0].word, "dog");
    }

    /// Words within `d` edits of `q` by brute force with strsim (a
    /// general-purpose reference implementation of Levenshtein distance).
    fn brute(l: &Lexicon, q: &str, d: usize) -> Vec<String> {
        l.words()
            .into_iter()
            .map(|(w, _)| w)
            .filter(|w| strsim::levenshtein(q, w) <= d)
            .collect()
    }

    #[test]
    fn near_agrees_with_brute_force() {
        let l = Lexicon::builtin("de").unwrap();
        for q in ["haus", "strase", "übr", "grösse", "xyzzy", "fluss"] {
            for d in [1u32, 2] {
                let mut got: Vec<String> = l.near(q, d).into_iter().map(|n| n.word).collect();
                got.sort();
                assert_eq!(got, brute(&l, q, d as usize), "{q} within {d}");
            }
        }
    }

    #[test]
    fn deletion_index_finds_exactly_what_the_fst_walk_finds() {
        use rand::{Rng, SeedableRng};
        let sorted = |mut v: Vec<(String, u64, usize)>| {
            v.sort();
            v
        };
        for (lang, letters) in [("de", "abcdehinorstuäöüß"), ("en", "abcdehilnorstuy")] {
            let l = Lexicon::builtin(lang).unwrap();
            let words = l.words();
            let letters: Vec<char> = letters.chars().collect();
            let index = l.built_deletion_index();
            let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(11);
            let mut answered = 0;
            for k in 0..120 {
                // A listed word with 0-3 random edits.
                let mut q: Vec<char> = words[rng.gen_range(0..words.len())].0.chars().collect();
                for _ in 0..rng.gen_range(0..4) {
                    let c = letters[rng.gen_range(0..letters.len())];
                    let at = rng.gen_range(0..=q.len());
                    match rng.gen_range(0..3) {
                        0 => q.insert(at, c),
                        1 if at < q.len() => q[at] = c,
                        _ if at < q.len() => {
                            q.remove(at);
                        }
                        _ => q.push(c),
                    }
                }
                let q: String = q.into_iter().collect();
                for d in [1u32, 2] {
                    let walk: Vec<(String, u64, usize)> = l
                        .near_by_walk(&q, d)
                        .into_iter()
                        .map(|n| (n.word, n.count, n.edits))
                        .collect();
                    let Some(found) = index.near(&q, d) else {
                        continue;
                    };
                    answered += 1;
                    let found = found
                        .into_iter()
                        .map(|(w, c, e)| (w.to_string(), c, e))
                        .collect();
                    let found = sorted(found);
                    assert_eq!(found, sorted(walk), "{lang} {q:?} within {d}");
                    if k % 30 == 0 {
                        // Brute force with strsim (a general-purpose
                        // reference implementation of Levenshtein distance).
                        let want: Vec<String> = brute(&l, &q, d as usize);
                        let mut got: Vec<String> = found.into_iter().map(|f| f.0).collect();
                        got.sort();
                        assert_eq!(got, want, "{lang} {q:?} within {d}");
                    }
                }
            }
            assert!(answered > 180, "{lang}: the index answered only {answered}");
        }
    }

    #[test]
    fn near_answers_the_same_before_and_after_the_index_is_built() {
        let l = Lexicon::builtin("en").unwrap();
        let queries = [
            "teh", "hause", "wrold", "qiuck", "lettre", "xyzzy", "a", "zz",
        ];
        let before: Vec<Vec<NearWord>> = queries.iter().map(|q| l.near(q, 2)).collect();
        assert!(l.deletes.get().is_none());
        l.built_deletion_index();
        l.clear_cache();
        let after: Vec<Vec<NearWord>> = queries.iter().map(|q| l.near(q, 2)).collect();
        assert_eq!(before, after);
        assert!(before[2].iter().any(|n| n.word == "world"));
    }

    #[test]
    fn fst_levenshtein_misses_some_non_ascii_neighbours() {
        // Why `near` uses its own automaton: fst 0.4.7's DFA leaves out
        // "bär" (distance 2 from "übr": delete ü, insert ä) and "grüsse"
        // (distance 1 from "grösse") that strsim and the lazy automaton find.
        let l = Lexicon::builtin("de").unwrap();
        assert_eq!(strsim::levenshtein("übr", "bär"), 2);
        let lev = Levenshtein::new("übr", 2).unwrap();
        let mut s = l.map.search(lev).into_stream();
        let mut fst_found = false;
        while let Some((k, _)) = s.next() {
            fst_found |= k == "bär".as_bytes();
        }
        assert!(!fst_found);
        assert!(l.near("übr", 2).iter().any(|n| n.word == "bär"));
        let lev = Levenshtein::new("grösse", 1).unwrap();
        let mut s = l.map.search(lev).into_stream();
        let mut fst_found = false;
        while let Some((k, _)) = s.next() {
            fst_found |= k == "grüsse".as_bytes();
        }
        assert!(!fst_found);
        assert!(l.near("grösse", 1).iter().any(|n| n.word == "grüsse"));
    }

    #[test]
    fn near_bounds_queries_by_the_longest_word() {
        // Regression (found by fuzz/fuzz_targets/word_list.rs, which ran out
        // of memory): the Levenshtein automaton grows with the query, so a
        // long run of cells without a space made `near` slow and huge. A
        // query more than `max_edits` characters longer than every listed
        // word cannot be near any of them and is answered at once.
        let l = lex("tea\t10\nteapot\t2\n");
        // "teapotxx" is 2 insertions from "teapot": 8 chars = 6 + 2, in reach.
        let got: Vec<_> = l.near("teapotxx", 2).into_iter().map(|n| n.word).collect();
        assert_eq!(got, vec!["teapot".to_string()]);
        assert!(l.near("teapotxxx", 2).is_empty());
        let long: String = "tea".repeat(5000);
        assert!(l.near(&long, 2).is_empty());
        // The bound survives the file format.
        let back = Lexicon::from_bytes(l.to_bytes(), Path::new("x.lex")).unwrap();
        assert_eq!(back.near("teapotxx", 2).len(), 1);
        assert!(back.near("teapotxxx", 2).is_empty());
        // Multi-byte letters: the bound counts bytes of the word (an upper
        // bound on its characters), so nothing reachable is cut off.
        let de = lex("straße\t3\n");
        assert_eq!(de.near("strasse", 2).len(), 1); // ß -> s, insert s
        assert_eq!(de.near("straßexy", 2).len(), 1);
    }

    #[test]
    fn damaged_word_map_is_refused_at_load() {
        // Regression (found by fuzz/fuzz_targets/lexicon_file.rs): a lexicon
        // file whose fst bytes were damaged loaded fine and then panicked
        // inside the fst crate (index out of bounds) when its words were
        // listed. CRC-32C detects every error burst of up to 32 bits, so
        // every single-byte change and every cut must be refused at load.
        let b = lex("tea\t12\njar\t5\nroom\t3\nshelf\nlabel\t40\n").to_bytes();
        let map_start = 30 + 2; // header + "en"
        for i in map_start..b.len() {
            for flip in [0x01u8, 0x80, 0xff] {
                let mut d = b.clone();
                d[i] ^= flip;
                let e = Lexicon::from_bytes(d, Path::new("x.lex"));
                assert!(
                    matches!(e, Err(Error::Format { .. })),
                    "byte {i} ^ {flip:#x} was not refused"
                );
            }
        }
        for len in map_start..b.len() {
            let e = Lexicon::from_bytes(b[..len].to_vec(), Path::new("x.lex"));
            assert!(matches!(e, Err(Error::Format { .. })), "cut at {len}");
        }
        let mut d = b.clone();
        d[(map_start + b.len()) / 2] ^= 0xff; // inside the nodes
        let e = Lexicon::from_bytes(d, Path::new("x.lex")).unwrap_err();
        assert!(
            e.to_string()
                .contains("damaged word map (FST verification failed: expected checksum of"),
            "{e}"
        );
    }

    #[test]
    fn bytes_round_trip_and_version_is_checked() {
        let l = lex("über\t3\nzug\t4\n");
        let b = l.to_bytes();
        let back = Lexicon::from_bytes(b.clone(), Path::new("x.lex")).unwrap();
        assert_eq!(back.words(), l.words());
        assert_eq!(back.lang(), "en");
        assert_eq!(back.total(), 7);
        let mut newer = b.clone();
        newer[16..20].copy_from_slice(&2u32.to_le_bytes());
        let e = Lexicon::from_bytes(newer, Path::new("x.lex")).unwrap_err();
        assert!(matches!(e, Error::Format { .. }));
        assert!(e.to_string().contains("version 2"), "{e}");
        let e = Lexicon::from_bytes(b"hello".to_vec(), Path::new("x.lex")).unwrap_err();
        assert!(matches!(e, Error::Format { .. }));
        let mut cut = b;
        cut.truncate(40);
        assert!(matches!(
            Lexicon::from_bytes(cut, Path::new("x.lex")),
            Err(Error::Format { .. })
        ));
    }
}
