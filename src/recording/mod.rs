//! Recordings: the frames a tactile sensor wrote while sliding over braille,
//! with the manifest that describes the sensor and the ground truth.
//!
//! A recording on disk is a JSON manifest plus one frames file (CSV with a
//! header, or `.npy`). See `docs/recording-format.md` for the contract: the
//! columns, units, version policy and every check with the error it gives.
//!
//! - [`Recording::load`] reads a recording whole; [`Recording::save`] writes
//!   one atomically.
//! - [`RecordingStream`] reads a CSV or `.npy` recording in chunks of
//!   bounded size.
//! - [`CsvFrameReader`] reads CSV frames row by row from any reader (stdin).
//!
//! ```
//! use tactread::recording::{CsvFrameReader, Frame};
//! let rows = "time_s,position_mm,taxel_0,taxel_1\n0.00,0.0,0.5,1\n0.02,0.4,0.75,2\n";
//! let frames: Vec<Frame> = CsvFrameReader::new(rows.as_bytes(), "<stdin>", 2)
//!     .unwrap()
//!     .collect::<tactread::Result<_>>()
//!     .unwrap();
//! assert_eq!(frames[1].position_mm, Some(0.4));
//!
//! let bad = "time_s,taxel_0\n0.0,1\n0.1,2\n0.2,NaN\n";
//! let err = CsvFrameReader::new(bad.as_bytes(), "bad.csv", 1)
//!     .unwrap()
//!     .collect::<tactread::Result<Vec<Frame>>>()
//!     .unwrap_err();
//! assert!(err.to_string().starts_with("bad.csv line 4, field `taxel_0`: data row 3: NaN"));
//! ```

mod csv_frames;
mod dataset;
#[doc(hidden)]
pub mod fuzzing;
mod manifest;
#[cfg(test)]
mod no_panic_tests;
mod npy_frames;
mod save;
mod stream;
mod values;

pub use csv_frames::{CsvFrameReader, Frame};
pub use dataset::{
    Dataset, DatasetEntry, DatasetIndex, Split, DATASET_FORMAT, DATASET_INDEX, DATASET_VERSION,
};
pub use save::{FramesKind, SaveOptions};
pub use stream::{FrameChunk, RecordingStream};

use ndarray::Array2;
use serde::{Deserialize, Serialize};
use std::collections::BTreeMap;

/// Format tag written in every manifest.
pub const MANIFEST_FORMAT: &str = "tactread-recording";
/// Manifest format version this build writes and reads.
pub const MANIFEST_VERSION: u32 = 1;

/// What the manifest says about the sensor.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct SensorInfo {
    /// Free name of the sensor, e.g. "hex24".
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub name: Option<String>,
    /// Number of taxels (columns of pressure data).
    pub taxels: usize,
    /// Optional taxel centres in mm, `[x, y]` with x along the sliding direction.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub positions_mm: Option<Vec<[f64; 2]>>,
    /// Frames per second.
    pub sample_rate_hz: f64,
    /// Units of the taxel values, e.g. "kPa", "adc".
    #[serde(default = "default_units")]
    pub units: String,
}

impl SensorInfo {
    /// A sensor with `taxels` taxels sampled at `sample_rate_hz`, without a
    /// name or taxel positions, in `arbitrary` units.
    pub fn new(taxels: usize, sample_rate_hz: f64) -> Self {
        SensorInfo {
            name: None,
            taxels,
            positions_mm: None,
            sample_rate_hz,
            units: default_units(),
        }
    }
}

fn default_units() -> String {
    "arbitrary".to_string()
}

/// The manifest of one recording.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Manifest {
    /// Always [`MANIFEST_FORMAT`].
    pub format: String,
    /// Always [`MANIFEST_VERSION`] for files this build writes.
    pub version: u32,
    /// Path of the frames file, relative to the manifest's folder.
    pub frames: String,
    /// The sensor that made the recording.
    pub sensor: SensorInfo,
    /// Column layout of an `.npy` frames file; required for `.npy` frames,
    /// absent for CSV frames (whose header names the columns).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub npy_columns: Option<NpyColumns>,
    /// Ground-truth text, when known.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub text: Option<String>,
    /// Language pack of the ground truth, e.g. "en".
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub lang: Option<String>,
    /// Free notes.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub notes: Option<String>,
    /// Machine-readable extras, e.g. `"speed_mm_s": 20.0` from the simulator.
    #[serde(default, skip_serializing_if = "BTreeMap::is_empty")]
    pub tags: BTreeMap<String, serde_json::Value>,
}

impl Manifest {
    /// A manifest of the current format and version for `sensor`, with no
    /// ground truth, notes or tags. `frames` is left empty:
    /// [`Recording::save`] fills it in. Building manifests with this (and
    /// struct update syntax) keeps code compiling when fields are added.
    pub fn new(sensor: SensorInfo) -> Self {
        Manifest {
            format: MANIFEST_FORMAT.to_string(),
            version: MANIFEST_VERSION,
            frames: String::new(),
            sensor,
            npy_columns: None,
            text: None,
            lang: None,
            notes: None,
            tags: BTreeMap::new(),
        }
    }
}

/// Which leading columns an `.npy` frames file holds before its taxel
/// columns. The array is `[n_frames, n_columns]` with columns in the order
/// `time_s` (when [`time_s`](Self::time_s)), `position_mm` (when
/// [`position_mm`](Self::position_mm)), then one column per taxel.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct NpyColumns {
    /// Column 0 holds the frame time in seconds. When `false`, frame `i`
    /// is at `i / sensor.sample_rate_hz` seconds.
    pub time_s: bool,
    /// The next column holds the position along the line in mm.
    pub position_mm: bool,
}

/// A recording loaded whole.
#[derive(Debug, Clone, PartialEq)]
pub struct Recording {
    /// The manifest as read (or to be written).
    pub manifest: Manifest,
    /// Time of each frame in seconds, strictly increasing. Length `n_frames`.
    pub time_s: Vec<f64>,
    /// Position along the line in mm, when the rig has an encoder. Length `n_frames`.
    pub position_mm: Option<Vec<f64>>,
    /// Taxel values, shape `[n_frames, n_taxels]`.
    pub frames: Array2<f32>,
}
