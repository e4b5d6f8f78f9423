//! Sense checks on the bar and on the twist at rest (ranges: *common practice*, below; the
//! shoulder note: docs/mechanics.md, "The shank-to-hex shoulder").
//!
//! In: the rig's bar, the absolute twist series and the blows. Out: warnings.
//!
//! - Bar dimensions outside what an impact torsion extension plausibly has (a typo such as
//!   `d_mm: 0.5` gives a stiffness near zero and a torque of 0 N·m for every blow). The ranges
//!   are *common practice* for hand-tool extensions from ¼" to 1" drive: sections 4–60 mm
//!   across, 3–1,000 mm long, a whole bar 30–1,500 mm, and a stiffness of 0.5–500 N·m/deg.
//! - No steel and no yield strength named: the yield check is not made, and the report says so
//!   (a torsion extension is often worked close to its shank's shear yield).
//! - Twist at rest that does not return to zero: when the clip ends still (neither end moving
//!   beyond its noise over the last quiet samples) and the absolute twist there is more than
//!   0.5° and 5σ away from zero, the bar either took a permanent set or is still held wound.
//!
//! Part of the mechanics stage: it must never import report, `analyze`, `batch`, `find_marks`,
//! `calibrate` or the CLI.

use crate::mechanics::{BarSpec, SectionSpec};
use crate::warning::Warning;

/// Plausible section size across (diameter, across flats, side), mm.
pub const SECTION_ACROSS_MM: (f64, f64) = (4.0, 60.0);
/// Plausible section length, mm.
pub const SECTION_LENGTH_MM: (f64, f64) = (3.0, 1000.0);
/// Plausible whole-bar length, mm.
pub const BAR_LENGTH_MM: (f64, f64) = (30.0, 1500.0);
/// Plausible stiffness, N·m/deg.
pub const STIFFNESS_NM_PER_DEG: (f64, f64) = (0.5, 500.0);
/// Smallest twist at rest reported as a set, degrees.
pub const SET_MIN_DEG: f64 = 0.5;

/// Warnings about a bar that does not look like an impact torsion extension, and about a
/// yield check that cannot be made.
pub fn bar_sense_warnings(bar: &BarSpec) -> Vec<Warning> {
    let mut out = Vec::new();
    let out_of = |v: f64, (lo, hi): (f64, f64)| !(lo..=hi).contains(&v);
    let mut total_mm = 0.0;
    for (i, s) in bar.sections.iter().enumerate() {
        let (len, across, what) = match s {
            SectionSpec::Round {
                length_mm, d_mm, ..
            } => (*length_mm, *d_mm, "d_mm"),
            SectionSpec::Tube {
                length_mm, d_mm, ..
            } => (*length_mm, *d_mm, "d_mm"),
            SectionSpec::Hex {
                length_mm,
                across_flats_mm,
                ..
            } => (*length_mm, *across_flats_mm, "across_flats_mm"),
            SectionSpec::Square {
                length_mm, side_mm, ..
            } => (*length_mm, *side_mm, "side_mm"),
        };
        total_mm += len;
        if out_of(across, SECTION_ACROSS_MM) {
            out.push(Warning::Note(format!(
                "bar.sections[{i}].{what} = {across} mm is outside {}–{} mm, unusual for an impact extension: check the rig (the stiffness and every torque rest on it)",
                SECTION_ACROSS_MM.0, SECTION_ACROSS_MM.1
            )));
        }
        if out_of(len, SECTION_LENGTH_MM) {
            out.push(Warning::Note(format!(
                "bar.sections[{i}].length_mm = {len} mm is outside {}–{} mm: check the rig",
                SECTION_LENGTH_MM.0, SECTION_LENGTH_MM.1
            )));
        }
    }
    if !bar.sections.is_empty() && out_of(total_mm, BAR_LENGTH_MM) {
        out.push(Warning::Note(format!(
            "the bar's sections add up to {total_mm} mm, outside {}–{} mm for an impact extension: check the rig",
            BAR_LENGTH_MM.0, BAR_LENGTH_MM.1
        )));
    }
    let k = bar.stiffness().nm_per_deg();
    if !bar.sections.is_empty() && (!k.is_finite() || out_of(k, STIFFNESS_NM_PER_DEG)) {
        out.push(Warning::Note(format!(
            "bar stiffness {k:.3} N·m/deg is outside {}–{} N·m/deg, unusual for an impact extension: check the sections and the steel",
            STIFFNESS_NM_PER_DEG.0, STIFFNESS_NM_PER_DEG.1
        )));
    }
    let any_yield = (0..bar.sections.len()).any(|i| bar.material(i).yield_strength_pa.is_some());
    if !bar.sections.is_empty() && !any_yield {
        out.push(Warning::Note(
            "no steel or yield strength named in the rig's bar: the yield check was not made (name \"steel\" or give \"yield_strength_mpa\"; see docs/mechanics.md on the shank-to-hex shoulder)".into(),
        ));
    }
    out
}

/// A warning when the clip ends with both ends still and the absolute twist there is not back
/// at zero. `twist_deg` is the absolute twist per sample; `drive`/`nut` the relative angles;
/// `from` the first sample after the last blow's motion may have settled (the last blow's
/// onset); `sigma_deg` one sample's twist noise.
pub(crate) fn set_at_rest_warning(
    twist_deg: &[Option<f64>],
    from: usize,
    sigma_deg: f64,
) -> Option<Warning> {
    let n = twist_deg.len();
    // The last quarter of the span after the last onset, at least 8 samples.
    let span = n.checked_sub(from)?;
    let q = (span / 4).max(8);
    if span < 2 * q {
        return None;
    }
    let tail: Vec<f64> = twist_deg[n - q..].iter().flatten().copied().collect();
    if tail.len() < q * 3 / 4 {
        return None;
    }
    let m = tail.len() as f64;
    let mean = tail.iter().sum::<f64>() / m;
    // Still: no trend beyond 4 standard errors over the tail, no sample beyond 4σ.
    let xm = (m - 1.0) / 2.0;
    let sxx: f64 = (0..tail.len()).map(|i| (i as f64 - xm).powi(2)).sum();
    let slope = tail
        .iter()
        .enumerate()
        .map(|(i, y)| (i as f64 - xm) * (y - mean))
        .sum::<f64>()
        / sxx;
    let s = sigma_deg.max(1e-3);
    let still = (slope * (m - 1.0)).abs() <= 4.0 * s * (m - 1.0) / sxx.sqrt()
        && tail.iter().all(|t| (t - mean).abs() <= 4.0 * s);
    (still && mean.abs() > SET_MIN_DEG.max(5.0 * s)).then(|| {
        Warning::Note(format!(
            "the clip ends with both ends still and the bar {mean:+.2}° from its twist zero: if the tool had let go of the drive end by then, the bar has taken a permanent set of about that angle (stop using it and check it against a rest still); if the tool still held it, this is wind-up it holds"
        ))
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_half_millimetre_shank_and_an_unnamed_steel_are_flagged() {
        let bar = BarSpec::new(vec![SectionSpec::round(150.0, 0.5)]);
        let w: Vec<String> = bar_sense_warnings(&bar)
            .iter()
            .map(ToString::to_string)
            .collect();
        assert!(w.iter().any(|s| s.contains("d_mm = 0.5")), "{w:?}");
        assert!(w.iter().any(|s| s.contains("stiffness")), "{w:?}");
        assert!(
            w.iter().any(|s| s.contains("yield check was not made")),
            "{w:?}"
        );
        // The bench bar with a named yield strength passes.
        let mut ok = BarSpec::new(vec![
            SectionSpec::hex(25.0, 19.0),
            SectionSpec::round(220.0, 12.0),
            SectionSpec::hex(30.0, 19.0),
        ]);
        ok.yield_strength_mpa = Some(1200.0);
        assert!(
            bar_sense_warnings(&ok).is_empty(),
            "{:?}",
            bar_sense_warnings(&ok)
        );
    }

    #[test]
    fn a_still_twisted_end_is_a_set_and_a_moving_one_is_not() {
        let mut tw: Vec<Option<f64>> = (0..100).map(|i| Some(5.0 - 0.01 * i as f64)).collect();
        tw.extend((0..40).map(|i| Some(1.2 + if i % 2 == 0 { 0.01 } else { -0.01 })));
        let w = set_at_rest_warning(&tw, 0, 0.01).unwrap().to_string();
        assert!(w.contains("+1.20°"), "{w}");
        let moving: Vec<Option<f64>> = (0..140).map(|i| Some(5.0 - 0.03 * i as f64)).collect();
        assert!(set_at_rest_warning(&moving, 0, 0.01).is_none());
        let rest: Vec<Option<f64>> = vec![Some(0.01); 140];
        assert!(set_at_rest_warning(&rest, 0, 0.01).is_none());
    }
}
