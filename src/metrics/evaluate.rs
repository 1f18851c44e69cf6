//! Scoring a test set: plain inputs per recording (ground truth and what
//! was read) in, a serialisable [`Evaluation`] out.
//!
//! The work per recording (three alignments and the dot tallies) runs in
//! parallel over recordings with rayon; so do the bootstrap resamples.

use super::align::align;
use super::bootstrap::{interval, resample, Estimate};
use super::calibration::{
    add_event, calibration_of, BinSums, Calibration, DEFAULT_CALIBRATION_BINS,
};
use super::counts::{Counts, DotCounts, Metric};
use crate::braille::Cell;
use crate::error::{Error, Location, Result};
use rayon::prelude::*;
use serde::{Deserialize, Serialize};
use std::collections::{BTreeMap, HashMap, HashSet};
use std::path::Path;

/// Format tag of a metrics file.
pub const METRICS_FORMAT: &str = "tactread-metrics";
/// Version of the metrics file format this build writes and reads.
pub const METRICS_VERSION: u32 = 1;

/// The ground truth of one recording.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Reference {
    /// The text.
    pub text: String,
    /// The text in cells, as the language pack's code table writes it.
    pub cells: Vec<Cell>,
}

/// What one system read from one recording.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Hypothesis {
    /// The text read.
    pub text: String,
    /// The cells read.
    pub cells: Vec<Cell>,
    /// Optional dot probabilities, shape `[n_cells][6]`: entry `[j][d - 1]`
    /// is the probability that dot `d` of `cells[j]` is raised.
    pub dot_probabilities: Option<Vec<[f32; 6]>>,
    /// Optional ranked alternatives, one list per character of `text`
    /// (`[n_chars][n_alternatives]`), best first; the first entry must be
    /// the character in `text`.
    pub alternatives: Option<Vec<Vec<char>>>,
}

/// One recording to score: its ground truth and what was read, without
/// and (optionally) with the lexicon.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct EvalRecording {
    /// A name unique within the test set (e.g. the manifest's file name).
    pub id: String,
    /// The ground truth.
    pub reference: Reference,
    /// What the decoder read before lexicon rescoring.
    pub without_lexicon: Hypothesis,
    /// What was read after lexicon rescoring, if a lexicon was used.
    pub with_lexicon: Option<Hypothesis>,
    /// Numeric tags, e.g. `"speed_mm_s"` from the manifest.
    pub tags: BTreeMap<String, f64>,
}

/// Settings of an evaluation. Build with [`EvalSettings::default`] and
/// change fields; [`evaluate`] checks them before any work.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct EvalSettings {
    /// Bootstrap resamples for the confidence intervals. Default 1000.
    pub resamples: usize,
    /// Confidence level of the intervals, in (0, 1). Default 0.95.
    pub confidence: f64,
    /// Seed of the resampling (ChaCha8). Default 0x7AC7_2EAD.
    pub seed: u64,
    /// Equal-width calibration bins over [0, 1]. Default 10.
    pub calibration_bins: usize,
    /// Numeric tag to break the figures down by. Default `"speed_mm_s"`.
    pub breakdown_tag: Option<String>,
    /// Equal-width bins of the breakdown, over the tag's observed range.
    /// Default 4.
    pub breakdown_bins: usize,
    /// How many of the most frequent character confusions to keep. Default 30.
    pub top_confusions: usize,
}

impl Default for EvalSettings {
    fn default() -> Self {
        EvalSettings {
            resamples: 1000,
            confidence: 0.95,
            seed: 0x7AC7_2EAD,
            calibration_bins: DEFAULT_CALIBRATION_BINS,
            breakdown_tag: Some("speed_mm_s".to_string()),
            breakdown_bins: 4,
            top_confusions: 30,
        }
    }
}

impl EvalSettings {
    /// Check the settings; the error names the bad field and what is allowed.
    pub fn check(&self) -> Result<()> {
        if self.resamples == 0 {
            return Err(Error::config(
                "resamples",
                "must be at least 1 (default 1000)",
            ));
        }
        if !(self.confidence > 0.0 && self.confidence < 1.0) {
            return Err(Error::config(
                "confidence",
                format!("{} is not in (0, 1); 0.95 is usual", self.confidence),
            ));
        }
        if self.calibration_bins == 0 {
            return Err(Error::config(
                "calibration bins",
                "must be at least 1 (default 10)",
            ));
        }
        if self.breakdown_bins == 0 {
            return Err(Error::config(
                "breakdown bins",
                "must be at least 1 (default 4)",
            ));
        }
        Ok(())
    }
}

/// The ground truth side of one recording as kept in a metrics file.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct RecordingInfo {
    /// The recording's id.
    pub id: String,
    /// Its ground-truth text.
    pub reference_text: String,
    /// Its numeric tags.
    #[serde(default, skip_serializing_if = "BTreeMap::is_empty")]
    pub tags: BTreeMap<String, f64>,
}

/// One row of the per-recording table of one hypothesis set.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct RecordingRow {
    /// The recording's id (as in [`Evaluation::recordings`], same order).
    pub id: String,
    /// The text read.
    pub hypothesis_text: String,
    /// The counts all figures derive from.
    pub counts: Counts,
    /// The figures of this recording alone (those defined).
    pub figures: BTreeMap<Metric, f64>,
}

/// Precision and recall of one dot position.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct DotFigures {
    /// The dot, 1-6.
    pub dot: u8,
    /// The counts over aligned cell pairs.
    pub counts: DotCounts,
    /// TP / (TP + FP).
    pub precision: Option<f64>,
    /// TP / (TP + FN).
    pub recall: Option<f64>,
}

/// A reference character read as another one, and how often.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Confusion {
    /// The ground-truth character.
    pub reference: char,
    /// The character read instead.
    pub hypothesis: char,
    /// Substitutions of `reference` by `hypothesis` in the character alignment.
    pub count: u64,
    /// `count` over the occurrences of `reference` in the ground truth.
    pub rate: f64,
}

/// The figures of the recordings whose tag falls in one bin.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct BreakdownBin {
    /// Lower edge (inclusive).
    pub low: f64,
    /// Upper edge (exclusive, inclusive for the last bin).
    pub high: f64,
    /// Recordings in the bin.
    pub recordings: usize,
    /// Figures with bootstrap intervals over the bin's recordings.
    pub figures: BTreeMap<Metric, Estimate>,
}

/// Figures broken down by a numeric tag.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Breakdown {
    /// The tag, e.g. `"speed_mm_s"`.
    pub tag: String,
    /// Recordings without the tag (not in any bin).
    pub missing: usize,
    /// Equal-width bins over the observed range, lowest first.
    pub bins: Vec<BreakdownBin>,
}

/// All figures of one hypothesis set (without or with the lexicon).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SystemMetrics {
    /// Headline figures with bootstrap confidence intervals (the figures
    /// that are defined for this set).
    pub headline: BTreeMap<Metric, Estimate>,
    /// Counts summed over all recordings.
    pub totals: Counts,
    /// Precision and recall of dots 1-6.
    pub per_dot: Vec<DotFigures>,
    /// Reliability diagram of the dot probabilities, when given.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub calibration: Option<Calibration>,
    /// The most frequent character substitutions, most frequent first.
    pub confusions: Vec<Confusion>,
    /// Figures by a numeric tag, when recordings carry it.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub breakdown: Option<Breakdown>,
    /// One row per recording, in the order of [`Evaluation::recordings`].
    pub rows: Vec<RecordingRow>,
}

/// The result of scoring a test set: what a metrics file (format
/// `tactread-metrics`, version 1) holds.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Evaluation {
    /// Always [`METRICS_FORMAT`].
    pub format: String,
    /// Always [`METRICS_VERSION`] for files this build writes.
    pub version: u32,
    /// A free name for what was evaluated, e.g. the model file.
    pub label: String,
    /// The settings used.
    pub settings: EvalSettings,
    /// The recordings, in input order.
    pub recordings: Vec<RecordingInfo>,
    /// Figures of the decoder's output before lexicon rescoring.
    pub without_lexicon: SystemMetrics,
    /// Figures after lexicon rescoring, when a lexicon was used.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub with_lexicon: Option<SystemMetrics>,
}

#[derive(Deserialize)]
struct FormatTag {
    format: Option<String>,
    version: Option<serde_json::Value>,
}

impl Evaluation {
    /// The evaluation as pretty-printed JSON.
    pub fn to_json(&self) -> String {
        // Plain data with string keys: serialisation cannot fail.
        serde_json::to_string_pretty(self).unwrap_or_default()
    }

    /// Read a metrics file written by [`Evaluation::save`]. A file of
    /// another format or version is an [`Error::Format`]; broken JSON an
    /// [`Error::Input`] naming the line.
    pub fn load(path: impl AsRef<Path>) -> Result<Evaluation> {
        let path = path.as_ref();
        let text = crate::fsutil::read_utf8(
            path,
            "a metrics file is UTF-8 JSON written by `tactread evaluate --json`: write it again",
        )?;
        Self::from_json(&text, path)
    }

    /// Parse a metrics file's text; `path` names it in errors.
    pub fn from_json(text: &str, path: &Path) -> Result<Evaluation> {
        let bad_json = |e: serde_json::Error| {
            Error::input(
                Location::file(path).line(e.line()),
                format!("not a valid metrics file ({e}); write it again with `tactread evaluate --json`"),
            )
        };
        let tag: FormatTag = serde_json::from_str(text).map_err(bad_json)?;
        let found = format!(
            "{} version {}",
            tag.format
                .as_deref()
                .unwrap_or("a file without a format tag"),
            tag.version
                .map(|v| v.to_string())
                .unwrap_or_else(|| "none".into())
        );
        let expected = format!("{METRICS_FORMAT} version {METRICS_VERSION}");
        if found != expected {
            return Err(Error::Format {
                path: path.to_path_buf(),
                expected,
                found,
                hint: "pass a metrics file written by `tactread evaluate --json` of this version"
                    .into(),
            });
        }
        serde_json::from_str(text).map_err(bad_json)
    }

    /// Write the evaluation as JSON, atomically (a temporary file in the
    /// same folder, then a rename).
    pub fn save(&self, path: impl AsRef<Path>) -> Result<()> {
        let mut json = self.to_json();
        json.push('\n');
        crate::fsutil::write_atomic(path.as_ref(), json.as_bytes())
    }
}

/// What scoring one recording under one hypothesis set gives.
struct Scored {
    counts: Counts,
    substitutions: HashMap<(char, char), u64>,
}

fn where_in(id: &str, field: &str) -> Location {
    Location::file(format!("recording `{id}`")).field(field)
}

fn check_hypothesis(id: &str, set: &str, h: &Hypothesis) -> Result<()> {
    if let Some(p) = &h.dot_probabilities {
        if p.len() != h.cells.len() {
            return Err(Error::Mismatch {
                what: format!("dot probabilities of recording `{id}` ({set})"),
                expected: format!("{} rows (one per cell read)", h.cells.len()),
                got: p.len().to_string(),
                hint: "give one [p1..p6] row for every hypothesis cell".into(),
            });
        }
        for (j, row) in p.iter().enumerate() {
            if let Some(d) = row.iter().position(|v| !(0.0..=1.0).contains(v)) {
                return Err(Error::input(
                    where_in(id, &format!("{set}.dot_probabilities[{j}][{d}]")),
                    format!(
                        "{} is not a probability: values must be numbers in [0, 1]",
                        row[d]
                    ),
                ));
            }
        }
    }
    if let Some(alts) = &h.alternatives {
        let n = h.text.chars().count();
        if alts.len() != n {
            return Err(Error::Mismatch {
                what: format!("alternatives of recording `{id}` ({set})"),
                expected: format!("{n} lists (one per character read)"),
                got: alts.len().to_string(),
                hint: "give one ranked list for every character of the hypothesis text".into(),
            });
        }
        for (j, (list, ch)) in alts.iter().zip(h.text.chars()).enumerate() {
            if list.first() != Some(&ch) {
                return Err(Error::input(
                    where_in(id, &format!("{set}.alternatives[{j}]")),
                    format!(
                        "the list must start with the character read, {ch:?}; it starts with {:?}",
                        list.first()
                    ),
                ));
            }
        }
    }
    Ok(())
}

fn score(reference: &Reference, h: &Hypothesis, bins: usize) -> Scored {
    let rc: Vec<char> = reference.text.chars().collect();
    let hc: Vec<char> = h.text.chars().collect();
    let char_alignment = align(&rc, &hc);
    let mut substitutions = HashMap::new();
    let mut top_k_hits = h.alternatives.as_ref().map(|_| [0u64; 3]);
    for (i, j) in char_alignment.pairs() {
        if rc[i] != hc[j] {
            *substitutions.entry((rc[i], hc[j])).or_insert(0) += 1;
        }
        if let (Some(hits), Some(alts)) = (top_k_hits.as_mut(), h.alternatives.as_ref()) {
            let list = alts.get(j).map(Vec::as_slice).unwrap_or(&[]);
            for (k, hit) in hits.iter_mut().enumerate() {
                if list.iter().take(k + 1).any(|&c| c == rc[i]) {
                    *hit += 1;
                }
            }
        }
    }

    let rw: Vec<&str> = reference.text.split_whitespace().collect();
    let hw: Vec<&str> = h.text.split_whitespace().collect();
    let words = align(&rw, &hw).counts();

    let cell_alignment = align(&reference.cells, &h.cells);
    let mut dots = [DotCounts::default(); 6];
    let mut calibration = h
        .dot_probabilities
        .as_ref()
        .map(|_| vec![BinSums::default(); bins]);
    for (i, j) in cell_alignment.pairs() {
        let r = reference.cells[i];
        let c = h.cells[j];
        for (d, counts) in dots.iter_mut().enumerate() {
            let dot = d as u8 + 1;
            match (r.has_dot(dot), c.has_dot(dot)) {
                (true, true) => counts.true_positives += 1,
                (false, true) => counts.false_positives += 1,
                (true, false) => counts.false_negatives += 1,
                (false, false) => counts.true_negatives += 1,
            }
            if let (Some(sums), Some(p)) = (calibration.as_mut(), h.dot_probabilities.as_ref()) {
                if let Some(row) = p.get(j) {
                    add_event(sums, f64::from(row[d]), r.has_dot(dot));
                }
            }
        }
    }
    Scored {
        counts: Counts {
            chars: char_alignment.counts(),
            words,
            cells: cell_alignment.counts(),
            dots,
            top_k_hits,
            calibration,
        },
        substitutions,
    }
}

/// The figures defined for `counts`, as a map.
fn figures_of(counts: &Counts) -> BTreeMap<Metric, f64> {
    Metric::ALL
        .iter()
        .filter_map(|&m| m.compute(counts).map(|v| (m, v)))
        .collect()
}

/// Headline figures with percentile-bootstrap intervals over `counts`.
pub(crate) fn estimates(
    counts: &[&Counts],
    metrics: &[Metric],
    resamples: usize,
    seed: u64,
    confidence: f64,
) -> BTreeMap<Metric, Estimate> {
    let total = Counts::sum(counts.iter().copied());
    let defined: Vec<Metric> = metrics
        .iter()
        .copied()
        .filter(|m| m.compute(&total).is_some())
        .collect();
    if counts.is_empty() || defined.is_empty() {
        return BTreeMap::new();
    }
    let draws = resample(counts.len(), resamples, seed, defined.len(), |idx| {
        let s = Counts::sum(idx.iter().map(|&i| counts[i]));
        defined.iter().map(|m| m.compute(&s)).collect()
    });
    defined
        .iter()
        .zip(draws)
        .filter_map(|(&m, values)| {
            m.compute(&total)
                .map(|v| (m, interval(v, values, confidence)))
        })
        .collect()
}

fn breakdown(
    infos: &[RecordingInfo],
    counts: &[&Counts],
    settings: &EvalSettings,
) -> Option<Breakdown> {
    let tag = settings.breakdown_tag.as_ref()?;
    let values: Vec<Option<f64>> = infos
        .iter()
        .map(|r| r.tags.get(tag).copied().filter(|v| v.is_finite()))
        .collect();
    let present: Vec<f64> = values.iter().flatten().copied().collect();
    if present.is_empty() {
        return None;
    }
    let lo = present.iter().copied().fold(f64::INFINITY, f64::min);
    let hi = present.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    let n_bins = if hi > lo { settings.breakdown_bins } else { 1 };
    let width = (hi - lo) / n_bins as f64;
    let bin_of = |v: f64| -> usize {
        if width <= 0.0 {
            0
        } else {
            (((v - lo) / width).floor().max(0.0) as usize).min(n_bins - 1)
        }
    };
    let metrics = [
        Metric::DotAccuracy,
        Metric::CharAccuracy,
        Metric::WordAccuracy,
    ];
    let bins = (0..n_bins)
        .map(|b| {
            let members: Vec<&Counts> = values
                .iter()
                .zip(counts)
                .filter(|(v, _)| v.is_some_and(|v| bin_of(v) == b))
                .map(|(_, c)| *c)
                .collect();
            BreakdownBin {
                low: lo + width * b as f64,
                high: if b + 1 == n_bins {
                    hi
                } else {
                    lo + width * (b + 1) as f64
                },
                recordings: members.len(),
                figures: estimates(
                    &members,
                    &metrics,
                    settings.resamples,
                    settings.seed,
                    settings.confidence,
                ),
            }
        })
        .collect();
    Some(Breakdown {
        tag: tag.clone(),
        missing: values.iter().filter(|v| v.is_none()).count(),
        bins,
    })
}

fn system(
    recordings: &[EvalRecording],
    infos: &[RecordingInfo],
    pick: impl Fn(&EvalRecording) -> &Hypothesis + Sync,
    settings: &EvalSettings,
) -> SystemMetrics {
    let scored: Vec<Scored> = recordings
        .par_iter()
        .map(|r| score(&r.reference, pick(r), settings.calibration_bins))
        .collect();
    let counts: Vec<&Counts> = scored.iter().map(|s| &s.counts).collect();
    let totals = Counts::sum(counts.iter().copied());
    let headline = estimates(
        &counts,
        &Metric::ALL,
        settings.resamples,
        settings.seed,
        settings.confidence,
    );

    let mut occurrences: HashMap<char, u64> = HashMap::new();
    for r in recordings {
        for ch in r.reference.text.chars() {
            *occurrences.entry(ch).or_insert(0) += 1;
        }
    }
    let mut pairs: HashMap<(char, char), u64> = HashMap::new();
    for s in &scored {
        for (&k, &v) in &s.substitutions {
            *pairs.entry(k).or_insert(0) += v;
        }
    }
    let mut confusions: Vec<Confusion> = pairs
        .into_iter()
        .map(|((r, h), count)| Confusion {
            reference: r,
            hypothesis: h,
            count,
            rate: count as f64 / occurrences.get(&r).copied().unwrap_or(count).max(1) as f64,
        })
        .collect();
    confusions.sort_by(|a, b| {
        b.count
            .cmp(&a.count)
            .then(a.reference.cmp(&b.reference))
            .then(a.hypothesis.cmp(&b.hypothesis))
    });
    confusions.truncate(settings.top_confusions);

    let per_dot = totals
        .dots
        .iter()
        .enumerate()
        .map(|(d, c)| DotFigures {
            dot: d as u8 + 1,
            counts: *c,
            precision: c.precision(),
            recall: c.recall(),
        })
        .collect();
    let calibration = totals.calibration.as_deref().map(calibration_of);
    let breakdown = breakdown(infos, &counts, settings);
    let rows = recordings
        .iter()
        .zip(&scored)
        .map(|(r, s)| RecordingRow {
            id: r.id.clone(),
            hypothesis_text: pick(r).text.clone(),
            counts: s.counts.clone(),
            figures: figures_of(&s.counts),
        })
        .collect();
    SystemMetrics {
        headline,
        totals,
        per_dot,
        calibration,
        confusions,
        breakdown,
        rows,
    }
}

/// Score a test set: every figure of the module docs, with and without the
/// lexicon, with percentile-bootstrap confidence intervals over recordings.
///
/// Errors (before any work) on bad settings, an empty set, duplicate ids,
/// dot probabilities or alternatives that do not fit their hypothesis, and
/// optional parts given for some recordings of a set but not all.
pub fn evaluate(
    label: &str,
    recordings: &[EvalRecording],
    settings: &EvalSettings,
) -> Result<Evaluation> {
    settings.check()?;
    if recordings.is_empty() {
        return Err(Error::config(
            "recordings",
            "there are none to evaluate: pass at least one",
        ));
    }
    let mut seen = HashSet::new();
    for r in recordings {
        if !seen.insert(r.id.as_str()) {
            return Err(Error::input(
                where_in(&r.id, "id"),
                "this id appears twice: every recording of a test set needs its own id",
            ));
        }
        check_hypothesis(&r.id, "without_lexicon", &r.without_lexicon)?;
        if let Some(h) = &r.with_lexicon {
            check_hypothesis(&r.id, "with_lexicon", h)?;
        }
    }
    let all_or_none = |what: &str, has: &dyn Fn(&EvalRecording) -> bool| -> Result<bool> {
        let k = recordings.iter().filter(|r| has(r)).count();
        if k == 0 || k == recordings.len() {
            Ok(k > 0)
        } else {
            Err(Error::Mismatch {
                what: format!("recordings with {what}"),
                expected: format!("all {} or none", recordings.len()),
                got: k.to_string(),
                hint: "give it for every recording of the set, or for none".into(),
            })
        }
    };
    let with_lexicon = all_or_none("a lexicon hypothesis", &|r| r.with_lexicon.is_some())?;
    all_or_none("dot probabilities (without lexicon)", &|r| {
        r.without_lexicon.dot_probabilities.is_some()
    })?;
    all_or_none("alternatives (without lexicon)", &|r| {
        r.without_lexicon.alternatives.is_some()
    })?;
    if with_lexicon {
        all_or_none("dot probabilities (with lexicon)", &|r| {
            r.with_lexicon
                .as_ref()
                .is_some_and(|h| h.dot_probabilities.is_some())
        })?;
        all_or_none("alternatives (with lexicon)", &|r| {
            r.with_lexicon
                .as_ref()
                .is_some_and(|h| h.alternatives.is_some())
        })?;
    }

    let infos: Vec<RecordingInfo> = recordings
        .iter()
        .map(|r| RecordingInfo {
            id: r.id.clone(),
            reference_text: r.reference.text.clone(),
            tags: r.tags.clone(),
        })
        .collect();
    let without = system(recordings, &infos, |r| &r.without_lexicon, settings);
    let with = with_lexicon.then(|| {
        system(
            recordings,
            &infos,
            |r| r.with_lexicon.as_ref().unwrap_or(&r.without_lexicon),
            settings,
        )
    });
    Ok(Evaluation {
        format: METRICS_FORMAT.to_string(),
        version: METRICS_VERSION,
        label: label.to_string(),
        settings: settings.clone(),
        recordings: infos,
        without_lexicon: without,
        with_lexicon: with,
    })
}
