//! Kinematics: how the fingertip slides along the line. A speed profile
//! (mean, slow variation, pauses, short back-slips), a varying normal force,
//! a lateral offset with slow drift across the line, a small rotation, and
//! the position channel as an encoder reports it.
//!
//! Slow variations are Ornstein-Uhlenbeck processes (a mean-reverting
//! random walk; Uhlenbeck and Ornstein 1930), stepped with the exact
//! discretisation `z <- a z + sqrt(1 - a²) n`, `a = exp(-dt / tau)`, `n`
//! standard normal, so their spread does not depend on the sample rate.

use crate::error::{Error, Result};
use rand::Rng;
use rand_chacha::ChaCha8Rng;
use rand_distr::StandardNormal;

/// The position channel as a linear encoder gives it.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Encoder {
    /// Quantisation step in mm (0 = exact). Default 0.005 (a 5 µm encoder).
    pub resolution_mm: f64,
    /// Standard deviation of noise on each reading, mm. Default 0.
    pub noise_mm: f64,
}

impl Default for Encoder {
    fn default() -> Self {
        Encoder {
            resolution_mm: 0.005,
            noise_mm: 0.0,
        }
    }
}

/// How the fingertip moves. Start from [`Preset::kinematics`] and change
/// what you need; [`Kinematics::check`] validates.
#[derive(Debug, Clone, PartialEq)]
pub struct Kinematics {
    /// Mean sliding speed in mm/s. Default 20 (robot fingertips slide at
    /// about 8-40 mm/s in published experiments: common practice).
    pub speed_mm_s: f64,
    /// Relative standard deviation of the slow speed variation (0 = constant).
    pub speed_variability: f64,
    /// Time constant of the speed variation, s.
    pub speed_time_s: f64,
    /// Pauses per second of sliding (Poisson).
    pub pause_rate_hz: f64,
    /// Range `[min, max]` of pause durations, s (uniform).
    pub pause_s: [f64; 2],
    /// Back-slips per second of sliding (Poisson): the tip jumps back along
    /// the line, then slides on.
    pub slip_rate_hz: f64,
    /// Range `[min, max]` of back-slip lengths, mm (uniform).
    pub slip_mm: [f64; 2],
    /// Mean normal force in newtons. Default 0.5.
    pub force_n: f64,
    /// Relative standard deviation of the slow force variation.
    pub force_variability: f64,
    /// Time constant of the force variation, s.
    pub force_time_s: f64,
    /// Mean offset of the sensor's middle from the line's middle dot row
    /// (dots 2 and 5), mm, positive down the page. Default 0.
    pub lateral_offset_mm: f64,
    /// Standard deviation of the per-recording offset around that mean, mm.
    pub lateral_offset_std_mm: f64,
    /// Largest drift across the line per 100 mm along it, mm (each
    /// recording draws a drift uniformly in `[-max, max]`).
    pub lateral_drift_mm_per_100mm: f64,
    /// Standard deviation of the sensor's rotation about its middle,
    /// degrees (drawn once per recording).
    pub rotation_std_deg: f64,
    /// The position channel, or `None` to leave it out.
    pub encoder: Option<Encoder>,
}

/// Difficulty presets: kinematics and how strongly the sensor's faults act.
///
/// | parameter | `clean` | `typical` | `hard` |
/// | --- | --- | --- | --- |
/// | speed variability (relative, tau 0.5 s) | 0 | 0.15 | 0.35 |
/// | pauses per s, duration | 0 | 0.05, 0.1-0.4 s | 0.2, 0.1-0.8 s |
/// | back-slips per s, length | 0 | 0.05, 0.3-1.0 mm | 0.2, 0.5-2.0 mm |
/// | force variability (relative, tau 1 s) | 0 | 0.1 | 0.3 |
/// | lateral offset std | 0 | 0.3 mm | 0.8 mm |
/// | lateral drift, max per 100 mm | 0 | 0.5 mm | 1.5 mm |
/// | rotation std | 0 | 1 deg | 3 deg |
/// | encoder resolution, noise | 0.001 mm, 0 | 0.005 mm, 0.005 mm | 0.02 mm, 0.03 mm |
/// | fault scale (noise, drift, crosstalk, gain spread) | 0 | 1 | 2 |
/// | random dead / stuck taxel probability added | 0 / 0 | 0 / 0 | 0.04 / 0.02 |
///
/// All presets use a mean speed of 20 mm/s and a mean force of 0.5 N; set
/// those separately. `clean` is an ideal sensor (no faults at all, not even
/// the dead or stuck taxels the sensor file lists); `typical` applies the
/// sensor file's faults as written.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum Preset {
    /// Ideal conditions: constant speed and force, on the line, no faults.
    Clean,
    /// A careful robot on a real sensor. The default.
    #[default]
    Typical,
    /// A shaky robot on a worn sensor.
    Hard,
}

/// Names accepted by [`Preset::from_name`].
pub const PRESET_NAMES: [&str; 3] = ["clean", "typical", "hard"];

/// How strongly a preset applies the sensor's faults.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct FaultLevel {
    /// Multiplier on noise, drift, crosstalk and gain spread (0 = none).
    pub scale: f64,
    /// Added probability that a taxel is dead in a recording.
    pub extra_dead_fraction: f64,
    /// Added probability that a taxel is stuck in a recording.
    pub extra_stuck_fraction: f64,
    /// Whether the sensor file's listed dead and stuck taxels apply.
    pub device_faults: bool,
}

impl Preset {
    /// A preset by name: one of [`PRESET_NAMES`].
    pub fn from_name(name: &str) -> Result<Preset> {
        match name {
            "clean" => Ok(Preset::Clean),
            "typical" => Ok(Preset::Typical),
            "hard" => Ok(Preset::Hard),
            other => Err(Error::config(
                "preset",
                format!(
                    "unknown preset `{other}`: use one of {}",
                    PRESET_NAMES.join(", ")
                ),
            )),
        }
    }

    /// The preset's name.
    pub fn name(self) -> &'static str {
        match self {
            Preset::Clean => "clean",
            Preset::Typical => "typical",
            Preset::Hard => "hard",
        }
    }

    /// The preset's kinematics (see the table on [`Preset`]).
    pub fn kinematics(self) -> Kinematics {
        let base = Kinematics {
            speed_mm_s: 20.0,
            speed_variability: 0.0,
            speed_time_s: 0.5,
            pause_rate_hz: 0.0,
            pause_s: [0.1, 0.4],
            slip_rate_hz: 0.0,
            slip_mm: [0.3, 1.0],
            force_n: 0.5,
            force_variability: 0.0,
            force_time_s: 1.0,
            lateral_offset_mm: 0.0,
            lateral_offset_std_mm: 0.0,
            lateral_drift_mm_per_100mm: 0.0,
            rotation_std_deg: 0.0,
            encoder: Some(Encoder {
                resolution_mm: 0.001,
                noise_mm: 0.0,
            }),
        };
        match self {
            Preset::Clean => base,
            Preset::Typical => Kinematics {
                speed_variability: 0.15,
                pause_rate_hz: 0.05,
                slip_rate_hz: 0.05,
                force_variability: 0.1,
                lateral_offset_std_mm: 0.3,
                lateral_drift_mm_per_100mm: 0.5,
                rotation_std_deg: 1.0,
                encoder: Some(Encoder {
                    resolution_mm: 0.005,
                    noise_mm: 0.005,
                }),
                ..base
            },
            Preset::Hard => Kinematics {
                speed_variability: 0.35,
                pause_rate_hz: 0.2,
                pause_s: [0.1, 0.8],
                slip_rate_hz: 0.2,
                slip_mm: [0.5, 2.0],
                force_variability: 0.3,
                lateral_offset_std_mm: 0.8,
                lateral_drift_mm_per_100mm: 1.5,
                rotation_std_deg: 3.0,
                encoder: Some(Encoder {
                    resolution_mm: 0.02,
                    noise_mm: 0.03,
                }),
                ..base
            },
        }
    }

    /// The preset's fault level (see the table on [`Preset`]).
    pub fn fault_level(self) -> FaultLevel {
        match self {
            Preset::Clean => FaultLevel {
                scale: 0.0,
                extra_dead_fraction: 0.0,
                extra_stuck_fraction: 0.0,
                device_faults: false,
            },
            Preset::Typical => FaultLevel {
                scale: 1.0,
                extra_dead_fraction: 0.0,
                extra_stuck_fraction: 0.0,
                device_faults: true,
            },
            Preset::Hard => FaultLevel {
                scale: 2.0,
                extra_dead_fraction: 0.04,
                extra_stuck_fraction: 0.02,
                device_faults: true,
            },
        }
    }
}

impl Default for Kinematics {
    fn default() -> Self {
        Preset::Typical.kinematics()
    }
}

impl Kinematics {
    /// Validate every field.
    pub fn check(&self) -> Result<()> {
        let ok = |v: f64, lo: f64, hi: f64| v.is_finite() && v >= lo && v <= hi;
        let rules: [(&str, f64, f64, f64, &str); 12] = [
            ("speed", self.speed_mm_s, 0.1, 1000.0, "mm/s"),
            ("speed variability", self.speed_variability, 0.0, 2.0, ""),
            ("speed time constant", self.speed_time_s, 0.001, 1000.0, "s"),
            ("pause rate", self.pause_rate_hz, 0.0, 100.0, "per s"),
            ("slip rate", self.slip_rate_hz, 0.0, 100.0, "per s"),
            ("normal force", self.force_n, 0.001, 100.0, "N"),
            ("force variability", self.force_variability, 0.0, 2.0, ""),
            ("force time constant", self.force_time_s, 0.001, 1000.0, "s"),
            ("lateral offset", self.lateral_offset_mm, -50.0, 50.0, "mm"),
            (
                "lateral offset std",
                self.lateral_offset_std_mm,
                0.0,
                50.0,
                "mm",
            ),
            (
                "lateral drift",
                self.lateral_drift_mm_per_100mm,
                0.0,
                50.0,
                "mm per 100 mm",
            ),
            ("rotation std", self.rotation_std_deg, 0.0, 45.0, "degrees"),
        ];
        for (name, v, lo, hi, unit) in rules {
            if !ok(v, lo, hi) {
                return Err(Error::config(
                    name,
                    format!("is {v}: give a value from {lo} to {hi} {unit}"),
                ));
            }
        }
        for (name, r, hi) in [
            ("pause duration", self.pause_s, 60.0),
            ("slip length", self.slip_mm, 50.0),
        ] {
            if !(ok(r[0], 0.0, hi) && ok(r[1], r[0], hi)) {
                return Err(Error::config(
                    name,
                    format!("range {r:?}: give 0 <= min <= max <= {hi}"),
                ));
            }
        }
        if let Some(e) = self.encoder {
            if !ok(e.resolution_mm, 0.0, 10.0) || !ok(e.noise_mm, 0.0, 10.0) {
                return Err(Error::config(
                    "encoder",
                    format!(
                        "resolution {} mm, noise {} mm: give values from 0 to 10 mm",
                        e.resolution_mm, e.noise_mm
                    ),
                ));
            }
        }
        Ok(())
    }
}

/// One sampled path of the sensor's middle over the page.
#[derive(Debug, Clone)]
pub(crate) struct Trajectory {
    /// Page x of the sensor's middle per frame, mm.
    pub x: Vec<f64>,
    /// Page y of the sensor's middle per frame, mm.
    pub y: Vec<f64>,
    /// Normal force per frame, N.
    pub force: Vec<f64>,
    /// Rotation of the sensor about its middle, radians (constant).
    pub rotation_rad: f64,
    /// Lateral offset at the start, mm.
    pub offset_mm: f64,
    /// Lateral drift, mm per 100 mm.
    pub drift_mm_per_100mm: f64,
    /// Encoder readings per frame, mm, when there is an encoder.
    pub position: Option<Vec<f64>>,
}

fn normal(rng: &mut ChaCha8Rng) -> f64 {
    rng.sample::<f64, _>(StandardNormal)
}

fn uniform_in(rng: &mut ChaCha8Rng, r: [f64; 2]) -> f64 {
    r[0] + (r[1] - r[0]) * rng.gen::<f64>()
}

/// Sample a path from `x_start` to `x_end` (mm) at `rate_hz` frames per
/// second. Fails when it would take more than `max_frames` frames.
pub(crate) fn sample_path(
    k: &Kinematics,
    x_start: f64,
    x_end: f64,
    rate_hz: f64,
    max_frames: usize,
    rng: &mut ChaCha8Rng,
) -> Result<Trajectory> {
    let dt = 1.0 / rate_hz;
    let offset = k.lateral_offset_mm + k.lateral_offset_std_mm * normal(rng);
    let drift = k.lateral_drift_mm_per_100mm * (2.0 * rng.gen::<f64>() - 1.0);
    let rotation = (k.rotation_std_deg * normal(rng)).to_radians();
    let a_v = (-dt / k.speed_time_s).exp();
    let a_f = (-dt / k.force_time_s).exp();
    let (b_v, b_f) = ((1.0 - a_v * a_v).sqrt(), (1.0 - a_f * a_f).sqrt());
    let mut z_v = if k.speed_variability > 0.0 {
        normal(rng)
    } else {
        0.0
    };
    let mut z_f = if k.force_variability > 0.0 {
        normal(rng)
    } else {
        0.0
    };
    let slip_speed = (3.0 * k.speed_mm_s).max(30.0);
    let min_speed = 0.1 * k.speed_mm_s;

    let expected = ((x_end - x_start) / k.speed_mm_s * rate_hz) as usize + 1;
    let mut tr = Trajectory {
        x: Vec::with_capacity(expected),
        y: Vec::with_capacity(expected),
        force: Vec::with_capacity(expected),
        rotation_rad: rotation,
        offset_mm: offset,
        drift_mm_per_100mm: drift,
        position: None,
    };
    let mut x = x_start;
    let mut pause_left = 0.0f64; // seconds
    let mut slip_left = 0.0f64; // mm
                                // The small allowance keeps rounding in the sum from adding a frame.
    while x < x_end - 1e-9 {
        if tr.x.len() >= max_frames {
            return Err(Error::config(
                "speed",
                format!(
                    "the recording would exceed {max_frames} frames ({:.0} s at {rate_hz} Hz): raise the speed, shorten the text or lower the sample rate",
                    max_frames as f64 / rate_hz
                ),
            ));
        }
        tr.x.push(x);
        tr.y.push(offset + drift * (x - x_start) / 100.0);
        tr.force
            .push(k.force_n * (1.0 + k.force_variability * z_f).max(0.05));
        if k.speed_variability > 0.0 {
            z_v = a_v * z_v + b_v * normal(rng);
        }
        if k.force_variability > 0.0 {
            z_f = a_f * z_f + b_f * normal(rng);
        }
        if pause_left > 0.0 {
            pause_left -= dt;
        } else if slip_left > 0.0 {
            let step = (slip_speed * dt).min(slip_left);
            x = (x - step).max(x_start);
            slip_left -= step;
        } else {
            if k.pause_rate_hz > 0.0 && rng.gen::<f64>() < k.pause_rate_hz * dt {
                pause_left = uniform_in(rng, k.pause_s);
            } else if k.slip_rate_hz > 0.0 && rng.gen::<f64>() < k.slip_rate_hz * dt {
                slip_left = uniform_in(rng, k.slip_mm);
            }
            let v = (k.speed_mm_s * (1.0 + k.speed_variability * z_v)).max(min_speed);
            x += v * dt;
        }
    }
    if let Some(enc) = k.encoder {
        let pos =
            tr.x.iter()
                .map(|&x| {
                    let mut p = x;
                    if enc.noise_mm > 0.0 {
                        p += enc.noise_mm * normal(rng);
                    }
                    if enc.resolution_mm > 0.0 {
                        let ticks = (p / enc.resolution_mm).round();
                        // Dividing by a whole number of ticks per mm gives
                        // the nearest double to the decimal reading (0.005
                        // mm -> 200 per mm): files show -5.725, not
                        // -5.7250000000000005.
                        let per_mm = (1.0 / enc.resolution_mm).round();
                        p = if (per_mm * enc.resolution_mm - 1.0).abs() < 1e-12 {
                            ticks / per_mm
                        } else {
                            ticks * enc.resolution_mm
                        };
                    }
                    p
                })
                .collect();
        tr.position = Some(pos);
    }
    Ok(tr)
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::SeedableRng;

    #[test]
    fn clean_path_is_uniform() {
        let k = Preset::Clean.kinematics();
        let mut rng = ChaCha8Rng::seed_from_u64(1);
        let tr = sample_path(&k, -5.0, 15.0, 1000.0, 1_000_000, &mut rng).unwrap();
        // 20 mm at 20 mm/s is one second at 1 kHz.
        assert_eq!(tr.x.len(), 1000);
        assert!((tr.x[1] - tr.x[0] - 0.02).abs() < 1e-12);
        assert!(tr.y.iter().all(|&y| y == 0.0));
        assert!(tr.force.iter().all(|&f| f == 0.5));
    }

    #[test]
    fn hard_path_has_pauses_and_slips() {
        let mut k = Preset::Hard.kinematics();
        k.pause_rate_hz = 2.0;
        k.slip_rate_hz = 2.0;
        let mut rng = ChaCha8Rng::seed_from_u64(2);
        let tr = sample_path(&k, 0.0, 100.0, 500.0, 1_000_000, &mut rng).unwrap();
        let steps: Vec<f64> = tr.x.windows(2).map(|w| w[1] - w[0]).collect();
        assert!(steps.iter().any(|&s| s < 0.0), "no back-slip");
        assert!(steps.contains(&0.0), "no pause");
        assert!(tr.force.iter().all(|&f| f > 0.0));
    }

    #[test]
    fn frame_cap_is_an_error() {
        let k = Preset::Clean.kinematics();
        let mut rng = ChaCha8Rng::seed_from_u64(3);
        let err = sample_path(&k, 0.0, 100.0, 1000.0, 100, &mut rng).unwrap_err();
        assert!(err.to_string().contains("exceed 100 frames"));
    }

    #[test]
    fn presets_are_valid() {
        for name in PRESET_NAMES {
            let p = Preset::from_name(name).unwrap();
            assert_eq!(p.name(), name);
            p.kinematics().check().unwrap();
        }
        assert!(Preset::from_name("easy").is_err());
    }
}
