//! Stage 5, report: how numbers are shown to a person (terminal table, plots, HTML), as
//! opposed to how they are stored (JSON and CSV keep SI keys, `_nm`, plus `_lbf_ft` columns).
//!
//! In: SI values. Out: text in the unit the user chose with `--units`. 1 lbf·ft =
//! 1.355 818 N·m (NIST Special Publication 811, *Guide for the Use of the International System
//! of Units (SI)*, 2008 edition, Appendix B.9; the exact factor is the product of the foot,
//! 0.3048 m, and the pound-force, 4.448 221 615 260 5 N, see [`crate::units`]).
//!
//! Part of the report stage: it reads results through `crate::Analysis` and must never import
//! `batch`, `find_marks`, `calibrate` or the CLI.

use crate::units::Torque;

/// The unit torques are shown in.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum TorqueUnit {
    /// Newton metres (the default, SI).
    #[default]
    Nm,
    /// Pound-force feet.
    LbfFt,
}

impl TorqueUnit {
    /// The unit as printed: `N·m` or `lbf·ft`.
    pub fn label(self) -> &'static str {
        match self {
            TorqueUnit::Nm => "N·m",
            TorqueUnit::LbfFt => "lbf·ft",
        }
    }

    /// The value of `nm` newton metres in this unit.
    pub fn of_nm(self, nm: f64) -> f64 {
        match self {
            TorqueUnit::Nm => nm,
            TorqueUnit::LbfFt => Torque::from_nm(nm).lbf_ft(),
        }
    }

    /// Parses the `--units` value: `nm` or `lbf-ft` (also `lbf_ft`, `lbfft`, any case).
    ///
    /// # Errors
    /// A one-line message naming the flag and the accepted values.
    pub fn parse(text: &str) -> Result<Self, String> {
        match text.trim().to_ascii_lowercase().as_str() {
            "nm" | "n-m" | "n·m" => Ok(TorqueUnit::Nm),
            "lbf-ft" | "lbf_ft" | "lbfft" | "lbf·ft" | "ft-lbf" => Ok(TorqueUnit::LbfFt),
            _ => Err(format!(
                "--units: '{text}' is not a torque unit; use nm (newton metres) or lbf-ft (pound-force feet)"
            )),
        }
    }
}

/// What a person reads: which torque unit the table, plots and HTML use.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub struct ReportOptions {
    /// Torque unit for the table, plots and HTML (files keep SI keys).
    pub units: TorqueUnit,
}

/// `v` with `decimals` places, or `–` when unknown or not finite (for tables people read).
pub(crate) fn fixed(v: Option<f64>, decimals: usize) -> String {
    match v {
        Some(x) if x.is_finite() => {
            let s = format!("{x:.decimals$}");
            // "-0.00" reads as a sign error; show zero without one.
            if s.trim_start_matches('-')
                .chars()
                .all(|c| c == '0' || c == '.')
            {
                s.trim_start_matches('-').to_string()
            } else {
                s
            }
        }
        _ => "–".to_string(),
    }
}

/// A tick label: the value rounded to 6 significant digits, without trailing zeros or a bare
/// decimal point (`50`, not `50.0`; `0.3`, not `0.30000000000000004`).
pub(crate) fn tick(v: f64) -> String {
    tick_sig(v, 6)
}

/// As [`tick`], rounded to `sig` significant digits (a derived label such as a torque at a
/// twist grid line: `24.8`, not `24.7741`).
pub(crate) fn tick_sig(v: f64, sig: i32) -> String {
    if !v.is_finite() {
        return String::new();
    }
    if v.abs() < 1e-12 {
        return "0".into();
    }
    let mag = v.abs().log10().floor() as i32;
    let decimals = (sig - 1 - mag).clamp(0, 12) as usize;
    let s = format!("{v:.decimals$}");
    let s = if s.contains('.') {
        s.trim_end_matches('0').trim_end_matches('.').to_string()
    } else {
        s
    };
    if s == "-0" { "0".into() } else { s }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn lbf_ft_follows_nist_sp_811() {
        // NIST SP 811 (2008), Appendix B.9: 1 lbf·ft = 1.355 818 N·m.
        let v = TorqueUnit::LbfFt.of_nm(135.5818);
        assert!((v - 100.0).abs() < 1e-4, "{v}");
        assert_eq!(TorqueUnit::Nm.of_nm(42.0), 42.0);
        assert_eq!(TorqueUnit::LbfFt.label(), "lbf·ft");
    }

    #[test]
    fn units_parse_and_bad_values_name_the_flag() {
        assert_eq!(TorqueUnit::parse("nm"), Ok(TorqueUnit::Nm));
        assert_eq!(TorqueUnit::parse("LBF-FT"), Ok(TorqueUnit::LbfFt));
        let e = TorqueUnit::parse("kgm").unwrap_err();
        assert!(e.contains("--units") && e.contains("lbf-ft"), "{e}");
    }

    #[test]
    fn ticks_have_no_spurious_decimals() {
        assert_eq!(tick(50.0), "50");
        assert_eq!(tick(0.1 + 0.2), "0.3");
        assert_eq!(tick(-2.5), "-2.5");
        assert_eq!(tick(1e-13), "0");
        assert_eq!(tick(1250.0), "1250");
        assert_eq!(tick(0.0), "0");
        assert_eq!(tick_sig(24.774_1, 3), "24.8");
        assert_eq!(tick_sig(123.6, 3), "124");
    }

    #[test]
    fn fixed_shows_unknown_as_a_dash_and_no_negative_zero() {
        assert_eq!(fixed(None, 2), "–");
        assert_eq!(fixed(Some(f64::NAN), 2), "–");
        assert_eq!(fixed(Some(-0.001), 2), "0.00");
        assert_eq!(fixed(Some(12.345), 1), "12.3");
    }
}
