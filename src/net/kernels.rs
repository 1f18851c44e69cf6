//! Numeric kernels shared by the network layers: a fast vectorisable
//! exponential (and the sigmoid and tanh built on it), a matrix-vector
//! product for batch-1 recurrences and a few-row product for batched
//! recurrences, and a blocked matrix product for the large products of
//! training (all AVX-512 or AVX2 + FMA behind runtime detection, with a
//! portable fallback: `general_mat_mul` for the matrix products).
//!
//! The exponential is the Cody-Waite range reduction with the degree-6
//! polynomial of the Cephes `expf` (S. L. Moshier, Cephes Mathematical
//! Library, from memory); it is written without branches so the compiler
//! vectorises the loops that call it. Its relative error is about 2e-7 over
//! the clamped range [-87.3, 88.3].

use ndarray::linalg::general_mat_mul;
use ndarray::{ArrayView2, ArrayViewMut2, ShapeBuilder};

const LOG2E: f32 = std::f32::consts::LOG2_E;
// ln 2 split in a part exact in f32 and a small remainder (Cephes).
const LN2_HI: f32 = 0.693_359_4;
const LN2_LO: f32 = -2.121_944_4e-4;
// 1.5 * 2^23: adding and subtracting it rounds to the nearest integer
// without a libm call, so the loop stays vectorisable on plain SSE2.
const ROUND_MAGIC: f32 = 12_582_912.0;

/// e^x for f32, branch-free, relative error about 2e-7. Inputs are clamped
/// to [-87.3, 88.3], so the result is always finite and normal.
#[inline(always)]
pub(crate) fn exp_fast(x: f32) -> f32 {
    let x = x.clamp(-87.3, 88.3);
    let shifted = x * LOG2E + ROUND_MAGIC;
    let n = shifted - ROUND_MAGIC;
    // The integer n sits in the low mantissa bits of `shifted`: read it
    // from the bit pattern (an integer subtraction, which vectorises,
    // where a saturating float-to-int cast would not).
    let n_int = (shifted.to_bits() as i32).wrapping_sub(ROUND_MAGIC.to_bits() as i32);
    let f = x - n * LN2_HI - n * LN2_LO;
    let mut p = 1.987_569_2e-4_f32;
    p = p * f + 1.398_199_9e-3;
    p = p * f + 8.333_452e-3;
    p = p * f + 4.166_579_6e-2;
    p = p * f + 0.166_666_65;
    p = p * f + 0.5;
    let e = p * f * f + f + 1.0;
    let scale = f32::from_bits(((n_int + 127) as u32) << 23);
    e * scale
}

/// The logistic sigmoid 1 / (1 + e^-x).
#[inline(always)]
pub(crate) fn sigmoid(x: f32) -> f32 {
    1.0 / (1.0 + exp_fast(-x))
}

/// tanh(x) = 2 sigmoid(2x) - 1 (absolute error about 2e-7).
#[inline(always)]
pub(crate) fn tanh(x: f32) -> f32 {
    2.0 / (1.0 + exp_fast(-2.0 * x)) - 1.0
}

/// Whether this processor has AVX2 and FMA (checked once, then cached by
/// the standard library).
#[inline]
pub(crate) fn has_avx2_fma() -> bool {
    #[cfg(target_arch = "x86_64")]
    {
        std::arch::is_x86_feature_detected!("avx2") && std::arch::is_x86_feature_detected!("fma")
    }
    #[cfg(not(target_arch = "x86_64"))]
    {
        false
    }
}

/// Whether this processor has AVX-512F (checked once, then cached by the
/// standard library). Where it runs at full width (e.g. AMD Zen 5) it
/// doubles the work per instruction of the AVX2 kernels.
#[inline]
pub(crate) fn has_avx512() -> bool {
    #[cfg(target_arch = "x86_64")]
    {
        std::arch::is_x86_feature_detected!("avx512f")
    }
    #[cfg(not(target_arch = "x86_64"))]
    {
        false
    }
}

/// `y = bias + x W`: a matrix-vector product with `W` row-major
/// `[k, n]` (`w.len() == k * n`), `x` of length `k`, `bias` and `y` of
/// length `n`. The inner loop runs along a row of `W`, contiguous, so each
/// weight is loaded once and used in one fused multiply-add.
pub(crate) fn gemv(x: &[f32], w: &[f32], bias: &[f32], y: &mut [f32]) {
    let n = y.len();
    assert_eq!(bias.len(), n, "gemv: bias length");
    assert_eq!(w.len(), x.len() * n, "gemv: weight shape");
    #[cfg(target_arch = "x86_64")]
    {
        if has_avx512() {
            // SAFETY: the feature was detected just above and the slice
            // lengths were checked.
            unsafe { gemv_avx512(x, w, bias, y) };
            return;
        }
        if has_avx2_fma() {
            // SAFETY: as above.
            unsafe { gemv_avx2(x, w, bias, y) };
            return;
        }
    }
    gemv_portable(x, w, bias, y);
}

/// The portable matrix-vector product (same contract as [`gemv`]): blocks
/// of 32 outputs held in a local array the compiler keeps in registers.
pub(crate) fn gemv_portable(x: &[f32], w: &[f32], bias: &[f32], y: &mut [f32]) {
    let n = y.len();
    const BLOCK: usize = 32;
    let mut j = 0;
    while j < n {
        let width = BLOCK.min(n - j);
        let mut acc = [0.0f32; BLOCK];
        acc[..width].copy_from_slice(&bias[j..j + width]);
        for (kk, &xk) in x.iter().enumerate() {
            let row = &w[kk * n + j..kk * n + j + width];
            for (a, &wv) in acc[..width].iter_mut().zip(row) {
                *a += xk * wv;
            }
        }
        y[j..j + width].copy_from_slice(&acc[..width]);
        j += width;
    }
}

#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx512f")]
unsafe fn gemv_avx512(x: &[f32], w: &[f32], bias: &[f32], y: &mut [f32]) {
    use std::arch::x86_64::*;
    let n = y.len();
    let k = x.len();
    let wp = w.as_ptr();
    let mut j = 0;
    // 128 outputs at a time in eight 16-wide accumulators.
    while j + 128 <= n {
        let bp = bias.as_ptr().add(j);
        let mut acc = [_mm512_setzero_ps(); 8];
        for (i, a) in acc.iter_mut().enumerate() {
            *a = _mm512_loadu_ps(bp.add(16 * i));
        }
        for kk in 0..k {
            let xb = _mm512_set1_ps(*x.get_unchecked(kk));
            let r = wp.add(kk * n + j);
            for (i, a) in acc.iter_mut().enumerate() {
                *a = _mm512_fmadd_ps(xb, _mm512_loadu_ps(r.add(16 * i)), *a);
            }
        }
        let yp = y.as_mut_ptr().add(j);
        for (i, a) in acc.iter().enumerate() {
            _mm512_storeu_ps(yp.add(16 * i), *a);
        }
        j += 128;
    }
    while j + 16 <= n {
        let mut a = _mm512_loadu_ps(bias.as_ptr().add(j));
        for kk in 0..k {
            let xb = _mm512_set1_ps(*x.get_unchecked(kk));
            a = _mm512_fmadd_ps(xb, _mm512_loadu_ps(wp.add(kk * n + j)), a);
        }
        _mm512_storeu_ps(y.as_mut_ptr().add(j), a);
        j += 16;
    }
    while j < n {
        let mut a = *bias.get_unchecked(j);
        for kk in 0..k {
            a += *x.get_unchecked(kk) * *w.get_unchecked(kk * n + j);
        }
        *y.get_unchecked_mut(j) = a;
        j += 1;
    }
}

#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2,fma")]
unsafe fn gemv_avx2(x: &[f32], w: &[f32], bias: &[f32], y: &mut [f32]) {
    use std::arch::x86_64::*;
    let n = y.len();
    let k = x.len();
    let wp = w.as_ptr();
    let mut j = 0;
    // 64 outputs at a time: eight independent accumulators cover the FMA
    // latency, and every weight is loaded exactly once.
    while j + 64 <= n {
        let bp = bias.as_ptr().add(j);
        let mut a0 = _mm256_loadu_ps(bp);
        let mut a1 = _mm256_loadu_ps(bp.add(8));
        let mut a2 = _mm256_loadu_ps(bp.add(16));
        let mut a3 = _mm256_loadu_ps(bp.add(24));
        let mut a4 = _mm256_loadu_ps(bp.add(32));
        let mut a5 = _mm256_loadu_ps(bp.add(40));
        let mut a6 = _mm256_loadu_ps(bp.add(48));
        let mut a7 = _mm256_loadu_ps(bp.add(56));
        for kk in 0..k {
            let xb = _mm256_set1_ps(*x.get_unchecked(kk));
            let r = wp.add(kk * n + j);
            a0 = _mm256_fmadd_ps(xb, _mm256_loadu_ps(r), a0);
            a1 = _mm256_fmadd_ps(xb, _mm256_loadu_ps(r.add(8)), a1);
            a2 = _mm256_fmadd_ps(xb, _mm256_loadu_ps(r.add(16)), a2);
            a3 = _mm256_fmadd_ps(xb, _mm256_loadu_ps(r.add(24)), a3);
            a4 = _mm256_fmadd_ps(xb, _mm256_loadu_ps(r.add(32)), a4);
            a5 = _mm256_fmadd_ps(xb, _mm256_loadu_ps(r.add(40)), a5);
            a6 = _mm256_fmadd_ps(xb, _mm256_loadu_ps(r.add(48)), a6);
            a7 = _mm256_fmadd_ps(xb, _mm256_loadu_ps(r.add(56)), a7);
        }
        let yp = y.as_mut_ptr().add(j);
        _mm256_storeu_ps(yp, a0);
        _mm256_storeu_ps(yp.add(8), a1);
        _mm256_storeu_ps(yp.add(16), a2);
        _mm256_storeu_ps(yp.add(24), a3);
        _mm256_storeu_ps(yp.add(32), a4);
        _mm256_storeu_ps(yp.add(40), a5);
        _mm256_storeu_ps(yp.add(48), a6);
        _mm256_storeu_ps(yp.add(56), a7);
        j += 64;
    }
    while j + 8 <= n {
        let mut a = _mm256_loadu_ps(bias.as_ptr().add(j));
        for kk in 0..k {
            let xb = _mm256_set1_ps(*x.get_unchecked(kk));
            a = _mm256_fmadd_ps(xb, _mm256_loadu_ps(wp.add(kk * n + j)), a);
        }
        _mm256_storeu_ps(y.as_mut_ptr().add(j), a);
        j += 8;
    }
    while j < n {
        let mut a = *bias.get_unchecked(j);
        for kk in 0..k {
            a += *x.get_unchecked(kk) * *w.get_unchecked(kk * n + j);
        }
        *y.get_unchecked_mut(j) = a;
        j += 1;
    }
}

/// A weight matrix `[k, n]` prepared for [`gemv_packed`]: the row-major
/// original (for the AVX2 and portable paths) and a copy cut into blocks
/// of 128 columns (the last one narrower), each block `k` rows of its
/// width contiguously, so the AVX-512 kernel reads the matrix as one
/// sequential stream instead of 512-byte pieces a row stride apart.
#[derive(Debug, Clone)]
pub(crate) struct GemvPacked {
    k: usize,
    n: usize,
    rows: Vec<f32>,
    blocks: Vec<f32>,
}

impl GemvPacked {
    /// Packs a `[k, n]` matrix.
    pub(crate) fn new(w: ArrayView2<f32>) -> GemvPacked {
        let (k, n) = w.dim();
        let rows: Vec<f32> = w.iter().copied().collect();
        let mut blocks = Vec::with_capacity(k * n);
        let mut j = 0;
        while j < n {
            let width = 128.min(n - j);
            for p in 0..k {
                blocks.extend_from_slice(&rows[p * n + j..p * n + j + width]);
            }
            j += width;
        }
        GemvPacked { k, n, rows, blocks }
    }
}

/// `y = bias + x W` with `W` from [`GemvPacked::new`] (same contract and,
/// on every path, the same summation order as [`gemv`]).
pub(crate) fn gemv_packed(x: &[f32], w: &GemvPacked, bias: &[f32], y: &mut [f32]) {
    assert!(
        x.len() == w.k && y.len() == w.n && bias.len() == w.n,
        "gemv_packed: shapes"
    );
    #[cfg(target_arch = "x86_64")]
    {
        if has_avx512() {
            // SAFETY: feature detected; lengths checked above and blocks
            // built by `GemvPacked::new` for exactly these shapes.
            unsafe { gemv_packed_avx512(x, w, bias, y) };
            return;
        }
    }
    gemv(x, &w.rows, bias, y);
}

#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx512f")]
unsafe fn gemv_packed_avx512(x: &[f32], w: &GemvPacked, bias: &[f32], y: &mut [f32]) {
    use std::arch::x86_64::*;
    let (k, n) = (w.k, w.n);
    let mut j = 0;
    while j < n {
        let width = 128.min(n - j);
        let bp = w.blocks.as_ptr().add(j * k);
        if width == 128 {
            let mut acc = [_mm512_setzero_ps(); 8];
            for (i, a) in acc.iter_mut().enumerate() {
                *a = _mm512_loadu_ps(bias.as_ptr().add(j + 16 * i));
            }
            for kk in 0..k {
                let xb = _mm512_set1_ps(*x.get_unchecked(kk));
                let r = bp.add(kk * 128);
                for (i, a) in acc.iter_mut().enumerate() {
                    *a = _mm512_fmadd_ps(xb, _mm512_loadu_ps(r.add(16 * i)), *a);
                }
            }
            for (i, a) in acc.iter().enumerate() {
                _mm512_storeu_ps(y.as_mut_ptr().add(j + 16 * i), *a);
            }
        } else {
            // The narrower last block: 16 columns at a time, then scalars.
            let mut c = 0;
            while c + 16 <= width {
                let mut a = _mm512_loadu_ps(bias.as_ptr().add(j + c));
                for kk in 0..k {
                    let xb = _mm512_set1_ps(*x.get_unchecked(kk));
                    a = _mm512_fmadd_ps(xb, _mm512_loadu_ps(bp.add(kk * width + c)), a);
                }
                _mm512_storeu_ps(y.as_mut_ptr().add(j + c), a);
                c += 16;
            }
            while c < width {
                let mut a = *bias.get_unchecked(j + c);
                for kk in 0..k {
                    a += *x.get_unchecked(kk) * *bp.add(kk * width + c);
                }
                *y.get_unchecked_mut(j + c) = a;
                c += 1;
            }
        }
        j += width;
    }
}

/// A weight matrix `[k, n]` prepared for [`gemm_rows`]: the row-major
/// original and a copy cut into panels of 16 columns (the last one 8
/// wide when `n` is not a multiple of 16), each panel stored `k` rows of
/// its width contiguously, so the kernel streams it sequentially.
pub(crate) struct Packed {
    k: usize,
    n: usize,
    rows: Vec<f32>,
    panels: Vec<f32>,
}

impl Packed {
    /// Packs a row-major `[k, n]` matrix.
    pub(crate) fn new(b: ArrayView2<f32>) -> Packed {
        let (k, n) = b.dim();
        let rows: Vec<f32> = b.iter().copied().collect();
        let mut panels = Vec::with_capacity(k * n);
        let mut j = 0;
        while j < n {
            let w = if n - j >= 16 { 16 } else { n - j };
            for p in 0..k {
                panels.extend_from_slice(&rows[p * n + j..p * n + j + w]);
            }
            j += w;
        }
        Packed { k, n, rows, panels }
    }
}

/// `c += a b` for a few rows: `a` `[m, k]` (row stride `lda`), `b` packed
/// `[k, n]`, `c` `[m, n]` (row stride `ldc`). Made for the per-time-step
/// recurrent products of a batch (m = running sequences, up to a few
/// dozen), where a general GEMM would re-pack the weights at every call:
/// here they are packed once per pass. Blocks of 6 rows x 16 columns
/// accumulate in registers (12 accumulators, 2 weight vectors and a
/// broadcast: 15 of the 16 vector registers, nothing spilled) (AVX2 + FMA); other processors and `n` not a
/// multiple of 8 go to `general_mat_mul`.
#[allow(clippy::too_many_arguments)]
pub(crate) fn gemm_rows(m: usize, a: &[f32], lda: usize, b: &Packed, c: &mut [f32], ldc: usize) {
    let (k, n) = (b.k, b.n);
    if m == 0 {
        return;
    }
    assert!(lda >= k && ldc >= n, "gemm_rows: strides");
    assert!(a.len() >= (m - 1) * lda + k, "gemm_rows: a too short");
    assert!(c.len() >= (m - 1) * ldc + n, "gemm_rows: c too short");
    #[cfg(target_arch = "x86_64")]
    {
        if n % 16 == 0 && has_avx512() {
            // SAFETY: feature detected; bounds checked above and by
            // construction of `Packed` (all panels 16 wide).
            unsafe {
                gemm_rows_avx512(
                    m,
                    k,
                    n,
                    a.as_ptr(),
                    lda,
                    b.panels.as_ptr(),
                    c.as_mut_ptr(),
                    ldc,
                )
            };
            return;
        }
        if n % 8 == 0 && has_avx2_fma() {
            // SAFETY: features detected; bounds checked above and by
            // construction of `Packed`.
            unsafe {
                gemm_rows_avx2(
                    m,
                    k,
                    n,
                    a.as_ptr(),
                    lda,
                    b.panels.as_ptr(),
                    c.as_mut_ptr(),
                    ldc,
                )
            };
            return;
        }
    }
    let av = ArrayView2::from_shape((m, k).strides((lda, 1)), a).expect("checked shape");
    let bv = ArrayView2::from_shape((k, n), &b.rows[..]).expect("checked shape");
    let mut cv = ArrayViewMut2::from_shape((m, n).strides((ldc, 1)), c).expect("checked shape");
    general_mat_mul(1.0, &av, &bv, 1.0, &mut cv);
}

#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2,fma")]
#[allow(clippy::too_many_arguments)]
unsafe fn gemm_rows_avx2(
    m: usize,
    k: usize,
    n: usize,
    a: *const f32,
    lda: usize,
    panels: *const f32,
    c: *mut f32,
    ldc: usize,
) {
    let mut j = 0;
    while j < n {
        let nv = ((n - j) / 8).min(2);
        let w = nv * 8;
        let bp = panels.add(j * k);
        let mut i = 0;
        while i < m {
            let mr = (m - i).min(6);
            let (ap, cp) = (a.add(i * lda), c.add(i * ldc + j));
            match (mr, nv) {
                (6, 2) => micro::<6, 2>(k, ap, lda, bp, w, cp, ldc),
                (5, 2) => micro::<5, 2>(k, ap, lda, bp, w, cp, ldc),
                (4, 2) => micro::<4, 2>(k, ap, lda, bp, w, cp, ldc),
                (3, 2) => micro::<3, 2>(k, ap, lda, bp, w, cp, ldc),
                (2, 2) => micro::<2, 2>(k, ap, lda, bp, w, cp, ldc),
                (1, 2) => micro::<1, 2>(k, ap, lda, bp, w, cp, ldc),
                (6, _) => micro::<6, 1>(k, ap, lda, bp, w, cp, ldc),
                (5, _) => micro::<5, 1>(k, ap, lda, bp, w, cp, ldc),
                (4, _) => micro::<4, 1>(k, ap, lda, bp, w, cp, ldc),
                (3, _) => micro::<3, 1>(k, ap, lda, bp, w, cp, ldc),
                (2, _) => micro::<2, 1>(k, ap, lda, bp, w, cp, ldc),
                _ => micro::<1, 1>(k, ap, lda, bp, w, cp, ldc),
            }
            i += mr;
        }
        j += w;
    }
}

/// The AVX-512 version: blocks of 8 rows x 32 columns (two 16-wide
/// panels), 16 accumulators of the 32 vector registers.
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx512f")]
#[allow(clippy::too_many_arguments)]
unsafe fn gemm_rows_avx512(
    m: usize,
    k: usize,
    n: usize,
    a: *const f32,
    lda: usize,
    panels: *const f32,
    c: *mut f32,
    ldc: usize,
) {
    let mut j = 0;
    while j < n {
        let np = if n - j >= 32 { 2 } else { 1 };
        let bp = panels.add(j * k);
        let mut i = 0;
        while i < m {
            let mr = (m - i).min(8);
            let (ap, cp) = (a.add(i * lda), c.add(i * ldc + j));
            match (mr, np) {
                (8, 2) => micro512::<8, 2>(k, ap, lda, bp, cp, ldc),
                (7, 2) => micro512::<7, 2>(k, ap, lda, bp, cp, ldc),
                (6, 2) => micro512::<6, 2>(k, ap, lda, bp, cp, ldc),
                (5, 2) => micro512::<5, 2>(k, ap, lda, bp, cp, ldc),
                (4, 2) => micro512::<4, 2>(k, ap, lda, bp, cp, ldc),
                (3, 2) => micro512::<3, 2>(k, ap, lda, bp, cp, ldc),
                (2, 2) => micro512::<2, 2>(k, ap, lda, bp, cp, ldc),
                (1, 2) => micro512::<1, 2>(k, ap, lda, bp, cp, ldc),
                (8, _) => micro512::<8, 1>(k, ap, lda, bp, cp, ldc),
                (7, _) => micro512::<7, 1>(k, ap, lda, bp, cp, ldc),
                (6, _) => micro512::<6, 1>(k, ap, lda, bp, cp, ldc),
                (5, _) => micro512::<5, 1>(k, ap, lda, bp, cp, ldc),
                (4, _) => micro512::<4, 1>(k, ap, lda, bp, cp, ldc),
                (3, _) => micro512::<3, 1>(k, ap, lda, bp, cp, ldc),
                (2, _) => micro512::<2, 1>(k, ap, lda, bp, cp, ldc),
                _ => micro512::<1, 1>(k, ap, lda, bp, cp, ldc),
            }
            i += mr;
        }
        j += 16 * np;
    }
}

/// `MR` rows x `16 NP` columns (`NP` consecutive 16-wide panels, each `k`
/// rows of 16 contiguous values) of `c += a b`.
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx512f")]
#[inline]
unsafe fn micro512<const MR: usize, const NP: usize>(
    k: usize,
    a: *const f32,
    lda: usize,
    b: *const f32,
    c: *mut f32,
    ldc: usize,
) {
    use std::arch::x86_64::*;
    let mut acc = [[_mm512_setzero_ps(); NP]; MR];
    for (i, row) in acc.iter_mut().enumerate() {
        for (v, x) in row.iter_mut().enumerate() {
            *x = _mm512_loadu_ps(c.add(i * ldc + v * 16));
        }
    }
    for p in 0..k {
        let mut bv = [_mm512_setzero_ps(); NP];
        for (v, x) in bv.iter_mut().enumerate() {
            *x = _mm512_loadu_ps(b.add(v * 16 * k + p * 16));
        }
        for (i, row) in acc.iter_mut().enumerate() {
            let av = _mm512_set1_ps(*a.add(i * lda + p));
            for (x, bvv) in row.iter_mut().zip(bv.iter()) {
                *x = _mm512_fmadd_ps(av, *bvv, *x);
            }
        }
    }
    for (i, row) in acc.iter().enumerate() {
        for (v, x) in row.iter().enumerate() {
            _mm512_storeu_ps(c.add(i * ldc + v * 16), *x);
        }
    }
}

/// `MR` rows x `8 NV` columns of `c += a b`, accumulators in registers.
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2,fma")]
#[inline]
unsafe fn micro<const MR: usize, const NV: usize>(
    k: usize,
    a: *const f32,
    lda: usize,
    b: *const f32,
    ldb: usize,
    c: *mut f32,
    ldc: usize,
) {
    use std::arch::x86_64::*;
    let mut acc = [[_mm256_setzero_ps(); NV]; MR];
    for (i, row) in acc.iter_mut().enumerate() {
        for (v, x) in row.iter_mut().enumerate() {
            *x = _mm256_loadu_ps(c.add(i * ldc + v * 8));
        }
    }
    for p in 0..k {
        let bp = b.add(p * ldb);
        let mut bv = [_mm256_setzero_ps(); NV];
        for (v, x) in bv.iter_mut().enumerate() {
            *x = _mm256_loadu_ps(bp.add(v * 8));
        }
        for (i, row) in acc.iter_mut().enumerate() {
            let av = _mm256_broadcast_ss(&*a.add(i * lda + p));
            for (x, bvv) in row.iter_mut().zip(bv.iter()) {
                *x = _mm256_fmadd_ps(av, *bvv, *x);
            }
        }
    }
    for (i, row) in acc.iter().enumerate() {
        for (v, x) in row.iter().enumerate() {
            _mm256_storeu_ps(c.add(i * ldc + v * 8), *x);
        }
    }
}

/// `c = a b + beta c`.
///
/// `a` `[m, k]` with any strides (a transposed view is fine), `b` `[k, n]`
/// and `c` `[m, n]` with unit column stride. When `b` and `c` have unit
/// column stride and `n` is a multiple of 16 (AVX-512) or 8 (AVX2 + FMA)
/// this runs our blocked kernel [`gemm_acc`]; otherwise (other shapes,
/// other processors) `general_mat_mul`.
pub(crate) fn gemm(a: ArrayView2<f32>, b: ArrayView2<f32>, beta: f32, c: &mut ArrayViewMut2<f32>) {
    let (m, k) = a.dim();
    let n = b.ncols();
    assert_eq!(b.nrows(), k, "gemm: inner dimensions");
    assert_eq!(c.dim(), (m, n), "gemm: output shape");
    let unit = |s: isize| s == 1;
    let fits = m > 0
        && n > 0
        && k > 0
        && blocked_width_ok(n)
        && (b.nrows() == 1 || b.strides()[0] >= n as isize)
        && unit(b.strides()[1])
        && (c.nrows() == 1 || c.strides()[0] >= n as isize)
        && unit(c.strides()[1])
        && a.strides().iter().all(|&s| s >= 0);
    if !fits {
        general_mat_mul(1.0, &a, &b, beta, c);
        return;
    }
    if beta == 0.0 {
        c.fill(0.0);
    } else if beta != 1.0 {
        c.mapv_inplace(|v| v * beta);
    }
    let (rsa, csa) = (a.strides()[0] as usize, a.strides()[1] as usize);
    let ldb = if k == 1 { n } else { b.strides()[0] as usize };
    let ldc = if m == 1 { n } else { c.strides()[0] as usize };
    let a_len = (m - 1) * rsa + (k - 1) * csa + 1;
    let b_len = (k - 1) * ldb + n;
    let c_len = (m - 1) * ldc + n;
    // SAFETY: the views own at least these spans from their first element
    // (non-negative strides, shapes as checked above).
    let (a_s, b_s, c_s) = unsafe {
        (
            std::slice::from_raw_parts(a.as_ptr(), a_len),
            std::slice::from_raw_parts(b.as_ptr(), b_len),
            std::slice::from_raw_parts_mut(c.as_mut_ptr(), c_len),
        )
    };
    gemm_acc(m, n, k, a_s, rsa, csa, b_s, ldb, c_s, ldc);
}

/// Whether [`gemm_acc`] has a vector kernel for `n` columns here.
fn blocked_width_ok(n: usize) -> bool {
    (n.is_multiple_of(16) && has_avx512()) || (n.is_multiple_of(8) && has_avx2_fma())
}

/// Rows of `a` per block of [`gemm_acc`] (a block of `MC x KC` floats of
/// `a`, 256 KiB, stays in the 1 MiB L2 cache).
const MC: usize = 256;
/// Depth per block of [`gemm_acc`]: a `KC x 32` panel of `b` (32 KiB) stays
/// in the L1 cache while every row tile of the block runs over it.
const KC: usize = 256;

/// `c += a b`, blocked, without packing: `a` `[m, k]` with element `(i, p)`
/// at `a[i * rsa + p * csa]` (row-major, or transposed with `rsa = 1`),
/// `b` `[k, n]` row-major with row stride `ldb`, `c` `[m, n]` row-major
/// with row stride `ldc`.
///
/// Loops: blocks of [`MC`] rows of `a`, then blocks of [`KC`] of the depth,
/// then panels of 32 (AVX-512) or 16 (AVX2) columns of `b`, then register
/// tiles of 8 (AVX-512) or 6 (AVX2) rows, the classic GotoBLAS loop order
/// (Goto and van de Geijn, "Anatomy of high-performance matrix
/// multiplication", ACM TOMS 2008) minus the packing. Made for the
/// products of training: input projections (`m = T·B`, `k = n_in`),
/// weight gradients (`k = T·B`, `a` transposed) and input gradients.
/// Falls back to `general_mat_mul` where no vector kernel applies (see
/// [`gemm`]); each output element sums its `k` products in the same
/// order whatever the thread count, so results are deterministic.
#[allow(clippy::too_many_arguments)]
pub(crate) fn gemm_acc(
    m: usize,
    n: usize,
    k: usize,
    a: &[f32],
    rsa: usize,
    csa: usize,
    b: &[f32],
    ldb: usize,
    c: &mut [f32],
    ldc: usize,
) {
    if m == 0 || n == 0 || k == 0 {
        return;
    }
    assert!(
        a.len() > (m - 1) * rsa + (k - 1) * csa,
        "gemm_acc: a too short"
    );
    assert!(ldb >= n && b.len() >= (k - 1) * ldb + n, "gemm_acc: b");
    assert!(ldc >= n && c.len() >= (m - 1) * ldc + n, "gemm_acc: c");
    #[cfg(target_arch = "x86_64")]
    {
        if n.is_multiple_of(16) && has_avx512() {
            // SAFETY: feature detected; every access stays inside the
            // spans checked above.
            unsafe {
                gemm_acc_avx512(
                    m,
                    n,
                    k,
                    a.as_ptr(),
                    rsa,
                    csa,
                    b.as_ptr(),
                    ldb,
                    c.as_mut_ptr(),
                    ldc,
                )
            };
            return;
        }
        if n.is_multiple_of(8) && has_avx2_fma() {
            // SAFETY: as above.
            unsafe {
                gemm_acc_avx2(
                    m,
                    n,
                    k,
                    a.as_ptr(),
                    rsa,
                    csa,
                    b.as_ptr(),
                    ldb,
                    c.as_mut_ptr(),
                    ldc,
                )
            };
            return;
        }
    }
    let av = ArrayView2::from_shape((m, k).strides((rsa, csa)), a).expect("checked shape");
    let bv = ArrayView2::from_shape((k, n).strides((ldb, 1)), b).expect("checked shape");
    let mut cv = ArrayViewMut2::from_shape((m, n).strides((ldc, 1)), c).expect("checked shape");
    general_mat_mul(1.0, &av, &bv, 1.0, &mut cv);
}

#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx512f")]
#[allow(clippy::too_many_arguments)]
unsafe fn gemm_acc_avx512(
    m: usize,
    n: usize,
    k: usize,
    a: *const f32,
    rsa: usize,
    csa: usize,
    b: *const f32,
    ldb: usize,
    c: *mut f32,
    ldc: usize,
) {
    let mut i0 = 0;
    while i0 < m {
        let mc = MC.min(m - i0);
        let mut p0 = 0;
        while p0 < k {
            let kc = KC.min(k - p0);
            let mut j = 0;
            while j < n {
                let np = if n - j >= 32 { 2 } else { 1 };
                let bp = b.add(p0 * ldb + j);
                let mut i = i0;
                while i < i0 + mc {
                    let mr = (i0 + mc - i).min(8);
                    let ap = a.add(i * rsa + p0 * csa);
                    let cp = c.add(i * ldc + j);
                    macro_rules! go {
                        ($($r:literal),*) => {
                            match (mr, np) {
                                $(($r, 2) => strided512::<$r, 2>(kc, ap, rsa, csa, bp, ldb, cp, ldc),)*
                                $(($r, _) => strided512::<$r, 1>(kc, ap, rsa, csa, bp, ldb, cp, ldc),)*
                                _ => unreachable!("row tiles are 1 to 8 rows"),
                            }
                        };
                    }
                    go!(8, 7, 6, 5, 4, 3, 2, 1);
                    i += mr;
                }
                j += 16 * np;
            }
            p0 += kc;
        }
        i0 += mc;
    }
}

/// `MR` rows x `16 NP` columns of `c += a b` over depth `k`, `a` strided,
/// `b` row-major (row stride `ldb`), accumulators in registers.
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx512f")]
#[inline]
#[allow(clippy::too_many_arguments)]
unsafe fn strided512<const MR: usize, const NP: usize>(
    k: usize,
    a: *const f32,
    rsa: usize,
    csa: usize,
    b: *const f32,
    ldb: usize,
    c: *mut f32,
    ldc: usize,
) {
    use std::arch::x86_64::*;
    let mut acc = [[_mm512_setzero_ps(); NP]; MR];
    for (i, row) in acc.iter_mut().enumerate() {
        for (v, x) in row.iter_mut().enumerate() {
            *x = _mm512_loadu_ps(c.add(i * ldc + v * 16));
        }
    }
    for p in 0..k {
        let bp = b.add(p * ldb);
        let mut bv = [_mm512_setzero_ps(); NP];
        for (v, x) in bv.iter_mut().enumerate() {
            *x = _mm512_loadu_ps(bp.add(v * 16));
        }
        let ap = a.add(p * csa);
        for (i, row) in acc.iter_mut().enumerate() {
            let av = _mm512_set1_ps(*ap.add(i * rsa));
            for (x, bvv) in row.iter_mut().zip(bv.iter()) {
                *x = _mm512_fmadd_ps(av, *bvv, *x);
            }
        }
    }
    for (i, row) in acc.iter().enumerate() {
        for (v, x) in row.iter().enumerate() {
            _mm512_storeu_ps(c.add(i * ldc + v * 16), *x);
        }
    }
}

#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2,fma")]
#[allow(clippy::too_many_arguments)]
unsafe fn gemm_acc_avx2(
    m: usize,
    n: usize,
    k: usize,
    a: *const f32,
    rsa: usize,
    csa: usize,
    b: *const f32,
    ldb: usize,
    c: *mut f32,
    ldc: usize,
) {
    let mut i0 = 0;
    while i0 < m {
        let mc = MC.min(m - i0);
        let mut p0 = 0;
        while p0 < k {
            let kc = KC.min(k - p0);
            let mut j = 0;
            while j < n {
                let nv = ((n - j) / 8).min(2);
                let bp = b.add(p0 * ldb + j);
                let mut i = i0;
                while i < i0 + mc {
                    let mr = (i0 + mc - i).min(6);
                    let ap = a.add(i * rsa + p0 * csa);
                    let cp = c.add(i * ldc + j);
                    macro_rules! go {
                        ($($r:literal),*) => {
                            match (mr, nv) {
                                $(($r, 2) => strided256::<$r, 2>(kc, ap, rsa, csa, bp, ldb, cp, ldc),)*
                                $(($r, _) => strided256::<$r, 1>(kc, ap, rsa, csa, bp, ldb, cp, ldc),)*
                                _ => unreachable!("row tiles are 1 to 6 rows"),
                            }
                        };
                    }
                    go!(6, 5, 4, 3, 2, 1);
                    i += mr;
                }
                j += 8 * nv;
            }
            p0 += kc;
        }
        i0 += mc;
    }
}

/// `MR` rows x `8 NV` columns of `c += a b` over depth `k` (AVX2 + FMA),
/// `a` strided, `b` row-major.
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2,fma")]
#[inline]
#[allow(clippy::too_many_arguments)]
unsafe fn strided256<const MR: usize, const NV: usize>(
    k: usize,
    a: *const f32,
    rsa: usize,
    csa: usize,
    b: *const f32,
    ldb: usize,
    c: *mut f32,
    ldc: usize,
) {
    use std::arch::x86_64::*;
    let mut acc = [[_mm256_setzero_ps(); NV]; MR];
    for (i, row) in acc.iter_mut().enumerate() {
        for (v, x) in row.iter_mut().enumerate() {
            *x = _mm256_loadu_ps(c.add(i * ldc + v * 8));
        }
    }
    for p in 0..k {
        let bp = b.add(p * ldb);
        let mut bv = [_mm256_setzero_ps(); NV];
        for (v, x) in bv.iter_mut().enumerate() {
            *x = _mm256_loadu_ps(bp.add(v * 8));
        }
        let ap = a.add(p * csa);
        for (i, row) in acc.iter_mut().enumerate() {
            let av = _mm256_broadcast_ss(&*ap.add(i * rsa));
            for (x, bvv) in row.iter_mut().zip(bv.iter()) {
                *x = _mm256_fmadd_ps(av, *bvv, *x);
            }
        }
    }
    for (i, row) in acc.iter().enumerate() {
        for (v, x) in row.iter().enumerate() {
            _mm256_storeu_ps(c.add(i * ldc + v * 8), *x);
        }
    }
}

/// Runs `body` compiled for AVX2 + FMA when the processor has them, else
/// the portable build of the same code. Only for element-wise loops
/// without explicit fused multiply-adds, so both builds give bit-identical
/// results (IEEE operations round the same way in any vector width).
macro_rules! multiversion {
    (fn($($arg:ident : $ty:ty),* $(,)?) $body:block) => {
        #[inline(always)]
        fn portable($($arg: $ty),*) $body
        #[cfg(target_arch = "x86_64")]
        #[target_feature(enable = "avx2,fma")]
        unsafe fn wide($($arg: $ty),*) $body
        #[cfg(target_arch = "x86_64")]
        {
            if $crate::net::kernels::has_avx2_fma() {
                // SAFETY: the features were detected just above.
                return unsafe { wide($($arg),*) };
            }
        }
        return portable($($arg),*);
    };
}
pub(crate) use multiversion;

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;
    use rand::{Rng, SeedableRng};
    use rand_chacha::ChaCha8Rng;

    #[test]
    fn exp_matches_std_to_float_precision() {
        // Reference: the platform libm `expf` through f64 (general-purpose
        // reference library); the Cephes polynomial is documented at about
        // 2e-7 relative error, we allow 4e-7 (two ulps).
        let mut x = -87.0f32;
        while x < 88.0 {
            let want = (x as f64).exp();
            let got = exp_fast(x) as f64;
            assert!(
                ((got - want) / want).abs() < 4e-7,
                "exp({x}) = {got}, want {want}"
            );
            x += 0.0137;
        }
        assert!(exp_fast(-1000.0) > 0.0 && exp_fast(-1000.0) < 1e-37);
        assert!(exp_fast(1000.0).is_finite());
    }

    #[test]
    fn sigmoid_and_tanh_match_std() {
        let mut x = -20.0f32;
        while x < 20.0 {
            let s = 1.0 / (1.0 + (-(x as f64)).exp());
            assert!((sigmoid(x) as f64 - s).abs() < 3e-7, "sigmoid({x})");
            assert!(
                (tanh(x) as f64 - (x as f64).tanh()).abs() < 5e-7,
                "tanh({x})"
            );
            x += 0.01;
        }
    }

    #[test]
    fn gemm_rows_agrees_with_general_mat_mul() {
        let mut rng = ChaCha8Rng::seed_from_u64(9);
        for &(m, k, n) in &[
            (16usize, 128usize, 384usize),
            (7, 384, 128),
            (3, 5, 40),
            (5, 6, 7),
            (1, 3, 8),
        ] {
            let lda = k + 3;
            let ldc = n + 5;
            let a: Vec<f32> = (0..m * lda).map(|_| rng.gen_range(-1.0..1.0)).collect();
            let b: Vec<f32> = (0..k * n).map(|_| rng.gen_range(-1.0..1.0)).collect();
            let c0: Vec<f32> = (0..m * ldc).map(|_| rng.gen_range(-1.0..1.0)).collect();
            let mut c = c0.clone();
            let packed = Packed::new(ArrayView2::from_shape((k, n), &b[..]).unwrap());
            gemm_rows(m, &a, lda, &packed, &mut c, ldc);
            // The AVX2 kernel too, where the dispatcher would pick AVX-512.
            #[cfg(target_arch = "x86_64")]
            if n % 8 == 0 && has_avx2_fma() {
                let mut c2 = c0.clone();
                unsafe {
                    gemm_rows_avx2(
                        m,
                        k,
                        n,
                        a.as_ptr(),
                        lda,
                        packed.panels.as_ptr(),
                        c2.as_mut_ptr(),
                        ldc,
                    )
                };
                for (x, y) in c.iter().zip(&c2) {
                    assert_relative_eq!(*x, *y, epsilon = 1e-5 * k as f32);
                }
            }
            for i in 0..m {
                for j in 0..n {
                    let want = c0[i * ldc + j] as f64
                        + (0..k)
                            .map(|p| a[i * lda + p] as f64 * b[p * n + j] as f64)
                            .sum::<f64>();
                    assert_relative_eq!(c[i * ldc + j] as f64, want, epsilon = 1e-5 * k as f64);
                }
                // Padding between rows is untouched.
                for j in n..ldc {
                    if i + 1 < m {
                        assert_eq!(c[i * ldc + j], c0[i * ldc + j]);
                    }
                }
            }
        }
    }

    /// `gemm_acc` (both vector kernels and the fallback) against a naive
    /// f64 sum, for row-major and transposed `a`, shapes with remainders
    /// in every loop and depths and heights past one block.
    #[test]
    fn gemm_acc_agrees_with_naive_sums() {
        let mut rng = ChaCha8Rng::seed_from_u64(21);
        for &(m, n, k, transposed) in &[
            (13usize, 48usize, 5usize, false),
            (300, 384, 24, false),
            (24, 384, 700, true),
            (129, 32, 300, true),
            (7, 16, 1, false),
            (1, 8, 9, true),
            (5, 7, 3, false),
        ] {
            let (rsa, csa) = if transposed { (1, m + 2) } else { (k + 1, 1) };
            let a_len = (m - 1) * rsa + (k - 1) * csa + 1;
            let a: Vec<f32> = (0..a_len).map(|_| rng.gen_range(-1.0..1.0)).collect();
            let ldb = n + 3;
            let ldc = n + 5;
            let b: Vec<f32> = (0..k * ldb).map(|_| rng.gen_range(-1.0..1.0)).collect();
            let c0: Vec<f32> = (0..m * ldc).map(|_| rng.gen_range(-1.0..1.0)).collect();
            let want = |i: usize, j: usize| {
                c0[i * ldc + j] as f64
                    + (0..k)
                        .map(|p| a[i * rsa + p * csa] as f64 * b[p * ldb + j] as f64)
                        .sum::<f64>()
            };
            let mut results = Vec::new();
            let mut c = c0.clone();
            gemm_acc(m, n, k, &a, rsa, csa, &b, ldb, &mut c, ldc);
            results.push(("dispatch", c));
            #[cfg(target_arch = "x86_64")]
            if n % 8 == 0 && has_avx2_fma() {
                let mut c2 = c0.clone();
                unsafe {
                    gemm_acc_avx2(
                        m,
                        n,
                        k,
                        a.as_ptr(),
                        rsa,
                        csa,
                        b.as_ptr(),
                        ldb,
                        c2.as_mut_ptr(),
                        ldc,
                    )
                };
                results.push(("avx2", c2));
            }
            for (what, c) in &results {
                for i in 0..m {
                    for j in 0..ldc {
                        let idx = i * ldc + j;
                        if j < n {
                            // k terms of size <= 1 in f32: error below k * 2^-23.
                            assert_relative_eq!(
                                c[idx] as f64,
                                want(i, j),
                                epsilon = 1e-6 * (k as f64 + 1.0)
                            );
                        } else {
                            assert_eq!(c[idx], c0[idx], "{what}: padding of row {i} touched");
                        }
                    }
                }
            }
        }
    }

    /// The `gemm` wrapper gives `general_mat_mul`'s results (to rounding)
    /// for transposed operands and every `beta`.
    #[test]
    fn gemm_wrapper_matches_general_mat_mul() {
        use ndarray::Array2;
        let mut rng = ChaCha8Rng::seed_from_u64(22);
        let x = Array2::from_shape_fn((40, 24), |_| rng.gen_range(-1.0f32..1.0));
        let d = Array2::from_shape_fn((40, 64), |_| rng.gen_range(-1.0f32..1.0));
        let c0 = Array2::from_shape_fn((24, 64), |_| rng.gen_range(-1.0f32..1.0));
        for beta in [0.0f32, 1.0, 0.5] {
            let mut got = c0.clone();
            gemm(x.t(), d.view(), beta, &mut got.view_mut());
            let mut want = c0.clone();
            general_mat_mul(1.0, &x.t(), &d, beta, &mut want);
            for (g, w) in got.iter().zip(want.iter()) {
                assert_relative_eq!(*g, *w, epsilon = 1e-4);
            }
        }
    }

    /// The packed matrix-vector product gives exactly the unpacked one's
    /// numbers (same order of operations) on shapes with a narrower last
    /// block and a scalar tail.
    #[test]
    fn gemv_packed_equals_gemv() {
        let mut rng = ChaCha8Rng::seed_from_u64(23);
        for &(k, n) in &[(128usize, 384usize), (24, 384), (5, 150), (3, 7), (64, 272)] {
            let x: Vec<f32> = (0..k).map(|_| rng.gen_range(-1.0..1.0)).collect();
            let w: Vec<f32> = (0..k * n).map(|_| rng.gen_range(-1.0..1.0)).collect();
            let b: Vec<f32> = (0..n).map(|_| rng.gen_range(-1.0..1.0)).collect();
            let packed = GemvPacked::new(ArrayView2::from_shape((k, n), &w[..]).unwrap());
            let mut y1 = vec![0.0; n];
            let mut y2 = vec![0.0; n];
            gemv(&x, &w, &b, &mut y1);
            gemv_packed(&x, &packed, &b, &mut y2);
            assert_eq!(y1, y2, "k {k} n {n}");
        }
    }

    #[test]
    fn gemv_kernels_agree_with_naive_sums() {
        let mut rng = ChaCha8Rng::seed_from_u64(7);
        for &(k, n) in &[(24usize, 384usize), (128, 384), (5, 70), (3, 7), (1, 1)] {
            let x: Vec<f32> = (0..k).map(|_| rng.gen_range(-1.0..1.0)).collect();
            let w: Vec<f32> = (0..k * n).map(|_| rng.gen_range(-1.0..1.0)).collect();
            let b: Vec<f32> = (0..n).map(|_| rng.gen_range(-1.0..1.0)).collect();
            let naive: Vec<f64> = (0..n)
                .map(|j| {
                    b[j] as f64
                        + (0..k)
                            .map(|i| x[i] as f64 * w[i * n + j] as f64)
                            .sum::<f64>()
                })
                .collect();
            let mut y1 = vec![0.0; n];
            let mut y2 = vec![0.0; n];
            let mut y3 = naive.iter().map(|&v| v as f32).collect::<Vec<_>>();
            gemv(&x, &w, &b, &mut y1);
            gemv_portable(&x, &w, &b, &mut y2);
            // The AVX2 kernel too, where the dispatcher would pick AVX-512.
            #[cfg(target_arch = "x86_64")]
            if has_avx2_fma() {
                unsafe { gemv_avx2(&x, &w, &b, &mut y3) };
            }
            for j in 0..n {
                assert_relative_eq!(y3[j] as f64, naive[j], epsilon = 1e-5 * k as f64);
                // k terms of size <= 1 in f32: rounding error below k * 2^-23.
                assert_relative_eq!(y1[j] as f64, naive[j], epsilon = 1e-5 * k as f64);
                assert_relative_eq!(y2[j] as f64, naive[j], epsilon = 1e-5 * k as f64);
            }
        }
    }
}

#[cfg(test)]
mod timing {
    use super::*;
    use ndarray::Array2;
    use std::time::Instant;

    /// Timing of `gemm_acc` on the training shapes against
    /// `general_mat_mul` (run with `--release -- --ignored --nocapture`).
    #[test]
    #[ignore]
    fn gemm_acc_vs_general_mat_mul() {
        // (m, n, k, a transposed): input projections, weight gradients
        // (depth = 32 steps x 32 sequences), input gradient.
        for &(m, n, k, tr) in &[
            (1024usize, 384usize, 24usize, false),
            (1024, 384, 128, false),
            (128, 384, 1024, true),
            (24, 384, 1024, true),
            (1024, 128, 384, false),
        ] {
            let a = if tr {
                Array2::<f32>::from_shape_fn((k, m), |(i, j)| ((i * 7 + j) % 13) as f32 * 0.01)
            } else {
                Array2::<f32>::from_shape_fn((m, k), |(i, j)| ((i * 7 + j) % 13) as f32 * 0.01)
            };
            let av = if tr { a.t() } else { a.view() };
            let b = Array2::<f32>::from_shape_fn((k, n), |(i, j)| ((i * 3 + j) % 11) as f32 * 0.01);
            let mut c1 = Array2::<f32>::zeros((m, n));
            let mut c2 = Array2::<f32>::zeros((m, n));
            let reps = 50;
            let (mut t1, mut t2) = (Vec::new(), Vec::new());
            for _ in 0..7 {
                let s = Instant::now();
                for _ in 0..reps {
                    gemm(av, b.view(), 1.0, &mut c1.view_mut());
                }
                t1.push(s.elapsed().as_secs_f64());
                let s = Instant::now();
                for _ in 0..reps {
                    general_mat_mul(1.0, &av, &b, 1.0, &mut c2);
                }
                t2.push(s.elapsed().as_secs_f64());
            }
            t1.sort_by(f64::total_cmp);
            t2.sort_by(f64::total_cmp);
            let flop = 2.0 * (m * k * n * reps) as f64;
            println!(
                "{m}x{n}x{k} a^T={tr}: gemm_acc {:.1} GFLOP/s, general_mat_mul {:.1} GFLOP/s",
                flop / t1[3] / 1e9,
                flop / t2[3] / 1e9
            );
        }
    }

    /// Interleaved A/B timing of the per-step product against
    /// `general_mat_mul` (run with `--release -- --ignored --nocapture`).
    #[test]
    #[ignore]
    fn gemm_rows_vs_general_mat_mul() {
        for &(m, k, n) in &[
            (16usize, 128usize, 384usize),
            (32, 128, 384),
            (16, 384, 128),
            (32, 384, 128),
        ] {
            let a = Array2::<f32>::from_shape_fn((m, k), |(i, j)| ((i * 7 + j) % 13) as f32 * 0.01);
            let b = Array2::<f32>::from_shape_fn((k, n), |(i, j)| ((i * 3 + j) % 11) as f32 * 0.01);
            let mut c1 = Array2::<f32>::zeros((m, n));
            let mut c2 = Array2::<f32>::zeros((m, n));
            let reps = 2000;
            let packed = Packed::new(b.view());
            let (mut t1, mut t2) = (Vec::new(), Vec::new());
            for _ in 0..7 {
                let s = Instant::now();
                for _ in 0..reps {
                    gemm_rows(
                        m,
                        a.as_slice().unwrap(),
                        k,
                        &packed,
                        c1.as_slice_mut().unwrap(),
                        n,
                    );
                }
                t1.push(s.elapsed().as_secs_f64());
                let s = Instant::now();
                for _ in 0..reps {
                    general_mat_mul(1.0, &a, &b, 1.0, &mut c2);
                }
                t2.push(s.elapsed().as_secs_f64());
            }
            t1.sort_by(f64::total_cmp);
            t2.sort_by(f64::total_cmp);
            let flop = 2.0 * (m * k * n * reps) as f64;
            println!(
                "{m}x{k}x{n}: gemm_rows {:.1} GFLOP/s, general_mat_mul {:.1} GFLOP/s",
                flop / t1[3] / 1e9,
                flop / t2[3] / 1e9
            );
        }
    }
}
