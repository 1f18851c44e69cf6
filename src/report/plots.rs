//! The report's charts as SVG strings: headline intervals, reliability
//! diagram, per-dot errors, accuracy against a tag (speed), and the
//! character confusion heat map.
//!
//! Charts with axes are drawn with `plotters` (SVG backend); the heat map
//! is a plain grid of labelled squares and is written by hand.

use super::palette::{char_label, escape, hex, ramp, GRID, INK, MUTED, PAPER, RUST, SEA, WRONG};
use crate::metrics::{Breakdown, Calibration, Confusion, DotFigures, Estimate, Metric};
use plotters::prelude::*;
use std::collections::{BTreeMap, HashMap};
use std::fmt::Write;

pub(crate) type DrawResult<T> = std::result::Result<T, Box<dyn std::error::Error>>;

const FONT: &str = "sans-serif";

fn label_style() -> TextStyle<'static> {
    (FONT, 15).into_font().color(&INK)
}

fn desc_style() -> TextStyle<'static> {
    (FONT, 15).into_font().color(&MUTED)
}

fn caption_style() -> TextStyle<'static> {
    (FONT, 19).into_font().color(&INK)
}

/// A named series of headline estimates (one per hypothesis set).
pub(crate) struct HeadlineSeries<'a> {
    pub name: &'a str,
    pub color: RGBColor,
    pub figures: &'a BTreeMap<Metric, Estimate>,
}

/// Accuracy figures with their intervals, one row per metric, one marker
/// per hypothesis set ("forest plot").
pub(crate) fn headline_svg(series: &[HeadlineSeries]) -> DrawResult<String> {
    let metrics: Vec<Metric> = Metric::ALL
        .iter()
        .copied()
        .filter(|m| m.higher_is_better() && *m != Metric::Top1CharAccuracy)
        .filter(|m| series.iter().any(|s| s.figures.contains_key(m)))
        .collect();
    let lowest = series
        .iter()
        .flat_map(|s| metrics.iter().filter_map(|m| s.figures.get(m)))
        .map(|e| e.low)
        .fold(1.0f64, f64::min);
    let x0 = ((lowest * 100.0 - 5.0) / 10.0).floor().max(-10.0) * 10.0;
    let n = metrics.len().max(1);
    let height = 70 + 38 * n as u32;
    let mut buf = String::new();
    {
        let root = SVGBackend::with_string(&mut buf, (720, height)).into_drawing_area();
        root.fill(&PAPER)?;
        let mut chart = ChartBuilder::on(&root)
            .margin(14)
            .x_label_area_size(40)
            .y_label_area_size(190)
            .build_cartesian_2d(x0..100.0f64, -0.5f64..(n as f64 - 0.5))?;
        let labels: Vec<&str> = metrics.iter().map(|m| m.label()).collect();
        let ylab = |v: &f64| -> String {
            let i = v.round();
            if (v - i).abs() < 1e-6 && i >= 0.0 {
                // Top row first.
                labels
                    .get(n - 1 - i as usize)
                    .map(|s| s.to_string())
                    .unwrap_or_default()
            } else {
                String::new()
            }
        };
        chart
            .configure_mesh()
            .x_desc("percent, with 95% bootstrap interval")
            .axis_desc_style(desc_style())
            .label_style(label_style())
            .bold_line_style(GRID)
            .light_line_style(TRANSPARENT)
            .axis_style(MUTED)
            .y_labels(n + 1)
            .y_label_formatter(&ylab)
            .disable_y_mesh()
            .draw()?;
        let k = series.len() as f64;
        for (si, s) in series.iter().enumerate() {
            let off = if k > 1.0 {
                (si as f64 - (k - 1.0) / 2.0) * 0.22
            } else {
                0.0
            };
            let rows: Vec<(f64, Estimate)> = metrics
                .iter()
                .enumerate()
                .filter_map(|(i, m)| s.figures.get(m).map(|e| ((n - 1 - i) as f64 + off, *e)))
                .collect();
            let color = s.color;
            chart.draw_series(rows.iter().map(|(y, e)| {
                PathElement::new(
                    vec![(e.low * 100.0, *y), (e.high * 100.0, *y)],
                    color.stroke_width(3),
                )
            }))?;
            chart
                .draw_series(
                    rows.iter()
                        .map(|(y, e)| Circle::new((e.value * 100.0, *y), 5, color.filled())),
                )?
                .label(s.name)
                .legend(move |(x, y)| Circle::new((x + 6, y), 5, color.filled()));
            chart.draw_series(rows.iter().map(|(y, e)| {
                Text::new(
                    format!("{:.1}", e.value * 100.0),
                    (e.high * 100.0, *y),
                    (FONT, 14).into_font().color(&color),
                )
            }))?;
        }
        chart
            .configure_series_labels()
            .position(SeriesLabelPosition::UpperLeft)
            .background_style(PAPER.mix(0.9))
            .border_style(GRID)
            .label_font(label_style())
            .draw()?;
        root.present()?;
    }
    Ok(buf)
}

/// Reliability diagram: observed frequency of raised dots per probability
/// bin, the diagonal of perfect calibration, and the share of events per
/// bin beneath.
pub(crate) fn reliability_svg(cal: &Calibration, color: RGBColor) -> DrawResult<String> {
    let mut buf = String::new();
    {
        let root = SVGBackend::with_string(&mut buf, (520, 560)).into_drawing_area();
        root.fill(&PAPER)?;
        let (top, bottom) = root.split_vertically(430);
        let mut chart = ChartBuilder::on(&top)
            .margin(14)
            .caption(
                format!(
                    "ECE {:.3} over {} dot events",
                    cal.ece.unwrap_or(f64::NAN),
                    cal.events
                ),
                caption_style(),
            )
            .x_label_area_size(36)
            .y_label_area_size(56)
            .build_cartesian_2d(0.0f64..1.0, 0.0f64..1.0)?;
        chart
            .configure_mesh()
            .y_desc("observed share raised")
            .axis_desc_style(desc_style())
            .label_style(label_style())
            .bold_line_style(GRID)
            .light_line_style(TRANSPARENT)
            .axis_style(MUTED)
            .x_label_formatter(&|v| format!("{v:.1}"))
            .y_label_formatter(&|v| format!("{v:.1}"))
            .draw()?;
        chart
            .draw_series(DashedLineSeries::new(
                vec![(0.0, 0.0), (1.0, 1.0)],
                6,
                4,
                MUTED.stroke_width(1),
            ))?
            .label("perfectly calibrated")
            .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 14, y)], MUTED));
        let bins: Vec<_> = cal.bins.iter().filter(|b| b.count > 0).collect();
        chart
            .draw_series(bins.iter().filter_map(|b| {
                let o = b.observed_frequency?;
                Some(Rectangle::new(
                    [(b.low + 0.006, 0.0), (b.high - 0.006, o)],
                    color.mix(0.35).filled(),
                ))
            }))?
            .label("observed, per bin")
            .legend(move |(x, y)| {
                Rectangle::new([(x, y - 5), (x + 14, y + 5)], color.mix(0.35).filled())
            });
        chart
            .draw_series(bins.iter().filter_map(|b| {
                let (m, o) = (b.mean_probability?, b.observed_frequency?);
                Some(PathElement::new(
                    vec![(m, m), (m, o)],
                    WRONG.stroke_width(2),
                ))
            }))?
            .label("gap to the mean probability")
            .legend(|(x, y)| {
                PathElement::new(vec![(x + 7, y - 6), (x + 7, y + 6)], WRONG.stroke_width(2))
            });
        chart.draw_series(bins.iter().filter_map(|b| {
            Some(Circle::new(
                (b.mean_probability?, b.observed_frequency?),
                4,
                color.filled(),
            ))
        }))?;
        chart
            .configure_series_labels()
            .position(SeriesLabelPosition::UpperLeft)
            .background_style(PAPER.mix(0.9))
            .border_style(GRID)
            .label_font(label_style())
            .draw()?;

        let share_max = cal
            .bins
            .iter()
            .map(|b| b.count as f64 / cal.events.max(1) as f64)
            .fold(0.0, f64::max)
            .max(0.01);
        let mut lower = ChartBuilder::on(&bottom)
            .margin_left(14)
            .margin_right(14)
            .margin_bottom(8)
            .x_label_area_size(36)
            .y_label_area_size(56)
            .build_cartesian_2d(0.0f64..1.0, 0.0f64..share_max * 110.0)?;
        lower
            .configure_mesh()
            .x_desc("predicted probability that the dot is raised")
            .y_desc("% of events")
            .axis_desc_style(desc_style())
            .label_style(label_style())
            .bold_line_style(GRID)
            .light_line_style(TRANSPARENT)
            .axis_style(MUTED)
            .y_labels(3)
            .x_label_formatter(&|v| format!("{v:.1}"))
            .y_label_formatter(&|v| format!("{v:.0}"))
            .draw()?;
        let events = cal.events.max(1) as f64;
        lower.draw_series(cal.bins.iter().map(|b| {
            Rectangle::new(
                [
                    (b.low + 0.006, 0.0),
                    (b.high - 0.006, b.count as f64 / events * 100.0),
                ],
                MUTED.mix(0.45).filled(),
            )
        }))?;
        root.present()?;
    }
    Ok(buf)
}

/// Per-dot error shares: raised dots missed (1 - recall) and flat dots
/// read as raised (FP / (FP + TN)), for dots 1-6.
pub(crate) fn per_dot_svg(dots: &[DotFigures]) -> DrawResult<String> {
    let missed = |d: &DotFigures| d.recall.map(|r| (1.0 - r) * 100.0);
    let false_raise = |d: &DotFigures| {
        let flat = d.counts.false_positives + d.counts.true_negatives;
        (flat > 0).then(|| d.counts.false_positives as f64 / flat as f64 * 100.0)
    };
    let top = dots
        .iter()
        .flat_map(|d| [missed(d), false_raise(d)])
        .flatten()
        .fold(0.0f64, f64::max);
    let y1 = if top <= 0.0 { 1.0 } else { top * 1.2 };
    let mut buf = String::new();
    {
        let root = SVGBackend::with_string(&mut buf, (560, 360)).into_drawing_area();
        root.fill(&PAPER)?;
        let mut chart = ChartBuilder::on(&root)
            .margin(14)
            .x_label_area_size(40)
            .y_label_area_size(56)
            .build_cartesian_2d(0.5f64..6.5, 0.0f64..y1)?;
        chart
            .configure_mesh()
            .y_desc("% of decisions wrong")
            .axis_desc_style(desc_style())
            .label_style(label_style())
            .bold_line_style(GRID)
            .light_line_style(TRANSPARENT)
            .axis_style(MUTED)
            .x_labels(6)
            .x_label_formatter(&|v| {
                let i = v.round();
                if (v - i).abs() < 1e-6 && (1.0..=6.0).contains(&i) {
                    format!("dot {i}")
                } else {
                    String::new()
                }
            })
            .disable_x_mesh()
            .draw()?;
        chart
            .draw_series(dots.iter().filter_map(|d| {
                let x = f64::from(d.dot);
                Some(Rectangle::new(
                    [(x - 0.34, 0.0), (x - 0.02, missed(d)?)],
                    SEA.filled(),
                ))
            }))?
            .label("raised dot missed (1 - recall)")
            .legend(|(x, y)| Rectangle::new([(x, y - 5), (x + 14, y + 5)], SEA.filled()));
        chart
            .draw_series(dots.iter().filter_map(|d| {
                let x = f64::from(d.dot);
                Some(Rectangle::new(
                    [(x + 0.02, 0.0), (x + 0.34, false_raise(d)?)],
                    RUST.filled(),
                ))
            }))?
            .label("flat dot read as raised")
            .legend(|(x, y)| Rectangle::new([(x, y - 5), (x + 14, y + 5)], RUST.filled()));
        chart
            .configure_series_labels()
            .position(SeriesLabelPosition::UpperRight)
            .background_style(PAPER.mix(0.9))
            .border_style(GRID)
            .label_font(label_style())
            .draw()?;
        root.present()?;
    }
    Ok(buf)
}

/// A named breakdown (one per hypothesis set).
pub(crate) struct BreakdownSeries<'a> {
    pub name: &'a str,
    pub color: RGBColor,
    pub breakdown: &'a Breakdown,
}

/// Accuracy per tag bin with bootstrap intervals: one panel each for
/// character and word accuracy.
pub(crate) fn breakdown_svg(series: &[BreakdownSeries], axis: &str) -> DrawResult<String> {
    let metrics = [Metric::CharAccuracy, Metric::WordAccuracy];
    let lo = series
        .iter()
        .flat_map(|s| s.breakdown.bins.iter().map(|b| b.low))
        .fold(f64::INFINITY, f64::min);
    let hi = series
        .iter()
        .flat_map(|s| s.breakdown.bins.iter().map(|b| b.high))
        .fold(f64::NEG_INFINITY, f64::max);
    let (lo, hi) = if hi > lo {
        (lo, hi)
    } else {
        (lo - 1.0, lo + 1.0)
    };
    let pad = (hi - lo) * 0.06;
    let mut buf = String::new();
    {
        let root = SVGBackend::with_string(&mut buf, (1000, 380)).into_drawing_area();
        root.fill(&PAPER)?;
        let panels = root.split_evenly((1, 2));
        for (panel, metric) in panels.iter().zip(metrics) {
            let ymin = series
                .iter()
                .flat_map(|s| {
                    s.breakdown
                        .bins
                        .iter()
                        .filter_map(|b| b.figures.get(&metric))
                })
                .map(|e| e.low)
                .fold(1.0f64, f64::min);
            let y0 = ((ymin * 100.0 - 5.0) / 10.0).floor().max(-10.0) * 10.0;
            let mut chart = ChartBuilder::on(panel)
                .margin(14)
                .caption(metric.label(), caption_style())
                .x_label_area_size(40)
                .y_label_area_size(52)
                .build_cartesian_2d((lo - pad)..(hi + pad), y0..100.0f64)?;
            chart
                .configure_mesh()
                .x_desc(axis)
                .y_desc("%")
                .axis_desc_style(desc_style())
                .label_style(label_style())
                .bold_line_style(GRID)
                .light_line_style(TRANSPARENT)
                .axis_style(MUTED)
                .draw()?;
            let k = series.len() as f64;
            for (si, s) in series.iter().enumerate() {
                let off = (si as f64 - (k - 1.0) / 2.0) * (hi - lo) * 0.012;
                let pts: Vec<(f64, Estimate, usize)> = s
                    .breakdown
                    .bins
                    .iter()
                    .filter_map(|b| {
                        let e = b.figures.get(&metric)?;
                        Some(((b.low + b.high) / 2.0 + off, *e, b.recordings))
                    })
                    .collect();
                let color = s.color;
                chart.draw_series(pts.iter().map(|(x, e, _)| {
                    PathElement::new(
                        vec![(*x, e.low * 100.0), (*x, e.high * 100.0)],
                        color.stroke_width(2),
                    )
                }))?;
                chart.draw_series(LineSeries::new(
                    pts.iter().map(|(x, e, _)| (*x, e.value * 100.0)),
                    color.mix(0.6).stroke_width(1),
                ))?;
                chart
                    .draw_series(
                        pts.iter()
                            .map(|(x, e, _)| Circle::new((*x, e.value * 100.0), 5, color.filled())),
                    )?
                    .label(s.name)
                    .legend(move |(x, y)| Circle::new((x + 6, y), 5, color.filled()));
                if si == 0 {
                    chart.draw_series(pts.iter().map(|(x, _, n)| {
                        Text::new(
                            format!("n={n}"),
                            (*x, y0 + (100.0 - y0) * 0.04),
                            (FONT, 13).into_font().color(&MUTED),
                        )
                    }))?;
                }
            }
            chart
                .configure_series_labels()
                .position(SeriesLabelPosition::UpperRight)
                .background_style(PAPER.mix(0.9))
                .border_style(GRID)
                .label_font(label_style())
                .draw()?;
        }
        root.present()?;
    }
    Ok(buf)
}

/// Heat map of character substitutions among the characters most involved:
/// rows are ground truth, columns what was read; the shade is the rate per
/// occurrence of the ground-truth character, the number the count.
pub(crate) fn confusion_svg(confusions: &[Confusion], max_chars: usize) -> String {
    let mut weight: HashMap<char, u64> = HashMap::new();
    for c in confusions {
        *weight.entry(c.reference).or_insert(0) += c.count;
        *weight.entry(c.hypothesis).or_insert(0) += c.count;
    }
    let mut chars: Vec<(char, u64)> = weight.into_iter().collect();
    chars.sort_by(|a, b| b.1.cmp(&a.1).then(a.0.cmp(&b.0)));
    chars.truncate(max_chars);
    let mut set: Vec<char> = chars.iter().map(|c| c.0).collect();
    set.sort_unstable();
    let n = set.len();
    let index = |c: char| set.iter().position(|&x| x == c);
    let cell = 34.0;
    let left = 92.0;
    let topm = 84.0;
    let w = left + cell * n as f64 + 130.0;
    let h = topm + (cell * n as f64).max(215.0) + 30.0;
    let max_rate = confusions
        .iter()
        .filter(|c| index(c.reference).is_some() && index(c.hypothesis).is_some())
        .map(|c| c.rate)
        .fold(0.0f64, f64::max)
        .max(1e-9);
    let mut s = String::new();
    let _ = write!(
        s,
        r#"<svg xmlns="http://www.w3.org/2000/svg" width="{w}" height="{h}" viewBox="0 0 {w} {h}" font-family="{FONT}" role="img" aria-label="character confusion heat map">"#
    );
    let _ = write!(
        s,
        r#"<rect width="{w}" height="{h}" fill="{}"/>"#,
        hex(PAPER)
    );
    let _ = write!(
        s,
        r#"<text x="{}" y="22" font-size="14" fill="{}" text-anchor="middle">read as</text>"#,
        left + cell * n as f64 / 2.0,
        hex(MUTED)
    );
    let _ = write!(
        s,
        r#"<text x="20" y="{}" font-size="14" fill="{}" text-anchor="middle" transform="rotate(-90 20 {})">ground truth</text>"#,
        topm + cell * n as f64 / 2.0,
        hex(MUTED),
        topm + cell * n as f64 / 2.0
    );
    for (i, &c) in set.iter().enumerate() {
        let x = left + cell * (i as f64 + 0.5);
        let _ = write!(
            s,
            r#"<text x="{x}" y="{}" font-size="15" fill="{}" text-anchor="middle">{}</text>"#,
            topm - 10.0,
            hex(INK),
            escape(&char_label(c))
        );
        let y = topm + cell * (i as f64 + 0.5) + 5.0;
        let _ = write!(
            s,
            r#"<text x="{}" y="{y}" font-size="15" fill="{}" text-anchor="end">{}</text>"#,
            left - 10.0,
            hex(INK),
            escape(&char_label(c))
        );
    }
    for i in 0..n {
        for j in 0..n {
            let (x, y) = (left + cell * j as f64, topm + cell * i as f64);
            let fill = if i == j { hex(GRID) } else { hex(ramp(0.0)) };
            let _ = write!(
                s,
                r#"<rect x="{x}" y="{y}" width="{cell}" height="{cell}" fill="{fill}" stroke="{}" stroke-width="1"/>"#,
                hex(GRID)
            );
        }
    }
    for c in confusions {
        let (Some(i), Some(j)) = (index(c.reference), index(c.hypothesis)) else {
            continue;
        };
        let t = c.rate / max_rate;
        let (x, y) = (left + cell * j as f64, topm + cell * i as f64);
        let text_color = if t > 0.55 { hex(PAPER) } else { hex(INK) };
        let _ = write!(
            s,
            r#"<rect x="{x}" y="{y}" width="{cell}" height="{cell}" fill="{}" stroke="{}" stroke-width="1"><title>{} read as {}: {} times ({:.1}% of {})</title></rect>"#,
            hex(ramp(0.12 + 0.88 * t)),
            hex(GRID),
            escape(&char_label(c.reference)),
            escape(&char_label(c.hypothesis)),
            c.count,
            c.rate * 100.0,
            escape(&char_label(c.reference))
        );
        let _ = write!(
            s,
            r#"<text x="{}" y="{}" font-size="12" fill="{text_color}" text-anchor="middle">{}</text>"#,
            x + cell / 2.0,
            y + cell / 2.0 + 4.0,
            c.count
        );
    }
    // Legend: the ramp from 0 to the largest rate.
    let lx = left + cell * n as f64 + 30.0;
    for k in 0..10 {
        let t = 1.0 - k as f64 / 9.0;
        let _ = write!(
            s,
            r#"<rect x="{lx}" y="{}" width="18" height="{}" fill="{}"/>"#,
            topm + k as f64 * 16.0,
            16.5,
            hex(ramp(0.12 + 0.88 * t))
        );
    }
    let _ = write!(
        s,
        r#"<text x="{}" y="{}" font-size="12" fill="{}">{:.0}%</text><text x="{}" y="{}" font-size="12" fill="{}">&#8776;0%</text><text x="{lx}" y="{}" font-size="12" fill="{}">per occurrence</text>"#,
        lx + 24.0,
        topm + 12.0,
        hex(INK),
        max_rate * 100.0,
        lx + 24.0,
        topm + 158.0,
        hex(INK),
        topm + 180.0,
        hex(MUTED)
    );
    let _ = write!(
        s,
        r#"<rect x="{lx}" y="{}" width="18" height="14" fill="{}"/><text x="{}" y="{}" font-size="12" fill="{}">read right</text>"#,
        topm + 196.0,
        hex(GRID),
        lx + 24.0,
        topm + 207.0,
        hex(MUTED)
    );
    s.push_str("</svg>");
    s
}
