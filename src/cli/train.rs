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
use tactread::prep::Grid;
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
    after_help = "Example:\n  tactread simulate dataset --lines 2000 --preset typical --out sim-data\n  tactread train --data sim-data --out reader.model.json --max-minutes 15\n\nA checkpoint is written to MODEL.ckpt after every epoch; `--resume` continues from it.\n\nFine-tuning: `tactread train --init default --data my-scans --out mine.model.json` adapts a trained model to a few recordings of your own (resume such a run with the same --init)."
)]
pub struct Args {
    /// Dataset folder with an index.json (train, validation and test splits).
    #[arg(long, value_name = "DIR")]
    data: PathBuf,
    /// Where to write the model (JSON).
    #[arg(long, value_name = "MODEL")]
    out: PathBuf,
    /// Fine-tune this model (a file, or `default` for the embedded default
    /// model) instead of starting from random weights: its architecture and
    /// preprocessing are kept, the learning rate defaults to 1e-3.
    #[arg(long, value_name = "MODEL")]
    init: Option<PathBuf>,
    /// With --init: re-estimate the per-taxel baseline and scale on the new
    /// training data (the model's grid is kept).
    #[arg(long, requires = "init")]
    refit_prep: bool,
    /// Hidden units per GRU direction (default 128; with --init the model's).
    #[arg(long)]
    hidden: Option<usize>,
    /// Stacked GRU layers (default 2; with --init the model's).
    #[arg(long)]
    layers: Option<usize>,
    /// Recurrence direction: `uni` streams, `bi` is offline only (default
    /// uni; with --init the model's).
    #[arg(long, value_enum)]
    direction: Option<Direction>,
    /// Maximum number of epochs.
    #[arg(long, default_value_t = 40)]
    epochs: usize,
    /// Peak learning rate (Adam; linear warm-up then cosine decay; default
    /// 3e-3, with --init 1e-3).
    #[arg(long)]
    lr: Option<f32>,
    /// Recordings per mini-batch.
    #[arg(long, default_value_t = 32)]
    batch: usize,
    /// Random seed (initial weights and batch order).
    #[arg(long, default_value_t = 1)]
    seed: u64,
    /// Threads; the result is reproducible for a given seed and thread count.
    #[arg(long, default_value_t = 2)]
    threads: usize,
    /// Resampling step along the line in mm (recordings with a position
    /// channel; default 0.5; not with --init, which keeps the model's grid).
    #[arg(long, conflicts_with = "init")]
    step_mm: Option<f64>,
    /// Resampling rate in Hz (recordings without a position channel;
    /// default 40; not with --init).
    #[arg(long, conflicts_with = "init")]
    rate_hz: Option<f64>,
    /// Keep every k-th resampled frame (default 1; not with --init).
    #[arg(long, conflicts_with = "init")]
    decimate: Option<usize>,
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
    let init = match &args.init {
        Some(p) => Some((super::load_model(p)?, p.display().to_string())),
        None => None,
    };
    let d = TrainConfig::default();
    // With --init the architecture defaults to the model's (given options
    // must agree: checked by train::fine_tune) and so does the grid.
    let (hidden, layers, bidirectional, lr) = match &init {
        Some((m, _)) => {
            let g = m.network.config();
            (g.hidden, g.layers, g.bidirectional, train::FINE_TUNE_LR)
        }
        None => (d.hidden, d.layers, d.bidirectional, d.lr),
    };
    let (step_mm, rate_hz) = match init.as_ref().map(|(m, _)| m.prep.grid) {
        Some(Grid::Position { step_mm }) => (step_mm, d.rate_hz),
        Some(Grid::Time { rate_hz }) => (d.step_mm, rate_hz),
        None => (
            args.step_mm.unwrap_or(d.step_mm),
            args.rate_hz.unwrap_or(d.rate_hz),
        ),
    };
    let config = TrainConfig {
        hidden: args.hidden.unwrap_or(hidden),
        layers: args.layers.unwrap_or(layers),
        bidirectional: args.direction.map_or(bidirectional, |x| x == Direction::Bi),
        epochs: args.epochs,
        lr: args.lr.unwrap_or(lr),
        batch: args.batch,
        seed: args.seed,
        threads: args.threads,
        clip: args.clip,
        patience: args.patience,
        max_minutes: args.max_minutes,
        step_mm,
        rate_hz,
        decimate: match &init {
            Some((m, _)) => m.prep.decimate,
            None => args.decimate.unwrap_or(d.decimate),
        },
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
    if let Some(p) = args.init.as_ref().filter(|p| p.exists()) {
        // Fine-tuning never writes over the model it starts from.
        guard.input(p);
    }
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
    let data_name = args.data.display().to_string();
    if let Some((m, name)) = &init {
        eprintln!(
            "fine-tuning {name} ({} x {} {}, trained {} epochs on {}); {} preprocessing",
            m.network.config().layers,
            m.network.config().hidden,
            if m.network.config().bidirectional {
                "bi"
            } else {
                "uni"
            },
            m.training.epochs,
            if m.training.data.is_empty() {
                "unknown data"
            } else {
                &m.training.data
            },
            if args.refit_prep {
                "re-estimated"
            } else {
                "its"
            }
        );
    }
    let on_event = |e: Event| {
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
    };
    let outcome = match &init {
        Some((m, name)) => train::fine_tune(
            &config,
            train::FineTune {
                model: m,
                name,
                refit_prep: args.refit_prep,
            },
            &train_set,
            &val,
            &table,
            &data_name,
            &args.out,
            args.resume,
            on_event,
        )?,
        None => train::train(
            &config,
            &train_set,
            &val,
            &table,
            &data_name,
            &args.out,
            args.resume,
            on_event,
        )?,
    };
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
