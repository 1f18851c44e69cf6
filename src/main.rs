//! The `tactread` binary: parse, dispatch, print the error chain, exit.

mod cli;

use clap::Parser;

fn main() {
    let args = cli::Cli::parse();
    if let Err(err) = cli::run(args) {
        eprintln!("error: {err}");
        let mut source = std::error::Error::source(&err);
        while let Some(cause) = source {
            eprintln!("  caused by: {cause}");
            source = cause.source();
        }
        std::process::exit(err.exit_code());
    }
}
