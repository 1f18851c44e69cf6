//! Paired comparison of two evaluations of the same test set: per figure,
//! the difference B - A with a paired percentile-bootstrap interval (the
//! same resampled recordings for both systems; Efron 1979, Koehn 2004).
//!
//! Recordings are matched by id; the two files must hold the same ids with
//! the same ground-truth texts, or the comparison is refused.

use super::bootstrap::{interval, resample};
use super::counts::{Counts, Metric};
use super::evaluate::{Evaluation, SystemMetrics};
use crate::error::{Error, Result};
use serde::{Deserialize, Serialize};
use std::collections::HashMap;

/// Format tag of a comparison written by `tactread compare --json`.
pub const COMPARISON_FORMAT: &str = "tactread-comparison";
/// Version of the comparison format.
pub const COMPARISON_VERSION: u32 = 1;

/// Settings of a paired comparison.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct CompareSettings {
    /// Bootstrap resamples. Default 1000.
    pub resamples: usize,
    /// Confidence level of the intervals, in (0, 1). Default 0.95.
    pub confidence: f64,
    /// Seed of the resampling (ChaCha8). Default 0x7AC7_2EAD.
    pub seed: u64,
}

impl Default for CompareSettings {
    fn default() -> Self {
        CompareSettings {
            resamples: 1000,
            confidence: 0.95,
            seed: 0x7AC7_2EAD,
        }
    }
}

/// One figure of both systems and their paired difference.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct MetricDifference {
    /// The figure.
    pub metric: Metric,
    /// Its value for A.
    pub a: f64,
    /// Its value for B.
    pub b: f64,
    /// B - A.
    pub difference: f64,
    /// Lower end of the paired-bootstrap interval of B - A.
    pub low: f64,
    /// Upper end of the interval.
    pub high: f64,
    /// Share of resamples in which B is better than A (higher, or lower for
    /// the calibration error).
    pub share_b_better: f64,
}

/// The comparison of one hypothesis set.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SetComparison {
    /// `"without_lexicon"` or `"with_lexicon"`.
    pub set: String,
    /// The figures both files have for this set.
    pub differences: Vec<MetricDifference>,
}

/// Two evaluations side by side.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Comparison {
    /// Always [`COMPARISON_FORMAT`].
    pub format: String,
    /// Always [`COMPARISON_VERSION`].
    pub version: u32,
    /// Label of evaluation A.
    pub a: String,
    /// Label of evaluation B.
    pub b: String,
    /// Recordings matched.
    pub recordings: usize,
    /// The settings used.
    pub settings: CompareSettings,
    /// One entry per hypothesis set both files have.
    pub sets: Vec<SetComparison>,
}

fn rows_fit(e: &Evaluation, name: &str, s: &SystemMetrics) -> Result<()> {
    let fits = s.rows.len() == e.recordings.len()
        && s.rows.iter().zip(&e.recordings).all(|(r, i)| r.id == i.id);
    if fits {
        Ok(())
    } else {
        Err(Error::Mismatch {
            what: format!("per-recording rows of {name} (`{}`)", e.label),
            expected: format!("{} rows in the order of `recordings`", e.recordings.len()),
            got: format!("{} rows", s.rows.len()),
            hint:
                "the file was edited by hand or cut short: write it again with `tactread evaluate`"
                    .into(),
        })
    }
}

/// Compare evaluation `b` with evaluation `a` on the same recordings.
///
/// Errors when the settings are bad, when the two files hold different
/// recordings (ids or ground-truth texts), or when a file's rows do not
/// fit its recordings.
pub fn compare(a: &Evaluation, b: &Evaluation, settings: &CompareSettings) -> Result<Comparison> {
    if settings.resamples == 0 {
        return Err(Error::config(
            "resamples",
            "must be at least 1 (default 1000)",
        ));
    }
    if !(settings.confidence > 0.0 && settings.confidence < 1.0) {
        return Err(Error::config(
            "confidence",
            format!("{} is not in (0, 1); 0.95 is usual", settings.confidence),
        ));
    }
    let in_a: HashMap<&str, usize> = a
        .recordings
        .iter()
        .enumerate()
        .map(|(i, r)| (r.id.as_str(), i))
        .collect();
    let only_b: Vec<&str> = b
        .recordings
        .iter()
        .map(|r| r.id.as_str())
        .filter(|id| !in_a.contains_key(id))
        .collect();
    let in_b: HashMap<&str, usize> = b
        .recordings
        .iter()
        .enumerate()
        .map(|(i, r)| (r.id.as_str(), i))
        .collect();
    let only_a: Vec<&str> = a
        .recordings
        .iter()
        .map(|r| r.id.as_str())
        .filter(|id| !in_b.contains_key(id))
        .collect();
    if !only_a.is_empty() || !only_b.is_empty() || a.recordings.len() != b.recordings.len() {
        let example = only_a
            .first()
            .map(|id| format!("`{id}` only in A"))
            .or_else(|| only_b.first().map(|id| format!("`{id}` only in B")))
            .unwrap_or_else(|| "repeated ids".to_string());
        return Err(Error::Mismatch {
            what: format!("recordings of A (`{}`) and B (`{}`)", a.label, b.label),
            expected: format!("the same {} recording ids", a.recordings.len()),
            got: format!(
                "{} in A, {} in B, {} only in A, {} only in B ({example})",
                a.recordings.len(),
                b.recordings.len(),
                only_a.len(),
                only_b.len()
            ),
            hint: "these are different test sets: evaluate both systems on the same recordings"
                .into(),
        });
    }
    // Position in B of A's i-th recording.
    let mut b_of_a = Vec::with_capacity(a.recordings.len());
    for ra in &a.recordings {
        let j = in_b[ra.id.as_str()];
        let rb = &b.recordings[j];
        if rb.reference_text != ra.reference_text {
            return Err(Error::Mismatch {
                what: format!("ground truth of recording `{}`", ra.id),
                expected: format!("{:?} (A)", ra.reference_text),
                got: format!("{:?} (B)", rb.reference_text),
                hint: "these are different test sets that share ids: evaluate both systems on the same recordings".into(),
            });
        }
        b_of_a.push(j);
    }

    let mut sets = Vec::new();
    let pairs: [(&str, Option<&SystemMetrics>, Option<&SystemMetrics>); 2] = [
        (
            "without_lexicon",
            Some(&a.without_lexicon),
            Some(&b.without_lexicon),
        ),
        (
            "with_lexicon",
            a.with_lexicon.as_ref(),
            b.with_lexicon.as_ref(),
        ),
    ];
    for (name, sa, sb) in pairs {
        let (Some(sa), Some(sb)) = (sa, sb) else {
            continue;
        };
        rows_fit(a, &format!("A {name}"), sa)?;
        rows_fit(b, &format!("B {name}"), sb)?;
        let ca: Vec<&Counts> = sa.rows.iter().map(|r| &r.counts).collect();
        let cb: Vec<&Counts> = b_of_a.iter().map(|&j| &sb.rows[j].counts).collect();
        sets.push(SetComparison {
            set: name.to_string(),
            differences: paired(&ca, &cb, settings),
        });
    }
    Ok(Comparison {
        format: COMPARISON_FORMAT.to_string(),
        version: COMPARISON_VERSION,
        a: a.label.clone(),
        b: b.label.clone(),
        recordings: a.recordings.len(),
        settings: settings.clone(),
        sets,
    })
}

/// Paired differences of every figure defined for both, `ca[i]` and `cb[i]`
/// being the counts of the same recording.
pub(crate) fn paired(ca: &[&Counts], cb: &[&Counts], s: &CompareSettings) -> Vec<MetricDifference> {
    let ta = Counts::sum(ca.iter().copied());
    let tb = Counts::sum(cb.iter().copied());
    let metrics: Vec<(Metric, f64, f64)> = Metric::ALL
        .iter()
        .filter_map(|&m| Some((m, m.compute(&ta)?, m.compute(&tb)?)))
        .collect();
    let draws = resample(ca.len(), s.resamples, s.seed, metrics.len(), |idx| {
        let sa = Counts::sum(idx.iter().map(|&i| ca[i]));
        let sb = Counts::sum(idx.iter().map(|&i| cb[i]));
        metrics
            .iter()
            .map(|(m, _, _)| Some(m.compute(&sb)? - m.compute(&sa)?))
            .collect()
    });
    metrics
        .iter()
        .zip(draws)
        .map(|(&(metric, va, vb), values)| {
            let better = values
                .iter()
                .filter(|&&d| {
                    if metric.higher_is_better() {
                        d > 0.0
                    } else {
                        d < 0.0
                    }
                })
                .count();
            let share = if values.is_empty() {
                0.0
            } else {
                better as f64 / values.len() as f64
            };
            let e = interval(vb - va, values, s.confidence);
            MetricDifference {
                metric,
                a: va,
                b: vb,
                difference: e.value,
                low: e.low,
                high: e.high,
                share_b_better: share,
            }
        })
        .collect()
}

impl Comparison {
    /// The comparison as pretty-printed JSON.
    pub fn to_json(&self) -> String {
        serde_json::to_string_pretty(self).unwrap_or_default()
    }

    /// The comparison as a plain-text table, one block per hypothesis set.
    pub fn to_table(&self) -> String {
        use std::fmt::Write;
        let mut out = String::new();
        let pct = (self.settings.confidence * 100.0).round();
        let _ = writeln!(out, "A: {}", self.a);
        let _ = writeln!(out, "B: {}", self.b);
        let _ = writeln!(
            out,
            "{} recordings matched by id; {pct}% paired-bootstrap intervals, {} resamples, seed {:#x}",
            self.recordings, self.settings.resamples, self.settings.seed
        );
        for set in &self.sets {
            let _ = writeln!(out, "\n{}", set.set.replace('_', " "));
            let _ = writeln!(
                out,
                "  {:<28} {:>8} {:>8} {:>8}  {:<19} {:>9}",
                "figure",
                "A",
                "B",
                "B - A",
                format!("{pct}% interval"),
                "B better"
            );
            for d in &set.differences {
                // Accuracies in percent (differences in percentage points),
                // the calibration error as a plain number.
                let ece = d.metric == Metric::CalibrationError;
                let v = |x: f64| {
                    if ece {
                        format!("{x:.4}")
                    } else {
                        format!("{:.2}%", x * 100.0)
                    }
                };
                let dv = |x: f64| {
                    if ece {
                        format!("{x:+.4}")
                    } else {
                        format!("{:+.2}", x * 100.0)
                    }
                };
                let _ = writeln!(
                    out,
                    "  {:<28} {:>8} {:>8} {:>8}  {:<19} {:>8.1}%",
                    d.metric.label(),
                    v(d.a),
                    v(d.b),
                    dv(d.difference),
                    format!("[{}, {}]", dv(d.low), dv(d.high)),
                    d.share_b_better * 100.0
                );
            }
        }
        if !self.sets.is_empty() {
            let _ = writeln!(
                out,
                "\nB - A of accuracies in percentage points; \"B better\": share of resamples in which B beats A."
            );
        }
        out
    }
}
