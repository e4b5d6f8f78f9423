//! `twistmark locate CLIP --out RIG.json`: find the marks and write a draft rig.

use std::path::PathBuf;
use std::process::ExitCode;

use anyhow::Result;
use clap::Args;

/// Arguments of `locate`.
#[derive(Debug, Args)]
pub struct LocateArgs {
    /// A video file or a folder of numbered stills.
    clip: PathBuf,
    /// Where to write the draft rig.
    #[arg(long, value_name = "RIG.json")]
    out: PathBuf,
    /// The camera's capture rate in frames per second.
    #[arg(long, value_name = "HZ", allow_hyphen_values = true)]
    fps: Option<String>,
    /// Write a preview of the first frame with the marks drawn.
    #[arg(long, value_name = "PNG")]
    preview: Option<PathBuf>,
}

pub fn run(a: LocateArgs) -> Result<ExitCode> {
    let _ = a;
    anyhow::bail!("locate: not built yet")
}
