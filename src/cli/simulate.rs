//! `tactread simulate`: simulated recordings with ground truth.
//!
//! `tactread simulate "TEXT" --out rec.json` writes one recording (the
//! manifest plus a frames file of the same stem); `tactread simulate
//! dataset --out DIR` writes train, validation and test splits with an
//! index, from the built-in corpus or a text file. Every option is checked
//! and turned into a [`Simulator`] before any work starts.

use clap::{Args as ClapArgs, Subcommand};
use indicatif::{ProgressBar, ProgressStyle};
use rand::seq::SliceRandom;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use std::path::{Path, PathBuf};
use tactread::fsutil::OutputGuard;
use tactread::recording::{FramesKind, SaveOptions, Split};
use tactread::simulate::{
    corpus_lines, encode_line, recording_seed, write_dataset, DatasetLine, DatasetPlan,
    PageGeometry, Preset, SensorSpec, SimConfig, Simulator, CORPUS_LANGS,
};
use tactread::{CodeTable, Error, Location, Result};

/// Options of `tactread simulate`.
#[derive(Debug, ClapArgs)]
#[command(
    args_conflicts_with_subcommands = true,
    subcommand_negates_reqs = true,
    after_help = "Examples:\n  tactread simulate \"Ferry to Tarnholm at 9.15\" --out ferry.json\n  tactread simulate --text-file sign.txt --lang de --sensor pad4x3 --preset hard --out sign.json\n  tactread simulate dataset --lines 400 --speed 8..40 --out sim-data\n\nTo emboss the word \"dataset\" itself, write `tactread simulate --out x.json -- dataset`."
)]
pub struct Args {
    #[command(subcommand)]
    mode: Option<Mode>,

    /// Text to emboss as one line (several arguments are joined by spaces).
    #[arg(conflicts_with = "text_file")]
    text: Vec<String>,

    /// Read the line to emboss from a file (one line of text).
    #[arg(long, value_name = "FILE")]
    text_file: Option<PathBuf>,

    /// Manifest to write, ending in .json; the frames file gets the same
    /// stem (rec.json -> rec.csv or rec.npy).
    #[arg(long, short, value_name = "FILE.json", required = true)]
    out: Option<PathBuf>,

    /// Language pack (en, de, fr, es) or the path of a code table file.
    #[arg(long, default_value = "en", value_name = "LANG|FILE")]
    lang: String,

    #[command(flatten)]
    sim: SimArgs,
}

#[derive(Debug, Subcommand)]
enum Mode {
    /// Write a dataset: train, validation and test splits with index.json.
    Dataset(DatasetArgs),
}

/// Options of `tactread simulate dataset`.
#[derive(Debug, ClapArgs)]
struct DatasetArgs {
    /// Folder to write (new or empty; with --force, an earlier dataset).
    #[arg(long, short, value_name = "DIR")]
    out: PathBuf,

    /// Number of distinct text lines [default: 1000 from the built-in
    /// corpus; every line of --text-file].
    #[arg(long, value_name = "N")]
    lines: Option<usize>,

    /// Take the lines from this file, one per non-empty line, instead of
    /// the built-in corpus.
    #[arg(long, value_name = "FILE")]
    text_file: Option<PathBuf>,

    /// Languages of the built-in corpus, comma-separated, or `all`; with
    /// --text-file, the one language pack (or code table file) of its text.
    #[arg(long, value_name = "LANGS")]
    lang: Option<String>,

    /// Fractions of lines for train, validation and test.
    #[arg(long, default_value = "0.8,0.1,0.1", value_name = "T,V,T")]
    split: String,

    /// Recordings per line, each with its own seed (all in the line's split).
    #[arg(long, default_value_t = 1, value_name = "N")]
    takes: usize,

    /// Worker threads [default: all cores].
    #[arg(long, value_name = "N")]
    jobs: Option<usize>,

    #[command(flatten)]
    sim: SimArgs,
}

/// Options shared by both modes.
#[derive(Debug, ClapArgs)]
struct SimArgs {
    /// Built-in sensor (hex24, pad4x3, skin16) or the path of a sensor file.
    #[arg(long, default_value = "hex24", value_name = "NAME|FILE")]
    sensor: String,

    /// Page geometry preset.
    #[arg(long, default_value = "nls800", value_parser = ["nls800", "signage", "low-dots"])]
    page: String,

    /// Difficulty preset: kinematics and fault level (see docs/simulator.md).
    #[arg(long, default_value = "typical", value_parser = ["clean", "typical", "hard"])]
    preset: String,

    /// Mean sliding speed in mm/s, or a range MIN..MAX to draw from per
    /// recording.
    #[arg(long, default_value = "20", value_name = "MM_S|MIN..MAX")]
    speed: String,

    /// Mean normal force in newtons [default: 0.5].
    #[arg(long, value_name = "N")]
    normal_force: Option<f64>,

    /// Mean offset of the sensor's middle below the line's middle dot row,
    /// in mm [default: 0].
    #[arg(long, value_name = "MM", allow_hyphen_values = true)]
    offset: Option<f64>,

    /// Leave out the position channel (no encoder).
    #[arg(long)]
    no_position: bool,

    /// Sample rate in Hz instead of the sensor file's.
    #[arg(long, value_name = "HZ")]
    rate: Option<f64>,

    /// Seed: the same seed and options give the same bytes.
    #[arg(long, default_value_t = 0)]
    seed: u64,

    /// Kind of frames file.
    #[arg(long, default_value = "csv", value_parser = ["csv", "npy"])]
    frames: String,

    /// Replace existing outputs.
    #[arg(long)]
    force: bool,
}

/// Run `tactread simulate`.
pub fn run(args: Args) -> Result<()> {
    match args.mode {
        Some(Mode::Dataset(d)) => run_dataset(d),
        None => run_single(args),
    }
}

fn frames_kind(name: &str) -> FramesKind {
    if name == "npy" {
        FramesKind::Npy
    } else {
        FramesKind::Csv
    }
}

/// `A` or `A..B`, in mm/s.
fn parse_speed(s: &str) -> Result<[f64; 2]> {
    let bad = || {
        Error::config(
            "--speed",
            format!("`{s}`: give a speed in mm/s such as 20, or a range such as 8..40"),
        )
    };
    let parse = |t: &str| t.trim().parse::<f64>().map_err(|_| bad());
    let [lo, hi] = match s.split_once("..") {
        Some((a, b)) => [parse(a)?, parse(b)?],
        None => {
            let v = parse(s)?;
            [v, v]
        }
    };
    if !(lo.is_finite() && hi.is_finite() && lo >= 0.1 && lo <= hi && hi <= 1000.0) {
        return Err(Error::config(
            "--speed",
            format!("`{s}`: give speeds from 0.1 to 1000 mm/s, the smaller first"),
        ));
    }
    Ok([lo, hi])
}

fn parse_split(s: &str) -> Result<[f64; 3]> {
    let parts: Vec<&str> = s.split(',').collect();
    let bad = || {
        Error::config(
            "--split",
            format!("`{s}`: give three fractions for train, validation and test, e.g. 0.8,0.1,0.1"),
        )
    };
    if parts.len() != 3 {
        return Err(bad());
    }
    let mut out = [0.0; 3];
    for (o, p) in out.iter_mut().zip(&parts) {
        *o = p.trim().parse::<f64>().map_err(|_| bad())?;
        if !(o.is_finite() && *o >= 0.0) {
            return Err(bad());
        }
    }
    if out.iter().sum::<f64>() <= 0.0 {
        return Err(bad());
    }
    Ok(out)
}

/// The checked simulator and the speed range from the shared options.
fn build(sim: &SimArgs) -> Result<(Simulator, [f64; 2])> {
    let preset = Preset::from_name(&sim.preset)?;
    let mut cfg = SimConfig::new(preset);
    cfg.sensor = SensorSpec::resolve(&sim.sensor)?;
    if let Some(rate) = sim.rate {
        if !(rate.is_finite() && (1.0..=100_000.0).contains(&rate)) {
            return Err(Error::config(
                "--rate",
                format!("{rate}: give a sample rate from 1 to 100000 Hz"),
            ));
        }
        cfg.sensor.sample_rate_hz = rate;
    }
    cfg.page = PageGeometry::preset(&sim.page)?;
    let speed = parse_speed(&sim.speed)?;
    cfg.kinematics.speed_mm_s = speed[0];
    if let Some(f) = sim.normal_force {
        cfg.kinematics.force_n = f;
    }
    if let Some(o) = sim.offset {
        cfg.kinematics.lateral_offset_mm = o;
    }
    if sim.no_position {
        cfg.kinematics.encoder = None;
    }
    let map_flag = |e: Error| match e {
        Error::Config { name, message } => {
            let flag = match name.as_str() {
                "normal force" => "--normal-force".to_string(),
                "lateral offset" => "--offset".to_string(),
                _ => name,
            };
            Error::Config {
                name: flag,
                message,
            }
        }
        other => other,
    };
    cfg.kinematics.check().map_err(map_flag)?;
    Ok((Simulator::new(cfg).map_err(map_flag)?, speed))
}

/// The files a simulation reads: the text file, and the sensor file and
/// code table when those options name files rather than built-ins.
fn input_files(sim: &SimArgs, lang: Option<&str>, text_file: Option<&Path>) -> Vec<PathBuf> {
    let mut files: Vec<PathBuf> = text_file.into_iter().map(Path::to_path_buf).collect();
    for name in [Some(sim.sensor.as_str()), lang].into_iter().flatten() {
        let path = Path::new(name);
        if path.is_file() {
            files.push(path.to_path_buf());
        }
    }
    files
}

/// Non-empty lines of a UTF-8 text file, with their 1-based line numbers.
fn read_lines(path: &Path) -> Result<Vec<(usize, String)>> {
    let text = tactread::fsutil::read_utf8(path, "save the file as UTF-8")?;
    Ok(text
        .lines()
        .enumerate()
        .map(|(i, l)| (i + 1, l.trim_end_matches('\r').to_string()))
        .filter(|(_, l)| !l.trim().is_empty())
        .collect())
}

/// An unencodable character's hint, worded for this command.
fn cli_hint(e: Error) -> Error {
    match e {
        Error::Unencodable {
            ch,
            code,
            position,
            lang,
            ..
        } => Error::Unencodable {
            ch,
            code,
            position,
            hint: format!(
                "the `{lang}` code table has no sign for it here: remove or replace the character, or choose the language of the text with --lang"
            ),
            lang,
        },
        other => other,
    }
}

/// Encode a line of a file, naming the file and line in errors.
fn encode_file_line(
    path: &Path,
    line: usize,
    text: &str,
    table: &CodeTable,
) -> Result<DatasetLine> {
    let cells = encode_line(text, table)
        .map_err(|e| Error::input(Location::file(path).line(line), cli_hint(e).to_string()))?;
    Ok(DatasetLine {
        lang: table.lang().to_string(),
        text: text.to_string(),
        cells,
    })
}

fn run_single(args: Args) -> Result<()> {
    let out = args.out.clone().ok_or_else(|| {
        Error::config(
            "--out",
            "missing: give the manifest to write, e.g. --out rec.json",
        )
    })?;
    let (sim, speed) = build(&args.sim)?;
    let table = CodeTable::resolve(&args.lang)?;
    let (text, origin) = match &args.text_file {
        Some(path) => {
            let lines = read_lines(path)?;
            match lines.as_slice() {
                [] => {
                    return Err(Error::input(
                        Location::file(path),
                        "holds no text: write the line to emboss in it",
                    ))
                }
                [(n, l)] => (l.clone(), Some((path.clone(), *n))),
                [_, (n, _), ..] => {
                    return Err(Error::input(
                        Location::file(path).line(*n),
                        "a second line of text: one recording holds one line; for one recording per line use `tactread simulate dataset --text-file`",
                    ))
                }
            }
        }
        None => (args.text.join(" "), None),
    };
    if text.trim().is_empty() && origin.is_none() {
        return Err(Error::config(
            "text",
            "is empty: give the text to emboss as an argument, e.g. `tactread simulate \"Ferry at 9.15\" --out rec.json`, or with --text-file",
        ));
    }
    let cells = match &origin {
        Some((path, n)) => encode_file_line(path, *n, &text, &table)?.cells,
        None => encode_line(&text, &table).map_err(cli_hint)?,
    };
    let seed = args.sim.seed;
    let mut kin = sim.config().kinematics.clone();
    // A range draws the speed from the seed (stream 0 of the recording's
    // generator, which the simulator itself does not use).
    kin.speed_mm_s =
        speed[0] + (speed[1] - speed[0]) * ChaCha8Rng::seed_from_u64(seed).gen::<f64>();
    let mut rec = sim.simulate_with(&cells, &kin, seed)?;
    rec.manifest.text = Some(text);
    rec.manifest.lang = Some(table.lang().to_string());
    let kind = frames_kind(&args.sim.frames);
    let mut guard = OutputGuard::new(args.sim.force);
    guard.inputs(input_files(
        &args.sim,
        Some(&args.lang),
        args.text_file.as_deref(),
    ));
    guard.file(&out, "--out")?;
    guard.file(
        &out.with_extension(kind.extension()),
        "--out (its frames file)",
    )?;
    rec.save(&out, SaveOptions::new(kind).overwrite(args.sim.force))?;
    println!(
        "wrote {} and {}: {} frames ({:.2} s at {} Hz) of {} cells, sensor {}, preset {}, {:.1} mm/s",
        out.display(),
        out.with_extension(kind.extension()).display(),
        rec.frames.nrows(),
        rec.frames.nrows() as f64 / rec.manifest.sensor.sample_rate_hz,
        rec.manifest.sensor.sample_rate_hz,
        cells.len(),
        sim.config().sensor.name,
        sim.config().preset.name(),
        kin.speed_mm_s
    );
    Ok(())
}

/// Lines of the built-in corpus: `n` in all, shared round-robin between
/// `langs`, each language's lines shuffled with the seed first.
fn corpus_selection(langs: &[String], n: usize, seed: u64) -> Result<Vec<DatasetLine>> {
    let mut pools = Vec::new();
    for (k, lang) in langs.iter().enumerate() {
        let table = CodeTable::builtin(lang)?;
        let mut lines = corpus_lines(lang)?;
        lines.shuffle(&mut ChaCha8Rng::seed_from_u64(recording_seed(
            seed,
            u64::MAX - k as u64,
        )));
        pools.push((table, lines));
    }
    let available: usize = pools.iter().map(|(_, l)| l.len()).sum();
    if n > available {
        return Err(Error::config(
            "--lines",
            format!(
                "{n} is more than the {available} distinct lines of the built-in corpus for {}: ask for fewer, add --takes for several recordings per line, or give --text-file",
                langs.join(",")
            ),
        ));
    }
    let mut out = Vec::with_capacity(n);
    let mut next = vec![0usize; pools.len()];
    'fill: loop {
        for (k, (table, lines)) in pools.iter().enumerate() {
            if out.len() == n {
                break 'fill;
            }
            if let Some(text) = lines.get(next[k]) {
                next[k] += 1;
                out.push(DatasetLine {
                    lang: table.lang().to_string(),
                    cells: encode_line(text, table)?,
                    text: text.clone(),
                });
            }
        }
    }
    Ok(out)
}

fn run_dataset(args: DatasetArgs) -> Result<()> {
    let (sim, speed) = build(&args.sim)?;
    let split = parse_split(&args.split)?;
    if let Some(0) = args.lines {
        return Err(Error::config("--lines", "is 0: give at least one line"));
    }
    let lines = match &args.text_file {
        Some(path) => {
            let lang = args.lang.as_deref().unwrap_or("en");
            let table = CodeTable::resolve(lang)?;
            let mut raw = read_lines(path)?;
            if raw.is_empty() {
                return Err(Error::input(
                    Location::file(path),
                    "holds no text: write one line of text per recording",
                ));
            }
            if let Some(n) = args.lines {
                raw.truncate(n);
            }
            raw.iter()
                .map(|(n, l)| encode_file_line(path, *n, l, &table))
                .collect::<Result<Vec<_>>>()?
        }
        None => {
            let langs: Vec<String> = match args.lang.as_deref().unwrap_or("all") {
                "all" => CORPUS_LANGS.iter().map(|s| s.to_string()).collect(),
                list => list.split(',').map(|s| s.trim().to_string()).collect(),
            };
            for l in &langs {
                if !CORPUS_LANGS.contains(&l.as_str()) {
                    return Err(Error::config(
                        "--lang",
                        format!(
                            "no built-in corpus for `{l}`: use some of {} (comma-separated) or all, or give your own lines with --text-file",
                            CORPUS_LANGS.join(", ")
                        ),
                    ));
                }
            }
            corpus_selection(&langs, args.lines.unwrap_or(1000), args.sim.seed)?
        }
    };
    OutputGuard::new(args.sim.force)
        .inputs(input_files(
            &args.sim,
            args.lang.as_deref(),
            args.text_file.as_deref(),
        ))
        .folder(&args.out, "--out")?;
    let mut plan = DatasetPlan::new(lines);
    plan.split = split;
    plan.takes = args.takes;
    plan.speed_mm_s = speed;
    plan.seed = args.sim.seed;
    plan.frames = frames_kind(&args.sim.frames);
    plan.overwrite = args.sim.force;
    plan.description = format!(
        "simulated by tactread {}: {} lines x {} takes, sensor {}, page {}, preset {}, speed {} mm/s, seed {}",
        env!("CARGO_PKG_VERSION"),
        plan.lines.len(),
        plan.takes,
        sim.config().sensor.name,
        sim.config().page.name,
        sim.config().preset.name(),
        args.sim.speed,
        plan.seed
    );
    let total = plan.lines.len() * plan.takes;
    let bar = ProgressBar::new(total as u64);
    bar.set_style(
        ProgressStyle::with_template(
            "{elapsed_precise} [{bar:40}] {pos}/{len} recordings ({eta} left)",
        )
        .unwrap_or_else(|_| ProgressStyle::default_bar())
        .progress_chars("=> "),
    );
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(args.jobs.unwrap_or(0))
        .build()
        .map_err(|e| Error::config("--jobs", format!("cannot start worker threads: {e}")))?;
    let index = pool.install(|| write_dataset(&sim, &plan, &args.out, &|| bar.inc(1)));
    bar.finish_and_clear();
    let index = index?;
    let count = |s: Split| index.recordings.iter().filter(|e| e.split == s).count();
    println!(
        "wrote {} recordings to {} (train {}, validation {}, test {}) with index {}",
        index.recordings.len(),
        args.out.display(),
        count(Split::Train),
        count(Split::Validation),
        count(Split::Test),
        args.out.join("index.json").display()
    );
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn speeds_and_splits_parse() {
        assert_eq!(parse_speed("20").unwrap(), [20.0, 20.0]);
        assert_eq!(parse_speed("8..40").unwrap(), [8.0, 40.0]);
        assert!(parse_speed("40..8").is_err());
        assert!(parse_speed("fast").is_err());
        assert_eq!(parse_split("0.8,0.1,0.1").unwrap(), [0.8, 0.1, 0.1]);
        assert!(parse_split("0.8,0.2").is_err());
        assert!(parse_split("0,0,0").is_err());
        assert!(parse_split("1,-1,1").is_err());
    }
}
