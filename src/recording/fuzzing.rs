//! Byte-level entry points into the recording readers, for the fuzz targets
//! in `fuzz/` and for tests that feed damaged data without writing files.
//!
//! Not part of the supported API (hidden from the docs, may change at any
//! time): users read recordings with [`Recording::load`](super::Recording::load)
//! and [`RecordingStream`](super::RecordingStream), which run exactly these
//! readers on the files a manifest names.

use super::npy_frames::NpyFrameReader;
use super::{manifest, FrameChunk, Manifest, NpyColumns};
use crate::{Error, Location, Result};
use ndarray::Array2;
use std::io::Cursor;
use std::path::Path;

/// Parse and check manifest bytes as [`Recording::load`](super::Recording::load)
/// does; `origin` names the file in errors.
pub fn parse_manifest(bytes: &[u8], origin: &Path) -> Result<Manifest> {
    manifest::parse_manifest(bytes, origin)
}

/// Read the `.npy` frames in `bytes` (the whole file) as a recording with
/// column layout `layout`, `n_taxels` taxels and `sample_rate_hz` would,
/// `max_rows` rows per chunk (at least 1). Returns all frames as one chunk,
/// `frames` of shape `[n_frames, n_taxels]`; `origin` names the file in
/// errors.
pub fn read_npy_frames(
    bytes: &[u8],
    origin: &Path,
    layout: NpyColumns,
    n_taxels: usize,
    sample_rate_hz: f64,
    max_rows: usize,
) -> Result<FrameChunk> {
    let mut reader = NpyFrameReader::from_reader(
        Cursor::new(bytes),
        bytes.len() as u64,
        origin,
        layout,
        n_taxels,
        sample_rate_hz,
    )?;
    let mut time_s = Vec::new();
    let mut position = layout.position_mm.then(Vec::new);
    let mut values = Vec::new();
    loop {
        let n = reader.read_chunk(max_rows, &mut time_s, position.as_mut(), &mut values)?;
        if n == 0 {
            break;
        }
    }
    let frames = Array2::from_shape_vec((time_s.len(), n_taxels), values).map_err(|e| {
        Error::input(
            Location::file(origin),
            format!("internal error assembling frames: {e}"),
        )
    })?;
    Ok(FrameChunk {
        start: 0,
        time_s,
        position_mm: position,
        frames,
    })
}
