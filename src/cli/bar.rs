//! `twistmark bar --rig RIG [--json]`: the bar's stiffness, twist and stress at its rating.

use std::path::PathBuf;
use std::process::ExitCode;

use anyhow::Result;
use clap::Args;

/// Arguments of `bar`.
#[derive(Debug, Args)]
pub struct BarArgs {
    /// The rig file holding the bar.
    #[arg(long)]
    rig: PathBuf,
    /// Print one JSON object instead of text.
    #[arg(long)]
    json: bool,
}

pub fn run(a: BarArgs) -> Result<ExitCode> {
    let _ = a;
    anyhow::bail!("bar: not built yet")
}
