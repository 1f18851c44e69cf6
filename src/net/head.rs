//! The factorised output head: a linear layer from the GRU's output to 7
//! logits per frame (one blank logit, six dot logits), and the
//! log-probabilities over the 65 CTC classes they define.
//!
//! Class `m` in `0..64` is the six-dot pattern with bit mask `m` (dot `k` is
//! bit `k - 1`, as in [`crate::Cell`]); class [`BLANK`] = 64 is the CTC
//! blank. With logits `z_b` (blank) and `z_1..z_6` (dots):
//!
//! ```text
//! P(blank)     = σ(z_b)
//! P(pattern m) = (1 - σ(z_b)) · Π_k (σ(z_k) if dot k in m else 1 - σ(z_k))
//! ```
//!
//! so the 65 probabilities sum to one by construction, and an empty cell (a
//! space) is a pattern like any other. Everything is computed in log space
//! with the log-sigmoid `log σ(x) = min(x, 0) - ln(1 + e^-|x|)`, which
//! neither overflows nor loses the small tail.

use ndarray::{Array1, Array2, ArrayView2, Axis};
use rand::Rng;
use rand_chacha::ChaCha8Rng;
use serde::{Deserialize, Serialize};

use super::kernels::gemm;

/// Logits per frame: index 0 is the blank, index `k` (1-6) is dot `k`.
pub const N_LOGITS: usize = 7;
/// CTC classes: the 64 six-dot patterns and the blank.
pub const N_CLASSES: usize = 65;
/// Index of the blank class.
pub const BLANK: usize = 64;

/// `log σ(x)`, stable for any `x`.
#[inline]
pub(crate) fn log_sigmoid(x: f32) -> f32 {
    x.min(0.0) - (-x.abs()).exp().ln_1p()
}

/// `σ(x)`, stable for any `x`.
#[inline]
pub(crate) fn sigmoid(x: f32) -> f32 {
    if x >= 0.0 {
        1.0 / (1.0 + (-x).exp())
    } else {
        let e = x.exp();
        e / (1.0 + e)
    }
}

/// The linear layer of the head: `logits = x W + b`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub(crate) struct Head {
    /// `[n_in, 7]`.
    pub(crate) w: Array2<f32>,
    /// `[7]`.
    pub(crate) b: Array1<f32>,
}

impl Head {
    /// Weights uniform in `[-1/sqrt(n_in), 1/sqrt(n_in)]`, biases zero.
    pub(crate) fn new(n_in: usize, rng: &mut ChaCha8Rng) -> Head {
        let k = 1.0 / (n_in as f32).sqrt();
        Head {
            w: Array2::from_shape_fn((n_in, N_LOGITS), |_| rng.gen_range(-k..k)),
            b: Array1::zeros(N_LOGITS),
        }
    }

    pub(crate) fn zeros(n_in: usize) -> Head {
        Head {
            w: Array2::zeros((n_in, N_LOGITS)),
            b: Array1::zeros(N_LOGITS),
        }
    }

    /// `x`: `[N, n_in]` → logits `[N, 7]`.
    pub(crate) fn logits(&self, x: ArrayView2<f32>) -> Array2<f32> {
        let mut y = Array2::zeros((x.nrows(), N_LOGITS));
        y += &self.b;
        gemm(x, self.w.view(), 1.0, &mut y.view_mut());
        y
    }

    /// Logits of one frame `x` `[n_in]` into `out` `[7]`.
    pub(crate) fn logits_row(&self, x: &[f32], out: &mut [f32]) {
        super::kernels::gemv(
            x,
            self.w.as_slice().expect("contiguous"),
            self.b.as_slice().expect("contiguous"),
            out,
        );
    }

    /// Adds the parameter gradients for input `x` `[N, n_in]` and
    /// `d_logits` `[N, 7]` to `grad`, and returns `∂L/∂x` `[N, n_in]`
    /// (training uses [`Self::backward_into`]).
    #[cfg(test)]
    pub(crate) fn backward(
        &self,
        x: ArrayView2<f32>,
        d_logits: ArrayView2<f32>,
        grad: &mut Head,
    ) -> Array2<f32> {
        let mut dx = Array2::zeros(x.dim());
        self.backward_into(x, d_logits, grad, &mut dx);
        dx
    }

    /// [`Self::backward`] writing `∂L/∂x` into `dx` `[N, n_in]` (any prior
    /// contents are overwritten).
    pub(crate) fn backward_into(
        &self,
        x: ArrayView2<f32>,
        d_logits: ArrayView2<f32>,
        grad: &mut Head,
        dx: &mut Array2<f32>,
    ) {
        gemm(x.t(), d_logits, 1.0, &mut grad.w.view_mut());
        grad.b += &d_logits.sum_axis(Axis(0));
        gemm(d_logits, self.w.t(), 0.0, &mut dx.view_mut());
    }

    pub(crate) fn params(&self) -> Vec<&[f32]> {
        vec![
            self.w.as_slice().expect("contiguous"),
            self.b.as_slice().expect("contiguous"),
        ]
    }

    pub(crate) fn params_mut(&mut self) -> Vec<&mut [f32]> {
        vec![
            self.w.as_slice_mut().expect("contiguous"),
            self.b.as_slice_mut().expect("contiguous"),
        ]
    }
}

/// Natural-log probabilities of the 65 classes from the 7 head logits.
///
/// `logits`: `[T, 7]` (blank, dots 1-6) → `[T, 65]`, column `m < 64` the
/// pattern with mask `m`, column [`BLANK`] the blank. Each row's
/// probabilities sum to 1.
pub fn pattern_log_probs(logits: ArrayView2<f32>) -> Array2<f32> {
    let mut out = Array2::zeros((logits.nrows(), N_CLASSES));
    for (z, mut o) in logits.outer_iter().zip(out.outer_iter_mut()) {
        let mut zr = [0.0f32; N_LOGITS];
        for (d, v) in zr.iter_mut().zip(z.iter()) {
            *d = *v;
        }
        pattern_log_probs_row(&zr, o.as_slice_mut().expect("fresh array"));
    }
    out
}

/// One frame of [`pattern_log_probs`]: `z` `[7]` → `out` `[65]`.
pub(crate) fn pattern_log_probs_row(z: &[f32], out: &mut [f32]) {
    let lb = log_sigmoid(z[0]);
    let lnb = log_sigmoid(-z[0]);
    let mut on = [0.0f32; 6];
    let mut off = [0.0f32; 6];
    for k in 0..6 {
        on[k] = log_sigmoid(z[k + 1]);
        off[k] = log_sigmoid(-z[k + 1]);
    }
    // Sums over dots 1-3 and dots 4-6 separately, then combined: every
    // term is a plain sum of non-positive numbers (no cancellation).
    let mut low = [0.0f32; 8];
    let mut high = [0.0f32; 8];
    for m in 0..8 {
        for k in 0..3 {
            low[m] += if m >> k & 1 == 1 { on[k] } else { off[k] };
            high[m] += if m >> k & 1 == 1 {
                on[k + 3]
            } else {
                off[k + 3]
            };
        }
    }
    for m in 0..64 {
        out[m] = lnb + low[m & 7] + high[m >> 3];
    }
    out[BLANK] = lb;
}

/// Back-propagates `∂L/∂(log-probs)` `[T, 65]` to `∂L/∂logits` `[T, 7]`.
///
/// With `g` the incoming row, `S = Σ_{m<64} g_m` and `A_k = Σ_{m ∋ k} g_m`:
/// `∂L/∂z_b = g_64 σ(-z_b) - S σ(z_b)` and
/// `∂L/∂z_k = A_k σ(-z_k) - (S - A_k) σ(z_k)`, since
/// `d log σ(z)/dz = σ(-z)` and `d log σ(-z)/dz = -σ(z)`.
pub(crate) fn pattern_log_probs_backward(
    logits: ArrayView2<f32>,
    d_log_probs: ArrayView2<f32>,
) -> Array2<f32> {
    let mut out = Array2::zeros((logits.nrows(), N_LOGITS));
    for ((z, g), mut o) in logits
        .outer_iter()
        .zip(d_log_probs.outer_iter())
        .zip(out.outer_iter_mut())
    {
        let s: f32 = g.iter().take(64).sum();
        o[0] = g[BLANK] * sigmoid(-z[0]) - s * sigmoid(z[0]);
        for k in 0..6 {
            let a: f32 = (0..64).filter(|m| m >> k & 1 == 1).map(|m| g[m]).sum();
            o[k + 1] = a * sigmoid(-z[k + 1]) - (s - a) * sigmoid(z[k + 1]);
        }
    }
    out
}

/// Per-frame probabilities from the head logits: `[T, 7]` → `[T, 7]`,
/// column 0 `P(blank)`, column `k` (1-6) `P(dot k raised | not blank)`.
pub fn dot_probs(logits: ArrayView2<f32>) -> Array2<f32> {
    logits.mapv(sigmoid)
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;
    use ndarray::array;
    use rand::SeedableRng;

    #[test]
    fn probabilities_follow_the_factorisation_and_sum_to_one() {
        let z = array![
            [0.3f32, -1.0, 2.0, 0.0, -0.5, 1.5, -3.0],
            [-40.0, 30.0, -30.0, 5.0, 0.0, 0.0, 0.0]
        ];
        let lp = pattern_log_probs(z.view());
        for t in 0..2 {
            let total: f64 = lp.row(t).iter().map(|&v| (v as f64).exp()).sum();
            assert_relative_eq!(total, 1.0, epsilon = 1e-5);
            let s = |x: f32| 1.0 / (1.0 + (-(x as f64)).exp());
            // Pattern dots 1, 3, 6 = mask 0b100101 = 37, from the formula
            // in the module docs.
            let zt = z.row(t);
            let mut p = 1.0 - s(zt[0]);
            for k in 0..6 {
                p *= if 37 >> k & 1 == 1 {
                    s(zt[k + 1])
                } else {
                    1.0 - s(zt[k + 1])
                };
            }
            assert_relative_eq!((lp[[t, 37]] as f64).exp(), p, max_relative = 1e-5);
            assert_relative_eq!((lp[[t, BLANK]] as f64).exp(), s(zt[0]), max_relative = 1e-5);
        }
        // Far tails stay finite in log space.
        assert!(lp.iter().all(|v| v.is_finite()));
    }

    #[test]
    fn log_sigmoid_matches_direct_formula() {
        for &x in &[-50.0f32, -3.0, -0.1, 0.0, 0.2, 4.0, 60.0] {
            let want = -(1.0 + (-(x as f64)).exp()).ln();
            assert_relative_eq!(
                log_sigmoid(x) as f64,
                want,
                epsilon = 1e-6,
                max_relative = 1e-6
            );
        }
    }

    /// Finite differences of L = Σ c ⊙ log_probs(z) against the analytic
    /// backward: ∂L/∂z from `pattern_log_probs_backward` with g = c.
    #[test]
    fn log_prob_gradient_matches_finite_differences() {
        let mut rng = ChaCha8Rng::seed_from_u64(5);
        let z = Array2::from_shape_fn((3, 7), |_| rng.gen_range(-3.0f32..3.0));
        let c = Array2::from_shape_fn((3, 65), |_| rng.gen_range(-1.0f32..1.0));
        let loss = |z: &Array2<f32>| -> f64 {
            let lp = pattern_log_probs(z.view());
            lp.iter()
                .zip(c.iter())
                .map(|(a, b)| *a as f64 * *b as f64)
                .sum()
        };
        let g = pattern_log_probs_backward(z.view(), c.view());
        let eps = 1e-2f32;
        for t in 0..3 {
            for k in 0..7 {
                let mut zp = z.clone();
                zp[[t, k]] += eps;
                let mut zm = z.clone();
                zm[[t, k]] -= eps;
                let numeric = (loss(&zp) - loss(&zm)) / (2.0 * eps as f64);
                assert!(
                    (g[[t, k]] as f64 - numeric).abs() < 2e-3 + 1e-2 * numeric.abs(),
                    "[{t},{k}] {} vs {numeric}",
                    g[[t, k]]
                );
            }
        }
    }

    /// The linear layer: ∂L/∂W = xᵀ d, ∂L/∂b = Σ_rows d, ∂L/∂x = d Wᵀ for
    /// L = Σ c ⊙ (x W + b), so d = c.
    #[test]
    fn linear_gradient_matches_finite_differences() {
        let mut rng = ChaCha8Rng::seed_from_u64(6);
        let head = Head::new(5, &mut rng);
        let x = Array2::from_shape_fn((4, 5), |_| rng.gen_range(-1.0f32..1.0));
        let c = Array2::from_shape_fn((4, 7), |_| rng.gen_range(-1.0f32..1.0));
        let loss = |h: &Head, x: &Array2<f32>| -> f64 {
            h.logits(x.view())
                .iter()
                .zip(c.iter())
                .map(|(a, b)| *a as f64 * *b as f64)
                .sum()
        };
        let mut grad = Head::zeros(5);
        let dx = head.backward(x.view(), c.view(), &mut grad);
        let eps = 1e-2f32;
        for p in 0..2 {
            for i in 0..head.params()[p].len() {
                let mut hp = head.clone();
                hp.params_mut()[p][i] += eps;
                let mut hm = head.clone();
                hm.params_mut()[p][i] -= eps;
                let numeric = (loss(&hp, &x) - loss(&hm, &x)) / (2.0 * eps as f64);
                assert_relative_eq!(grad.params()[p][i] as f64, numeric, epsilon = 1e-3);
            }
        }
        for r in 0..4 {
            for k in 0..5 {
                let mut xp = x.clone();
                xp[[r, k]] += eps;
                let mut xm = x.clone();
                xm[[r, k]] -= eps;
                let numeric = (loss(&head, &xp) - loss(&head, &xm)) / (2.0 * eps as f64);
                assert_relative_eq!(dx[[r, k]] as f64, numeric, epsilon = 1e-3);
            }
        }
    }

    #[test]
    fn dot_probs_are_sigmoids() {
        let z = array![[0.0f32, 1.0, -1.0, 2.0, -2.0, 10.0, -10.0]];
        let p = dot_probs(z.view());
        assert_relative_eq!(p[[0, 0]], 0.5);
        assert_relative_eq!(p[[0, 1]] + p[[0, 2]], 1.0, epsilon = 1e-6);
    }
}
