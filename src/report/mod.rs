//! Stage 5, report: writes `report.json`, `blows.csv`, `trace.csv` (report format v1, every
//! number with its unit in the key) and `report.html` (the page a lab files), and formats the
//! per-blow table for the terminal.
//!
//! In: an [`Analysis`]. Out: files in an output folder, and text. Each file is written under a
//! temporary name in the same folder and renamed into place when complete, so an interrupted
//! run never leaves a half-written file under a final name (a rename within one folder is
//! atomic on POSIX file systems and replaces the target on Windows).
//!
//! Layering: the last stage. It reads every earlier stage's results through
//! [`crate::Analysis`] and must never import `batch` or the CLI (`tests/it/layering.rs`
//! checks).

use std::path::{Path, PathBuf};

use crate::analyze::Analysis;
use crate::error::{Error, Result};
pub(crate) use write::write_atomic;

pub mod overlay;
pub mod plot;
pub(crate) mod rulers;
pub mod write;

pub use plot::{write_comparison, write_plots};
pub use write::{
    check_folder_not_input, check_not_input, lock_output, write_all, write_file, write_new_atomic,
};

pub(crate) mod bar_json;
pub use bar_json::{BarJson, SectionJson};
mod csv;
mod display;
mod draw;
mod html;
mod html_summary;
mod json;
mod obs;
mod provenance;
mod table;
mod thumbnail;

pub use display::{ReportOptions, TorqueUnit};
pub use provenance::{ClipJson, ToolJson, WindowJson};

pub use json::{
    BlowJson, MarkJson, MarkQualityJson, REPORT_VERSION, Report, SummaryJson, TraceJson, report,
};
pub use table::{blow_table, blow_table_with};

/// The caution printed and written wherever a torque is shown.
pub use crate::mechanics::TORQUE_CAUTION as CAUTION;

/// Writes every output file for one analysis into `dir` (created if missing) and returns
/// their paths.
///
/// # Errors
/// [`crate::Error::Output`] when `dir` cannot be created, [`crate::Error::Io`] naming the file
/// that could not be written.
pub fn write_outputs(analysis: &Analysis, dir: &Path) -> Result<Vec<PathBuf>> {
    write_outputs_with(analysis, dir, &ReportOptions::default())
}

/// As [`write_outputs`], showing torques in `opts.units` in `report.html` (the JSON and
/// CSV files keep SI keys whatever the option).
///
/// # Errors
/// As [`write_outputs`].
pub fn write_outputs_with(
    analysis: &Analysis,
    dir: &Path,
    opts: &ReportOptions,
) -> Result<Vec<PathBuf>> {
    write::ensure_folder(dir)?;
    let report = json::report(analysis);
    let mut text = serde_json::to_string_pretty(&report).map_err(|e| Error::Output {
        path: dir.join("report.json"),
        reason: format!("cannot serialise the report: {e}"),
    })?;
    text.push('\n');
    // report.json goes last, so its presence means the CSVs beside it are complete too.
    let blows = csv::blows_csv(&report);
    let trace = csv::trace_csv(&report);
    let page = html::report_page(
        analysis,
        &report,
        &plot::clip_svgs(analysis, opts)?,
        thumbnail::first_frame_data_uri(analysis),
        opts,
    );
    for (name, bytes) in [
        ("blows.csv", blows.as_bytes()),
        ("trace.csv", trace.as_bytes()),
        ("report.html", page.as_bytes()),
        ("report.json", text.as_bytes()),
    ] {
        write_atomic(&dir.join(name), bytes)?;
    }
    Ok(["report.json", "blows.csv", "trace.csv", "report.html"]
        .iter()
        .map(|n| dir.join(n))
        .collect())
}

/// Writes a batch's `summary.html` into `out`: the summary rows (the objects of
/// `summary.json`'s `clips`, each with an optional `tags` object), grouped by `tags` when any
/// are given, and the comparison plot.
///
/// # Errors
/// [`Error::Output`] when the plot cannot be drawn, [`Error::Io`] naming the file.
pub fn write_summary_html(
    rows: &[serde_json::Value],
    tags: &[String],
    comparison: &[plot::ComparisonClip],
    out: &Path,
    opts: &ReportOptions,
) -> Result<PathBuf> {
    let svg = plot::comparison_svg(comparison, opts)?;
    let page = html_summary::summary_page(rows, tags, Some(&svg), opts);
    let path = out.join("summary.html");
    write_atomic(&path, page.as_bytes())?;
    Ok(path)
}

/// Refuses to reuse an output folder that already holds twistmark results, unless `force`.
///
/// `marker` is the file whose presence means "results are here": `report.json` for
/// `analyze`, `summary.json` for `batch`. A folder that does not exist, is empty, or holds
/// other files only is always fine (nothing of ours would be lost).
///
/// # Errors
/// [`Error::Output`] naming the folder and saying to pass `--force` or choose another
/// `--out`; also when `dir` is a file.
pub fn check_output_folder(dir: &Path, marker: &str, force: bool) -> Result<()> {
    if dir.exists() && !dir.is_dir() {
        return Err(Error::Output {
            path: dir.to_path_buf(),
            reason: "is a file, not a folder: give --out a folder name".into(),
        });
    }
    if !force && dir.join(marker).exists() {
        return Err(Error::Output {
            path: dir.to_path_buf(),
            reason: format!(
                "already holds twistmark results ({marker}); pass --force to overwrite them or choose another --out"
            ),
        });
    }
    Ok(())
}

/// Encodes `img` as PNG in memory and writes it with [`write::write_atomic`].
///
/// # Errors
/// [`crate::Error::Output`] when encoding fails, [`crate::Error::Io`] naming the file.
pub(crate) fn save_png_atomic<P, C>(img: &image::ImageBuffer<P, C>, path: &Path) -> Result<()>
where
    P: image::PixelWithColorType,
    [P::Subpixel]: image::EncodableLayout,
    C: std::ops::Deref<Target = [P::Subpixel]>,
{
    let mut png = Vec::new();
    img.write_to(&mut std::io::Cursor::new(&mut png), image::ImageFormat::Png)
        .map_err(|e| Error::Output {
            path: path.to_path_buf(),
            reason: format!("could not encode the PNG: {e}"),
        })?;
    write_atomic(path, &png)
}

/// A number for a table or CSV cell, with `decimals` places; empty when unknown or not
/// finite.
pub(crate) fn cell(v: Option<f64>, decimals: usize) -> String {
    match v {
        Some(x) if x.is_finite() => format!("{x:.decimals$}"),
        _ => String::new(),
    }
}

#[cfg(test)]
pub(crate) mod tests {
    use super::*;
    use crate::analyze::{Analysis, FpsSource};
    use crate::decode::{ClipInfo, ClipKind};
    use crate::mechanics::blow_metrics;
    use crate::segment::find_blows;
    use crate::synth::{Scenario, simulate};
    use crate::track::Trace;
    use crate::units::{Angle, TimeBase};
    use std::fs;

    /// An analysis of the `fast-tool` synthetic scene's exact angles (the project's invented
    /// bench), with the drive lost on a few frames and, optionally, without a bar.
    pub(crate) fn analysis(with_bar: bool) -> Analysis {
        let sc = Scenario::preset("fast-tool").unwrap();
        let truth = simulate(&sc);
        let n = truth.trace.drive_deg.len();
        let tb = TimeBase::from_fps(truth.fps, "test").unwrap();
        let mut drive: Vec<Option<Angle>> = truth
            .trace
            .drive_deg
            .iter()
            .map(|&d| Some(Angle::from_deg(d)))
            .collect();
        drive[3] = None;
        drive[4] = None;
        let trace = Trace {
            time_base: tb,
            times_s: Vec::new(),
            synthetic: Vec::new(),
            frames: (0..n as u64).collect(),
            drive,
            nut: truth
                .trace
                .nut_deg
                .iter()
                .map(|&d| Some(Angle::from_deg(d)))
                .collect(),
            drive_confidence: vec![0.9; n],
            nut_confidence: vec![0.8; n],
            drive_zero_screen: None,
            nut_zero_screen: None,
        };
        let mut rig = sc.rig();
        if !with_bar {
            rig.bar = None;
        }
        analysis_of(trace, rig)
    }

    /// A clip held in memory: `n` frames of `width`×`height`, 8-bit, no container.
    pub(crate) fn memory_clip(path: PathBuf, n: usize, width: u32, height: u32) -> ClipInfo {
        ClipInfo {
            path,
            kind: ClipKind::Memory,
            frames: n as u64,
            width,
            height,
            bit_depth: 8,
            container_fps_hz: None,
            codec: "raw".into(),
            duration_s: None,
            warnings: Vec::new(),
            frame_times: None,
            display_rotation_deg: 0,
        }
    }

    /// Timing by the capture rate alone (no timestamps, nothing repeated or made).
    pub(crate) fn capture_rate_timing() -> crate::timing::Timing {
        crate::timing::Timing {
            source: crate::timing::TimingSource::CaptureRate,
            duplicated_frames: 0,
            interpolated_frames: 0,
            median_interval_s: None,
            worst_interval_s: None,
            captured_fps_estimate_hz: None,
            rolling_shutter_estimate_s: None,
        }
    }

    /// The analysis stages after tracking, on any trace.
    pub(crate) fn analysis_of(trace: Trace, rig: crate::rig::Rig) -> Analysis {
        let n = trace.len();
        let tb = trace.time_base;
        let segmentation = find_blows(&trace);
        let (blows, summary, mut warnings) = blow_metrics(&trace, &segmentation, rig.bar.as_ref());
        warnings.extend(segmentation.warnings.iter().cloned());
        Analysis {
            clip: memory_clip(PathBuf::from("bench/fast-tool"), n, 320, 240),
            rig,
            time_base: tb,
            fps_source: FpsSource::Rig,
            timing: capture_rate_timing(),
            trace,
            signals: Default::default(),
            camera_motion: None,
            segmentation,
            blows,
            summary,
            warnings,
            bar: None,
            springback: None,
            model: None,
        }
    }

    #[test]
    fn writes_four_files_into_a_new_folder_and_leaves_no_partials() {
        let a = analysis(true);
        let dir = tempfile::tempdir().unwrap();
        let out = dir.path().join("nested/out");
        let written = write_outputs(&a, &out).unwrap();
        let names: Vec<String> = written
            .iter()
            .map(|p| p.file_name().unwrap().to_string_lossy().into_owned())
            .collect();
        assert_eq!(
            names,
            ["report.json", "blows.csv", "trace.csv", "report.html"]
        );
        let all: Vec<String> = fs::read_dir(&out)
            .unwrap()
            .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
            .collect();
        assert_eq!(all.len(), 4, "{all:?}");
        // Writing again replaces the files.
        write_outputs(&a, &out).unwrap();
        assert_eq!(fs::read_dir(&out).unwrap().count(), 4);
    }

    #[test]
    fn a_clip_without_blows_still_gets_a_complete_report_and_a_warning() {
        let sc = Scenario::preset("slow-tool").unwrap();
        let n = 200;
        let still = vec![Some(Angle::ZERO); n];
        let trace = Trace {
            time_base: TimeBase::from_fps(1000.0, "test").unwrap(),
            times_s: Vec::new(),
            synthetic: Vec::new(),
            frames: (0..n as u64).collect(),
            drive: still.clone(),
            nut: still,
            drive_confidence: vec![1.0; n],
            nut_confidence: vec![1.0; n],
            drive_zero_screen: None,
            nut_zero_screen: None,
        };
        let a = analysis_of(trace, sc.rig());
        let dir = tempfile::tempdir().unwrap();
        write_outputs(&a, dir.path()).unwrap();
        let v: serde_json::Value =
            serde_json::from_str(&fs::read_to_string(dir.path().join("report.json")).unwrap())
                .unwrap();
        assert_eq!(v["summary"]["blow_count"].as_u64(), Some(0));
        assert!(v["summary"]["blow_rate_per_min"].is_null());
        assert_eq!(v["blows"].as_array().map(Vec::len), Some(0));
        assert_eq!(v["trace"]["t_s"].as_array().map(Vec::len), Some(n));
        assert!(
            v["warnings"][0]
                .as_str()
                .is_some_and(|w| w.contains("0 blow")),
            "{}",
            v["warnings"]
        );
        let csv = fs::read_to_string(dir.path().join("blows.csv")).unwrap();
        assert_eq!(csv.lines().count(), 1, "header only");
        assert!(blow_table(&a).contains("no blows found"));
    }

    #[test]
    fn an_out_path_that_is_a_file_is_an_error_naming_it() {
        let a = analysis(true);
        let dir = tempfile::tempdir().unwrap();
        let f = dir.path().join("taken");
        fs::write(&f, b"x").unwrap();
        let e = write_outputs(&a, &f).unwrap_err().to_string();
        assert!(e.contains("taken") && e.contains("--out"), "{e}");
    }

    #[test]
    fn cells_are_empty_for_null() {
        assert_eq!(cell(None, 3), "");
        assert_eq!(cell(Some(f64::NAN), 3), "");
        assert_eq!(cell(Some(1.23456), 2), "1.23");
    }
}
