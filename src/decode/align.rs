//! CTC alignment of a known cell sequence with the frames: the forward
//! variable gives the sequence's log-likelihood over a frame span, and the
//! forward-backward posteriors tell which frames emitted which cell
//! (Graves et al. 2006, section 4.1, equations 5-16).
//!
//! Both run in linear space on the pruned frames' exact probabilities,
//! rescaled every frame (Rabiner 1989, section V.A).

use super::frames::Pruned;
use crate::Cell;

/// Label of extended position `s` (blanks at even positions): `None` for
/// the blank, `Some(mask)` for cell `(s - 1) / 2`.
#[inline]
fn label(cells: &[Cell], s: usize) -> Option<u8> {
    if s.is_multiple_of(2) {
        None
    } else {
        Some(cells[s / 2].mask())
    }
}

#[inline]
fn y(frames: &Pruned, t: usize, l: Option<u8>) -> f64 {
    match l {
        None => frames.blank[t],
        Some(m) => frames.p(t, m),
    }
}

/// Whether position `s` may be entered from `s - 2` (a cell that differs
/// from the cell before it).
#[inline]
fn may_skip(cells: &[Cell], s: usize) -> bool {
    s >= 3 && s % 2 == 1 && cells[s / 2] != cells[s / 2 - 1]
}

/// `ln P(cells | frames[from..to])` under CTC: the sum over every alignment
/// of the cells with the frames of the span. `-inf` when no alignment exists
/// (too few frames) or every alignment has probability 0.
pub(crate) fn span_log_likelihood(frames: &Pruned, from: usize, to: usize, cells: &[Cell]) -> f64 {
    let n_s = 2 * cells.len() + 1;
    if to <= from {
        return if cells.is_empty() {
            0.0
        } else {
            f64::NEG_INFINITY
        };
    }
    let mut alpha = vec![0f64; n_s];
    let mut next = vec![0f64; n_s];
    alpha[0] = y(frames, from, None);
    if n_s > 1 {
        alpha[1] = y(frames, from, label(cells, 1));
    }
    let mut log_scale = 0f64;
    let mut c: f64 = alpha.iter().sum();
    if c <= 0.0 {
        return f64::NEG_INFINITY;
    }
    alpha.iter_mut().for_each(|a| *a /= c);
    log_scale += c.ln();
    let lab: Vec<u8> = (0..n_s)
        .map(|s| label(cells, s).unwrap_or(BLANK_LABEL))
        .collect();
    let skip: Vec<bool> = (0..n_s).map(|s| may_skip(cells, s)).collect();
    for t in from + 1..to {
        // Only positions that can still reach the end, and that can have
        // been reached by now, matter; the plain loop is simple and cheap
        // for the word-sized sequences it serves.
        let (row, blank) = (frames.row(t), frames.blank[t]);
        for s in 0..n_s {
            let mut a = alpha[s];
            if s >= 1 {
                a += alpha[s - 1];
            }
            if skip[s] {
                a += alpha[s - 2];
            }
            let y = match lab[s] {
                BLANK_LABEL => blank,
                m => row[m as usize & 63],
            };
            next[s] = a * y;
        }
        c = next.iter().sum();
        if c <= 0.0 {
            return f64::NEG_INFINITY;
        }
        let inv = 1.0 / c;
        for (a, n) in alpha.iter_mut().zip(&next) {
            *a = n * inv;
        }
        log_scale += c.ln();
    }
    let end = alpha[n_s - 1] + if n_s >= 2 { alpha[n_s - 2] } else { 0.0 };
    if end <= 0.0 {
        f64::NEG_INFINITY
    } else {
        end.ln() + log_scale
    }
}

/// What the forward-backward pass says about one cell of the sequence.
#[derive(Debug, Clone)]
pub(crate) struct CellPosterior {
    /// Expected number of frames emitting this cell (sum of posteriors).
    pub weight: f64,
    /// Posterior-weighted mean of the frames' pattern distributions given
    /// "not blank": `q[m]` for every mask `m`.
    pub q: [f64; 64],
    /// First and last frame whose posterior of emitting this cell is at
    /// least 0.5, or the single most likely frame when none reaches 0.5.
    pub frames: (usize, usize),
}

/// `lab` entry of a blank position.
const BLANK_LABEL: u8 = u8::MAX;

/// Positions whose scaled forward value falls below this (relative to the
/// frame's total 1) are dropped from the band: alignments that improbable
/// cannot move a posterior or the likelihood by a visible amount (unless
/// later frames single them out as the only way to finish, which needs a
/// labelling the frames barely support; the likelihood would then come out
/// low, never high).
const BAND_FLOOR: f64 = 1e-15;

/// Frames whose posterior of emitting a cell is below this do not enter
/// the cell's pattern distribution `q` (they would shift it by less than
/// this share each; skipping them saves 64 products per frame).
const Q_FLOOR: f64 = 1e-4;

/// Forward-backward over all frames for `cells`: the log-likelihood and
/// every cell's posterior summary. `None` when the cells cannot be aligned
/// with the frames (probability 0).
///
/// The forward pass keeps, per frame, only the band of positions whose
/// scaled value is above `BAND_FLOOR` (a beam over the lattice, as in
/// pruned forward-backward for speech recognition), so time and memory
/// grow with `n_frames * band` rather than `n_frames * (2 * cells + 1)`.
pub(crate) fn posteriors(frames: &Pruned, cells: &[Cell]) -> Option<(f64, Vec<CellPosterior>)> {
    let n_t = frames.n_frames();
    let n_s = 2 * cells.len() + 1;
    if n_t == 0 {
        return if cells.is_empty() {
            Some((0.0, Vec::new()))
        } else {
            None
        };
    }
    // Label of every extended position (BLANK_LABEL for the blanks) and
    // whether it may be entered from two positions back, computed once.
    let lab: Vec<u8> = (0..n_s)
        .map(|s| label(cells, s).unwrap_or(BLANK_LABEL))
        .collect();
    let skip: Vec<bool> = (0..n_s).map(|s| may_skip(cells, s)).collect();
    let emit = |t: usize, s: usize| -> f64 {
        match lab[s] {
            BLANK_LABEL => frames.blank[t],
            m => frames.row(t)[m as usize & 63],
        }
    };
    // Forward, scaled and banded: frame t holds positions lo[t]..=hi[t] at
    // alpha[off[t]..].
    let mut lo: Vec<usize> = Vec::with_capacity(n_t);
    let mut hi: Vec<usize> = Vec::with_capacity(n_t);
    let mut off: Vec<usize> = Vec::with_capacity(n_t);
    let mut alpha: Vec<f64> = Vec::new();
    let mut log_scale = 0f64;
    let mut row: Vec<f64> = Vec::new();
    for t in 0..n_t {
        let (a, b) = if t == 0 {
            (0, (n_s - 1).min(1))
        } else {
            (lo[t - 1], (hi[t - 1] + 2).min(n_s - 1))
        };
        row.clear();
        if t == 0 {
            for s in a..=b {
                row.push(emit(0, s));
            }
        } else {
            let (pl, ph, po) = (lo[t - 1], hi[t - 1], off[t - 1]);
            let prev = &alpha[po..po + (ph - pl + 1)];
            let get = |q: usize| {
                if q >= pl && q <= ph {
                    prev[q - pl]
                } else {
                    0.0
                }
            };
            for (s, &from_two_back) in skip.iter().enumerate().take(b + 1).skip(a) {
                let mut v = get(s);
                if s >= 1 {
                    v += get(s - 1);
                }
                if from_two_back {
                    v += get(s - 2);
                }
                row.push(v * emit(t, s));
            }
        }
        let c: f64 = row.iter().sum();
        if c <= 0.0 {
            return None;
        }
        let inv = 1.0 / c;
        row.iter_mut().for_each(|v| *v *= inv);
        log_scale += c.ln();
        // Trim the band's edges. The end positions are never trimmed on the
        // last frame, where the likelihood is read.
        let (mut i, mut j) = (0, row.len() - 1);
        while i < j && row[i] < BAND_FLOOR {
            i += 1;
        }
        while j > i && row[j] < BAND_FLOOR && !(t == n_t - 1 && a + j + 2 >= n_s) {
            j -= 1;
        }
        lo.push(a + i);
        hi.push(a + j);
        off.push(alpha.len());
        alpha.extend_from_slice(&row[i..=j]);
    }
    let at = |t: usize, s: usize| -> f64 {
        if s >= lo[t] && s <= hi[t] {
            alpha[off[t] + s - lo[t]]
        } else {
            0.0
        }
    };
    let end = at(n_t - 1, n_s - 1) + if n_s >= 2 { at(n_t - 1, n_s - 2) } else { 0.0 };
    if end <= 0.0 {
        return None;
    }
    let ll = end.ln() + log_scale;

    // Backward without the current frame's emission, on the same bands:
    // beta_t(s) = sum over s' in {s, s+1, s+2 if allowed} of
    // y_{t+1}(l'(s')) beta_{t+1}(s').
    let mut out: Vec<CellPosterior> = cells
        .iter()
        .map(|_| CellPosterior {
            weight: 0.0,
            q: [0.0; 64],
            frames: (usize::MAX, 0),
        })
        .collect();
    let mut best_frame = vec![(0usize, -1f64); cells.len()];
    let mut beta: Vec<f64> = Vec::new();
    let mut next_beta: Vec<f64> = Vec::new();
    let mut weighted: Vec<f64> = Vec::new();
    for t in (0..n_t).rev() {
        let (a, b) = (lo[t], hi[t]);
        beta.clear();
        if t == n_t - 1 {
            for s in a..=b {
                beta.push(if s + 2 >= n_s { 1.0 } else { 0.0 });
            }
        } else {
            let (na, nb) = (lo[t + 1], hi[t + 1]);
            // beta_{t+1}(q) * y_{t+1}(l'(q)) over the next frame's band.
            weighted.clear();
            weighted.extend(
                next_beta
                    .iter()
                    .zip(na..=nb)
                    .map(|(&nbeta, q)| nbeta * emit(t + 1, q)),
            );
            let nb_at = |q: usize| -> f64 {
                if q >= na && q <= nb {
                    weighted[q - na]
                } else {
                    0.0
                }
            };
            for s in a..=b {
                let mut v = nb_at(s);
                if s + 1 < n_s {
                    v += nb_at(s + 1);
                }
                if s + 2 < n_s && skip[s + 2] {
                    v += nb_at(s + 2);
                }
                beta.push(v);
            }
            let c: f64 = beta.iter().sum();
            if c > 0.0 {
                let inv = 1.0 / c;
                beta.iter_mut().for_each(|v| *v *= inv);
            }
        }
        let mut z = 0f64;
        for s in a..=b {
            z += alpha[off[t] + s - a] * beta[s - a];
        }
        if z > 0.0 {
            let not_blank = 1.0 - frames.blank[t];
            // Odd positions in the band are cells.
            let first = if a % 2 == 1 { a } else { a + 1 };
            for s in (first..=b).step_by(2) {
                let i = s / 2;
                let g = alpha[off[t] + s - a] * beta[s - a] / z;
                if g > best_frame[i].1 {
                    best_frame[i] = (t, g);
                }
                if g < 1e-6 {
                    continue;
                }
                let post = &mut out[i];
                post.weight += g;
                if g < Q_FLOOR {
                    continue;
                }
                if g >= 0.5 {
                    post.frames.0 = post.frames.0.min(t);
                    post.frames.1 = post.frames.1.max(t);
                }
                if not_blank > 0.0 {
                    let k = g / not_blank;
                    for (q, &p) in post.q.iter_mut().zip(frames.row(t)) {
                        *q += k * p;
                    }
                }
            }
        }
        std::mem::swap(&mut beta, &mut next_beta);
    }
    for (post, &(t, _)) in out.iter_mut().zip(&best_frame) {
        if post.frames.0 == usize::MAX {
            post.frames = (t, t);
        }
        let w: f64 = post.q.iter().sum();
        if w > 0.0 {
            post.q.iter_mut().for_each(|q| *q /= w);
        }
    }
    Some((ll, out))
}

#[cfg(test)]
mod tests {
    use super::super::frames::{prune, BLANK, N_CLASSES};
    use super::*;
    use ndarray::Array2;

    /// Frames with given (class, prob) pairs; the rest of each row is zero.
    fn frames(rows: &[&[(usize, f64)]]) -> Pruned {
        let mut a = Array2::from_elem((rows.len(), N_CLASSES), f32::NEG_INFINITY);
        for (t, row) in rows.iter().enumerate() {
            for &(c, p) in row.iter() {
                a[[t, c]] = (p as f32).ln();
            }
        }
        prune(&a.view(), 0.0, 64, 1.0).unwrap()
    }

    #[test]
    fn likelihood_matches_hand_sum() {
        // Two frames, one cell `a` (mask 1). Alignments of "a" with 2 frames:
        // a a, a _, _ a. (Graves et al. 2006, fig. 3 construction.)
        let f = frames(&[&[(1, 0.6), (BLANK, 0.4)], &[(1, 0.3), (BLANK, 0.7)]]);
        let a = Cell::from_mask(1);
        let want = 0.6 * 0.3 + 0.6 * 0.7 + 0.4 * 0.3;
        let got = span_log_likelihood(&f, 0, 2, &[a]);
        assert!((got - f64::ln(want)).abs() < 1e-6, "{got}");
        let (ll, post) = posteriors(&f, &[a]).unwrap();
        assert!((ll - got).abs() < 1e-9);
        // Posterior that frame 0 emits `a`: (aa + a_) / total.
        let g0 = (0.6 * 0.3 + 0.6 * 0.7) / want;
        let g1 = (0.6 * 0.3 + 0.4 * 0.3) / want;
        assert!((post[0].weight - (g0 + g1)).abs() < 1e-6);
        // g0 = 0.83 >= 0.5, g1 = 0.42 < 0.5: only frame 0 counts.
        assert_eq!(post[0].frames, (0, 0));
        assert!((post[0].q[1] - 1.0).abs() < 1e-9);
    }

    #[test]
    fn banded_pass_reproduces_the_reference_bit_for_bit() {
        use rand::{Rng, SeedableRng};
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(5);
        let mut aligned = 0;
        for case in 0..60 {
            // Factorised rows (six Bernoulli dots, as the network's head)
            // around a random cell sequence, with blank runs between cells.
            let n_cells = rng.gen_range(0..25);
            let truth: Vec<u8> = (0..n_cells).map(|_| rng.gen_range(0..64)).collect();
            let mut a = Array2::<f32>::zeros((0, N_CLASSES));
            let push = |a: &mut Array2<f32>, blank: f64, dots: [f64; 6]| {
                let mut r = vec![0f32; N_CLASSES];
                for (m, v) in r.iter_mut().enumerate().take(64) {
                    let mut p = 1.0 - blank;
                    for (k, &d) in dots.iter().enumerate() {
                        p *= if m & (1 << k) != 0 { d } else { 1.0 - d };
                    }
                    *v = p.max(1e-30).ln() as f32;
                }
                r[BLANK] = blank.ln() as f32;
                a.push_row(ndarray::ArrayView1::from(&r)).unwrap();
            };
            for &m in &truth {
                let mut dots = [0f64; 6];
                for (k, d) in dots.iter_mut().enumerate() {
                    let on = m & (1 << k) != 0;
                    let conf = rng.gen_range(0.55..0.99);
                    *d = if on { conf } else { 1.0 - conf };
                }
                for _ in 0..rng.gen_range(1..3) {
                    push(&mut a, rng.gen_range(0.01..0.5), dots);
                }
                for _ in 0..rng.gen_range(0..12) {
                    push(&mut a, 1.0 - 10f64.powf(rng.gen_range(-6.0..-1.0)), dots);
                }
            }
            if a.nrows() == 0 {
                push(&mut a, 0.9, [0.5; 6]);
            }
            let f = prune(&a.view(), 1.0, 1, 0.0).unwrap();
            // The true cells, and a version with one cell changed.
            let mut other = truth.clone();
            if !other.is_empty() {
                let i = rng.gen_range(0..other.len());
                other[i] = rng.gen_range(0..64);
            }
            for seq in [truth.clone(), other] {
                let cells: Vec<Cell> = seq.iter().map(|&m| Cell::from_mask(m)).collect();
                let n = f.n_frames();
                for j in 0..4 {
                    // The whole recording first (finite for the true cells),
                    // then random spans and runs of cells.
                    let (from, to, part) = if j == 0 {
                        (0, n, &cells[..])
                    } else {
                        let from = rng.gen_range(0..n);
                        let k = rng.gen_range(0..=cells.len());
                        (
                            from,
                            rng.gen_range(from..=n),
                            &cells[rng.gen_range(0..=k)..k],
                        )
                    };
                    let fast = span_log_likelihood(&f, from, to, part);
                    let plain = reference::span_log_likelihood_reference(&f, from, to, part);
                    assert_eq!(fast.to_bits(), plain.to_bits(), "case {case} span");
                }
                let fast = posteriors(&f, &cells);
                let plain = reference::posteriors_reference(&f, &cells);
                match (fast, plain) {
                    (None, None) => {}
                    (Some((l1, p1)), Some((l2, p2))) => {
                        aligned += 1;
                        assert_eq!(l1.to_bits(), l2.to_bits(), "case {case}");
                        for (x, y) in p1.iter().zip(&p2) {
                            assert_eq!(x.weight.to_bits(), y.weight.to_bits(), "case {case}");
                            assert_eq!(x.frames, y.frames, "case {case}");
                            assert!(
                                x.q.iter()
                                    .zip(&y.q)
                                    .all(|(u, v)| u.to_bits() == v.to_bits()),
                                "case {case}"
                            );
                        }
                    }
                    _ => panic!("case {case}: one pass aligned, the other did not"),
                }
            }
        }
        assert!(aligned > 60, "only {aligned} sequences aligned");
    }

    #[test]
    fn repeated_cell_needs_a_blank() {
        let a = Cell::from_mask(1);
        let f = frames(&[&[(1, 1.0)], &[(1, 1.0)]]);
        assert_eq!(span_log_likelihood(&f, 0, 2, &[a, a]), f64::NEG_INFINITY);
        assert!(posteriors(&f, &[a, a]).is_none());
        let f = frames(&[&[(1, 1.0)], &[(BLANK, 1.0)], &[(1, 1.0)]]);
        assert!(span_log_likelihood(&f, 0, 3, &[a, a]).abs() < 1e-9);
    }
}

/// The forward pass over a span and the forward-backward pass as first
/// written (one label lookup per term), kept as the references that
/// [`span_log_likelihood`] and [`posteriors`] must reproduce bit for bit.
#[cfg(test)]
mod reference {
    use super::*;

    pub(crate) fn span_log_likelihood_reference(
        frames: &Pruned,
        from: usize,
        to: usize,
        cells: &[Cell],
    ) -> f64 {
        let n_s = 2 * cells.len() + 1;
        if to <= from {
            return if cells.is_empty() {
                0.0
            } else {
                f64::NEG_INFINITY
            };
        }
        let mut alpha = vec![0f64; n_s];
        let mut next = vec![0f64; n_s];
        alpha[0] = y(frames, from, None);
        if n_s > 1 {
            alpha[1] = y(frames, from, label(cells, 1));
        }
        let mut log_scale = 0f64;
        let mut c: f64 = alpha.iter().sum();
        if c <= 0.0 {
            return f64::NEG_INFINITY;
        }
        alpha.iter_mut().for_each(|a| *a /= c);
        log_scale += c.ln();
        for t in from + 1..to {
            // Only positions that can still reach the end, and that can have
            // been reached by now, matter; the plain loop is simple and cheap
            // for the word-sized sequences it serves.
            for s in 0..n_s {
                let mut a = alpha[s];
                if s >= 1 {
                    a += alpha[s - 1];
                }
                if may_skip(cells, s) {
                    a += alpha[s - 2];
                }
                next[s] = a * y(frames, t, label(cells, s));
            }
            c = next.iter().sum();
            if c <= 0.0 {
                return f64::NEG_INFINITY;
            }
            let inv = 1.0 / c;
            for (a, n) in alpha.iter_mut().zip(&next) {
                *a = n * inv;
            }
            log_scale += c.ln();
        }
        let end = alpha[n_s - 1] + if n_s >= 2 { alpha[n_s - 2] } else { 0.0 };
        if end <= 0.0 {
            f64::NEG_INFINITY
        } else {
            end.ln() + log_scale
        }
    }

    pub(crate) fn posteriors_reference(
        frames: &Pruned,
        cells: &[Cell],
    ) -> Option<(f64, Vec<CellPosterior>)> {
        let n_t = frames.n_frames();
        let n_s = 2 * cells.len() + 1;
        if n_t == 0 {
            return if cells.is_empty() {
                Some((0.0, Vec::new()))
            } else {
                None
            };
        }
        // Forward, scaled and banded: frame t holds positions lo[t]..=hi[t] at
        // alpha[off[t]..].
        let mut lo: Vec<usize> = Vec::with_capacity(n_t);
        let mut hi: Vec<usize> = Vec::with_capacity(n_t);
        let mut off: Vec<usize> = Vec::with_capacity(n_t);
        let mut alpha: Vec<f64> = Vec::new();
        let mut log_scale = 0f64;
        let mut row: Vec<f64> = Vec::new();
        for t in 0..n_t {
            let (a, b) = if t == 0 {
                (0, (n_s - 1).min(1))
            } else {
                (lo[t - 1], (hi[t - 1] + 2).min(n_s - 1))
            };
            row.clear();
            for s in a..=b {
                let v = if t == 0 {
                    y(frames, 0, label(cells, s))
                } else {
                    let (pl, ph, po) = (lo[t - 1], hi[t - 1], off[t - 1]);
                    let get = |q: usize| {
                        if q >= pl && q <= ph {
                            alpha[po + q - pl]
                        } else {
                            0.0
                        }
                    };
                    let mut v = get(s);
                    if s >= 1 {
                        v += get(s - 1);
                    }
                    if may_skip(cells, s) {
                        v += get(s - 2);
                    }
                    v * y(frames, t, label(cells, s))
                };
                row.push(v);
            }
            let c: f64 = row.iter().sum();
            if c <= 0.0 {
                return None;
            }
            let inv = 1.0 / c;
            row.iter_mut().for_each(|v| *v *= inv);
            log_scale += c.ln();
            // Trim the band's edges. The end positions are never trimmed on the
            // last frame, where the likelihood is read.
            let (mut i, mut j) = (0, row.len() - 1);
            while i < j && row[i] < BAND_FLOOR {
                i += 1;
            }
            while j > i && row[j] < BAND_FLOOR && !(t == n_t - 1 && a + j + 2 >= n_s) {
                j -= 1;
            }
            lo.push(a + i);
            hi.push(a + j);
            off.push(alpha.len());
            alpha.extend_from_slice(&row[i..=j]);
        }
        let at = |t: usize, s: usize| -> f64 {
            if s >= lo[t] && s <= hi[t] {
                alpha[off[t] + s - lo[t]]
            } else {
                0.0
            }
        };
        let end = at(n_t - 1, n_s - 1) + if n_s >= 2 { at(n_t - 1, n_s - 2) } else { 0.0 };
        if end <= 0.0 {
            return None;
        }
        let ll = end.ln() + log_scale;

        // Backward without the current frame's emission, on the same bands:
        // beta_t(s) = sum over s' in {s, s+1, s+2 if allowed} of
        // y_{t+1}(l'(s')) beta_{t+1}(s').
        let mut out: Vec<CellPosterior> = cells
            .iter()
            .map(|_| CellPosterior {
                weight: 0.0,
                q: [0.0; 64],
                frames: (usize::MAX, 0),
            })
            .collect();
        let mut best_frame = vec![(0usize, -1f64); cells.len()];
        let mut beta: Vec<f64> = Vec::new();
        let mut next_beta: Vec<f64> = Vec::new();
        for t in (0..n_t).rev() {
            let (a, b) = (lo[t], hi[t]);
            beta.clear();
            if t == n_t - 1 {
                for s in a..=b {
                    beta.push(if s + 2 >= n_s { 1.0 } else { 0.0 });
                }
            } else {
                let (na, nb) = (lo[t + 1], hi[t + 1]);
                let nb_at = |q: usize| -> f64 {
                    if q >= na && q <= nb {
                        next_beta[q - na] * y(frames, t + 1, label(cells, q))
                    } else {
                        0.0
                    }
                };
                for s in a..=b {
                    let mut v = nb_at(s);
                    if s + 1 < n_s {
                        v += nb_at(s + 1);
                    }
                    if s + 2 < n_s && may_skip(cells, s + 2) {
                        v += nb_at(s + 2);
                    }
                    beta.push(v);
                }
                let c: f64 = beta.iter().sum();
                if c > 0.0 {
                    let inv = 1.0 / c;
                    beta.iter_mut().for_each(|v| *v *= inv);
                }
            }
            let mut z = 0f64;
            for s in a..=b {
                z += alpha[off[t] + s - a] * beta[s - a];
            }
            if z > 0.0 {
                let not_blank = 1.0 - frames.blank[t];
                // Odd positions in the band are cells.
                let first = if a % 2 == 1 { a } else { a + 1 };
                for s in (first..=b).step_by(2) {
                    let i = s / 2;
                    let g = alpha[off[t] + s - a] * beta[s - a] / z;
                    if g > best_frame[i].1 {
                        best_frame[i] = (t, g);
                    }
                    if g < 1e-6 {
                        continue;
                    }
                    let post = &mut out[i];
                    post.weight += g;
                    if g < Q_FLOOR {
                        continue;
                    }
                    if g >= 0.5 {
                        post.frames.0 = post.frames.0.min(t);
                        post.frames.1 = post.frames.1.max(t);
                    }
                    if not_blank > 0.0 {
                        let k = g / not_blank;
                        for (q, &p) in post.q.iter_mut().zip(frames.row(t)) {
                            *q += k * p;
                        }
                    }
                }
            }
            std::mem::swap(&mut beta, &mut next_beta);
        }
        for (post, &(t, _)) in out.iter_mut().zip(&best_frame) {
            if post.frames.0 == usize::MAX {
                post.frames = (t, t);
            }
            let w: f64 = post.q.iter().sum();
            if w > 0.0 {
                post.q.iter_mut().for_each(|q| *q /= w);
            }
        }
        Some((ll, out))
    }
}
