//! Reading a recording from disk: [`RecordingStream`] hands out frames in
//! chunks of bounded size from a CSV or `.npy` frames file, and
//! [`Recording::load`] is built on it, so loading whole and streaming check
//! exactly the same things.

use super::csv_frames::CsvFrameReader;
use super::manifest::{self, frames_path, read_manifest, resolve};
use super::npy_frames::NpyFrameReader;
use super::{FramesKind, Manifest, Recording};
use crate::{Error, Location, Result};
use ndarray::Array2;
use std::fs::File;
use std::path::{Path, PathBuf};

/// Frames per chunk [`Recording::load`] reads at a time.
const LOAD_CHUNK: usize = 8192;

/// A run of consecutive frames from a [`RecordingStream`].
#[derive(Debug, Clone, PartialEq)]
pub struct FrameChunk {
    /// 0-based index of the chunk's first frame in the recording.
    pub start: usize,
    /// Time of each frame in seconds. Length `n`.
    pub time_s: Vec<f64>,
    /// Position along the line in mm, when the recording has it. Length `n`.
    pub position_mm: Option<Vec<f64>>,
    /// Taxel values, shape `[n, n_taxels]`.
    pub frames: Array2<f32>,
}

impl FrameChunk {
    /// Number of frames in the chunk.
    pub fn len(&self) -> usize {
        self.time_s.len()
    }

    /// Whether the chunk holds no frames (never true for chunks handed out
    /// by [`RecordingStream::next_chunk`]).
    pub fn is_empty(&self) -> bool {
        self.time_s.is_empty()
    }
}

enum Source {
    Csv(Box<CsvFrameReader<File>>),
    Npy(NpyFrameReader),
}

/// A recording opened for reading in chunks, for recordings too long to
/// load whole. Memory is one chunk: `max_frames x (n_taxels + 2)` values.
///
/// Opening reads and checks the manifest and the frames file's header (CSV
/// header line, or `.npy` header with shape, dtype and length); every chunk
/// is checked like [`Recording::load`] checks the whole file, with the same
/// row numbers.
///
/// ```no_run
/// use tactread::recording::RecordingStream;
/// # fn main() -> tactread::Result<()> {
/// let mut stream = RecordingStream::open("scan.json".as_ref())?;
/// while let Some(chunk) = stream.next_chunk(4096)? {
///     println!("{} frames from {:.3} s", chunk.len(), chunk.time_s[0]);
/// }
/// # Ok(()) }
/// ```
pub struct RecordingStream {
    manifest: Manifest,
    manifest_path: PathBuf,
    frames_path: PathBuf,
    source: Source,
    next: usize,
    done: bool,
}

impl std::fmt::Debug for RecordingStream {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("RecordingStream")
            .field("manifest_path", &self.manifest_path)
            .field("frames_path", &self.frames_path)
            .field("next", &self.next)
            .finish()
    }
}

impl RecordingStream {
    /// Open the recording at `path`: its manifest (`.json`), or its frames
    /// file (`.csv` or `.npy`) when the manifest with the same stem and
    /// `.json` sits beside it.
    pub fn open(path: &Path) -> Result<RecordingStream> {
        let (manifest_path, given_frames) = resolve(path)?;
        let manifest = read_manifest(&manifest_path)?;
        let frames = frames_path(&manifest_path, &manifest);
        if let Some(given) = given_frames {
            if !same_file(&given, &frames) {
                return Err(Error::input(
                    Location::file(&manifest_path).field("frames"),
                    format!(
                        "this manifest describes frames file {}, not {}: pass the manifest \
                         itself, or fix its `frames` entry",
                        frames.display(),
                        given.display()
                    ),
                ));
            }
        }
        let kind = manifest::frames_kind_of(&manifest.frames)
            .map_err(|m| Error::input(Location::file(&manifest_path).field("frames"), m))?;
        if !frames.is_file() {
            return Err(Error::input(
                Location::file(&manifest_path).field("frames"),
                format!(
                    "frames file {} does not exist: fix the `frames` entry (a path relative to \
                     the manifest's folder) or put the file there",
                    frames.display()
                ),
            ));
        }
        let taxels = manifest.sensor.taxels;
        let source = match kind {
            FramesKind::Csv => {
                let file = File::open(&frames).map_err(|e| Error::io("cannot open", &frames, e))?;
                Source::Csv(Box::new(CsvFrameReader::new(file, &frames, taxels)?))
            }
            FramesKind::Npy => {
                // check_manifest guarantees npy_columns for .npy frames.
                let layout = manifest.npy_columns.ok_or_else(|| {
                    Error::input(
                        Location::file(&manifest_path).field("npy_columns"),
                        "is missing: an .npy frames file needs its column layout",
                    )
                })?;
                Source::Npy(NpyFrameReader::open(
                    &frames,
                    layout,
                    taxels,
                    manifest.sensor.sample_rate_hz,
                )?)
            }
        };
        Ok(RecordingStream {
            manifest,
            manifest_path,
            frames_path: frames,
            source,
            next: 0,
            done: false,
        })
    }

    /// The manifest, checked.
    pub fn manifest(&self) -> &Manifest {
        &self.manifest
    }

    /// Path of the manifest.
    pub fn manifest_path(&self) -> &Path {
        &self.manifest_path
    }

    /// Path of the frames file.
    pub fn frames_path(&self) -> &Path {
        &self.frames_path
    }

    /// Whether the frames file is CSV or `.npy`.
    pub fn kind(&self) -> FramesKind {
        match self.source {
            Source::Csv(_) => FramesKind::Csv,
            Source::Npy(_) => FramesKind::Npy,
        }
    }

    /// Number of taxels per frame (`sensor.taxels`).
    pub fn n_taxels(&self) -> usize {
        self.manifest.sensor.taxels
    }

    /// Whether frames carry a position along the line.
    pub fn has_position(&self) -> bool {
        match &self.source {
            Source::Csv(r) => r.has_position(),
            Source::Npy(_) => self.manifest.npy_columns.is_some_and(|c| c.position_mm),
        }
    }

    /// Total number of frames when known before reading (`.npy` files);
    /// `None` for CSV.
    pub fn total_frames(&self) -> Option<usize> {
        match &self.source {
            Source::Csv(_) => None,
            Source::Npy(r) => usize::try_from(r.n_rows()).ok(),
        }
    }

    /// Read the next chunk of at most `max_frames` frames (at least one);
    /// `Ok(None)` after the last frame. After an error the stream ends.
    pub fn next_chunk(&mut self, max_frames: usize) -> Result<Option<FrameChunk>> {
        if self.done {
            return Ok(None);
        }
        let result = self.read_chunk(max_frames.max(1));
        if !matches!(result, Ok(Some(_))) {
            self.done = true;
        }
        result
    }

    fn read_chunk(&mut self, max_frames: usize) -> Result<Option<FrameChunk>> {
        let taxels = self.n_taxels();
        let has_position = self.has_position();
        let mut time_s = Vec::new();
        let mut position: Option<Vec<f64>> = has_position.then(Vec::new);
        let mut values = Vec::new();
        let n = match &mut self.source {
            Source::Csv(r) => {
                // Reserve for a modest chunk only: the caller's max_frames
                // times a large taxel count could be far more than the file.
                let cap = max_frames.min(LOAD_CHUNK);
                time_s.reserve(cap);
                values.reserve(cap.saturating_mul(taxels).min(1 << 20));
                let mut n = 0;
                while n < max_frames {
                    match r.read_row_into(&mut values)? {
                        Some((t, p)) => {
                            time_s.push(t);
                            if let (Some(out), Some(p)) = (position.as_mut(), p) {
                                out.push(p);
                            }
                            n += 1;
                        }
                        None => break,
                    }
                }
                n
            }
            Source::Npy(r) => {
                r.read_chunk(max_frames, &mut time_s, position.as_mut(), &mut values)?
            }
        };
        if n == 0 {
            return Ok(None);
        }
        let frames = Array2::from_shape_vec((n, taxels), values).map_err(|e| {
            Error::input(
                Location::file(&self.frames_path),
                format!("internal error assembling frames: {e}"),
            )
        })?;
        let chunk = FrameChunk {
            start: self.next,
            time_s,
            position_mm: position,
            frames,
        };
        self.next += n;
        Ok(Some(chunk))
    }
}

/// Whether two paths name the same file (by canonical path when both exist).
fn same_file(a: &Path, b: &Path) -> bool {
    match (a.canonicalize(), b.canonicalize()) {
        (Ok(a), Ok(b)) => a == b,
        _ => a == b,
    }
}

impl Recording {
    /// Load a whole recording: the manifest at `path`, or the frames file at
    /// `path` (`.csv` or `.npy`) when the manifest with the same stem and
    /// `.json` sits beside it.
    ///
    /// Every check of the format applies (see `docs/recording-format.md`);
    /// errors name the file, row and column. For recordings too long to hold
    /// in memory use [`RecordingStream`].
    pub fn load(path: &Path) -> Result<Recording> {
        let mut stream = RecordingStream::open(path)?;
        let taxels = stream.n_taxels();
        let mut time_s = Vec::new();
        let mut position: Option<Vec<f64>> = stream.has_position().then(Vec::new);
        let mut values: Vec<f32> = Vec::new();
        if let Some(total) = stream.total_frames() {
            // The .npy reader checked the file length against the header,
            // so `total` frames are really there.
            time_s.reserve(total);
            values.reserve(total.saturating_mul(taxels));
            if let Some(p) = position.as_mut() {
                p.reserve(total);
            }
        }
        while let Some(chunk) = stream.next_chunk(LOAD_CHUNK)? {
            time_s.extend_from_slice(&chunk.time_s);
            if let (Some(out), Some(p)) = (position.as_mut(), chunk.position_mm.as_ref()) {
                out.extend_from_slice(p);
            }
            values.extend(chunk.frames.iter());
        }
        let n = time_s.len();
        let frames = Array2::from_shape_vec((n, taxels), values).map_err(|e| {
            Error::input(
                Location::file(stream.frames_path()),
                format!("internal error assembling frames: {e}"),
            )
        })?;
        Ok(Recording {
            manifest: stream.manifest,
            time_s,
            position_mm: position,
            frames,
        })
    }
}
