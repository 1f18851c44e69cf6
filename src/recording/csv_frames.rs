//! CSV frames files: the row reader (over any `std::io::Read`, one row at a
//! time, so it serves files and stdin alike) and the writer.
//!
//! The layout is a header line `time_s[,position_mm],<taxel columns>` and
//! one line per frame. Row numbers in errors: [`Location::line`] is the
//! 1-based *file line* (the header is line 1 when it is the first line), and
//! the message starts with the *data row*, counted from 1 after the header
//! (`line 4 ... data row 3`). Blank lines are skipped but still counted as
//! file lines.
//!
//! The reader is hand-written rather than built on the `csv` crate: the
//! format is plain numbers, and a line reader gives the exact file line of
//! every row (the crate's record positions lag behind blank lines and CRLF
//! endings), a cap on line length, and never reads past the line it returns.

use super::values::{self, TimeCheck, POSITION, TIME};
use super::Recording;
use crate::{Error, Location, Result};
use std::borrow::Cow;
use std::io::{BufRead, BufReader, Read, Write};
use std::path::{Path, PathBuf};

/// Longest line accepted, in bytes (64 MiB: a million taxels at about 60
/// characters each).
const MAX_LINE_BYTES: usize = 64 * 1024 * 1024;

/// One frame read from a CSV stream.
#[derive(Debug, Clone, PartialEq)]
pub struct Frame {
    /// Data row number, counting from 1 after the header.
    pub row: usize,
    /// Time in seconds.
    pub time_s: f64,
    /// Position along the line in mm, when the file has a `position_mm` column.
    pub position_mm: Option<f64>,
    /// Taxel values, length `n_taxels`, in column order.
    pub values: Vec<f32>,
}

/// Reads CSV frames row by row from any reader, checking every value.
///
/// The header is read and checked by [`CsvFrameReader::new`]; each call of
/// [`CsvFrameReader::read_frame`] (or the iterator) then reads exactly one
/// more line, so a row arriving on stdin is returned as soon as its line is
/// complete. Memory is one line. After the first error the iterator ends.
///
/// ```
/// use tactread::recording::CsvFrameReader;
/// let data = "time_s,taxel_0,taxel_1\n0.00,1.5,2\n0.01,1.25,3\n";
/// let mut rows = CsvFrameReader::new(data.as_bytes(), "<example>", 2).unwrap();
/// let first = rows.read_frame().unwrap().unwrap();
/// assert_eq!(first.values, vec![1.5, 2.0]);
/// assert_eq!(rows.count(), 1);
/// ```
pub struct CsvFrameReader<R: Read> {
    reader: BufReader<R>,
    source: PathBuf,
    columns: Vec<String>,
    has_position: bool,
    n_taxels: usize,
    /// File line of the last line read.
    line: usize,
    /// Data rows returned so far.
    rows: usize,
    time: TimeCheck,
    buf: Vec<u8>,
    /// Whether the last line read ended at the end of the input without a
    /// line break (a file cut short, or one without a final newline).
    unterminated: bool,
    done: bool,
}

impl<R: Read> std::fmt::Debug for CsvFrameReader<R> {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("CsvFrameReader")
            .field("source", &self.source)
            .field("columns", &self.columns)
            .field("line", &self.line)
            .field("rows", &self.rows)
            .finish()
    }
}

impl<R: Read> CsvFrameReader<R> {
    /// Read and check the header from `reader`. `source` names the input in
    /// errors (a path, or a pseudo-name such as `<stdin>`); `n_taxels` is the
    /// taxel count the manifest declares (`sensor.taxels`).
    pub fn new(reader: R, source: impl AsRef<Path>, n_taxels: usize) -> Result<Self> {
        let mut this = CsvFrameReader {
            reader: BufReader::with_capacity(64 * 1024, reader),
            source: source.as_ref().to_path_buf(),
            columns: Vec::new(),
            has_position: false,
            n_taxels,
            line: 0,
            rows: 0,
            time: TimeCheck::default(),
            buf: Vec::new(),
            unterminated: false,
            done: false,
        };
        this.read_header()?;
        Ok(this)
    }

    /// The column names from the header, in file order.
    pub fn columns(&self) -> &[String] {
        &self.columns
    }

    /// Whether the file has a `position_mm` column.
    pub fn has_position(&self) -> bool {
        self.has_position
    }

    /// Number of taxel columns.
    pub fn n_taxels(&self) -> usize {
        self.n_taxels
    }

    /// Data rows read so far.
    pub fn rows_read(&self) -> usize {
        self.rows
    }

    /// Read the next frame; `Ok(None)` at the end of the input. An input
    /// with a header but no data rows is an error.
    pub fn read_frame(&mut self) -> Result<Option<Frame>> {
        let mut values = Vec::with_capacity(self.n_taxels);
        Ok(self
            .read_row_into(&mut values)?
            .map(|(time_s, position_mm)| Frame {
                row: self.rows,
                time_s,
                position_mm,
                values,
            }))
    }

    fn at(&self) -> Location {
        Location::file(&self.source).line(self.line)
    }

    /// Read the next non-blank line into `self.buf` (without its line
    /// ending). Returns false at the end of the input.
    fn next_line(&mut self) -> Result<bool> {
        loop {
            self.buf.clear();
            let n = (&mut self.reader)
                .take(MAX_LINE_BYTES as u64 + 1)
                .read_until(b'\n', &mut self.buf)
                .map_err(|e| Error::io("cannot read", &self.source, e))?;
            if n == 0 {
                return Ok(false);
            }
            self.line += 1;
            self.unterminated = self.buf.last() != Some(&b'\n');
            if self.buf.last() == Some(&b'\n') {
                self.buf.pop();
                if self.buf.last() == Some(&b'\r') {
                    self.buf.pop();
                }
            } else if self.buf.len() > MAX_LINE_BYTES {
                return Err(Error::input(
                    self.at(),
                    format!(
                        "line is longer than {} MiB: this is not a frames file, or its line \
                         endings are missing",
                        MAX_LINE_BYTES / (1024 * 1024)
                    ),
                ));
            }
            if !self.buf.iter().all(|b| b.is_ascii_whitespace()) {
                return Ok(true);
            }
        }
    }

    fn read_header(&mut self) -> Result<()> {
        if !self.next_line()? {
            return Err(Error::input(
                Location::file(&self.source),
                "file is empty: a CSV frames file starts with a header line such as \
                 `time_s,taxel_0,taxel_1,...`",
            ));
        }
        let text = line_text(&self.buf, &self.columns, self.at())?;
        let text = text.strip_prefix('\u{feff}').unwrap_or(text);
        let names: Vec<String> = split_fields(text)
            .map_err(|m| Error::input(self.at(), m))?
            .into_iter()
            .map(|f| f.into_owned())
            .collect();
        let at = self.at();
        let first = names.first().map(String::as_str).unwrap_or("");
        if first != TIME {
            let message = if names.len() == 1 && (text.contains(';') || text.contains('\t')) {
                "columns must be separated by commas: this header seems to use semicolons or \
                 tabs"
                    .to_string()
            } else if first.parse::<f64>().is_ok() {
                "the file has no header line: add `time_s,taxel_0,taxel_1,...` as the first \
                 line"
                    .to_string()
            } else {
                format!(
                    "the first column must be `time_s` (time in seconds), found `{first}`: \
                     rename it, converting to seconds if needed"
                )
            };
            return Err(Error::input(at.field(first), message));
        }
        let has_position = names.get(1).map(String::as_str) == Some(POSITION);
        let lead = 1 + usize::from(has_position);
        for (i, name) in names.iter().enumerate().skip(lead) {
            if name.is_empty() {
                return Err(Error::input(
                    at.field(format!("column {}", i + 1)),
                    "column name is empty: name every taxel column (e.g. `taxel_0`), and \
                     remove any trailing comma",
                ));
            }
            if name == TIME || name == POSITION {
                let hint = if name == POSITION {
                    "`position_mm` must be the second column, right after `time_s`"
                } else {
                    "`time_s` must appear once, as the first column"
                };
                return Err(Error::input(at.field(name.clone()), hint));
            }
            if names[lead..i].contains(name) {
                return Err(Error::input(
                    at.field(name.clone()),
                    format!("column `{name}` appears twice: give every taxel column its own name"),
                ));
            }
        }
        let found = names.len() - lead;
        let lead_desc = if has_position {
            "after `time_s,position_mm`"
        } else {
            "after `time_s`"
        };
        if found < self.n_taxels {
            let recommended = names[lead..].iter().all(|n| n.starts_with("taxel_"));
            let field = if recommended {
                values::taxel_name(found)
            } else {
                format!("column {}", names.len() + 1)
            };
            return Err(Error::input(
                at.field(field),
                format!(
                    "missing column: the header has {found} taxel columns {lead_desc} but the \
                     manifest declares {} (sensor.taxels): add the missing columns or fix \
                     sensor.taxels",
                    self.n_taxels
                ),
            ));
        }
        if found > self.n_taxels {
            let extra = names[lead + self.n_taxels].clone();
            return Err(Error::input(
                at.field(extra.clone()),
                format!(
                    "extra column `{extra}`: the header has {found} taxel columns {lead_desc} but \
                     the manifest declares {} (sensor.taxels): remove the extra columns or fix \
                     sensor.taxels",
                    self.n_taxels
                ),
            ));
        }
        self.columns = names;
        self.has_position = has_position;
        Ok(())
    }

    /// Read the next row, appending its taxel values to `values` and
    /// returning its time and position; `Ok(None)` at the end.
    pub(crate) fn read_row_into(
        &mut self,
        values: &mut Vec<f32>,
    ) -> Result<Option<(f64, Option<f64>)>> {
        if self.done {
            return Ok(None);
        }
        let result = self.read_row_inner(values);
        if !matches!(result, Ok(Some(_))) {
            self.done = true;
        }
        result
    }

    fn read_row_inner(&mut self, values: &mut Vec<f32>) -> Result<Option<(f64, Option<f64>)>> {
        if !self.next_line()? {
            if self.rows == 0 {
                return Err(Error::input(
                    Location::file(&self.source),
                    "no frames: the file has a header but no data rows; a recording needs at \
                     least one frame",
                ));
            }
            return Ok(None);
        }
        let row = self.rows + 1;
        let at = self.at();
        let text = line_text(&self.buf, &self.columns, self.at())?;
        let fields = split_fields(text)
            .map_err(|m| Error::input(at.clone(), format!("data row {row}: {m}")))?;
        let n_cols = self.columns.len();
        if fields.len() < n_cols {
            let missing = &self.columns[fields.len()];
            // A short last line without a line break is a file cut short
            // (a copy or a recording stopped mid-row); a short line
            // elsewhere is a row the rig wrote without a value.
            let message = if self.unterminated {
                format!(
                    "data row {row}: missing value: the row has {} values, the header has \
                     {n_cols} columns, and the file ends inside this row without a line break: \
                     the file was cut short; copy it again from its source, or delete the \
                     unfinished last line",
                    fields.len()
                )
            } else {
                format!(
                    "data row {row}: missing value: the row has {} values, the header has \
                     {n_cols} columns: give every column a value, or drop the row",
                    fields.len()
                )
            };
            return Err(Error::input(at.field(missing.clone()), message));
        }
        if fields.len() > n_cols {
            return Err(Error::input(
                at.field(format!("column {}", n_cols + 1)),
                format!(
                    "data row {row}: extra value: the row has {} values, the header has {n_cols} \
                     columns; remove the extra values (a trailing comma adds an empty one)",
                    fields.len()
                ),
            ));
        }
        let field_err = |i: usize, m: String| {
            Error::input(
                at.clone().field(self.columns[i].clone()),
                format!("data row {row}: {m}"),
            )
        };
        let time = parse_f64(&fields[0])
            .and_then(|t| self.time.check(t))
            .map_err(|m| field_err(0, m))?;
        let position = if self.has_position {
            Some(
                parse_f64(&fields[1])
                    .and_then(values::check_f64)
                    .map_err(|m| field_err(1, m))?,
            )
        } else {
            None
        };
        let lead = 1 + usize::from(self.has_position);
        let start = values.len();
        for (i, f) in fields.iter().enumerate().skip(lead) {
            match parse_taxel(f) {
                Ok(v) => values.push(v),
                Err(m) => {
                    values.truncate(start);
                    return Err(field_err(i, m));
                }
            }
        }
        self.rows = row;
        Ok(Some((time, position)))
    }
}

impl<R: Read> Iterator for CsvFrameReader<R> {
    type Item = Result<Frame>;

    fn next(&mut self) -> Option<Result<Frame>> {
        self.read_frame().transpose()
    }
}

/// The current line as text, or an invalid-UTF-8 error naming the column.
fn line_text<'a>(buf: &'a [u8], columns: &[String], at: Location) -> Result<&'a str> {
    std::str::from_utf8(buf).map_err(|e| {
        let column = buf[..e.valid_up_to()]
            .iter()
            .filter(|&&b| b == b',')
            .count();
        let at = match columns.get(column) {
            Some(name) => at.field(name.clone()),
            None => at,
        };
        Error::input(
            at,
            format!(
                "invalid UTF-8 at byte {} of the line: save the file as UTF-8 (or plain ASCII) \
                 text",
                e.valid_up_to() + 1
            ),
        )
    })
}

/// Split one line at commas, trimming spaces around each field. A field
/// may be wrapped in double quotes (with `""` for a quote inside); a quote
/// must then close on the same line.
fn split_fields(line: &str) -> std::result::Result<Vec<Cow<'_, str>>, String> {
    if !line.contains('"') {
        return Ok(line.split(',').map(|f| Cow::Borrowed(f.trim())).collect());
    }
    let mut fields = Vec::new();
    let mut rest = line;
    loop {
        let trimmed = rest.trim_start();
        if let Some(body) = trimmed.strip_prefix('"') {
            let mut value = String::new();
            let mut chars = body.char_indices();
            let after = loop {
                match chars.next() {
                    Some((i, '"')) => {
                        if body[i + 1..].starts_with('"') {
                            value.push('"');
                            chars.next();
                        } else {
                            break &body[i + 1..];
                        }
                    }
                    Some((_, c)) => value.push(c),
                    None => {
                        return Err(
                            "a quoted field is not closed on this line: close the quote \
                                    (quoted fields cannot span lines)"
                                .to_string(),
                        )
                    }
                }
            };
            fields.push(Cow::Owned(value));
            let after = after.trim_start();
            if after.is_empty() {
                return Ok(fields);
            }
            match after.strip_prefix(',') {
                Some(next) => rest = next,
                None => {
                    return Err(
                        "text after a closing quote: put a comma right after the quoted \
                                field"
                            .to_string(),
                    )
                }
            }
        } else {
            match rest.find(',') {
                Some(i) => {
                    fields.push(Cow::Borrowed(rest[..i].trim()));
                    rest = &rest[i + 1..];
                }
                None => {
                    fields.push(Cow::Borrowed(rest.trim()));
                    return Ok(fields);
                }
            }
        }
    }
}

fn unreadable(text: &str) -> String {
    if text.is_empty() {
        "empty value: every column needs a number".to_string()
    } else {
        format!("cannot read `{text}` as a number: write plain decimal numbers such as 0.25 or 1e-3, with a dot for the decimal point")
    }
}

/// Parse a time or position value.
fn parse_f64(text: &str) -> std::result::Result<f64, String> {
    text.parse::<f64>().map_err(|_| unreadable(text))
}

/// Parse a taxel value straight to f32 (one rounding, so values written
/// with the shortest round-trip digits read back exactly).
fn parse_taxel(text: &str) -> std::result::Result<f32, String> {
    let v = text.parse::<f32>().map_err(|_| unreadable(text))?;
    if v.is_finite() {
        return Ok(v);
    }
    let word = text.trim_start_matches(['+', '-']).to_ascii_lowercase();
    if v.is_nan() || word == "inf" || word == "infinity" {
        Err(values::non_finite_message(f64::from(v)))
    } else {
        Err(values::too_large_message(&format!("`{text}`")))
    }
}

/// Write `rec` as CSV: header `time_s[,position_mm],taxel_0,...`, then one
/// line per frame. Floats use the shortest digits that read back to the
/// same value (f64 for time and position, f32 for taxels).
pub(crate) fn write_csv(out: &mut impl Write, rec: &Recording) -> std::io::Result<()> {
    let n_taxels = rec.frames.ncols();
    let mut line = String::from(TIME);
    if rec.position_mm.is_some() {
        line.push(',');
        line.push_str(POSITION);
    }
    for k in 0..n_taxels {
        line.push(',');
        line.push_str(&values::taxel_name(k));
    }
    line.push('\n');
    out.write_all(line.as_bytes())?;
    for (i, row) in rec.frames.rows().into_iter().enumerate() {
        use std::fmt::Write as _;
        line.clear();
        // `{:?}` on floats prints the shortest text that parses back to the
        // same value (exponent form for very large or small magnitudes).
        let _ = write!(line, "{:?}", rec.time_s.get(i).copied().unwrap_or(f64::NAN));
        if let Some(pos) = &rec.position_mm {
            let _ = write!(line, ",{:?}", pos.get(i).copied().unwrap_or(f64::NAN));
        }
        for v in row {
            let _ = write!(line, ",{v:?}");
        }
        line.push('\n');
        out.write_all(line.as_bytes())?;
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    fn reader(text: &str, taxels: usize) -> Result<CsvFrameReader<&[u8]>> {
        CsvFrameReader::new(text.as_bytes(), "t.csv", taxels)
    }

    fn all(text: &str, taxels: usize) -> Result<Vec<Frame>> {
        reader(text, taxels)?.collect()
    }

    fn input_err(r: Result<Vec<Frame>>) -> (Location, String) {
        match r {
            Err(Error::Input { at, message }) => (at, message),
            other => panic!("expected Error::Input, got {other:?}"),
        }
    }

    #[test]
    fn reads_rows_with_and_without_position() {
        let frames = all("time_s,a,b\n0,1,2\n0.5,3,4.25\n", 2).unwrap();
        assert_eq!(frames.len(), 2);
        assert_eq!(frames[1].time_s, 0.5);
        assert_eq!(frames[1].values, vec![3.0, 4.25]);
        assert_eq!(frames[1].position_mm, None);
        assert_eq!(frames[1].row, 2);
        let frames = all("time_s,position_mm,a\n0,10.5,1\n", 1).unwrap();
        assert_eq!(frames[0].position_mm, Some(10.5));
    }

    #[test]
    fn tolerates_bom_crlf_spaces_blank_lines_quotes_and_no_final_newline() {
        let text = "\u{feff}time_s , \"taxel 0\"\r\n\r\n 0 , 1 \r\n   \n\"0.1\",2";
        let r = reader(text, 1).unwrap();
        assert_eq!(r.columns(), ["time_s", "taxel 0"]);
        let frames: Vec<Frame> = r.collect::<Result<_>>().unwrap();
        assert_eq!(frames.len(), 2);
        assert_eq!(frames[1].values, vec![2.0]);
    }

    #[test]
    fn nan_in_data_row_3_names_line_4_row_3_and_column() {
        let (at, message) = input_err(all("time_s,taxel_0,taxel_1\n0,1,1\n1,1,1\n2,1,NaN\n", 2));
        assert_eq!(at.file, Path::new("t.csv"));
        assert_eq!(at.line, Some(4));
        assert_eq!(at.field.as_deref(), Some("taxel_1"));
        assert!(
            message.starts_with("data row 3: NaN is not allowed"),
            "{message}"
        );
    }

    #[test]
    fn blank_lines_count_as_file_lines_not_rows() {
        let (at, message) = input_err(all("time_s,a\n\n0,1\n\n1,x\n", 1));
        assert_eq!(at.line, Some(5));
        assert!(message.starts_with("data row 2:"), "{message}");
    }

    #[test]
    fn infinite_and_huge_values() {
        let (_, m) = input_err(all("time_s,a\n0,-inf\n", 1));
        assert!(m.contains("-inf"), "{m}");
        let (_, m) = input_err(all("time_s,a\n0,1e39\n", 1));
        assert!(m.contains("too large"), "{m}");
        let (at, m) = input_err(all("time_s,a\ninf,1\n", 1));
        assert_eq!(at.field.as_deref(), Some("time_s"));
        assert!(m.contains("+inf"), "{m}");
        let (at, _) = input_err(all("time_s,position_mm,a\n0,NaN,1\n", 1));
        assert_eq!(at.field.as_deref(), Some("position_mm"));
    }

    #[test]
    fn unparsable_and_empty_values() {
        let (at, m) = input_err(all("time_s,a,b\n0,1,abc\n", 2));
        assert_eq!(at.field.as_deref(), Some("b"));
        assert!(m.contains("cannot read `abc`"), "{m}");
        let (at, m) = input_err(all("time_s,a,b\n0,,1\n", 2));
        assert_eq!(at.field.as_deref(), Some("a"));
        assert!(m.contains("empty value"), "{m}");
        let (_, m) = input_err(all("time_s,a\n0,0x10\n", 1));
        assert!(m.contains("cannot read"), "{m}");
    }

    #[test]
    fn time_must_increase() {
        let (at, m) = input_err(all("time_s,a\n0,1\n0.1,1\n0.1,1\n", 1));
        assert_eq!(at.line, Some(4));
        assert_eq!(at.field.as_deref(), Some("time_s"));
        assert!(m.contains("data row 3: time_s must increase"), "{m}");
        assert!(input_err(all("time_s,a\n1,1\n0.5,1\n", 1))
            .1
            .contains("must increase"));
    }

    #[test]
    fn missing_and_extra_values_in_rows() {
        let (at, m) = input_err(all("time_s,a,b\n0,1\n", 2));
        assert_eq!(at.field.as_deref(), Some("b"));
        assert!(m.contains("missing value"), "{m}");
        assert!(m.contains("give every column a value"), "{m}");
        // The same short row without its line break ends a file cut short.
        let (at, m) = input_err(all("time_s,a,b\n0,1", 2));
        assert_eq!(at.field.as_deref(), Some("b"));
        assert!(m.contains("the file was cut short"), "{m}");
        // A complete last row without a final newline is fine.
        assert!(all("time_s,a,b\n0,1,2", 2).is_ok());
        let (at, m) = input_err(all("time_s,a,b\n0,1,2,\n", 2));
        assert_eq!(at.field.as_deref(), Some("column 4"));
        assert!(m.contains("extra value"), "{m}");
    }

    #[test]
    fn header_problems() {
        let cases: [(&str, usize, &str, &str); 9] = [
            ("time,a\n0,1\n", 1, "time", "must be `time_s`"),
            ("0,1\n0,1\n", 1, "0", "no header line"),
            ("time_s;a\n0;1\n", 1, "time_s;a", "separated by commas"),
            ("time_s,taxel_0\n0,1\n", 2, "taxel_1", "missing column"),
            ("time_s,p,q\n0,1,2\n", 3, "column 4", "missing column"),
            ("time_s,a,b,c\n0,1,2,3\n", 2, "c", "extra column `c`"),
            ("time_s,a,a\n0,1,2\n", 2, "a", "appears twice"),
            (
                "time_s,a,position_mm\n0,1,2\n",
                2,
                "position_mm",
                "second column",
            ),
            ("time_s,a,\n0,1,2\n", 2, "column 3", "column name is empty"),
        ];
        for (text, taxels, field, needle) in cases {
            let (at, m) = input_err(all(text, taxels));
            assert_eq!(at.line, Some(1), "{text}");
            assert_eq!(at.field.as_deref(), Some(field), "{text}: {m}");
            assert!(m.contains(needle), "{text}: {m}");
        }
    }

    #[test]
    fn empty_file_and_header_only() {
        let (at, m) = input_err(all("", 1));
        assert_eq!(at.line, None);
        assert!(m.contains("file is empty"), "{m}");
        let (_, m) = input_err(all("\n \n", 1));
        assert!(m.contains("file is empty"), "{m}");
        let (_, m) = input_err(all("time_s,a\n", 1));
        assert!(m.contains("no frames"), "{m}");
    }

    #[test]
    fn invalid_utf8_names_line_and_column() {
        let bytes = b"time_s,a,b\n0,1,\xff\n";
        let r: Result<Vec<Frame>> = CsvFrameReader::new(&bytes[..], "t.csv", 2)
            .unwrap()
            .collect();
        let (at, m) = input_err(r);
        assert_eq!(at.line, Some(2));
        assert_eq!(at.field.as_deref(), Some("b"));
        assert!(m.contains("invalid UTF-8"), "{m}");
    }

    #[test]
    fn unclosed_quote() {
        let (_, m) = input_err(all("time_s,a\n0,\"1\n", 1));
        assert!(m.contains("not closed"), "{m}");
    }

    #[test]
    fn iterator_stops_after_an_error() {
        let mut r = reader("time_s,a\n0,x\n1,1\n", 1).unwrap();
        assert!(r.next().unwrap().is_err());
        assert!(r.next().is_none());
    }

    /// A reader that hands out one line per `read` call and counts the
    /// lines handed out, like a pipe fed row by row.
    struct LineByLine {
        lines: Vec<Vec<u8>>,
        served: std::rc::Rc<std::cell::Cell<usize>>,
    }

    impl Read for LineByLine {
        fn read(&mut self, buf: &mut [u8]) -> std::io::Result<usize> {
            let i = self.served.get();
            match self.lines.get(i) {
                Some(line) => {
                    let n = line.len().min(buf.len());
                    buf[..n].copy_from_slice(&line[..n]);
                    assert_eq!(n, line.len(), "test lines fit the buffer");
                    self.served.set(i + 1);
                    Ok(n)
                }
                None => Ok(0),
            }
        }
    }

    #[test]
    fn yields_each_row_without_reading_ahead() {
        let served = std::rc::Rc::new(std::cell::Cell::new(0));
        let lines = ["time_s,a\n", "0,1\n", "1,2\n", "2,3\n"];
        let src = LineByLine {
            lines: lines.iter().map(|l| l.as_bytes().to_vec()).collect(),
            served: served.clone(),
        };
        let mut r = CsvFrameReader::new(src, "<stdin>", 1).unwrap();
        assert_eq!(served.get(), 1, "the header alone was read");
        for k in 1..=3 {
            let frame = r.read_frame().unwrap().unwrap();
            assert_eq!(frame.row, k);
            assert_eq!(
                served.get(),
                k + 1,
                "row {k} returned after reading only its line"
            );
        }
        assert!(r.read_frame().unwrap().is_none());
    }

    #[test]
    fn split_fields_handles_quotes() {
        let f = split_fields(r#" "a,b" , "say ""hi""",c"#).unwrap();
        assert_eq!(f, vec!["a,b", "say \"hi\"", "c"]);
        assert!(split_fields(r#""a" x,b"#).is_err());
    }
}
