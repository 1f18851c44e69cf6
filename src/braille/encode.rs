//! Text to cells: [`CodeTable::encode`] and [`CodeTable::encode_lossy`].
//!
//! The encoder writes indicators where the rules on [`CodeTable`] call for
//! them (capitals, capitalised words, numbers, a letter after a number),
//! tracking the same numeric mode and word starts as the reader, and then
//! reads its own cells back to make sure they give the text.

use super::table::{CodeTable, Kind, Role, NONE, SPACE};
use crate::{Cell, Error, Result};

/// Where the encoder failed: a 0-based character index and a hint.
struct Refusal {
    index: usize,
    hint: String,
}

struct Encoder<'t> {
    table: &'t CodeTable,
    cells: Vec<Cell>,
    numeric: bool,
    word_start: bool,
}

impl Encoder<'_> {
    /// Write sign `e` for the character at `index`, ending a number first
    /// with the letter indicator if the sign would read otherwise inside it.
    fn emit(&mut self, e: u16, index: usize) -> std::result::Result<(), Refusal> {
        let table = self.table;
        let entry = &table.entries[e as usize];
        if self.numeric && !entry.in_num {
            let Some(li) = table.role(Role::Letter) else {
                return Err(Refusal {
                    index,
                    hint: format!(
                        "its cells are also a digit, so right after a number it would read as one, and the `{}` code table has no letter indicator to prevent that: put a space or another sign between the number and it",
                        table.lang()
                    ),
                });
            };
            self.push_cells(li);
            self.numeric = false;
        }
        self.push_cells(e);
        self.numeric = match entry.kind {
            Kind::Digit(_) | Kind::Indicator(Role::Numeric) => true,
            Kind::Sign { number: true, .. } => self.numeric,
            Kind::Indicator(Role::CapitalEnd) => self.numeric,
            _ => false,
        };
        self.word_start = match entry.kind {
            Kind::Space => table.has_opening,
            Kind::Sign { opening, .. } => table.has_opening && opening,
            Kind::Indicator(_) => self.word_start,
            Kind::Letter { .. } | Kind::Digit(_) => false,
        };
        Ok(())
    }

    fn push_cells(&mut self, e: u16) {
        let seq = self.table.entries[e as usize].seq;
        self.cells
            .extend(seq.as_slice().iter().map(|&m| Cell::from_mask(m)));
    }

    /// A run of letters `run` (entry, is capital) starting at character
    /// `start`, with capital and capitalised-word indicators.
    fn letters(&mut self, run: &[(u16, bool)], start: usize) -> std::result::Result<(), Refusal> {
        let table = self.table;
        let word = table.role(Role::CapitalWord);
        let end = table.role(Role::CapitalEnd);
        let mut k = 0;
        while k < run.len() {
            if !run[k].1 {
                self.emit(run[k].0, start + k)?;
                k += 1;
                continue;
            }
            let seg_end = run[k..]
                .iter()
                .position(|&(_, up)| !up)
                .map_or(run.len(), |p| k + p);
            let closes = seg_end == run.len() || end.is_some();
            match word {
                Some(w) if seg_end - k >= 2 && closes => {
                    self.emit(w, start + k)?;
                    for (j, &(e, _)) in run.iter().enumerate().take(seg_end).skip(k) {
                        self.emit(e, start + j)?;
                    }
                    if let (true, Some(end)) = (seg_end < run.len(), end) {
                        self.emit(end, start + seg_end)?;
                    }
                }
                _ => {
                    let Some(cap) = table.role(Role::Capital) else {
                        return Err(Refusal {
                            index: start + k,
                            hint: "the code table has no capital indicator: write the letter in lowercase".to_string(),
                        });
                    };
                    for (j, &(e, _)) in run.iter().enumerate().take(seg_end).skip(k) {
                        self.emit(cap, start + j)?;
                        self.emit(e, start + j)?;
                    }
                }
            }
            k = seg_end;
        }
        Ok(())
    }
}

impl CodeTable {
    /// Write `text` as cells: letters, digits and signs of the table, with
    /// the indicators its rules call for; a space (U+0020) becomes
    /// [`Cell::EMPTY`]. The cells always decode back to `text`.
    ///
    /// Fails with [`Error::Unencodable`] (naming the character, its 1-based
    /// position and the language) at the first character the table cannot
    /// write there; see "Characters it cannot encode" on [`CodeTable`].
    pub fn encode(&self, text: &str) -> Result<Vec<Cell>> {
        let chars: Vec<char> = text.chars().collect();
        self.encode_chars(&chars)
            .map_err(|r| self.unencodable(&chars, r))
    }

    /// Like [`encode`](CodeTable::encode), but never fails: characters it
    /// cannot write are dropped (whitespace other than the space becomes an
    /// empty cell) and reported as `(0-based character index, character)`
    /// in increasing order of index.
    pub fn encode_lossy(&self, text: &str) -> (Vec<Cell>, Vec<(usize, char)>) {
        // Characters with no sign at all are dropped in one pass; the rare
        // refusals that depend on context are dropped one by one.
        let mut kept: Vec<(usize, char)> = Vec::new();
        let mut skipped = Vec::new();
        for (i, ch) in text.chars().enumerate() {
            if ch == ' ' || self.chars.contains_key(&ch) {
                kept.push((i, ch));
            } else if ch.is_whitespace() {
                kept.push((i, ' '));
                skipped.push((i, ch));
            } else {
                skipped.push((i, ch));
            }
        }
        loop {
            let chars: Vec<char> = kept.iter().map(|&(_, c)| c).collect();
            match self.encode_chars(&chars) {
                Ok(cells) => {
                    skipped.sort_unstable();
                    return (cells, skipped);
                }
                Err(r) if r.index < kept.len() => {
                    let (i, _) = kept.remove(r.index);
                    // Report the original character (a replaced tab stays a tab).
                    let original = text.chars().nth(i).unwrap_or(' ');
                    skipped.retain(|&(j, _)| j != i);
                    skipped.push((i, original));
                }
                Err(_) => {
                    // Cannot happen (refusals point into the text); stay
                    // total anyway.
                    skipped.append(&mut kept);
                    skipped.sort_unstable();
                    return (Vec::new(), skipped);
                }
            }
        }
    }

    fn encode_chars(&self, chars: &[char]) -> std::result::Result<Vec<Cell>, Refusal> {
        let mut enc = Encoder {
            table: self,
            cells: Vec::with_capacity(chars.len() + chars.len() / 4),
            numeric: false,
            word_start: self.has_opening,
        };
        let mut i = 0;
        while i < chars.len() {
            let ch = chars[i];
            if ch == ' ' {
                enc.emit(SPACE, i)?;
                i += 1;
                continue;
            }
            let Some(&(e, _)) = self.chars.get(&ch) else {
                return Err(Refusal {
                    index: i,
                    hint: no_sign_hint(ch, self.lang()),
                });
            };
            let entry = &self.entries[e as usize];
            match entry.kind {
                Kind::Letter { .. } => {
                    let mut run = Vec::new();
                    while let Some(&(e, up)) =
                        chars.get(i + run.len()).and_then(|c| self.chars.get(c))
                    {
                        if !matches!(self.entries[e as usize].kind, Kind::Letter { .. }) {
                            break;
                        }
                        run.push((e, up));
                    }
                    enc.letters(&run, i)?;
                    i += run.len();
                }
                Kind::Digit(_) => {
                    if !enc.numeric {
                        if let Some(n) = self.role(Role::Numeric) {
                            enc.emit(n, i)?;
                        }
                    }
                    enc.emit(e, i)?;
                    i += 1;
                }
                Kind::Sign { opening, .. } => {
                    if entry.partner != NONE {
                        let twin = match self.entries[entry.partner as usize].kind {
                            Kind::Sign { ch, .. } => ch,
                            _ => ch,
                        };
                        if opening && !enc.word_start {
                            return Err(Refusal {
                                index: i,
                                hint: format!("it shares its cells with `{twin}` and is read as itself only at the start of a word: put a space before it"),
                            });
                        }
                        if !opening && enc.word_start {
                            return Err(Refusal {
                                index: i,
                                hint: format!("it shares its cells with `{twin}`, which is how they read at the start of a word: do not start a word with it"),
                            });
                        }
                    }
                    enc.emit(e, i)?;
                    i += 1;
                }
                Kind::Space | Kind::Indicator(_) => {
                    // Not reachable: `chars` maps only letters, digits, signs.
                    return Err(Refusal {
                        index: i,
                        hint: no_sign_hint(ch, self.lang()),
                    });
                }
            }
        }
        // Read the cells back: what encode returns must decode to the text.
        let back = self.decode(&enc.cells);
        let same = back.unreadable.is_empty() && back.text.chars().eq(chars.iter().copied());
        if !same {
            let index = back
                .text
                .chars()
                .zip(chars.iter())
                .position(|(a, &b)| a != b)
                .unwrap_or(chars.len().min(back.text.chars().count()))
                .min(chars.len().saturating_sub(1));
            return Err(Refusal {
                index,
                hint: "the code table cannot write the text here so that it reads back the same: change the text around it (for example put a space between a number and a letter)".to_string(),
            });
        }
        Ok(enc.cells)
    }

    fn unencodable(&self, chars: &[char], r: Refusal) -> Error {
        let ch = chars.get(r.index).copied().unwrap_or(' ');
        Error::Unencodable {
            ch,
            code: ch as u32,
            position: r.index + 1,
            lang: self.lang().to_string(),
            hint: r.hint,
        }
    }
}

fn no_sign_hint(ch: char, lang: &str) -> String {
    if ch.is_whitespace() {
        "only the space (U+0020) has a cell: split lines and replace tabs before encoding, or drop it (encode_lossy; `--lossy` on the command line)".to_string()
    } else if ('\u{300}'..='\u{36f}').contains(&ch) {
        "a combining accent has no cell of its own: write the accented letter as one precomposed character (Unicode NFC)".to_string()
    } else if Cell::from_char(ch).is_some() {
        "this is already a braille cell: decode it instead of encoding it".to_string()
    } else {
        format!("the `{lang}` code table has no sign for it: pick another language pack, add a sign to a copy of the table, or drop the character (encode_lossy; `--lossy` on the command line)")
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn dots(cells: &[Cell]) -> String {
        let parts: Vec<String> = cells.iter().map(|c| c.dot_string()).collect();
        parts.join("-")
    }

    #[test]
    fn unencodable_names_character_position_language() {
        let en = CodeTable::builtin("en").unwrap();
        match en.encode("Fern №7") {
            Err(Error::Unencodable {
                ch, position, lang, ..
            }) => {
                assert_eq!((ch, position, lang.as_str()), ('№', 6, "en"));
            }
            other => panic!("unexpected {other:?}"),
        }
    }

    #[test]
    fn lossy_reports_and_drops() {
        let en = CodeTable::builtin("en").unwrap();
        let (cells, skipped) = en.encode_lossy("a\tb№c");
        assert_eq!(skipped, vec![(1, '\t'), (3, '№')]);
        assert_eq!(en.decode(&cells).text, "a bc");
    }

    #[test]
    fn lossy_drops_context_refusals_too() {
        // fr has no letter indicator: "12â" cannot be written.
        let fr = CodeTable::builtin("fr").unwrap();
        let (cells, skipped) = fr.encode_lossy("12â");
        assert_eq!(skipped, vec![(2, 'â')]);
        assert_eq!(fr.decode(&cells).text, "12");
    }

    #[test]
    fn segments_of_capitals() {
        let en = CodeTable::builtin("en").unwrap();
        // "ABcD": capitalised word closed by the terminator, then a single
        // capital.
        assert_eq!(dots(&en.encode("ABcD").unwrap()), "6-6-1-12-6-3-14-6-145");
        // es has no terminator: each capital of a closed segment is marked.
        let es = CodeTable::builtin("es").unwrap();
        assert_eq!(dots(&es.encode("ABc").unwrap()), "46-1-46-12-14");
        assert_eq!(dots(&es.encode("ABC").unwrap()), "46-46-1-12-14");
    }
}
