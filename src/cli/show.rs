//! `tactread show RECORDING --out view.svg`: draw one recording's view,
//! its taxel signals along the position axis with the ground-truth cells
//! beneath, as a standalone SVG file.
//!
//! The ground truth is the manifest's `text`, written in cells with the
//! language pack's code table. Drawing the decoded cells as well needs a
//! trained model file (`--model`).

use clap::Args as ClapArgs;
use std::path::PathBuf;
use tactread::fsutil::OutputGuard;
use tactread::recording::Recording;
use tactread::report::{
    place_evenly, place_truth, recording_view_svg, view_axis, write_svg, RecordingView,
};
use tactread::{CodeTable, Error, Result};

/// Options of `tactread show`.
#[derive(Debug, ClapArgs)]
pub struct Args {
    /// The recording: its manifest (.json), or its frames file with the
    /// manifest beside it.
    recording: PathBuf,
    /// The SVG file to write.
    #[arg(long)]
    out: PathBuf,
    /// Language pack (en, de, fr, es) or code table file for the ground
    /// truth; default: the manifest's `lang`, else en.
    #[arg(long, value_name = "LANG|FILE")]
    lang: Option<String>,
    /// Centre of the first ground-truth cell on the position axis, mm;
    /// default: the manifest tag `first_cell_mm`, else half a pitch after
    /// the start.
    #[arg(long)]
    first_cell_mm: Option<f64>,
    /// Cell-to-cell distance, mm; default: the manifest tag
    /// `cell_pitch_mm`, else 6.2 (NLS Specification 800).
    #[arg(long)]
    pitch_mm: Option<f64>,
    /// A model file (from `tactread train`): also draw the cells it reads
    /// (beam search, no lexicon), placed at their frames.
    #[arg(long)]
    model: Option<PathBuf>,
    /// Overwrite an existing output file.
    #[arg(long)]
    force: bool,
}

/// Run `tactread show`.
pub fn run(args: Args) -> Result<()> {
    for (name, v) in [
        ("--first-cell-mm", args.first_cell_mm),
        ("--pitch-mm", args.pitch_mm),
    ] {
        if v.is_some_and(|v| !v.is_finite()) {
            return Err(Error::config(
                name,
                "must be a finite number of millimetres",
            ));
        }
    }
    if args.pitch_mm.is_some_and(|p| p <= 0.0) {
        return Err(Error::config(
            "--pitch-mm",
            "must be above 0 (6.2 is common for paper braille)",
        ));
    }
    if !args
        .out
        .extension()
        .is_some_and(|e| e.eq_ignore_ascii_case("svg"))
    {
        return Err(Error::config(
            "--out",
            "the view is an SVG file: give a name ending in .svg",
        ));
    }
    let mut guard = OutputGuard::new(args.force);
    guard.input(&args.recording);
    if let Some(model) = &args.model {
        guard.input(model);
    }
    guard.file(&args.out, "--out")?;
    let rec = Recording::load(&args.recording)?;
    // The manifest and the frames file (the argument may name either).
    let stem = args.recording.with_extension("json");
    let dir = stem.parent().unwrap_or(std::path::Path::new(""));
    guard
        .input(&stem)
        .input(dir.join(&rec.manifest.frames))
        .file(&args.out, "--out")?;
    let lang = args
        .lang
        .clone()
        .or_else(|| rec.manifest.lang.clone())
        .unwrap_or_else(|| "en".to_string());
    let text = rec.manifest.text.clone().unwrap_or_default();
    let cells = if text.is_empty() {
        eprintln!(
            "note: {} has no ground-truth text; drawing the signals only",
            args.recording.display()
        );
        Vec::new()
    } else {
        CodeTable::resolve(&lang)?.encode(&text)?
    };
    let truth = match (args.first_cell_mm, args.pitch_mm) {
        (None, None) => place_truth(&rec, &cells),
        (first, pitch) => {
            let auto = place_truth(&rec, &cells);
            let pitch = pitch.unwrap_or_else(|| {
                if auto.len() >= 2 {
                    auto[1].at - auto[0].at
                } else {
                    tactread::report::DEFAULT_CELL_PITCH_MM
                }
            });
            let first = first.unwrap_or_else(|| auto.first().map(|c| c.at).unwrap_or(pitch / 2.0));
            if !view_axis(&rec).in_mm {
                eprintln!("note: the recording has no positions and no speed tag; the axis is time, so --first-cell-mm and --pitch-mm are in seconds");
            }
            place_evenly(&cells, first, pitch)
        }
    };
    let name = args
        .recording
        .file_stem()
        .map(|s| s.to_string_lossy().into_owned())
        .unwrap_or_default();
    let title = if text.is_empty() {
        name
    } else {
        format!("{name}: \u{201c}{text}\u{201d}")
    };
    let view = RecordingView {
        title,
        recording: &rec,
        truth,
        decoded: match &args.model {
            None => None,
            Some(path) => {
                let model = tactread::net::Model::load(path)?;
                let table = CodeTable::resolve(&lang)?;
                let decoder = tactread::decode::Decoder::new(
                    &table,
                    tactread::decode::BeamParams::default(),
                )?;
                let name = args.recording.display().to_string();
                let d = tactread::pipeline::read_recording(&model, &decoder, &rec, &name)?;
                Some(tactread::pipeline::place_decoded(&model, &rec, &d))
            }
        },
    };
    let svg = recording_view_svg(&view)?;
    write_svg(&args.out, &svg)?;
    println!("wrote {}", args.out.display());
    Ok(())
}
