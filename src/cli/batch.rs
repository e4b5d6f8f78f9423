//! `twistmark batch FOLDER --rig RIG --out DIR`: analyse every clip in a folder.
//!
//! Part of the binary's command line: it uses the library through its public API only, and the
//! library must never import it.

use std::path::PathBuf;
use std::process::ExitCode;

use anyhow::Result;
use clap::Args;
use twistmark::batch::{BatchOptions, run_batch_with, summary_table};

use super::progress::BatchProgress;

/// Arguments of `batch`.
#[derive(Debug, Args)]
pub struct BatchArgs {
    /// Folder holding video files and stills folders.
    folder: PathBuf,
    /// The rig for every clip without one of its own (a `<clip>.rig.json` beside it, a
    /// rig.json in its folder, or the manifest's rig column). Default: FOLDER/rig.json.
    #[arg(long)]
    rig: Option<PathBuf>,
    /// A CSV with a header row clip,rig,<tag>,...: each clip's path (relative to the CSV's
    /// folder), an optional rig, and tags (tool, bar, pressure, ...) carried into
    /// summary.csv and used to group summary.html.
    #[arg(long, value_name = "FILE.csv")]
    manifest: Option<PathBuf>,
    /// Output folder; each clip gets `DIR/<clip name>/`.
    #[arg(long, value_name = "DIR")]
    out: PathBuf,
    /// The camera's capture rate in frames per second.
    #[arg(long, value_name = "HZ", allow_hyphen_values = true)]
    fps: Option<String>,
    /// Overwrite the results already in DIR (without it, a DIR holding a summary.json is
    /// left untouched and the run stops).
    #[arg(long)]
    force: bool,
    /// Clips analysed at once (default: number of cores; at most 4 per core).
    #[arg(long, value_name = "N", allow_hyphen_values = true)]
    jobs: Option<String>,
    /// Torque unit for the plots and HTML pages: nm or lbf-ft (JSON and CSV keep SI keys,
    /// with _lbf_ft columns beside them).
    #[arg(long, value_name = "UNIT", default_value = "nm")]
    units: String,
    /// Also fit each clip's blow model (for `predict`) into its report.json (seconds a clip).
    #[arg(long)]
    fit_model: bool,
}

pub fn run(a: BatchArgs) -> Result<ExitCode> {
    let opts = BatchOptions {
        analyze: twistmark::AnalyzeOptions {
            fps_hz: super::parse_fps(a.fps.as_deref())?,
            fit_model: a.fit_model,
            ..Default::default()
        },
        jobs: a.jobs.as_deref().map(parse_jobs).transpose()?,
        force: a.force,
        manifest: a.manifest.clone(),
        report: twistmark::report::ReportOptions {
            units: twistmark::report::TorqueUnit::parse(&a.units).map_err(anyhow::Error::msg)?,
        },
    };
    let rig_path = a.rig.clone().or_else(|| {
        let p = a.folder.join(twistmark::batch::FOLDER_RIG);
        p.is_file().then_some(p)
    });
    let rig = rig_path
        .as_deref()
        .map(twistmark::Rig::from_path)
        .transpose()?;
    twistmark::report::check_output_folder(&a.out, "summary.json", a.force)?;
    if let Some(j) = opts.jobs {
        let cores = std::thread::available_parallelism().map_or(1, |n| n.get());
        let (used, clamped) = twistmark::limits::clamp_jobs(j, cores);
        if clamped {
            eprintln!(
                "warning: --jobs {j} is more than {} per core on this {cores}-core machine; using {used}",
                twistmark::limits::MAX_JOBS_PER_CORE
            );
        }
    }
    let progress = BatchProgress::new();
    let batch_rig = rig.as_ref().zip(rig_path.as_deref());
    let result = run_batch_with(&a.folder, batch_rig, &a.out, &opts, &|ev| {
        progress.event(ev)
    });
    progress.finish();
    let report = result?;
    for o in &report.outcomes {
        for line in twistmark::condensed_warnings(&o.warnings) {
            eprintln!("warning: {}: {line}", o.row.clip);
        }
    }
    print!("{}", summary_table(&report));
    for p in &report.written {
        eprintln!("wrote {}", p.display());
    }
    Ok(if report.failed() > 0 {
        ExitCode::from(1)
    } else {
        ExitCode::SUCCESS
    })
}

/// Parses `--jobs`: a whole number of clips analysed at once, at least 1.
fn parse_jobs(text: &str) -> Result<usize> {
    let v = super::parse_number("--jobs", text)?;
    if v < 1.0 || v.fract() != 0.0 {
        anyhow::bail!(
            "--jobs: give a whole number of clips to analyse at once, 1 or more (got {text}); leave it out to use every core"
        );
    }
    Ok(v.min(usize::MAX as f64) as usize)
}
