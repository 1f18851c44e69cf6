//! Measuring how well recordings were read: alignment, dot, cell,
//! character and word accuracy, top-k accuracy, calibration, confusions,
//! breakdowns, bootstrap confidence intervals and paired comparisons.
//!
//! # Inputs
//!
//! Plain data per recording ([`EvalRecording`]): the ground truth (text and
//! cells), what the decoder read without the lexicon and, optionally, with
//! it ([`Hypothesis`]: text, cells, optional dot probabilities
//! `[n_cells][6]`, optional ranked alternatives per character), and numeric
//! tags such as `speed_mm_s`. [`evaluate`] turns a test set into an
//! [`Evaluation`], which [`Evaluation::save`] writes as JSON (format
//! `tactread-metrics`, version 1).
//!
//! # Definitions
//!
//! All alignments are unit-cost Levenshtein alignments with backtrace
//! (Wagner and Fischer 1974; see [`align`]).
//!
//! * **Character accuracy** = 1 - CER, with CER = (S + D + I) / N over the
//!   character alignment of the texts (Unicode scalar values, spaces
//!   included, nothing normalised). Summed over the test set before
//!   dividing, so long recordings weigh more. It is negative when the
//!   hypothesis has more errors than the reference has characters.
//! * **Word accuracy** = 1 - WER, the same on words split on whitespace.
//! * **Cell accuracy** = 1 - the error rate of the cell sequences.
//! * **Dot accuracy**: the cell sequences are aligned; over the *aligned
//!   pairs* (matches and substitutions), the share of the 6 dot decisions
//!   that are right. An inserted cell (read, not in the ground truth) and a
//!   deleted cell (in the ground truth, not read) have no partner: they are
//!   left out of the dot figures and counted by cell accuracy instead, so
//!   dot accuracy says how well the dots of found cells were read, and cell
//!   accuracy how well cells were found and read. **Per-dot precision and
//!   recall** for dots 1-6 use the same aligned pairs.
//! * **Top-k character accuracy** (k = 1, 2, 3): as character accuracy,
//!   but an aligned pair counts as right when the reference character is
//!   among the first k alternatives of the character read. Top-1 equals
//!   character accuracy.
//! * **Calibration**: each dot of each aligned cell pair is one event (the
//!   dot probability, and whether the dot is raised in the ground truth);
//!   equal-width bins (default 10) give the reliability diagram and the
//!   expected calibration error (Naeini et al. 2015; see [`reliability`]).
//! * **Confusions**: the character substitutions of the alignment, most
//!   frequent first, with their rate per occurrence of the reference
//!   character.
//! * **Breakdown**: the figures of the recordings in equal-width bins of a
//!   numeric tag (default `speed_mm_s`, 4 bins over the observed range).
//! * **Confidence intervals**: 95% percentile bootstrap (Efron 1979),
//!   resampling recordings, 1000 resamples, fixed seed; paired for
//!   comparisons ([`compare`]).
//!
//! ```
//! use tactread::metrics::{evaluate, EvalRecording, EvalSettings, Hypothesis, Metric, Reference};
//! use tactread::Cell;
//! let c = |m| Cell::from_mask(m);
//! let rec = EvalRecording {
//!     id: "shelf-1".into(),
//!     reference: Reference { text: "ab".into(), cells: vec![c(1), c(3)] },
//!     without_lexicon: Hypothesis { text: "ak".into(), cells: vec![c(1), c(7)], ..Default::default() },
//!     ..Default::default()
//! };
//! let e = evaluate("demo", &[rec], &EvalSettings::default()).unwrap();
//! let h = &e.without_lexicon.headline;
//! assert_eq!(h[&Metric::CharAccuracy].value, 0.5);
//! // 12 dot decisions, one wrong (dot 3 read as raised).
//! assert!((h[&Metric::DotAccuracy].value - 11.0 / 12.0).abs() < 1e-12);
//! ```

mod align;
mod bootstrap;
mod calibration;
mod compare;
mod counts;
mod evaluate;

pub use align::{
    align, char_edit_counts, edit_distance, word_edit_counts, Alignment, EditCounts, EditOp,
};
pub use bootstrap::Estimate;
pub use calibration::{
    reliability, BinSums, Calibration, ReliabilityBin, DEFAULT_CALIBRATION_BINS,
};
pub use compare::{
    compare, CompareSettings, Comparison, MetricDifference, SetComparison, COMPARISON_FORMAT,
    COMPARISON_VERSION,
};
pub use counts::{Counts, DotCounts, Metric};
pub use evaluate::{
    evaluate, Breakdown, BreakdownBin, Confusion, DotFigures, EvalRecording, EvalSettings,
    Evaluation, Hypothesis, RecordingInfo, RecordingRow, Reference, SystemMetrics, METRICS_FORMAT,
    METRICS_VERSION,
};
