//! The bar stiffness's own uncertainty, for the intervals on every torque.
//!
//! In: the rig's bar. Out: the relative standard uncertainty of the stiffness used for torque
//! and a sentence saying what it rests on.
//!
//! - Calibrated stiffness: the calibration fit's standard error (`bar.calibration`), or,
//!   when the rig does not carry it, [`CALIBRATION_REL_SIGMA_DEFAULT`] (stated as assumed).
//! - Computed stiffness: 1/k = Σ Lᵢ/(Gᵢ·Jᵢ), so with section weights wᵢ = (Lᵢ/GᵢJᵢ)·k (they sum
//!   to 1) the first-order propagation (GUM, JCGM 100:2008, §5.1.2, uncorrelated inputs) is
//!   (σ_k/k)² = (σ_G/G)² + Σ (wᵢ·σ_Jᵢ/Jᵢ)², the shear modulus being one steel's for the whole
//!   bar (fully correlated across sections). J ∝ (dimension)⁴ for a round, hex or square
//!   section (Roark's *Formulas for Stress and Strain*, Table 10.1), so σ_J/J = 4·σ_d/d; a
//!   tube's J ∝ d⁴ − b⁴ takes both diameters' shares.
//!
//! Part of the mechanics stage: it must never import report, `analyze`, `batch`, `find_marks`,
//! `calibrate` or the CLI.

use crate::mechanics::{BarSpec, SectionSpec};

/// Relative standard uncertainty of a steel's shear modulus when only the steel family is
/// known: handbook values for carbon and alloy steels span about 77–81 GPa (*from memory*;
/// e.g. the tables of Shigley's *Mechanical Engineering Design*, Table A-5, give 79.3 GPa for
/// carbon steel), a ±2.5 % range, read as a uniform spread: 2.5 %/√3.
pub const SHEAR_MODULUS_REL_SIGMA: f64 = 0.025 / 1.732_050_807_568_877_2;

/// Standard uncertainty of a measured bar dimension, mm: a caliper reading of a turned and
/// hardened part (*common practice*: ±0.05 mm).
pub const DIMENSION_SIGMA_MM: f64 = 0.05;

/// Relative standard uncertainty assumed for a calibrated stiffness whose rig does not carry
/// the fit's standard error (*common practice*: a click-type wrench's ±4 % read as a uniform
/// spread, 4 %/√3 ≈ 2.3 %).
pub const CALIBRATION_REL_SIGMA_DEFAULT: f64 = 0.04 / 1.732_050_807_568_877_2;

/// The stiffness's relative standard uncertainty and its basis.
pub fn stiffness_rel_sigma(bar: &BarSpec) -> (f64, String) {
    if let Some(k) = bar.calibrated_stiffness_nm_per_deg {
        return match bar.calibration.as_ref().and_then(|c| c.stderr_nm_per_deg) {
            Some(se) if k > 0.0 && se.is_finite() => (
                se / k,
                format!("calibration fit's standard error, {:.1} %", 100.0 * se / k),
            ),
            _ => (
                CALIBRATION_REL_SIGMA_DEFAULT,
                format!(
                    "calibrated, fit's error not in the rig: {:.1} % assumed",
                    100.0 * CALIBRATION_REL_SIGMA_DEFAULT
                ),
            ),
        };
    }
    let c = bar.section_compliances();
    let total: f64 = c.iter().sum();
    if !(total > 0.0 && total.is_finite()) {
        return (0.0, "no stiffness".into());
    }
    let mut var = SHEAR_MODULUS_REL_SIGMA.powi(2);
    for (s, ci) in bar.sections.iter().zip(&c) {
        let w = ci / total;
        let rel_j = match s {
            SectionSpec::Round { d_mm, .. } => 4.0 * DIMENSION_SIGMA_MM / d_mm,
            SectionSpec::Hex {
                across_flats_mm, ..
            } => 4.0 * DIMENSION_SIGMA_MM / across_flats_mm,
            SectionSpec::Square { side_mm, .. } => 4.0 * DIMENSION_SIGMA_MM / side_mm,
            SectionSpec::Tube { d_mm, bore_mm, .. } => {
                let den = d_mm.powi(4) - bore_mm.powi(4);
                4.0 * DIMENSION_SIGMA_MM * d_mm.powi(3).hypot(bore_mm.powi(3)) / den
            }
        };
        if rel_j.is_finite() {
            var += (w * rel_j).powi(2);
        }
    }
    let rel = var.sqrt();
    (
        rel,
        format!(
            "computed: shear modulus ±{:.1} % and dimensions ±{DIMENSION_SIGMA_MM} mm (1σ) give {:.1} %",
            100.0 * SHEAR_MODULUS_REL_SIGMA,
            100.0 * rel
        ),
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_round_bar_follows_the_fourth_power() {
        // One 12 mm round: σ_J/J = 4 × 0.05/12 = 1.67 % (the worked figure); with
        // G's 1.44 %, √(1.67² + 1.44²) = 2.20 %.
        let bar = BarSpec::new(vec![SectionSpec::round(200.0, 12.0)]);
        let (rel, why) = stiffness_rel_sigma(&bar);
        let expect = (4.0 * 0.05 / 12.0f64).hypot(SHEAR_MODULUS_REL_SIGMA);
        assert!((rel - expect).abs() < 1e-12, "{rel} {why}");
        assert!((rel - 0.0220).abs() < 2e-4);
    }

    #[test]
    fn a_calibrated_bar_uses_its_fit() {
        let mut bar = BarSpec::new(vec![SectionSpec::round(200.0, 12.0)]);
        bar.calibrated_stiffness_nm_per_deg = Some(10.0);
        assert_eq!(stiffness_rel_sigma(&bar).0, CALIBRATION_REL_SIGMA_DEFAULT);
    }
}
