//! `tactread decode MODEL --stream`: read frames as they arrive (CSV rows
//! on stdin, or a recording file in chunks) and print each word as soon as
//! it is final, with a unidirectional model.

use super::decode::{load_lexicon, load_weights, CAUTION};
use serde_json::json;
use std::io::Write;
use std::path::PathBuf;
use tactread::braille::CodeTable;
use tactread::decode::{BeamParams, CommitRule, Decoder, StreamParams, StreamWord};
use tactread::lexicon::RescoreWeights;
use tactread::recording::CsvFrameReader;
use tactread::stream::{read_recording_streamed, stream_frames, StreamReader};
use tactread::{Error, Result};

/// What `decode --stream` needs from the `decode` options.
#[derive(Debug)]
pub(crate) struct Options {
    pub model: PathBuf,
    /// At most one recording; none reads CSV rows from stdin.
    pub recordings: Vec<PathBuf>,
    pub lang: Option<String>,
    pub beam: usize,
    pub lexicon: Option<String>,
    pub weights: Option<PathBuf>,
    /// One JSON object per word and line instead of plain words.
    pub json: bool,
    /// Show the running partial reading on stderr.
    pub partial: bool,
    /// `--list` or `--jobs` was given (batch options: refused).
    pub listed: bool,
}

/// Where words go: stdout, flushed after every word.
struct Printer {
    json: bool,
    /// Standard output was closed (e.g. `| head`): stop printing quietly.
    closed: bool,
}

impl Printer {
    fn word(&mut self, w: &StreamWord) -> Result<()> {
        if self.closed {
            return Ok(());
        }
        let stdout = std::io::stdout();
        let mut out = stdout.lock();
        let line = if self.json {
            json!({
                "word": w.text,
                "raw": w.raw,
                "frames": [w.frames.0, w.frames.1],
                "rule": match w.rule {
                    CommitRule::Agreement => "agreement",
                    CommitRule::Held => "held",
                    CommitRule::Bound => "bound",
                    CommitRule::End => "end",
                },
            })
            .to_string()
        } else {
            w.text.clone()
        };
        match writeln!(out, "{line}").and_then(|_| out.flush()) {
            Ok(()) => Ok(()),
            Err(e) if e.kind() == std::io::ErrorKind::BrokenPipe => {
                self.closed = true;
                Ok(())
            }
            Err(e) => Err(Error::io("cannot write", "<stdout>", e)),
        }
    }
}

/// Show the running partial reading on stderr when it changed.
fn show_partial(last: &mut String, text: String) {
    if text != *last {
        eprintln!("partial: {text}");
        *last = text;
    }
}

/// Run `tactread decode MODEL [REC] --stream`.
pub(crate) fn run(o: Options) -> Result<()> {
    if o.listed {
        return Err(Error::config(
            "--stream",
            "reads one recording or stdin: leave out --list and --jobs (they are for \
             decoding many recordings without --stream)",
        ));
    }
    if o.recordings.len() > 1 {
        return Err(Error::config(
            "--stream",
            format!(
                "reads one recording (or stdin), not {}: run one `tactread decode --stream` \
                 per recording",
                o.recordings.len()
            ),
        ));
    }
    let model = super::load_model(&o.model)?;
    // A recording file is read in the language its manifest names (stdin has
    // no manifest: the model's language), unless --lang names one.
    let lang = match (&o.lang, o.recordings.first()) {
        (Some(l), _) => l.clone(),
        (None, Some(path)) => tactread::recording::RecordingStream::open(path)?
            .manifest()
            .lang
            .clone()
            .unwrap_or_else(|| model.lang.clone()),
        (None, None) => model.lang.clone(),
    };
    let table = CodeTable::builtin(&lang)?;
    let lexicon = load_lexicon(o.lexicon.as_deref(), &lang)?;
    let beam = BeamParams {
        beam_width: o.beam,
        ..BeamParams::default()
    };
    let mut decoder = Decoder::new(&table, beam)?;
    let weights = match &o.weights {
        Some(p) => load_weights(p)?,
        None => RescoreWeights::default(),
    };
    if let Some(lex) = &lexicon {
        decoder = decoder.with_lexicon(lex, weights)?;
    }
    let params = StreamParams::default();
    let mut printer = Printer {
        json: o.json,
        closed: false,
    };
    let mut last_partial = String::new();
    if !o.json {
        eprintln!("{CAUTION}");
    }
    if let Some(path) = o.recordings.first() {
        let mut partials = |text: String| show_partial(&mut last_partial, text);
        return read_recording_streamed(
            &model,
            &decoder,
            path,
            params,
            |w| printer.word(w),
            o.partial.then_some(&mut partials as &mut dyn FnMut(String)),
        );
    }

    // CSV rows on stdin: the header names the columns as in a frames file.
    let probe = StreamReader::new(&model, &decoder, params.clone())?;
    let stdin = std::io::stdin();
    let mut rows = CsvFrameReader::new(stdin.lock(), "<stdin>", probe.taxels())?;
    if probe.needs_position() && !rows.has_position() {
        return Err(Error::Mismatch {
            what: "columns of <stdin> line 1".into(),
            expected: "a `position_mm` column (the model resamples by position)".into(),
            got: rows.columns().join(","),
            hint: "send `time_s,position_mm,<taxels>` rows, or use a model trained on \
                   time-resampled recordings"
                .into(),
        });
    }
    let frames = std::iter::from_fn(|| match rows.read_frame() {
        Ok(Some(f)) => {
            let coord = probe
                .coordinate(f.time_s, f.position_mm)
                .unwrap_or(f64::NAN);
            Some(Ok((coord, f.values)))
        }
        Ok(None) => None,
        Err(e) => Some(Err(e)),
    });
    let mut partials = |text: String| show_partial(&mut last_partial, text);
    stream_frames(
        &model,
        &decoder,
        params,
        frames,
        |w| printer.word(w),
        o.partial.then_some(&mut partials as &mut dyn FnMut(String)),
    )
}
