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
    /// Overwrite the results already in DIR (without it, a DIR holding a report.json is
    /// left untouched and the run stops).
    #[arg(long)]
    force: bool,
    /// Also write annotated frames (first frame, each blow's peak twist, lost marks) into
    /// DIR/overlays/ to check the tracking by eye.
    #[arg(long)]
    overlay: bool,
    /// Draw only every Nth blow's peak-twist frame into DIR/overlays/ (turns --overlay on).
    #[arg(long, value_name = "N")]
    overlay_every: Option<usize>,
    /// Torque unit for the table, plots and report.html: nm or lbf-ft (JSON and CSV keep SI
    /// keys, with _lbf_ft columns beside them).
    #[arg(long, value_name = "UNIT", default_value = "nm")]
    units: String,
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
    let report_opts = twistmark::report::ReportOptions {
        units: twistmark::report::TorqueUnit::parse(&a.units).map_err(anyhow::Error::msg)?,
    };
    if a.overlay_every == Some(0) {
        anyhow::bail!("--overlay-every: must be at least 1 (1 draws every blow)");
    }
    let overlay = a.overlay || a.overlay_every.is_some();
    let rig = twistmark::Rig::from_path(&a.rig)?;
    // Before the analysis, so a long clip is not analysed only to be refused at the end.
    twistmark::report::check_output_folder(&a.out, "report.json", a.force)?;
    let progress = super::progress::FrameProgress::new(&a.clip.display().to_string());
    let analysis = twistmark::decode::open(&a.clip).and_then(|source| {
        twistmark::analyze::analyze_source(source, &rig, &a.rig, &opts, &|done, total| {
            progress.update(done, total)
        })
    });
    progress.finish();
    let analysis = analysis?;
    super::print_warnings(&analysis.warnings);
    // Plots and overlays first and report.json last: a report.json in DIR means the run
    // finished (every file is also written under a temporary name and renamed).
    let mut written = twistmark::report::plot::write_plots_with(&analysis, &a.out, &report_opts)
        .with_context(|| format!("writing plots to {}", a.out.display()))?;
    if overlay {
        let o = twistmark::report::overlay::OverlayOptions {
            every_nth_blow: a.overlay_every.unwrap_or(1),
            ..Default::default()
        };
        written.extend(
            twistmark::report::overlay::write_overlays(&analysis, &a.out, &o)
                .with_context(|| format!("writing overlay frames to {}", a.out.display()))?,
        );
    }
    written.extend(
        twistmark::report::write_outputs_with(&analysis, &a.out, &report_opts)
            .with_context(|| format!("writing results to {}", a.out.display()))?,
    );
    print!(
        "{}",
        twistmark::report::blow_table_with(&analysis, &report_opts)
    );
    for p in written {
        eprintln!("wrote {}", p.display());
    }
    Ok(ExitCode::SUCCESS)
}
