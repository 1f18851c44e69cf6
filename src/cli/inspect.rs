//! `tactread inspect`: check recordings against the format and print a
//! short summary of each (frames, duration, taxels, sample rate, position
//! and value ranges, ground truth). Recordings are streamed, so memory does
//! not grow with their length.
//!
//! Every recording is checked even when an earlier one fails; each error is
//! printed once (the last one by `main`, which sets the exit code).

use clap::Args as ClapArgs;
use serde_json::json;
use std::io::Write;
use std::path::PathBuf;
use tactread::recording::{FramesKind, RecordingStream};
use tactread::{Error, Result};

/// Frames read per chunk while inspecting.
const CHUNK: usize = 4096;

/// Options of `tactread inspect`.
#[derive(Debug, ClapArgs)]
pub struct Args {
    /// Recordings to check: manifests (.json), or frames files (.csv, .npy)
    /// with their manifest beside them.
    #[arg(required = true, value_name = "RECORDING")]
    recordings: Vec<PathBuf>,
    /// Print a JSON array with one object per recording instead of text.
    #[arg(long)]
    json: bool,
}

/// What `inspect` reports about one valid recording.
struct Summary {
    manifest: PathBuf,
    frames_file: PathBuf,
    kind: FramesKind,
    frames: usize,
    first_time_s: f64,
    last_time_s: f64,
    taxels: usize,
    units: String,
    sensor_name: Option<String>,
    sample_rate_hz: f64,
    position_mm: Option<(f64, f64)>,
    values: (f32, f32),
    text: Option<String>,
    lang: Option<String>,
}

impl Summary {
    fn duration_s(&self) -> f64 {
        self.last_time_s - self.first_time_s
    }

    /// Frames per second measured from the time column, when there are at
    /// least two frames.
    fn measured_rate_hz(&self) -> Option<f64> {
        (self.frames > 1 && self.duration_s() > 0.0)
            .then(|| (self.frames - 1) as f64 / self.duration_s())
    }

    fn to_json(&self) -> serde_json::Value {
        json!({
            "recording": self.manifest.display().to_string(),
            "ok": true,
            "frames_file": self.frames_file.display().to_string(),
            "frames_kind": self.kind.extension(),
            "frames": self.frames,
            "duration_s": self.duration_s(),
            "first_time_s": self.first_time_s,
            "last_time_s": self.last_time_s,
            "taxels": self.taxels,
            "units": self.units,
            "sensor": self.sensor_name,
            "sample_rate_hz": self.sample_rate_hz,
            "measured_rate_hz": self.measured_rate_hz(),
            "position_mm": self.position_mm.map(|(lo, hi)| json!({"min": lo, "max": hi})),
            "values": {"min": f32_as_json(self.values.0), "max": f32_as_json(self.values.1)},
            "text": self.text,
            "lang": self.lang,
        })
    }

    fn write_text(&self, out: &mut impl Write) -> std::io::Result<()> {
        let kind = match self.kind {
            FramesKind::Csv => "CSV",
            FramesKind::Npy => "npy",
        };
        let name = self
            .sensor_name
            .as_deref()
            .map_or(String::new(), |n| format!(", sensor {n}"));
        let rate = match self.measured_rate_hz() {
            Some(m) => format!(
                "{} Hz in the manifest, {m:.2} Hz measured",
                self.sample_rate_hz
            ),
            None => format!("{} Hz in the manifest", self.sample_rate_hz),
        };
        let position = match self.position_mm {
            Some((lo, hi)) => format!("{lo:.3} .. {hi:.3} mm"),
            None => "none (no position_mm column)".to_string(),
        };
        let text = match (&self.text, &self.lang) {
            (Some(t), Some(l)) => format!("{t:?} ({l})"),
            (Some(t), None) => format!("{t:?}"),
            (None, _) => "none given".to_string(),
        };
        writeln!(out, "{}", self.manifest.display())?;
        writeln!(
            out,
            "  frames       {} ({kind}, {})",
            self.frames,
            self.frames_file.display()
        )?;
        writeln!(
            out,
            "  duration     {:.3} s ({:.3} .. {:.3} s)",
            self.duration_s(),
            self.first_time_s,
            self.last_time_s
        )?;
        writeln!(
            out,
            "  taxels       {} (units {}{name})",
            self.taxels, self.units
        )?;
        writeln!(out, "  sample rate  {rate}")?;
        writeln!(out, "  position     {position}")?;
        writeln!(
            out,
            "  values       {} .. {} {}",
            self.values.0, self.values.1, self.units
        )?;
        writeln!(out, "  text         {text}")
    }
}

/// An f32 as the f64 with the same shortest digits (so 4.1f32 prints as
/// 4.1, not 4.099999904632568).
fn f32_as_json(v: f32) -> f64 {
    v.to_string().parse().unwrap_or(f64::from(v))
}

/// Stream one recording through every check and summarise it.
fn summarise(path: &std::path::Path) -> Result<Summary> {
    let mut stream = RecordingStream::open(path)?;
    let m = stream.manifest().clone();
    let mut frames = 0usize;
    let mut first_time_s = f64::NAN;
    let mut last_time_s = f64::NAN;
    let mut position: Option<(f64, f64)> = None;
    let mut values = (f32::INFINITY, f32::NEG_INFINITY);
    while let Some(chunk) = stream.next_chunk(CHUNK)? {
        if frames == 0 {
            first_time_s = chunk.time_s[0];
        }
        if let Some(&t) = chunk.time_s.last() {
            last_time_s = t;
        }
        frames += chunk.len();
        if let Some(p) = &chunk.position_mm {
            for &x in p {
                let (lo, hi) = position.get_or_insert((x, x));
                *lo = lo.min(x);
                *hi = hi.max(x);
            }
        }
        for &v in chunk.frames.iter() {
            values.0 = values.0.min(v);
            values.1 = values.1.max(v);
        }
    }
    Ok(Summary {
        manifest: stream.manifest_path().to_path_buf(),
        frames_file: stream.frames_path().to_path_buf(),
        kind: stream.kind(),
        frames,
        first_time_s,
        last_time_s,
        taxels: m.sensor.taxels,
        units: m.sensor.units,
        sensor_name: m.sensor.name,
        sample_rate_hz: m.sensor.sample_rate_hz,
        position_mm: position,
        values,
        text: m.text,
        lang: m.lang,
    })
}

/// Print an error that is not the one handed back to `main`.
fn print_error(err: &Error) {
    eprintln!("error: {err}");
    let mut source = std::error::Error::source(err);
    while let Some(cause) = source {
        eprintln!("  caused by: {cause}");
        source = cause.source();
    }
}

/// Run `tactread inspect`.
pub fn run(args: Args) -> Result<()> {
    let stdout = std::io::stdout();
    let mut out = stdout.lock();
    let mut last_error: Option<Error> = None;
    let mut json_out = Vec::new();
    for (i, path) in args.recordings.iter().enumerate() {
        match summarise(path) {
            Ok(summary) => {
                if args.json {
                    json_out.push(summary.to_json());
                } else {
                    let written = if i > 0 { writeln!(out) } else { Ok(()) }
                        .and_then(|()| summary.write_text(&mut out))
                        .and_then(|()| out.flush());
                    if !stdout_ok(written)? {
                        return Ok(());
                    }
                }
            }
            Err(err) => {
                if args.json {
                    json_out.push(json!({
                        "recording": path.display().to_string(),
                        "ok": false,
                        "error": err.to_string(),
                    }));
                }
                if let Some(previous) = last_error.replace(err) {
                    print_error(&previous);
                }
            }
        }
    }
    if args.json {
        let text = serde_json::to_string_pretty(&json_out).unwrap_or_else(|_| "[]".to_string());
        if !stdout_ok(writeln!(out, "{text}").and_then(|()| out.flush()))? {
            return Ok(());
        }
    }
    match last_error {
        Some(err) => Err(err),
        None => Ok(()),
    }
}

/// Whether writing to stdout worked; `Ok(false)` when the reader went away
/// (e.g. `tactread inspect ... | head`), which ends the output quietly
/// instead of panicking as `println!` would.
fn stdout_ok(written: std::io::Result<()>) -> Result<bool> {
    match written {
        Ok(()) => Ok(true),
        Err(e) if e.kind() == std::io::ErrorKind::BrokenPipe => Ok(false),
        Err(e) => Err(Error::io("cannot write", "<stdout>", e)),
    }
}
