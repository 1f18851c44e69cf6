//! `tactread train`: fit a model on a dataset folder (as `tactread
//! simulate dataset` writes), keep the best epoch by validation accuracy,
//! and report greedy-decoding figures on the held-out test split.

use clap::{Args as ClapArgs, ValueEnum};
use indicatif::{ProgressBar, ProgressStyle};
use rayon::prelude::*;
use std::collections::BTreeMap;
use std::ops::ControlFlow;
use std::path::PathBuf;
use std::sync::Arc;
use std::time::Instant;
use tactread::braille::CodeTable;
use tactread::fsutil::OutputGuard;
use tactread::recording::{Dataset, Split};
use tactread::train::{self, Event, Example, TrainConfig};
use tactread::{Error, Result};

/// Recurrence direction.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
enum Direction {
    /// Forward in time only: can decode while streaming.
    Uni,
    /// Forward and backward: offline only, usually more accurate.
    Bi,
}

/// Options of `tactread train`.
#[derive(Debug, ClapArgs)]
#[command(
    after_help = "Example:\n  tactread simulate dataset --lines 2000 --preset typical --out sim-data\n  tactread train --data sim-data --out reader.model.json --max-minutes 15\n\nA checkpoint is written to MODEL.ckpt after every epoch; `--resume` continues from it."
)]
pub struct Args {
    /// Dataset folder with an index.json (train, validation and test splits).
    #[arg(long, value_name = "DIR")]
    data: PathBuf,
    /// Where to write the model (JSON).
    #[arg(long, value_name = "MODEL")]
    out: PathBuf,
    /// Hidden units per GRU direction.
    #[arg(long, default_value_t = 128)]
    hidden: usize,
    /// Stacked GRU layers.
    #[arg(long, default_value_t = 2)]
    layers: usize,
    /// Recurrence direction: `uni` streams, `bi` is offline only.
    #[arg(long, value_enum, default_value_t = Direction::Uni)]
    direction: Direction,
    /// Maximum number of epochs.
    #[arg(long, default_value_t = 40)]
    epochs: usize,
    /// Peak learning rate (Adam; linear warm-up then cosine decay).
    #[arg(long, default_value_t = 3e-3)]
    lr: f32,
    /// Recordings per mini-batch.
    #[arg(long, default_value_t = 32)]
    batch: usize,
    /// Random seed (initial weights and batch order).
    #[arg(long, default_value_t = 1)]
    seed: u64,
    /// Threads; the result is reproducible for a given seed and thread count.
    #[arg(long, default_value_t = 2)]
    threads: usize,
    /// Resampling step along the line in mm (recordings with a position channel).
    #[arg(long, default_value_t = 0.5)]
    step_mm: f64,
    /// Resampling rate in Hz (recordings without a position channel).
    #[arg(long, default_value_t = 40.0)]
    rate_hz: f64,
    /// Keep every k-th resampled frame.
    #[arg(long, default_value_t = 1)]
    decimate: usize,
    /// Stop after this many epochs without a better validation score.
    #[arg(long, default_value_t = 6)]
    patience: usize,
    /// Start no new epoch after this many minutes.
    #[arg(long)]
    max_minutes: Option<f64>,
    /// Clip the global gradient norm to this value.
    #[arg(long, default_value_t = 5.0)]
    clip: f32,
    /// Continue the interrupted run whose checkpoint is MODEL.ckpt.
    #[arg(long)]
    resume: bool,
    /// Overwrite an existing model file.
    #[arg(long)]
    force: bool,
}

/// The examples of one split; recordings in another language than the
/// run's `primary` one carry their own code table.
fn load_split(
    ds: &Dataset,
    split: Split,
    primary: &str,
    tables: &BTreeMap<String, Arc<CodeTable>>,
) -> Result<Vec<Example>> {
    let entries: Vec<_> = ds.split(split).collect();
    entries
        .par_iter()
        .map(|e| {
            Ok(Example {
                name: ds.manifest_path(e).display().to_string(),
                recording: ds.load(e)?,
                text: e.text.clone(),
                table: if e.lang == primary {
                    None
                } else {
                    tables.get(&e.lang).cloned()
                },
            })
        })
        .collect()
}

/// The language packs of a dataset and its primary language: the most
/// common one among the training recordings (ties: the first by name).
fn languages(ds: &Dataset) -> Result<(String, BTreeMap<String, Arc<CodeTable>>)> {
    let mut counts: BTreeMap<String, usize> = BTreeMap::new();
    for e in ds.entries() {
        let n = counts.entry(e.lang.clone()).or_default();
        if e.split == Split::Train {
            *n += 1;
        }
    }
    let mut tables = BTreeMap::new();
    for lang in counts.keys() {
        tables.insert(lang.clone(), Arc::new(CodeTable::builtin(lang)?));
    }
    let primary = counts
        .iter()
        .fold(None::<(&String, usize)>, |best, (l, &n)| match best {
            Some((_, m)) if m >= n => best,
            _ => Some((l, n)),
        })
        .map(|(l, _)| l.clone())
        .ok_or_else(|| Error::config("data", "the dataset lists no recordings"))?;
    Ok((primary, tables))
}

/// Run `tactread train`.
pub fn run(args: Args) -> Result<()> {
    let config = TrainConfig {
        hidden: args.hidden,
        layers: args.layers,
        bidirectional: args.direction == Direction::Bi,
        epochs: args.epochs,
        lr: args.lr,
        batch: args.batch,
        seed: args.seed,
        threads: args.threads,
        clip: args.clip,
        patience: args.patience,
        max_minutes: args.max_minutes,
        step_mm: args.step_mm,
        rate_hz: args.rate_hz,
        decimate: args.decimate,
    };
    config.check()?;
    let ckpt = train::checkpoint_path(&args.out);
    if args.resume && !ckpt.exists() {
        return Err(Error::config(
            "--resume",
            format!(
                "{} does not exist, so there is no interrupted run of {} to continue: check \
                 --out, or start the run without --resume",
                ckpt.display(),
                args.out.display()
            ),
        ));
    }
    if !args.force && !args.resume {
        for path in [&args.out, &ckpt] {
            if path.exists() {
                return Err(Error::Output {
                    path: path.clone(),
                    reason: "the file exists: pass --force to replace it, or --resume to \
                             continue its run"
                        .into(),
                });
            }
        }
    }
    let ds = Dataset::open(&args.data)?;
    // The model and its checkpoint never go over the dataset's files (the
    // index, a manifest), even with --force; frames files are checked once
    // the manifests are read.
    let mut guard = OutputGuard::new(true);
    guard
        .input(ds.dir().join(tactread::recording::DATASET_INDEX))
        .inputs(ds.entries().iter().map(|e| ds.manifest_path(e)));
    guard.file(&args.out, "--out")?;
    guard.file(&ckpt, "--out (its checkpoint)")?;
    let (lang, tables) = languages(&ds)?;
    let table = CodeTable::builtin(&lang)?;
    let lang_list = tables.keys().cloned().collect::<Vec<_>>().join(", ");
    let t_load = Instant::now();
    let (train_set, val, test) = rayon::ThreadPoolBuilder::new()
        .num_threads(args.threads)
        .build()
        .map_err(|e| Error::config("threads", e.to_string()))?
        .install(|| -> Result<_> {
            Ok((
                load_split(&ds, Split::Train, &lang, &tables)?,
                load_split(&ds, Split::Validation, &lang, &tables)?,
                load_split(&ds, Split::Test, &lang, &tables)?,
            ))
        })?;
    for e in train_set.iter().chain(&val).chain(&test) {
        let manifest = std::path::Path::new(&e.name);
        let dir = manifest.parent().unwrap_or(std::path::Path::new(""));
        guard.input(dir.join(&e.recording.manifest.frames));
    }
    guard.file(&args.out, "--out")?;
    guard.file(&ckpt, "--out (its checkpoint)")?;
    eprintln!(
        "{}: {} train, {} validation, {} test recordings ({lang_list}), loaded in {:.1} s",
        args.data.display(),
        train_set.len(),
        val.len(),
        test.len(),
        t_load.elapsed().as_secs_f64()
    );

    let bar = ProgressBar::new(0);
    bar.set_style(
        ProgressStyle::with_template(
            "{bar:28} {pos}/{len} batches {msg} [{elapsed_precise} < {eta_precise}]",
        )
        .unwrap_or_else(|_| ProgressStyle::default_bar()),
    );
    let mut last_val = String::from("val -");
    let mut loss_avg: Option<f64> = None;
    let t0 = Instant::now();
    let outcome = train::train(
        &config,
        &train_set,
        &val,
        &table,
        &args.data.display().to_string(),
        &args.out,
        args.resume,
        |e| {
            match e {
                Event::Start { batches, done } => {
                    bar.set_length(batches);
                    bar.set_position(done);
                }
                Event::Batch { loss, frames_per_s } => {
                    let a = loss_avg.map_or(loss, |m| 0.95 * m + 0.05 * loss);
                    loss_avg = Some(a);
                    bar.inc(1);
                    bar.set_message(format!(
                        "loss {a:.3} | {last_val} | {:.0}k frames/s",
                        frames_per_s / 1e3
                    ));
                }
                Event::Epoch {
                    epoch,
                    train_loss,
                    validation,
                    best,
                } => {
                    last_val = format!(
                        "val dots {:.2}% chars {:.2}%",
                        validation.dot_accuracy * 100.0,
                        validation.char_accuracy * 100.0
                    );
                    let line = format!(
                        "epoch {epoch:>3}  train loss {train_loss:.4}  val loss {:.4}  dots {:.2}%  \
                         chars {:.2}%  {:.0} s{}",
                        validation.loss,
                        validation.dot_accuracy * 100.0,
                        validation.char_accuracy * 100.0,
                        t0.elapsed().as_secs_f64(),
                        if best { "  (best, saved)" } else { "" }
                    );
                    // A hidden bar (output not a terminal) prints nothing.
                    if bar.is_hidden() {
                        eprintln!("{line}");
                    } else {
                        bar.println(line);
                    }
                }
            }
            ControlFlow::Continue(())
        },
    )?;
    bar.finish_and_clear();
    let s = &outcome.model.training;
    eprintln!(
        "best epoch {} of {}: validation dots {:.2}%, chars {:.2}%; trained {:.0} s; model {}",
        s.best_epoch,
        s.epochs,
        s.validation_dot_accuracy * 100.0,
        s.validation_char_accuracy * 100.0,
        s.seconds,
        args.out.display()
    );
    if !test.is_empty() {
        let v = train::evaluate(&outcome.model, &test, &table, args.threads)?;
        println!(
            "test ({} recordings, greedy decoding): dot accuracy {:.2}%, character accuracy {:.2}%",
            test.len(),
            v.dot_accuracy * 100.0,
            v.char_accuracy * 100.0
        );
    }
    Ok(())
}
