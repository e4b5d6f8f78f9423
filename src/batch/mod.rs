//! Batch: runs [`crate::analyze()`] over every clip in a folder, in parallel, and collects one
//! summary row per clip.
//!
//! In: a folder holding video files and stills folders, a rig (overridden per clip by a
//! `<clip>.rig.json` beside it), the analysis options and an output folder. Out: each clip's
//! report in `OUT/<clip name>/`, `OUT/summary.csv`, `OUT/summary.json` and a comparison plot,
//! plus a [`BatchReport`] with the rows in folder order. A clip that fails is recorded with its
//! one-line reason and the others go on. The input folder is only ever read.
//!
//! Results do not depend on the order in which clips finish: rows, plots and files are built
//! from the outcomes sorted as the folder is (numbers in names compared by value).
//!
//! Layering: runs [`crate::analyze()`] and the report writer over a folder; it must never
//! import the CLI.

use std::cmp::Ordering;
use std::collections::BTreeMap;
use std::ffi::OsStr;
use std::panic::{AssertUnwindSafe, catch_unwind};
use std::path::{Component, Path, PathBuf};

use rayon::prelude::*;
use serde::{Deserialize, Serialize};

use crate::analyze::{AnalyzeOptions, analyze_source};
use crate::decode;
use crate::error::{Error, Result};
use crate::mechanics::BlowMetrics;
use crate::report;
use crate::rig::Rig;
use crate::warning::Warning;

/// Extensions (lower case) read as video files.
pub const VIDEO_EXTENSIONS: &[&str] = &[
    "mp4", "m4v", "mov", "qt", "mkv", "webm", "avi", "mpg", "mpeg", "ts", "m2ts", "mxf", "wmv",
    "flv", "3gp", "ogv", "nut", "y4m",
];

/// Extensions (lower case) of still images that make a subfolder a stills clip: those the
/// stills decoder reads.
pub use crate::decode::STILL_EXTENSIONS;

/// The suffix of a per-clip rig file: `<clip>.rig.json` beside the clip.
pub const SIDECAR_SUFFIX: &str = ".rig.json";

/// Batch-level files in the output folder; a clip with one of these names gets `_clip` added.
const RESERVED_NAMES: &[&str] = &[
    "summary.csv",
    "summary.json",
    "comparison.svg",
    "comparison.png",
    "summary.html",
];

/// How a clip is stored.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum ClipForm {
    /// A video file.
    Video,
    /// A folder of numbered stills.
    Stills,
}

/// One clip found in the batch folder.
#[derive(Debug, Clone, PartialEq)]
pub struct Clip {
    /// Name used for the output folder and the summary row: the file stem (the folder name
    /// for stills), or the full file name when two clips share a stem.
    pub name: String,
    /// The clip's path.
    pub path: PathBuf,
    /// Video file or stills folder.
    pub form: ClipForm,
    /// The clip's own rig files: sidecars beside it (`<stem>.rig.json`, `<file name>.rig.json`),
    /// or failing those the nearest `rig.json` in its folder or a folder above it below the
    /// batch folder (one folder per test, with the rig inside), or a manifest's `rig`.
    pub sidecars: Vec<PathBuf>,
    /// Tags from a manifest (tool, bar, pressure, ...), in the manifest's column order.
    pub tags: Vec<(String, String)>,
}

/// Options for a batch run.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct BatchOptions {
    /// Options passed to every clip's analysis.
    pub analyze: AnalyzeOptions,
    /// Clips analysed at once; `None` uses one per core. More than
    /// [`crate::limits::MAX_JOBS_PER_CORE`] per core is clamped to that.
    pub jobs: Option<usize>,
    /// Replace earlier results (`summary.json`, or a clip folder's `report.json`) in the
    /// output folder; without it a batch that would replace any of them stops first.
    pub force: bool,
    /// How reports show numbers (torque unit).
    pub report: report::ReportOptions,
    /// A manifest CSV (`clip,rig,tags...`, see [`crate::manifest`]) giving clips their tags
    /// and, optionally, their rigs.
    pub manifest: Option<PathBuf>,
}

/// What happened, for a progress display. `clip` is the index into the clip list.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum BatchEvent<'a> {
    /// The clip list is known.
    Found {
        /// Number of clips.
        clips: usize,
    },
    /// A clip's analysis started.
    Started {
        /// Index in folder order.
        clip: usize,
        /// Its name.
        name: &'a str,
    },
    /// Frames tracked so far in a clip (`total` may be an estimate from the container).
    Frames {
        /// Index in folder order.
        clip: usize,
        /// Frames done.
        done: u64,
        /// Frames expected.
        total: u64,
    },
    /// A clip finished.
    Finished {
        /// Index in folder order.
        clip: usize,
        /// Its name.
        name: &'a str,
        /// True when it was analysed and written.
        ok: bool,
    },
}

/// `ok` or `failed`.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Status {
    /// Analysed and written.
    Ok,
    /// Not analysed; see `error`.
    Failed,
}

/// One row of `summary.csv` / `summary.json`. Every number carries its unit in its key; a
/// value that is not known is empty in CSV and `null` in JSON.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SummaryRow {
    /// Clip name (output sub-folder).
    pub clip: String,
    /// `ok` or `failed`.
    pub status: Status,
    /// One-line reason when failed.
    pub error: Option<String>,
    /// Path of the clip.
    pub path: String,
    /// Rig file used (the batch rig or the clip's sidecar).
    pub rig: String,
    /// Capture rate used for timing, Hz.
    pub fps_hz: Option<f64>,
    /// Frames analysed.
    pub frames: Option<usize>,
    /// Number of blows.
    pub blow_count: Option<usize>,
    /// Blow rate, blows per minute.
    pub blow_rate_per_min: Option<f64>,
    /// Drive end's total rotation, degrees.
    pub drive_total_deg: Option<f64>,
    /// Nut end's total rotation, degrees.
    pub nut_total_deg: Option<f64>,
    /// Stiffness used for torque, N·m/deg.
    pub bar_stiffness_nm_per_deg: Option<f64>,
    /// Torque the joint holds after the last blow that turned the nut, N·m.
    pub holding_torque_nm: Option<f64>,
    /// Low end of its 95 % interval, N·m.
    pub holding_torque_ci95_low_nm: Option<f64>,
    /// High end of its 95 % interval, N·m.
    pub holding_torque_ci95_high_nm: Option<f64>,
    /// Where the twist zero came from (`still`, `frame`, `quiet_start`,
    /// `first_frame_unverified`).
    pub twist_zero_source: Option<String>,
    /// Highest peak torque over all blows (the bar's dynamic peak), N·m.
    pub peak_torque_nm: Option<f64>,
    /// Peak torque on the last blow that still turned the nut, N·m.
    pub last_advancing_torque_nm: Option<f64>,
    /// Median residual twist just before the next blow, over the clip's blows, degrees.
    pub residual_twist_deg: Option<f64>,
    /// The bar's rated torque from the rig, N·m.
    pub rating_nm: Option<f64>,
    /// Margin of the largest shear stress at the peak torque below shear yield, percent
    /// (null when the bar's steel has no known yield strength).
    pub stress_margin_pct: Option<f64>,
    /// Number of warnings (listed in the clip's report.json).
    pub warning_count: Option<usize>,
    /// Standard deviation of the per-interval blow rates, blows per minute.
    #[serde(default)]
    pub blow_rate_spread_per_min: Option<f64>,
    /// Where the stiffness came from: `computed` (sections) or `calibrated`.
    #[serde(default)]
    pub stiffness_source: Option<String>,
    /// Measured spring-back: `sprang_back`, `partial` or `still_wound` (null without a bar or
    /// with fewer than two blows).
    #[serde(default)]
    pub springback_verdict: Option<String>,
    /// Whether the spring-back model agrees with the measurement.
    #[serde(default)]
    pub springback_model_agrees: Option<bool>,
    /// Highest peak torque, lbf·ft.
    #[serde(default)]
    pub peak_torque_lbf_ft: Option<f64>,
    /// Peak torque on the last blow that still turned the nut, lbf·ft.
    #[serde(default)]
    pub last_advancing_torque_lbf_ft: Option<f64>,
    /// The manifest's tags for this clip (columns of their own in summary.csv).
    #[serde(default, skip_serializing_if = "BTreeMap::is_empty")]
    pub tags: BTreeMap<String, String>,
}

/// One clip's result.
#[derive(Debug, Clone)]
pub struct ClipOutcome {
    /// The clip.
    pub clip: Clip,
    /// Its summary row.
    pub row: SummaryRow,
    /// Per-blow metrics (empty when failed), for the comparison plot.
    pub blows: Vec<BlowMetrics>,
    /// Warnings from its analysis.
    pub warnings: Vec<Warning>,
    /// Files written into its output folder.
    pub written: Vec<PathBuf>,
}

/// The whole batch.
#[derive(Debug, Clone)]
pub struct BatchReport {
    /// One outcome per clip, in folder order.
    pub outcomes: Vec<ClipOutcome>,
    /// Batch-level files written (`summary.csv`, `summary.json`, comparison plots).
    pub written: Vec<PathBuf>,
}

impl BatchReport {
    /// Number of clips that failed.
    pub fn failed(&self) -> usize {
        self.outcomes
            .iter()
            .filter(|o| o.row.status == Status::Failed)
            .count()
    }

    /// The rows in folder order.
    pub fn rows(&self) -> Vec<&SummaryRow> {
        self.outcomes.iter().map(|o| &o.row).collect()
    }
}

/// The `summary.json` document.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct SummaryFile {
    /// Format version of this file (1).
    pub summary_version: u32,
    /// The caution that goes with every torque.
    pub torque_note: String,
    /// One row per clip, in folder order.
    pub clips: Vec<SummaryRow>,
}

mod discover;
mod summary;

use discover::*;
pub use discover::{FOLDER_RIG, MAX_DEPTH, find_clips, natural_cmp};
use summary::*;
pub use summary::{summary_table, tag_names, write_summary};

/// Makes a path absolute and resolves `.`/`..` and symbolic links as far as it exists.
fn resolve(p: &Path) -> Result<PathBuf> {
    let abs = std::path::absolute(p).map_err(|e| Error::io(p, e))?;
    let mut existing = abs.clone();
    let mut rest: Vec<std::ffi::OsString> = Vec::new();
    while !existing.exists() {
        match (existing.file_name(), existing.parent()) {
            (Some(n), Some(parent)) => {
                rest.push(n.to_os_string());
                existing = parent.to_path_buf();
            }
            _ => break,
        }
    }
    let mut out = std::fs::canonicalize(&existing).unwrap_or(existing);
    for c in rest.iter().rev() {
        match Path::new(c).components().next() {
            Some(Component::ParentDir) => {
                out.pop();
            }
            Some(Component::CurDir) | None => {}
            _ => out.push(c),
        }
    }
    Ok(out)
}

/// Refuses an output folder that is the input folder or lies inside it, so that the batch
/// never writes into its input and never analyses its own output.
///
/// # Errors
/// [`Error::Output`] naming both folders.
pub fn check_output(folder: &Path, out: &Path) -> Result<()> {
    let (f, o) = (resolve(folder)?, resolve(out)?);
    if o.starts_with(&f) {
        return Err(Error::Output {
            path: out.to_path_buf(),
            reason: format!(
                "the output folder is inside the input folder {}; choose an --out outside it \
                 (the input folder is never written to)",
                folder.display()
            ),
        });
    }
    Ok(())
}

/// Checks every output folder of the batch before anything is written: `summary.json` and
/// each clip folder's `report.json` are replaced only with `force`, and no output folder or
/// file is an input (the clips folder, a clip, the rig, a sidecar).
///
/// # Errors
/// [`Error::Output`] naming the first folder that may not be written.
fn check_outputs(
    folder: &Path,
    inputs_besides: &[&Path],
    out: &Path,
    clips: &[Clip],
    force: bool,
) -> Result<()> {
    report::check_output_folder(out, "summary.json", force)?;
    let mut inputs: Vec<&Path> = vec![folder];
    inputs.extend_from_slice(inputs_besides);
    for c in clips {
        inputs.push(&c.path);
        inputs.extend(c.sidecars.iter().map(PathBuf::as_path));
    }
    let mut batch_names: Vec<&str> = report::write::BATCH_OUTPUTS.to_vec();
    batch_names.extend(clips.iter().map(|c| c.name.as_str()));
    report::check_folder_not_input(out, "--out", &inputs, &batch_names)?;
    for c in clips {
        let dir = out.join(&c.name);
        report::check_output_folder(&dir, "report.json", force)?;
        report::check_folder_not_input(&dir, "--out", &inputs, report::write::CLIP_OUTPUTS)?;
    }
    Ok(())
}

/// The rig for one clip: its sidecar when there is one, otherwise the batch rig.
fn clip_rig(clip: &Clip, batch: Option<(&Rig, &Path)>) -> Result<(Rig, PathBuf)> {
    match clip.sidecars.as_slice() {
        [] => match batch {
            Some((rig, path)) => Ok((rig.clone(), path.to_path_buf())),
            None => Err(Error::input(
                &clip.path,
                "has no rig: put a rig.json in its folder or a <clip>.rig.json beside it, name one in the manifest's rig column, or pass --rig",
            )),
        },
        [one] => Ok((Rig::from_path(one)?, one.clone())),
        [a, b, ..] => Err(Error::Input {
            path: clip.path.clone(),
            reason: format!(
                "two sidecar rigs, {} and {}: keep one",
                a.display(),
                b.display()
            ),
        }),
    }
}

/// Runs the batch: every clip of `folder` analysed with its rig, outputs in `out`.
///
/// `progress` receives [`BatchEvent`]s from the worker threads; it must be cheap.
///
/// # Errors
/// Only for the batch as a whole: the folder or output problems of [`find_clips`] and
/// [`check_output`], `jobs` of 0, or summary files that cannot be written. A clip that fails
/// is a `failed` row, not an error.
pub fn run_batch(
    folder: &Path,
    rig: &Rig,
    rig_path: &Path,
    out: &Path,
    opts: &BatchOptions,
    progress: &(dyn Fn(BatchEvent<'_>) + Sync),
) -> Result<BatchReport> {
    run_batch_with(folder, Some((rig, rig_path)), out, opts, progress)
}

/// As [`run_batch`], where the batch rig is optional: a clip with no rig of its own (see
/// [`Clip::sidecars`]) and no batch rig fails with a message saying where to put one.
///
/// # Errors
/// As [`run_batch`]; also [`Error::Input`] for a manifest (`opts.manifest`) that cannot be
/// read or names a clip that is not in the folder.
pub fn run_batch_with(
    folder: &Path,
    batch_rig: Option<(&Rig, &Path)>,
    out: &Path,
    opts: &BatchOptions,
    progress: &(dyn Fn(BatchEvent<'_>) + Sync),
) -> Result<BatchReport> {
    check_output(folder, out)?;
    let mut clips = find_clips(folder)?;
    if let Some(m) = &opts.manifest {
        apply_manifest(&mut clips, &crate::manifest::read_manifest(m)?, folder)?;
    }
    if opts.jobs == Some(0) {
        return Err(Error::Option {
            flag: "--jobs".into(),
            reason: "must be at least 1 (or leave it out to use every core)".into(),
        });
    }
    // Checked once before the lock, so a refused batch leaves the folder as it was, and
    // again under it (held until the batch returns), so a second batch into this folder
    // cannot slip in between check and write.
    let besides: Vec<&Path> = batch_rig
        .map(|r| r.1)
        .into_iter()
        .chain(opts.manifest.as_deref())
        .collect();
    check_outputs(folder, &besides, out, &clips, opts.force)?;
    let _lock = report::lock_output(out)?;
    check_outputs(folder, &besides, out, &clips, opts.force)?;
    progress(BatchEvent::Found { clips: clips.len() });

    let jobs = opts.jobs.map(|j| {
        let cores = std::thread::available_parallelism().map_or(1, |n| n.get());
        crate::limits::clamp_jobs(j, cores).0
    });
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(jobs.unwrap_or(0))
        .build()
        .map_err(|e| Error::Option {
            flag: "--jobs".into(),
            reason: format!(
                "cannot start {} worker threads: {e}",
                opts.jobs.unwrap_or(0)
            ),
        })?;
    let outcomes: Vec<ClipOutcome> = pool.install(|| {
        clips
            .par_iter()
            .enumerate()
            .map(|(i, clip)| {
                progress(BatchEvent::Started {
                    clip: i,
                    name: &clip.name,
                });
                let o = run_clip(i, clip, batch_rig, out, opts, progress);
                progress(BatchEvent::Finished {
                    clip: i,
                    name: &clip.name,
                    ok: o.row.status == Status::Ok,
                });
                o
            })
            .collect()
    });

    let mut written = write_summary(&outcomes, out)?;
    written.extend(report::plot::write_comparison_with(
        &comparison(&outcomes),
        out,
        &opts.report,
    )?);
    let rows: Vec<serde_json::Value> = outcomes
        .iter()
        .filter_map(|o| serde_json::to_value(&o.row).ok())
        .collect();
    written.push(report::write_summary_html(
        &rows,
        &tag_names(&outcomes),
        &comparison(&outcomes),
        out,
        &opts.report,
    )?);
    Ok(BatchReport { outcomes, written })
}

fn run_clip(
    i: usize,
    clip: &Clip,
    batch_rig: Option<(&Rig, &Path)>,
    out: &Path,
    opts: &BatchOptions,
    progress: &(dyn Fn(BatchEvent<'_>) + Sync),
) -> ClipOutcome {
    // The rig named in the row, even when it fails to load.
    let rig_label = match clip.sidecars.as_slice() {
        [one] => one.display().to_string(),
        _ => batch_rig.map_or(String::new(), |r| r.1.display().to_string()),
    };
    let work = || -> Result<ClipOutcome> {
        let (rig, rig_path) = clip_rig(clip, batch_rig)?;
        let source = decode::open(&clip.path)?;
        let mut opts = opts.clone();
        if opts.analyze.zero_still.is_none() && opts.analyze.zero_frame.is_none() {
            opts.analyze.zero_still = rest_still_beside(clip);
        }
        let opts = &opts;
        let frames_cb = |done: u64, total: u64| {
            progress(BatchEvent::Frames {
                clip: i,
                done,
                total,
            })
        };
        let analysis = analyze_source(source, &rig, &rig_path, &opts.analyze, &frames_cb)?;
        let dir = out.join(&clip.name);
        let written = report::write_all(&analysis, &dir, None, &opts.report)?;
        let row = ok_row(clip, &rig, &rig_path, &analysis);
        Ok(ClipOutcome {
            clip: clip.clone(),
            row,
            blows: analysis.blows.clone(),
            warnings: analysis.warnings.clone(),
            written,
        })
    };
    match catch_unwind(AssertUnwindSafe(work)) {
        Ok(Ok(o)) => o,
        Ok(Err(e)) => fail(clip, &rig_label, one_line(&e.to_string())),
        Err(panic) => {
            let what = panic
                .downcast_ref::<&str>()
                .map(|s| s.to_string())
                .or_else(|| panic.downcast_ref::<String>().cloned())
                .unwrap_or_else(|| "unknown".into());
            fail(
                clip,
                &rig_label,
                format!(
                    "{}: internal error during analysis ({}); please report it",
                    clip.path.display(),
                    one_line(&what)
                ),
            )
        }
    }
}

/// Extensions of a clip's rest still, `<clip>.rest.<ext>` beside it (interface v2).
pub const REST_STILL_EXTENSIONS: [&str; 5] = ["png", "tif", "tiff", "jpg", "jpeg"];

/// The rest still beside a clip: `<stem>.rest.png` (or .tif, .tiff, .jpg, .jpeg), or the
/// same after the clip's full file name; the first found.
fn rest_still_beside(clip: &Clip) -> Option<PathBuf> {
    let dir = clip.path.parent()?;
    let full = clip.path.file_name()?.to_string_lossy().into_owned();
    let stem = clip
        .path
        .file_stem()
        .map_or(full.clone(), |s| s.to_string_lossy().into_owned());
    [stem, full].iter().find_map(|base| {
        REST_STILL_EXTENSIONS
            .iter()
            .map(|ext| dir.join(format!("{base}.rest.{ext}")))
            .find(|p| p.is_file())
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn natural_order_compares_numbers_by_value() {
        let mut v = vec!["clip10", "clip2", "Clip1", "clip02b", "a", "clip2.mp4"];
        v.sort_by(|a, b| natural_cmp(a, b));
        assert_eq!(v, ["a", "Clip1", "clip2", "clip2.mp4", "clip02b", "clip10"]);
        assert_eq!(natural_cmp("f_2", "f_10"), Ordering::Less);
        assert_eq!(natural_cmp("x", "x"), Ordering::Equal);
    }

    #[test]
    fn finds_videos_and_stills_folders_in_order() {
        let d = tempfile::tempdir().unwrap();
        let p = d.path();
        std::fs::write(p.join("run10.mp4"), b"x").unwrap();
        std::fs::write(p.join("run2.MKV"), b"x").unwrap();
        std::fs::write(p.join("notes.txt"), b"x").unwrap();
        std::fs::write(p.join("run2.rig.json"), b"{}").unwrap();
        std::fs::create_dir(p.join("stills3")).unwrap();
        std::fs::write(p.join("stills3/f_1.png"), b"x").unwrap();
        std::fs::create_dir(p.join("empty_dir")).unwrap();
        std::fs::create_dir(p.join(".hidden")).unwrap();
        std::fs::write(p.join(".hidden/f_1.png"), b"x").unwrap();
        let clips = find_clips(p).unwrap();
        let names: Vec<&str> = clips.iter().map(|c| c.name.as_str()).collect();
        assert_eq!(names, ["run2", "run10", "stills3"]);
        assert_eq!(clips[2].form, ClipForm::Stills);
        assert_eq!(clips[0].sidecars, vec![p.join("run2.rig.json")]);
        assert!(clips[1].sidecars.is_empty());
    }

    #[test]
    fn a_rest_still_beside_a_clip_is_its_zero_and_not_a_clip() {
        let d = tempfile::tempdir().unwrap();
        let p = d.path();
        std::fs::write(p.join("run1.mp4"), b"x").unwrap();
        std::fs::write(p.join("run1.rest.png"), b"x").unwrap();
        std::fs::write(p.join("run2.mp4"), b"x").unwrap();
        let clips = find_clips(p).unwrap();
        assert_eq!(clips.len(), 2);
        assert_eq!(rest_still_beside(&clips[0]), Some(p.join("run1.rest.png")));
        assert_eq!(rest_still_beside(&clips[1]), None);
    }

    #[test]
    fn shared_stems_keep_their_extension() {
        let d = tempfile::tempdir().unwrap();
        std::fs::write(d.path().join("a.mp4"), b"x").unwrap();
        std::fs::write(d.path().join("a.mov"), b"x").unwrap();
        let names: Vec<String> = find_clips(d.path())
            .unwrap()
            .into_iter()
            .map(|c| c.name)
            .collect();
        assert_eq!(names, ["a.mov", "a.mp4"]);
    }

    #[test]
    fn clip_names_never_collide_with_batch_files() {
        let d = tempfile::tempdir().unwrap();
        std::fs::write(d.path().join("summary.csv.mp4"), b"x").unwrap();
        let clips = find_clips(d.path()).unwrap();
        assert_eq!(clips[0].name, "summary.csv_clip");
    }

    #[test]
    fn empty_and_clipless_folders_are_refused() {
        let d = tempfile::tempdir().unwrap();
        let e = find_clips(d.path()).unwrap_err().to_string();
        assert!(e.contains("empty"), "{e}");
        std::fs::write(d.path().join("readme.txt"), b"x").unwrap();
        let e = find_clips(d.path()).unwrap_err().to_string();
        assert!(e.contains("no clips"), "{e}");
        assert!(!e.contains('\n'));
    }

    #[test]
    fn output_inside_input_is_refused() {
        let d = tempfile::tempdir().unwrap();
        let inp = d.path().join("in");
        std::fs::create_dir(&inp).unwrap();
        assert!(check_output(&inp, &inp.join("out/deeper")).is_err());
        assert!(check_output(&inp, &inp).is_err());
        assert!(check_output(&inp, &inp.join("x/../y")).is_err());
        assert!(check_output(&inp, &d.path().join("out")).is_ok());
        assert!(check_output(&inp, &inp.join("../out")).is_ok());
        // A sibling whose name starts with the input's name is outside.
        assert!(check_output(&inp, &d.path().join("in2")).is_ok());
        // Through a symbolic link to the input folder.
        #[cfg(unix)]
        {
            let link = d.path().join("link");
            std::os::unix::fs::symlink(&inp, &link).unwrap();
            assert!(check_output(&inp, &link.join("out")).is_err());
            assert!(check_output(&link, &inp.join("out")).is_err());
        }
    }

    fn outcomes() -> Vec<ClipOutcome> {
        let a = crate::report::plot::tests::sample_analysis(Path::new("in/air_tool.mkv"));
        let good = Clip {
            name: "air_tool".into(),
            path: "in/air_tool.mkv".into(),
            form: ClipForm::Video,
            sidecars: Vec::new(),
            tags: Vec::new(),
        };
        let bad = Clip {
            name: "broken".into(),
            path: "in/broken.mp4".into(),
            form: ClipForm::Video,
            sidecars: Vec::new(),
            tags: Vec::new(),
        };
        vec![
            fail(&bad, "rig.json", "in/broken.mp4: not a video".into()),
            ClipOutcome {
                row: ok_row(&good, &a.rig, Path::new("rig.json"), &a),
                clip: good,
                blows: a.blows.clone(),
                warnings: Vec::new(),
                written: Vec::new(),
            },
        ]
    }

    #[test]
    fn ok_rows_carry_the_summary_in_report_units() {
        let o = outcomes();
        let r = &o[1].row;
        assert_eq!(r.status, Status::Ok);
        assert_eq!(r.blow_count, Some(5));
        assert_eq!(r.blow_rate_per_min, Some(1200.0));
        assert!((r.nut_total_deg.unwrap() - 45.0).abs() < 1e-9);
        assert!((r.drive_total_deg.unwrap() - 60.0).abs() < 1e-9);
        assert_eq!(r.peak_torque_nm, Some(150.0));
        assert_eq!(r.rating_nm, Some(136.0));
        // Check value C1 (θ = T·L/(G·J), Beer & Johnston ch. 3): d = 16 mm, L = 200 mm,
        // G = 79.3 GPa gives 44.525 N·m/deg.
        assert!((r.bar_stiffness_nm_per_deg.unwrap() - 44.525).abs() < 1e-3);
        assert_eq!(r.fps_hz, Some(2000.0));
        assert_eq!(r.frames, Some(520));
    }

    #[test]
    fn summary_files_round_trip_and_table_lists_failures_last() {
        let o = outcomes();
        let d = tempfile::tempdir().unwrap();
        let files = write_summary(&o, d.path()).unwrap();
        assert_eq!(files.len(), 2);
        let mut rdr = csv::Reader::from_path(&files[0]).unwrap();
        let rows: Vec<SummaryRow> = rdr.deserialize().map(|r| r.unwrap()).collect();
        assert_eq!(rows.len(), 2);
        assert_eq!(rows[1], o[1].row);
        assert_eq!(rows[0].status, Status::Failed);
        assert_eq!(rows[0].peak_torque_nm, None);
        let doc: SummaryFile =
            serde_json::from_str(&std::fs::read_to_string(&files[1]).unwrap()).unwrap();
        assert_eq!(doc.clips, vec![o[0].row.clone(), o[1].row.clone()]);

        let report = BatchReport {
            outcomes: o,
            written: files,
        };
        assert_eq!(report.failed(), 1);
        let t = summary_table(&report);
        let lines: Vec<&str> = t.lines().collect();
        assert!(lines[0].starts_with("clip"));
        assert!(lines[1].starts_with("air_tool") && lines[1].contains("150.0"));
        assert!(lines[2].starts_with("broken") && lines[2].contains("failed: in/broken.mp4"));
        assert!(t.contains("2 clip(s): 1 ok, 1 failed"));
        assert!(t.contains("not a calibrated measurement"));
    }
}
