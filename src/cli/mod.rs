//! The command line: one file per subcommand, each with its own `Args` and
//! `run()`. Flags are checked here and turned into library objects before
//! any work starts.

use clap::{Parser, Subcommand};
use tactread::Result;

mod cells;
mod demo;

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
    /// Write text as braille cells, or read braille cells back as text.
    Cells(cells::Args),
}

/// Run the parsed command line.
pub fn run(cli: Cli) -> Result<()> {
    match cli.command {
        Command::Demo(args) => demo::run(args),
        Command::Cells(args) => cells::run(args),
    }
}
