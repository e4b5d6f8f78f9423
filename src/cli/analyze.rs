//! `twistmark analyze CLIP --rig RIG`: measure one clip and write its report.

use std::path::PathBuf;
use std::process::ExitCode;

use anyhow::{Context, Result};
use clap::Args;

/// Arguments of `analyze`.
#[derive(Debug, Args)]
pub struct AnalyzeArgs {
    /// A video file or a folder of numbered stills.
    clip: PathBuf,
    /// The rig file: where the marks are, which way is tightening, and the bar.
    #[arg(long)]
    rig: PathBuf,
    /// The camera's capture rate in frames per second (overrides the rig's capture_fps_hz).
    #[arg(long, value_name = "HZ", allow_hyphen_values = true)]
    fps: Option<String>,
    /// Folder for report.json, blows.csv, trace.csv and plots.
    #[arg(long, value_name = "DIR", default_value = "twistmark-out")]
    out: PathBuf,
    /// Start of the analysed window, seconds of capture time.
    #[arg(long, value_name = "T")]
    start_s: Option<String>,
    /// End of the analysed window, seconds of capture time.
    #[arg(long, value_name = "T")]
    end_s: Option<String>,
}

pub fn run(a: AnalyzeArgs) -> Result<ExitCode> {
    let opts = twistmark::AnalyzeOptions {
        fps_hz: super::parse_fps(a.fps.as_deref())?,
        start_s: a
            .start_s
            .as_deref()
            .map(|t| super::parse_number("--start-s", t))
            .transpose()?,
        end_s: a
            .end_s
            .as_deref()
            .map(|t| super::parse_number("--end-s", t))
            .transpose()?,
    };
    let rig = twistmark::Rig::from_path(&a.rig)?;
    let analysis = twistmark::analyze(&a.clip, &rig, &a.rig, &opts)?;
    super::print_warnings(&analysis.warnings);
    let written = twistmark::report::write_outputs(&analysis, &a.out)
        .with_context(|| format!("writing results to {}", a.out.display()))?;
    print!("{}", twistmark::report::blow_table(&analysis));
    for p in written {
        eprintln!("wrote {}", p.display());
    }
    Ok(ExitCode::SUCCESS)
}
