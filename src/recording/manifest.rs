//! The recording manifest on disk: reading it (format tag and version
//! first, then the fields, then their meaning), checking it, writing it,
//! and finding the manifest that belongs to a frames file.
//!
//! JSON errors carry serde_json's line and column. Semantic errors name the
//! field as a dotted path (`sensor.sample_rate_hz`).

use super::{FramesKind, Manifest, MANIFEST_FORMAT, MANIFEST_VERSION};
use crate::{Error, Location, Result};
use serde::Deserialize;
use std::io::Read;
use std::path::{Path, PathBuf};

/// Largest manifest read, in bytes. A manifest is a small JSON file; the
/// largest legitimate one (taxel positions for [`MAX_TAXELS`] taxels) stays
/// well under this.
const MAX_MANIFEST_BYTES: u64 = 64 * 1024 * 1024;

/// Largest taxel count a manifest may declare (2^20, a 1024 x 1024 skin).
pub(crate) const MAX_TAXELS: usize = 1 << 20;

/// A problem found in a manifest's content: the dotted field path and what is
/// wrong with it. Loading turns it into [`Error::Input`], saving into
/// [`Error::Output`].
pub(crate) type FieldProblem = (String, String);

/// Just the keys that say what the file is, read before anything else so
/// that a file of another format or a newer version gets a format error
/// instead of a confusing field error.
#[derive(Deserialize)]
struct Probe {
    format: Option<serde_json::Value>,
    version: Option<serde_json::Value>,
}

/// Read, parse and check the manifest at `path`.
pub(crate) fn read_manifest(path: &Path) -> Result<Manifest> {
    let file = std::fs::File::open(path).map_err(|e| Error::io("cannot open manifest", path, e))?;
    let mut bytes = Vec::new();
    file.take(MAX_MANIFEST_BYTES + 1)
        .read_to_end(&mut bytes)
        .map_err(|e| Error::io("cannot read manifest", path, e))?;
    parse_manifest(&bytes, path)
}

/// Parse and check manifest bytes; `path` is used in errors only.
pub(crate) fn parse_manifest(bytes: &[u8], path: &Path) -> Result<Manifest> {
    let at = || Location::file(path);
    if bytes.len() as u64 > MAX_MANIFEST_BYTES {
        return Err(Error::input(
            at(),
            format!(
                "manifest is larger than {} MiB: a manifest is a small JSON file describing the \
                 sensor; keep the frames in the frames file",
                MAX_MANIFEST_BYTES / (1024 * 1024)
            ),
        ));
    }
    let text = match std::str::from_utf8(bytes) {
        Ok(t) => t,
        Err(e) => {
            let (line, col) = line_col(bytes, e.valid_up_to());
            return Err(Error::input(
                at().line(line),
                format!(
                    "column {col}: invalid UTF-8 (byte offset {}): save the manifest as UTF-8",
                    e.valid_up_to()
                ),
            ));
        }
    };
    if text.trim().is_empty() {
        return Err(Error::input(
            at(),
            "manifest is empty: write a JSON object with `format`, `version`, `frames` and \
             `sensor` (see docs/recording-format.md)",
        ));
    }
    let probe: Probe = serde_json::from_str(text).map_err(|e| json_error(&e, path))?;
    check_tag(&probe, path)?;
    let manifest: Manifest = serde_json::from_str(text).map_err(|e| json_error(&e, path))?;
    check_manifest(&manifest)
        .map_err(|(field, message)| Error::input(at().field(field), message))?;
    Ok(manifest)
}

/// 1-based line and column of byte `offset` in `bytes`.
fn line_col(bytes: &[u8], offset: usize) -> (usize, usize) {
    let before = &bytes[..offset.min(bytes.len())];
    let line = before.iter().filter(|&&b| b == b'\n').count() + 1;
    let line_start = before
        .iter()
        .rposition(|&b| b == b'\n')
        .map_or(0, |p| p + 1);
    (line, offset - line_start + 1)
}

/// Turn a serde_json error into an input error at its line, column in the
/// message (serde_json counts both from 1).
fn json_error(e: &serde_json::Error, path: &Path) -> Error {
    let full = e.to_string();
    let suffix = format!(" at line {} column {}", e.line(), e.column());
    let what = full.strip_suffix(&suffix).unwrap_or(&full);
    let hint = match e.classify() {
        serde_json::error::Category::Syntax | serde_json::error::Category::Eof => {
            "fix the JSON syntax"
        }
        _ => "fix the value or key (see docs/recording-format.md for the fields and their types)",
    };
    let mut at = Location::file(path);
    if e.line() > 0 {
        at = at.line(e.line());
    }
    Error::input(at, format!("column {}: {what}: {hint}", e.column()))
}

/// Check the format tag and version before anything else.
fn check_tag(probe: &Probe, path: &Path) -> Result<()> {
    let expected = format!("{MANIFEST_FORMAT} version {MANIFEST_VERSION} or older");
    let format_error = |found: String, hint: &str| Error::Format {
        path: path.to_path_buf(),
        expected: expected.clone(),
        found,
        hint: hint.to_string(),
    };
    match &probe.format {
        Some(serde_json::Value::String(tag)) if tag == MANIFEST_FORMAT => {}
        Some(serde_json::Value::String(tag)) => {
            return Err(format_error(
                format!("format tag `{tag}`"),
                "this file is not a tactread recording manifest; pass the recording's manifest",
            ))
        }
        Some(other) => {
            return Err(format_error(
                format!("format value {other}"),
                "the `format` key must be the string \"tactread-recording\"",
            ))
        }
        None => {
            return Err(format_error(
                "a JSON file without a `format` key".to_string(),
                "a recording manifest starts with \"format\": \"tactread-recording\", \
                 \"version\": 1 (see docs/recording-format.md)",
            ))
        }
    }
    let version = match &probe.version {
        Some(v) => v.as_u64(),
        None => {
            return Err(format_error(
                "no `version` key".to_string(),
                "add \"version\": 1 (see docs/recording-format.md)",
            ))
        }
    };
    match version {
        Some(v) if v >= 1 && v <= u64::from(MANIFEST_VERSION) => Ok(()),
        Some(v) if v > u64::from(MANIFEST_VERSION) => Err(format_error(
            format!("{MANIFEST_FORMAT} version {v}"),
            "the file was written by a newer tactread: upgrade tactread to read it",
        )),
        _ => Err(format_error(
            format!(
                "version {}",
                probe
                    .version
                    .as_ref()
                    .map_or(String::new(), |v| v.to_string())
            ),
            "versions are whole numbers from 1; this build reads version 1",
        )),
    }
}

/// Check what serde cannot: counts, ranges, and that the fields agree.
pub(crate) fn check_manifest(m: &Manifest) -> std::result::Result<(), FieldProblem> {
    let problem = |field: &str, message: String| Err((field.to_string(), message));
    if m.format != MANIFEST_FORMAT {
        return problem(
            "format",
            format!("must be \"{MANIFEST_FORMAT}\", found {:?}", m.format),
        );
    }
    if m.version == 0 || m.version > MANIFEST_VERSION {
        return problem(
            "version",
            format!("must be from 1 to {MANIFEST_VERSION}, found {}", m.version),
        );
    }
    let kind = match frames_kind_of(&m.frames) {
        Ok(kind) => kind,
        Err(message) => return problem("frames", message),
    };
    let s = &m.sensor;
    if s.taxels == 0 {
        return problem(
            "sensor.taxels",
            "must be at least 1: give the number of taxel columns in the frames file".to_string(),
        );
    }
    if s.taxels > MAX_TAXELS {
        return problem(
            "sensor.taxels",
            format!(
                "{} is more than the {MAX_TAXELS} taxels this build reads: check the value",
                s.taxels
            ),
        );
    }
    if let Some(positions) = &s.positions_mm {
        if positions.len() != s.taxels {
            return problem(
                "sensor.positions_mm",
                format!(
                    "lists {} positions but sensor.taxels is {}: give one [x, y] pair per taxel, \
                     in column order",
                    positions.len(),
                    s.taxels
                ),
            );
        }
        if let Some(k) = positions
            .iter()
            .position(|p| !p[0].is_finite() || !p[1].is_finite())
        {
            return problem(
                "sensor.positions_mm",
                format!("position of taxel {k} is not a finite number: give it in mm"),
            );
        }
    }
    if !(s.sample_rate_hz.is_finite() && s.sample_rate_hz > 0.0) {
        return problem(
            "sensor.sample_rate_hz",
            format!(
                "must be a positive number of frames per second, found {}",
                s.sample_rate_hz
            ),
        );
    }
    if s.units.trim().is_empty() {
        return problem(
            "sensor.units",
            "is empty: name the units of the taxel values (e.g. \"kPa\", \"adc\") or leave the \
             key out for \"arbitrary\""
                .to_string(),
        );
    }
    if let Some(lang) = &m.lang {
        let ok = !lang.is_empty()
            && lang.len() <= 16
            && lang.chars().all(|c| c.is_ascii_alphanumeric() || c == '-');
        if !ok {
            return problem(
                "lang",
                format!(
                    "{lang:?} is not a language tag: use a short code such as \"en\", \"de\", \
                     \"fr\" or \"es\""
                ),
            );
        }
    }
    match (kind, &m.npy_columns) {
        (FramesKind::Npy, None) => problem(
            "npy_columns",
            "is missing: an .npy frames file needs its column layout, e.g. \
             \"npy_columns\": {\"time_s\": true, \"position_mm\": false}"
                .to_string(),
        ),
        (FramesKind::Csv, Some(_)) => problem(
            "npy_columns",
            "applies only to .npy frames files: remove it (a CSV header names its own columns)"
                .to_string(),
        ),
        _ => Ok(()),
    }
}

/// The frames kind a frames file name implies, by its extension.
pub(crate) fn frames_kind_of(frames: &str) -> std::result::Result<FramesKind, String> {
    if frames.trim().is_empty() {
        return Err("is empty: name the frames file (e.g. \"scan.csv\" or \"scan.npy\")".into());
    }
    match extension_lower(Path::new(frames)).as_deref() {
        Some("csv") => Ok(FramesKind::Csv),
        Some("npy") => Ok(FramesKind::Npy),
        _ => Err(format!(
            "{frames:?} is neither a .csv nor an .npy file: frames files end in .csv or .npy"
        )),
    }
}

/// The lower-cased extension of `path`, if it has one in UTF-8.
pub(crate) fn extension_lower(path: &Path) -> Option<String> {
    path.extension()
        .and_then(|e| e.to_str())
        .map(|e| e.to_ascii_lowercase())
}

/// The frames file a manifest at `manifest_path` points to.
pub(crate) fn frames_path(manifest_path: &Path, m: &Manifest) -> PathBuf {
    match manifest_path.parent() {
        Some(dir) => dir.join(&m.frames),
        None => PathBuf::from(&m.frames),
    }
}

/// Given the path a user passed, find the manifest: a `.json` path is the
/// manifest; a `.csv` or `.npy` path names the frames file of the manifest
/// with the same stem and `.json` beside it. Returns the manifest path and,
/// for a frames path, that frames path.
pub(crate) fn resolve(path: &Path) -> Result<(PathBuf, Option<PathBuf>)> {
    match extension_lower(path).as_deref() {
        Some("json") => Ok((path.to_path_buf(), None)),
        Some("csv") | Some("npy") => {
            let manifest = path.with_extension("json");
            if manifest.is_file() {
                Ok((manifest, Some(path.to_path_buf())))
            } else {
                Err(Error::input(
                    Location::file(path),
                    format!(
                        "no manifest beside this frames file: expected {}; write one (see \
                         docs/recording-format.md) or pass the manifest's path",
                        manifest.display()
                    ),
                ))
            }
        }
        _ => Err(Error::input(
            Location::file(path),
            "not a recording: pass a manifest (.json) or a frames file (.csv or .npy) with its \
             manifest beside it",
        )),
    }
}

/// The manifest as pretty JSON with a final newline.
pub(crate) fn to_json(m: &Manifest) -> String {
    // Serialising plain structs of strings, numbers and JSON values cannot
    // fail; fall back to the compact form rather than panic if it ever did.
    let mut text = serde_json::to_string_pretty(m)
        .unwrap_or_else(|e| format!("{{\"format\": \"{MANIFEST_FORMAT}\", \"error\": \"{e}\"}}"));
    text.push('\n');
    text
}

#[cfg(test)]
mod tests {
    use super::*;

    const GOOD: &str = r#"{
  "format": "tactread-recording",
  "version": 1,
  "frames": "scan.csv",
  "sensor": { "taxels": 2, "sample_rate_hz": 100.0, "units": "kPa" },
  "text": "ab",
  "lang": "en"
}"#;

    fn parse(text: &str) -> Result<Manifest> {
        parse_manifest(text.as_bytes(), Path::new("m.json"))
    }

    fn input_at(err: Error) -> (Location, String) {
        match err {
            Error::Input { at, message } => (at, message),
            other => panic!("expected Error::Input, got {other:?}"),
        }
    }

    #[test]
    fn good_manifest_loads() {
        let m = parse(GOOD).unwrap();
        assert_eq!(m.sensor.taxels, 2);
        assert_eq!(m.text.as_deref(), Some("ab"));
        assert_eq!(m.sensor.name, None);
    }

    #[test]
    fn units_default_to_arbitrary() {
        let m = parse(&GOOD.replace(", \"units\": \"kPa\"", "")).unwrap();
        assert_eq!(m.sensor.units, "arbitrary");
    }

    #[test]
    fn syntax_error_has_line_and_column() {
        let (at, message) =
            input_at(parse(&GOOD.replace("\"version\": 1,", "\"version\": 1")).unwrap_err());
        assert_eq!(at.line, Some(4));
        assert!(message.starts_with("column 3:"), "{message}");
        assert!(message.contains("fix the JSON syntax"), "{message}");
    }

    #[test]
    fn type_error_has_line() {
        let (at, message) =
            input_at(parse(&GOOD.replace("\"taxels\": 2", "\"taxels\": \"two\"")).unwrap_err());
        assert_eq!(at.line, Some(5));
        assert!(message.contains("invalid type"), "{message}");
    }

    #[test]
    fn unknown_key_is_rejected_with_its_name() {
        let (at, message) = input_at(parse(&GOOD.replace("\"text\"", "\"txet\"")).unwrap_err());
        assert_eq!(at.line, Some(6));
        assert!(message.contains("unknown field `txet`"), "{message}");
    }

    #[test]
    fn invalid_utf8_names_line() {
        let mut bytes = GOOD.as_bytes().to_vec();
        let at = GOOD.find("ab").unwrap();
        bytes[at] = 0xff;
        let (loc, message) = input_at(parse_manifest(&bytes, Path::new("m.json")).unwrap_err());
        assert_eq!(loc.line, Some(6));
        assert!(message.contains("invalid UTF-8"), "{message}");
    }

    #[test]
    fn empty_manifest() {
        let (_, message) = input_at(parse("  \n").unwrap_err());
        assert!(message.contains("empty"), "{message}");
    }

    #[test]
    fn newer_version_is_a_format_error() {
        let err = parse(&GOOD.replace("\"version\": 1", "\"version\": 2")).unwrap_err();
        match err {
            Error::Format { found, hint, .. } => {
                assert_eq!(found, "tactread-recording version 2");
                assert!(hint.contains("newer tactread"));
            }
            other => panic!("expected Error::Format, got {other:?}"),
        }
    }

    #[test]
    fn version_zero_and_non_integer_are_format_errors() {
        for v in ["0", "1.5", "\"1\""] {
            let err =
                parse(&GOOD.replace("\"version\": 1", &format!("\"version\": {v}"))).unwrap_err();
            assert!(matches!(err, Error::Format { .. }), "{v}: {err:?}");
        }
    }

    #[test]
    fn unknown_or_missing_tag_is_a_format_error() {
        let err = parse(&GOOD.replace("tactread-recording", "other-tool")).unwrap_err();
        assert!(matches!(err, Error::Format { ref found, .. } if found.contains("other-tool")));
        let err = parse(r#"{"frames": "a.csv"}"#).unwrap_err();
        assert!(matches!(err, Error::Format { .. }), "{err:?}");
    }

    #[test]
    fn semantic_checks_name_the_field() {
        let cases = [
            ("\"taxels\": 2", "\"taxels\": 0", "sensor.taxels"),
            (
                "\"sample_rate_hz\": 100.0",
                "\"sample_rate_hz\": -1",
                "sensor.sample_rate_hz",
            ),
            ("\"units\": \"kPa\"", "\"units\": \" \"", "sensor.units"),
            ("\"scan.csv\"", "\"scan.txt\"", "frames"),
            ("\"scan.csv\"", "\"\"", "frames"),
            ("\"scan.csv\"", "\"scan.npy\"", "npy_columns"),
            ("\"lang\": \"en\"", "\"lang\": \"en gb\"", "lang"),
            (
                "\"units\": \"kPa\"",
                "\"units\": \"kPa\", \"positions_mm\": [[0, 0]]",
                "sensor.positions_mm",
            ),
        ];
        for (from, to, field) in cases {
            let (at, message) = input_at(parse(&GOOD.replace(from, to)).unwrap_err());
            assert_eq!(at.field.as_deref(), Some(field), "{to}: {message}");
        }
        let with_npy = GOOD.replace(
            "\"frames\": \"scan.csv\",",
            "\"frames\": \"scan.csv\", \"npy_columns\": {\"time_s\": true, \"position_mm\": false},",
        );
        let (at, _) = input_at(parse(&with_npy).unwrap_err());
        assert_eq!(at.field.as_deref(), Some("npy_columns"));
    }

    #[test]
    fn json_round_trip() {
        let m = parse(GOOD).unwrap();
        assert_eq!(parse(&to_json(&m)).unwrap(), m);
    }

    #[test]
    fn line_col_counts_from_one() {
        assert_eq!(line_col(b"ab\ncd", 0), (1, 1));
        assert_eq!(line_col(b"ab\ncd", 4), (2, 2));
    }
}
