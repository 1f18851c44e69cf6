//! Batch reading: many recording manifests read in parallel through
//! [`crate::pipeline::read_recording`], one result per input in input
//! order, a bad recording failing alone. `tactread decode` and the batch
//! benchmark (`benches/batch.rs`) both run [`read_many`].

use crate::decode::{BrailleCode, Decoded, Decoder};
use crate::net::Model;
use crate::pipeline::read_recording;
use crate::recording::Recording;
use crate::{Error, Result};
use rayon::prelude::*;
use std::path::PathBuf;

/// One recording of a batch, read.
#[derive(Debug, Clone)]
pub struct BatchRead {
    /// Raw frames of the recording.
    pub frames: usize,
    /// Length of the recording in seconds: last frame time minus first
    /// plus one sample period (`frames / rate` for evenly spaced frames).
    pub duration_s: f64,
    /// What the decoder read.
    pub decoded: Decoded,
}

/// The length of `rec` in seconds (see [`BatchRead::duration_s`]).
pub(crate) fn duration_s(rec: &Recording) -> f64 {
    let period = if rec.manifest.sensor.sample_rate_hz > 0.0 {
        1.0 / rec.manifest.sensor.sample_rate_hz
    } else {
        0.0
    };
    match (rec.time_s.first(), rec.time_s.last()) {
        (Some(a), Some(b)) if b.is_finite() && a.is_finite() && b >= a => b - a + period,
        _ => 0.0,
    }
}

/// Reads one manifest: load, preprocess, network, decoder.
pub fn read_one<C: BrailleCode>(
    model: &Model,
    decoder: &Decoder<'_, C>,
    path: &std::path::Path,
) -> Result<BatchRead> {
    let rec = Recording::load(path)?;
    let decoded = read_recording(model, decoder, &rec, &path.display().to_string())?;
    Ok(BatchRead {
        frames: rec.frames.nrows(),
        duration_s: duration_s(&rec),
        decoded,
    })
}

/// Reads every manifest of `paths` with `model` and `decoder` on `jobs`
/// worker threads (0: one per core), calling `done` after each recording
/// (from the worker threads, in any order; for a progress bar). The
/// results are in the order of `paths`; a recording that cannot be read
/// gets its own error and does not stop the others. Fails as a whole only
/// when the thread pool cannot start.
pub fn read_many<C: BrailleCode + Sync>(
    model: &Model,
    decoder: &Decoder<'_, C>,
    paths: &[PathBuf],
    jobs: usize,
    done: impl Fn() + Sync,
) -> Result<Vec<Result<BatchRead>>> {
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(jobs)
        .build()
        .map_err(|e| Error::config("jobs", format!("cannot start {jobs} worker threads: {e}")))?;
    Ok(pool.install(|| {
        paths
            .par_iter()
            .map(|p| {
                let r = read_one(model, decoder, p);
                done();
                r
            })
            .collect()
    }))
}
