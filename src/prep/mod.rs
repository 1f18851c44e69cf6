//! Preprocessing: from raw sensor frames to the network's input frames.
//!
//! Three steps, fitted on training data and stored in the model so that
//! training, offline decoding and streaming run exactly the same code:
//!
//! 1. **Resampling** onto a uniform grid: by position (a step in mm along
//!    the line) when the recordings carry a position channel, else by time
//!    (a rate in Hz). Grid samples are linear interpolations between the
//!    two frames around each grid point. Sliding speed varies, so a
//!    position grid gives every cell about the same number of frames.
//!    Frames that do not advance the coordinate (pauses, a finger sliding
//!    back) are skipped: the grid follows the furthest point reached.
//! 2. **Decimation** (optional): keep every `k`-th grid sample.
//! 3. **Normalisation** per taxel: `(v - baseline) / scale` with `baseline`
//!    the 5th percentile of the taxel's training values (its resting
//!    level: most of the time a taxel touches no dot) and `scale` the
//!    98th percentile minus the baseline (robust to spikes and dead
//!    taxels; a scale below 1e-6 is replaced by 1).
//!
//! The offline path ([`Prep::apply`]) pushes the frames one by one through
//! the same streaming [`Resampler`] that `decode --stream` uses.

use crate::recording::Recording;
use crate::{Error, Result};
use ndarray::Array2;
use serde::{Deserialize, Serialize};

/// Percentile of a taxel's training values taken as its baseline.
pub const BASELINE_PERCENTILE: f64 = 5.0;
/// Percentile of a taxel's training values taken as baseline + scale.
pub const SCALE_PERCENTILE: f64 = 98.0;
/// At most this many values per taxel are used to fit the percentiles
/// (an even subsample of longer data).
const FIT_SAMPLES: usize = 200_000;

/// The resampling grid.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(tag = "by", rename_all = "lowercase")]
pub enum Grid {
    /// One sample every `step_mm` millimetres along the line.
    Position {
        /// Grid step in mm.
        step_mm: f64,
    },
    /// `rate_hz` samples per second.
    Time {
        /// Samples per second.
        rate_hz: f64,
    },
}

impl Grid {
    /// Grid spacing in the grid's coordinate (mm or s).
    fn spacing(&self) -> f64 {
        match *self {
            Grid::Position { step_mm } => step_mm,
            Grid::Time { rate_hz } => 1.0 / rate_hz,
        }
    }
}

/// Preprocessing options before fitting.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PrepConfig {
    /// Position grid step in mm. Default 0.5 (about 12 samples per 6.2 mm
    /// cell, NLS Specification 800 cell spacing).
    pub step_mm: f64,
    /// Time grid rate in Hz for recordings without a position channel.
    /// Default 40 (0.5 mm at the 20 mm/s of typical robot sliding).
    pub rate_hz: f64,
    /// Keep every `decimate`-th grid sample. Default 1 (keep all).
    pub decimate: usize,
}

impl Default for PrepConfig {
    fn default() -> Self {
        PrepConfig {
            step_mm: 0.5,
            rate_hz: 40.0,
            decimate: 1,
        }
    }
}

impl PrepConfig {
    /// Checks the values are usable.
    pub fn check(&self) -> Result<()> {
        if !(self.step_mm.is_finite() && self.step_mm > 0.0) {
            return Err(Error::config(
                "step-mm",
                "must be a positive number of mm, e.g. 0.5",
            ));
        }
        if !(self.rate_hz.is_finite() && self.rate_hz > 0.0) {
            return Err(Error::config(
                "rate-hz",
                "must be a positive rate in Hz, e.g. 40",
            ));
        }
        if self.decimate == 0 {
            return Err(Error::config(
                "decimate",
                "must be at least 1 (1 keeps every sample)",
            ));
        }
        Ok(())
    }
}

/// Fitted preprocessing, stored in the model file.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Prep {
    /// Taxels per raw frame.
    pub taxels: usize,
    /// Resampling grid.
    pub grid: Grid,
    /// Keep every `decimate`-th grid sample.
    pub decimate: usize,
    /// Per-taxel baseline, `[taxels]`.
    pub baseline: Vec<f32>,
    /// Per-taxel scale, `[taxels]`.
    pub scale: Vec<f32>,
}

fn percentile(sorted: &[f32], p: f64) -> f32 {
    if sorted.is_empty() {
        return 0.0;
    }
    let pos = p / 100.0 * (sorted.len() - 1) as f64;
    let lo = pos.floor() as usize;
    let hi = (lo + 1).min(sorted.len() - 1);
    let w = (pos - lo as f64) as f32;
    sorted[lo] * (1.0 - w) + sorted[hi] * w
}

impl Prep {
    /// Fits baseline and scale on training recordings and chooses the
    /// grid: by position when every recording has a position channel, else
    /// by time. All recordings must have the same taxel count.
    pub fn fit(config: &PrepConfig, recordings: &[&Recording]) -> Result<Prep> {
        config.check()?;
        let Some(first) = recordings.first() else {
            return Err(Error::config(
                "data",
                "no training recordings to fit the preprocessing on",
            ));
        };
        let taxels = first.frames.ncols();
        for r in recordings {
            if r.frames.ncols() != taxels {
                return Err(Error::Mismatch {
                    what: "taxel count of the training recordings".into(),
                    expected: taxels.to_string(),
                    got: r.frames.ncols().to_string(),
                    hint: "train on recordings of one sensor".into(),
                });
            }
        }
        let total: usize = recordings.iter().map(|r| r.frames.nrows()).sum();
        let stride = total.div_ceil(FIT_SAMPLES).max(1);
        let mut baseline = Vec::with_capacity(taxels);
        let mut scale = Vec::with_capacity(taxels);
        for k in 0..taxels {
            let mut v: Vec<f32> = Vec::with_capacity(total / stride + 1);
            let mut i = 0usize;
            for r in recordings {
                for row in r.frames.outer_iter() {
                    if i.is_multiple_of(stride) && row[k].is_finite() {
                        v.push(row[k]);
                    }
                    i += 1;
                }
            }
            v.sort_by(|a, b| a.total_cmp(b));
            let b = percentile(&v, BASELINE_PERCENTILE);
            let s = percentile(&v, SCALE_PERCENTILE) - b;
            baseline.push(b);
            scale.push(if s > 1e-6 { s } else { 1.0 });
        }
        let grid = if recordings.iter().all(|r| r.position_mm.is_some()) {
            Grid::Position {
                step_mm: config.step_mm,
            }
        } else {
            Grid::Time {
                rate_hz: config.rate_hz,
            }
        };
        Ok(Prep {
            taxels,
            grid,
            decimate: config.decimate,
            baseline,
            scale,
        })
    }

    /// Checks the fields agree with each other (for a model read from a file).
    pub(crate) fn check_shapes(&self) -> std::result::Result<(), String> {
        if self.baseline.len() != self.taxels || self.scale.len() != self.taxels {
            return Err(format!(
                "{} taxels but {} baselines and {} scales",
                self.taxels,
                self.baseline.len(),
                self.scale.len()
            ));
        }
        if self.decimate == 0 || !(self.grid.spacing().is_finite() && self.grid.spacing() > 0.0) {
            return Err("grid spacing and decimation must be positive".into());
        }
        if self.scale.iter().any(|s| !(s.is_finite() && *s > 0.0))
            || self.baseline.iter().any(|b| !b.is_finite())
        {
            return Err("baselines must be finite and scales positive".into());
        }
        Ok(())
    }

    /// A streaming resampler for this preprocessing.
    pub fn resampler(&self) -> Resampler<'_> {
        Resampler {
            prep: self,
            prev: None,
            origin: 0.0,
            next: 0.0,
            emitted: 0,
        }
    }

    /// The coordinate of each frame of `rec` on this grid (mm or s).
    fn coordinates<'r>(&self, rec: &'r Recording, name: &str) -> Result<&'r [f64]> {
        match self.grid {
            Grid::Position { .. } => rec.position_mm.as_deref().ok_or_else(|| Error::Mismatch {
                what: format!("position channel of {name}"),
                expected: "a position column (the model resamples by position)".into(),
                got: "none".into(),
                hint: "record with the position encoder, or use a model trained on time-resampled \
                       recordings"
                    .into(),
            }),
            Grid::Time { .. } => Ok(&rec.time_s),
        }
    }

    /// Preprocesses a whole recording: `[n_frames, taxels]` raw →
    /// `[n_samples, taxels]` network input. `name` names the recording in
    /// errors.
    pub fn apply(&self, rec: &Recording, name: &str) -> Result<Array2<f32>> {
        if rec.frames.ncols() != self.taxels {
            return Err(Error::Mismatch {
                what: format!("taxel count of {name}"),
                expected: self.taxels.to_string(),
                got: rec.frames.ncols().to_string(),
                hint: "use a model trained for this sensor".into(),
            });
        }
        let coords = self.coordinates(rec, name)?;
        let mut rs = self.resampler();
        let mut out = Vec::new();
        for (row, &c) in rec.frames.outer_iter().zip(coords) {
            let frame = row.to_vec();
            rs.push(c, &frame, &mut out);
        }
        let n = out.len() / self.taxels;
        Ok(Array2::from_shape_vec((n, self.taxels), out).expect("whole frames"))
    }
}

/// Streaming resampler: takes raw frames one at a time with their
/// coordinate (position in mm, or time in s, per the model's grid) and
/// emits normalised grid samples. The first grid point is the first
/// frame's coordinate.
#[derive(Debug, Clone)]
pub struct Resampler<'p> {
    prep: &'p Prep,
    /// Last frame kept: its coordinate and raw values.
    prev: Option<(f64, Vec<f32>)>,
    /// Coordinate of the first grid point (the first frame's).
    origin: f64,
    /// Coordinate of the next grid point.
    next: f64,
    /// Grid samples produced so far (before decimation).
    emitted: u64,
}

impl Resampler<'_> {
    /// Pushes one raw frame `[taxels]` at coordinate `coord`, appending
    /// every completed grid sample (`taxels` values each, normalised) to
    /// `out`. Returns how many samples were appended. Frames with a
    /// non-finite coordinate or one not beyond the last kept frame are
    /// skipped. Panics if `frame` has the wrong length.
    pub fn push(&mut self, coord: f64, frame: &[f32], out: &mut Vec<f32>) -> usize {
        let p = self.prep;
        assert_eq!(frame.len(), p.taxels, "resampler: frame length");
        if !coord.is_finite() {
            return 0;
        }
        let step = p.grid.spacing();
        let mut n = 0;
        match &self.prev {
            None => {
                self.origin = coord;
                self.next = coord;
            }
            Some((c0, _)) if coord <= *c0 => return 0,
            Some(_) => {}
        }
        let (c0, v0) = match &self.prev {
            Some((c0, v0)) => (*c0, v0.as_slice()),
            None => (coord, frame),
        };
        while self.next <= coord {
            let w = if coord > c0 {
                ((self.next - c0) / (coord - c0)) as f32
            } else {
                1.0
            };
            if self.emitted.is_multiple_of(p.decimate as u64) {
                for k in 0..p.taxels {
                    let v = v0[k] + w * (frame[k] - v0[k]);
                    out.push((v - p.baseline[k]) / p.scale[k]);
                }
                n += 1;
            }
            self.emitted += 1;
            // Grid points as first + i * step, not by repeated addition, so
            // long streams do not drift.
            self.next = self.origin + self.emitted as f64 * step;
        }
        match &mut self.prev {
            Some((c, v)) => {
                *c = coord;
                v.copy_from_slice(frame);
            }
            None => self.prev = Some((coord, frame.to_vec())),
        }
        n
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::recording::{Manifest, SensorInfo};
    use approx::assert_relative_eq;

    fn rec(time: Vec<f64>, pos: Option<Vec<f64>>, frames: Array2<f32>) -> Recording {
        Recording {
            manifest: Manifest {
                format: "tactread-recording".into(),
                version: 1,
                frames: "f.csv".into(),
                npy_columns: None,
                sensor: SensorInfo {
                    name: None,
                    taxels: frames.ncols(),
                    positions_mm: None,
                    sample_rate_hz: 100.0,
                    units: "adc".into(),
                },
                text: None,
                lang: None,
                notes: None,
                tags: Default::default(),
            },
            time_s: time,
            position_mm: pos,
            frames,
        }
    }

    #[test]
    fn percentiles_interpolate() {
        // numpy.percentile([1, 2, 3, 4], 50) = 2.5 (linear method, the
        // general-purpose reference's default).
        assert_relative_eq!(percentile(&[1.0, 2.0, 3.0, 4.0], 50.0), 2.5);
        assert_relative_eq!(percentile(&[1.0, 2.0, 3.0, 4.0], 5.0), 1.15, epsilon = 1e-6);
    }

    #[test]
    fn position_grid_interpolates_linearly_and_skips_backtracking() {
        // One taxel whose value equals the position: every grid sample
        // must equal its grid coordinate (after the identity normalisation).
        let pos = vec![0.0, 0.3, 0.3, 0.2, 1.1, 2.0];
        let frames =
            Array2::from_shape_vec((6, 1), pos.iter().map(|&p| p as f32).collect()).unwrap();
        let r = rec((0..6).map(|i| i as f64 * 0.01).collect(), Some(pos), frames);
        let mut prep = Prep::fit(
            &PrepConfig {
                step_mm: 0.25,
                ..PrepConfig::default()
            },
            &[&r],
        )
        .unwrap();
        assert!(matches!(prep.grid, Grid::Position { .. }));
        prep.baseline = vec![0.0];
        prep.scale = vec![1.0];
        let y = prep.apply(&r, "r").unwrap();
        let want = [0.0, 0.25, 0.5, 0.75, 1.0, 1.25, 1.5, 1.75, 2.0];
        assert_eq!(y.nrows(), want.len());
        for (a, b) in y.column(0).iter().zip(want) {
            assert_relative_eq!(*a, b, epsilon = 1e-6);
        }
        // Decimation by 2 keeps samples 0, 2, 4, ...
        prep.decimate = 2;
        let y2 = prep.apply(&r, "r").unwrap();
        assert_eq!(y2.nrows(), 5);
        assert_relative_eq!(y2[[1, 0]], 0.5, epsilon = 1e-6);
    }

    #[test]
    fn time_grid_when_a_recording_lacks_positions_and_normalisation() {
        let frames = Array2::from_shape_fn((101, 2), |(i, k)| if k == 0 { i as f32 } else { 5.0 });
        let r = rec((0..101).map(|i| i as f64 * 0.01).collect(), None, frames);
        let prep = Prep::fit(
            &PrepConfig {
                rate_hz: 20.0,
                ..PrepConfig::default()
            },
            &[&r],
        )
        .unwrap();
        assert_eq!(prep.grid, Grid::Time { rate_hz: 20.0 });
        // Taxel 0 holds 0..100: 5th percentile 5, 98th 98 (linear method).
        assert_relative_eq!(prep.baseline[0], 5.0, epsilon = 1e-4);
        assert_relative_eq!(prep.scale[0], 93.0, epsilon = 1e-4);
        // A constant taxel gets scale 1.
        assert_eq!(prep.scale[1], 1.0);
        let y = prep.apply(&r, "r").unwrap();
        // 1 s at 20 Hz: samples at 0, 0.05, ..., 1.0.
        assert_eq!(y.nrows(), 21);
        assert_relative_eq!(y[[2, 0]], (10.0 - 5.0) / 93.0, epsilon = 1e-5);
        assert_relative_eq!(y[[2, 1]], 0.0);
    }

    #[test]
    fn streaming_equals_offline_and_errors_are_clear() {
        let pos: Vec<f64> = (0..50).map(|i| i as f64 * 0.13).collect();
        let frames = Array2::from_shape_fn((50, 3), |(i, k)| ((i * (k + 1)) % 7) as f32);
        let r = rec(
            (0..50).map(|i| i as f64 * 0.01).collect(),
            Some(pos.clone()),
            frames.clone(),
        );
        let prep = Prep::fit(&PrepConfig::default(), &[&r]).unwrap();
        let offline = prep.apply(&r, "r").unwrap();
        let mut rs = prep.resampler();
        let mut out = Vec::new();
        for (i, row) in frames.outer_iter().enumerate() {
            rs.push(pos[i], &row.to_vec(), &mut out);
        }
        assert_eq!(out, offline.iter().copied().collect::<Vec<_>>());
        let no_pos = rec(r.time_s.clone(), None, frames);
        assert!(matches!(
            prep.apply(&no_pos, "x.json"),
            Err(Error::Mismatch { .. })
        ));
        let wrong = rec(vec![0.0], None, Array2::zeros((1, 4)));
        assert!(matches!(
            prep.apply(&wrong, "x.json"),
            Err(Error::Mismatch { .. })
        ));
        assert!(PrepConfig {
            step_mm: 0.0,
            ..PrepConfig::default()
        }
        .check()
        .is_err());
    }
}
