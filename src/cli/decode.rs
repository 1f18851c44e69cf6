//! `tactread decode`: read recordings with a trained model (or the
//! embedded default one): network, beam search with the code table's
//! state, and lexicon rescoring. Many recordings (manifests, folders, a
//! list file) are read in parallel through [`tactread::batch::read_many`],
//! output in input order; a bad recording fails alone.

use clap::{Args as ClapArgs, ValueEnum};
use indicatif::{ProgressBar, ProgressStyle};
use serde_json::{json, Value};
use std::io::{IsTerminal, Write};
use std::path::{Path, PathBuf};
use tactread::batch::{read_many, BatchRead};
use tactread::braille::CodeTable;
use tactread::decode::{BeamParams, Decoded, Decoder};
use tactread::lexicon::{Lexicon, RescoreWeights};
use tactread::recording::Dataset;
use tactread::{Error, Result};

/// Options of `tactread decode`.
#[derive(Debug, ClapArgs)]
#[command(
    after_help = "Inputs: recording manifests, folders and --list files, read in the order given. \
A folder holding an index.json is a dataset: all its recordings, in index order; any other folder: the \
*.json manifests directly inside it, sorted by name (subfolders are not entered). A list file has one \
path per line, relative to the list file's folder; blank lines and lines starting with # are skipped.\n\n\
A recording that cannot be read does not stop the others: its error goes to standard error (and to its \
line of JSON output), the rest are decoded, and the exit code is 1 at the end.\n\n\
Examples:\n  tactread decode default scan.json\n  tactread decode default scans/ --format jsonl --jobs 2 > read.jsonl"
)]
pub struct Args {
    /// The model file (from `tactread train`), or `default` for the
    /// embedded default model (hex24 fingertip; en, de, fr, es; a file called
    /// `default` is read as `./default`).
    model: PathBuf,
    /// Recording manifests, or folders of them, to read.
    #[arg(required_unless_present = "list")]
    recordings: Vec<PathBuf>,
    /// A file listing recording manifests, one per line (`#` starts a
    /// comment line); read after the RECORDINGS.
    #[arg(long, value_name = "FILE")]
    list: Option<PathBuf>,
    /// Worker threads decoding in parallel (default: one per core).
    #[arg(long, value_name = "N")]
    jobs: Option<usize>,
    /// Language pack: picks the code table and the builtin lexicon together
    /// (default: the model's training language).
    #[arg(long)]
    lang: Option<String>,
    /// Beam width (default 16).
    #[arg(long, default_value_t = 16)]
    beam: usize,
    /// Readings listed per recording in JSON output (default 5).
    #[arg(long, default_value_t = 5)]
    n_best: usize,
    /// Lexicon file for word rescoring, or `none` to keep the beam's
    /// reading (default: the language's builtin lexicon).
    #[arg(long)]
    lexicon: Option<String>,
    /// Rescoring weights (JSON from `tactread lexicon tune`; default: the
    /// built-in defaults).
    #[arg(long)]
    weights: Option<PathBuf>,
    /// Output: plain text (one line per recording); JSON with the N best,
    /// per-character alternatives, per-cell dot probabilities and a
    /// confidence; or JSON lines, one compact object per recording.
    #[arg(long, value_enum, default_value_t = Format::Text)]
    format: Format,
}

#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
enum Format {
    Text,
    Json,
    Jsonl,
}

/// Printed on standard error with text output.
pub(crate) const CAUTION: &str =
    "caution: machine-read braille can be wrong; verify it wherever a misreading \
                       could do harm (medicine labels, dosages, signs)";

/// Run `tactread decode`.
pub fn run(args: Args) -> Result<()> {
    if args.jobs == Some(0) {
        return Err(Error::config(
            "--jobs",
            "must be at least 1 (leave it out for one per core)",
        ));
    }
    let paths = inputs(&args.recordings, args.list.as_deref())?;
    let model = super::load_model(&args.model)?;
    let lang = args.lang.clone().unwrap_or_else(|| model.lang.clone());
    let table = CodeTable::builtin(&lang)?;
    let lexicon = load_lexicon(args.lexicon.as_deref(), &lang)?;
    let beam = BeamParams {
        beam_width: args.beam,
        n_best: args.n_best.min(args.beam.max(1)),
        ..BeamParams::default()
    };
    let mut decoder = Decoder::new(&table, beam)?;
    let weights = match &args.weights {
        Some(p) => load_weights(p)?,
        None => RescoreWeights::default(),
    };
    if let Some(lex) = &lexicon {
        decoder = decoder.with_lexicon(lex, weights)?;
    }
    let known = &model.training.languages;
    if args.lang.is_some() && lang != model.lang && !known.contains(&lang) {
        eprintln!(
            "note: the model was trained on `{}` text; reading it as `{lang}`",
            if known.is_empty() {
                model.lang.clone()
            } else {
                known.join(", ")
            }
        );
    }

    let bar = if paths.len() > 1 && std::io::stderr().is_terminal() {
        ProgressBar::new(paths.len() as u64)
    } else {
        ProgressBar::hidden()
    };
    bar.set_style(
        ProgressStyle::with_template("reading {pos}/{len} recordings [{bar:30}] {eta} left")
            .unwrap_or_else(|_| ProgressStyle::default_bar())
            .progress_chars("=> "),
    );
    let mut results = read_many(&model, &decoder, &paths, args.jobs.unwrap_or(0), || {
        bar.inc(1)
    })?;
    bar.finish_and_clear();

    // One recording alone: its error is the command's error, as always.
    if paths.len() == 1 {
        if let Some(Err(_)) = results.first() {
            if let Some(Err(e)) = results.pop() {
                return Err(e);
            }
        }
    }
    let mut failed: Vec<&Path> = Vec::new();
    for (p, r) in paths.iter().zip(&results) {
        if let Err(e) = r {
            eprintln!("error: {e}");
            failed.push(p);
        }
    }

    let stdout = std::io::stdout();
    let mut out = stdout.lock();
    let names: Vec<String> = paths.iter().map(|p| p.display().to_string()).collect();
    let written = match args.format {
        Format::Text => {
            eprintln!("{CAUTION}");
            let many = results.len() > 1;
            names
                .iter()
                .zip(&results)
                .try_for_each(|(name, r)| match r {
                    Ok(b) if many => writeln!(out, "{name}\t{}", b.decoded.text),
                    Ok(b) => writeln!(out, "{}", b.decoded.text),
                    Err(_) => Ok(()),
                })
        }
        Format::Json => {
            let items: Vec<Value> = names
                .iter()
                .zip(&results)
                .map(|(name, r)| match r {
                    Ok(b) => to_json(name, &lang, lexicon.is_some(), &b.decoded),
                    Err(e) => json!({ "recording": name, "error": e.to_string() }),
                })
                .collect();
            let doc = json!({ "format": "tactread-decoded", "version": 1, "caution": CAUTION, "recordings": items });
            writeln!(
                out,
                "{}",
                serde_json::to_string_pretty(&doc).unwrap_or_default()
            )
        }
        Format::Jsonl => names.iter().zip(&results).try_for_each(|(name, r)| {
            let line = match r {
                Ok(b) => to_json_line(name, &lang, b),
                Err(e) => json!({ "recording": name, "error": e.to_string() }),
            };
            writeln!(out, "{line}")
        }),
    };
    match written.and_then(|_| out.flush()) {
        Ok(()) => {}
        // A closed pipe (e.g. `| head`) ends the output quietly.
        Err(e) if e.kind() == std::io::ErrorKind::BrokenPipe => {}
        Err(e) => return Err(Error::io("cannot write", "<stdout>", e)),
    }
    match failed.first() {
        None => Ok(()),
        Some(first) => Err(Error::input(
            tactread::Location::file(first),
            format!(
                "{} of {} recordings could not be read (each named above); the other {} were decoded",
                failed.len(),
                paths.len(),
                paths.len() - failed.len()
            ),
        )),
    }
}

/// The manifests to read, in order: `recordings` (files, dataset folders,
/// folders of manifests) then the lines of `list`. Checked before any
/// work: a missing path or an empty folder is an error naming it.
pub(crate) fn inputs(recordings: &[PathBuf], list: Option<&Path>) -> Result<Vec<PathBuf>> {
    let mut out = Vec::new();
    for p in recordings {
        expand(p, None, &mut out)?;
    }
    if let Some(list) = list {
        let text = read_list(list)?;
        let base = list.parent().unwrap_or(Path::new(""));
        for (i, line) in text.lines().enumerate() {
            let entry = line.trim();
            if entry.is_empty() || entry.starts_with('#') {
                continue;
            }
            let p = base.join(entry);
            expand(&p, Some((list, i + 1)), &mut out)?;
        }
    }
    if out.is_empty() {
        return Err(Error::config(
            "recordings",
            "nothing to read: give recording manifests, folders of them, or a --list file with paths",
        ));
    }
    Ok(out)
}

/// Reads a list file as UTF-8 text.
fn read_list(list: &Path) -> Result<String> {
    let bytes = std::fs::read(list).map_err(|e| Error::io("cannot read", list, e))?;
    String::from_utf8(bytes).map_err(|e| {
        let line = e.as_bytes()[..e.utf8_error().valid_up_to()]
            .iter()
            .filter(|&&b| b == b'\n')
            .count()
            + 1;
        Error::input(
            tactread::Location::file(list).line(line),
            "not UTF-8 text: a list file holds one path per line, as UTF-8",
        )
    })
}

/// Appends the manifests `p` stands for; `from` is the list file and line
/// it came from, for errors.
fn expand(p: &Path, from: Option<(&Path, usize)>, out: &mut Vec<PathBuf>) -> Result<()> {
    let missing = |what: String| -> Error {
        match from {
            Some((list, line)) => Error::input(
                tactread::Location::file(list).line(line),
                format!("{what} (paths in a list file are relative to the list file's folder)"),
            ),
            None => Error::config("recordings", what),
        }
    };
    if p.is_file() {
        out.push(p.to_path_buf());
        return Ok(());
    }
    if !p.is_dir() {
        return Err(missing(format!(
            "{} does not exist: give a recording manifest (.json) or a folder of them",
            p.display()
        )));
    }
    if p.join("index.json").is_file() {
        let ds = Dataset::open(p)?;
        let before = out.len();
        out.extend(ds.entries().iter().map(|e| ds.manifest_path(e)));
        if out.len() == before {
            return Err(missing(format!(
                "dataset {} lists no recordings",
                p.display()
            )));
        }
        return Ok(());
    }
    let entries = std::fs::read_dir(p).map_err(|e| Error::io("cannot list", p, e))?;
    let mut found = Vec::new();
    for entry in entries {
        let entry = entry.map_err(|e| Error::io("cannot list", p, e))?;
        let path = entry.path();
        if path.is_file() && path.extension().is_some_and(|x| x == "json") {
            found.push(path);
        }
    }
    if found.is_empty() {
        return Err(missing(format!(
            "{} holds no *.json recording manifests (subfolders are not searched)",
            p.display()
        )));
    }
    found.sort();
    out.extend(found);
    Ok(())
}

/// One compact JSON object for `--format jsonl`.
fn to_json_line(name: &str, lang: &str, b: &BatchRead) -> Value {
    let r = &b.decoded.reading;
    json!({
        "recording": name,
        "lang": lang,
        "text": b.decoded.text,
        "confidence": round(r.confidence),
        "n_best": r.hypotheses.iter().map(|h| json!({
            "text": h.text,
            "log_score": round(h.log_score),
        })).collect::<Vec<_>>(),
        "frames": b.frames,
        "duration_s": round(b.duration_s),
    })
}

/// Rescoring weights from a JSON file written by `tactread lexicon tune`.
pub(crate) fn load_weights(path: &Path) -> Result<RescoreWeights> {
    let text = tactread::fsutil::read_utf8(
        path,
        "a weights file is UTF-8 JSON written by `tactread lexicon tune`: write it again",
    )?;
    let w: RescoreWeights = serde_json::from_str(&text).map_err(|e| {
        Error::input(
            tactread::Location::file(path).line(e.line()),
            format!("not a rescoring weights file ({e}): write one with `tactread lexicon tune`"),
        )
    })?;
    w.check()?;
    Ok(w)
}

/// The lexicon a `--lexicon` option names: a file, `none`, or (when not
/// given) the builtin lexicon of `lang`. A file built for another language
/// is refused.
pub(crate) fn load_lexicon(arg: Option<&str>, lang: &str) -> Result<Option<Lexicon>> {
    Ok(match arg {
        Some("none") => None,
        Some(path) => {
            let lex = Lexicon::load(Path::new(path))?;
            if !lex.lang().is_empty() && lex.lang() != lang {
                return Err(Error::Mismatch {
                    what: format!("language of lexicon {path}"),
                    expected: lang.to_string(),
                    got: lex.lang().to_string(),
                    hint: "pass a lexicon built for this language, or --lang to match it".into(),
                });
            }
            Some(lex)
        }
        None => Some(Lexicon::builtin(lang)?),
    })
}

fn round(x: f64) -> f64 {
    (x * 1e4).round() / 1e4
}

fn to_json(name: &str, lang: &str, rescored: bool, d: &Decoded) -> Value {
    let r = &d.reading;
    json!({
        "recording": name,
        "lang": lang,
        "text": d.text,
        "beam_text": r.text,
        "rescored": rescored,
        "confidence": round(r.confidence),
        "log_likelihood": round(r.log_likelihood),
        "n_best": r.hypotheses.iter().map(|h| json!({
            "text": h.text,
            "log_score": round(h.log_score),
            "cells": tactread::cells_to_unicode(&h.cells),
        })).collect::<Vec<_>>(),
        "chars": r.chars.iter().map(|c| json!({
            "text": c.text,
            "cell": c.cell,
            "prob": round(c.prob),
            "alternatives": c.alternatives.iter().map(|(t, p)| json!({"text": t, "prob": round(*p)})).collect::<Vec<_>>(),
        })).collect::<Vec<_>>(),
        "cells": r.cells.iter().map(|c| json!({
            "cell": c.cell.to_char().to_string(),
            "dots": c.cell.dot_string(),
            "text": c.text,
            "prob": round(c.prob),
            "dot_probs": c.dot_probs.iter().map(|&p| round(p)).collect::<Vec<_>>(),
            "alternatives": c.alternatives.iter().map(|(a, p)| json!({
                "cell": a.to_char().to_string(), "dots": a.dot_string(), "prob": round(*p)
            })).collect::<Vec<_>>(),
            "frames": [c.frames.0, c.frames.1],
        })).collect::<Vec<_>>(),
        "words": d.words.iter().map(|w| json!({
            "raw": w.raw,
            "chosen": w.chosen,
            "frames": [w.frames.0, w.frames.1],
            "candidates": w.candidates.iter().map(|c| json!({
                "text": c.text,
                "score": round(c.score),
                "evidence": round(c.evidence),
                "log_prob": c.log_prob.map(round),
                "substitutions": c.substitutions,
                "indels": c.indels,
            })).collect::<Vec<_>>(),
        })).collect::<Vec<_>>(),
    })
}
