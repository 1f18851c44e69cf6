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
    if log_probs.ncols() != N_CLASSES {
        return Err(Error::Mismatch {
            what: "columns of the decoder input".into(),
            expected: format!("{N_CLASSES} (64 cell patterns, then the CTC blank)"),
            got: log_probs.ncols().to_string(),
            hint: "pass the network's [n_frames, 65] log-probability output".into(),
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
    if row.len() != N_CLASSES {
        return Err(Error::Mismatch {
            what: "values in a frame of the decoder input".into(),
            expected: format!("{N_CLASSES} (64 cell patterns, then the CTC blank)"),
            got: row.len().to_string(),
            hint: "pass the network's 65 log-probabilities per frame".into(),
        });
    }
    check_value(t, BLANK, row[BLANK])?;
    let blank = (row[BLANK] as f64).exp();
    let skip = blank > blank_skip;
    let (mut top, mut top_p) = (0u8, -1f64);
    let mut sum = blank;
    let mut probs = [0f64; 64];
    let mut cands = [(0u8, 0f64); 64];
    let mut n_cands = 0;
    for (m, p_out) in probs.iter_mut().enumerate() {
        check_value(t, m, row[m])?;
        let p = (row[m] as f64).exp();
        sum += p;
        *p_out = p;
        if !skip {
            if p >= min_prob {
                cands[n_cands] = (m as u8, p);
                n_cands += 1;
            }
            if p > top_p {
                (top, top_p) = (m as u8, p);
            }
        }
    }
    check_sum(t, sum)?;
    if !skip && n_cands == 0 && top_p > 0.0 {
        cands[0] = (top, top_p);
        n_cands = 1;
    }
    let cands = &mut cands[..n_cands];
    cands.sort_unstable_by(|a, b| b.1.total_cmp(&a.1).then(a.0.cmp(&b.0)));
    out.blank.push(blank);
    out.all.extend_from_slice(&probs);
    for &(m, p) in cands.iter().take(max_classes) {
        out.class.push(m);
        out.prob.push(p);
    }
    out.start.push(out.class.len());
    Ok(())
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
