//! The report page: one self-contained HTML file (inline CSS and SVG, no
//! scripts, no external resources) built from an [`Evaluation`].

use super::palette::{char_label, escape, hex, INDIGO, INK, MUTED, PAPER, RUST, SEA, WRONG};
use super::plots::{
    breakdown_svg, confusion_svg, headline_svg, per_dot_svg, reliability_svg, BreakdownSeries,
    DrawResult, HeadlineSeries,
};
use super::view::{recording_view_svg, RecordingView};
use crate::error::{Error, Result};
use crate::metrics::{align, EditOp, Estimate, Evaluation, Metric, SystemMetrics};
use std::fmt::Write;

/// Most rows of the per-recording table shown (worst first).
const MAX_TABLE_ROWS: usize = 300;
/// Most characters in the confusion heat map.
const HEAT_MAP_CHARS: usize = 14;

/// The caution every report carries.
pub(crate) const CAUTION: &str = "Decoded text is machine-read braille and can be wrong. \
Verify it before relying on it wherever a misreading can hurt: medicine labels, dosage, \
safety signage. These figures describe a test set, not a guarantee for any one label. \
Defer to local accessibility codes and to qualified practice.";

fn css() -> String {
    format!(
        "body{{background:{paper};color:{ink};font:15px/1.5 sans-serif;margin:0;}}
main{{max-width:1140px;margin:0 auto;padding:24px 28px 60px;}}
h1{{font-size:26px;margin:0 0 4px;}}
h2{{font-size:19px;margin:34px 0 8px;padding-bottom:4px;border-bottom:2px solid {sea};}}
p.sub,.note{{color:{muted};}}
.note{{font-size:13px;}}
.caution{{border-left:6px solid {wrong};background:#f6e9e4;padding:12px 16px;margin:18px 0;}}
table{{border-collapse:collapse;margin:8px 0;font-variant-numeric:tabular-nums;}}
th,td{{padding:4px 10px;border-bottom:1px solid #e2e0d8;text-align:right;vertical-align:top;}}
th{{background:#efece3;}}
td.text,th.text{{text-align:left;font-family:monospace;}}
td.id{{text-align:left;white-space:nowrap;}}
td.label,th.label{{text-align:left;}}
.ci{{color:{muted};font-size:13px;}}
.sea{{color:{sea};font-weight:bold;}}
.rust{{color:{rust};font-weight:bold;}}
.indigo{{color:{indigo};font-weight:bold;}}
mark.sub{{background:#f3d2cc;color:{ink};}}
mark.ins{{background:#f7e3b5;color:{ink};}}
del{{color:{wrong};}}
.scroll{{max-height:640px;overflow:auto;border:1px solid #e2e0d8;}}
.plots{{display:flex;flex-wrap:wrap;gap:18px;align-items:flex-start;}}
svg{{max-width:100%;height:auto;}}
figure{{margin:8px 0;}}
figcaption{{color:{muted};font-size:13px;max-width:720px;}}
dl dt{{font-weight:bold;margin-top:6px;}}
dl dd{{margin-left:18px;}}",
        paper = hex(PAPER),
        ink = hex(INK),
        muted = hex(MUTED),
        sea = hex(SEA),
        rust = hex(RUST),
        wrong = hex(WRONG),
        indigo = hex(INDIGO),
    )
}

fn pct(v: f64) -> String {
    format!("{:.1}%", v * 100.0)
}

fn fmt_estimate(m: Metric, e: &Estimate) -> String {
    if m.higher_is_better() {
        format!(
            "{} <span class=\"ci\">[{:.1}, {:.1}]</span>",
            pct(e.value),
            e.low * 100.0,
            e.high * 100.0
        )
    } else {
        format!(
            "{:.4} <span class=\"ci\">[{:.4}, {:.4}]</span>",
            e.value, e.low, e.high
        )
    }
}

/// The hypothesis text with its differences to the reference marked:
/// substitutions and insertions highlighted, deletions struck out.
fn marked_text(reference: &str, hypothesis: &str) -> String {
    let r: Vec<char> = reference.chars().collect();
    let h: Vec<char> = hypothesis.chars().collect();
    let mut out = String::new();
    for op in align(&r, &h).ops {
        match op {
            EditOp::Match { hypothesis, .. } => out.push_str(&escape(&h[hypothesis].to_string())),
            EditOp::Substitute {
                hypothesis,
                reference,
            } => {
                let _ = write!(
                    out,
                    "<mark class=\"sub\" title=\"truth: {}\">{}</mark>",
                    escape(&char_label(r[reference])),
                    escape(&char_label(h[hypothesis]))
                );
            }
            EditOp::Insert { hypothesis } => {
                let _ = write!(
                    out,
                    "<mark class=\"ins\">{}</mark>",
                    escape(&char_label(h[hypothesis]))
                );
            }
            EditOp::Delete { reference } => {
                let _ = write!(out, "<del>{}</del>", escape(&char_label(r[reference])));
            }
        }
    }
    out
}

fn figure(svg: DrawResult<String>, caption: &str) -> Result<String> {
    let svg = svg.map_err(|e| Error::Output {
        path: "<report>".into(),
        reason: format!("a plot could not be drawn: {e}"),
    })?;
    Ok(format!(
        "<figure>{svg}<figcaption>{caption}</figcaption></figure>"
    ))
}

/// The report page for `eval`, with the given recording views.
pub fn html_report(eval: &Evaluation, views: &[RecordingView]) -> Result<String> {
    let sets: Vec<(&str, &str, &SystemMetrics)> =
        std::iter::once(("without lexicon", "sea", &eval.without_lexicon))
            .chain(
                eval.with_lexicon
                    .as_ref()
                    .map(|s| ("with lexicon", "rust", s)),
            )
            .collect();
    let color_of = |class: &str| if class == "sea" { SEA } else { RUST };
    let conf_pct = (eval.settings.confidence * 100.0).round();
    let mut h = String::new();
    let _ = write!(
        h,
        "<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">\
<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\
<title>tactread reading report: {label}</title><style>{css}</style></head><body><main>",
        label = escape(&eval.label),
        css = css()
    );
    let _ = write!(
        h,
        "<h1>Reading report</h1><p class=\"sub\">{label} &middot; {n} recordings &middot; written by tactread {ver} \
(metrics format {fmt} v{fv})</p>",
        label = escape(&eval.label),
        n = eval.recordings.len(),
        ver = env!("CARGO_PKG_VERSION"),
        fmt = escape(&eval.format),
        fv = eval.version
    );
    let _ = write!(
        h,
        "<aside class=\"caution\" role=\"note\"><strong>Caution.</strong> {}</aside>",
        escape(CAUTION)
    );

    // Headline.
    let _ = write!(h, "<section id=\"headline\"><h2>Headline figures</h2><table><tr><th class=\"label\">figure</th>");
    for (name, class, _) in &sets {
        let _ = write!(h, "<th><span class=\"{class}\">{name}</span></th>");
    }
    h.push_str("</tr>");
    for m in Metric::ALL {
        if !sets.iter().any(|(_, _, s)| s.headline.contains_key(&m)) {
            continue;
        }
        let _ = write!(h, "<tr><td class=\"label\">{}</td>", escape(m.label()));
        for (_, _, s) in &sets {
            match s.headline.get(&m) {
                Some(e) => {
                    let _ = write!(h, "<td>{}</td>", fmt_estimate(m, e));
                }
                None => h.push_str("<td>&ndash;</td>"),
            }
        }
        h.push_str("</tr>");
    }
    h.push_str("</table>");
    let series: Vec<HeadlineSeries> = sets
        .iter()
        .map(|(name, class, s)| HeadlineSeries {
            name,
            color: color_of(class),
            figures: &s.headline,
        })
        .collect();
    h.push_str(&figure(
        headline_svg(&series),
        &format!(
            "Accuracies with {conf_pct}% percentile-bootstrap intervals (Efron 1979): {} resamples of whole recordings, seed {:#x}. \
Figures are summed over recordings before dividing, so long recordings weigh more.",
            eval.settings.resamples, eval.settings.seed
        ),
    )?);
    h.push_str("</section>");

    // Calibration.
    let _ = write!(
        h,
        "<section id=\"calibration\"><h2>Calibration of the dot probabilities</h2>"
    );
    let mut any_cal = false;
    h.push_str("<div class=\"plots\">");
    for (name, class, s) in &sets {
        if let Some(cal) = &s.calibration {
            any_cal = true;
            h.push_str(&figure(
                reliability_svg(cal, color_of(class)),
                &format!(
                    "<span class=\"{class}\">{name}</span>: each dot of each aligned cell is one event. \
{} equal-width bins; ECE (Naeini et al. 2015) is the event-weighted gap between bar and diagonal.",
                    cal.bins.len()
                ),
            )?);
        }
    }
    h.push_str("</div>");
    if !any_cal {
        h.push_str("<p class=\"note\">No dot probabilities were given for this evaluation.</p>");
    }
    h.push_str("</section>");

    // Per-dot errors.
    let s0 = &eval.without_lexicon;
    let _ = write!(
        h,
        "<section id=\"dots\"><h2>Errors per dot</h2><div class=\"plots\">"
    );
    if s0.per_dot.iter().any(|d| d.counts.total() > 0) {
        h.push_str(&figure(
            per_dot_svg(&s0.per_dot),
            "Without lexicon, over aligned cell pairs. Inserted and deleted cells are not in these \
figures; they count in cell accuracy.",
        )?);
    } else {
        h.push_str("<p class=\"note\">No cells were compared.</p>");
    }
    h.push_str("<table><tr><th>dot</th><th>precision</th><th>recall</th><th>missed</th><th>false raised</th><th>decisions</th></tr>");
    for d in &s0.per_dot {
        let opt = |v: Option<f64>| v.map(pct).unwrap_or_else(|| "&ndash;".into());
        let _ = write!(
            h,
            "<tr><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td></tr>",
            d.dot,
            opt(d.precision),
            opt(d.recall),
            d.counts.false_negatives,
            d.counts.false_positives,
            d.counts.total()
        );
    }
    h.push_str("</table></div></section>");

    // Confusions.
    let _ = write!(
        h,
        "<section id=\"confusions\"><h2>Most confused characters</h2>"
    );
    for (name, class, s) in &sets {
        if s.confusions.is_empty() {
            let _ = write!(
                h,
                "<p class=\"note\"><span class=\"{class}\">{name}</span>: no substitutions.</p>"
            );
            continue;
        }
        let _ = write!(
            h,
            "<h3><span class=\"{class}\">{name}</span></h3><div class=\"plots\">"
        );
        h.push_str(&figure(
            Ok(confusion_svg(&s.confusions, HEAT_MAP_CHARS)),
            "Substitutions in the character alignment among the characters most involved; the shade is \
the rate per occurrence of the ground-truth character, the number the count.",
        )?);
        h.push_str("<table><tr><th class=\"text\">truth</th><th class=\"text\">read as</th><th>count</th><th>rate</th></tr>");
        for c in s.confusions.iter().take(12) {
            let _ = write!(
                h,
                "<tr><td class=\"text\">{}</td><td class=\"text\">{}</td><td>{}</td><td>{}</td></tr>",
                escape(&char_label(c.reference)),
                escape(&char_label(c.hypothesis)),
                c.count,
                pct(c.rate)
            );
        }
        h.push_str("</table></div>");
    }
    h.push_str("</section>");

    // Breakdown.
    let bds: Vec<BreakdownSeries> = sets
        .iter()
        .filter_map(|(name, class, s)| {
            s.breakdown.as_ref().map(|b| BreakdownSeries {
                name,
                color: color_of(class),
                breakdown: b,
            })
        })
        .collect();
    if let Some(first) = bds.first() {
        let tag = first.breakdown.tag.clone();
        let axis = if tag == "speed_mm_s" {
            "sliding speed, mm/s".to_string()
        } else {
            tag.clone()
        };
        let _ = write!(
            h,
            "<section id=\"breakdown\"><h2>Accuracy against {}</h2>",
            escape(&axis)
        );
        let missing = first.breakdown.missing;
        h.push_str(&figure(
            breakdown_svg(&bds, &axis),
            &format!(
                "Recordings in {} equal-width bins of the tag <code>{}</code>, with {conf_pct}% bootstrap intervals within each bin{}.",
                first.breakdown.bins.len(),
                escape(&tag),
                if missing > 0 {
                    format!("; {missing} recordings without the tag are left out")
                } else {
                    String::new()
                }
            ),
        )?);
        h.push_str("</section>");
    }

    // Per-recording table.
    let _ = write!(
        h,
        "<section id=\"recordings\"><h2>Per recording</h2><p class=\"note\">Worst character accuracy first \
(without lexicon){}. In the text read, <mark class=\"sub\">substituted</mark> and <mark class=\"ins\">inserted</mark> \
characters are marked and <del>missed</del> ones struck out.</p><div class=\"scroll\"><table><tr><th class=\"text\">id</th>",
        if eval.recordings.len() > MAX_TABLE_ROWS {
            format!("; the first {MAX_TABLE_ROWS} of {} are shown", eval.recordings.len())
        } else {
            String::new()
        }
    );
    let tag_names: Vec<String> = {
        let mut t: Vec<String> = eval
            .recordings
            .iter()
            .flat_map(|r| r.tags.keys().cloned())
            .collect();
        t.sort();
        t.dedup();
        t.truncate(3);
        t
    };
    for t in &tag_names {
        let _ = write!(h, "<th>{}</th>", escape(t));
    }
    h.push_str("<th>chars</th><th>dot acc.</th><th>char acc.</th><th>word acc.</th>");
    if eval.with_lexicon.is_some() {
        h.push_str("<th>char acc. (lexicon)</th>");
    }
    h.push_str(
        "<th class=\"text\">ground truth</th><th class=\"text\">read (without lexicon)</th></tr>",
    );
    let mut order: Vec<usize> = (0..eval.recordings.len().min(s0.rows.len())).collect();
    let key = |i: usize| {
        s0.rows[i]
            .figures
            .get(&Metric::CharAccuracy)
            .copied()
            .unwrap_or(f64::INFINITY)
    };
    order.sort_by(|&a, &b| key(a).total_cmp(&key(b)));
    for &i in order.iter().take(MAX_TABLE_ROWS) {
        let info = &eval.recordings[i];
        let row = &s0.rows[i];
        let _ = write!(h, "<tr><td class=\"id\">{}</td>", escape(&info.id));
        for t in &tag_names {
            match info.tags.get(t) {
                Some(v) => {
                    let _ = write!(h, "<td>{v}</td>");
                }
                None => h.push_str("<td>&ndash;</td>"),
            }
        }
        let f = |m: Metric| {
            row.figures
                .get(&m)
                .map(|v| pct(*v))
                .unwrap_or_else(|| "&ndash;".into())
        };
        let _ = write!(
            h,
            "<td>{}</td><td>{}</td><td>{}</td><td>{}</td>",
            row.counts.chars.reference_len(),
            f(Metric::DotAccuracy),
            f(Metric::CharAccuracy),
            f(Metric::WordAccuracy)
        );
        if let Some(l) = &eval.with_lexicon {
            let v = l
                .rows
                .get(i)
                .and_then(|r| r.figures.get(&Metric::CharAccuracy))
                .map(|v| pct(*v))
                .unwrap_or_else(|| "&ndash;".into());
            let _ = write!(h, "<td>{v}</td>");
        }
        let _ = write!(
            h,
            "<td class=\"text\">{}</td><td class=\"text\">{}</td></tr>",
            escape(&info.reference_text),
            marked_text(&info.reference_text, &row.hypothesis_text)
        );
    }
    h.push_str("</table></div></section>");

    // Recording views.
    if !views.is_empty() {
        let _ = write!(h, "<section id=\"views\"><h2>Recordings</h2>");
        for v in views {
            let svg = recording_view_svg(v)?;
            let _ = write!(
                h,
                "<figure>{svg}<figcaption>Top: pressure above each taxel's baseline (its 10th percentile), summed over taxels. Middle: each taxel's signal above \
its baseline, darker is more pressure. Bottom: <span class=\"indigo\">ground-truth cells</span>{} at their places; filled circles \
are raised dots.</figcaption></figure>",
                if v.decoded.is_some() {
                    " and <span class=\"sea\">decoded cells</span> (wrong ones in red; missed truth cells underlined in red)"
                } else {
                    ""
                }
            );
        }
        h.push_str("</section>");
    }

    // Definitions.
    let _ = write!(
        h,
        "<section id=\"definitions\"><h2>How the figures are made</h2><dl>\
<dt>Alignment</dt><dd>Unit-cost Levenshtein alignment with backtrace (Wagner and Fischer 1974) of characters, \
words (split on whitespace) and cells.</dd>\
<dt>Character and word accuracy</dt><dd>1 &minus; (substitutions + deletions + insertions) / reference length, \
summed over recordings; below zero when a reading has more errors than the truth has items.</dd>\
<dt>Dot accuracy</dt><dd>Over aligned cell pairs (matches and substitutions), the share of the six dot decisions \
that are right. Inserted and deleted cells are left out here and count in cell accuracy.</dd>\
<dt>Top-k character accuracy</dt><dd>As character accuracy, with an aligned character right when the truth is among \
the first k alternatives.</dd>\
<dt>Calibration</dt><dd>Dot probabilities in {bins} equal-width bins; expected calibration error after Naeini, Cooper \
and Hauskrecht (2015).</dd>\
<dt>Intervals</dt><dd>{conf_pct}% percentile bootstrap (Efron 1979) resampling whole recordings, {res} resamples, \
fixed seed.</dd></dl></section>",
        bins = eval.settings.calibration_bins,
        res = eval.settings.resamples
    );
    h.push_str("</main></body></html>\n");
    Ok(h)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn marks_differences() {
        let m = marked_text("cat", "cut s");
        assert!(m.contains("<mark class=\"sub\" title=\"truth: a\">u</mark>"));
        assert!(m.contains("<mark class=\"ins\">"));
        let m = marked_text("a<b", "ab");
        assert!(m.contains("<del>&lt;</del>"));
    }
}
