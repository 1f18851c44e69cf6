//! Recordings: the frames a tactile sensor wrote while sliding over braille,
//! with the manifest that describes the sensor and the ground truth.
//!
//! A recording on disk is a JSON manifest plus one frames file (CSV with a
//! header, or `.npy`). See `docs/recording-format.md` for the contract.

use ndarray::Array2;
use serde::{Deserialize, Serialize};
use std::collections::BTreeMap;

/// Format tag written in every manifest.
pub const MANIFEST_FORMAT: &str = "tactread-recording";
/// Manifest format version this build writes and reads.
pub const MANIFEST_VERSION: u32 = 1;

/// What the manifest says about the sensor.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
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

fn default_units() -> String {
    "arbitrary".to_string()
}

/// The manifest of one recording.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Manifest {
    /// Always [`MANIFEST_FORMAT`].
    pub format: String,
    /// Always [`MANIFEST_VERSION`] for files this build writes.
    pub version: u32,
    /// Path of the frames file, relative to the manifest's folder.
    pub frames: String,
    /// The sensor that made the recording.
    pub sensor: SensorInfo,
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
