//! Reports: one self-contained HTML page with SVG plots of an evaluation
//! ([`crate::metrics::Evaluation`]), and the recording view.
//!
//! The page works offline: CSS and SVG are inline, there are no scripts
//! and no external resources. It holds the headline table and an interval
//! plot, the reliability diagram, per-dot errors, a character confusion
//! heat map, accuracy against sliding speed, a per-recording table with the
//! errors marked in the text, and recording views (taxel signals along the
//! position axis with the decoded and ground-truth cells beneath). Every
//! page carries a caution that decoded text is machine-read.
//!
//! Charts with axes are drawn with `plotters` (SVG backend); the confusion
//! heat map is plain hand-written SVG.
//!
//! ```
//! use tactread::metrics::{evaluate, EvalRecording, EvalSettings, Hypothesis, Reference};
//! let rec = EvalRecording {
//!     id: "lift-3".into(),
//!     reference: Reference { text: "level 3".into(), cells: vec![] },
//!     without_lexicon: Hypothesis { text: "lovel 3".into(), ..Default::default() },
//!     ..Default::default()
//! };
//! let e = evaluate("demo", &[rec], &EvalSettings::default()).unwrap();
//! let page = tactread::report::html_report(&e, &[]).unwrap();
//! assert!(page.contains("machine-read"));
//! ```

mod html;
mod palette;
mod plots;
mod view;

use crate::fsutil::write_atomic;
pub use html::html_report;
pub use view::{
    place_evenly, place_truth, recording_view_svg, view_axis, PlacedCell, RecordingView, ViewAxis,
    DEFAULT_CELL_PITCH_MM,
};

use crate::error::Result;
use crate::metrics::Evaluation;
use std::path::Path;

/// Write the report page for `eval` (with the given recording views) to
/// `path`, atomically.
pub fn write_html_report(
    path: impl AsRef<Path>,
    eval: &Evaluation,
    views: &[RecordingView],
) -> Result<()> {
    let page = html_report(eval, views)?;
    write_atomic(path.as_ref(), page.as_bytes())
}

/// Write an SVG document (e.g. from [`recording_view_svg`]) to `path`,
/// atomically.
pub fn write_svg(path: impl AsRef<Path>, svg: &str) -> Result<()> {
    write_atomic(path.as_ref(), svg.as_bytes())
}
