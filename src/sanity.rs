//! Physics sanity checks (docs/conventions.md, "Plausible ranges and limits"): inputs outside the
//! range any real bar, camera or run could have are refused, and results that contradict how an
//! impact wrench tightens a nut are withheld with a warning instead of printed as numbers.
//!
//! The ranges are stated in docs/conventions.md ("Plausible ranges"). They are wide on
//! purpose: they catch a unit slip or a typo (a diameter of 1e-300 mm, a stiffness of
//! 1e308 N·m/deg, a capture rate of 1e-308 Hz), not an unusual bar. They are *common
//! practice* bounds, not values from a standard.
//!
//! Shared by the rig and the analysis: it must never import track, segment, report, `analyze`,
//! `batch`, `find_marks` or the CLI.

use std::path::Path;

use crate::error::{Error, Result};
use crate::mechanics::{BarSpec, BlowMetrics, Summary};
use crate::rig::{Mark, Rig};
use crate::warning::Warning;

/// Capture rates accepted, Hz: from a 1 fps time-lapse to 10 million fps.
pub const FPS_RANGE_HZ: (f64, f64) = (1.0, 1.0e7);
/// Cross-section sizes accepted (diameter, bore, across flats, side), mm.
pub const SECTION_SIZE_RANGE_MM: (f64, f64) = (1.0, 300.0);
/// Section lengths accepted, mm.
pub const SECTION_LENGTH_RANGE_MM: (f64, f64) = (0.5, 5000.0);
/// Bar stiffness accepted (computed or calibrated), N·m/deg.
pub const STIFFNESS_RANGE_NM_PER_DEG: (f64, f64) = (1.0e-3, 1.0e6);
/// Bar ratings accepted, N·m.
pub const RATING_RANGE_NM: (f64, f64) = (0.1, 1.0e5);
/// Most stripes a side mark may have: every frame searches each one, so the count is
/// bounded (16 stripes are 22.5° apart, closer than the tracker can tell apart in a side
/// view, *common practice*).
pub const MAX_SIDE_STRIPES: u32 = 16;
/// A peak torque above this multiple of the bar's rating is not reported: a torsion bar
/// loaded that far past its rating would have yielded, so the measurement, not the bar, is
/// wrong (a rating is set well below yield, *common practice*).
pub const MAX_TORQUE_TO_RATING: f64 = 3.0;
/// Net backward rotation of the drive end beyond this (deg) means the rig's `tighten` is the
/// wrong way round: an impact wrench that tightens turns its anvil forward.
pub const DRIVE_BACKWARDS_DEG: f64 = 5.0;
/// Net backward rotation of the nut end beyond this (deg) is warned about.
pub const NUT_BACKWARDS_DEG: f64 = 2.0;

fn in_range(v: f64, (lo, hi): (f64, f64)) -> bool {
    v.is_finite() && v >= lo && v <= hi
}

/// Checks a capture rate against [`FPS_RANGE_HZ`]; `origin` names the flag or field.
///
/// # Errors
/// [`Error::Option`] naming `origin` and the range.
pub fn check_fps(fps_hz: f64, origin: &str) -> Result<()> {
    if in_range(fps_hz, FPS_RANGE_HZ) {
        return Ok(());
    }
    Err(Error::Option {
        flag: origin.into(),
        reason: format!(
            "a capture rate of {fps_hz} frames per second is outside the plausible range \
             {} to {:e} Hz; give the camera's capture rate",
            FPS_RANGE_HZ.0, FPS_RANGE_HZ.1
        ),
    })
}

/// Checks the rig as a whole: the capture rate, the bar's sizes, stiffness and rating
/// against the plausible ranges.
///
/// # Errors
/// [`Error::Rig`] naming the field.
pub fn check_rig(rig: &Rig, path: &Path) -> Result<()> {
    let err = |field: &str, reason: String| Error::Rig {
        path: path.to_path_buf(),
        field: field.into(),
        reason,
    };
    if let Some(fps) = rig.capture_fps_hz {
        check_fps(fps, "capture_fps_hz").map_err(|e| err("capture_fps_hz", one_reason(e)))?;
    }
    for (role, mark) in rig.marks() {
        if let Mark::Side(m) = mark
            && m.stripes.is_some_and(|n| n > MAX_SIDE_STRIPES)
        {
            return Err(err(
                &format!("marks.{}.stripes", role.name()),
                format!(
                    "{} stripes is more than a side view can tell apart; give at most \
                     {MAX_SIDE_STRIPES}",
                    m.stripes.unwrap_or(0)
                ),
            ));
        }
    }
    if let Some(bar) = &rig.bar {
        check_bar(bar).map_err(|(field, reason)| err(&field, reason))?;
    }
    Ok(())
}

fn one_reason(e: Error) -> String {
    match e {
        Error::Option { reason, .. } => reason,
        other => other.to_string(),
    }
}

/// True when two marks describe the same place on screen (pivots or axes within 1 px and
/// the same size within 1 px).
fn same_mark(a: &Mark, b: &Mark) -> bool {
    let close = |p: [f64; 2], q: [f64; 2]| (p[0] - q[0]).hypot(p[1] - q[1]) <= 1.0;
    match (a, b) {
        (Mark::Radial(x), Mark::Radial(y)) => {
            close(x.pivot, y.pivot)
                && (x.radius[0] - y.radius[0]).abs() <= 1.0
                && (x.radius[1] - y.radius[1]).abs() <= 1.0
        }
        (Mark::Side(x), Mark::Side(y)) => {
            close(x.axis[0], y.axis[0])
                && close(x.axis[1], y.axis[1])
                && (x.radius_px - y.radius_px).abs() <= 1.0
        }
        _ => false,
    }
}

/// The bar's sizes, stiffness and rating against the plausible ranges; the error is
/// (field, reason).
fn check_bar(bar: &BarSpec) -> std::result::Result<(), (String, String)> {
    for (i, s) in bar.sections.iter().enumerate() {
        for (name, v) in s.dimensions() {
            let range = if name == "length_mm" {
                SECTION_LENGTH_RANGE_MM
            } else {
                SECTION_SIZE_RANGE_MM
            };
            if !in_range(v, range) {
                return Err((
                    format!("bar.sections[{i}].{name}"),
                    format!(
                        "{v} mm is outside the plausible range {} to {} mm for a torsion bar; \
                         give the size in millimetres",
                        range.0, range.1
                    ),
                ));
            }
        }
    }
    if let Some(r) = bar.rating_nm
        && !in_range(r, RATING_RANGE_NM)
    {
        return Err((
            "bar.rating_nm".into(),
            format!(
                "{r} N·m is outside the plausible range {} to {:e} N·m; give the rated torque in N·m",
                RATING_RANGE_NM.0, RATING_RANGE_NM.1
            ),
        ));
    }
    let k = bar
        .calibrated_stiffness_nm_per_deg
        .unwrap_or_else(|| bar.computed_stiffness().nm_per_deg());
    if !in_range(k, STIFFNESS_RANGE_NM_PER_DEG) {
        let field = if bar.calibrated_stiffness_nm_per_deg.is_some() {
            "bar.calibrated_stiffness_nm_per_deg"
        } else {
            "bar.sections"
        };
        return Err((
            field.into(),
            format!(
                "give a stiffness of {k} N·m/deg, outside the plausible range {:e} to {:e} \
                 N·m/deg; check the sections' sizes and units and the calibration",
                STIFFNESS_RANGE_NM_PER_DEG.0, STIFFNESS_RANGE_NM_PER_DEG.1
            ),
        ));
    }
    Ok(())
}

/// Checks one analysis's results against how a tightening run behaves, and withholds what
/// cannot be right. Returns the warnings to add.
///
/// - The drive and nut marks are the same mark: no torque, with a warning (a rig may give
///   one mark twice to read angles only).
/// - The drive end turned backwards overall: the rig's `tighten` is the wrong way round, so
///   every angle and torque has the wrong sign: an error ([`Error::Rig`]).
/// - The nut end turned backwards overall: a warning (a loosening nut or swapped marks).
/// - A blow's peak twist is negative (the nut ahead of the drive end through the whole blow,
///   as with swapped marks): its torque is withheld (null) with a warning.
/// - A peak torque above [`MAX_TORQUE_TO_RATING`] × the rating, or not finite: withheld with
///   a warning.
///
/// # Errors
/// [`Error::Rig`] for a drive end that turned backwards.
pub fn check_results(
    rig: &Rig,
    rig_path: &Path,
    blows: &mut [BlowMetrics],
    summary: &mut Summary,
) -> Result<Vec<Warning>> {
    let mut warnings = Vec::new();
    if let Some(d) = summary.drive_total.map(|a| a.deg())
        && d < -DRIVE_BACKWARDS_DEG
    {
        return Err(Error::Rig {
            path: rig_path.to_path_buf(),
            field: "marks.drive.tighten".into(),
            reason: format!(
                "the drive end turned {:.1}° backwards over the clip; an impact wrench that \
                 tightens turns it forward, so \"tighten\" is the wrong way round for this clip: \
                 correct it (and the nut's) and run again",
                -d
            ),
        });
    }
    if let Some(n) = summary.nut_total.map(|a| a.deg())
        && n < -NUT_BACKWARDS_DEG
    {
        warnings.push(Warning::Note(format!(
            "the nut end turned {:.1}° backwards over the clip while the drive end turned \
             forward: check the nut mark's \"tighten\", and that the drive and nut marks are \
             not swapped",
            -n
        )));
    }
    let rating = rig.bar.as_ref().and_then(|b| b.rating_nm);
    if same_mark(&rig.marks.drive, &rig.marks.nut) {
        // One mark read twice: the twist is zero by construction, not by measurement.
        warnings.push(Warning::Note(
            "marks.drive and marks.nut are the same mark (same place and size), so the twist \
             is zero by construction and no torque is reported; give the nut end its own mark \
             (run find-marks again or correct the nut's pivot)"
                .into(),
        ));
        for b in blows.iter_mut() {
            b.peak_torque = None;
            b.breakaway_torque = None;
        }
        summary.peak_torque = None;
        summary.peak_to_rating = None;
        return Ok(warnings);
    }
    let mut negative = Vec::new();
    let mut beyond = Vec::new();
    for b in blows.iter_mut() {
        let Some(t) = b.peak_torque.map(|t| t.nm()) else {
            continue;
        };
        let twist_negative = b.peak_twist.is_some_and(|a| a.deg() < 0.0);
        if twist_negative || t < 0.0 {
            negative.push(b.index);
        } else if !t.is_finite() || rating.is_some_and(|r| t > MAX_TORQUE_TO_RATING * r) {
            beyond.push(b.index);
        } else {
            continue;
        }
        b.peak_torque = None;
        b.breakaway_torque = None;
    }
    if !negative.is_empty() {
        warnings.push(Warning::Note(format!(
            "blow(s) {} peaked with the nut end ahead of the drive end (negative twist): their \
             torque is not reported; check that the drive and nut marks are not swapped",
            list(&negative)
        )));
    }
    if !beyond.is_empty() {
        warnings.push(Warning::Note(format!(
            "blow(s) {} gave a torque beyond {MAX_TORQUE_TO_RATING} times the bar's rating ({} \
             N·m), which the bar could not carry without yielding: their torque is not \
             reported; check the rig's \"tighten\" directions, the marks and the bar",
            list(&beyond),
            rating.unwrap_or(f64::NAN)
        )));
    }
    if !(negative.is_empty() && beyond.is_empty()) {
        summary.peak_torque = blows
            .iter()
            .filter_map(|b| b.peak_torque)
            .max_by(|a, b| a.nm().total_cmp(&b.nm()));
        summary.peak_to_rating = summary.peak_torque.zip(rating).map(|(t, r)| t.nm() / r);
    }
    Ok(warnings)
}

fn list(idx: &[usize]) -> String {
    let shown: Vec<String> = idx.iter().take(8).map(|i| i.to_string()).collect();
    if idx.len() > 8 {
        format!("{} and {} more", shown.join(", "), idx.len() - 8)
    } else {
        shown.join(", ")
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn rig() -> Rig {
        crate::synth::Scenario::preset("fast-tool").unwrap().rig()
    }

    #[test]
    fn fps_outside_the_range_is_refused_with_the_range() {
        assert!(check_fps(2000.0, "--fps").is_ok());
        for bad in [1e-308, 0.5, 2e7, f64::NAN, f64::INFINITY] {
            let e = check_fps(bad, "--fps").unwrap_err().to_string();
            assert!(e.contains("--fps") && e.contains("plausible"), "{e}");
        }
    }

    #[test]
    fn the_same_mark_twice_is_seen_and_absurd_bars_are_refused() {
        let p = Path::new("rig.json");
        let r = rig();
        assert!(check_rig(&r, p).is_ok(), "the preset rig is plausible");
        let mut same = r.clone();
        same.marks.nut = same.marks.drive.clone();
        assert!(same_mark(&same.marks.drive, &same.marks.nut));
        assert!(!same_mark(&r.marks.drive, &r.marks.nut));
        let mut stiff = r.clone();
        if let Some(b) = stiff.bar.as_mut() {
            b.calibrated_stiffness_nm_per_deg = Some(1e308);
        }
        let e = check_rig(&stiff, p).unwrap_err().to_string();
        assert!(e.contains("calibrated_stiffness"), "{e}");
    }
}
