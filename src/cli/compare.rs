//! `tactread compare A.json B.json`: two metric files of the same test set
//! side by side, with paired differences B - A and paired-bootstrap
//! confidence intervals. Prints a table, or JSON with `--json`.

use clap::Args as ClapArgs;
use std::path::PathBuf;
use tactread::metrics::{compare, CompareSettings, Evaluation};
use tactread::{Error, Result};

/// Options of `tactread compare`.
#[derive(Debug, ClapArgs)]
pub struct Args {
    /// Metrics file A, the baseline (written by `tactread evaluate --json`).
    a: PathBuf,
    /// Metrics file B, the candidate, on the same recordings.
    b: PathBuf,
    /// Print the comparison as JSON (format tactread-comparison, version 1)
    /// instead of a table.
    #[arg(long)]
    json: bool,
    /// Bootstrap resamples of the paired intervals.
    #[arg(long, default_value_t = 1000)]
    resamples: usize,
    /// Confidence level of the intervals, in (0, 1).
    #[arg(long, default_value_t = 0.95)]
    confidence: f64,
    /// Seed of the resampling.
    #[arg(long, default_value_t = 0x7AC7_2EAD)]
    seed: u64,
}

/// Run the comparison.
pub fn run(args: Args) -> Result<()> {
    let settings = CompareSettings {
        resamples: args.resamples,
        confidence: args.confidence,
        seed: args.seed,
    };
    if args.resamples == 0 {
        return Err(Error::config(
            "--resamples",
            "must be at least 1 (default 1000)",
        ));
    }
    let mut a = Evaluation::load(&args.a)?;
    let mut b = Evaluation::load(&args.b)?;
    a.label = format!("{} ({})", args.a.display(), a.label);
    b.label = format!("{} ({})", args.b.display(), b.label);
    let c = compare(&a, &b, &settings)?;
    if args.json {
        println!("{}", c.to_json());
    } else {
        print!("{}", c.to_table());
    }
    Ok(())
}
