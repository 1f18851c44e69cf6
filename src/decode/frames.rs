//! The decoder's input: checking a `[n_frames, 65]` log-probability array,
//! and pruning each frame to the few cell patterns worth trying.
//!
//! Column `m` (0..=63) is the six-dot pattern with bit mask `m` (dot `k` is
//! bit `k - 1`, as [`Cell::from_mask`](crate::Cell::from_mask)); column 64 is
//! the CTC blank (Graves et al. 2006).

use crate::{Error, Location, Result};
use ndarray::{ArrayView1, ArrayView2};

/// Number of columns of the decoder's input: 64 cell patterns + blank.
pub const N_CLASSES: usize = 65;
/// Column of the CTC blank.
pub const BLANK: usize = 64;

/// How far a row's probabilities may sum from 1 before the input is refused
/// (the network's head is normalised; logits instead of log-probabilities
/// sum far from 1).
const SUM_TOLERANCE: f64 = 0.02;
/// Largest log-probability accepted (a little above 0 for rounding).
const MAX_LOG_PROB: f32 = 1e-4;

/// Check that `log_probs` (`[n_frames, 65]`) holds natural-log
/// probabilities: 65 columns, no NaN or +inf, each row summing to 1 in
/// probability. `-inf` (probability 0) is allowed.
pub(crate) fn check(log_probs: &ArrayView2<f32>) -> Result<()> {
    check_width(log_probs)?;
    for (t, row) in log_probs.outer_iter().enumerate() {
        let mut sum = 0f64;
        for (c, &v) in row.iter().enumerate() {
            check_value(t, c, v)?;
            sum += (v as f64).exp();
        }
        check_sum(t, sum)?;
    }
    Ok(())
}

fn check_width(log_probs: &ArrayView2<f32>) -> Result<()> {
    width(
        log_probs.ncols(),
        "columns of the decoder input",
        "pass the network's [n_frames, 65] log-probability output",
    )
}

/// `got` must be [`N_CLASSES`].
fn width(got: usize, what: &str, hint: &str) -> Result<()> {
    if got != N_CLASSES {
        return Err(Error::Mismatch {
            what: what.into(),
            expected: format!("{N_CLASSES} (64 cell patterns, then the CTC blank)"),
            got: got.to_string(),
            hint: hint.into(),
        });
    }
    Ok(())
}

#[inline]
fn check_value(t: usize, c: usize, v: f32) -> Result<()> {
    if v.is_nan() || v > MAX_LOG_PROB {
        return Err(Error::input(
            Location::file("<decoder input>")
                .line(t + 1)
                .field(format!("column {c}")),
            format!(
                "{v} is not a natural-log probability (must be <= 0 or -inf): \
                 pass log-softmax output, not logits"
            ),
        ));
    }
    Ok(())
}

fn check_sum(t: usize, sum: f64) -> Result<()> {
    if (sum - 1.0).abs() > SUM_TOLERANCE {
        return Err(Error::input(
            Location::file("<decoder input>").line(t + 1),
            format!(
                "the frame's 65 probabilities sum to {sum:.4}, not 1: \
                 pass normalised log-probabilities (log-softmax), not logits"
            ),
        ));
    }
    Ok(())
}

/// Per-frame candidate lists, flattened: frame `t` tries the patterns
/// `class[start[t]..start[t+1]]` with probabilities `prob[..]` (sorted by
/// decreasing probability), and has blank probability `blank[t]`.
#[derive(Debug, Clone)]
pub(crate) struct Pruned {
    pub blank: Vec<f64>,
    pub start: Vec<usize>,
    pub class: Vec<u8>,
    pub prob: Vec<f64>,
    /// Probability of every pattern, `[n_frames * 64]`, used for the
    /// repeat-of-last-cell term (which must be exact even for pruned patterns).
    pub all: Vec<f64>,
}

impl Pruned {
    pub fn n_frames(&self) -> usize {
        self.blank.len()
    }
    pub fn candidates(&self, t: usize) -> (&[u8], &[f64]) {
        let (a, b) = (self.start[t], self.start[t + 1]);
        (&self.class[a..b], &self.prob[a..b])
    }
    pub fn p(&self, t: usize, mask: u8) -> f64 {
        self.all[t * 64 + mask as usize]
    }
    /// Probability of every pattern at frame `t`, `[64]`.
    pub fn row(&self, t: usize) -> &[f64] {
        &self.all[t * 64..t * 64 + 64]
    }
}

/// Check (as [`check`]) and prune each frame of a `[n_frames, 65]` array in
/// one pass: a frame whose blank
/// probability exceeds `blank_skip` tries no pattern at all; otherwise the
/// patterns with probability at least `min_prob` (and always the most
/// probable one), at most `max_classes` of them, most probable first.
pub(crate) fn prune(
    log_probs: &ArrayView2<f32>,
    min_prob: f64,
    max_classes: usize,
    blank_skip: f64,
) -> Result<Pruned> {
    check_width(log_probs)?;
    let n = log_probs.nrows();
    let mut out = Pruned {
        blank: Vec::with_capacity(n),
        start: Vec::with_capacity(n + 1),
        class: Vec::new(),
        prob: Vec::new(),
        all: Vec::with_capacity(n * 64),
    };
    out.start.push(0);
    for (t, row) in log_probs.outer_iter().enumerate() {
        push_frame(&mut out, t, &row, min_prob, max_classes, blank_skip)?;
    }
    Ok(out)
}

/// Check and prune one `[65]` row (as [`prune`]) and append it to `out`,
/// without allocating beyond `out`'s own growth. `t` numbers the frame in
/// error messages (line `t + 1`). On an error `out` is left unchanged.
pub(crate) fn push_frame(
    out: &mut Pruned,
    t: usize,
    row: &ArrayView1<f32>,
    min_prob: f64,
    max_classes: usize,
    blank_skip: f64,
) -> Result<()> {
    width(
        row.len(),
        "values in a frame of the decoder input",
        "pass the network's 65 log-probabilities per frame",
    )?;
    let mut x = [0f32; N_CLASSES];
    for (d, &v) in x.iter_mut().zip(row.iter()) {
        *d = v;
    }
    // Validate first (cheap compares), in the order errors are reported.
    if x.iter().any(|v| v.is_nan() || *v > MAX_LOG_PROB) {
        check_value(t, BLANK, x[BLANK])?;
        for (m, &v) in x.iter().enumerate().take(64) {
            check_value(t, m, v)?;
        }
    }
    let mut e = [0f64; N_CLASSES];
    exp_row(&x, &mut e);
    let blank = e[BLANK];
    let skip = blank > blank_skip;
    if skip {
        // No candidates: only the probabilities (most frames of a trained
        // network).
        check_sum(t, e.iter().sum())?;
        out.blank.push(blank);
        out.all.extend_from_slice(&e[..64]);
        out.start.push(out.class.len());
        return Ok(());
    }
    let (mut top, mut top_p) = (0u8, -1f64);
    let mut sum = blank;
    let mut cands = [(0u8, 0f64); 64];
    let mut n_cands = 0;
    for (m, &p) in e[..64].iter().enumerate() {
        sum += p;
        if p >= min_prob {
            cands[n_cands] = (m as u8, p);
            n_cands += 1;
        }
        if p > top_p {
            (top, top_p) = (m as u8, p);
        }
    }
    check_sum(t, sum)?;
    if n_cands == 0 && top_p > 0.0 {
        cands[0] = (top, top_p);
        n_cands = 1;
    }
    let cands = &mut cands[..n_cands];
    cands.sort_unstable_by(|a, b| b.1.total_cmp(&a.1).then(a.0.cmp(&b.0)));
    out.blank.push(blank);
    out.all.extend_from_slice(&e[..64]);
    for &(m, p) in cands.iter().take(max_classes) {
        out.class.push(m);
        out.prob.push(p);
    }
    out.start.push(out.class.len());
    Ok(())
}

/// `out[i] = e^x[i]` for one frame's 65 log-probabilities, in `f64`, to
/// within a few units in the last place of `f64::exp` (which the tests of
/// the search compare against at 1e-9).
///
/// The standard reduction `e^x = 2^n e^r` with `n = round(x / ln 2)` and
/// `|r| <= ln 2 / 2` (ln 2 split in two parts as in fdlibm's `exp`), and
/// `e^r` by its Taylor series to degree 13 (truncation error below 1e-17).
/// Written without branches so that the compiler vectorises it (four lanes
/// with AVX2, detected at run time; two with the baseline SSE2); inputs
/// below -700 (and `-inf`) take `f64::exp`. Decoding spends a fifth of its
/// time in `exp` otherwise.
fn exp_row(x: &[f32; N_CLASSES], out: &mut [f64; N_CLASSES]) {
    #[cfg(target_arch = "x86_64")]
    {
        if std::arch::is_x86_feature_detected!("avx2") {
            // SAFETY: the CPU has AVX2 (checked just above).
            unsafe { exp_row_avx2(x, out) };
            return;
        }
    }
    exp_row_generic(x, out);
}

#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2")]
unsafe fn exp_row_avx2(x: &[f32; N_CLASSES], out: &mut [f64; N_CLASSES]) {
    exp_row_generic(x, out);
}

/// The same sums on every CPU (no fused multiply-adds), so that a decoding
/// does not depend on the machine to the last bit.
#[inline(always)]
fn exp_row_generic(x: &[f32; N_CLASSES], out: &mut [f64; N_CLASSES]) {
    let madd = |a: f64, b: f64, c: f64| a * b + c;
    const LOG2E: f64 = std::f64::consts::LOG2_E;
    // ln 2 = LN2_HI + LN2_LO, LN2_HI with its low 32 bits zero (fdlibm's
    // e_exp.c constants, from memory).
    const LN2_HI: f64 = 6.931_471_803_691_238e-1;
    const LN2_LO: f64 = 1.908_214_929_270_587_7e-10;
    // 1.5 * 2^52: adding it rounds to an integer held in the low mantissa bits.
    const SHIFT: f64 = 6_755_399_441_055_744.0;
    const LOWEST: f64 = -700.0;
    // 1/k! for k = 13 down to 2.
    const C: [f64; 12] = [
        1.0 / 6_227_020_800.0,
        1.0 / 479_001_600.0,
        1.0 / 39_916_800.0,
        1.0 / 3_628_800.0,
        1.0 / 362_880.0,
        1.0 / 40_320.0,
        1.0 / 5_040.0,
        1.0 / 720.0,
        1.0 / 120.0,
        1.0 / 24.0,
        1.0 / 6.0,
        0.5,
    ];
    for (o, &xi) in out.iter_mut().zip(x.iter()) {
        let v = xi as f64;
        let v = if v < LOWEST { LOWEST } else { v };
        let t = madd(v, LOG2E, SHIFT);
        let n = t - SHIFT;
        let r = madd(-n, LN2_LO, madd(-n, LN2_HI, v));
        let mut p = C[0];
        for &c in &C[1..] {
            p = madd(p, r, c);
        }
        p = madd(p, r, 1.0);
        p = madd(p, r, 1.0);
        // The low bits of `t` hold 2^51 + n; shifted up by 52 only n + 1023
        // (the biased exponent of 2^n, n >= -1010 here) is left.
        let scale = f64::from_bits(t.to_bits().wrapping_add(1023) << 52);
        *o = p * scale;
    }
    for (o, &xi) in out.iter_mut().zip(x.iter()) {
        if (xi as f64) < LOWEST {
            *o = (xi as f64).exp();
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use ndarray::Array2;

    fn uniform(t: usize) -> Array2<f32> {
        Array2::from_elem((t, N_CLASSES), -(N_CLASSES as f32).ln())
    }

    #[test]
    fn accepts_normalised_rows_and_neg_inf() {
        let mut a = Array2::from_elem((2, N_CLASSES), f32::NEG_INFINITY);
        a[[0, BLANK]] = 0.0;
        a[[1, 3]] = 0.0;
        assert!(check(&a.view()).is_ok());
        assert!(check(&uniform(3).view()).is_ok());
    }

    #[test]
    fn refuses_wrong_width_logits_and_nan() {
        let a = Array2::<f32>::zeros((2, 64));
        assert!(matches!(check(&a.view()), Err(Error::Mismatch { .. })));
        let logits = Array2::<f32>::zeros((2, N_CLASSES)); // sums to 65
        let e = check(&logits.view()).unwrap_err().to_string();
        assert!(e.contains("line 1") && e.contains("logits"), "{e}");
        let mut a = uniform(3);
        a[[2, 5]] = f32::NAN;
        let e = check(&a.view()).unwrap_err().to_string();
        assert!(e.contains("line 3") && e.contains("column 5"), "{e}");
    }

    #[test]
    fn exp_row_matches_f64_exp() {
        // Against the standard library's `f64::exp`, over the whole range a
        // log-probability takes, the edges of the reduction and -inf.
        let mut xs: Vec<f32> = vec![0.0, -0.0, 1e-4, -1e-30, f32::NEG_INFINITY, -700.0, -701.0];
        xs.extend([-745.0, -746.0, -1e30, -0.346_573_6, -0.346_573_6 * 3.0]);
        let mut v = -800.0f32;
        while v < 0.0 {
            xs.push(v);
            v += 0.0137;
        }
        for chunk in xs.chunks(N_CLASSES) {
            let mut x = [0f32; N_CLASSES];
            x[..chunk.len()].copy_from_slice(chunk);
            let mut out = [0f64; N_CLASSES];
            exp_row(&x, &mut out);
            for (&xi, &got) in x.iter().zip(&out) {
                let want = (xi as f64).exp();
                let err = if want == 0.0 {
                    got
                } else {
                    (got - want).abs() / want
                };
                assert!(err <= 4.0 * f64::EPSILON, "exp({xi}): {got} vs {want}");
            }
        }
    }

    #[test]
    fn prune_keeps_top_patterns_and_skips_blank_frames() {
        let mut a = Array2::from_elem((2, N_CLASSES), (1e-6f32).ln());
        a[[0, BLANK]] = (0.5f32).ln();
        a[[0, 7]] = (0.3f32).ln();
        a[[0, 9]] = (0.2f32).ln();
        a[[1, BLANK]] = 0.0;
        let p = prune(&a.view(), 1e-3, 8, 0.999).unwrap();
        assert_eq!(p.candidates(0).0, &[7, 9]);
        assert!(p.candidates(1).0.is_empty());
        let p = prune(&a.view(), 1e-9, 3, 0.999).unwrap();
        assert_eq!(p.candidates(0).0.len(), 3);
    }
}
