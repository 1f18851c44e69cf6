//! # tactread: read braille by touch
//!
//! A sensorised fingertip (an array of pressure taxels) slides over raised
//! braille and records a stream of frames. tactread turns such recordings
//! into text and measures how well they were read. Everything runs on a CPU.
//!
//! The pipeline, one module per stage:
//!
//! ```text
//! recording frames ──► prep ──► net (GRU, trained with CTC) ──► per-frame dot
//! probabilities (dots 1-6 + blank) ──► decode (beam search with the braille
//! code's indicator state) ──► ranked character hypotheses ──► lexicon (fst)
//! rescoring whole words ──► text + metrics + reports
//! ```
//!
//! | stage | module |
//! | --- | --- |
//! | cells, Unicode patterns, code tables | [`braille`] |
//! | frames files and manifests | [`recording`] |
//! | baseline, scale, resampling by position or time | [`prep`] |
//! | GRU network, output head, CTC loss, Adam | [`net`] |
//! | batching, training loop, checkpoints | [`train`] |
//! | beam search, character hypotheses | [`decode`] |
//! | word lists, fst lexicons, word rescoring | [`lexicon`] |
//! | simulated recordings from text | [`simulate`] |
//! | alignment, accuracies, calibration, bootstrap intervals, comparisons | [`metrics`] |
//! | HTML report and recording view (SVG) | [`report`] |
//! | streaming: raw frames in, final words out, bounded memory | [`stream`] |
//! | many recordings read in parallel | [`batch`] |
//! | the whole reading of one recording | [`pipeline`] |
//! | atomic writes, output checks, UTF-8 text files | [`fsutil`] |
//!
//! ## Example: text to cells and back
//!
//! ```
//! use tactread::{cells_to_unicode, Cell};
//! let cells = [Cell::from_dots(&[1]).unwrap(), Cell::from_dots(&[1, 2]).unwrap()];
//! assert_eq!(cells_to_unicode(&cells), "\u{2801}\u{2803}");
//! ```
#![deny(missing_docs)]

pub mod batch;
pub mod braille;
pub mod decode;
mod error;
pub mod fsutil;
pub mod lexicon;
pub mod metrics;
pub mod net;
pub mod pipeline;
pub mod prep;
pub mod recording;
pub mod report;
pub mod simulate;
pub mod stream;
#[cfg(test)]
mod testutil;
mod text_file;
pub mod train;

pub use braille::{cells_to_unicode, Cell, CellReader, CodeTable, Decoded, ReaderState};
pub use error::{Error, Location, Result};
