//! The one error type of the library, and the exit codes of the binary.
//!
//! Every variant carries the context a user needs to find the problem (file,
//! line or row, field, what was expected and what was found) and its message
//! says how to fix it. Nothing in the library panics on bad input: it returns
//! one of these.

use std::fmt;
use std::path::{Path, PathBuf};

/// Result alias used across the crate.
pub type Result<T, E = Error> = std::result::Result<T, E>;

/// Where in an input a problem was found: a file, and optionally a line (or
/// row) and a field (or column).
#[derive(Debug, Clone, PartialEq, Eq, Default)]
pub struct Location {
    /// The file, or a pseudo-name such as `<stdin>` or `<argument>`.
    pub file: PathBuf,
    /// 1-based line (text files) or row (data files), counting a header line.
    pub line: Option<usize>,
    /// The column, key or field the problem is in.
    pub field: Option<String>,
}

impl Location {
    /// A location naming only a file.
    pub fn file(path: impl AsRef<Path>) -> Self {
        Location {
            file: path.as_ref().to_path_buf(),
            line: None,
            field: None,
        }
    }
    /// The same location at a given 1-based line or row.
    pub fn line(mut self, line: usize) -> Self {
        self.line = Some(line);
        self
    }
    /// The same location at a named field or column.
    pub fn field(mut self, field: impl Into<String>) -> Self {
        self.field = Some(field.into());
        self
    }
}

impl fmt::Display for Location {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}", self.file.display())?;
        if let Some(line) = self.line {
            write!(f, " line {line}")?;
        }
        if let Some(field) = &self.field {
            write!(f, ", field `{field}`")?;
        }
        Ok(())
    }
}

/// Everything that can go wrong in tactread.
#[derive(Debug, thiserror::Error)]
pub enum Error {
    /// Reading or writing a file failed at the operating-system level.
    #[error("{action} {}", path.display())]
    Io {
        /// What was being done, e.g. "cannot read".
        action: &'static str,
        /// The file involved.
        path: PathBuf,
        /// The underlying error.
        #[source]
        source: std::io::Error,
    },

    /// An input file (recording, manifest, code table, word list, sensor
    /// file...) holds something invalid at a known place.
    #[error("{at}: {message}")]
    Input {
        /// Where the problem is.
        at: Location,
        /// What is wrong and how to fix it.
        message: String,
    },

    /// A file written by tactread (model, lexicon, report data) is of
    /// another format or format version than this build reads.
    #[error("{path}: expected {expected}, found {found}: {hint}")]
    Format {
        /// The file involved.
        path: PathBuf,
        /// What this build reads, e.g. "tactread-model version 1".
        expected: String,
        /// What the file says it is.
        found: String,
        /// How to get a file this build reads.
        hint: String,
    },

    /// Text that the braille code table cannot write.
    #[error(
        "cannot encode {ch:?} (U+{code:04X}) at character {position} in language `{lang}`: {hint}"
    )]
    Unencodable {
        /// The offending character.
        ch: char,
        /// Its code point, for characters that do not print well.
        code: u32,
        /// 1-based character position in the input text.
        position: usize,
        /// The language pack in use.
        lang: String,
        /// What to do about it.
        hint: String,
    },

    /// Two things that must agree do not (a model and a recording, a
    /// lexicon and a language...).
    #[error("{what}: expected {expected}, got {got}: {hint}")]
    Mismatch {
        /// What disagrees, e.g. "taxel count of scan.csv".
        what: String,
        /// What was expected.
        expected: String,
        /// What was found.
        got: String,
        /// How to fix it.
        hint: String,
    },

    /// A bad option value or combination, found before any work starts.
    #[error("invalid {name}: {message}")]
    Config {
        /// The option or parameter.
        name: String,
        /// What is wrong and what is allowed.
        message: String,
    },

    /// An output would overwrite an existing file or an input.
    #[error("refusing to write {path}: {reason}")]
    Output {
        /// The output path.
        path: PathBuf,
        /// Why, and how to proceed (e.g. "pass --force").
        reason: String,
    },
}

impl Error {
    /// An [`Error::Input`] at `at` with `message`.
    pub fn input(at: Location, message: impl Into<String>) -> Self {
        Error::Input {
            at,
            message: message.into(),
        }
    }

    /// An [`Error::Io`] for `path`.
    pub fn io(action: &'static str, path: impl AsRef<Path>, source: std::io::Error) -> Self {
        Error::Io {
            action,
            path: path.as_ref().to_path_buf(),
            source,
        }
    }

    /// An [`Error::Config`] for option `name`.
    pub fn config(name: impl Into<String>, message: impl Into<String>) -> Self {
        Error::Config {
            name: name.into(),
            message: message.into(),
        }
    }

    /// The process exit code the binary uses for this error.
    ///
    /// | code | meaning |
    /// | --- | --- |
    /// | 0 | success |
    /// | 1 | input data is invalid (recording, manifest, code table, word list, sensor file) or text cannot be encoded |
    /// | 2 | bad command line or option value (also clap's own usage errors) |
    /// | 3 | a file is of another format or version, or two inputs do not match (model vs recording) |
    /// | 4 | the operating system refused a read or write, or an output would be overwritten |
    pub fn exit_code(&self) -> i32 {
        match self {
            Error::Input { .. } | Error::Unencodable { .. } => 1,
            Error::Config { .. } => 2,
            Error::Format { .. } | Error::Mismatch { .. } => 3,
            Error::Io { .. } | Error::Output { .. } => 4,
        }
    }
}
