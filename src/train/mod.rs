//! Training: mini-batches bucketed by length, Adam with gradient clipping
//! and a warm-up + cosine schedule, validation every epoch with greedy CTC
//! decoding (dot and character accuracy), early stopping, the best model
//! kept, atomic checkpoints and resuming; and fine-tuning ([`fine_tune`]):
//! the same loop started from a trained model's weights and preprocessing.
//!
//! Determinism: for a given seed and thread count the run is reproducible
//! bit for bit. The batch order of epoch `e` comes from a ChaCha8 stream
//! seeded with `(seed, e)`, gradients are summed over `threads` shards in
//! a fixed order (see [`Network::loss_and_grad`]), and validation results
//! do not depend on thread timing. A resumed run continues exactly as the
//! uninterrupted run would have.

mod greedy;

pub(crate) use greedy::{greedy_cells, score};

use crate::braille::CodeTable;
use crate::net::{
    Adam, AdamConfig, FineTunedFrom, GruConfig, LrSchedule, Model, Network, SensorSummary,
    TrainingSummary,
};
use crate::prep::{Grid, Prep, PrepConfig};
use crate::{Cell, Error, Result};
use ndarray::Array2;
use rand::seq::SliceRandom;
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use rayon::prelude::*;
use serde::{Deserialize, Serialize};
use std::ops::ControlFlow;
use std::path::{Path, PathBuf};
use std::sync::Arc;
use std::time::Instant;

/// Training options. Defaults in brackets.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct TrainConfig {
    /// Hidden units per direction (default 128).
    pub hidden: usize,
    /// GRU layers (default 2).
    pub layers: usize,
    /// Bidirectional layers (offline only) (default false).
    pub bidirectional: bool,
    /// Maximum epochs (default 40).
    pub epochs: usize,
    /// Peak learning rate (default 3e-3).
    pub lr: f32,
    /// Sequences per mini-batch (default 32).
    pub batch: usize,
    /// Random seed (default 1).
    pub seed: u64,
    /// Threads, also the number of gradient shards (default 2).
    pub threads: usize,
    /// Global gradient-norm clip (default 5.0).
    pub clip: f32,
    /// Stop after this many epochs without a better validation score (default 6).
    pub patience: usize,
    /// Stop starting new epochs after this many minutes (default none).
    pub max_minutes: Option<f64>,
    /// Position grid step in mm (default 0.5).
    pub step_mm: f64,
    /// Time grid rate in Hz for recordings without positions (default 40).
    pub rate_hz: f64,
    /// Keep every k-th grid sample (default 1).
    pub decimate: usize,
}

impl Default for TrainConfig {
    fn default() -> Self {
        let p = PrepConfig::default();
        TrainConfig {
            hidden: 128,
            layers: 2,
            bidirectional: false,
            epochs: 40,
            lr: 3e-3,
            batch: 32,
            seed: 1,
            threads: 2,
            clip: 5.0,
            patience: 6,
            max_minutes: None,
            step_mm: p.step_mm,
            rate_hz: p.rate_hz,
            decimate: p.decimate,
        }
    }
}

impl TrainConfig {
    /// Checks every option before any work starts.
    pub fn check(&self) -> Result<()> {
        self.prep_config().check()?;
        let positive = [
            ("hidden", self.hidden),
            ("layers", self.layers),
            ("epochs", self.epochs),
            ("batch", self.batch),
            ("threads", self.threads),
            ("patience", self.patience),
        ];
        for (name, v) in positive {
            if v == 0 {
                return Err(Error::config(name, "must be at least 1"));
            }
        }
        if !(self.lr.is_finite() && self.lr > 0.0) {
            return Err(Error::config("lr", "must be a positive number, e.g. 3e-3"));
        }
        if !(self.clip.is_finite() && self.clip > 0.0) {
            return Err(Error::config("clip", "must be a positive number, e.g. 5"));
        }
        if let Some(m) = self.max_minutes {
            if !(m.is_finite() && m > 0.0) {
                return Err(Error::config(
                    "max-minutes",
                    "must be a positive number of minutes",
                ));
            }
        }
        Ok(())
    }

    fn prep_config(&self) -> PrepConfig {
        PrepConfig {
            step_mm: self.step_mm,
            rate_hz: self.rate_hz,
            decimate: self.decimate,
        }
    }
}

/// One labelled recording for training or validation.
#[derive(Debug, Clone)]
pub struct Example {
    /// Name used in messages (e.g. the manifest path).
    pub name: String,
    /// Raw recording.
    pub recording: crate::recording::Recording,
    /// Ground-truth text.
    pub text: String,
    /// The code table of this recording's language when it is not the
    /// run's own (a dataset in several languages); `None` writes the text
    /// with the table given to [`train`] / [`evaluate`].
    pub table: Option<Arc<CodeTable>>,
}

/// A preprocessed example.
struct Prepared {
    x: Array2<f32>,
    cells: Vec<usize>,
    reference: Vec<Cell>,
    text: String,
    table: Option<Arc<CodeTable>>,
}

/// Validation figures of one epoch.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Validation {
    /// Mean CTC loss per cell.
    pub loss: f64,
    /// Dot accuracy over aligned cell pairs (greedy decoding).
    pub dot_accuracy: f64,
    /// Character accuracy, 1 - character edit distance / reference length.
    pub char_accuracy: f64,
}

impl Validation {
    fn better_than(&self, other: &Validation) -> bool {
        (self.char_accuracy, self.dot_accuracy, -self.loss)
            > (other.char_accuracy, other.dot_accuracy, -other.loss)
    }
}

/// What happens during training, for a progress display.
pub enum Event<'a> {
    /// Training starts: total planned batches.
    Start {
        /// Batches per epoch times epochs still to run.
        batches: u64,
        /// Batches already done (when resuming).
        done: u64,
    },
    /// A batch was done.
    Batch {
        /// Its mean loss per cell.
        loss: f64,
        /// Training frames per second so far in this epoch.
        frames_per_s: f64,
    },
    /// An epoch ended.
    Epoch {
        /// 1-based epoch.
        epoch: usize,
        /// Mean training loss per cell.
        train_loss: f64,
        /// Validation figures.
        validation: &'a Validation,
        /// Whether this is the best epoch so far (and was saved).
        best: bool,
    },
}

/// The checkpoint written after every epoch (`MODEL.ckpt` beside the
/// model), enough to continue exactly.
#[derive(Serialize, Deserialize)]
struct Checkpoint {
    format: String,
    version: u32,
    config: TrainConfig,
    data_fingerprint: u64,
    epoch: usize,
    network: Network,
    adam: Adam,
    best: Option<(usize, Validation, f64)>,
    stale: usize,
    seconds: f64,
}

const CKPT_FORMAT: &str = "tactread-checkpoint";

/// The checkpoint path of a model path: `MODEL.ckpt`.
pub fn checkpoint_path(model: &Path) -> PathBuf {
    let mut s = model.as_os_str().to_owned();
    s.push(".ckpt");
    PathBuf::from(s)
}

/// The result of [`train`].
#[derive(Debug, Clone)]
pub struct Outcome {
    /// The best model (also written to the output path).
    pub model: Model,
    /// Validation figures per epoch run in this session.
    pub history: Vec<Validation>,
}

fn fingerprint(train: &[Prepared], val: &[Prepared]) -> u64 {
    // FNV-1a over sizes and targets: enough to notice other data on resume.
    let mut h: u64 = 0xcbf29ce484222325;
    let mut eat = |v: u64| {
        h ^= v;
        h = h.wrapping_mul(0x100000001b3);
    };
    for p in train.iter().chain(val) {
        eat(p.x.nrows() as u64);
        for &c in &p.cells {
            eat(c as u64);
        }
    }
    h
}

/// Trains a model on `train` examples, validating on `val`, and writes the
/// best model to `out` (and a checkpoint to `MODEL.ckpt` after every
/// epoch). With `resume`, continues from the checkpoint. `lang` is the
/// language pack of every text; `data` names the dataset in the summary.
/// `on_event` sees progress; returning `ControlFlow::Break` at an epoch's
/// end stops the run there (its checkpoint is written first, so `resume`
/// continues exactly).
#[allow(clippy::too_many_arguments)]
pub fn train(
    config: &TrainConfig,
    train: &[Example],
    val: &[Example],
    table: &CodeTable,
    data: &str,
    out: &Path,
    resume: bool,
    on_event: impl FnMut(Event) -> ControlFlow<()>,
) -> Result<Outcome> {
    run(config, None, train, val, table, data, out, resume, on_event)
}

/// Default peak learning rate for fine-tuning: 1e-3, a third of the
/// from-scratch default (3e-3), so the first updates adjust the trained
/// weights rather than overwrite them.
pub const FINE_TUNE_LR: f32 = 1e-3;

/// Where a fine-tuning run starts (see [`fine_tune`]).
#[derive(Debug, Clone, Copy)]
pub struct FineTune<'a> {
    /// The trained model whose architecture, weights and preprocessing
    /// start the run.
    pub model: &'a Model,
    /// Its name in the new model's training summary (e.g. its path).
    pub name: &'a str,
    /// Re-estimate the per-taxel baseline and scale on the new training
    /// data; the grid and decimation stay the model's [false: keep the
    /// model's preprocessing as it is].
    pub refit_prep: bool,
}

impl FineTune<'_> {
    /// Checks that `config`'s architecture options (`hidden`, `layers`,
    /// `bidirectional`) agree with the model's network: an
    /// [`Error::Config`] naming the option otherwise. [`fine_tune`] runs it
    /// first; call it yourself to refuse options before loading any data.
    pub fn check(&self, config: &TrainConfig) -> Result<()> {
        let from = self;
        let have = from.model.network.config();
        for (name, want, got) in [
            ("hidden", config.hidden, have.hidden),
            ("layers", config.layers, have.layers),
        ] {
            if want != got {
                return Err(Error::config(
                    name,
                    format!(
                        "is {want} but the model being fine-tuned ({}) has {got}: leave the option \
                         out, or give {got}",
                        from.name
                    ),
                ));
            }
        }
        if config.bidirectional != have.bidirectional {
            let dir = |b: bool| if b { "bi" } else { "uni" };
            return Err(Error::config(
                "direction",
                format!(
                    "is {} but the model being fine-tuned ({}) is {}: leave the option out, or give {}",
                    dir(config.bidirectional),
                    from.name,
                    dir(have.bidirectional),
                    dir(have.bidirectional)
                ),
            ));
        }
        Ok(())
    }
}

/// Fine-tuning: [`train`] started from `from.model` instead of random
/// weights, with a fresh Adam state and the usual schedule (pass
/// [`FINE_TUNE_LR`] or another low peak in `config.lr`). `config.hidden`,
/// `layers` and `bidirectional` must agree with the model's network
/// ([`Error::Config`] otherwise); the preprocessing options of `config` are
/// not used: the model's grid and decimation are kept, and its baseline and
/// scale too unless `from.refit_prep`. Every recording must fit the
/// model's preprocessing (its taxel count, and a position channel when the
/// model resamples by position): [`Error::Mismatch`] naming the recording
/// otherwise. The new model's summary records the start in
/// [`TrainingSummary::fine_tuned_from`]. Resuming (`resume`) continues an
/// interrupted fine-tuning run from its checkpoint.
#[allow(clippy::too_many_arguments)]
pub fn fine_tune(
    config: &TrainConfig,
    from: FineTune<'_>,
    train: &[Example],
    val: &[Example],
    table: &CodeTable,
    data: &str,
    out: &Path,
    resume: bool,
    on_event: impl FnMut(Event) -> ControlFlow<()>,
) -> Result<Outcome> {
    from.check(config)?;
    run(
        config,
        Some(from),
        train,
        val,
        table,
        data,
        out,
        resume,
        on_event,
    )
}

/// Checks that every recording of `examples` fits `prep` (taxel count; a
/// position channel for a position grid), naming the first that does not.
fn check_fits(prep: &Prep, model_name: &str, examples: &[Example]) -> Result<()> {
    for e in examples {
        let taxels = e.recording.frames.ncols();
        if taxels != prep.taxels {
            return Err(Error::Mismatch {
                what: format!("taxel count of {}", e.name),
                expected: format!("{} (the sensor of {model_name})", prep.taxels),
                got: taxels.to_string(),
                hint: "fine-tune on recordings of a sensor with the model's taxel layout, or \
                       train a new model without --init"
                    .into(),
            });
        }
        if matches!(prep.grid, Grid::Position { .. }) && e.recording.position_mm.is_none() {
            return Err(Error::Mismatch {
                what: format!("position channel of {}", e.name),
                expected: format!("a position column ({model_name} resamples by position)"),
                got: "none".into(),
                hint: "fine-tune on recordings with the position encoder's channel, or train a \
                       new model without --init"
                    .into(),
            });
        }
    }
    Ok(())
}

/// The preprocessing a fine-tuning run uses: the model's, checked against
/// the data, with baseline and scale re-estimated when asked.
fn fine_tune_prep(from: &FineTune<'_>, train: &[Example], val: &[Example]) -> Result<Prep> {
    let prep = &from.model.prep;
    check_fits(prep, from.name, train)?;
    check_fits(prep, from.name, val)?;
    if !from.refit_prep {
        return Ok(prep.clone());
    }
    let defaults = PrepConfig::default();
    let config = PrepConfig {
        step_mm: match prep.grid {
            Grid::Position { step_mm } => step_mm,
            Grid::Time { .. } => defaults.step_mm,
        },
        rate_hz: match prep.grid {
            Grid::Time { rate_hz } => rate_hz,
            Grid::Position { .. } => defaults.rate_hz,
        },
        decimate: prep.decimate,
    };
    let recs: Vec<&crate::recording::Recording> = train.iter().map(|e| &e.recording).collect();
    let mut fitted = Prep::fit(&config, &recs)?;
    // A time-grid model keeps its time grid even when the data has positions.
    fitted.grid = prep.grid;
    fitted.decimate = prep.decimate;
    Ok(fitted)
}

/// The training loop behind [`train`] and [`fine_tune`].
#[allow(clippy::too_many_arguments)]
fn run(
    config: &TrainConfig,
    from: Option<FineTune<'_>>,
    train: &[Example],
    val: &[Example],
    table: &CodeTable,
    data: &str,
    out: &Path,
    resume: bool,
    mut on_event: impl FnMut(Event) -> ControlFlow<()>,
) -> Result<Outcome> {
    config.check()?;
    if train.is_empty() || val.is_empty() {
        return Err(Error::config(
            "data",
            format!(
                "training needs training and validation recordings (got {} and {})",
                train.len(),
                val.len()
            ),
        ));
    }
    let started = Instant::now();
    let prep = match &from {
        Some(f) => fine_tune_prep(f, train, val)?,
        None => {
            let recs: Vec<&crate::recording::Recording> =
                train.iter().map(|e| &e.recording).collect();
            Prep::fit(&config.prep_config(), &recs)?
        }
    };
    let prep_one = |e: &Example| prepare(&prep, table, e);
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(config.threads)
        .build()
        .map_err(|e| {
            Error::config(
                "threads",
                format!("cannot start {} threads: {e}", config.threads),
            )
        })?;
    let (train_p, val_p) = pool.install(|| -> Result<(Vec<Prepared>, Vec<Prepared>)> {
        let t = train
            .par_iter()
            .map(&prep_one)
            .collect::<Result<Vec<_>>>()?;
        let v = val.par_iter().map(&prep_one).collect::<Result<Vec<_>>>()?;
        Ok((t, v))
    })?;
    let fp = fingerprint(&train_p, &val_p);

    let gru = GruConfig {
        inputs: prep.taxels,
        hidden: config.hidden,
        layers: config.layers,
        bidirectional: config.bidirectional,
    };
    // Buckets: training sequences sorted by length, cut into batches.
    let mut order: Vec<usize> = (0..train_p.len()).collect();
    order.sort_by_key(|&i| (train_p[i].x.nrows(), i));
    let batches: Vec<Vec<usize>> = order.chunks(config.batch).map(|c| c.to_vec()).collect();
    let per_epoch = batches.len() as u64;
    let total = per_epoch * config.epochs as u64;
    let mut schedule = LrSchedule::new(config.lr, total);
    schedule.warmup = schedule.warmup.min(total / 10 + 1);

    let ckpt_path = checkpoint_path(out);
    // Temporaries left by a run killed while writing are never read, but
    // would pile up: remove them (one run at a time writes these files).
    crate::fsutil::remove_stale_temps(out);
    crate::fsutil::remove_stale_temps(&ckpt_path);
    let mut net = match &from {
        Some(f) => f.model.network.clone(),
        None => Network::new(gru, config.seed)?,
    };
    let mut adam = Adam::new(AdamConfig::default(), &net.param_sizes());
    let mut first_epoch = 0usize;
    let mut best: Option<(usize, Validation, f64)> = None;
    let mut stale = 0usize;
    let mut seconds_before = 0.0;
    if resume {
        let text = crate::fsutil::read_utf8(
            &ckpt_path,
            "a checkpoint is UTF-8 JSON written by tactread: start again without --resume",
        )?;
        let ck: Checkpoint = serde_json::from_str(&text).map_err(|e| Error::Format {
            path: ckpt_path.clone(),
            expected: format!("{CKPT_FORMAT} version 1"),
            found: format!("an unreadable file ({e})"),
            hint: "start again without --resume".into(),
        })?;
        if ck.format != CKPT_FORMAT || ck.version != 1 {
            return Err(Error::Format {
                path: ckpt_path.clone(),
                expected: format!("{CKPT_FORMAT} version 1"),
                found: format!("{} version {}", ck.format, ck.version),
                hint: "start again without --resume".into(),
            });
        }
        let same = TrainConfig {
            epochs: config.epochs,
            max_minutes: config.max_minutes,
            patience: config.patience,
            ..ck.config.clone()
        } == *config;
        if !same || ck.data_fingerprint != fp || ck.network.config() != gru {
            return Err(Error::Mismatch {
                what: format!("training options or data of {}", ckpt_path.display()),
                expected: "the options and dataset of the interrupted run".into(),
                got: "different ones".into(),
                hint: "resume with the same options and --data (only --epochs, --patience and \
                       --max-minutes may change), or start again without --resume"
                    .into(),
            });
        }
        if !ck.adam.fits(&ck.network.param_sizes()) {
            return Err(Error::config(
                "resume",
                "checkpoint optimiser state does not fit",
            ));
        }
        net = ck.network;
        adam = ck.adam;
        first_epoch = ck.epoch;
        best = ck.best;
        stale = ck.stale;
        seconds_before = ck.seconds;
    }

    let lang = table.lang().to_string();
    let mut languages: Vec<String> = std::iter::once(lang.clone())
        .chain(
            train
                .iter()
                .filter_map(|e| e.table.as_ref().map(|t| t.lang().to_string())),
        )
        .collect();
    languages.sort_unstable();
    languages.dedup();
    if languages.len() < 2 {
        languages.clear();
    }
    let sensor = SensorSummary {
        taxels: prep.taxels,
        name: train[0].recording.manifest.sensor.name.clone(),
    };
    let summary_for = |epochs: usize, best: &(usize, Validation, f64), secs: f64| TrainingSummary {
        data: data.to_string(),
        train_recordings: train.len(),
        validation_recordings: val.len(),
        epochs,
        best_epoch: best.0,
        validation_dot_accuracy: best.1.dot_accuracy,
        validation_char_accuracy: best.1.char_accuracy,
        train_loss: best.2,
        seconds: secs,
        seed: config.seed,
        threads: config.threads,
        languages: languages.clone(),
        options: match serde_json::to_value(config) {
            Ok(serde_json::Value::Object(m)) => m,
            _ => Default::default(),
        },
        fine_tuned_from: from.as_ref().map(|f| FineTunedFrom {
            model: f.name.to_string(),
            data: f.model.training.data.clone(),
            epochs: f.model.training.epochs,
            refit_prep: f.refit_prep,
        }),
    };

    let mut history = Vec::new();
    // The model file is written before the checkpoint, so a run killed
    // between the two leaves a model one epoch ahead of its checkpoint:
    // only a model of the checkpoint's best epoch is kept (the epoch after
    // is run again, and saves its model again if it is still the best).
    let mut best_model: Option<Model> = if resume && out.exists() {
        Model::load(out)
            .ok()
            .filter(|m| best.as_ref().map(|b| b.0) == Some(m.training.best_epoch))
    } else {
        None
    };
    let _ = on_event(Event::Start {
        batches: total,
        done: first_epoch as u64 * per_epoch,
    });
    let train_views: Vec<_> = train_p.iter().map(|p| p.x.view()).collect();
    let train_targets: Vec<&[usize]> = train_p.iter().map(|p| p.cells.as_slice()).collect();
    let mut epoch = first_epoch;
    while epoch < config.epochs && stale < config.patience {
        if let Some(m) = config.max_minutes {
            if started.elapsed().as_secs_f64() + seconds_before > m * 60.0 {
                break;
            }
        }
        let mut rng = ChaCha8Rng::seed_from_u64(config.seed);
        rng.set_stream(epoch as u64 + 1);
        let mut perm: Vec<usize> = (0..batches.len()).collect();
        perm.shuffle(&mut rng);
        let t_epoch = Instant::now();
        let (mut nll, mut cells, mut frames) = (0.0f64, 0usize, 0usize);
        for (k, &bi) in perm.iter().enumerate() {
            let idx = &batches[bi];
            let xs: Vec<_> = idx.iter().map(|&i| train_views[i]).collect();
            let ts: Vec<&[usize]> = idx.iter().map(|&i| train_targets[i]).collect();
            let mut r = pool.install(|| net.loss_and_grad(&xs, &ts, config.threads))?;
            let step = epoch as u64 * per_epoch + k as u64;
            net.apply_gradients(&mut r.grads, &mut adam, schedule.at(step), config.clip);
            nll += r.loss * r.cells as f64;
            cells += r.cells;
            frames += r.frames;
            let _ = on_event(Event::Batch {
                loss: r.loss,
                frames_per_s: frames as f64 / t_epoch.elapsed().as_secs_f64().max(1e-9),
            });
        }
        let train_loss = nll / cells.max(1) as f64;
        let v = pool.install(|| validate(&net, &val_p, table))?;
        epoch += 1;
        let is_best = best.as_ref().is_none_or(|(_, b, _)| v.better_than(b));
        let secs = seconds_before + started.elapsed().as_secs_f64();
        if is_best {
            best = Some((epoch, v, train_loss));
            stale = 0;
            let m = Model::new(
                net.clone(),
                prep.clone(),
                sensor.clone(),
                lang.clone(),
                summary_for(epoch, best.as_ref().expect("just set"), secs),
            );
            m.save(out)?;
            best_model = Some(m);
        } else {
            stale += 1;
        }
        history.push(v);
        let ck = Checkpoint {
            format: CKPT_FORMAT.into(),
            version: 1,
            config: config.clone(),
            data_fingerprint: fp,
            epoch,
            network: net.clone(),
            adam: adam.clone(),
            best,
            stale,
            seconds: secs,
        };
        let text = serde_json::to_string(&ck).expect("a checkpoint always serialises");
        crate::fsutil::write_atomic(&ckpt_path, text.as_bytes())?;
        let flow = on_event(Event::Epoch {
            epoch,
            train_loss,
            validation: &v,
            best: is_best,
        });
        if flow.is_break() {
            break;
        }
    }
    let mut model = match (best_model, &best) {
        (Some(m), _) => m,
        (None, Some((epoch, _, _))) => {
            return Err(Error::Mismatch {
                what: format!("model file {}", out.display()),
                expected: format!(
                    "the model of epoch {epoch}, the best in {}",
                    ckpt_path.display()
                ),
                got: "another model or none".into(),
                hint: "resume with more --epochs, or start again with --force (without --resume)"
                    .into(),
            })
        }
        (None, None) => {
            return Err(Error::config(
                "epochs",
                "no epoch finished (the time limit was reached first): allow more time",
            ))
        }
    };
    // Record the final epoch count and time in the summary of the best model.
    if let Some(b) = &best {
        model.training = summary_for(epoch, b, seconds_before + started.elapsed().as_secs_f64());
        model.save(out)?;
    }
    Ok(Outcome { model, history })
}

/// Preprocesses one example and writes its text as cells.
fn prepare(prep: &Prep, table: &CodeTable, e: &Example) -> Result<Prepared> {
    let table = e.table.as_deref().unwrap_or(table);
    let reference = table.encode(&e.text).map_err(|err| {
        Error::input(
            crate::Location::file(&e.name).field("text"),
            format!("the ground truth cannot be written in braille: {err}"),
        )
    })?;
    let cells: Vec<usize> = reference
        .iter()
        .map(|c| {
            if c.is_six_dot() {
                Ok(c.mask() as usize)
            } else {
                Err(Error::input(
                    crate::Location::file(&e.name).field("text"),
                    "the text needs 8-dot cells; training reads six-dot braille only",
                ))
            }
        })
        .collect::<Result<_>>()?;
    let x = prep.apply(&e.recording, &e.name)?;
    Ok(Prepared {
        x,
        cells,
        reference,
        text: e.text.clone(),
        table: e.table.clone(),
    })
}

/// Greedy-decoding figures (CTC loss, dot and character accuracy) of a
/// trained model on labelled recordings, e.g. a held-out test split.
pub fn evaluate(
    model: &Model,
    examples: &[Example],
    table: &CodeTable,
    threads: usize,
) -> Result<Validation> {
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(threads.max(1))
        .build()
        .map_err(|e| Error::config("threads", format!("cannot start {threads} threads: {e}")))?;
    pool.install(|| {
        let prepared = examples
            .par_iter()
            .map(|e| prepare(&model.prep, table, e))
            .collect::<Result<Vec<_>>>()?;
        validate(&model.network, &prepared, table)
    })
}

/// Validation: loss and greedy-decoding accuracies over `val`.
fn validate(net: &Network, val: &[Prepared], table: &CodeTable) -> Result<Validation> {
    let per: Vec<(Vec<Cell>, f64, usize)> = val
        .par_iter()
        .map(|p| -> Result<(Vec<Cell>, f64, usize)> {
            let z = net.logits_one(p.x.view())?;
            let lp = crate::net::pattern_log_probs(z.view());
            let loss = crate::net::ctc_loss(lp.view(), &p.cells, crate::net::BLANK)
                .map_or(0.0, |r| r.loss);
            Ok((greedy_cells(lp.view()), loss, p.cells.len()))
        })
        .collect::<Result<_>>()?;
    let mut loss = 0.0;
    let mut n_cells = 0;
    let mut dots = (0u64, 0u64);
    let mut chars = crate::metrics::EditCounts::default();
    for ((hyp, l, n), p) in per.iter().zip(val) {
        loss += l;
        n_cells += n;
        let table = p.table.as_deref().unwrap_or(table);
        let (right, total, c) = score(&p.reference, hyp, &p.text, table);
        dots.0 += right;
        dots.1 += total;
        chars.add(&c);
    }
    Ok(Validation {
        loss: loss / n_cells.max(1) as f64,
        dot_accuracy: if dots.1 > 0 {
            dots.0 as f64 / dots.1 as f64
        } else {
            0.0
        },
        char_accuracy: chars.accuracy().unwrap_or(0.0),
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::recording::{Manifest, Recording, SensorInfo};
    use rand::Rng;

    /// A toy recording: 6 taxels, one per dot; each cell is 4 frames of
    /// its dot pattern then 4 flat frames, one frame per 0.5 mm.
    fn example(text: &str, table: &CodeTable, noise: &mut ChaCha8Rng) -> Example {
        let cells = table.encode(text).unwrap();
        let n = cells.len() * 8;
        let mut frames = Array2::<f32>::zeros((n, 6));
        for (j, c) in cells.iter().enumerate() {
            for f in 0..4 {
                for k in 0..6 {
                    frames[[j * 8 + f, k]] = if c.has_dot(k as u8 + 1) { 1.0 } else { 0.0 };
                }
            }
        }
        frames.mapv_inplace(|v| v + noise.gen_range(-0.05..0.05));
        let recording = Recording {
            manifest: Manifest {
                format: "tactread-recording".into(),
                version: 1,
                frames: "f.csv".into(),
                npy_columns: None,
                sensor: SensorInfo {
                    name: Some("toy6".into()),
                    taxels: 6,
                    positions_mm: None,
                    sample_rate_hz: 40.0,
                    units: "adc".into(),
                },
                text: Some(text.into()),
                lang: Some("en".into()),
                notes: None,
                tags: Default::default(),
            },
            time_s: (0..n).map(|i| i as f64 / 40.0).collect(),
            position_mm: Some((0..n).map(|i| i as f64 * 0.5).collect()),
            frames,
        };
        Example {
            name: format!("{text}.json"),
            recording,
            text: text.into(),
            table: None,
        }
    }

    fn toy_data() -> (Vec<Example>, Vec<Example>, CodeTable) {
        let table = CodeTable::builtin("en").unwrap();
        let mut rng = ChaCha8Rng::seed_from_u64(3);
        let letters: Vec<char> = "abcdefghij".chars().collect();
        let mut make = |n: usize| -> Vec<Example> {
            (0..n)
                .map(|_| {
                    let len = rng.gen_range(2..6);
                    let t: String = (0..len)
                        .map(|_| letters[rng.gen_range(0..letters.len())])
                        .collect();
                    let mut noise = ChaCha8Rng::seed_from_u64(rng.gen());
                    example(&t, &table, &mut noise)
                })
                .collect()
        };
        let train = make(24);
        let val = make(6);
        (train, val, table)
    }

    fn config(epochs: usize) -> TrainConfig {
        TrainConfig {
            hidden: 12,
            layers: 1,
            epochs,
            batch: 6,
            lr: 1e-2,
            patience: 100,
            ..TrainConfig::default()
        }
    }

    #[test]
    fn trains_saves_and_resumes_exactly() {
        let (train_set, val, table) = toy_data();
        let dir = crate::testutil::test_dir("train-test");
        let a = dir.join("a.json");
        let b = dir.join("b.json");
        let mut epochs_seen = 0;
        let count = |e: Event| {
            if let Event::Epoch { .. } = e {
                epochs_seen += 1;
            }
            ControlFlow::Continue(())
        };
        let full = train(
            &config(4),
            &train_set,
            &val,
            &table,
            "toy",
            &a,
            false,
            count,
        )
        .unwrap();
        assert_eq!(epochs_seen, 4);
        assert_eq!(full.history.len(), 4);
        assert!(
            full.history[3].loss < full.history[0].loss,
            "{:?}",
            full.history
        );
        assert!(checkpoint_path(&a).exists());
        let loaded = Model::load(&a).unwrap();
        assert_eq!(loaded.training.epochs, 4);
        assert_eq!(loaded.lang, "en");
        let again = evaluate(&loaded, &val, &table, 2).unwrap();
        assert_eq!(
            again.char_accuracy,
            loaded.training.validation_char_accuracy
        );

        // Stopped after two epochs, then resumed: the same final checkpoint.
        let stop2 = |e: Event| match e {
            Event::Epoch { epoch: 2, .. } => ControlFlow::Break(()),
            _ => ControlFlow::Continue(()),
        };
        train(
            &config(4),
            &train_set,
            &val,
            &table,
            "toy",
            &b,
            false,
            stop2,
        )
        .unwrap();
        let go = |_: Event| ControlFlow::Continue(());
        train(&config(4), &train_set, &val, &table, "toy", &b, true, go).unwrap();
        let ck = |p: &Path| -> serde_json::Value {
            let v: serde_json::Value =
                serde_json::from_str(&std::fs::read_to_string(checkpoint_path(p)).unwrap())
                    .unwrap();
            v["network"].clone()
        };
        assert!(
            ck(&a) == ck(&b),
            "resumed run differs from the uninterrupted one"
        );

        // Resuming with other options is a clear error.
        let mut other = config(4);
        other.hidden = 10;
        let err = train(&other, &train_set, &val, &table, "toy", &b, true, go).unwrap_err();
        assert!(matches!(err, Error::Mismatch { .. }), "{err}");
    }

    /// A run killed after writing a better model but before its checkpoint
    /// leaves the model one epoch ahead. Reproduced by putting back the
    /// previous epoch's checkpoint: resuming runs that epoch again and ends
    /// as the uninterrupted run; with no epoch left to run it is an error,
    /// not a model labelled with the wrong epoch.
    #[test]
    fn model_ahead_of_its_checkpoint_is_run_again() {
        let (train_set, val, table) = toy_data();
        let dir = crate::testutil::test_dir("train-ahead");
        let (a, b) = (dir.join("a.json"), dir.join("b.json"));
        let go = |_: Event| ControlFlow::Continue(());
        let stop_at = |n: usize| {
            move |e: Event| match e {
                Event::Epoch { epoch, .. } if epoch == n => ControlFlow::Break(()),
                _ => ControlFlow::Continue(()),
            }
        };
        train(&config(3), &train_set, &val, &table, "toy", &a, false, go).unwrap();
        train(
            &config(3),
            &train_set,
            &val,
            &table,
            "toy",
            &b,
            false,
            stop_at(1),
        )
        .unwrap();
        let ckpt_1 = std::fs::read(checkpoint_path(&b)).unwrap();
        train(
            &config(3),
            &train_set,
            &val,
            &table,
            "toy",
            &b,
            true,
            stop_at(2),
        )
        .unwrap();
        assert_eq!(
            Model::load(&b).unwrap().training.best_epoch,
            2,
            "the scenario needs epoch 2 to be the best so far"
        );
        std::fs::write(checkpoint_path(&b), &ckpt_1).unwrap();

        // No epoch left to run (--epochs 1): refused.
        let err = train(&config(1), &train_set, &val, &table, "toy", &b, true, go).unwrap_err();
        assert!(matches!(err, Error::Mismatch { .. }), "{err}");
        assert!(err.to_string().contains("model of epoch 1"), "{err}");

        // Resumed to the end: the uninterrupted run's model.
        train(&config(3), &train_set, &val, &table, "toy", &b, true, go).unwrap();
        let (ma, mb) = (Model::load(&a).unwrap(), Model::load(&b).unwrap());
        assert_eq!(ma.training.best_epoch, mb.training.best_epoch);
        assert!(ma.network == mb.network, "resumed model differs");
    }

    #[test]
    fn fine_tuning_starts_from_the_model_and_checks_what_must_agree() {
        let (train_set, val, table) = toy_data();
        let dir = crate::testutil::test_dir("ft-test");
        let go = |_: Event| ControlFlow::Continue(());
        let pre = train(
            &config(3),
            &train_set,
            &val,
            &table,
            "toy",
            &dir.join("pre.json"),
            false,
            go,
        )
        .unwrap()
        .model;
        let from = FineTune {
            model: &pre,
            name: "pre.json",
            refit_prep: false,
        };
        // Another architecture is refused before any work.
        let mut other = config(2);
        other.hidden = 10;
        let out = dir.join("ft.json");
        match fine_tune(&other, from, &train_set, &val, &table, "t", &out, false, go) {
            Err(Error::Config { name, message }) => {
                assert_eq!(name, "hidden");
                assert!(
                    message.contains("pre.json") && message.contains("12"),
                    "{message}"
                );
            }
            other => panic!("expected a config error, got {:?}", other.map(|_| ())),
        }
        let mut other = config(2);
        other.bidirectional = true;
        assert!(matches!(
            fine_tune(&other, from, &train_set, &val, &table, "t", &out, false, go),
            Err(Error::Config { .. })
        ));
        // Recordings the model's preprocessing cannot read, named.
        let mut five = val.clone();
        five[2].recording.frames = five[2]
            .recording
            .frames
            .slice(ndarray::s![.., ..5])
            .to_owned();
        match fine_tune(
            &config(2),
            from,
            &train_set,
            &five,
            &table,
            "t",
            &out,
            false,
            go,
        ) {
            Err(Error::Mismatch { what, .. }) => assert!(what.contains(&five[2].name), "{what}"),
            other => panic!("expected a mismatch, got {:?}", other.map(|_| ())),
        }
        let mut blind = train_set.clone();
        blind[4].recording.position_mm = None;
        match fine_tune(&config(2), from, &blind, &val, &table, "t", &out, false, go) {
            Err(Error::Mismatch { what, .. }) => {
                assert!(
                    what.contains("position") && what.contains(&blind[4].name),
                    "{what}"
                )
            }
            other => panic!("expected a mismatch, got {:?}", other.map(|_| ())),
        }

        // A run: the preprocessing is kept, the start recorded, and the
        // first epoch starts from the trained weights, not random ones
        // (its training loss is far below a fresh network's).
        let tuned = fine_tune(
            &config(1),
            from,
            &train_set,
            &val,
            &table,
            "t",
            &out,
            false,
            go,
        )
        .unwrap()
        .model;
        assert_eq!(tuned.prep, pre.prep);
        let f = tuned.training.fine_tuned_from.clone().unwrap();
        assert_eq!(
            (f.model.as_str(), f.data.as_str(), f.epochs),
            ("pre.json", "toy", 3)
        );
        let fresh = train(
            &config(1),
            &train_set,
            &val,
            &table,
            "toy",
            &dir.join("fresh.json"),
            false,
            go,
        )
        .unwrap()
        .model;
        assert!(
            tuned.training.train_loss < fresh.training.train_loss,
            "{} vs {}",
            tuned.training.train_loss,
            fresh.training.train_loss
        );
        assert_eq!(Model::load(&out).unwrap(), tuned);

        // --refit-prep: baseline and scale from the new data (here shifted
        // by 0.5 on every taxel), the grid kept.
        let shifted: Vec<Example> = train_set
            .iter()
            .map(|e| {
                let mut e = e.clone();
                e.recording.frames.mapv_inplace(|v| v + 0.5);
                e
            })
            .collect();
        let refit = FineTune {
            refit_prep: true,
            ..from
        };
        let tuned = fine_tune(
            &config(1),
            refit,
            &shifted,
            &val,
            &table,
            "t",
            &out,
            false,
            go,
        )
        .unwrap()
        .model;
        assert_eq!(tuned.prep.grid, pre.prep.grid);
        for (a, b) in tuned.prep.baseline.iter().zip(&pre.prep.baseline) {
            approx::assert_abs_diff_eq!(*a, b + 0.5, epsilon = 1e-4);
        }
        assert!(tuned.training.fine_tuned_from.unwrap().refit_prep);
    }

    #[test]
    fn bad_options_are_config_errors() {
        let c = TrainConfig {
            batch: 0,
            ..TrainConfig::default()
        };
        assert!(matches!(c.check(), Err(Error::Config { .. })));
        let c = TrainConfig {
            lr: -1.0,
            ..TrainConfig::default()
        };
        assert!(matches!(c.check(), Err(Error::Config { .. })));
    }
}
