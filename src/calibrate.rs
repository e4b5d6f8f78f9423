//! Calibration twist measured from still images of the loaded bar: reads a table of (applied
//! torque, image), measures each loaded image against the unloaded reference with the tracker
//! on the rig's drive and nut marks, and returns (torque, twist) pairs for
//! [`crate::mechanics::fit_stiffness`].
//!
//! In: a CSV with a header row, `torque_nm` (or `torque_lbf_ft`) and `image`; image paths are
//! relative to the CSV's folder. The row with torque 0, or an image given separately
//! ([`read_stills_csv`]'s `reference`), is the unloaded reference. Out: a [`StillsMeasurement`]
//! with one [`StillsTwist`] per loaded row, in the CSV's order, and warnings.
//!
//! Each loaded image is measured on its own: a fresh [`Tracker`] sees two frames, the reference
//! then the loaded image, exactly as it would see the first two frames of a clip (same polar
//! sampling, same stripe search, camera-shake registration on the rig's `fixed` mark when it
//! has one). The twist is drive − nut relative to the reference, positive in the tightening
//! direction (the rig's `tighten`). With two frames the tracker's pivot refinement does not
//! run (it needs a clip that turns through many degrees), so an error in a rig pivot scales
//! the measured drive angle (1 px off changed a 10° twist on the invented bench by 0.7 to
//! 1.9 %, see the unit test): place the pivots on the reference image (`twistmark find-marks`).
//!
//! Images are read with the stills decoder's own luma reduction (Rec. 601 weights for
//! colour, ITU-R BT.601-7 §2.5.1). Every error names the CSV file, its line and the image.
//!
//! The `calibrate` command's library half (built on decode, track and mechanics): it must never
//! import segment, report, `analyze`, `batch`, `find_marks` or the CLI.

use std::path::{Path, PathBuf};

use crate::decode::{Frame, read_still};
use crate::error::{Error, Result};
use crate::mechanics::{CalibrationFit, CalibrationPair, fit_stiffness_line};
use crate::rig::Rig;
use crate::track::Tracker;
use crate::units::{Angle, NM_PER_LBF_FT, TimeBase, Torque};
use crate::warning::Warning;

/// One loaded row of the stills table.
#[derive(Debug, Clone, PartialEq)]
pub struct StillsRow {
    /// Line of the row in the CSV file (1 is the header).
    pub line: u64,
    /// Applied torque.
    pub torque: Torque,
    /// The image as written in the CSV.
    pub image: String,
    /// The image's path, resolved against the CSV's folder.
    pub path: PathBuf,
}

/// Where the unloaded reference image comes from.
#[derive(Debug, Clone, PartialEq)]
pub enum Reference {
    /// The CSV's row with torque 0.
    Row(StillsRow),
    /// An image given apart from the CSV (the CLI's `--reference`).
    Given(PathBuf),
}

/// The stills table: the reference and the loaded rows.
#[derive(Debug, Clone, PartialEq)]
pub struct StillsPlan {
    /// The CSV file.
    pub csv: PathBuf,
    /// The unloaded reference image.
    pub reference: Reference,
    /// The loaded rows, in the file's order.
    pub rows: Vec<StillsRow>,
}

/// The twist measured in one loaded image.
#[derive(Debug, Clone, PartialEq)]
pub struct StillsTwist {
    /// The row it came from.
    pub row: StillsRow,
    /// Drive-end angle relative to the reference, tightening positive.
    pub drive: Angle,
    /// Nut-end angle relative to the reference, tightening positive.
    pub nut: Angle,
    /// The tracker's confidence in the drive measurement, 0..=1.
    pub drive_confidence: f32,
    /// The tracker's confidence in the nut measurement, 0..=1.
    pub nut_confidence: f32,
}

impl StillsTwist {
    /// Twist: drive − nut.
    pub fn twist(&self) -> Angle {
        self.drive - self.nut
    }
    /// The (torque, twist) pair for the fit.
    pub fn pair(&self) -> CalibrationPair {
        CalibrationPair {
            torque: self.row.torque,
            twist: self.twist(),
        }
    }
}

/// Every loaded image's twist, and data-quality warnings.
#[derive(Debug, Clone, PartialEq)]
pub struct StillsMeasurement {
    /// The reference image as written (in the CSV, or the `--reference` path).
    pub reference: String,
    /// The reference's line in the CSV (None when it was given apart).
    pub reference_line: Option<u64>,
    /// One entry per loaded row, in the CSV's order.
    pub twists: Vec<StillsTwist>,
    /// Problems that did not stop the measurement, each naming its image.
    pub warnings: Vec<Warning>,
}

impl StillsMeasurement {
    /// The points of the fit: the reference as (0, 0), then each loaded image's (torque,
    /// twist) in the CSV's order.
    pub fn pairs(&self) -> Vec<CalibrationPair> {
        let reference = CalibrationPair {
            torque: Torque::from_nm(0.0),
            twist: Angle::from_rad(0.0),
        };
        std::iter::once(reference)
            .chain(self.twists.iter().map(StillsTwist::pair))
            .collect()
    }

    /// Fits k to [`Self::pairs`] with a straight line with an offset, since every twist shares
    /// the reference's measurement error ([`fit_stiffness_line`]).
    ///
    /// # Errors
    /// As [`fit_stiffness_line`]: fewer than two loaded images, one torque only, or twists
    /// that do not rise with torque.
    pub fn fit(&self) -> Result<CalibrationFit> {
        fit_stiffness_line(&self.pairs())
    }

    /// A warning when the reference image is off the line of the loaded images: the loaded
    /// images alone are fitted with a line of their own, and its twist at zero torque, a′, is
    /// compared with the reference's 0. Warns when |a′| is above [`OFFSET_WARN_DEG`] and above
    /// three times √(u(a′)² + s′²), the standard uncertainty of a new reading at zero torque
    /// predicted from that line, with u(a′) = s′·√(1/n + T̄²/Σ(Tᵢ−T̄)²) (straight-line least
    /// squares, same textbook as the fit). Needs three loaded images.
    pub fn offset_warning(&self, fit: &CalibrationFit) -> Option<Warning> {
        let loaded = fit.pairs.get(1..)?;
        let alone = fit_stiffness_line(loaded).ok()?;
        let a = alone.offset?.deg();
        let n = loaded.len() as f64;
        let tm = loaded.iter().map(|p| p.torque.nm()).sum::<f64>() / n;
        let sxx: f64 = loaded.iter().map(|p| (p.torque.nm() - tm).powi(2)).sum();
        let ss: f64 = alone.residuals.iter().map(|r| r.deg().powi(2)).sum();
        let s2 = ss / (n - 2.0);
        let u_pred = (s2 * (1.0 + 1.0 / n + tm * tm / sxx)).sqrt();
        if !(a.abs() > OFFSET_WARN_DEG && a.abs() > 3.0 * u_pred) {
            return None;
        }
        Some(Warning::Note(format!(
            "the reference image '{}' is off the line of the loaded images, which reaches zero torque at {a:+.3} deg (± {u_pred:.3}): play taken up by the first load, or the bar or camera moved between photos. That biases k ({:.3} N·m/deg with the reference; {:.3} ± {:.3} from the loaded images alone). Retake the set in one go with the camera fixed",
            self.reference,
            fit.stiffness.nm_per_deg(),
            alone.stiffness.nm_per_deg(),
            alone.stderr.nm_per_deg()
        )))
    }
}

/// A reference off the loaded images' line by less than this (deg) is not worth a warning:
/// a few times the tracker's per-image twist error on clean stills (docs/accuracy.md).
pub const OFFSET_WARN_DEG: f64 = 0.05;

/// Reads the stills table. The torque column is `torque_nm` or `torque_lbf_ft`, the image
/// column `image`; any other column is an error, so a misspelt unit does not pass silently.
/// `#` starts a comment line. Exactly one reference: the row with torque 0, or `reference`
/// (then no row may have torque 0).
///
/// # Errors
/// [`Error::Io`] when the CSV is unreadable; [`Error::Input`] naming the CSV and line for a
/// bad header or value, a negative torque, a second unloaded row, no reference, or no loaded
/// row.
pub fn read_stills_csv(csv: &Path, reference: Option<&Path>) -> Result<StillsPlan> {
    let text = crate::limits::read_text(csv, "CSV")?;
    let bad = |reason: String| Error::input(csv, reason);
    let dir = csv.parent().unwrap_or(Path::new(""));
    let (mut rdr, headers) = crate::mechanics::csv_with_headers(&text).map_err(bad)?;
    let (mut tcol, mut icol): (Option<(usize, f64)>, Option<usize>) = (None, None);
    for (i, h) in headers.iter().enumerate() {
        let unit = match h {
            "torque_nm" => Some(1.0),
            "torque_lbf_ft" => Some(NM_PER_LBF_FT),
            "image" => None,
            other => {
                return Err(bad(format!(
                    "unknown column '{other}'; use torque_nm (or torque_lbf_ft) and image"
                )));
            }
        };
        let taken = match unit {
            Some(f) => tcol.replace((i, f)).is_some(),
            None => icol.replace(i).is_some(),
        };
        if taken {
            return Err(bad(format!(
                "column '{h}' repeats a {} column; keep one",
                if unit.is_some() { "torque" } else { "image" }
            )));
        }
    }
    let (Some((ti, tf)), Some(ii)) = (tcol, icol) else {
        return Err(bad(
            "needs a header row with torque_nm (or torque_lbf_ft) and image".into(),
        ));
    };
    let mut zero: Option<StillsRow> = None;
    let mut rows = Vec::new();
    for rec in rdr.records() {
        let rec = rec.map_err(|e| bad(format!("{e}")))?;
        let line = rec.position().map_or(0, |p| file_line(&text, p.byte()));
        let ts = rec.get(ti).unwrap_or("");
        let t = crate::mechanics::parse_decimal(ts)
            .filter(|v| v.is_finite())
            .ok_or_else(|| {
                bad(format!(
                    "line {line}, column {}: '{ts}' is not a number",
                    &headers[ti]
                ))
            })?;
        if t < 0.0 {
            return Err(bad(format!(
                "line {line}, column {}: torque {ts} is negative; give the applied tightening torque (0 for the unloaded reference)",
                &headers[ti]
            )));
        }
        let image = rec.get(ii).unwrap_or("").to_string();
        if image.is_empty() {
            return Err(bad(format!(
                "line {line}, column image: empty; give the image file (relative to the CSV's folder)"
            )));
        }
        let row = StillsRow {
            line,
            torque: Torque::from_nm(t * tf),
            path: dir.join(&image),
            image,
        };
        if t > 0.0 {
            rows.push(row);
            continue;
        }
        if let Some(r) = reference {
            return Err(bad(format!(
                "line {line}: torque 0 ('{}'), but --reference already gives the unloaded image '{}'; remove this row or drop --reference",
                row.image,
                r.display()
            )));
        }
        if let Some(first) = &zero {
            return Err(bad(format!(
                "line {line}: a second unloaded row (torque 0, '{}'); line {} ('{}') is already the reference: keep one",
                row.image, first.line, first.image
            )));
        }
        zero = Some(row);
    }
    let reference = match (reference, zero) {
        (Some(r), _) => Reference::Given(r.to_path_buf()),
        (None, Some(row)) => Reference::Row(row),
        (None, None) => {
            return Err(bad(
                "no unloaded reference: add a row with torque 0 and the image of the bar at rest, or pass --reference IMAGE".into(),
            ));
        }
    };
    if rows.is_empty() {
        return Err(bad(
            "has no loaded rows (torque above 0); add one row per applied torque".into(),
        ));
    }
    Ok(StillsPlan {
        csv: csv.to_path_buf(),
        reference,
        rows,
    })
}

/// The file's own line number of the record whose position the csv crate gives as `byte`.
/// The crate's own line count, and its record position, do not account for the comment and
/// blank lines it skips before a record, so those are stepped over here.
fn file_line(text: &str, byte: u64) -> u64 {
    let mut start = usize::try_from(byte).unwrap_or(usize::MAX).min(text.len());
    let mut line = 1 + text.as_bytes()[..start]
        .iter()
        .filter(|&&b| b == b'\n')
        .count() as u64;
    while let Some(rest) = text.get(start..) {
        let this = rest.split('\n').next().unwrap_or("");
        let t = this.trim();
        if !(t.is_empty() || t.starts_with('#')) || start + this.len() >= text.len() {
            break;
        }
        start += this.len() + 1;
        line += 1;
    }
    line
}

impl StillsPlan {
    /// How errors name the reference: `line N, image 'x'` or `--reference 'x'`.
    fn reference_label(&self) -> String {
        match &self.reference {
            Reference::Row(r) => format!("line {}, reference image '{}'", r.line, r.image),
            Reference::Given(p) => format!("--reference '{}'", p.display()),
        }
    }

    fn reference_path(&self) -> &Path {
        match &self.reference {
            Reference::Row(r) => &r.path,
            Reference::Given(p) => p,
        }
    }
}

/// Reads one image, naming the CSV, the line and the image when it fails.
fn load(plan: &StillsPlan, label: &str, path: &Path) -> Result<Frame> {
    let wrap = |reason: String| Error::input(&plan.csv, format!("{label}: {reason}"));
    if !path.is_file() {
        let hint = if matches!(plan.reference, Reference::Given(ref p) if p == path) {
            "check the --reference path"
        } else {
            "image paths are relative to the CSV's folder"
        };
        return Err(wrap(format!("no such file ({}); {hint}", path.display())));
    }
    read_still(path).map_err(|e| match e {
        Error::Input { reason, .. } => wrap(reason),
        Error::Io { cause, .. } => wrap(format!("cannot read: {cause}")),
        other => wrap(other.to_string()),
    })
}

/// Measures every loaded image of `plan` against its reference with the rig's marks (see the
/// module doc).
///
/// # Errors
/// [`Error::Input`] naming the CSV, line and image when an image is missing or unreadable, has
/// a size other than the reference's, or a drive or nut mark is not found in it; the rig's
/// own errors ([`Error::Rig`], [`Error::Mark`]) when a mark does not fit the images or cannot
/// be tracked.
pub fn measure_stills(rig: &Rig, rig_path: &Path, plan: &StillsPlan) -> Result<StillsMeasurement> {
    let ref_label = plan.reference_label();
    let mut reference = load(plan, &ref_label, plan.reference_path())?;
    reference.index = 0;
    let (w, h) = (reference.width, reference.height);
    let time_base = TimeBase::from_fps(1.0, "calibration stills")?;
    let mut twists = Vec::with_capacity(plan.rows.len());
    let mut warnings = Vec::new();
    for row in &plan.rows {
        let label = format!("line {}, image '{}'", row.line, row.image);
        let wrap = |reason: String| Error::input(&plan.csv, format!("{label}: {reason}"));
        let mut loaded = load(plan, &label, &row.path)?;
        if (loaded.width, loaded.height) != (w, h) {
            return Err(wrap(format!(
                "is {}x{} but the reference ({ref_label}) is {w}x{h}; take every image with the same camera, zoom and resolution",
                loaded.width, loaded.height
            )));
        }
        loaded.index = 1;
        let mut tracker = Tracker::new(rig, rig_path, w, h)?;
        tracker.push(&reference).map_err(|e| {
            Error::input(
                &plan.csv,
                format!("{ref_label}: {e}; check that the rig's marks match the reference image"),
            )
        })?;
        tracker.push(&loaded).map_err(|e| wrap(e.to_string()))?;
        let (trace, notes) = tracker.finish(time_base);
        let found = |mark: &str, a: Option<Angle>| {
            a.ok_or_else(|| {
                wrap(format!(
                    "mark '{mark}' not found; check that its stripe stays inside the rig's annulus, in focus and lit as in the reference"
                ))
            })
        };
        let drive = found("drive", trace.drive.get(1).copied().flatten())?;
        let nut = found("nut", trace.nut.get(1).copied().flatten())?;
        for n in notes {
            warnings.push(Warning::Note(format!(
                "{}: {label} (frame 0 is the reference, frame 1 this image): {n}",
                plan.csv.display()
            )));
        }
        twists.push(StillsTwist {
            row: row.clone(),
            drive,
            nut,
            drive_confidence: trace.drive_confidence.get(1).copied().unwrap_or(0.0),
            nut_confidence: trace.nut_confidence.get(1).copied().unwrap_or(0.0),
        });
    }
    let (reference, reference_line) = match &plan.reference {
        Reference::Row(r) => (r.image.clone(), Some(r.line)),
        Reference::Given(p) => (p.display().to_string(), None),
    };
    Ok(StillsMeasurement {
        reference,
        reference_line,
        twists,
        warnings,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::synth::{Scenario, Truth, render_frame, simulate};
    use approx::assert_relative_eq;
    use image::{ImageBuffer, Luma as PxLuma};

    fn write(dir: &Path, name: &str, text: &str) -> PathBuf {
        let p = dir.join(name);
        std::fs::write(&p, text).unwrap();
        p
    }

    fn err(r: Result<StillsPlan>) -> String {
        r.unwrap_err().to_string()
    }

    #[test]
    fn table_with_unit_headers_and_a_zero_row() {
        let dir = tempfile::tempdir().unwrap();
        let csv = write(
            dir.path(),
            "s.csv",
            "image, torque_lbf_ft\n# at rest\nrest.png,0\nsub/a.png, 100\nb.png,50\n",
        );
        let plan = read_stills_csv(&csv, None).unwrap();
        match &plan.reference {
            Reference::Row(r) => {
                assert_eq!((r.line, r.image.as_str()), (3, "rest.png"));
                assert_eq!(r.path, dir.path().join("rest.png"));
            }
            other => panic!("{other:?}"),
        }
        assert_eq!(plan.rows.len(), 2);
        // 100 lbf·ft = 135.5818 N·m (NIST SP 811, 2008, Appendix B.9).
        assert_relative_eq!(plan.rows[0].torque.nm(), 135.5818, max_relative = 1e-6);
        assert_eq!(plan.rows[0].path, dir.path().join("sub/a.png"));
        assert_eq!(plan.rows[1].line, 5);
        let given = read_stills_csv(
            &write(dir.path(), "g.csv", "torque_nm,image\n20,a.png\n"),
            Some(Path::new("rest.png")),
        )
        .unwrap();
        assert_eq!(given.reference, Reference::Given("rest.png".into()));
        // Comment and blank lines between rows keep the file's own line numbers.
        let c = write(
            dir.path(),
            "c.csv",
            "torque_nm,image\n0,a.png\n# x\n\n10,b.png\n",
        );
        assert_eq!(read_stills_csv(&c, None).unwrap().rows[0].line, 5);
    }

    #[test]
    fn bad_tables_name_the_file_and_line() {
        let dir = tempfile::tempdir().unwrap();
        let d = dir.path();
        let cases: [(&str, Option<&Path>, &[&str]); 9] = [
            ("torque_nm,img\n0,a.png\n", None, &["unknown column 'img'"]),
            ("torque_nm\n0\n", None, &["needs a header row"]),
            ("torque_nm,torque_lbf_ft,image\n", None, &["repeats"]),
            (
                "torque_nm,image\n0,a.png\n10,b.png\n-5,c.png\n",
                None,
                &["line 4", "negative"],
            ),
            (
                "torque_nm,image\n0,a.png\nten,b.png\n",
                None,
                &["line 3", "not a number"],
            ),
            (
                "torque_nm,image\n0,a.png\n10,\n",
                None,
                &["line 3", "empty"],
            ),
            (
                "torque_nm,image\n0,a.png\n0,b.png\n",
                None,
                &["line 3", "line 2", "second unloaded"],
            ),
            (
                "torque_nm,image\n10,b.png\n",
                None,
                &["no unloaded reference"],
            ),
            ("torque_nm,image\n0,a.png\n", None, &["no loaded rows"]),
        ];
        for (i, (text, r, want)) in cases.into_iter().enumerate() {
            let csv = write(d, &format!("bad{i}.csv"), text);
            let e = err(read_stills_csv(&csv, r));
            assert!(e.contains(&format!("bad{i}.csv")), "{e}");
            for w in want {
                assert!(e.contains(w), "case {i}: {e}");
            }
            assert_eq!(e.lines().count(), 1, "{e}");
        }
        let csv = write(d, "both.csv", "torque_nm,image\n0,a.png\n10,b.png\n");
        let e = err(read_stills_csv(&csv, Some(Path::new("r.png"))));
        assert!(e.contains("line 2") && e.contains("--reference"), "{e}");
        assert!(read_stills_csv(&d.join("none.csv"), None).is_err());
    }

    /// The invented bench (slow-tool preset, noise-free) rendered at the given drive and nut
    /// angles (degrees, tightening positive from the scene's start pose).
    fn bench_frames(angles: &[(f64, f64)]) -> (Scenario, Vec<Frame>) {
        let sc = Scenario::preset("slow-tool").unwrap();
        let mut v = serde_json::to_value(simulate(&sc)).unwrap();
        let n = angles.len();
        v["frames"] = n.into();
        v["trace"]["t_s"] = serde_json::json!(vec![0.0; n]);
        v["trace"]["drive_deg"] = angles.iter().map(|a| a.0).collect();
        v["trace"]["nut_deg"] = angles.iter().map(|a| a.1).collect();
        v["trace"]["twist_deg"] = angles.iter().map(|a| a.0 - a.1).collect();
        v["shake_px"] = serde_json::json!([]);
        let truth: Truth = serde_json::from_value(v).unwrap();
        let frames = (0..n as u64)
            .map(|i| render_frame(&sc, &truth, i))
            .collect();
        (sc, frames)
    }

    fn save(f: &Frame, path: &Path) {
        let crate::decode::Luma::U8(d) = &f.luma else {
            panic!("8-bit")
        };
        ImageBuffer::<PxLuma<u8>, _>::from_raw(f.width, f.height, d.clone())
            .unwrap()
            .save(path)
            .unwrap();
    }

    #[test]
    fn measures_twist_against_the_reference() {
        // Synthetic stills of the invented bench with known angles (truth): drive turned 3.5°
        // and 7°, the nut 0.4° in the second image.
        let (sc, frames) = bench_frames(&[(0.0, 0.0), (3.5, 0.0), (7.0, 0.4)]);
        let dir = tempfile::tempdir().unwrap();
        for (i, f) in frames.iter().enumerate() {
            save(f, &dir.path().join(format!("s{i}.png")));
        }
        let csv = write(
            dir.path(),
            "s.csv",
            "torque_nm,image\n0,s0.png\n45,s1.png\n90,s2.png\n",
        );
        let plan = read_stills_csv(&csv, None).unwrap();
        let m = measure_stills(&sc.rig(), Path::new("rig.json"), &plan).unwrap();
        assert_eq!(m.twists.len(), 2);
        let t = &m.twists[1];
        assert!((t.drive.deg() - 7.0).abs() < 0.05, "{}", t.drive.deg());
        assert!((t.nut.deg() - 0.4).abs() < 0.05, "{}", t.nut.deg());
        assert!((t.twist().deg() - 6.6).abs() < 0.05);
        assert!((m.twists[0].twist().deg() - 3.5).abs() < 0.05);
        assert_relative_eq!(m.pairs()[2].torque.nm(), 90.0);
        assert_eq!(m.pairs()[0].torque.nm(), 0.0);
        let fit = m.fit().unwrap();
        // 45 N·m ↔ 3.5°, 90 N·m ↔ 6.6°: slope 3.1°/45 N·m and an offset of 0.4° by construction
        // of these angles (the line runs through all three points only roughly).
        assert!(fit.offset.is_some());
        // With one degree of freedom u(a) is large: no warning.
        assert!(m.offset_warning(&fit).is_none());
        assert!(m.warnings.is_empty(), "{:?}", m.warnings);
    }

    /// Six loaded images on T/13.3 N·m/deg plus a constant `offset_deg` and ±0.01° of
    /// alternating noise (invented values).
    fn measured(offset_deg: f64) -> StillsMeasurement {
        let twists = (1..=6u32)
            .map(|i| {
                let t = 20.0 * f64::from(i);
                let e = if i % 2 == 0 { 0.01 } else { -0.01 };
                StillsTwist {
                    row: StillsRow {
                        line: u64::from(i) + 2,
                        torque: Torque::from_nm(t),
                        image: format!("t{i}.png"),
                        path: PathBuf::from(format!("t{i}.png")),
                    },
                    drive: Angle::from_deg(t / 13.3 + offset_deg + e),
                    nut: Angle::from_deg(0.0),
                    drive_confidence: 1.0,
                    nut_confidence: 1.0,
                }
            })
            .collect();
        StillsMeasurement {
            reference: "rest.png".into(),
            reference_line: Some(2),
            twists,
            warnings: Vec::new(),
        }
    }

    #[test]
    fn a_reference_off_the_line_warns_with_k_from_the_loaded_images() {
        let clean = measured(0.0);
        let fit = clean.fit().unwrap();
        assert!(clean.offset_warning(&fit).is_none());
        let moved = measured(0.5);
        let f2 = moved.fit().unwrap();
        // The reference is a point of the line, so an offset of the loaded images pulls the
        // slope; the warning names the reference and gives k from the loaded images alone,
        // which the offset does not touch.
        assert!(f2.stiffness.nm_per_deg() < 0.98 * fit.stiffness.nm_per_deg());
        let alone = fit_stiffness_line(&f2.pairs[1..]).unwrap();
        assert!((alone.stiffness.nm_per_deg() / 13.3 - 1.0).abs() < 0.005);
        let w = moved
            .offset_warning(&f2)
            .map(|w| w.to_string())
            .unwrap_or_default();
        assert!(w.contains("rest.png") && w.contains("zero torque"), "{w}");
        let k_alone = format!("{:.3} ±", alone.stiffness.nm_per_deg());
        assert!(w.contains(&k_alone), "{w}");
    }

    #[test]
    fn a_pivot_off_by_one_pixel_scales_the_twist_by_one_or_two_percent() {
        // Synthetic stills (known truth): the drive turned 10°, the rig's drive pivot moved by
        // 1 px in each of four directions. Documents the size of the effect in
        // docs/mechanics.md §7 (no pivot refinement with two frames).
        let (sc, frames) = bench_frames(&[(0.0, 0.0), (10.0, 0.0)]);
        let dir = tempfile::tempdir().unwrap();
        save(&frames[0], &dir.path().join("r.png"));
        save(&frames[1], &dir.path().join("l.png"));
        let csv = write(dir.path(), "s.csv", "torque_nm,image\n0,r.png\n100,l.png\n");
        let plan = read_stills_csv(&csv, None).unwrap();
        let mut worst: f64 = 0.0;
        for d in [[1.0, 0.0], [-1.0, 0.0], [0.0, 1.0], [0.0, -1.0]] {
            let mut rig = sc.rig();
            if let crate::rig::Mark::Radial(m) = &mut rig.marks.drive {
                m.pivot[0] += d[0];
                m.pivot[1] += d[1];
            }
            let m = measure_stills(&rig, Path::new("rig.json"), &plan).unwrap();
            let rel = m.twists[0].twist().deg() / 10.0 - 1.0;
            eprintln!("pivot moved {d:?}: twist scale error {:+.3} %", 100.0 * rel);
            worst = worst.max(rel.abs());
        }
        assert!(worst > 0.001 && worst < 0.025, "worst {worst}");
    }

    #[test]
    fn bad_images_name_the_csv_line_and_image() {
        let (sc, frames) = bench_frames(&[(0.0, 0.0)]);
        let dir = tempfile::tempdir().unwrap();
        let d = dir.path();
        save(&frames[0], &d.join("rest.png"));
        // A blank image of the right size: no paint, so no mark.
        let blank = Frame::from_u8(0, frames[0].width, frames[0].height, vec![40; 320 * 240]);
        save(&blank, &d.join("blank.png"));
        save(
            &Frame::from_u8(0, 100, 80, vec![40; 8000]),
            &d.join("small.png"),
        );
        std::fs::write(d.join("junk.png"), b"not an image").unwrap();
        let rig = sc.rig();
        for (img, want) in [
            ("missing.png", "no such file"),
            ("small.png", "100x80"),
            ("blank.png", "not found"),
            ("junk.png", "cannot be read"),
        ] {
            let csv = write(
                d,
                "c.csv",
                &format!("torque_nm,image\n0,rest.png\n50,{img}\n"),
            );
            let plan = read_stills_csv(&csv, None).unwrap();
            let e = measure_stills(&rig, Path::new("rig.json"), &plan)
                .unwrap_err()
                .to_string();
            assert!(
                e.contains("c.csv") && e.contains("line 3") && e.contains(img) && e.contains(want),
                "{e}"
            );
            assert_eq!(e.lines().count(), 1, "{e}");
        }
        // A reference without paint names the reference.
        let csv = write(d, "r.csv", "torque_nm,image\n0,blank.png\n50,rest.png\n");
        let plan = read_stills_csv(&csv, None).unwrap();
        let e = measure_stills(&rig, Path::new("rig.json"), &plan)
            .unwrap_err()
            .to_string();
        assert!(
            e.contains("line 2") && e.contains("reference image 'blank.png'"),
            "{e}"
        );
    }
}
