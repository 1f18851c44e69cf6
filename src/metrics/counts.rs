//! The counts kept per recording, and the figures computed from them.
//!
//! Every figure tactread reports is a function of counts that add up over
//! recordings (edit counts, dot confusion counts, calibration bin sums). So
//! the figure of a whole test set, of a speed bin, or of a bootstrap
//! resample is the figure of the summed counts, and a metrics file that
//! keeps the counts of every recording can be re-analysed later (a paired
//! comparison of two systems, for one) without the recordings.

use super::align::EditCounts;
use super::calibration::{ece_of, BinSums};
use serde::{Deserialize, Serialize};

/// Dot decisions of aligned cell pairs for one dot position.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
pub struct DotCounts {
    /// Raised in the ground truth and read as raised.
    pub true_positives: u64,
    /// Flat in the ground truth but read as raised.
    pub false_positives: u64,
    /// Raised in the ground truth but read as flat (a missed dot).
    pub false_negatives: u64,
    /// Flat and read as flat.
    pub true_negatives: u64,
}

impl DotCounts {
    /// Of the dots read as raised, the share that are raised:
    /// TP / (TP + FP). `None` when no dot was read as raised.
    pub fn precision(&self) -> Option<f64> {
        let d = self.true_positives + self.false_positives;
        (d > 0).then(|| self.true_positives as f64 / d as f64)
    }

    /// Of the raised dots, the share read as raised: TP / (TP + FN).
    /// `None` when no dot is raised in the ground truth.
    pub fn recall(&self) -> Option<f64> {
        let d = self.true_positives + self.false_negatives;
        (d > 0).then(|| self.true_positives as f64 / d as f64)
    }

    /// All decisions counted.
    pub fn total(&self) -> u64 {
        self.true_positives + self.false_positives + self.false_negatives + self.true_negatives
    }

    fn add(&mut self, o: &DotCounts) {
        self.true_positives += o.true_positives;
        self.false_positives += o.false_positives;
        self.false_negatives += o.false_negatives;
        self.true_negatives += o.true_negatives;
    }
}

/// Everything counted for one recording (or summed over several) under one
/// hypothesis set.
///
/// * `chars`, `words`, `cells`: edit counts of the text aligned by
///   characters, by whitespace-separated words, and of the cell sequence.
/// * `dots[d - 1]`: the decisions for dot `d` over the *aligned* cell pairs
///   (matches and substitutions of the cell alignment). Inserted and
///   deleted cells have no partner and are not in the dot counts; they
///   show in `cells` (and in cell accuracy) instead.
/// * `top_k_hits[k - 1]`: of the aligned character pairs, how many have the
///   reference character among the first `k` alternatives; present only
///   when every recording of the set came with alternatives.
/// * `calibration`: bin sums of (dot probability, dot raised in the
///   ground truth) over the dots of aligned cell pairs; present only when
///   every recording came with dot probabilities.
#[derive(Debug, Clone, PartialEq, Default, Serialize, Deserialize)]
pub struct Counts {
    /// Character edit counts.
    pub chars: EditCounts,
    /// Word edit counts.
    pub words: EditCounts,
    /// Cell edit counts.
    pub cells: EditCounts,
    /// Per-dot decisions over aligned cell pairs, dots 1-6.
    pub dots: [DotCounts; 6],
    /// Aligned characters whose reference is within the top 1, 2, 3 alternatives.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub top_k_hits: Option<[u64; 3]>,
    /// Calibration bin sums of the dot probabilities.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub calibration: Option<Vec<BinSums>>,
}

impl Counts {
    /// The counts of several recordings summed. Optional parts survive only
    /// when every summand has them (with equal bin counts).
    pub(crate) fn sum<'a>(mut items: impl Iterator<Item = &'a Counts>) -> Counts {
        let Some(first) = items.next() else {
            return Counts::default();
        };
        let mut total = first.clone();
        for c in items {
            total.add(c);
        }
        total
    }

    fn add(&mut self, o: &Counts) {
        self.chars.add(&o.chars);
        self.words.add(&o.words);
        self.cells.add(&o.cells);
        for (a, b) in self.dots.iter_mut().zip(&o.dots) {
            a.add(b);
        }
        self.top_k_hits = match (self.top_k_hits, o.top_k_hits) {
            (Some(a), Some(b)) => Some([a[0] + b[0], a[1] + b[1], a[2] + b[2]]),
            _ => None,
        };
        self.calibration = match (self.calibration.take(), &o.calibration) {
            (Some(mut a), Some(b)) if a.len() == b.len() => {
                for (x, y) in a.iter_mut().zip(b) {
                    x.count += y.count;
                    x.sum_probability += y.sum_probability;
                    x.positives += y.positives;
                }
                Some(a)
            }
            _ => None,
        };
    }
}

/// The figures tactread reports. All are accuracies (higher is better)
/// except [`Metric::CalibrationError`].
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Metric {
    /// Share of the 6 dots right over aligned cell pairs:
    /// (TP + TN) / (6 x aligned pairs).
    DotAccuracy,
    /// 1 - cell error rate of the cell sequence.
    CellAccuracy,
    /// 1 - character error rate.
    CharAccuracy,
    /// 1 - word error rate (words split on whitespace).
    WordAccuracy,
    /// Top-1 character accuracy from the alternatives (equals character
    /// accuracy, since the first alternative is the character read).
    Top1CharAccuracy,
    /// Character accuracy when a substitution whose reference character is
    /// among the first 2 alternatives counts as right.
    Top2CharAccuracy,
    /// As [`Metric::Top2CharAccuracy`] with the first 3 alternatives.
    Top3CharAccuracy,
    /// Expected calibration error of the dot probabilities (lower is better).
    CalibrationError,
}

impl Metric {
    /// Every metric, in report order.
    pub const ALL: [Metric; 8] = [
        Metric::DotAccuracy,
        Metric::CellAccuracy,
        Metric::CharAccuracy,
        Metric::WordAccuracy,
        Metric::Top1CharAccuracy,
        Metric::Top2CharAccuracy,
        Metric::Top3CharAccuracy,
        Metric::CalibrationError,
    ];

    /// A short human label, e.g. "character accuracy".
    pub fn label(self) -> &'static str {
        match self {
            Metric::DotAccuracy => "dot accuracy",
            Metric::CellAccuracy => "cell accuracy",
            Metric::CharAccuracy => "character accuracy",
            Metric::WordAccuracy => "word accuracy",
            Metric::Top1CharAccuracy => "top-1 character accuracy",
            Metric::Top2CharAccuracy => "top-2 character accuracy",
            Metric::Top3CharAccuracy => "top-3 character accuracy",
            Metric::CalibrationError => "dot calibration error (ECE)",
        }
    }

    /// Whether a higher value is better (all but the calibration error).
    pub fn higher_is_better(self) -> bool {
        self != Metric::CalibrationError
    }

    /// The figure of `counts`, `None` where it is undefined (an empty
    /// reference, no aligned cells, no alternatives or probabilities).
    pub fn compute(self, c: &Counts) -> Option<f64> {
        match self {
            Metric::DotAccuracy => {
                let total: u64 = c.dots.iter().map(DotCounts::total).sum();
                let right: u64 = c
                    .dots
                    .iter()
                    .map(|d| d.true_positives + d.true_negatives)
                    .sum();
                (total > 0).then(|| right as f64 / total as f64)
            }
            Metric::CellAccuracy => c.cells.accuracy(),
            Metric::CharAccuracy => c.chars.accuracy(),
            Metric::WordAccuracy => c.words.accuracy(),
            Metric::Top1CharAccuracy => top_k(c, 1),
            Metric::Top2CharAccuracy => top_k(c, 2),
            Metric::Top3CharAccuracy => top_k(c, 3),
            Metric::CalibrationError => c.calibration.as_deref().and_then(ece_of),
        }
    }
}

/// 1 - (aligned pairs not rescued within the top k + deletions +
/// insertions) / reference length.
fn top_k(c: &Counts, k: usize) -> Option<f64> {
    let hits = c.top_k_hits?[k - 1];
    let n = c.chars.reference_len();
    let aligned = c.chars.hits + c.chars.substitutions;
    let errors = aligned.saturating_sub(hits) + c.chars.deletions + c.chars.insertions;
    (n > 0).then(|| 1.0 - errors as f64 / n as f64)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sums_and_figures() {
        let a = Counts {
            chars: EditCounts {
                hits: 8,
                substitutions: 2,
                deletions: 0,
                insertions: 1,
            },
            top_k_hits: Some([8, 9, 10]),
            ..Counts::default()
        };
        let b = Counts {
            chars: EditCounts {
                hits: 10,
                ..EditCounts::default()
            },
            top_k_hits: Some([10, 10, 10]),
            ..Counts::default()
        };
        let s = Counts::sum([&a, &b].into_iter());
        assert_eq!(s.chars.reference_len(), 20);
        // 3 errors in 20 characters.
        assert!((Metric::CharAccuracy.compute(&s).unwrap() - 0.85).abs() < 1e-12);
        assert_eq!(
            Metric::Top1CharAccuracy.compute(&s),
            Metric::CharAccuracy.compute(&s)
        );
        // top-3 rescues both substitutions; the insertion stays: 1 - 1/20.
        assert!((Metric::Top3CharAccuracy.compute(&s).unwrap() - 0.95).abs() < 1e-12);
        let c = Counts::default();
        let s = Counts::sum([&a, &c].into_iter());
        assert_eq!(s.top_k_hits, None);
        assert_eq!(Metric::DotAccuracy.compute(&s), None);
    }
}
