//! Reading a whole text file as UTF-8, with an input error that names the
//! line and the byte where the text stops being UTF-8 (instead of the
//! operating system's "stream did not contain valid UTF-8", which names
//! neither and reads as a failed read).

use crate::{Error, Location, Result};
use std::path::Path;

/// Read `path` as UTF-8 text (re-exported as `tactread::fsutil::read_utf8`).
/// A failed read is an [`Error::Io`]; invalid
/// UTF-8 is an [`Error::Input`] at its 1-based line whose message gives the
/// 1-based byte within the line, then `hint` (how to fix it).
pub fn read_utf8(path: &Path, hint: &str) -> Result<String> {
    let bytes = std::fs::read(path).map_err(|e| Error::io("cannot read", path, e))?;
    String::from_utf8(bytes).map_err(|e| {
        let good = e.utf8_error().valid_up_to();
        let (line, byte) = line_and_byte(e.as_bytes(), good);
        Error::input(
            Location::file(path).line(line),
            format!("invalid UTF-8 at byte {byte} of the line: {hint}"),
        )
    })
}

/// 1-based line and 1-based byte within that line of byte `offset`.
fn line_and_byte(bytes: &[u8], offset: usize) -> (usize, usize) {
    let before = &bytes[..offset.min(bytes.len())];
    let line = before.iter().filter(|&&b| b == b'\n').count() + 1;
    let start = before
        .iter()
        .rposition(|&b| b == b'\n')
        .map_or(0, |p| p + 1);
    (line, before.len() - start + 1)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn names_the_line_and_byte_of_the_first_bad_byte() {
        assert_eq!(line_and_byte(b"\xff", 0), (1, 1));
        assert_eq!(line_and_byte(b"ab\ncd\xffe", 5), (2, 3));
        assert_eq!(line_and_byte(b"ab\n\n\xff", 4), (3, 1));
        let dir = crate::testutil::test_dir("text-file");
        let path = dir.join("w.txt");
        std::fs::write(&path, b"tea\nj\xffr\n").unwrap();
        let e = read_utf8(&path, "save it as UTF-8").unwrap_err();
        assert!(matches!(e, Error::Input { .. }), "{e:?}");
        assert!(
            e.to_string()
                .ends_with("w.txt line 2: invalid UTF-8 at byte 2 of the line: save it as UTF-8"),
            "{e}"
        );
        std::fs::write(&path, "thé\n").unwrap();
        assert_eq!(read_utf8(&path, "").unwrap(), "thé\n");
    }
}
