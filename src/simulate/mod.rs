//! The simulator: physically grounded tactile recordings of braille, with
//! ground truth.
//!
//! A line of cells is embossed on a page ([`PageGeometry`], default NLS
//! Specification 800); a sensor ([`SensorSpec`], default the built-in
//! `hex24`) slides along it ([`Kinematics`]), and each frame its taxels read
//! the page through the skin:
//!
//! ```text
//! d_i(t) = F(t) / stiffness - lift_i + (G_sigma * h)(x_i(t), y_i(t))
//! p_i(t) = p_max * (1 - exp(-k * d_i(t)))        (0 when d_i <= 0)
//! ```
//!
//! `F` is the normal force, `lift_i = r_i² / (2 R_tip)` the curvature of a
//! rounded fingertip at the taxel's distance `r_i` from its middle, `h` the
//! page's height field, `G_sigma` the skin's Gaussian spread kernel and
//! `(x_i, y_i)` the taxel's place on the page (the sensor's middle plus the
//! rotated taxel offset). The model is quasi-static: the pressure depends
//! on where the sensor is and how hard it presses, not on how fast it
//! moves; the dots carry too little of the load to lift the pad. Then the
//! sensor's faults and ADC act (see the `faults` module docs). Difficulty
//! presets ([`Preset`]) set the kinematics and how strongly faults act.
//!
//! Every random draw comes from a ChaCha8 generator seeded with the
//! recording's seed, on separate streams for the path, the faults and the
//! noise; a dataset derives each recording's seed from the dataset seed and
//! the recording's index ([`recording_seed`]), so output does not depend on
//! thread count or order.
//!
//! ```
//! use tactread::simulate::{SimConfig, Simulator, Preset};
//! use tactread::Cell;
//! let sim = Simulator::new(SimConfig::new(Preset::Clean)).unwrap();
//! let cells = [Cell::from_dots(&[1, 2]).unwrap(), Cell::from_dots(&[1, 4]).unwrap()];
//! let rec = sim.simulate(&cells, 7).unwrap();
//! assert_eq!(rec.frames.ncols(), 24);
//! assert_eq!(rec.time_s.len(), rec.frames.nrows());
//! ```

mod corpus;
mod dataset;
mod faults;
mod geometry;
mod kinematics;
mod sensor;
mod surface;

pub use corpus::{corpus_lines, CORPUS_LANGS};
pub use dataset::{write_dataset, DatasetLine, DatasetPlan};
pub use geometry::{render_height_map, DomeProfile, HeightMap, PageGeometry, PAGE_PRESETS};
pub use kinematics::{Encoder, FaultLevel, Kinematics, Preset, PRESET_NAMES};
pub use sensor::{
    builtin_sensor_names, Adc, Contact, Faults, Layout, SensorSpec, Skin, StuckTaxel,
    DEFAULT_SENSOR, SENSOR_FORMAT, SENSOR_VERSION,
};

use crate::braille::{cells_to_unicode, Cell, CodeTable};
use crate::error::{Error, Result};
use crate::recording::{Manifest, Recording, SensorInfo};
use ndarray::Array2;
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use serde_json::json;
use std::collections::BTreeMap;
use surface::{LineSurface, SpreadDot};

/// Largest recording the simulator makes, in samples (frames times taxels):
/// 50 million, about 200 MB of `f32`.
pub const MAX_SAMPLES: usize = 50_000_000;

/// Everything a simulation needs besides the cells and the seed. Build with
/// [`SimConfig::new`], change fields, then hand to [`Simulator::new`], which
/// checks them.
#[derive(Debug, Clone, PartialEq)]
pub struct SimConfig {
    /// The page. Default [`PageGeometry::nls800`].
    pub page: PageGeometry,
    /// The sensor. Default the built-in [`DEFAULT_SENSOR`] (`hex24`).
    pub sensor: SensorSpec,
    /// The difficulty preset the kinematics and fault level came from,
    /// written into manifests. Default [`Preset::Typical`].
    pub preset: Preset,
    /// How the sensor moves. Default `preset.kinematics()`.
    pub kinematics: Kinematics,
    /// How strongly the sensor's faults act. Default `preset.fault_level()`.
    pub faults: FaultLevel,
}

impl SimConfig {
    /// The default page and sensor with the kinematics and fault level of
    /// `preset`.
    pub fn new(preset: Preset) -> SimConfig {
        SimConfig {
            page: PageGeometry::nls800(),
            // The built-in sensor files are checked by unit tests.
            sensor: SensorSpec::builtin(DEFAULT_SENSOR).unwrap_or_else(|e| {
                unreachable!("built-in sensor {DEFAULT_SENSOR} is invalid: {e}")
            }),
            preset,
            kinematics: preset.kinematics(),
            faults: preset.fault_level(),
        }
    }
}

impl Default for SimConfig {
    fn default() -> Self {
        SimConfig::new(Preset::Typical)
    }
}

/// A checked configuration with its precomputed tables, ready to simulate
/// any number of lines. Cheap to share between threads.
#[derive(Debug)]
pub struct Simulator {
    config: SimConfig,
    dot: SpreadDot,
    taxels: Vec<[f64; 2]>,
    lift: Vec<f64>,
    neighbours: Vec<Vec<usize>>,
}

/// Encode one line of text for embossing: fails on text that is empty or
/// only spaces, and on a character the code cannot write.
pub fn encode_line(text: &str, table: &CodeTable) -> Result<Vec<Cell>> {
    if text.trim().is_empty() {
        return Err(Error::config(
            "text",
            format!(
                "{text:?} is empty or only spaces: there is nothing to emboss; give at least one character"
            ),
        ));
    }
    table.encode(text)
}

/// The seed of recording `index` of a dataset made with `dataset_seed`
/// (SplitMix64 finaliser over both; Steele, Lea and Flood 2014), cut to 53
/// bits so that every JSON reader holds it exactly.
pub fn recording_seed(dataset_seed: u64, index: u64) -> u64 {
    let mut z = dataset_seed ^ index.wrapping_add(1).wrapping_mul(0x9E37_79B9_7F4A_7C15);
    z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
    (z ^ (z >> 31)) >> 11
}

const STREAM_PATH: u64 = 1;
const STREAM_FAULTS: u64 = 2;
const STREAM_NOISE: u64 = 3;

/// A generator for one of a recording's random streams.
fn stream(seed: u64, stream: u64) -> ChaCha8Rng {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    rng.set_stream(stream);
    rng
}

impl Simulator {
    /// Check `config` and precompute the spread dot profile.
    pub fn new(config: SimConfig) -> Result<Simulator> {
        config.page.check()?;
        config
            .sensor
            .check(&format!("sensor {}", config.sensor.name))?;
        config.kinematics.check()?;
        let f = &config.faults;
        for (name, v) in [
            ("fault scale", f.scale),
            ("extra dead fraction", f.extra_dead_fraction),
            ("extra stuck fraction", f.extra_stuck_fraction),
        ] {
            if !(v.is_finite() && (0.0..=10.0).contains(&v)) {
                return Err(Error::config(name, format!("is {v}: give 0 to 10")));
            }
        }
        let dot = SpreadDot::new(&config.page, config.sensor.skin.spread_sigma_mm);
        let taxels = config.sensor.taxel_positions();
        let lift = taxels
            .iter()
            .map(|p| match config.sensor.skin.tip_radius_mm {
                Some(r) => (p[0] * p[0] + p[1] * p[1]) / (2.0 * r),
                None => 0.0,
            })
            .collect();
        let neighbours = faults::neighbours(&taxels);
        Ok(Simulator {
            config,
            dot,
            taxels,
            lift,
            neighbours,
        })
    }

    /// The checked configuration.
    pub fn config(&self) -> &SimConfig {
        &self.config
    }

    /// The sensor's path along the line: from where its leading edge (skin
    /// spread included) is clear of the first dot to where its trailing
    /// edge is clear of the last, `[x_start, x_end]` in mm.
    fn travel(&self, n_cells: usize) -> [f64; 2] {
        let g = &self.config.page;
        let half = self.config.sensor.half_extent_mm();
        let reach = half[0].max(half[1]) + 0.5;
        let a = g.dot_radius_mm();
        let last = (n_cells.max(1) - 1) as f64 * g.cell_spacing_mm + g.dot_spacing_mm;
        [-a - reach, last + a + reach]
    }

    /// Simulate one line of `cells` with `seed`.
    ///
    /// Returns a [`Recording`] with time, the encoder's position channel
    /// (unless the kinematics leave it out), frames `[n_frames, n_taxels]`
    /// in the sensor's units, and a manifest whose `tags` record the
    /// simulation (see `docs/simulator.md`). The manifest's `text` and
    /// `lang` are left empty (the caller knows them; see
    /// [`Simulator::simulate_text`]) and `frames` is empty until
    /// [`Recording::save`] sets it.
    ///
    /// Fails on an empty line and on a line that would exceed
    /// [`MAX_SAMPLES`].
    pub fn simulate(&self, cells: &[Cell], seed: u64) -> Result<Recording> {
        self.simulate_with(cells, &self.config.kinematics, seed)
    }

    /// Simulate `text` written with `table` (its language pack's code):
    /// like [`Simulator::simulate`], with the manifest's `text` and `lang`
    /// filled in. Fails on text that is empty or only spaces, and with
    /// [`Error::Unencodable`] naming the first character the code cannot
    /// write.
    pub fn simulate_text(&self, text: &str, table: &CodeTable, seed: u64) -> Result<Recording> {
        let cells = encode_line(text, table)?;
        let mut rec = self.simulate(&cells, seed)?;
        rec.manifest.text = Some(text.to_string());
        rec.manifest.lang = Some(table.lang().to_string());
        Ok(rec)
    }

    /// Like [`Simulator::simulate`] with other kinematics than the
    /// configuration's (checked first): for datasets whose recordings vary
    /// in speed or force.
    pub fn simulate_with(
        &self,
        cells: &[Cell],
        kinematics: &Kinematics,
        seed: u64,
    ) -> Result<Recording> {
        kinematics.check()?;
        if cells.is_empty() {
            return Err(Error::config(
                "text",
                "is empty: there is nothing to emboss; give at least one character",
            ));
        }
        let cfg = &self.config;
        let sensor = &cfg.sensor;
        let n_taxels = self.taxels.len();
        let rate = sensor.sample_rate_hz;
        let [x_start, x_end] = self.travel(cells.len());

        let max_frames = (MAX_SAMPLES / n_taxels).max(1);
        let path = kinematics::sample_path(
            kinematics,
            x_start,
            x_end,
            rate,
            max_frames,
            &mut stream(seed, STREAM_PATH),
        )?;
        let drawn = faults::draw(sensor, &cfg.faults, &mut stream(seed, STREAM_FAULTS));
        let mut rng = stream(seed, STREAM_NOISE);
        let mut readout = faults::Readout::new(sensor, &drawn, &self.neighbours, &mut rng);

        let surface = LineSurface::new(&cfg.page, cells, &self.dot);
        let n_frames = path.x.len();
        let mut frames = Array2::<f32>::zeros((n_frames, n_taxels));
        let (sin, cos) = path.rotation_rad.sin_cos();
        let stiffness = sensor.skin.stiffness_n_per_mm;
        let mut pressure = vec![0.0f64; n_taxels];
        for (f, mut row) in frames.outer_iter_mut().enumerate() {
            let (cx, cy) = (path.x[f], path.y[f]);
            let base = path.force[f] / stiffness;
            for (i, (p, &[u, v])) in pressure.iter_mut().zip(&self.taxels).enumerate() {
                let px = cx + cos * u - sin * v;
                let py = cy + sin * u + cos * v;
                let d = base - self.lift[i] + surface.at(px, py);
                *p = sensor.contact.pressure(d);
            }
            match row.as_slice_mut() {
                Some(out) => readout.frame(&pressure, out, &mut rng),
                None => {
                    let mut out = vec![0f32; n_taxels];
                    readout.frame(&pressure, &mut out, &mut rng);
                    row.assign(&ndarray::ArrayView1::from(&out[..]));
                }
            }
        }

        let time_s: Vec<f64> = (0..n_frames).map(|i| i as f64 / rate).collect();
        let duration = n_frames as f64 / rate;
        let k = kinematics;
        let mut tags = BTreeMap::new();
        tags.insert(
            "simulator".into(),
            json!(concat!("tactread ", env!("CARGO_PKG_VERSION"))),
        );
        tags.insert("seed".into(), json!(seed));
        tags.insert("preset".into(), json!(cfg.preset.name()));
        tags.insert("sensor".into(), json!(sensor.name));
        tags.insert("page".into(), json!(cfg.page.name));
        tags.insert("cells".into(), json!(cells_to_unicode(cells)));
        tags.insert("speed_mm_s".into(), json!(k.speed_mm_s));
        tags.insert("force_n".into(), json!(k.force_n));
        tags.insert("dot_spacing_mm".into(), json!(cfg.page.dot_spacing_mm));
        tags.insert("cell_pitch_mm".into(), json!(cfg.page.cell_spacing_mm));
        tags.insert("first_cell_mm".into(), json!(cfg.page.dot_spacing_mm / 2.0));
        tags.insert("dot_height_mm".into(), json!(cfg.page.dot_height_mm));
        tags.insert("lateral_offset_mm".into(), json!(path.offset_mm));
        tags.insert(
            "lateral_drift_mm_per_100mm".into(),
            json!(path.drift_mm_per_100mm),
        );
        tags.insert("rotation_deg".into(), json!(path.rotation_rad.to_degrees()));
        tags.insert("dead_taxels".into(), json!(drawn.dead));
        tags.insert(
            "stuck_taxels".into(),
            json!(drawn.stuck.iter().map(|s| s.0).collect::<Vec<_>>()),
        );
        tags.insert("duration_s".into(), json!(duration));
        let manifest = Manifest {
            sensor: SensorInfo {
                name: Some(sensor.name.clone()),
                positions_mm: Some(self.taxels.clone()),
                units: sensor.units().to_string(),
                ..SensorInfo::new(n_taxels, rate)
            },
            notes: Some(format!(
                "simulated: preset {}, page {}, sensor {}, {:.1} mm/s, {} N; position is the sensor's middle along the line, 0 at the first cell's left dot column",
                cfg.preset.name(),
                cfg.page.name,
                sensor.name,
                k.speed_mm_s,
                k.force_n
            )),
            tags,
            ..Manifest::new(SensorInfo::new(n_taxels, rate))
        };
        Ok(Recording {
            manifest,
            time_s,
            position_mm: path.position,
            frames,
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn cells(masks: &[u8]) -> Vec<Cell> {
        masks.iter().map(|&m| Cell::from_mask(m)).collect()
    }

    #[test]
    fn empty_line_is_an_error() {
        let sim = Simulator::new(SimConfig::default()).unwrap();
        let err = sim.simulate(&[], 1).unwrap_err();
        assert!(err.to_string().contains("text"), "{err}");
    }

    #[test]
    fn dots_raise_the_signal() {
        let sim = Simulator::new(SimConfig::new(Preset::Clean)).unwrap();
        let blank = sim.simulate(&cells(&[0, 0, 0]), 1).unwrap();
        let full = sim.simulate(&cells(&[0x3F, 0x3F, 0x3F]), 1).unwrap();
        assert_eq!(blank.frames.dim(), full.frames.dim());
        let (b, f) = (blank.frames.sum(), full.frames.sum());
        assert!(f > b * 1.05, "blank {b} full {f}");
        // On blank paper a clean recording is constant in time.
        let first = blank.frames.row(0).to_owned();
        assert!(blank.frames.outer_iter().all(|r| r == first));
    }

    #[test]
    fn seeds_repeat_and_differ() {
        let sim = Simulator::new(SimConfig::new(Preset::Hard)).unwrap();
        let line = cells(&[1, 3, 0x3F, 0, 7]);
        let a = sim.simulate(&line, 11).unwrap();
        let b = sim.simulate(&line, 11).unwrap();
        let c = sim.simulate(&line, 12).unwrap();
        assert_eq!(a, b);
        assert_ne!(a.frames, c.frames);
    }

    #[test]
    fn recording_seeds_are_distinct() {
        let seeds: std::collections::BTreeSet<u64> =
            (0..1000).map(|i| recording_seed(5, i)).collect();
        assert_eq!(seeds.len(), 1000);
        assert_ne!(recording_seed(5, 0), recording_seed(6, 0));
    }

    #[test]
    fn manifest_describes_the_sensor() {
        let sim = Simulator::new(SimConfig::default()).unwrap();
        let rec = sim.simulate(&cells(&[1]), 3).unwrap();
        assert_eq!(rec.manifest.sensor.taxels, 24);
        assert_eq!(rec.manifest.sensor.sample_rate_hz, 1000.0);
        assert_eq!(rec.manifest.sensor.units, "counts");
        assert_eq!(rec.manifest.tags["cells"], json!("\u{2801}"));
        assert_eq!(
            rec.position_mm.as_ref().map(Vec::len),
            Some(rec.time_s.len())
        );
    }
}
