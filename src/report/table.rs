//! The per-blow table for the terminal: one row per blow with torque in N·m and lbf·ft, one
//! summary line, and the caution that a torque from video is a model.
//!
//! Part of the report stage: it reads results through `crate::Analysis` and must never import
//! `batch`, `find_marks`, `calibrate` or the CLI.

use std::fmt::Write;

use super::CAUTION;
use super::display::{ReportOptions, TorqueUnit};
use crate::analyze::Analysis;
use crate::units::{Angle, Torque};

/// The per-blow table, summary line and cautions, as text for a terminal (torques in N·m,
/// then lbf·ft).
pub fn blow_table(a: &Analysis) -> String {
    blow_table_with(a, &ReportOptions::default())
}

/// A torque in the first and second unit shown (`--units` first).
fn both(unit: TorqueUnit, t: Torque) -> (f64, f64) {
    match unit {
        TorqueUnit::Nm => (t.nm(), t.lbf_ft()),
        TorqueUnit::LbfFt => (t.lbf_ft(), t.nm()),
    }
}

/// As [`blow_table`], with the torque unit chosen by `opts.units` first in the table and the
/// summary line, and the other beside it.
pub fn blow_table_with(a: &Analysis, opts: &ReportOptions) -> String {
    let unit = opts.units;
    let other = match unit {
        TorqueUnit::Nm => TorqueUnit::LbfFt,
        TorqueUnit::LbfFt => TorqueUnit::Nm,
    };
    let mut out = String::new();
    let fmt = |v: Option<f64>, d: usize| match v {
        Some(x) if x.is_finite() => format!("{x:.d$}"),
        _ => "-".to_string(),
    };
    let deg = |v: Option<Angle>, d: usize| fmt(v.map(Angle::deg), d);
    let _ = writeln!(
        out,
        "{:>5} {:>8} {:>9} {:>9} {:>9} {:>9} {:>9} {:>9} {:>8}",
        "blow", "t", "drive", "nut", "peak", "peak", "peak", "residual", "nut lag"
    );
    let _ = writeln!(
        out,
        "{:>5} {:>8} {:>9} {:>9} {:>9} {:>9} {:>9} {:>9} {:>8}",
        "",
        "s",
        "adv °",
        "adv °",
        "twist °",
        unit.label(),
        other.label(),
        "twist °",
        "ms"
    );
    for b in &a.blows {
        let _ = writeln!(
            out,
            "{:>5} {:>8.4} {:>9} {:>9} {:>9} {:>9} {:>9} {:>9} {:>8}",
            b.index,
            b.t_s,
            deg(b.drive_advance, 2),
            deg(b.nut_advance, 2),
            deg(b.peak_twist, 2),
            fmt(b.peak_torque.map(|t| both(unit, t).0), 1),
            fmt(b.peak_torque.map(|t| both(unit, t).1), 1),
            deg(b.residual_twist, 2),
            match (b.nut_lag_subframe_s, b.nut_lag_subframe_sigma_s) {
                // Interpolated within the frame: as many decimals as its 95 % resolution allows.
                (Some(l), Some(u)) => fmt(
                    Some(l * 1e3),
                    lag_decimals((1.96e3 * u).max(250.0 / a.time_base.fps_hz())),
                ),
                _ => fmt(
                    b.nut_lag_s.map(|s| s * 1e3),
                    lag_decimals(1e3 / a.time_base.fps_hz()),
                ),
            },
        );
    }
    if a.blows.is_empty() {
        let _ = writeln!(out, "{:>5} (no blows found)", "-");
    }
    out.push_str(&summary_line(a, unit));
    out.push('\n');
    if let Some(v) = &a.springback {
        let _ = writeln!(out, "Spring-back: {}", v.sentence);
    }
    let _ = writeln!(out, "Caution: {CAUTION}");
    out
}

/// One line: blows and rate, rotations, when the nut stopped, peak torque against the rating,
/// and the stiffness used.
fn summary_line(a: &Analysis, unit: TorqueUnit) -> String {
    let other = match unit {
        TorqueUnit::Nm => TorqueUnit::LbfFt,
        TorqueUnit::LbfFt => TorqueUnit::Nm,
    };
    let (u1, u2) = (unit.label(), other.label());
    let s = &a.summary;
    let mut parts = Vec::new();
    parts.push(match (s.blow_rate_per_min, s.blow_rate_spread_per_min) {
        (Some(r), Some(sd)) => format!(
            "{} blows at {r:.0} blows/min (spread {sd:.0})",
            s.blow_count
        ),
        _ => format!("{} blow(s)", s.blow_count),
    });
    let d = |v: Option<Angle>| v.map_or("-".to_string(), |x| format!("{:.2}°", x.deg()));
    parts.push(format!(
        "drive turned {}, nut {}",
        d(s.drive_total),
        d(s.nut_total)
    ));
    let th = s.nut_stop_threshold.deg();
    parts.push(match s.nut_stopped_after_blow {
        Some(k) => format!("nut stopped advancing after blow {k} (< {th:.2}° per blow)"),
        None if s.nut_advancing_blows == 0 && s.blow_count > 0 => {
            format!("nut never advanced ≥ {th:.2}° in a blow")
        }
        None if s.blow_count > 0 => "nut still advancing on the last blow".to_string(),
        None => String::new(),
    });
    match (s.holding, s.stiffness) {
        (Some(h), Some(_)) => {
            let mut t = format!(
                "holding torque after blow {} {:.1} N·m ({:.1} lbf·ft), 95 % {:.1}–{:.1} N·m",
                h.after_blow,
                h.torque.nm(),
                h.torque.lbf_ft(),
                h.ci95.0.nm(),
                h.ci95.1.nm()
            );
            if let Some(lo) = h.bracket_low {
                let _ = write!(t, ", restart needs over {:.1} N·m", lo.nm());
            }
            if let Some(hi) = h.bracket_high {
                let _ = write!(t, ", restarted at {:.1} N·m", hi.nm());
            }
            parts.push(t);
        }
        (None, Some(_)) if s.nut_advancing_blows > 0 => parts.push(
            "holding torque not estimated (fewer than two measured slips of the nut)".to_string(),
        ),
        _ => {}
    }
    parts.push(format!(
        "twist zero: {} ({:+.2}° already in the bar at the first frame)",
        s.twist_zero.source.as_str().replace('_', " "),
        s.twist_zero.offset.deg()
    ));
    match (s.peak_torque, s.stiffness) {
        (Some(p), Some(k)) => {
            let (p1, p2) = both(unit, p);
            let mut t = format!("bar's dynamic peak {p1:.1} {u1} ({p2:.1} {u2})");
            if let (Some(r), Some(ratio)) = (s.rating, s.peak_to_rating) {
                let _ = write!(
                    t,
                    " = {:.0} % of the {:.0} {u1} rating",
                    100.0 * ratio,
                    both(unit, r).0
                );
            }
            parts.push(t);
            if let Some(q) = s.peak_torque_nut_advancing {
                let (q1, q2) = both(unit, q);
                parts.push(format!(
                    "highest while the nut still turned {q1:.1} {u1} ({q2:.1} {u2})"
                ));
            }
            parts.push(format!(
                "stiffness {:.2} {u1}/deg ({})",
                unit.of_nm(k.nm_per_deg()),
                s.stiffness_source.map_or("computed", |x| x.as_str())
            ));
        }
        (_, None) => parts.push("torque not computed: the rig has no bar".to_string()),
        (None, Some(_)) => {}
    }
    parts.retain(|p| !p.is_empty());
    format!("Summary: {}.", parts.join("; "))
}

/// Decimals for a time in ms whose 95 % resolution is `res_ms`: the last printed digit is the
/// first one the resolution leaves uncertain (0.5 ms → 1 decimal, 0.05 ms → 2), at most 3.
/// The nut lag's resolution is its noise interval but at least a quarter frame, about the
/// errors measured on the rendered fixtures (docs/mechanics.md, "Sub-frame timing").
fn lag_decimals(res_ms: f64) -> usize {
    if !(res_ms.is_finite() && res_ms > 0.0) {
        return 2;
    }
    (-res_ms.log10()).ceil().clamp(0.0, 3.0) as usize
}

#[cfg(test)]
mod tests {
    use super::super::tests::analysis;
    use super::*;

    #[test]
    fn table_has_a_row_per_blow_both_units_summary_and_caution() {
        let a = analysis(true);
        let t = blow_table(&a);
        let lines: Vec<&str> = t.lines().collect();
        assert_eq!(lines.len(), 2 + a.blows.len() + 2, "{t}");
        assert!(lines[1].contains("N·m") && lines[1].contains("lbf·ft"));
        // Row 1 shows blow 1's peak torque in both units (1 lbf·ft = 1.355818 N·m, NIST
        // SP 811 App. B).
        let q = a.blows[0].peak_torque.unwrap();
        assert!(lines[2].contains(&format!("{:.1}", q.nm())));
        assert!(lines[2].contains(&format!("{:.1}", q.nm() / 1.355_818)));
        let summary = lines[lines.len() - 2];
        assert!(summary.starts_with("Summary: 10 blows at"), "{summary}");
        assert!(summary.contains("rating") && summary.contains("computed"));
        assert!(lines.last().unwrap().contains("calibrated torque wrench"));
        assert!(lines.last().unwrap().contains("vehicle maker"));
    }

    #[test]
    fn lbf_ft_comes_first_when_chosen() {
        let a = analysis(true);
        let opts = ReportOptions {
            units: TorqueUnit::LbfFt,
        };
        let t = blow_table_with(&a, &opts);
        let lines: Vec<&str> = t.lines().collect();
        assert!(
            lines[1].find("lbf·ft") < lines[1].find("N·m"),
            "{}",
            lines[1]
        );
        // 1 lbf·ft = 1.355818 N·m (NIST SP 811, 2008, Appendix B.9).
        let q = a.blows[0].peak_torque.unwrap();
        assert!(lines[2].contains(&format!("{:.1}", q.nm() / 1.355_818)));
        let summary = lines[lines.len() - 2];
        assert!(
            summary.contains("lbf·ft/deg") && summary.contains("lbf·ft rating"),
            "{summary}"
        );
    }

    #[test]
    fn without_bar_or_blows_the_table_says_so() {
        let mut a = analysis(false);
        let t = blow_table(&a);
        assert!(t.contains("torque not computed"));
        assert!(t.contains(" - "), "null torque shows as '-'");
        a.blows.clear();
        a.summary.blow_count = 0;
        let t = blow_table(&a);
        assert!(t.contains("no blows found") && t.contains("Caution:"));
    }
}
