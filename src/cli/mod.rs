//! The command line: one file per subcommand, each with its own `Args` and
//! `run()`. Flags are checked here and turned into library objects before
//! any work starts.

use clap::{Parser, Subcommand};
use std::path::Path;
use tactread::net::Model;
use tactread::Result;

mod cells;
mod compare;
mod decode;
mod demo;
mod evaluate;
mod inspect;
mod lexicon;
mod show;
mod simulate;
mod train;

/// The default model (hex24 fingertip; en, de, fr, es), trained by
/// `scripts/train_default_model.sh`; see docs/default-model.md.
pub(crate) const DEFAULT_MODEL: &str = include_str!("../../models/default.json");

/// The word that names [`DEFAULT_MODEL`] where a model file is expected.
pub(crate) const DEFAULT_MODEL_WORD: &str = "default";

/// The model a MODEL argument names: the word `default` is the embedded
/// default model (to read a file called `default`, write `./default`);
/// anything else is a model file.
pub(crate) fn load_model(arg: &Path) -> Result<Model> {
    if arg.as_os_str() == DEFAULT_MODEL_WORD {
        Model::from_json(DEFAULT_MODEL, Path::new("<embedded default model>"))
    } else {
        Model::load(arg)
    }
}

/// Read braille by touch from tactile sensor recordings.
#[derive(Debug, Parser)]
#[command(name = "tactread", version, about, long_about = None)]
pub struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Debug, Subcommand)]
enum Command {
    /// Run the whole job on the embedded default data and model.
    Demo(demo::Args),
    /// Read recordings with a trained model: ranked text with alternatives.
    Decode(decode::Args),
    /// Build lexicon files from word lists and look into them.
    Lexicon(lexicon::Args),
    /// Write text as braille cells, or read braille cells back as text.
    Cells(cells::Args),
    /// Check recordings against the format and summarise them.
    Inspect(inspect::Args),
    /// Simulate tactile recordings of braille text, one or a whole dataset.
    Simulate(Box<simulate::Args>),
    /// Compare two metric files of the same test set, with paired bootstrap intervals.
    Compare(compare::Args),
    /// Draw one recording's taxel signals with its ground-truth cells as an SVG file.
    Show(show::Args),
    /// Read a test set with a trained model and score it, with and without the lexicon.
    Evaluate(Box<evaluate::Args>),
    /// Train a reading model on a dataset folder.
    Train(Box<train::Args>),
}

/// Run the parsed command line.
pub fn run(cli: Cli) -> Result<()> {
    match cli.command {
        Command::Demo(args) => demo::run(args),
        Command::Decode(args) => decode::run(args),
        Command::Lexicon(args) => lexicon::run(args),
        Command::Cells(args) => cells::run(args),
        Command::Inspect(args) => inspect::run(args),
        Command::Simulate(args) => simulate::run(*args),
        Command::Compare(args) => compare::run(args),
        Command::Show(args) => show::run(args),
        Command::Evaluate(args) => evaluate::run(*args),
        Command::Train(args) => train::run(*args),
    }
}
