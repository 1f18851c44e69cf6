//! Percentile bootstrap confidence intervals over recordings.
//!
//! The unit of resampling is the recording: a resample draws `n` of the `n`
//! recordings with replacement, sums their counts and computes each figure
//! from the sums (Efron, "Bootstrap methods: another look at the
//! jackknife", Annals of Statistics 7(1), 1979; the percentile interval as
//! in Efron and Tibshirani, "An Introduction to the Bootstrap", 1993,
//! chapter 13). Resampling whole recordings keeps the errors inside one
//! recording together, which they are: one bad scan spoils many characters.
//!
//! A paired comparison of two systems on the same recordings draws the same
//! recordings for both and takes the percentile interval of the difference
//! (the paired bootstrap as used for recognisers by Koehn, "Statistical
//! significance tests for machine translation evaluation", EMNLP 2004, and
//! by Bisani and Ney, "Bootstrap estimates for confidence intervals in ASR
//! performance evaluation", ICASSP 2004).
//!
//! Every resample `b` draws from its own ChaCha8 stream (`seed`, stream
//! `b`), so results do not depend on how rayon splits the work.

use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rayon::prelude::*;
use serde::{Deserialize, Serialize};

/// A figure with its bootstrap confidence interval.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Estimate {
    /// The figure on all recordings.
    pub value: f64,
    /// Lower end of the confidence interval.
    pub low: f64,
    /// Upper end of the confidence interval.
    pub high: f64,
}

/// For `resamples` resamples of `0..n` with replacement, the values that
/// `stat` gives (one `Option` per figure; `None` where a resample leaves the
/// figure undefined). Returns, per figure, the defined values.
pub(crate) fn resample<F>(
    n: usize,
    resamples: usize,
    seed: u64,
    figures: usize,
    stat: F,
) -> Vec<Vec<f64>>
where
    F: Fn(&[usize]) -> Vec<Option<f64>> + Sync,
{
    let per_resample: Vec<Vec<Option<f64>>> = (0..resamples)
        .into_par_iter()
        .map(|b| {
            let mut rng = ChaCha8Rng::seed_from_u64(seed);
            rng.set_stream(b as u64);
            let idx: Vec<usize> = (0..n).map(|_| rng.gen_range(0..n)).collect();
            stat(&idx)
        })
        .collect();
    let mut out = vec![Vec::with_capacity(resamples); figures];
    for values in per_resample {
        for (k, v) in values.into_iter().enumerate().take(figures) {
            if let Some(v) = v.filter(|v| v.is_finite()) {
                out[k].push(v);
            }
        }
    }
    out
}

/// The `p`-quantile (0 <= p <= 1) of sorted values, interpolating linearly
/// between order statistics (the "type 7" rule of Hyndman and Fan, "Sample
/// quantiles in statistical packages", The American Statistician, 1996).
pub(crate) fn quantile(sorted: &[f64], p: f64) -> Option<f64> {
    if sorted.is_empty() {
        return None;
    }
    let h = (sorted.len() - 1) as f64 * p.clamp(0.0, 1.0);
    let lo = h.floor() as usize;
    let hi = (lo + 1).min(sorted.len() - 1);
    Some(sorted[lo] + (h - lo as f64) * (sorted[hi] - sorted[lo]))
}

/// The percentile interval at `confidence` (e.g. 0.95) of bootstrap values,
/// around the point `value`. With no defined resample the interval
/// collapses to the point.
pub(crate) fn interval(value: f64, mut values: Vec<f64>, confidence: f64) -> Estimate {
    values.sort_by(f64::total_cmp);
    let alpha = (1.0 - confidence) / 2.0;
    Estimate {
        value,
        low: quantile(&values, alpha).unwrap_or(value),
        high: quantile(&values, 1.0 - alpha).unwrap_or(value),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn quantile_rule() {
        let v = [1.0, 2.0, 3.0, 4.0, 5.0];
        assert_eq!(quantile(&v, 0.0), Some(1.0));
        assert_eq!(quantile(&v, 0.5), Some(3.0));
        assert_eq!(quantile(&v, 1.0), Some(5.0));
        // h = 4 * 0.1 = 0.4 -> 1 + 0.4 * (2 - 1)
        assert!((quantile(&v, 0.1).unwrap() - 1.4).abs() < 1e-12);
        assert_eq!(quantile(&[], 0.5), None);
    }

    #[test]
    fn resampling_is_deterministic() {
        let data: Vec<f64> = (0..30).map(|i| (i % 7) as f64).collect();
        let stat = |idx: &[usize]| {
            vec![Some(
                idx.iter().map(|&i| data[i]).sum::<f64>() / idx.len() as f64,
            )]
        };
        let a = resample(data.len(), 200, 7, 1, stat);
        let b = resample(data.len(), 200, 7, 1, stat);
        assert_eq!(a, b);
        let c = resample(data.len(), 200, 8, 1, stat);
        assert_ne!(a, c);
        let mean = data.iter().sum::<f64>() / data.len() as f64;
        let e = interval(mean, a[0].clone(), 0.95);
        assert!(e.low < mean && mean < e.high);
    }
}
