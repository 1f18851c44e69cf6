//! `tactread decode`: read recordings with a trained model: network,
//! beam search with the code table's state, and lexicon rescoring.

use clap::{Args as ClapArgs, ValueEnum};
use serde_json::{json, Value};
use std::io::Write;
use std::path::{Path, PathBuf};
use tactread::braille::CodeTable;
use tactread::decode::{BeamParams, Decoded, Decoder};
use tactread::lexicon::{Lexicon, RescoreWeights};
use tactread::net::Model;
use tactread::recording::Recording;
use tactread::{Error, Result};

/// Options of `tactread decode`.
#[derive(Debug, ClapArgs)]
pub struct Args {
    /// The model file (from `tactread train`).
    model: PathBuf,
    /// Recording manifests to read (with --stream: one, or none to read
    /// CSV frame rows from stdin).
    #[arg(required_unless_present = "stream")]
    recordings: Vec<PathBuf>,
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
    /// Output: plain text, or JSON with the N best, per-character
    /// alternatives, per-cell dot probabilities and a confidence.
    #[arg(long, value_enum, default_value_t = Format::Text)]
    format: Format,
    /// Stream: read frames as they arrive and print each word as soon as
    /// it is final (unidirectional models; JSON output is one object per
    /// word and line).
    #[arg(long)]
    stream: bool,
    /// With --stream: show the running partial reading on stderr.
    #[arg(long, requires = "stream")]
    partial: bool,
}

#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
enum Format {
    Text,
    Json,
}

/// Printed on standard error with text output.
pub(crate) const CAUTION: &str =
    "caution: machine-read braille can be wrong; verify it wherever a misreading \
                       could do harm (medicine labels, dosages, signs)";

/// Run `tactread decode`.
pub fn run(args: Args) -> Result<()> {
    if args.stream {
        return super::decode_stream::run(super::decode_stream::Options {
            json: args.format == Format::Json,
            model: args.model,
            recordings: args.recordings,
            lang: args.lang,
            beam: args.beam,
            lexicon: args.lexicon,
            weights: args.weights,
            partial: args.partial,
        });
    }
    let model = Model::load(&args.model)?;
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
    if args.lang.is_some() && lang != model.lang {
        eprintln!(
            "note: the model was trained on `{}` text; reading it as `{lang}`",
            model.lang
        );
    }

    let mut results = Vec::with_capacity(args.recordings.len());
    for path in &args.recordings {
        let name = path.display().to_string();
        let rec = Recording::load(path)?;
        let decoded = tactread::pipeline::read_recording(&model, &decoder, &rec, &name)?;
        results.push((name, decoded));
    }

    let stdout = std::io::stdout();
    let mut out = stdout.lock();
    let written = match args.format {
        Format::Text => {
            eprintln!("{CAUTION}");
            let many = results.len() > 1;
            results.iter().try_for_each(|(name, d)| {
                if many {
                    writeln!(out, "{name}\t{}", d.text)
                } else {
                    writeln!(out, "{}", d.text)
                }
            })
        }
        Format::Json => {
            let items: Vec<Value> = results
                .iter()
                .map(|(name, d)| to_json(name, &lang, lexicon.is_some(), d))
                .collect();
            let doc = json!({ "format": "tactread-decoded", "version": 1, "caution": CAUTION, "recordings": items });
            writeln!(
                out,
                "{}",
                serde_json::to_string_pretty(&doc).unwrap_or_default()
            )
        }
    };
    match written.and_then(|_| out.flush()) {
        Ok(()) => Ok(()),
        // A closed pipe (e.g. `| head`) ends the output quietly.
        Err(e) if e.kind() == std::io::ErrorKind::BrokenPipe => Ok(()),
        Err(e) => Err(Error::io("cannot write", "<stdout>", e)),
    }
}

/// Rescoring weights from a JSON file written by `tactread lexicon tune`.
pub(crate) fn load_weights(path: &Path) -> Result<RescoreWeights> {
    let text = std::fs::read_to_string(path).map_err(|e| Error::io("cannot read", path, e))?;
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
