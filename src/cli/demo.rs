//! `causeway demo`: the built-in demo on an invented planetary event.

use crate::error::Result;
use clap::Args;
use std::path::PathBuf;

/// Options of `causeway demo`.
#[derive(Debug, Args)]
#[command(after_help = "Example:\n  causeway demo --out demo-output")]
pub struct DemoArgs {
    /// Directory for the demo's files (created if missing).
    #[arg(long, default_value = "demo-output")]
    pub out: PathBuf,
    /// Pixels per side of the demo map.
    #[arg(long, default_value_t = 1000)]
    pub pixels: usize,
}

/// Runs the demo.
pub fn run(args: DemoArgs) -> Result<()> {
    super::map::demo(&args.out, args.pixels)
}
