//! `twistmark analyze CLIP --rig RIG`: measure one clip and write its report.
//!
//! Part of the binary's command line: it uses the library through its public API only, and the
//! library must never import it.

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
    #[arg(long, value_name = "T", allow_hyphen_values = true)]
    start_s: Option<String>,
    /// End of the analysed window, seconds of capture time.
    #[arg(long, value_name = "T", allow_hyphen_values = true)]
    end_s: Option<String>,
    /// Overwrite the results already in DIR (without it, a DIR holding a report.json is
    /// left untouched and the run stops).
    #[arg(long)]
    force: bool,
    /// Also write annotated frames (first frame, each blow's peak twist, lost marks) into
    /// DIR/overlays/ to check the tracking by eye.
    #[arg(long)]
    overlay: bool,
    /// A still image of the marks with the bar unloaded, from the same camera position: the
    /// twist zero (without it, a still stretch before the first blow, else the first frame).
    #[arg(long, value_name = "PATH", conflicts_with = "zero_frame")]
    zero_still: Option<PathBuf>,
    /// A frame of the clip (0-based, counted in the whole clip) that shows the bar unloaded:
    /// the twist zero.
    #[arg(long, value_name = "N")]
    zero_frame: Option<u64>,
    /// Draw only every Nth blow's peak-twist frame into DIR/overlays/ (turns --overlay on).
    #[arg(long, value_name = "N", allow_hyphen_values = true)]
    overlay_every: Option<String>,
    /// Torque unit for the table, plots and report.html: nm or lbf-ft (JSON and CSV keep SI
    /// keys, with _lbf_ft columns beside them).
    #[arg(long, value_name = "UNIT", default_value = "nm")]
    units: String,
    /// Which clock times the frames: auto (each frame's timestamp when no capture rate is
    /// given, as phones record), rate (frame index / capture rate) or timestamps.
    #[arg(long, value_name = "CLOCK", default_value = "auto")]
    timing: String,
    /// Also fit the blow model (for `predict`) and store it in report.json under `model`.
    /// Takes seconds; without it, `predict` fits the model from the report when asked.
    #[arg(long)]
    fit_model: bool,
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
        zero_still: a.zero_still.clone(),
        zero_frame: a.zero_frame,
        timing: super::parse_timing(&a.timing)?,
        fit_model: a.fit_model,
    };
    let report_opts = twistmark::report::ReportOptions {
        units: twistmark::report::TorqueUnit::parse(&a.units).map_err(anyhow::Error::msg)?,
    };
    let rig = twistmark::Rig::from_path(&a.rig)?;
    let overlay_every = match a.overlay_every.as_deref() {
        None => 1.0,
        Some(t) => super::parse_number("--overlay-every", t)?,
    };
    if overlay_every < 1.0 || overlay_every.fract() != 0.0 {
        anyhow::bail!(
            "--overlay-every: must be a whole number, at least 1 (1 draws every blow), got {}",
            a.overlay_every.as_deref().unwrap_or("1")
        );
    }
    let overlay_every = overlay_every.min(u32::MAX as f64) as usize;
    let overlay = a.overlay || a.overlay_every.is_some();
    // Before the analysis, so a long clip is not analysed only to be refused at the end.
    twistmark::report::check_output_folder(&a.out, "report.json", a.force)?;
    twistmark::report::check_folder_not_input(
        &a.out,
        "--out",
        &[a.clip.as_path(), a.rig.as_path()],
        twistmark::report::write::CLIP_OUTPUTS,
    )?;
    let progress = super::progress::FrameProgress::new(&a.clip.display().to_string());
    let analysis = twistmark::decode::open(&a.clip).and_then(|source| {
        twistmark::analyze::analyze_source(source, &rig, &a.rig, &opts, &|done, total| {
            progress.update(done, total)
        })
    });
    progress.finish();
    let analysis = analysis?;
    super::print_warnings(&analysis.warnings);
    // Under the folder's lock, check again (another run may have written there while this
    // one analysed), then write everything with report.json last.
    let _lock = twistmark::report::lock_output(&a.out)?;
    twistmark::report::check_output_folder(&a.out, "report.json", a.force)?;
    let overlay = overlay.then(|| twistmark::report::overlay::OverlayOptions {
        every_nth_blow: overlay_every,
        ..Default::default()
    });
    let written = twistmark::report::write_all(&analysis, &a.out, overlay.as_ref(), &report_opts)
        .with_context(|| format!("writing results to {}", a.out.display()))?;
    print!(
        "{}",
        twistmark::report::blow_table_with(&analysis, &report_opts)
    );
    for p in written {
        eprintln!("wrote {}", p.display());
    }
    Ok(ExitCode::SUCCESS)
}
