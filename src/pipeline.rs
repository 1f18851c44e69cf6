//! The whole reading path for one recording: preprocessing, the network,
//! the beam decoder (and lexicon rescoring when the decoder has one), and
//! the places of the decoded cells on the recording view's axis. Shared by
//! `tactread decode`, `tactread evaluate` and `tactread show --model`.

use crate::decode::{BrailleCode, Decoded, Decoder};
use crate::net::{Model, Network};
use crate::prep::Grid;
use crate::recording::Recording;
use crate::report::{view_axis, PlacedCell};
use crate::{Error, Result};
use ndarray::Array2;

/// The network's output for one recording: `[n_samples, 65]` natural-log
/// probabilities over the grid samples of the model's preprocessing.
/// `name` names the recording in errors.
pub fn log_probs(model: &Model, rec: &Recording, name: &str) -> Result<Array2<f32>> {
    model.check_taxels(rec.frames.ncols(), name)?;
    let x = model.prep.apply(rec, name)?;
    let network: &Network = &model.network;
    network
        .forward(&[x.view()])?
        .into_iter()
        .next()
        .ok_or_else(|| Error::config("model", "the network returned no output"))
}

/// Read one recording with `model` and `decoder`: the decoded text (after
/// lexicon rescoring when the decoder has a lexicon) and the beam's
/// reading before rescoring, with its per-cell evidence.
pub fn read_recording<C: BrailleCode>(
    model: &Model,
    decoder: &Decoder<'_, C>,
    rec: &Recording,
    name: &str,
) -> Result<Decoded> {
    let lp = log_probs(model, rec, name)?;
    decoder.decode(lp.view())
}

/// The decoded cells of `decoded.reading` placed on the x axis of
/// [`crate::report::view_axis`]: each cell at the middle of its frame span,
/// network frames mapped back through the model's resampling grid (and
/// decimation) to the raw frame that first reached that grid point.
/// Empty when the model resamples by position and the recording has none.
pub fn place_decoded(model: &Model, rec: &Recording, decoded: &Decoded) -> Vec<PlacedCell> {
    let axis = view_axis(rec);
    let coords: &[f64] = match model.prep.grid {
        Grid::Position { .. } => match rec.position_mm.as_deref() {
            Some(p) => p,
            None => return Vec::new(),
        },
        Grid::Time { .. } => &rec.time_s,
    };
    let spacing = match model.prep.grid {
        Grid::Position { step_mm } => step_mm,
        Grid::Time { rate_hz } => 1.0 / rate_hz,
    } * model.prep.decimate.max(1) as f64;
    // The grid follows the furthest point reached (see crate::prep).
    let mut furthest = Vec::with_capacity(coords.len());
    let mut m = f64::NEG_INFINITY;
    for &c in coords {
        m = m.max(c);
        furthest.push(m);
    }
    let (Some(&c0), Some(last)) = (coords.first(), axis.values.last().copied()) else {
        return Vec::new();
    };
    let at_coord = |c: f64| -> f64 {
        let i = furthest.partition_point(|&v| v < c);
        axis.values.get(i).copied().unwrap_or(last)
    };
    decoded
        .reading
        .cells
        .iter()
        .map(|e| {
            let mid = (e.frames.0 + e.frames.1) as f64 / 2.0;
            PlacedCell {
                cell: e.cell,
                at: at_coord(c0 + mid * spacing),
            }
        })
        .collect()
}
