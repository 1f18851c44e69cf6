//! The recording view: a recording's taxel signals along the position
//! axis, with the ground-truth cells (and, when given, the decoded cells)
//! drawn beneath at their places.
//!
//! Three panels share one x axis: the pressure summed over taxels, a heat
//! map with one row per taxel, and the cells, each as its six dot places
//! (raised dots filled). Decoded cells that differ from the aligned ground
//! truth are drawn in the "wrong" colour; ground-truth cells the decoder
//! missed are underlined in it.

use super::palette::{ramp, FLAT, GRID, INDIGO, INK, MUTED, PAPER, SEA, WRONG};
use super::plots::DrawResult;
use crate::braille::Cell;
use crate::metrics::{align, EditOp};
use crate::recording::Recording;
use plotters::prelude::*;

/// Cell-to-cell distance used when a recording does not say: 6.2 mm
/// (NLS Specification 800, Library of Congress 2008, section 3.2).
pub const DEFAULT_CELL_PITCH_MM: f64 = 6.2;

/// Dot-to-dot distance within a cell as a share of the cell pitch:
/// 2.34 mm / 6.2 mm (NLS Specification 800, section 3.2).
const DOT_SPACING_SHARE: f64 = 2.34 / 6.2;

/// Most heat-map columns drawn; frames are pooled (maximum) into columns.
const HEAT_COLUMNS: usize = 360;
/// Shades of the heat map (runs of one shade are drawn as one rectangle).
const HEAT_LEVELS: usize = 20;

/// A cell at a place along the view's x axis (see [`view_axis`]).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PlacedCell {
    /// The cell.
    pub cell: Cell,
    /// Its centre on the x axis: mm along the line, or seconds for a
    /// recording with neither positions nor a speed tag.
    pub at: f64,
}

/// The x axis of a recording view.
#[derive(Debug, Clone, PartialEq)]
pub struct ViewAxis {
    /// One value per frame, length `n_frames`.
    pub values: Vec<f64>,
    /// The axis title, e.g. "position along the line, mm".
    pub label: String,
    /// Whether the values are millimetres (else seconds).
    pub in_mm: bool,
}

/// What to draw for one recording.
#[derive(Debug, Clone)]
pub struct RecordingView<'a> {
    /// Title above the view, e.g. the recording's id and its text.
    pub title: String,
    /// The recording.
    pub recording: &'a Recording,
    /// Ground-truth cells at their places.
    pub truth: Vec<PlacedCell>,
    /// Decoded cells at their places, when a model read the recording.
    pub decoded: Option<Vec<PlacedCell>>,
}

/// The x axis of a recording: its positions in mm when the rig has an
/// encoder; else time times the manifest tag `speed_mm_s` when present
/// (steady sliding assumed); else time in seconds.
pub fn view_axis(recording: &Recording) -> ViewAxis {
    if let Some(p) = &recording.position_mm {
        return ViewAxis {
            values: p.clone(),
            label: "position along the line, mm".into(),
            in_mm: true,
        };
    }
    let speed = recording
        .manifest
        .tags
        .get("speed_mm_s")
        .and_then(|v| v.as_f64())
        .filter(|v| v.is_finite() && *v > 0.0);
    match speed {
        Some(v) => {
            let t0 = recording.time_s.first().copied().unwrap_or(0.0);
            ViewAxis {
                values: recording.time_s.iter().map(|t| (t - t0) * v).collect(),
                label: format!("position along the line, mm (time x {v} mm/s)"),
                in_mm: true,
            }
        }
        None => ViewAxis {
            values: recording.time_s.clone(),
            label: "time, s (no positions in this recording)".into(),
            in_mm: false,
        },
    }
}

/// Cells placed one pitch apart starting at `first`.
pub fn place_evenly(cells: &[Cell], first: f64, pitch: f64) -> Vec<PlacedCell> {
    cells
        .iter()
        .enumerate()
        .map(|(i, &cell)| PlacedCell {
            cell,
            at: first + pitch * i as f64,
        })
        .collect()
}

/// Ground-truth cells placed on a recording's axis.
///
/// * Pitch: the manifest tag `cell_pitch_mm`, else `cell_spacing_mm` (as
///   tactread's simulator writes it), else [`DEFAULT_CELL_PITCH_MM`].
/// * Centre of the first cell: the tag `first_cell_mm`; else, for a
///   recording with positions and a `dot_spacing_mm` tag (the simulator's
///   page coordinates, where x = 0 is the left dot column of the first
///   cell), half the dot spacing; else half a pitch after the start of the
///   axis.
/// * On a time axis (no positions, no speed) the cells are spread evenly
///   over the recording.
pub fn place_truth(recording: &Recording, cells: &[Cell]) -> Vec<PlacedCell> {
    let axis = view_axis(recording);
    let tag = |k: &str| {
        recording
            .manifest
            .tags
            .get(k)
            .and_then(|v| v.as_f64())
            .filter(|v| v.is_finite())
    };
    let (lo, hi) = range(&axis.values);
    if axis.in_mm {
        let pitch = tag("cell_pitch_mm")
            .or_else(|| tag("cell_spacing_mm"))
            .filter(|p| *p > 0.0)
            .unwrap_or(DEFAULT_CELL_PITCH_MM);
        let page_origin = recording.position_mm.as_ref().and(tag("dot_spacing_mm"));
        let first = tag("first_cell_mm")
            .or_else(|| page_origin.map(|d| d / 2.0))
            .unwrap_or(lo + pitch / 2.0);
        place_evenly(cells, first, pitch)
    } else {
        let pitch = (hi - lo) / cells.len().max(1) as f64;
        place_evenly(cells, lo + pitch / 2.0, pitch)
    }
}

fn range(v: &[f64]) -> (f64, f64) {
    let lo = v
        .iter()
        .copied()
        .filter(|x| x.is_finite())
        .fold(f64::INFINITY, f64::min);
    let hi = v
        .iter()
        .copied()
        .filter(|x| x.is_finite())
        .fold(f64::NEG_INFINITY, f64::max);
    if lo.is_finite() && hi > lo {
        (lo, hi)
    } else if lo.is_finite() {
        (lo - 1.0, lo + 1.0)
    } else {
        (0.0, 1.0)
    }
}

fn percentile(mut v: Vec<f32>, p: f64) -> f64 {
    v.retain(|x| x.is_finite());
    if v.is_empty() {
        return 0.0;
    }
    v.sort_by(f32::total_cmp);
    let i = ((v.len() - 1) as f64 * p).round() as usize;
    f64::from(v[i.min(v.len() - 1)])
}

/// How one drawn cell relates to the other row.
#[derive(Clone, Copy, PartialEq)]
enum Mark {
    Right,
    Wrong,
    Missed,
}

/// The recording view as an SVG document (1100 px wide).
pub fn recording_view_svg(view: &RecordingView) -> crate::error::Result<String> {
    draw_view(view).map_err(|e| crate::error::Error::Output {
        path: "<recording view>".into(),
        reason: format!("the view could not be drawn: {e}"),
    })
}

fn draw_view(view: &RecordingView) -> DrawResult<String> {
    let rec = view.recording;
    let axis = view_axis(rec);
    let mut x_all: Vec<f64> = axis.values.clone();
    x_all.extend(view.truth.iter().map(|c| c.at));
    if let Some(d) = &view.decoded {
        x_all.extend(d.iter().map(|c| c.at));
    }
    let (mut x0, mut x1) = range(&x_all);
    let pad = (x1 - x0) * 0.01;
    x0 -= pad;
    x1 += pad;

    let n_frames = rec.frames.nrows().min(axis.values.len());
    let n_taxels = rec.frames.ncols();
    let width = 1100u32;
    let heat_h = (n_taxels as u32 * 7).clamp(140, 320);
    let cells_h = if view.decoded.is_some() { 170 } else { 110 };
    let height = 40 + 140 + heat_h + cells_h;
    let left = 86u32;

    let mut buf = String::new();
    {
        let root = SVGBackend::with_string(&mut buf, (width, height)).into_drawing_area();
        root.fill(&PAPER)?;
        let root = root.titled(&view.title, ("sans-serif", 20).into_font().color(&INK))?;
        let (sum_area, rest) = root.split_vertically(140);
        let (heat_area, cell_area) = rest.split_vertically(heat_h);
        let label = ("sans-serif", 15).into_font().color(&INK);
        let desc = ("sans-serif", 15).into_font().color(&MUTED);

        // Each taxel's baseline (its 10th percentile over the recording) is
        // taken off, so that contact shows rather than offsets that differ
        // from taxel to taxel.
        let baseline: Vec<f32> = (0..n_taxels)
            .map(|t| {
                percentile(
                    rec.frames.column(t).iter().copied().step_by(3).collect(),
                    0.1,
                ) as f32
            })
            .collect();
        // Panel 1: pressure above baseline, summed over taxels.
        let sums: Vec<(f64, f64)> = (0..n_frames)
            .map(|i| {
                (
                    axis.values[i],
                    f64::from(
                        rec.frames
                            .row(i)
                            .iter()
                            .zip(&baseline)
                            .map(|(v, b)| v - b)
                            .filter(|v| v.is_finite())
                            .sum::<f32>(),
                    ),
                )
            })
            .collect();
        let step = (sums.len() / 2000).max(1);
        let shown: Vec<(f64, f64)> = sums.iter().step_by(step).copied().collect();
        let (s0, s1) = range(&shown.iter().map(|p| p.1).collect::<Vec<_>>());
        let mut chart = ChartBuilder::on(&sum_area)
            .margin_left(10)
            .margin_right(16)
            .margin_top(6)
            .x_label_area_size(0)
            .y_label_area_size(left)
            .build_cartesian_2d(x0..x1, s0..s1 + (s1 - s0) * 0.05)?;
        chart
            .configure_mesh()
            .y_desc(format!("sum, {}", rec.manifest.sensor.units))
            .axis_desc_style(desc.clone())
            .label_style(label.clone())
            .bold_line_style(GRID)
            .light_line_style(TRANSPARENT)
            .axis_style(MUTED)
            .y_labels(3)
            .disable_x_mesh()
            .draw()?;
        chart.draw_series(LineSeries::new(shown, SEA.stroke_width(1)))?;

        // Panel 2: one heat-map row per taxel, ordered across then along
        // the line when the manifest gives taxel positions.
        let mut order: Vec<usize> = (0..n_taxels).collect();
        if let Some(pos) = rec
            .manifest
            .sensor
            .positions_mm
            .as_ref()
            .filter(|p| p.len() == n_taxels)
        {
            order.sort_by(|&a, &b| {
                pos[a][1]
                    .total_cmp(&pos[b][1])
                    .then(pos[a][0].total_cmp(&pos[b][0]))
            });
        }
        let cols = HEAT_COLUMNS.min(n_frames.max(1));
        let col_w = (x1 - x0) / cols as f64;
        let mut pooled = vec![vec![f32::NAN; cols]; n_taxels];
        for i in 0..n_frames {
            let x = axis.values[i];
            if !x.is_finite() {
                continue;
            }
            let c = (((x - x0) / col_w).floor().max(0.0) as usize).min(cols - 1);
            for (t, row) in pooled.iter_mut().enumerate() {
                let v = rec.frames[[i, t]] - baseline[t];
                if v.is_finite() && (row[c].is_nan() || v > row[c]) {
                    row[c] = v;
                }
            }
        }
        let sample: Vec<f32> = pooled.iter().flatten().copied().step_by(7).collect();
        let lo = percentile(sample.clone(), 0.01).max(0.0);
        let hi = percentile(sample, 0.995).max(lo + 1e-9);
        let mut chart = ChartBuilder::on(&heat_area)
            .margin_left(10)
            .margin_right(16)
            .x_label_area_size(0)
            .y_label_area_size(left)
            .build_cartesian_2d(x0..x1, 0.0..n_taxels.max(1) as f64)?;
        chart
            .configure_mesh()
            .y_desc(format!("{n_taxels} taxels"))
            .axis_desc_style(desc.clone())
            .label_style(label.clone())
            .y_label_formatter(&|_| String::new())
            .disable_mesh()
            .axis_style(MUTED)
            .draw()?;
        let mut rects = Vec::new();
        for (r, &t) in order.iter().enumerate() {
            let y_top = (n_taxels - r) as f64;
            let mut c = 0;
            while c < cols {
                let level = |v: f32| -> usize {
                    if !v.is_finite() {
                        return 0;
                    }
                    let u = ((f64::from(v) - lo) / (hi - lo)).clamp(0.0, 1.0);
                    (u * (HEAT_LEVELS - 1) as f64).round() as usize
                };
                let l = level(pooled[t][c]);
                let mut e = c + 1;
                while e < cols && level(pooled[t][e]) == l {
                    e += 1;
                }
                if l > 0 {
                    let color = ramp(l as f64 / (HEAT_LEVELS - 1) as f64);
                    rects.push(Rectangle::new(
                        [
                            (x0 + c as f64 * col_w, y_top),
                            (x0 + e as f64 * col_w, y_top - 1.0),
                        ],
                        color.filled(),
                    ));
                }
                c = e;
            }
        }
        chart.draw_series(rects)?;

        // Panel 3: the cells.
        let rows: Vec<(&str, &[PlacedCell], RGBColor)> = match &view.decoded {
            Some(d) => vec![("truth", &view.truth[..], INDIGO), ("decoded", &d[..], SEA)],
            None => vec![("truth", &view.truth[..], INDIGO)],
        };
        let n_rows = rows.len() as f64;
        let mut marks: Vec<Vec<Mark>> = rows.iter().map(|r| vec![Mark::Right; r.1.len()]).collect();
        if let Some(d) = &view.decoded {
            let t: Vec<Cell> = view.truth.iter().map(|c| c.cell).collect();
            let h: Vec<Cell> = d.iter().map(|c| c.cell).collect();
            for op in align(&t, &h).ops {
                match op {
                    EditOp::Substitute { hypothesis, .. } | EditOp::Insert { hypothesis } => {
                        marks[1][hypothesis] = Mark::Wrong
                    }
                    EditOp::Delete { reference } => marks[0][reference] = Mark::Missed,
                    EditOp::Match { .. } => {}
                }
            }
        }
        let row_labels: Vec<&str> = rows.iter().map(|r| r.0).collect();
        let mut chart = ChartBuilder::on(&cell_area)
            .margin_left(10)
            .margin_right(16)
            .margin_bottom(6)
            .x_label_area_size(40)
            .y_label_area_size(left)
            .build_cartesian_2d(x0..x1, 0.0..n_rows)?;
        let ylab = |v: &f64| -> String {
            let k = v - 0.5;
            let i = k.round();
            if (k - i).abs() < 1e-6 && i >= 0.0 && (i as usize) < row_labels.len() {
                row_labels[row_labels.len() - 1 - i as usize].to_string()
            } else {
                String::new()
            }
        };
        chart
            .configure_mesh()
            .x_desc(axis.label.clone())
            .axis_desc_style(desc)
            .label_style(label)
            .y_labels(2 * rows.len() + 1)
            .y_label_formatter(&ylab)
            .disable_mesh()
            .axis_style(MUTED)
            .draw()?;
        let plot_px = f64::from(width - left - 26);
        let pitch = {
            let t = &view.truth;
            if t.len() >= 2 {
                ((t[t.len() - 1].at - t[0].at) / (t.len() - 1) as f64).abs()
            } else if axis.in_mm {
                DEFAULT_CELL_PITCH_MM
            } else {
                (x1 - x0) / 10.0
            }
        };
        let px_per_unit = plot_px / (x1 - x0);
        let cell_px = pitch * px_per_unit;
        let radius = (cell_px * 0.09).clamp(1.5, 5.0) as i32;
        let dx = pitch * DOT_SPACING_SHARE / 2.0;
        for (ri, (_, cells, color)) in rows.iter().enumerate() {
            let base = n_rows - 1.0 - ri as f64; // row spans [base, base + 1]
            let dy = 0.17;
            let top = base + 0.78;
            let mut shapes: Vec<DynElement<SVGBackend, (f64, f64)>> = Vec::new();
            for (k, pc) in cells.iter().enumerate() {
                let mark = marks[ri][k];
                let c = if mark == Mark::Wrong { WRONG } else { *color };
                for d in 1..=6u8 {
                    let col = if d <= 3 { -dx } else { dx };
                    let y = top - dy * f64::from((d - 1) % 3);
                    let p = (pc.at + col, y);
                    if pc.cell.has_dot(d) {
                        shapes.push(Circle::new(p, radius, c.filled()).into_dyn());
                    } else {
                        shapes.push(
                            Circle::new(p, (radius - 1).max(1), FLAT.stroke_width(1)).into_dyn(),
                        );
                    }
                }
                if mark == Mark::Missed {
                    shapes.push(
                        PathElement::new(
                            vec![
                                (pc.at - dx * 1.6, base + 0.06),
                                (pc.at + dx * 1.6, base + 0.06),
                            ],
                            WRONG.stroke_width(3),
                        )
                        .into_dyn(),
                    );
                }
                if cell_px >= 22.0 {
                    shapes.push(
                        Text::new(
                            pc.cell.dot_string(),
                            (pc.at - dx * 1.4, base + 0.24),
                            ("sans-serif", 13).into_font().color(&MUTED),
                        )
                        .into_dyn(),
                    );
                }
            }
            chart.draw_series(shapes)?;
        }
        root.present()?;
    }
    Ok(buf)
}

#[cfg(test)]
mod tests {
    use super::super::palette::hex;
    use super::*;
    use crate::recording::{Manifest, SensorInfo, MANIFEST_FORMAT, MANIFEST_VERSION};
    use ndarray::Array2;
    use std::collections::BTreeMap;

    pub(crate) fn toy_recording(position: bool) -> Recording {
        let n = 400;
        let taxels = 12;
        let frames = Array2::from_shape_fn((n, taxels), |(i, t)| {
            let x = i as f64 * 0.1;
            let bump = (-(((x % 2.34) - 1.17) / 0.4).powi(2)).exp();
            (bump * (1.0 + (t % 3) as f64 * 0.2)) as f32
        });
        Recording {
            manifest: Manifest {
                format: MANIFEST_FORMAT.into(),
                version: MANIFEST_VERSION,
                frames: "f.csv".into(),
                npy_columns: None,
                sensor: SensorInfo {
                    name: None,
                    taxels,
                    positions_mm: None,
                    sample_rate_hz: 100.0,
                    units: "kPa".into(),
                },
                text: Some("ab".into()),
                lang: Some("en".into()),
                notes: None,
                tags: BTreeMap::new(),
            },
            time_s: (0..n).map(|i| i as f64 / 100.0).collect(),
            position_mm: position.then(|| (0..n).map(|i| i as f64 * 0.1).collect()),
            frames,
        }
    }

    #[test]
    fn axis_and_placement() {
        let r = toy_recording(true);
        let a = view_axis(&r);
        assert!(a.in_mm);
        let cells = [Cell::from_mask(1), Cell::from_mask(3)];
        let p = place_truth(&r, &cells);
        assert!((p[0].at - 3.1).abs() < 1e-9 && (p[1].at - 9.3).abs() < 1e-9);
        let mut sim = toy_recording(true);
        sim.manifest
            .tags
            .insert("cell_spacing_mm".into(), serde_json::json!(6.0));
        sim.manifest
            .tags
            .insert("dot_spacing_mm".into(), serde_json::json!(2.5));
        let p = place_truth(&sim, &cells);
        assert!((p[0].at - 1.25).abs() < 1e-9 && (p[1].at - 7.25).abs() < 1e-9);
        let mut r = toy_recording(false);
        assert!(!view_axis(&r).in_mm);
        r.manifest
            .tags
            .insert("speed_mm_s".into(), serde_json::json!(20.0));
        let a = view_axis(&r);
        assert!(a.in_mm && (a.values[100] - 20.0).abs() < 1e-9);
    }

    #[test]
    fn draws_cells_and_marks_wrong_ones() {
        let r = toy_recording(true);
        let truth = place_evenly(
            &[Cell::from_mask(1), Cell::from_mask(3), Cell::from_mask(9)],
            3.0,
            6.2,
        );
        let decoded = place_evenly(&[Cell::from_mask(1), Cell::from_mask(7)], 3.2, 6.2);
        let view = RecordingView {
            title: "shelf <label>".into(),
            recording: &r,
            truth,
            decoded: Some(decoded),
        };
        let svg = recording_view_svg(&view).unwrap();
        assert!(svg.starts_with("<svg"));
        assert!(svg.contains("shelf &lt;label&gt;"));
        // The substituted decoded cell is drawn in the "wrong" colour.
        assert!(svg.to_lowercase().contains(&hex(WRONG)));
        assert!(svg.contains("decoded"));
        // Without decoded cells nothing is wrong.
        let view = RecordingView {
            decoded: None,
            ..view
        };
        let svg = recording_view_svg(&view).unwrap();
        assert!(!svg.to_lowercase().contains(&hex(WRONG)));
    }
}
