//! `twistmark batch FOLDER --rig RIG --out DIR`: analyse every clip in a folder.

use std::path::PathBuf;
use std::process::ExitCode;

use anyhow::Result;
use clap::Args;

/// Arguments of `batch`.
#[derive(Debug, Args)]
pub struct BatchArgs {
    /// Folder holding video files and stills folders.
    folder: PathBuf,
    /// The rig used for every clip without a `<clip>.rig.json` beside it.
    #[arg(long)]
    rig: PathBuf,
    /// Output folder; each clip gets `DIR/<clip name>/`.
    #[arg(long, value_name = "DIR")]
    out: PathBuf,
    /// The camera's capture rate in frames per second.
    #[arg(long, value_name = "HZ")]
    fps: Option<String>,
    /// Clips analysed at once (default: number of cores).
    #[arg(long, value_name = "N")]
    jobs: Option<usize>,
}

pub fn run(a: BatchArgs) -> Result<ExitCode> {
    let _ = a;
    anyhow::bail!("batch: not built yet")
}
