//! Optimisation: Adam (Kingma and Ba 2015) with bias correction, global
//! gradient-norm clipping, and a learning-rate schedule (linear warm-up
//! then cosine decay).

use serde::{Deserialize, Serialize};

/// Adam hyperparameters.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct AdamConfig {
    /// Exponential decay of the first-moment estimate. Default 0.9.
    pub beta1: f32,
    /// Exponential decay of the second-moment estimate. Default 0.999.
    pub beta2: f32,
    /// Added to the root of the second moment. Default 1e-8.
    pub eps: f32,
}

impl Default for AdamConfig {
    fn default() -> Self {
        // The paper's defaults (Kingma and Ba 2015, Algorithm 1).
        AdamConfig {
            beta1: 0.9,
            beta2: 0.999,
            eps: 1e-8,
        }
    }
}

/// Adam state: one first- and second-moment vector per parameter array.
/// Serialises, so a checkpoint can resume exactly.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Adam {
    config: AdamConfig,
    /// Updates done so far.
    t: u64,
    m: Vec<Vec<f32>>,
    v: Vec<Vec<f32>>,
}

impl Adam {
    /// Fresh state for parameter arrays of the given lengths.
    pub fn new(config: AdamConfig, sizes: &[usize]) -> Adam {
        Adam {
            config,
            t: 0,
            m: sizes.iter().map(|&n| vec![0.0; n]).collect(),
            v: sizes.iter().map(|&n| vec![0.0; n]).collect(),
        }
    }

    /// Updates done so far.
    pub fn steps(&self) -> u64 {
        self.t
    }

    /// Whether the state fits parameter arrays of these lengths.
    pub fn fits(&self, sizes: &[usize]) -> bool {
        self.m.len() == sizes.len() && self.m.iter().zip(sizes).all(|(m, &n)| m.len() == n)
    }

    /// One update with learning rate `lr`:
    ///
    /// ```text
    /// m ← β1 m + (1-β1) g,  v ← β2 v + (1-β2) g²
    /// θ ← θ - lr · (m / (1-β1^t)) / (sqrt(v / (1-β2^t)) + ε)
    /// ```
    ///
    /// Panics if `params` and `grads` do not have the lengths given to
    /// [`Adam::new`].
    pub fn update(&mut self, params: &mut [&mut [f32]], grads: &[&[f32]], lr: f32) {
        assert_eq!(params.len(), self.m.len(), "Adam: parameter arrays");
        assert_eq!(grads.len(), self.m.len(), "Adam: gradient arrays");
        self.t += 1;
        let AdamConfig { beta1, beta2, eps } = self.config;
        let c1 = 1.0 - (beta1 as f64).powi(self.t as i32);
        let c2 = 1.0 - (beta2 as f64).powi(self.t as i32);
        let step = (lr as f64 / c1) as f32;
        let c2_sqrt = c2.sqrt() as f32;
        for (((p, g), m), v) in params
            .iter_mut()
            .zip(grads)
            .zip(&mut self.m)
            .zip(&mut self.v)
        {
            assert!(
                p.len() == m.len() && g.len() == m.len(),
                "Adam: array length"
            );
            for i in 0..m.len() {
                let gi = g[i];
                m[i] = beta1 * m[i] + (1.0 - beta1) * gi;
                v[i] = beta2 * v[i] + (1.0 - beta2) * gi * gi;
                p[i] -= step * m[i] / (v[i].sqrt() / c2_sqrt + eps);
            }
        }
    }
}

/// The global L2 norm of all gradient arrays together.
pub fn global_norm(grads: &[&[f32]]) -> f32 {
    grads
        .iter()
        .flat_map(|g| g.iter())
        .map(|&x| x as f64 * x as f64)
        .sum::<f64>()
        .sqrt() as f32
}

/// Scales every gradient by `max_norm / norm` when their global norm
/// exceeds `max_norm` (Pascanu, Mikolov and Bengio 2013). Returns the norm
/// before clipping. A non-finite norm zeroes the gradients, so one bad
/// batch cannot spoil the weights.
pub fn clip_global_norm(grads: &mut [&mut [f32]], max_norm: f32) -> f32 {
    let norm = {
        let views: Vec<&[f32]> = grads.iter().map(|g| &**g).collect();
        global_norm(&views)
    };
    if !norm.is_finite() {
        grads.iter_mut().for_each(|g| g.fill(0.0));
    } else if norm > max_norm {
        let k = max_norm / norm;
        grads
            .iter_mut()
            .for_each(|g| g.iter_mut().for_each(|x| *x *= k));
    }
    norm
}

/// Learning rate by update number: linear warm-up from `peak / warmup` to
/// `peak` over the first `warmup` updates, then a cosine decay from `peak`
/// to `peak * final_ratio` at update `total` (and flat after it).
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct LrSchedule {
    /// Peak learning rate. Default 3e-3.
    pub peak: f32,
    /// Warm-up updates. Default 100.
    pub warmup: u64,
    /// Update at which the decay ends (usually epochs x batches per epoch).
    pub total: u64,
    /// Final rate as a fraction of the peak. Default 0.05.
    pub final_ratio: f32,
}

impl LrSchedule {
    /// The defaults above for a run of `total` updates.
    pub fn new(peak: f32, total: u64) -> LrSchedule {
        LrSchedule {
            peak,
            warmup: 100,
            total,
            final_ratio: 0.05,
        }
    }

    /// The rate for update `step` (0-based).
    pub fn at(&self, step: u64) -> f32 {
        if step < self.warmup {
            return self.peak * (step + 1) as f32 / self.warmup as f32;
        }
        let span = self.total.saturating_sub(self.warmup).max(1);
        let x = ((step - self.warmup) as f64 / span as f64).min(1.0);
        let cos = 0.5 * (1.0 + (std::f64::consts::PI * x).cos());
        let lo = self.final_ratio as f64;
        (self.peak as f64 * (lo + (1.0 - lo) * cos)) as f32
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    #[test]
    fn first_adam_step_moves_by_lr_times_sign() {
        // With bias correction the first update is lr · g / (|g| + ε):
        // Kingma and Ba 2015, section 2 ("the effective step ... is
        // bounded by α" and equals ±α at t = 1 when ε is negligible).
        let mut p = vec![1.0f32, -2.0, 0.5];
        let g = vec![0.3f32, -4.0, 0.0];
        let mut adam = Adam::new(AdamConfig::default(), &[3]);
        adam.update(&mut [&mut p], &[&g], 0.01);
        assert_relative_eq!(p[0], 0.99, epsilon = 1e-6);
        assert_relative_eq!(p[1], -1.99, epsilon = 1e-6);
        assert_relative_eq!(p[2], 0.5);
        assert_eq!(adam.steps(), 1);
    }

    #[test]
    fn adam_minimises_a_quadratic() {
        // f(x) = Σ (x_i - c_i)², gradient 2 (x - c).
        let c = [3.0f32, -1.0];
        let mut x = vec![0.0f32, 0.0];
        let mut adam = Adam::new(AdamConfig::default(), &[2]);
        for _ in 0..2000 {
            let g: Vec<f32> = x.iter().zip(&c).map(|(a, b)| 2.0 * (a - b)).collect();
            adam.update(&mut [&mut x], &[&g], 0.05);
        }
        assert_relative_eq!(x[0], 3.0, epsilon = 1e-2);
        assert_relative_eq!(x[1], -1.0, epsilon = 1e-2);
    }

    #[test]
    fn clipping_scales_to_the_max_norm() {
        let mut a = vec![3.0f32];
        let mut b = vec![4.0f32];
        let n = clip_global_norm(&mut [&mut a, &mut b], 1.0);
        assert_relative_eq!(n, 5.0);
        assert_relative_eq!(a[0], 0.6, epsilon = 1e-6);
        assert_relative_eq!(b[0], 0.8, epsilon = 1e-6);
        let mut c = vec![0.1f32];
        clip_global_norm(&mut [&mut c], 1.0);
        assert_eq!(c[0], 0.1);
        let mut d = vec![f32::NAN, 1.0];
        clip_global_norm(&mut [&mut d], 1.0);
        assert_eq!(d, vec![0.0, 0.0]);
    }

    #[test]
    fn schedule_warms_up_then_decays() {
        let s = LrSchedule::new(1e-3, 1100);
        assert_relative_eq!(s.at(0), 1e-5);
        assert_relative_eq!(s.at(99), 1e-3);
        assert_relative_eq!(s.at(600), 1e-3 * (0.05 + 0.95 * 0.5), epsilon = 1e-9);
        assert_relative_eq!(s.at(1100), 5e-5, epsilon = 1e-9);
        assert_relative_eq!(s.at(5000), 5e-5, epsilon = 1e-9);
        assert!(s.at(300) > s.at(400));
    }
}
