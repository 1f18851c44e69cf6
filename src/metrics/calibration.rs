//! Calibration of dot probabilities: reliability-diagram bins and the
//! expected calibration error.
//!
//! Each judged event is one dot of one cell: the model's probability that
//! the dot is raised, and whether it is raised in the ground truth. The
//! probabilities are sorted into equal-width bins over [0, 1] (default 10
//! bins; bin `b` of `M` holds `b/M <= p < (b+1)/M`, the last bin also holds
//! `p = 1`). The expected calibration error is the bin-weighted gap between
//! the mean predicted probability and the observed frequency of raised dots
//! (Naeini, Cooper and Hauskrecht, "Obtaining well calibrated probabilities
//! using Bayesian binning", AAAI 2015):
//!
//! ```text
//! ECE = sum over bins b of (n_b / N) * | observed_b - mean_probability_b |
//! ```

use crate::error::{Error, Result};
use serde::{Deserialize, Serialize};

/// Default number of equal-width calibration bins.
pub const DEFAULT_CALIBRATION_BINS: usize = 10;

/// Running sums for one bin; they add up over recordings, so the bins of
/// any set of recordings (a bootstrap resample, say) follow by addition.
#[derive(Debug, Clone, Copy, PartialEq, Default, Serialize, Deserialize)]
pub struct BinSums {
    /// Events (dots) in the bin.
    pub count: u64,
    /// Sum of their predicted probabilities.
    pub sum_probability: f64,
    /// How many of them were raised in the ground truth.
    pub positives: u64,
}

/// One bar of a reliability diagram.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ReliabilityBin {
    /// Lower edge of the bin (inclusive).
    pub low: f64,
    /// Upper edge (exclusive, except 1.0 for the last bin).
    pub high: f64,
    /// Events in the bin.
    pub count: u64,
    /// Mean predicted probability, `None` for an empty bin.
    pub mean_probability: Option<f64>,
    /// Observed frequency of raised dots, `None` for an empty bin.
    pub observed_frequency: Option<f64>,
}

/// A reliability diagram and its expected calibration error.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Calibration {
    /// Equal-width bins over [0, 1], lowest first.
    pub bins: Vec<ReliabilityBin>,
    /// Number of events judged.
    pub events: u64,
    /// Expected calibration error, `None` when there are no events.
    pub ece: Option<f64>,
}

/// The bin of probability `p` among `bins` equal-width bins over [0, 1].
pub(crate) fn bin_index(p: f64, bins: usize) -> usize {
    let b = (p * bins as f64).floor();
    if b <= 0.0 {
        0
    } else {
        (b as usize).min(bins - 1)
    }
}

/// Add one event to bin sums of length `bins`.
pub(crate) fn add_event(sums: &mut [BinSums], p: f64, raised: bool) {
    let b = bin_index(p, sums.len());
    let s = &mut sums[b];
    s.count += 1;
    s.sum_probability += p;
    s.positives += u64::from(raised);
}

/// Expected calibration error of summed bins, `None` without events.
pub(crate) fn ece_of(sums: &[BinSums]) -> Option<f64> {
    let total: u64 = sums.iter().map(|s| s.count).sum();
    if total == 0 {
        return None;
    }
    let mut ece = 0.0;
    for s in sums.iter().filter(|s| s.count > 0) {
        let n = s.count as f64;
        ece += (n / total as f64) * (s.positives as f64 / n - s.sum_probability / n).abs();
    }
    Some(ece)
}

/// A [`Calibration`] from summed bins.
pub(crate) fn calibration_of(sums: &[BinSums]) -> Calibration {
    let m = sums.len() as f64;
    let bins = sums
        .iter()
        .enumerate()
        .map(|(b, s)| ReliabilityBin {
            low: b as f64 / m,
            high: (b + 1) as f64 / m,
            count: s.count,
            mean_probability: (s.count > 0).then(|| s.sum_probability / s.count as f64),
            observed_frequency: (s.count > 0).then(|| s.positives as f64 / s.count as f64),
        })
        .collect();
    Calibration {
        bins,
        events: sums.iter().map(|s| s.count).sum(),
        ece: ece_of(sums),
    }
}

/// Reliability-diagram bins and expected calibration error (Naeini et al.
/// 2015) of binary events: `probabilities[i]` is the predicted probability
/// that event `i` happens, `outcomes[i]` whether it did. `bins` is the
/// number of equal-width bins over [0, 1] ([`DEFAULT_CALIBRATION_BINS`] = 10
/// is the usual choice).
///
/// Errors when the lengths differ, `bins` is 0, or a probability is not a
/// number in [0, 1].
///
/// ```
/// use tactread::metrics::reliability;
/// let c = reliability(&[0.9, 0.9, 0.1, 0.1], &[true, false, false, false], 10).unwrap();
/// // bin [0.9, 1.0]: mean 0.9, observed 0.5; bin [0.1, 0.2): mean 0.1, observed 0.
/// assert!((c.ece.unwrap() - (0.5 * 0.4 + 0.5 * 0.1)).abs() < 1e-12);
/// ```
pub fn reliability(probabilities: &[f64], outcomes: &[bool], bins: usize) -> Result<Calibration> {
    if bins == 0 {
        return Err(Error::config(
            "calibration bins",
            "must be at least 1 (10 is the usual choice)",
        ));
    }
    if probabilities.len() != outcomes.len() {
        return Err(Error::Mismatch {
            what: "calibration events".into(),
            expected: format!("{} outcomes (one per probability)", probabilities.len()),
            got: outcomes.len().to_string(),
            hint: "pass one outcome for every probability".into(),
        });
    }
    let mut sums = vec![BinSums::default(); bins];
    for (i, (&p, &o)) in probabilities.iter().zip(outcomes).enumerate() {
        if !(0.0..=1.0).contains(&p) {
            return Err(Error::config(
                "probability",
                format!("event {i} has probability {p}: probabilities must be numbers in [0, 1]"),
            ));
        }
        add_event(&mut sums, p, o);
    }
    Ok(calibration_of(&sums))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn bin_edges() {
        assert_eq!(bin_index(0.0, 10), 0);
        assert_eq!(bin_index(0.0999, 10), 0);
        assert_eq!(bin_index(0.1, 10), 1);
        assert_eq!(bin_index(0.95, 10), 9);
        assert_eq!(bin_index(1.0, 10), 9);
        assert_eq!(bin_index(0.5, 1), 0);
    }

    #[test]
    fn perfectly_calibrated_is_zero_and_bad_input_errs() {
        let c = reliability(&[0.5, 0.5, 1.0, 0.0], &[true, false, true, false], 10).unwrap();
        assert!(c.ece.unwrap().abs() < 1e-12);
        assert_eq!(c.events, 4);
        assert!(reliability(&[0.5], &[], 10).is_err());
        assert!(reliability(&[f64::NAN], &[true], 10).is_err());
        assert!(reliability(&[1.5], &[true], 10).is_err());
        assert!(reliability(&[0.5], &[true], 0).is_err());
        assert_eq!(reliability(&[], &[], 10).unwrap().ece, None);
    }
}
