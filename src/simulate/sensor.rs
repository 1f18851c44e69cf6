//! The sensor model and its JSON sensor file: taxel layout, elastic skin,
//! contact model, sampling, ADC and faults. The three built-in sensors are
//! embedded here so they work by name from any folder.
//!
//! The file format is documented with a worked example in
//! `docs/sensor-format.md`; every file carries `"format": "tactread-sensor"`
//! and `"version": 1`.

use crate::error::{Error, Location, Result};
use serde::{Deserialize, Serialize};
use std::path::Path;

/// Format tag of sensor files.
pub const SENSOR_FORMAT: &str = "tactread-sensor";
/// Sensor file version this build reads and writes.
pub const SENSOR_VERSION: u32 = 1;

/// Name of the default sensor.
pub const DEFAULT_SENSOR: &str = "hex24";

/// The built-in sensors: name and embedded JSON.
const BUILTIN: [(&str, &str); 3] = [
    ("pad4x3", include_str!("../../sensors/pad4x3.json")),
    ("hex24", include_str!("../../sensors/hex24.json")),
    ("skin16", include_str!("../../sensors/skin16.json")),
];

/// Names of the built-in sensors, default first.
pub fn builtin_sensor_names() -> Vec<&'static str> {
    let mut names: Vec<&str> = BUILTIN.iter().map(|(n, _)| *n).collect();
    names.sort_by_key(|n| *n != DEFAULT_SENSOR);
    names
}

/// Where the taxels are, in the sensor's own frame (mm, `[u, v]` with `u`
/// along the sliding direction and `v` across it, positive down the page),
/// centred on the sensor's middle.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(tag = "kind", rename_all = "lowercase", deny_unknown_fields)]
pub enum Layout {
    /// A rectangular grid of `rows` (across the line) by `cols` (along the
    /// line) taxels at `pitch_mm`. Taxel index is `row * cols + col`, row 0
    /// at the top (negative `v`), column 0 at the back (negative `u`).
    Grid {
        /// Taxel rows, stacked across the line.
        rows: usize,
        /// Taxel columns, one after the other along the line.
        cols: usize,
        /// Centre-to-centre distance in mm.
        pitch_mm: f64,
    },
    /// A hexagonal lattice built of columns: column `c` holds `columns[c]`
    /// taxels spaced `pitch_mm` apart across the line and centred on
    /// `v = 0`; columns are `pitch_mm * sqrt(3) / 2` apart along the line, so
    /// neighbouring columns whose counts differ by one interlock as a hex
    /// lattice. Taxels are numbered column by column, top to bottom.
    Hex {
        /// Centre-to-centre distance of neighbouring taxels in mm.
        pitch_mm: f64,
        /// Taxel count of each column, back to front.
        columns: Vec<usize>,
    },
    /// An explicit list of taxel centres `[u, v]` in mm, in taxel order.
    Positions {
        /// Taxel centres in mm.
        positions_mm: Vec<[f64; 2]>,
    },
}

impl Layout {
    /// Taxel centres `[u, v]` in mm, in taxel order, centred so that the
    /// bounding box's middle is at the origin (explicit positions are kept
    /// as given).
    pub fn positions(&self) -> Vec<[f64; 2]> {
        match self {
            Layout::Grid {
                rows,
                cols,
                pitch_mm,
            } => {
                let mut out = Vec::with_capacity(rows * cols);
                for r in 0..*rows {
                    for c in 0..*cols {
                        out.push([
                            (c as f64 - (*cols as f64 - 1.0) / 2.0) * pitch_mm,
                            (r as f64 - (*rows as f64 - 1.0) / 2.0) * pitch_mm,
                        ]);
                    }
                }
                out
            }
            Layout::Hex { pitch_mm, columns } => {
                let dx = pitch_mm * 3f64.sqrt() / 2.0;
                let n = columns.len() as f64;
                let mut out = Vec::new();
                for (c, &count) in columns.iter().enumerate() {
                    for k in 0..count {
                        out.push([
                            (c as f64 - (n - 1.0) / 2.0) * dx,
                            (k as f64 - (count as f64 - 1.0) / 2.0) * pitch_mm,
                        ]);
                    }
                }
                out
            }
            Layout::Positions { positions_mm } => positions_mm.clone(),
        }
    }
}

/// The elastic skin over the taxels.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Skin {
    /// Standard deviation in mm of the Gaussian kernel with which the skin
    /// spreads surface indentation to the taxels below it. 0 means no
    /// spreading.
    pub spread_sigma_mm: f64,
    /// How far the skin sinks into a flat page per newton of normal force,
    /// expressed as a stiffness in N/mm: base indentation = force / stiffness.
    pub stiffness_n_per_mm: f64,
    /// Radius of the fingertip's curvature in mm, or `null` for a flat pad.
    /// A taxel at distance `r` from the sensor's middle is lifted by
    /// `r² / (2 * tip_radius_mm)` off the page.
    #[serde(default)]
    pub tip_radius_mm: Option<f64>,
}

/// The saturating contact model from indentation to pressure:
/// `p = p_max_kpa * (1 - exp(-k_per_mm * d))` for indentation `d > 0` mm,
/// and 0 out of contact.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Contact {
    /// Pressure the taxel saturates at, in kPa.
    pub p_max_kpa: f64,
    /// Rate of approach to saturation, per mm of indentation.
    pub k_per_mm: f64,
}

impl Contact {
    /// Pressure in kPa for indentation `d` mm.
    pub fn pressure(&self, d: f64) -> f64 {
        if d > 0.0 {
            self.p_max_kpa * (1.0 - (-self.k_per_mm * d).exp())
        } else {
            0.0
        }
    }
}

/// The analogue-to-digital converter: pressures from 0 to `full_scale_kpa`
/// map to counts 0 to `2^bits - 1`, clipped at both ends.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Adc {
    /// Resolution in bits, 1-24.
    pub bits: u32,
    /// Pressure at the top count, in kPa.
    pub full_scale_kpa: f64,
}

impl Adc {
    /// The top count, `2^bits - 1`.
    pub fn max_count(&self) -> f64 {
        ((1u64 << self.bits.min(24)) - 1) as f64
    }
}

/// A taxel that reads a constant value whatever it touches.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct StuckTaxel {
    /// Taxel index (0-based).
    pub taxel: usize,
    /// The value it is stuck at, as a fraction 0-1 of the full scale.
    pub level: f64,
}

/// The sensor's imperfections, before any difficulty scaling (see
/// [`crate::simulate::Preset`]).
#[derive(Debug, Clone, PartialEq, Default, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Faults {
    /// Standard deviation of white noise added to every sample, kPa.
    #[serde(default)]
    pub noise_kpa: f64,
    /// Standard deviation of each taxel's slow baseline drift, kPa (an
    /// Ornstein-Uhlenbeck process per taxel).
    #[serde(default)]
    pub drift_kpa: f64,
    /// Time constant of the drift in seconds (default 20).
    #[serde(default = "default_drift_time")]
    pub drift_time_s: f64,
    /// Fraction of each neighbouring taxel's pressure that leaks into a
    /// taxel (neighbours: centres within 1.2 times the smallest taxel
    /// distance).
    #[serde(default)]
    pub crosstalk: f64,
    /// Standard deviation of the per-taxel gain around 1 (drawn once per
    /// recording, clipped to 0.5-1.5).
    #[serde(default)]
    pub gain_spread: f64,
    /// Taxels of this device that always read 0.
    #[serde(default)]
    pub dead_taxels: Vec<usize>,
    /// Taxels of this device stuck at a constant value.
    #[serde(default)]
    pub stuck_taxels: Vec<StuckTaxel>,
    /// Probability that any other taxel is dead in a given recording.
    #[serde(default)]
    pub random_dead_fraction: f64,
    /// Probability that any other taxel is stuck (at a random level) in a
    /// given recording.
    #[serde(default)]
    pub random_stuck_fraction: f64,
}

fn default_drift_time() -> f64 {
    20.0
}

/// A sensor, as described by a sensor file.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct SensorSpec {
    /// Always [`SENSOR_FORMAT`].
    pub format: String,
    /// Always [`SENSOR_VERSION`].
    pub version: u32,
    /// Short name written into manifests, e.g. "hex24".
    pub name: String,
    /// Free description.
    #[serde(default)]
    pub description: String,
    /// Where the taxels are.
    pub layout: Layout,
    /// The elastic skin.
    pub skin: Skin,
    /// Indentation to pressure.
    pub contact: Contact,
    /// Frames per second.
    pub sample_rate_hz: f64,
    /// The converter, or `null` to write pressures in kPa unquantised.
    #[serde(default)]
    pub adc: Option<Adc>,
    /// Imperfections.
    #[serde(default)]
    pub faults: Faults,
}

impl SensorSpec {
    /// A built-in sensor by name (see [`builtin_sensor_names`]).
    pub fn builtin(name: &str) -> Result<SensorSpec> {
        match BUILTIN.iter().find(|(n, _)| *n == name) {
            Some((n, json)) => SensorSpec::from_json(json, &format!("<built-in sensor {n}>")),
            None => Err(Error::config(
                "sensor",
                format!(
                    "unknown sensor `{name}`: built-in sensors are {}; to use a sensor file give its path (ending in .json)",
                    builtin_sensor_names().join(", ")
                ),
            )),
        }
    }

    /// Read and validate a sensor file.
    pub fn load(path: &Path) -> Result<SensorSpec> {
        let text = crate::text_file::read_utf8(path, "save the file as UTF-8")?;
        SensorSpec::from_json(&text, &path.display().to_string())
    }

    /// A built-in sensor when `name_or_path` is one's name, otherwise the
    /// sensor file at that path.
    pub fn resolve(name_or_path: &str) -> Result<SensorSpec> {
        if BUILTIN.iter().any(|(n, _)| *n == name_or_path) {
            return SensorSpec::builtin(name_or_path);
        }
        let path = Path::new(name_or_path);
        if path.exists() || name_or_path.ends_with(".json") || name_or_path.contains('/') {
            SensorSpec::load(path)
        } else {
            SensorSpec::builtin(name_or_path)
        }
    }

    /// Parse and validate sensor JSON; `origin` names the source in errors.
    pub fn from_json(json: &str, origin: &str) -> Result<SensorSpec> {
        let spec: SensorSpec = serde_json::from_str(json).map_err(|e| {
            Error::input(
                Location::file(origin).line(e.line()),
                format!("{e}: see docs/sensor-format.md for the sensor file format"),
            )
        })?;
        spec.check(origin)?;
        Ok(spec)
    }

    /// The sensor as JSON, in the sensor file format.
    pub fn to_json(&self) -> String {
        // Serialising plain data with string keys cannot fail.
        serde_json::to_string_pretty(self).unwrap_or_default()
    }

    /// Taxel centres `[u, v]` in mm in the sensor frame, in taxel order.
    pub fn taxel_positions(&self) -> Vec<[f64; 2]> {
        self.layout.positions()
    }

    /// Number of taxels.
    pub fn taxel_count(&self) -> usize {
        match &self.layout {
            Layout::Grid { rows, cols, .. } => rows * cols,
            Layout::Hex { columns, .. } => columns.iter().sum(),
            Layout::Positions { positions_mm } => positions_mm.len(),
        }
    }

    /// Units of the values the sensor writes: "counts" with an ADC, "kPa"
    /// without.
    pub fn units(&self) -> &'static str {
        if self.adc.is_some() {
            "counts"
        } else {
            "kPa"
        }
    }

    /// Half the sensor's extent `[along, across]` in mm, counting the skin
    /// spread (3 sigma) around the outermost taxels.
    pub(crate) fn half_extent_mm(&self) -> [f64; 2] {
        let pad = 3.0 * self.skin.spread_sigma_mm;
        let mut ext = [0.0f64; 2];
        for p in self.taxel_positions() {
            ext[0] = ext[0].max(p[0].abs());
            ext[1] = ext[1].max(p[1].abs());
        }
        [ext[0] + pad, ext[1] + pad]
    }

    /// Validate every field; `origin` names the file in errors.
    pub fn check(&self, origin: &str) -> Result<()> {
        let at = |field: &str| Location::file(origin).field(field);
        let bad = |field: &str, msg: String| Err(Error::input(at(field), msg));
        if self.format != SENSOR_FORMAT {
            return bad(
                "format",
                format!(
                    "is {:?}, expected {SENSOR_FORMAT:?}: this is not a tactread sensor file",
                    self.format
                ),
            );
        }
        if self.version != SENSOR_VERSION {
            return Err(Error::Format {
                path: origin.into(),
                expected: format!("{SENSOR_FORMAT} version {SENSOR_VERSION}"),
                found: format!("version {}", self.version),
                hint: "rewrite the file per docs/sensor-format.md for this version".into(),
            });
        }
        if self.name.trim().is_empty() {
            return bad("name", "is empty: give the sensor a short name".into());
        }
        let in_range = |v: f64, lo: f64, hi: f64| v.is_finite() && v >= lo && v <= hi;
        match &self.layout {
            Layout::Grid {
                rows,
                cols,
                pitch_mm,
            } => {
                if *rows == 0 || *cols == 0 {
                    return bad(
                        "layout.rows",
                        "rows and cols must both be at least 1".into(),
                    );
                }
                if !in_range(*pitch_mm, 0.01, 50.0) {
                    return bad(
                        "layout.pitch_mm",
                        format!("is {pitch_mm}: give a pitch between 0.01 and 50 mm"),
                    );
                }
            }
            Layout::Hex { pitch_mm, columns } => {
                if columns.is_empty() || columns.contains(&0) {
                    return bad(
                        "layout.columns",
                        "give at least one column, each with at least one taxel".into(),
                    );
                }
                if !in_range(*pitch_mm, 0.01, 50.0) {
                    return bad(
                        "layout.pitch_mm",
                        format!("is {pitch_mm}: give a pitch between 0.01 and 50 mm"),
                    );
                }
            }
            Layout::Positions { positions_mm } => {
                for (i, p) in positions_mm.iter().enumerate() {
                    if !(in_range(p[0], -100.0, 100.0) && in_range(p[1], -100.0, 100.0)) {
                        return bad(
                            &format!("layout.positions_mm[{i}]"),
                            format!("is {p:?}: give finite coordinates within 100 mm of the sensor's middle"),
                        );
                    }
                }
            }
        }
        let n = self.taxel_count();
        if n == 0 || n > 4096 {
            return bad("layout", format!("has {n} taxels: give between 1 and 4096"));
        }
        let pos = self.taxel_positions();
        for i in 0..pos.len() {
            for j in i + 1..pos.len() {
                let d = ((pos[i][0] - pos[j][0]).powi(2) + (pos[i][1] - pos[j][1]).powi(2)).sqrt();
                if d < 1e-3 {
                    return bad(
                        "layout",
                        format!(
                            "taxels {i} and {j} sit at the same place {:?}: move one",
                            pos[i]
                        ),
                    );
                }
            }
        }
        if !in_range(self.skin.spread_sigma_mm, 0.0, 10.0) {
            return bad(
                "skin.spread_sigma_mm",
                format!(
                    "is {}: give 0 (no spreading) to 10 mm",
                    self.skin.spread_sigma_mm
                ),
            );
        }
        if !in_range(self.skin.stiffness_n_per_mm, 1e-3, 1e4) {
            return bad(
                "skin.stiffness_n_per_mm",
                format!(
                    "is {}: give a stiffness between 0.001 and 10000 N/mm",
                    self.skin.stiffness_n_per_mm
                ),
            );
        }
        if let Some(r) = self.skin.tip_radius_mm {
            if !in_range(r, 0.5, 1e4) {
                return bad(
                    "skin.tip_radius_mm",
                    format!(
                        "is {r}: give a radius between 0.5 and 10000 mm, or null for a flat pad"
                    ),
                );
            }
        }
        if !in_range(self.contact.p_max_kpa, 1e-3, 1e6) {
            return bad(
                "contact.p_max_kpa",
                format!(
                    "is {}: give a positive saturation pressure in kPa",
                    self.contact.p_max_kpa
                ),
            );
        }
        if !in_range(self.contact.k_per_mm, 1e-3, 1e4) {
            return bad(
                "contact.k_per_mm",
                format!("is {}: give a positive rate per mm", self.contact.k_per_mm),
            );
        }
        if !in_range(self.sample_rate_hz, 1.0, 100_000.0) {
            return bad(
                "sample_rate_hz",
                format!(
                    "is {}: give a rate between 1 and 100000 Hz",
                    self.sample_rate_hz
                ),
            );
        }
        if let Some(adc) = &self.adc {
            if !(1..=24).contains(&adc.bits) {
                return bad("adc.bits", format!("is {}: give 1 to 24 bits", adc.bits));
            }
            if !in_range(adc.full_scale_kpa, 1e-3, 1e6) {
                return bad(
                    "adc.full_scale_kpa",
                    format!(
                        "is {}: give a positive full scale in kPa",
                        adc.full_scale_kpa
                    ),
                );
            }
        }
        let f = &self.faults;
        let nonneg = [
            ("faults.noise_kpa", f.noise_kpa, 1e6),
            ("faults.drift_kpa", f.drift_kpa, 1e6),
            ("faults.crosstalk", f.crosstalk, 1.0),
            ("faults.gain_spread", f.gain_spread, 1.0),
            ("faults.random_dead_fraction", f.random_dead_fraction, 1.0),
            ("faults.random_stuck_fraction", f.random_stuck_fraction, 1.0),
        ];
        for (field, v, hi) in nonneg {
            if !in_range(v, 0.0, hi) {
                return bad(field, format!("is {v}: give a value from 0 to {hi}"));
            }
        }
        if !in_range(f.drift_time_s, 1e-3, 1e6) {
            return bad(
                "faults.drift_time_s",
                format!(
                    "is {}: give a positive time constant in seconds",
                    f.drift_time_s
                ),
            );
        }
        for (k, &t) in f.dead_taxels.iter().enumerate() {
            if t >= n {
                return bad(
                    &format!("faults.dead_taxels[{k}]"),
                    format!("is {t}, but the sensor has taxels 0-{}", n - 1),
                );
            }
        }
        for (k, s) in f.stuck_taxels.iter().enumerate() {
            if s.taxel >= n {
                return bad(
                    &format!("faults.stuck_taxels[{k}].taxel"),
                    format!("is {}, but the sensor has taxels 0-{}", s.taxel, n - 1),
                );
            }
            if !in_range(s.level, 0.0, 1.0) {
                return bad(
                    &format!("faults.stuck_taxels[{k}].level"),
                    format!("is {}: give a fraction of full scale from 0 to 1", s.level),
                );
            }
        }
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn builtins_load_with_expected_counts() {
        assert_eq!(SensorSpec::builtin("pad4x3").unwrap().taxel_count(), 12);
        assert_eq!(SensorSpec::builtin("hex24").unwrap().taxel_count(), 24);
        assert_eq!(SensorSpec::builtin("skin16").unwrap().taxel_count(), 256);
        assert_eq!(builtin_sensor_names()[0], DEFAULT_SENSOR);
        for name in builtin_sensor_names() {
            let s = SensorSpec::builtin(name).unwrap();
            assert_eq!(s.taxel_positions().len(), s.taxel_count());
            // Round trip through JSON.
            let back = SensorSpec::from_json(&s.to_json(), "x").unwrap();
            assert_eq!(back, s);
        }
    }

    #[test]
    fn hex_lattice_has_equal_neighbour_distances() {
        let s = SensorSpec::builtin("hex24").unwrap();
        let pitch = match s.layout {
            Layout::Hex { pitch_mm, .. } => pitch_mm,
            _ => panic!("hex24 is hexagonal"),
        };
        let pos = s.taxel_positions();
        for (i, p) in pos.iter().enumerate() {
            let nearest = pos
                .iter()
                .enumerate()
                .filter(|(j, _)| *j != i)
                .map(|(_, q)| ((p[0] - q[0]).powi(2) + (p[1] - q[1]).powi(2)).sqrt())
                .fold(f64::INFINITY, f64::min);
            assert!((nearest - pitch).abs() < 1e-9, "taxel {i}: {nearest}");
        }
    }

    #[test]
    fn bad_files_name_the_field() {
        let mut s = SensorSpec::builtin("hex24").unwrap();
        s.faults.dead_taxels = vec![30];
        let err = SensorSpec::from_json(&s.to_json(), "my.json").unwrap_err();
        let msg = err.to_string();
        assert!(
            msg.contains("my.json") && msg.contains("faults.dead_taxels[0]"),
            "{msg}"
        );

        let json = SensorSpec::builtin("hex24")
            .unwrap()
            .to_json()
            .replace("\"sample_rate_hz\"", "\"sample_rate\"");
        let msg = SensorSpec::from_json(&json, "my.json")
            .unwrap_err()
            .to_string();
        assert!(
            msg.contains("my.json line") && msg.contains("sample_rate"),
            "{msg}"
        );

        let json = SensorSpec::builtin("hex24")
            .unwrap()
            .to_json()
            .replace("\"version\": 1", "\"version\": 7");
        assert!(matches!(
            SensorSpec::from_json(&json, "my.json"),
            Err(Error::Format { .. })
        ));
        let msg = SensorSpec::resolve("nosuch").unwrap_err().to_string();
        assert!(msg.contains("hex24"), "{msg}");
    }

    #[test]
    fn contact_saturates() {
        let c = Contact {
            p_max_kpa: 100.0,
            k_per_mm: 2.0,
        };
        assert_eq!(c.pressure(-0.1), 0.0);
        assert!(c.pressure(0.1) < c.pressure(0.2));
        assert!(c.pressure(10.0) <= 100.0 && c.pressure(10.0) > 99.0);
    }
}
