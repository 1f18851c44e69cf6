//! Sensor faults and readout: per-taxel gain spread, crosstalk between
//! neighbouring taxels, slow baseline drift, white noise, the ADC, and dead
//! or stuck taxels.
//!
//! Applied to each frame of ideal pressures in this order:
//! 1. gain: `p_i <- g_i * p_i`, `g_i ~ N(1, gain_spread)` clipped to 0.5-1.5;
//! 2. crosstalk: `q_i = p_i + c * sum(p_j for j neighbour of i)`, neighbours
//!    being taxels within 1.2 times the smallest taxel distance;
//! 3. drift and noise: `q_i + drift_i(t) + noise`, the drift an
//!    Ornstein-Uhlenbeck process per taxel (std `drift_kpa`, time constant
//!    `drift_time_s`), the noise white Gaussian (std `noise_kpa`);
//! 4. ADC: clip to `[0, full_scale]` and round to `2^bits - 1` steps,
//!    written as counts;
//! 5. dead taxels read 0; stuck taxels read their level times full scale.

use super::kinematics::FaultLevel;
use super::sensor::SensorSpec;
use rand::Rng;
use rand_chacha::ChaCha8Rng;
use rand_distr::StandardNormal;

/// The faults of one recording, drawn once before the frames.
#[derive(Debug, Clone)]
pub(crate) struct DrawnFaults {
    pub gain: Vec<f64>,
    pub crosstalk: f64,
    pub noise_kpa: f64,
    pub drift_kpa: f64,
    pub drift_time_s: f64,
    /// Taxels that read 0, ascending.
    pub dead: Vec<usize>,
    /// Taxels stuck at a fraction of full scale, ascending by taxel.
    pub stuck: Vec<(usize, f64)>,
}

/// Neighbour lists: for each taxel, the taxels within 1.2 times the
/// smallest centre distance of the layout.
pub(crate) fn neighbours(pos: &[[f64; 2]]) -> Vec<Vec<usize>> {
    let dist = |a: [f64; 2], b: [f64; 2]| ((a[0] - b[0]).powi(2) + (a[1] - b[1]).powi(2)).sqrt();
    let mut nearest = f64::INFINITY;
    for i in 0..pos.len() {
        for j in i + 1..pos.len() {
            nearest = nearest.min(dist(pos[i], pos[j]));
        }
    }
    let limit = 1.2 * nearest;
    (0..pos.len())
        .map(|i| {
            (0..pos.len())
                .filter(|&j| j != i && dist(pos[i], pos[j]) <= limit)
                .collect()
        })
        .collect()
}

/// Draw the per-recording faults of `sensor` at `level`.
pub(crate) fn draw(sensor: &SensorSpec, level: &FaultLevel, rng: &mut ChaCha8Rng) -> DrawnFaults {
    let n = sensor.taxel_count();
    let f = &sensor.faults;
    let s = level.scale;
    let gain = (0..n)
        .map(|_| {
            let z: f64 = rng.sample(StandardNormal);
            (1.0 + s * f.gain_spread * z).clamp(0.5, 1.5)
        })
        .collect();
    let mut dead = vec![false; n];
    let mut stuck: Vec<Option<f64>> = vec![None; n];
    if level.device_faults {
        for &t in &f.dead_taxels {
            if t < n {
                dead[t] = true;
            }
        }
        for st in &f.stuck_taxels {
            if st.taxel < n {
                stuck[st.taxel] = Some(st.level);
            }
        }
    }
    let base = if level.device_faults { 1.0 } else { 0.0 };
    let p_dead = (base * f.random_dead_fraction + level.extra_dead_fraction).min(1.0);
    let p_stuck = (base * f.random_stuck_fraction + level.extra_stuck_fraction).min(1.0);
    for t in 0..n {
        // Always draw, so the stream does not depend on the probabilities.
        let (u_dead, u_stuck, u_level) = (rng.gen::<f64>(), rng.gen::<f64>(), rng.gen::<f64>());
        if dead[t] || stuck[t].is_some() {
            continue;
        }
        if u_dead < p_dead {
            dead[t] = true;
        } else if u_stuck < p_stuck {
            stuck[t] = Some(0.05 + 0.9 * u_level);
        }
    }
    DrawnFaults {
        gain,
        crosstalk: s * f.crosstalk,
        noise_kpa: s * f.noise_kpa,
        drift_kpa: s * f.drift_kpa,
        drift_time_s: f.drift_time_s,
        dead: (0..n).filter(|&t| dead[t]).collect(),
        stuck: (0..n)
            .filter_map(|t| stuck[t].filter(|_| !dead[t]).map(|l| (t, l)))
            .collect(),
    }
}

/// The readout chain for one recording: holds the drift state between
/// frames.
pub(crate) struct Readout<'a> {
    faults: &'a DrawnFaults,
    neighbours: &'a [Vec<usize>],
    drift: Vec<f64>,
    drift_a: f64,
    drift_b: f64,
    scratch: Vec<f64>,
    full_scale: f64,
    max_count: Option<f64>,
    is_dead: Vec<bool>,
    stuck_value: Vec<Option<f32>>,
}

impl<'a> Readout<'a> {
    pub(crate) fn new(
        sensor: &SensorSpec,
        faults: &'a DrawnFaults,
        neighbours: &'a [Vec<usize>],
        rng: &mut ChaCha8Rng,
    ) -> Self {
        let n = sensor.taxel_count();
        let dt = 1.0 / sensor.sample_rate_hz;
        let drift_a = (-dt / faults.drift_time_s).exp();
        let drift_b = (1.0 - drift_a * drift_a).sqrt();
        let drift = if faults.drift_kpa > 0.0 {
            (0..n)
                .map(|_| faults.drift_kpa * rng.sample::<f64, _>(StandardNormal))
                .collect()
        } else {
            vec![0.0; n]
        };
        let (full_scale, max_count) = match &sensor.adc {
            Some(adc) => (adc.full_scale_kpa, Some(adc.max_count())),
            None => (sensor.contact.p_max_kpa, None),
        };
        let mut is_dead = vec![false; n];
        for &t in &faults.dead {
            is_dead[t] = true;
        }
        let mut stuck_value = vec![None; n];
        for &(t, level) in &faults.stuck {
            stuck_value[t] = Some(match max_count {
                Some(m) => (level * m).round() as f32,
                None => (level * full_scale) as f32,
            });
        }
        Readout {
            faults,
            neighbours,
            drift,
            drift_a,
            drift_b,
            scratch: vec![0.0; n],
            full_scale,
            max_count,
            is_dead,
            stuck_value,
        }
    }

    /// Turn one frame of ideal pressures (kPa, `[n_taxels]`) into sensor
    /// output (`[n_taxels]`, counts or kPa).
    pub(crate) fn frame(&mut self, pressure: &[f64], out: &mut [f32], rng: &mut ChaCha8Rng) {
        let f = self.faults;
        for (s, (&p, &g)) in self.scratch.iter_mut().zip(pressure.iter().zip(&f.gain)) {
            *s = p * g;
        }
        for (i, o) in out.iter_mut().enumerate() {
            let mut v = self.scratch[i];
            if f.crosstalk > 0.0 {
                let leak: f64 = self.neighbours[i].iter().map(|&j| self.scratch[j]).sum();
                v += f.crosstalk * leak;
            }
            if f.drift_kpa > 0.0 {
                let z: f64 = rng.sample(StandardNormal);
                self.drift[i] = self.drift_a * self.drift[i] + self.drift_b * f.drift_kpa * z;
                v += self.drift[i];
            }
            if f.noise_kpa > 0.0 {
                let z: f64 = rng.sample(StandardNormal);
                v += f.noise_kpa * z;
            }
            let value = match self.max_count {
                Some(m) => ((v / self.full_scale).clamp(0.0, 1.0) * m).round() as f32,
                None => v as f32,
            };
            *o = if self.is_dead[i] {
                0.0
            } else if let Some(s) = self.stuck_value[i] {
                s
            } else {
                value
            };
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::SeedableRng;

    #[test]
    fn grid_neighbours_are_the_four_nearest() {
        let pos: Vec<[f64; 2]> = (0..3)
            .flat_map(|r| (0..3).map(move |c| [c as f64, r as f64]))
            .collect();
        let nb = neighbours(&pos);
        assert_eq!(nb[4], vec![1, 3, 5, 7]); // middle of a 3x3 grid
        assert_eq!(nb[0], vec![1, 3]);
    }

    #[test]
    fn device_faults_apply_only_when_asked() {
        let mut s = SensorSpec::builtin("hex24").unwrap();
        s.faults.dead_taxels = vec![2];
        s.faults.stuck_taxels = vec![super::super::sensor::StuckTaxel {
            taxel: 5,
            level: 0.5,
        }];
        let mut rng = ChaCha8Rng::seed_from_u64(9);
        let typical = super::super::Preset::Typical.fault_level();
        let d = draw(&s, &typical, &mut rng);
        assert_eq!(d.dead, vec![2]);
        assert_eq!(d.stuck, vec![(5, 0.5)]);
        let clean = super::super::Preset::Clean.fault_level();
        let d = draw(&s, &clean, &mut rng);
        assert!(d.dead.is_empty() && d.stuck.is_empty());
        assert!(d.gain.iter().all(|&g| g == 1.0));
        assert_eq!(d.noise_kpa, 0.0);
    }

    #[test]
    fn adc_clips_and_quantises() {
        let s = SensorSpec::builtin("pad4x3").unwrap(); // 10 bits, 150 kPa
        let clean = super::super::Preset::Clean.fault_level();
        let mut rng = ChaCha8Rng::seed_from_u64(1);
        let d = draw(&s, &clean, &mut rng);
        let nb = neighbours(&s.taxel_positions());
        let mut r = Readout::new(&s, &d, &nb, &mut rng);
        let mut p = vec![75.0; 12];
        p[0] = -3.0;
        p[1] = 500.0;
        let mut out = vec![0f32; 12];
        r.frame(&p, &mut out, &mut rng);
        assert_eq!(out[0], 0.0);
        assert_eq!(out[1], 1023.0);
        assert_eq!(out[2], (0.5f64 * 1023.0).round() as f32);
    }
}
