//! Connectionist temporal classification loss (Graves, Fernández, Gomez and
//! Schmidhuber, ICML 2006) and its gradient, by the forward-backward
//! algorithm in log space.
//!
//! The target label sequence `l` (length `L`) is extended with blanks,
//! `l' = (-, l_1, -, l_2, ..., l_L, -)` of length `2L + 1`. With `y_t(k)`
//! the network's probability of class `k` at frame `t`:
//!
//! ```text
//! α_0(0) = y_0(-),  α_0(1) = y_0(l_1)
//! α_t(s) = y_t(l'_s) · (α_{t-1}(s) + α_{t-1}(s-1) + [l'_s ≠ - and l'_s ≠ l'_{s-2}] α_{t-1}(s-2))
//! β_{T-1}(2L) = β_{T-1}(2L-1) = 1        (β here excludes frame t's own emission)
//! β_t(s) = Σ_{s' ∈ {s, s+1, s+2 if allowed}} y_{t+1}(l'_{s'}) β_{t+1}(s')
//! p(l | x) = α_{T-1}(2L) + α_{T-1}(2L-1)
//! ```
//!
//! The loss is `-ln p(l | x)`, and for log-probability inputs its gradient
//! is `∂L/∂ln y_t(k) = -Σ_{s: l'_s = k} α_t(s) β_t(s) / p(l | x)`: minus the
//! posterior probability that frame `t` is aligned to class `k`. All sums
//! are log-sum-exp in f64.

use ndarray::{Array2, ArrayView2};

/// log(e^a + e^b + e^c) with one logarithm, -inf handled.
#[inline]
fn lse3(a: f64, b: f64, c: f64) -> f64 {
    let m = a.max(b).max(c);
    if m == f64::NEG_INFINITY {
        return m;
    }
    m + ((a - m).exp() + (b - m).exp() + (c - m).exp()).ln()
}

/// The CTC loss of one sequence and its gradient.
#[derive(Debug, Clone)]
pub struct CtcLoss {
    /// `-ln p(target | frames)` in nats.
    pub loss: f64,
    /// `∂ loss / ∂ log_probs`, `[T, C]`.
    pub grad: Array2<f32>,
}

/// CTC loss and gradient for one sequence.
///
/// Runs the forward-backward recursions on probabilities rescaled at
/// every frame (Graves et al. 2006, section 4.1, eq. 9-11; the same
/// device as Rabiner's scaled HMM recursions), which needs only
/// multiplications and adds and one `exp` per frame and extended label:
/// each frame's emissions are first divided by the largest of them (a
/// shift in log space), then `α_t` and `β_t` are normalised to sum to one
/// and `ln p(l|x)` is the sum of the logarithms of the normalisers and
/// shifts. The posteriors need no scale at all: `Σ_s α_t(s) β_t(s)` is the
/// same `p(l|x)` at every frame, so `γ_t(s) = α̂_t(s) β̂_t(s) / Σ_s' α̂_t(s')
/// β̂_t(s')` with the rescaled values. When a normaliser underflows
/// (reachable states all far less likely than unreachable ones) it falls
/// back to the log-space recursions of the module docs.
///
/// `log_probs`: `[T, C]` natural-log class probabilities per frame (for
/// tactread `C = 65`, from [`crate::net::pattern_log_probs`]); `target`:
/// the label sequence, each label in `0..C` and different from `blank`.
/// Returns `None` when no alignment exists: the target needs more frames
/// than `T` (one per label plus one between each pair of equal neighbours)
/// or every alignment has probability zero.
///
/// Panics if a label is out of range or equals `blank`.
pub fn ctc_loss(log_probs: ArrayView2<f32>, target: &[usize], blank: usize) -> Option<CtcLoss> {
    let (t_len, c) = log_probs.dim();
    assert!(blank < c, "blank index out of range");
    assert!(
        target.iter().all(|&k| k < c && k != blank),
        "CTC target label out of range or blank"
    );
    let repeats = target.windows(2).filter(|w| w[0] == w[1]).count();
    if t_len == 0 || target.len() + repeats > t_len {
        return None;
    }
    match ctc_scaled(log_probs, target, blank) {
        Scaled::Done(r) => Some(r),
        Scaled::Underflow => ctc_loss_log(log_probs, target, blank),
    }
}

/// What the rescaled recursions gave.
enum Scaled {
    Done(CtcLoss),
    Underflow,
}

/// Normalisers below this are treated as underflow (far above the
/// smallest normal f64, 2.2e-308, so products of two stay normal).
const TINY: f64 = 1e-150;

thread_local! {
    /// Each thread's buffers for [`ctc_scaled`] (emissions, alpha, beta),
    /// reused across calls: fresh ones of this size (hundreds of KiB)
    /// would be mapped and zeroed by the operating system at every call.
    static BUFFERS: std::cell::RefCell<[Vec<f64>; 3]> = const {
        std::cell::RefCell::new([Vec::new(), Vec::new(), Vec::new()])
    };
}

/// The rescaled forward-backward of [`ctc_loss`] (inputs already checked).
fn ctc_scaled(log_probs: ArrayView2<f32>, target: &[usize], blank: usize) -> Scaled {
    BUFFERS
        .with_borrow_mut(|[y, alpha, beta]| ctc_scaled_in(log_probs, target, blank, y, alpha, beta))
}

/// [`ctc_scaled`] with its three `[T, S]` buffers passed in (any length
/// and contents on entry).
fn ctc_scaled_in(
    log_probs: ArrayView2<f32>,
    target: &[usize],
    blank: usize,
    y: &mut Vec<f64>,
    alpha: &mut Vec<f64>,
    beta: &mut Vec<f64>,
) -> Scaled {
    let (t_len, c) = log_probs.dim();
    let s_len = 2 * target.len() + 1;
    let label = |s: usize| {
        if s.is_multiple_of(2) {
            blank
        } else {
            target[s / 2]
        }
    };
    let skip: Vec<bool> = (0..s_len)
        .map(|s| s >= 2 && s % 2 == 1 && label(s) != label(s - 2))
        .collect();
    // Emissions y_t(l'_s) / max_s y_t(l'_s), `[T, S]`, and the shifts.
    y.clear();
    y.resize(t_len * s_len, 0.0);
    let mut shift = vec![0.0f64; t_len];
    for t in 0..t_len {
        let row = log_probs.row(t);
        let lp = |s: usize| row[label(s)] as f64;
        let m = (0..s_len).map(lp).fold(f64::NEG_INFINITY, f64::max);
        if !m.is_finite() {
            return Scaled::Underflow;
        }
        shift[t] = m;
        for s in 0..s_len {
            y[t * s_len + s] = (lp(s) - m).exp();
        }
    }
    // Forward: alpha rescaled to sum 1 at each frame.
    alpha.clear();
    alpha.resize(t_len * s_len, 0.0);
    let mut log_p = 0.0f64;
    alpha[0] = y[0];
    if s_len > 1 {
        alpha[1] = y[1];
    }
    for t in 0..t_len {
        if t > 0 {
            let (prev, cur) = alpha.split_at_mut(t * s_len);
            let prev = &prev[(t - 1) * s_len..];
            let yt = &y[t * s_len..(t + 1) * s_len];
            for s in 0..s_len {
                let mut a = prev[s];
                if s >= 1 {
                    a += prev[s - 1];
                }
                if skip[s] {
                    a += prev[s - 2];
                }
                cur[s] = a * yt[s];
            }
        }
        let row = &mut alpha[t * s_len..(t + 1) * s_len];
        let norm: f64 = row.iter().sum();
        if norm < TINY {
            return Scaled::Underflow;
        }
        row.iter_mut().for_each(|v| *v /= norm);
        log_p += norm.ln() + shift[t];
    }
    // p(l|x) = α_{T-1}(S-1) + α_{T-1}(S-2), here relative to the last
    // frame's normaliser.
    let last = &alpha[(t_len - 1) * s_len..];
    let end = last[s_len - 1] + if s_len > 1 { last[s_len - 2] } else { 0.0 };
    if end < TINY {
        // Too unlikely to represent here (or no alignment at all): the
        // log-space recursions decide.
        return Scaled::Underflow;
    }
    log_p += end.ln();
    // Backward: beta (excluding frame t's emission) rescaled likewise.
    beta.clear();
    beta.resize(t_len * s_len, 0.0);
    beta[(t_len - 1) * s_len + s_len - 1] = 1.0;
    if s_len > 1 {
        beta[(t_len - 1) * s_len + s_len - 2] = 1.0;
    }
    for t in (0..t_len - 1).rev() {
        let (cur, next) = beta.split_at_mut((t + 1) * s_len);
        let cur = &mut cur[t * s_len..];
        let next = &next[..s_len];
        let yn = &y[(t + 1) * s_len..(t + 2) * s_len];
        let mut norm = 0.0;
        for s in 0..s_len {
            let mut v = next[s] * yn[s];
            if s + 1 < s_len {
                v += next[s + 1] * yn[s + 1];
            }
            if s + 2 < s_len && skip[s + 2] {
                v += next[s + 2] * yn[s + 2];
            }
            cur[s] = v;
            norm += v;
        }
        if norm < TINY {
            return Scaled::Underflow;
        }
        cur.iter_mut().for_each(|v| *v /= norm);
    }
    // Posteriors per frame.
    let mut grad = Array2::<f32>::zeros((t_len, c));
    let floor = (-100.0f64).exp();
    for t in 0..t_len {
        let a = &alpha[t * s_len..(t + 1) * s_len];
        let b = &beta[t * s_len..(t + 1) * s_len];
        let z: f64 = a.iter().zip(b).map(|(x, y)| x * y).sum();
        if z < TINY {
            return Scaled::Underflow;
        }
        let mut g = grad.row_mut(t);
        for s in 0..s_len {
            let post = a[s] * b[s] / z;
            if post > floor {
                g[label(s)] -= post as f32;
            }
        }
    }
    Scaled::Done(CtcLoss { loss: -log_p, grad })
}

/// The log-space forward-backward (the recursions of the module docs, all
/// sums log-sum-exp in f64): the fallback of [`ctc_loss`] and the
/// reference its tests compare with.
fn ctc_loss_log(log_probs: ArrayView2<f32>, target: &[usize], blank: usize) -> Option<CtcLoss> {
    let (t_len, c) = log_probs.dim();
    assert!(blank < c, "blank index out of range");
    assert!(
        target.iter().all(|&k| k < c && k != blank),
        "CTC target label out of range or blank"
    );
    let repeats = target.windows(2).filter(|w| w[0] == w[1]).count();
    if t_len == 0 || target.len() + repeats > t_len {
        return None;
    }
    let s_len = 2 * target.len() + 1;
    let label = |s: usize| {
        if s.is_multiple_of(2) {
            blank
        } else {
            target[s / 2]
        }
    };
    // Whether the transition s-2 -> s (skipping a blank) is allowed.
    let skip = |s: usize| s >= 2 && s % 2 == 1 && label(s) != label(s - 2);
    let y = |t: usize, s: usize| log_probs[[t, label(s)]] as f64;
    let ninf = f64::NEG_INFINITY;

    let mut alpha = Array2::<f64>::from_elem((t_len, s_len), ninf);
    alpha[[0, 0]] = y(0, 0);
    if s_len > 1 {
        alpha[[0, 1]] = y(0, 1);
    }
    for t in 1..t_len {
        for s in 0..s_len {
            let a = lse3(
                alpha[[t - 1, s]],
                if s >= 1 { alpha[[t - 1, s - 1]] } else { ninf },
                if skip(s) { alpha[[t - 1, s - 2]] } else { ninf },
            );
            alpha[[t, s]] = if a == ninf { ninf } else { a + y(t, s) };
        }
    }
    let log_p = if s_len > 1 {
        lse3(
            alpha[[t_len - 1, s_len - 1]],
            alpha[[t_len - 1, s_len - 2]],
            ninf,
        )
    } else {
        alpha[[t_len - 1, s_len - 1]]
    };
    if !log_p.is_finite() {
        return None;
    }

    let mut beta = Array2::<f64>::from_elem((t_len, s_len), ninf);
    beta[[t_len - 1, s_len - 1]] = 0.0;
    if s_len > 1 {
        beta[[t_len - 1, s_len - 2]] = 0.0;
    }
    for t in (0..t_len - 1).rev() {
        for s in 0..s_len {
            beta[[t, s]] = lse3(
                beta[[t + 1, s]] + y(t + 1, s),
                if s + 1 < s_len {
                    beta[[t + 1, s + 1]] + y(t + 1, s + 1)
                } else {
                    ninf
                },
                if s + 2 < s_len && skip(s + 2) {
                    beta[[t + 1, s + 2]] + y(t + 1, s + 2)
                } else {
                    ninf
                },
            );
        }
    }

    let mut grad = Array2::<f32>::zeros((t_len, c));
    for t in 0..t_len {
        for s in 0..s_len {
            let g = alpha[[t, s]] + beta[[t, s]] - log_p;
            if g > -100.0 {
                grad[[t, label(s)]] -= g.exp() as f32;
            }
        }
    }
    Some(CtcLoss { loss: -log_p, grad })
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;
    use ndarray::{array, Array2};
    use rand::{Rng, SeedableRng};
    use rand_chacha::ChaCha8Rng;

    /// The CTC collapse: merge repeats, then drop blanks (Graves et al.
    /// 2006, section 3, the many-to-one map B).
    fn collapse(path: &[usize], blank: usize) -> Vec<usize> {
        let mut out = Vec::new();
        let mut prev = None;
        for &k in path {
            if Some(k) != prev && k != blank {
                out.push(k);
            }
            prev = Some(k);
        }
        out
    }

    fn random_log_probs(t: usize, c: usize, rng: &mut ChaCha8Rng) -> Array2<f32> {
        let mut lp = Array2::from_shape_fn((t, c), |_| rng.gen_range(-2.0f32..2.0));
        for mut row in lp.outer_iter_mut() {
            let m = row.iter().map(|v| v.exp()).sum::<f32>().ln();
            row.mapv_inplace(|v| v - m);
        }
        lp
    }

    /// Brute force: p(l|x) = Σ over all C^T paths that collapse to l of
    /// Π_t y_t(path_t) (the definition, Graves et al. 2006, eq. 2-3).
    fn brute_force(lp: &Array2<f32>, target: &[usize], blank: usize) -> f64 {
        let (t_len, c) = lp.dim();
        let mut total = 0.0;
        let n_paths = c.pow(t_len as u32);
        for code in 0..n_paths {
            let mut path = Vec::with_capacity(t_len);
            let mut x = code;
            for _ in 0..t_len {
                path.push(x % c);
                x /= c;
            }
            if collapse(&path, blank) == target {
                total += path
                    .iter()
                    .enumerate()
                    .map(|(t, &k)| lp[[t, k]] as f64)
                    .sum::<f64>()
                    .exp();
            }
        }
        total
    }

    #[test]
    fn worked_example_by_hand() {
        // Two frames, classes {a = 0, blank = 1}, target "a".
        // y_0 = (a 0.6, - 0.4), y_1 = (a 0.3, - 0.7).
        // Paths collapsing to "a": "a-" 0.6·0.7 = 0.42, "-a" 0.4·0.3 =
        // 0.12, "aa" 0.6·0.3 = 0.18; p = 0.72, loss = -ln 0.72 = 0.328504.
        // Posteriors: frame 0 is "a" in "a-" and "aa": 0.60/0.72 = 0.833333,
        // blank in "-a": 0.12/0.72 = 0.166667; frame 1 is "a" in "-a" and
        // "aa": 0.30/0.72 = 0.416667, blank in "a-": 0.42/0.72 = 0.583333.
        // The gradient w.r.t. log y is minus the posterior.
        let lp = array![[0.6f32.ln(), 0.4f32.ln()], [0.3f32.ln(), 0.7f32.ln()]];
        let r = ctc_loss(lp.view(), &[0], 1).unwrap();
        assert_relative_eq!(r.loss, 0.328504, epsilon = 1e-6);
        assert_relative_eq!(r.grad[[0, 0]], -0.833333, epsilon = 1e-6);
        assert_relative_eq!(r.grad[[0, 1]], -0.166667, epsilon = 1e-6);
        assert_relative_eq!(r.grad[[1, 0]], -0.416667, epsilon = 1e-6);
        assert_relative_eq!(r.grad[[1, 1]], -0.583333, epsilon = 1e-6);
    }

    #[test]
    fn loss_equals_brute_force_sum_over_alignments() {
        let mut rng = ChaCha8Rng::seed_from_u64(21);
        let cases: &[(usize, usize, &[usize])] = &[
            (1, 2, &[0]),
            (3, 3, &[0, 1]),
            (4, 3, &[0, 0]),
            (5, 3, &[1, 0, 1]),
            (5, 4, &[2]),
            (4, 4, &[]),
            (6, 3, &[0, 0, 1]),
            (7, 4, &[0, 1, 2]),
        ];
        for &(t, c, target) in cases {
            let blank = c - 1;
            let lp = random_log_probs(t, c, &mut rng);
            let want = brute_force(&lp, target, blank);
            let got = ctc_loss(lp.view(), target, blank).unwrap();
            assert_relative_eq!((-got.loss).exp(), want, max_relative = 1e-5);
        }
    }

    #[test]
    fn impossible_targets_give_none() {
        let mut rng = ChaCha8Rng::seed_from_u64(1);
        let lp = random_log_probs(3, 3, &mut rng);
        // "a a" needs a blank between: 3 frames are enough, 2 are not.
        assert!(ctc_loss(lp.view(), &[0, 0], 2).is_some());
        assert!(ctc_loss(lp.slice(ndarray::s![..2, ..]), &[0, 0], 2).is_none());
        assert!(ctc_loss(lp.view(), &[0, 1, 0, 1], 2).is_none());
    }

    #[test]
    fn gradient_is_minus_posterior_and_matches_finite_differences() {
        let mut rng = ChaCha8Rng::seed_from_u64(3);
        let lp = random_log_probs(6, 4, &mut rng);
        let target = [0usize, 2, 2];
        let r = ctc_loss(lp.view(), &target, 3).unwrap();
        // Each frame is aligned to exactly one class: posteriors sum to 1.
        for t in 0..6 {
            assert_relative_eq!(r.grad.row(t).sum(), -1.0, epsilon = 1e-5);
        }
        // Treating the log-probs as free inputs, ∂(-ln p)/∂lp_t(k) is the
        // analytic gradient above; central differences with step 1e-3 in
        // f32 inputs (f64 loss).
        let eps = 1e-3f32;
        for t in 0..6 {
            for k in 0..4 {
                let mut p = lp.clone();
                p[[t, k]] += eps;
                let mut m = lp.clone();
                m[[t, k]] -= eps;
                let lp_ = ctc_loss(p.view(), &target, 3).unwrap().loss;
                let lm_ = ctc_loss(m.view(), &target, 3).unwrap().loss;
                let numeric = (lp_ - lm_) / (2.0 * eps as f64);
                assert_relative_eq!(r.grad[[t, k]] as f64, numeric, epsilon = 2e-3);
            }
        }
    }

    /// The rescaled recursions against the log-space ones (the
    /// definition's log-sum-exp form) on random and lopsided inputs.
    #[test]
    fn rescaled_recursions_match_log_space() {
        let mut rng = ChaCha8Rng::seed_from_u64(31);
        for &(t, c, l) in &[(50usize, 65usize, 10usize), (400, 65, 40), (9, 5, 4)] {
            for sharp in [1.0f32, 30.0] {
                let mut lp = random_log_probs(t, c, &mut rng);
                lp.mapv_inplace(|v| v * sharp);
                let target: Vec<usize> = (0..l).map(|_| rng.gen_range(0..c - 1)).collect();
                let fast = ctc_loss(lp.view(), &target, c - 1);
                let slow = ctc_loss_log(lp.view(), &target, c - 1);
                let (fast, slow) = match (fast, slow) {
                    (Some(f), Some(s)) => (f, s),
                    (None, None) => continue,
                    _ => panic!("one recursion found an alignment, the other not"),
                };
                assert_relative_eq!(fast.loss, slow.loss, max_relative = 1e-9, epsilon = 1e-9);
                for (a, b) in fast.grad.iter().zip(slow.grad.iter()) {
                    assert_relative_eq!(*a, *b, epsilon = 1e-6);
                }
            }
        }
    }

    #[test]
    fn underflow_falls_back_to_log_space() {
        // Target "0 1", two frames: at frame 0 the reachable states (blank,
        // 0) have probability e^-900 while the unreachable label 1 has 1,
        // so the rescaled alpha underflows to zero; the log-space result
        // is -ln(e^-900 · y_1(1)) = 900 + 0.5 exactly here.
        let lp = array![[-900.0f32, 0.0, -900.0], [-900.0, -0.5, -900.0]];
        let r = ctc_loss(lp.view(), &[0, 1], 2).unwrap();
        assert_relative_eq!(r.loss, 900.5, max_relative = 1e-9);
        assert_relative_eq!(r.grad[[0, 0]], -1.0, epsilon = 1e-6);
        assert_relative_eq!(r.grad[[1, 1]], -1.0, epsilon = 1e-6);
    }

    #[test]
    fn long_sequences_stay_finite() {
        let mut rng = ChaCha8Rng::seed_from_u64(8);
        let lp = random_log_probs(2000, 65, &mut rng);
        let target: Vec<usize> = (0..300).map(|i| (i * 7) % 64).collect();
        let r = ctc_loss(lp.view(), &target, 64).unwrap();
        assert!(r.loss.is_finite() && r.loss > 0.0);
        assert!(r.grad.iter().all(|v| v.is_finite()));
    }
}
