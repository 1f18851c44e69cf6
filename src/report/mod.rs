//! Reports: one self-contained HTML page with SVG plots of an
//! [`Evaluation`](crate::metrics::Evaluation), and the recording view.

mod write;

pub(crate) use write::write_atomic;
