//! Near-word search by deletion neighbourhoods: an index, built once per
//! lexicon, from every string that deleting up to two characters of a word
//! makes, to the words that make it.
//!
//! Two strings within `d` edits (Levenshtein distance) of each other can both
//! be turned into one same string by deleting at most `d` characters from
//! each (a substitution deletes the character on both sides, an insertion
//! on one side): the hashing method of Mor and Fraenkel (1982, "A hash code
//! method for detecting and correcting spelling errors", CACM 25(12); from
//! memory), known today as the symmetric delete method. A query then costs
//! one lookup per deletion string of the query (at most 1 + n + n(n-1)/2
//! for `n` characters and two edits) and an exact distance check of the
//! words found, instead of a Levenshtein walk of the whole fst (about 0.1
//! ms for one edit and 0.5 ms for two on the builtin `en` lexicon).
//!
//! Strings are keyed by a 32-bit hash of their characters; two strings with
//! the same hash only add a word to check, so the index finds exactly the
//! words within the distance (every word found is checked with
//! `strsim::levenshtein`, the same distance [`super::Lexicon::near`] reports).
//! Words of more than [`MAX_CHARS`] characters are not indexed (their
//! neighbourhoods grow as the square of their length); a query that could
//! reach one (query length plus edits above [`MAX_CHARS`]) is answered by
//! the fst walk instead, as is a query of more than [`MAX_EDITS`] edits.

/// Deepest deletion indexed: queries of up to this many edits.
pub(crate) const MAX_EDITS: u32 = 2;
/// Longest word indexed, in characters.
pub(crate) const MAX_CHARS: usize = 16;
/// Word ids take the low 30 bits of an entry.
const ID_BITS: u32 = 30;

/// The index: `(hash << 32) | (deleted << 30) | word id` for every distinct
/// deletion string of every word (`deleted`: how many characters it lacks,
/// 0..=2), sorted; and the words themselves.
pub(crate) struct DeleteIndex {
    entries: Vec<u64>,
    /// All indexed words, concatenated; word `i` is `text[ends[i-1]..ends[i]]`.
    text: String,
    ends: Vec<u32>,
    counts: Vec<u64>,
}

/// A multiply-rotate hash of a character sequence (the mixing step of
/// rustc's `FxHasher`, from memory), folded to 32 bits.
#[inline]
fn hash_chars(chars: impl Iterator<Item = char>) -> u32 {
    let mut h: u64 = 0;
    for c in chars {
        h = (h.rotate_left(5) ^ c as u64).wrapping_mul(0x51_7c_c1_b7_27_22_0a_95);
    }
    (h ^ (h >> 32)) as u32
}

/// `(hash, characters deleted)` of the distinct strings made by deleting at
/// most `depth` (0..=2) characters of `cs`, sorted, appended to `out`
/// (cleared first). Strings made by different numbers of deletions differ
/// in length, so a string appears once.
fn deletion_hashes(cs: &[char], depth: u32, out: &mut Vec<(u32, u8)>) {
    out.clear();
    let n = cs.len();
    out.push((hash_chars(cs.iter().copied()), 0));
    if depth >= 1 {
        for i in 0..n {
            out.push((
                hash_chars(
                    cs.iter()
                        .enumerate()
                        .filter(|&(k, _)| k != i)
                        .map(|(_, &c)| c),
                ),
                1,
            ));
        }
    }
    if depth >= 2 {
        for i in 0..n {
            for j in i + 1..n {
                out.push((
                    hash_chars(
                        cs.iter()
                            .enumerate()
                            .filter(|&(k, _)| k != i && k != j)
                            .map(|(_, &c)| c),
                    ),
                    2,
                ));
            }
        }
    }
    out.sort_unstable();
    out.dedup();
}

impl DeleteIndex {
    /// An empty index.
    pub(crate) fn new() -> DeleteIndex {
        DeleteIndex {
            entries: Vec::new(),
            text: String::new(),
            ends: Vec::new(),
            counts: Vec::new(),
        }
    }

    /// Index `word` with its `count` to depth [`MAX_EDITS`] (skipped when
    /// longer than [`MAX_CHARS`]). Call [`DeleteIndex::finish`] after the
    /// last word.
    pub(crate) fn add(
        &mut self,
        word: &str,
        count: u64,
        scratch: &mut (Vec<char>, Vec<(u32, u8)>),
    ) {
        let (cs, hashes) = scratch;
        cs.clear();
        cs.extend(word.chars());
        if cs.len() > MAX_CHARS || self.counts.len() >= 1 << ID_BITS {
            return;
        }
        let id = self.counts.len() as u64;
        self.text.push_str(word);
        self.ends.push(self.text.len() as u32);
        self.counts.push(count);
        deletion_hashes(cs, MAX_EDITS, hashes);
        self.entries.extend(
            hashes
                .iter()
                .map(|&(h, deleted)| ((h as u64) << 32) | ((deleted as u64) << ID_BITS) | id),
        );
    }

    /// Sort the entries: the index is ready.
    pub(crate) fn finish(mut self) -> DeleteIndex {
        self.entries.sort_unstable();
        self.entries.shrink_to_fit();
        self
    }

    fn word(&self, id: usize) -> &str {
        let start = if id == 0 {
            0
        } else {
            self.ends[id - 1] as usize
        };
        &self.text[start..self.ends[id] as usize]
    }

    /// Every indexed word within `max_edits` of `query` (lower case), as
    /// (word, count, distance), unordered; `None` when the index cannot
    /// answer (more edits than indexed, or a query that could reach an
    /// unindexed long word).
    pub(crate) fn near(&self, query: &str, max_edits: u32) -> Option<Vec<(&str, u64, usize)>> {
        let cs: Vec<char> = query.chars().collect();
        if max_edits > MAX_EDITS || cs.len() + max_edits as usize > MAX_CHARS {
            return None;
        }
        let mut hashes = Vec::new();
        deletion_hashes(&cs, max_edits, &mut hashes);
        // A word within `max_edits` reaches a common string with at most
        // `max_edits` deletions of its own: entries of deeper deletions are
        // not taken.
        let mut ids: Vec<u32> = Vec::new();
        let id_mask = (1u64 << ID_BITS) - 1;
        for &(h, _) in &hashes {
            let key = (h as u64) << 32;
            let from = self.entries.partition_point(|&e| e < key);
            // Within a hash, entries sort by deletions, then word.
            for &e in &self.entries[from..] {
                if e >> 32 != h as u64 || (e >> ID_BITS) & 3 > max_edits as u64 {
                    break;
                }
                ids.push((e & id_mask) as u32);
            }
        }
        ids.sort_unstable();
        ids.dedup();
        let mut out = Vec::new();
        for id in ids {
            let id = id as usize;
            let word = self.word(id);
            let len = word.chars().count();
            if len.abs_diff(cs.len()) > max_edits as usize {
                continue;
            }
            let edits = strsim::levenshtein(query, word);
            if edits <= max_edits as usize {
                out.push((word, self.counts[id], edits));
            }
        }
        Some(out)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn deletion_strings_are_distinct_per_word() {
        // "book": itself; 3 distinct single deletions (ook, bok, boo); and
        // the distinct double deletions ok, bk, bo, oo: 8 (counted by hand).
        let cs: Vec<char> = "book".chars().collect();
        let mut h = Vec::new();
        deletion_hashes(&cs, 2, &mut h);
        assert_eq!(h.len(), 8);
        deletion_hashes(&cs, 1, &mut h);
        assert_eq!(h.len(), 4);
    }

    #[test]
    fn finds_words_within_the_distance_and_refuses_what_it_cannot_answer() {
        let words = [("cat", 10), ("car", 20), ("cart", 1), ("dog", 5)];
        let mut index = DeleteIndex::new();
        let mut scratch = Default::default();
        for (w, c) in words {
            index.add(w, c, &mut scratch);
        }
        let index = index.finish();
        let mut got = index.near("cat", 1).unwrap();
        got.sort();
        // Levenshtein distances by hand: car 1, cart 1, cat 0, dog 3.
        assert_eq!(got, vec![("car", 20, 1), ("cart", 1, 1), ("cat", 10, 0)]);
        assert!(index.near("dgo", 1).unwrap().is_empty());
        assert_eq!(index.near("dgo", 2).unwrap(), vec![("dog", 5, 2)]);
        assert!(index.near("cat", 3).is_none());
        assert!(index.near("abcdefghijklmno", 2).is_none()); // 15 + 2 > 16
    }
}
