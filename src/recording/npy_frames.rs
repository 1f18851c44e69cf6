//! `.npy` frames files: header parsing, chunked reading (C or Fortran
//! order, seeking so memory stays one chunk), and the writer.
//!
//! The container is NumPy's `.npy` format (NumPy Enhancement Proposal 1, "A
//! Simple File Format for NumPy Arrays", and the `numpy.lib.format` module
//! documentation; details from memory): the magic bytes `\x93NUMPY`, a
//! major and minor version byte, the header length (u16 little-endian in
//! version 1.0, u32 in 2.0 and 3.0), a Python dict literal with `descr`,
//! `fortran_order` and `shape`, padded with spaces and a final newline so
//! the data starts on a 64-byte boundary, then the raw array data.
//!
//! We read only what recordings need: 2-D arrays of float32 or float64 in
//! either byte order. The header parser is ours, not the `npyz` crate's:
//! `npyz` 0.8 allocates the header length the file declares before reading
//! it (4 GiB for a crafted 12-byte file) and multiplies the shape without
//! overflow checks, and a frames reader must give row and column errors.
//!
//! Errors on data name [`Location::line`] = the 1-based array row and the
//! column name (`time_s`, `position_mm`, `taxel_<k>`).

use super::values::{self, TimeCheck, POSITION, TIME};
use super::{NpyColumns, Recording};
use crate::{Error, Location, Result};
use std::fs::File;
use std::io::{Read, Seek, SeekFrom, Write};
use std::path::{Path, PathBuf};

const MAGIC: &[u8; 6] = b"\x93NUMPY";
/// Largest header accepted (numpy itself writes a few hundred bytes).
const MAX_HEADER_BYTES: usize = 1024 * 1024;

/// Element type of the array.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum Dtype {
    F4,
    F8,
}

impl Dtype {
    fn size(self) -> usize {
        match self {
            Dtype::F4 => 4,
            Dtype::F8 => 8,
        }
    }
}

/// What an `.npy` header says.
#[derive(Debug, Clone, PartialEq, Eq)]
pub(crate) struct NpyHeader {
    pub(crate) dtype: Dtype,
    pub(crate) big_endian: bool,
    pub(crate) fortran_order: bool,
    pub(crate) rows: u64,
    pub(crate) cols: u64,
    /// Byte offset of the array data from the start of the file.
    pub(crate) data_offset: u64,
}

/// Parse an `.npy` header from the start of a file. `file_len` bounds the
/// declared header length before anything is allocated.
pub(crate) fn read_header(
    r: &mut impl Read,
    file_len: u64,
) -> std::result::Result<NpyHeader, String> {
    let mut prefix = [0u8; 10];
    let got = read_up_to(r, &mut prefix).map_err(|e| format!("cannot read the header: {e}"))?;
    if got < 8 || &prefix[..6] != MAGIC {
        return Err(
            "not an .npy file: it does not start with the .npy magic bytes; save the \
                    array with numpy.save or give the frames as CSV"
                .to_string(),
        );
    }
    let (major, minor) = (prefix[6], prefix[7]);
    let (header_len, text_start) = match (major, minor) {
        (1, 0) => {
            if got < 10 {
                return Err(truncated_header());
            }
            (
                usize::from(u16::from_le_bytes([prefix[8], prefix[9]])),
                10usize,
            )
        }
        (2, 0) | (3, 0) => {
            let mut rest = [0u8; 2];
            if got < 10 || read_up_to(r, &mut rest).map_err(|e| e.to_string())? < 2 {
                return Err(truncated_header());
            }
            let len = u32::from_le_bytes([prefix[8], prefix[9], rest[0], rest[1]]);
            (usize::try_from(len).unwrap_or(usize::MAX), 12usize)
        }
        _ => {
            return Err(format!(
                ".npy format version {major}.{minor} is not supported (versions 1.0, 2.0 and 3.0 \
                 are): save the array with a current numpy"
            ))
        }
    };
    if header_len > MAX_HEADER_BYTES {
        return Err(format!(
            "the header claims {header_len} bytes, more than the {MAX_HEADER_BYTES} accepted: the \
             file is damaged or not a plain array"
        ));
    }
    let data_offset = (text_start + header_len) as u64;
    if data_offset > file_len {
        return Err(truncated_header());
    }
    let mut text = vec![0u8; header_len];
    if read_up_to(r, &mut text).map_err(|e| e.to_string())? < header_len {
        return Err(truncated_header());
    }
    let text = std::str::from_utf8(&text).map_err(|_| {
        "the header is not valid text (invalid UTF-8): the file is damaged".to_string()
    })?;
    let dict = parse_dict(text)?;
    let get = |key: &str| {
        dict.iter()
            .find(|(k, _)| k == key)
            .map(|(_, v)| v)
            .ok_or_else(|| format!("the header has no `{key}` entry: the file is damaged"))
    };
    let (dtype, big_endian) = match get("descr")? {
        Value::Str(d) => match d.as_str() {
            "<f4" => (Dtype::F4, false),
            ">f4" => (Dtype::F4, true),
            "<f8" => (Dtype::F8, false),
            ">f8" => (Dtype::F8, true),
            other => {
                return Err(format!(
                    "dtype `{other}` is not supported: store float32 or float64 values (in \
                     numpy: `numpy.save(path, a.astype(numpy.float32))`)"
                ))
            }
        },
        _ => {
            return Err(
                "structured or unusual dtype: store a plain 2-D float32 or float64 array"
                    .to_string(),
            )
        }
    };
    let fortran_order = match get("fortran_order")? {
        Value::Bool(b) => *b,
        _ => return Err("`fortran_order` is not True or False: the file is damaged".to_string()),
    };
    let shape = match get("shape")? {
        Value::Tuple(dims) => dims.clone(),
        _ => return Err("`shape` is not a tuple: the file is damaged".to_string()),
    };
    let [rows, cols] = shape[..] else {
        return Err(format!(
            "the array has {} dimensions (shape {:?}), frames need 2: `[n_frames, n_columns]`; \
             reshape it before saving (in numpy: `a.reshape(len(a), -1)`)",
            shape.len(),
            shape
        ));
    };
    Ok(NpyHeader {
        dtype,
        big_endian,
        fortran_order,
        rows,
        cols,
        data_offset,
    })
}

fn truncated_header() -> String {
    "the file is cut short inside its header: copy it again from its source".to_string()
}

/// Read until `buf` is full or the input ends; returns the bytes read.
fn read_up_to(r: &mut impl Read, buf: &mut [u8]) -> std::io::Result<usize> {
    let mut got = 0;
    while got < buf.len() {
        match r.read(&mut buf[got..]) {
            Ok(0) => break,
            Ok(n) => got += n,
            Err(e) if e.kind() == std::io::ErrorKind::Interrupted => {}
            Err(e) => return Err(e),
        }
    }
    Ok(got)
}

/// A value in the header dict: only what `.npy` headers use.
#[derive(Debug, Clone, PartialEq)]
enum Value {
    Str(String),
    Bool(bool),
    Int(u64),
    Tuple(Vec<u64>),
}

/// Parse the header's Python dict literal: string keys; values are
/// strings, `True`/`False`, non-negative integers or tuples of them.
fn parse_dict(text: &str) -> std::result::Result<Vec<(String, Value)>, String> {
    let damaged = |what: &str| format!("cannot parse the header ({what}): the file is damaged");
    let mut p = Parser {
        s: text.as_bytes(),
        i: 0,
    };
    p.ws();
    if !p.eat(b'{') {
        return Err(damaged("no `{`"));
    }
    let mut entries = Vec::new();
    loop {
        p.ws();
        if p.eat(b'}') {
            break;
        }
        let key = p.string().ok_or_else(|| damaged("expected a quoted key"))?;
        p.ws();
        if !p.eat(b':') {
            return Err(damaged("expected `:`"));
        }
        p.ws();
        let value = p
            .value()
            .ok_or_else(|| damaged(&format!("unsupported value for `{key}`")))?;
        entries.push((key, value));
        p.ws();
        if p.eat(b',') {
            continue;
        }
        p.ws();
        if p.eat(b'}') {
            break;
        }
        return Err(damaged("expected `,` or `}`"));
    }
    p.ws();
    if p.i != p.s.len() {
        return Err(damaged("text after the dict"));
    }
    Ok(entries)
}

struct Parser<'a> {
    s: &'a [u8],
    i: usize,
}

impl Parser<'_> {
    fn peek(&self) -> Option<u8> {
        self.s.get(self.i).copied()
    }
    fn eat(&mut self, b: u8) -> bool {
        if self.peek() == Some(b) {
            self.i += 1;
            true
        } else {
            false
        }
    }
    fn ws(&mut self) {
        while matches!(self.peek(), Some(b' ' | b'\t' | b'\n' | b'\r')) {
            self.i += 1;
        }
    }
    fn string(&mut self) -> Option<String> {
        let quote = self.peek().filter(|&q| q == b'\'' || q == b'"')?;
        self.i += 1;
        let mut out = Vec::new();
        loop {
            let b = self.peek()?;
            self.i += 1;
            if b == quote {
                return String::from_utf8(out).ok();
            }
            if b == b'\\' {
                out.push(self.peek()?);
                self.i += 1;
            } else {
                out.push(b);
            }
        }
    }
    fn int(&mut self) -> Option<u64> {
        let start = self.i;
        while matches!(self.peek(), Some(b'0'..=b'9')) {
            self.i += 1;
        }
        let digits = std::str::from_utf8(&self.s[start..self.i]).ok()?;
        let v = digits.parse::<u64>().ok()?;
        // Python 2 wrote long integers with an `L` suffix.
        self.eat(b'L');
        Some(v)
    }
    fn word(&mut self, w: &str) -> bool {
        if self.s[self.i..].starts_with(w.as_bytes()) {
            self.i += w.len();
            true
        } else {
            false
        }
    }
    fn value(&mut self) -> Option<Value> {
        match self.peek()? {
            b'\'' | b'"' => self.string().map(Value::Str),
            b'T' if self.word("True") => Some(Value::Bool(true)),
            b'F' if self.word("False") => Some(Value::Bool(false)),
            b'0'..=b'9' => self.int().map(Value::Int),
            b'(' => {
                self.i += 1;
                let mut dims = Vec::new();
                loop {
                    self.ws();
                    if self.eat(b')') {
                        return Some(Value::Tuple(dims));
                    }
                    dims.push(self.int()?);
                    self.ws();
                    if !self.eat(b',') {
                        self.ws();
                        return self.eat(b')').then_some(Value::Tuple(dims));
                    }
                }
            }
            _ => None,
        }
    }
}

/// Reads an `.npy` frames file chunk by chunk, from a file or (for tests and
/// the fuzz targets) any seekable reader.
#[derive(Debug)]
pub(crate) struct NpyFrameReader<R = File> {
    file: R,
    path: PathBuf,
    header: NpyHeader,
    layout: NpyColumns,
    sample_rate_hz: f64,
    next_row: u64,
    time: TimeCheck,
    buf: Vec<u8>,
}

impl NpyFrameReader {
    /// Open `path` and check its header against the manifest's layout.
    pub(crate) fn open(
        path: &Path,
        layout: NpyColumns,
        n_taxels: usize,
        sample_rate_hz: f64,
    ) -> Result<Self> {
        let file = File::open(path).map_err(|e| Error::io("cannot open", path, e))?;
        let file_len = file
            .metadata()
            .map_err(|e| Error::io("cannot read", path, e))?
            .len();
        NpyFrameReader::from_reader(file, file_len, path, layout, n_taxels, sample_rate_hz)
    }
}

impl<R: Read + Seek> NpyFrameReader<R> {
    /// Check the header of the `.npy` data in `file` (positioned at its
    /// start, `file_len` bytes long) against the manifest's layout; `path`
    /// names it in errors.
    pub(crate) fn from_reader(
        mut file: R,
        file_len: u64,
        path: &Path,
        layout: NpyColumns,
        n_taxels: usize,
        sample_rate_hz: f64,
    ) -> Result<Self> {
        let at = || Location::file(path);
        if file_len == 0 {
            return Err(Error::input(
                at(),
                "file is empty: an .npy frames file holds a 2-D float array (see \
                 docs/recording-format.md)",
            ));
        }
        let header = read_header(&mut file, file_len).map_err(|m| Error::input(at(), m))?;
        let expected = usize::from(layout.time_s) + usize::from(layout.position_mm) + n_taxels;
        let names = column_names(layout, n_taxels);
        if header.rows == 0 {
            return Err(Error::input(
                at(),
                "no frames: the array has 0 rows; a recording needs at least one frame",
            ));
        }
        if header.cols != expected as u64 {
            let layout_desc = format!(
                "{}{}{n_taxels} taxels (sensor.taxels)",
                if layout.time_s { "time_s + " } else { "" },
                if layout.position_mm {
                    "position_mm + "
                } else {
                    ""
                },
            );
            let (field, what) = if header.cols < expected as u64 {
                (names[header.cols as usize].clone(), "missing column")
            } else {
                (format!("column {}", expected + 1), "extra column")
            };
            return Err(Error::input(
                at().field(field),
                format!(
                    "{what}: the array has {} columns but the manifest expects {expected}: \
                     {layout_desc}; fix npy_columns or sensor.taxels, or save the right columns",
                    header.cols
                ),
            ));
        }
        let item = header.dtype.size() as u64;
        let data_len = header
            .rows
            .checked_mul(header.cols)
            .and_then(|n| n.checked_mul(item));
        let available = file_len - header.data_offset;
        match data_len {
            Some(need) if need == available => {}
            Some(need) if need > available => {
                let row_bytes = header.cols * item;
                let complete = if header.fortran_order {
                    0
                } else {
                    available / row_bytes
                };
                return Err(Error::input(
                    at(),
                    format!(
                        "truncated: the header declares {} rows x {} columns ({need} bytes of \
                         data) but only {available} bytes follow ({} complete rows): the file \
                         was cut short; copy it again or re-save it",
                        header.rows, header.cols, complete
                    ),
                ));
            }
            Some(need) => {
                return Err(Error::input(
                    at(),
                    format!(
                        "{} bytes follow the array data: the file holds more than one array or \
                         was appended to; save one 2-D array per file",
                        available - need
                    ),
                ))
            }
            None => {
                return Err(Error::input(
                    at(),
                    format!(
                        "the header declares an impossible shape ({} x {}): the file is damaged",
                        header.rows, header.cols
                    ),
                ))
            }
        }
        Ok(NpyFrameReader {
            file,
            path: path.to_path_buf(),
            header,
            layout,
            sample_rate_hz,
            next_row: 0,
            time: TimeCheck::default(),
            buf: Vec::new(),
        })
    }

    /// Total number of frames in the file.
    pub(crate) fn n_rows(&self) -> u64 {
        self.header.rows
    }

    /// Read up to `max_rows` frames, appending to the output vectors
    /// (`values` gets `n * n_taxels` values in row-major order). Returns the
    /// number of frames read, 0 at the end.
    pub(crate) fn read_chunk(
        &mut self,
        max_rows: usize,
        time_s: &mut Vec<f64>,
        mut position_mm: Option<&mut Vec<f64>>,
        values: &mut Vec<f32>,
    ) -> Result<usize> {
        let h = &self.header;
        let n = (h.rows - self.next_row).min(max_rows.max(1) as u64) as usize;
        if n == 0 {
            return Ok(0);
        }
        let cols = h.cols as usize;
        let item = h.dtype.size();
        self.buf.clear();
        self.buf.resize(n * cols * item, 0);
        let io_err = |e: std::io::Error, path: &Path| {
            if e.kind() == std::io::ErrorKind::UnexpectedEof {
                Error::input(
                    Location::file(path),
                    "truncated: the file ended before the rows its header declares (was it \
                     changed while being read?)",
                )
            } else {
                Error::io("cannot read", path, e)
            }
        };
        if h.fortran_order {
            // Column-major: column c of rows r0..r0+n is one contiguous run.
            let col_bytes = n * item;
            for c in 0..cols {
                let offset = h.data_offset + (c as u64 * h.rows + self.next_row) * item as u64;
                self.file
                    .seek(SeekFrom::Start(offset))
                    .map_err(|e| Error::io("cannot read", &self.path, e))?;
                self.file
                    .read_exact(&mut self.buf[c * col_bytes..(c + 1) * col_bytes])
                    .map_err(|e| io_err(e, &self.path))?;
            }
        } else {
            let offset = h.data_offset + self.next_row * (cols * item) as u64;
            self.file
                .seek(SeekFrom::Start(offset))
                .map_err(|e| Error::io("cannot read", &self.path, e))?;
            self.file
                .read_exact(&mut self.buf)
                .map_err(|e| io_err(e, &self.path))?;
        }
        let (dtype, big, fortran) = (h.dtype, h.big_endian, h.fortran_order);
        let elem = |r: usize, c: usize| -> f64 {
            let idx = if fortran { c * n + r } else { r * cols + c };
            decode(&self.buf[idx * item..(idx + 1) * item], dtype, big)
        };
        let lead = usize::from(self.layout.time_s) + usize::from(self.layout.position_mm);
        let start_values = values.len();
        for r in 0..n {
            let row = self.next_row + r as u64; // 0-based
            let err = |c: usize, m: String| {
                let name = if c < lead {
                    if self.layout.time_s && c == 0 {
                        TIME.to_string()
                    } else {
                        POSITION.to_string()
                    }
                } else {
                    values::taxel_name(c - lead)
                };
                Error::input(
                    Location::file(&self.path)
                        .line(row as usize + 1)
                        .field(name),
                    format!("row {}: {m}", row + 1),
                )
            };
            let t = if self.layout.time_s {
                self.time.check(elem(r, 0)).map_err(|m| err(0, m))?
            } else {
                row as f64 / self.sample_rate_hz
            };
            if self.layout.position_mm {
                let c = usize::from(self.layout.time_s);
                let p = values::check_f64(elem(r, c)).map_err(|m| err(c, m))?;
                if let Some(out) = position_mm.as_deref_mut() {
                    out.push(p);
                }
            }
            for c in lead..cols {
                let v = values::taxel_from_f64(elem(r, c)).map_err(|m| {
                    values.truncate(start_values);
                    err(c, m)
                });
                values.push(v?);
            }
            time_s.push(t);
        }
        self.next_row += n as u64;
        Ok(n)
    }
}

/// Column names of an `.npy` layout, in array order.
fn column_names(layout: NpyColumns, n_taxels: usize) -> Vec<String> {
    let mut names = Vec::with_capacity(n_taxels + 2);
    if layout.time_s {
        names.push(TIME.to_string());
    }
    if layout.position_mm {
        names.push(POSITION.to_string());
    }
    names.extend((0..n_taxels).map(values::taxel_name));
    names
}

fn decode(b: &[u8], dtype: Dtype, big_endian: bool) -> f64 {
    match (dtype, big_endian) {
        (Dtype::F4, false) => f64::from(f32::from_le_bytes([b[0], b[1], b[2], b[3]])),
        (Dtype::F4, true) => f64::from(f32::from_be_bytes([b[0], b[1], b[2], b[3]])),
        (Dtype::F8, false) => f64::from_le_bytes([b[0], b[1], b[2], b[3], b[4], b[5], b[6], b[7]]),
        (Dtype::F8, true) => f64::from_be_bytes([b[0], b[1], b[2], b[3], b[4], b[5], b[6], b[7]]),
    }
}

/// The header bytes for a little-endian float64 C-order array of `rows` x
/// `cols`, version 1.0, padded so the data starts at a multiple of 64.
pub(crate) fn header_bytes(rows: usize, cols: usize) -> Vec<u8> {
    let dict = format!("{{'descr': '<f8', 'fortran_order': False, 'shape': ({rows}, {cols}), }}");
    let unpadded = MAGIC.len() + 2 + 2 + dict.len() + 1;
    let pad = (64 - unpadded % 64) % 64;
    let header_len = dict.len() + pad + 1;
    let mut out = Vec::with_capacity(unpadded + pad);
    out.extend_from_slice(MAGIC);
    out.extend_from_slice(&[1, 0]);
    // The dict of a 2-D shape is under 200 bytes, far below u16::MAX.
    out.extend_from_slice(&(header_len as u16).to_le_bytes());
    out.extend_from_slice(dict.as_bytes());
    out.resize(out.len() + pad, b' ');
    out.push(b'\n');
    out
}

/// Write `rec` as a float64 `.npy` array `[n_frames, 1 + has_position +
/// n_taxels]`: `time_s`, `position_mm` when present, then the taxels.
/// float64 holds the f64 times and the f32 taxel values exactly.
pub(crate) fn write_npy(out: &mut impl Write, rec: &Recording) -> std::io::Result<()> {
    let rows = rec.frames.nrows();
    let cols = 1 + usize::from(rec.position_mm.is_some()) + rec.frames.ncols();
    out.write_all(&header_bytes(rows, cols))?;
    let mut line = Vec::with_capacity(cols * 8);
    for (i, row) in rec.frames.rows().into_iter().enumerate() {
        line.clear();
        let t = rec.time_s.get(i).copied().unwrap_or(f64::NAN);
        line.extend_from_slice(&t.to_le_bytes());
        if let Some(pos) = &rec.position_mm {
            let p = pos.get(i).copied().unwrap_or(f64::NAN);
            line.extend_from_slice(&p.to_le_bytes());
        }
        for v in row {
            line.extend_from_slice(&f64::from(*v).to_le_bytes());
        }
        out.write_all(&line)?;
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    fn header(dict: &str, major: u8) -> Vec<u8> {
        let mut out = MAGIC.to_vec();
        out.extend_from_slice(&[major, 0]);
        if major == 1 {
            out.extend_from_slice(&(dict.len() as u16).to_le_bytes());
        } else {
            out.extend_from_slice(&(dict.len() as u32).to_le_bytes());
        }
        out.extend_from_slice(dict.as_bytes());
        out
    }

    fn parse(bytes: &[u8]) -> std::result::Result<NpyHeader, String> {
        read_header(&mut &bytes[..], bytes.len() as u64)
    }

    #[test]
    fn parses_numpy_style_headers() {
        let h = parse(&header(
            "{'descr': '<f4', 'fortran_order': False, 'shape': (3, 5), }          \n",
            1,
        ))
        .unwrap();
        assert_eq!(
            (h.dtype, h.big_endian, h.fortran_order, h.rows, h.cols),
            (Dtype::F4, false, false, 3, 5)
        );
        let h = parse(&header(
            "{\"descr\":\">f8\",\"fortran_order\":True,\"shape\":(2L,4L)}",
            2,
        ))
        .unwrap();
        assert_eq!(
            (h.dtype, h.big_endian, h.fortran_order, h.rows, h.cols),
            (Dtype::F8, true, true, 2, 4)
        );
        assert_eq!(h.data_offset, 12 + 52);
    }

    #[test]
    fn our_header_is_aligned_and_parses() {
        let bytes = header_bytes(7, 3);
        assert_eq!(bytes.len() % 64, 0);
        let h = parse(&bytes).unwrap();
        assert_eq!(
            (h.rows, h.cols, h.dtype, h.data_offset),
            (7, 3, Dtype::F8, bytes.len() as u64)
        );
    }

    #[test]
    fn rejects_bad_headers_with_clear_messages() {
        let cases: [(Vec<u8>, &str); 8] = [
            (b"time_s,a\n0,1\n".to_vec(), "not an .npy file"),
            (MAGIC[..4].to_vec(), "not an .npy file"),
            (
                header(
                    "{'descr': '<f4', 'fortran_order': False, 'shape': (3, 5), }",
                    9,
                ),
                "version 9.0",
            ),
            (
                header(
                    "{'descr': '<i8', 'fortran_order': False, 'shape': (3, 5), }",
                    1,
                ),
                "dtype `<i8`",
            ),
            (
                header(
                    "{'descr': [('a', '<f4')], 'fortran_order': False, 'shape': (3,), }",
                    1,
                ),
                "unsupported value",
            ),
            (
                header(
                    "{'descr': '<f4', 'fortran_order': False, 'shape': (3,), }",
                    1,
                ),
                "1 dimensions",
            ),
            (
                header(
                    "{'descr': '<f4', 'fortran_order': False, 'shape': (3, 4, 5), }",
                    1,
                ),
                "3 dimensions",
            ),
            (
                header("{'descr': '<f4', 'shape': (3, 4), }", 1),
                "no `fortran_order`",
            ),
        ];
        for (bytes, needle) in cases {
            let m = parse(&bytes).unwrap_err();
            assert!(m.contains(needle), "{needle}: {m}");
        }
    }

    #[test]
    fn huge_declared_header_is_refused_before_allocating() {
        let mut bytes = MAGIC.to_vec();
        bytes.extend_from_slice(&[2, 0]);
        bytes.extend_from_slice(&u32::MAX.to_le_bytes());
        assert!(parse(&bytes).unwrap_err().contains("more than"));
        let mut bytes = MAGIC.to_vec();
        bytes.extend_from_slice(&[1, 0, 200, 0]);
        bytes.extend_from_slice(b"{'descr'");
        assert!(parse(&bytes).unwrap_err().contains("cut short"));
    }

    #[test]
    fn dict_parser_rejects_garbage_without_panicking() {
        for text in [
            "",
            "{",
            "{'a'",
            "{'a':",
            "{'a': (1,",
            "{'a': (1 2)}",
            "{'a': 1} x",
            "{'a': 99999999999999999999999}",
            "{'a\\",
            "{'a': Tru}",
        ] {
            assert!(parse_dict(text).is_err(), "{text:?}");
        }
        assert_eq!(
            parse_dict("{'s': (), 'n': 3}").unwrap()[0].1,
            Value::Tuple(vec![])
        );
    }
}
