//! `tactread demo`: the whole job on the embedded default.
//!
//! While the later pipeline stages are being built this runs what exists
//! and says plainly what does not yet.

use clap::Args as ClapArgs;
use tactread::{cells_to_unicode, Cell, Result};

/// Options of `tactread demo`.
#[derive(Debug, ClapArgs)]
pub struct Args {}

/// Run the demo.
pub fn run(_args: Args) -> Result<()> {
    let cells: Vec<Cell> = (0..64u8).map(Cell::from_mask).collect();
    println!("tactread demo: the 64 six-dot cells:");
    println!("{}", cells_to_unicode(&cells));
    println!("(the decoding pipeline is not built yet: this demo shows only what exists)");
    Ok(())
}
