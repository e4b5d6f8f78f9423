//! The bar block of `twistmark bar --json` and of report.json: [`BarReport`] written with
//! unit-suffixed keys.
//!
//! Part of the report stage: it reads results through `crate::Analysis` and must never import
//! `batch`, `find_marks`, `calibrate` or the CLI.

use serde::Serialize;

use crate::mechanics::{BarReport, InertiaSource, StiffnessSource, TORQUE_CAUTION};
use crate::units::Torque;

impl BarReport {
    /// The serialisable form, with unit-suffixed keys.
    pub fn to_json(&self) -> BarJson {
        let rating = self.rating;
        let peak = rating.map(|r| self.max_shear_stress(r));
        let ratio = rating.and_then(|r| self.max_stress_ratio(r));
        BarJson {
            stiffness_nm_per_rad: self.stiffness.nm_per_rad(),
            stiffness_nm_per_deg: self.stiffness.nm_per_deg(),
            stiffness_lbf_ft_per_deg: Torque::from_nm(self.stiffness.nm_per_deg()).lbf_ft(),
            stiffness_source: self.source,
            computed_stiffness_nm_per_deg: self.computed.nm_per_deg(),
            calibration_stderr_nm_per_deg: self.calibration_stderr.map(|s| s.nm_per_deg()),
            calibrated_vs_computed_pct: (self.source == StiffnessSource::Calibrated)
                .then(|| 100.0 * (self.stiffness.nm_per_rad() / self.computed.nm_per_rad() - 1.0)),
            rating_nm: rating.map(|r| r.nm()),
            rating_lbf_ft: rating.map(|r| r.lbf_ft()),
            twist_at_rating_deg: rating.map(|r| self.twist_at(r).deg()),
            shear_stress_at_rating_mpa: peak.map(|p| p.stress_pa * 1e-6),
            shear_stress_at_rating_section: peak.map(|p| self.sections[p.section].label()),
            yield_criterion: self.criterion.name(),
            stress_warn_fraction: self.warn_fraction,
            stress_ratio_at_rating: ratio.map(|r| r.1),
            stress_ratio_at_rating_section: ratio.map(|r| self.sections[r.0].label()),
            drive_inertia_kg_m2: self.inertia_kg_m2,
            drive_inertia_source: self.inertia_source,
            natural_frequency_hz: self.natural_frequency_hz(),
            drive_back_damping_nms_per_rad: self.back_damping_nms_per_rad,
            damping_ratio: self.damping_ratio(),
            springback_ms: self.springback_s().map(|s| s * 1e3),
            sections: self
                .sections
                .iter()
                .map(|s| SectionJson {
                    index: s.index,
                    shape: s.shape,
                    length_mm: s.length_m * 1e3,
                    steel: s.steel,
                    shear_modulus_gpa: s.shear_modulus_pa * 1e-9,
                    shear_modulus_from: s.shear_modulus_from.clone(),
                    torsion_constant_mm4: s.torsion_constant_m4 * 1e12,
                    stiffness_nm_per_rad: s.stiffness.nm_per_rad(),
                    compliance_share: s.compliance_share,
                    shear_stress_per_nm_mpa: s.shear_stress_per_nm * 1e-6,
                    shear_stress_at_rating_mpa: rating
                        .map(|r| s.shear_stress_per_nm * r.nm() * 1e-6),
                    stress_location: s.stress_location,
                    yield_strength_mpa: s.yield_strength_pa.map(|v| v * 1e-6),
                    shear_yield_mpa: s.shear_yield_pa.map(|v| v * 1e-6),
                    stress_ratio_at_rating: match (rating, s.shear_yield_pa) {
                        (Some(r), Some(ty)) => Some(s.shear_stress_per_nm * r.nm() / ty),
                        _ => None,
                    },
                })
                .collect(),
            warnings: self.warnings().iter().map(ToString::to_string).collect(),
            caution: TORQUE_CAUTION,
        }
    }
}

/// `twistmark bar --json` and the bar block of a report: every number with its unit in the
/// key. `null` where the rig lacks what a value needs (rating, inertia, yield).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct BarJson {
    /// Stiffness used for torque, N·m/rad.
    pub stiffness_nm_per_rad: f64,
    /// Stiffness used for torque, N·m/deg.
    pub stiffness_nm_per_deg: f64,
    /// Stiffness used for torque, lbf·ft/deg.
    pub stiffness_lbf_ft_per_deg: f64,
    /// `"calibrated"` or `"computed"`.
    pub stiffness_source: StiffnessSource,
    /// Stiffness computed from the sections, N·m/deg (shown even when calibrated).
    pub computed_stiffness_nm_per_deg: f64,
    /// Standard uncertainty of the calibrated stiffness, N·m/deg.
    pub calibration_stderr_nm_per_deg: Option<f64>,
    /// How far the calibrated stiffness is from the computed one, %.
    pub calibrated_vs_computed_pct: Option<f64>,
    /// Rated torque, N·m.
    pub rating_nm: Option<f64>,
    /// Rated torque, lbf·ft.
    pub rating_lbf_ft: Option<f64>,
    /// Twist at the rating, deg.
    pub twist_at_rating_deg: Option<f64>,
    /// Largest maximum shear stress over the sections at the rating, MPa.
    pub shear_stress_at_rating_mpa: Option<f64>,
    /// The section carrying it.
    pub shear_stress_at_rating_section: Option<String>,
    /// `"von_mises"` or `"tresca"`.
    pub yield_criterion: &'static str,
    /// Fraction of shear yield that raises a warning.
    pub stress_warn_fraction: f64,
    /// Highest stress over shear yield at the rating (sections with known yield).
    pub stress_ratio_at_rating: Option<f64>,
    /// The section with that ratio.
    pub stress_ratio_at_rating_section: Option<String>,
    /// Drive-end moment of inertia, kg·m².
    pub drive_inertia_kg_m2: Option<f64>,
    /// `"given"` or `"parts"`.
    pub drive_inertia_source: Option<InertiaSource>,
    /// Natural frequency of the drive end on the bar, Hz.
    pub natural_frequency_hz: Option<f64>,
    /// Viscous resistance to the drive end turning back, N·m·s/rad.
    pub drive_back_damping_nms_per_rad: Option<f64>,
    /// Damping ratio of the unwinding.
    pub damping_ratio: Option<f64>,
    /// Spring-back time (blow onset to a quarter of the peak twist), ms.
    pub springback_ms: Option<f64>,
    /// Per section, drive end first.
    pub sections: Vec<SectionJson>,
    /// Warnings from the rig alone (stress at rating).
    pub warnings: Vec<String>,
    /// The torque caution.
    pub caution: &'static str,
}

/// One section in [`BarJson`].
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SectionJson {
    /// Index in `bar.sections`.
    pub index: usize,
    /// Shape name.
    pub shape: &'static str,
    /// Length, mm.
    pub length_mm: f64,
    /// Named steel, if any.
    pub steel: Option<&'static str>,
    /// Shear modulus, GPa.
    pub shear_modulus_gpa: f64,
    /// Where G came from.
    pub shear_modulus_from: String,
    /// Torsion constant, mm⁴.
    pub torsion_constant_mm4: f64,
    /// This section's own stiffness, N·m/rad.
    pub stiffness_nm_per_rad: f64,
    /// Share of the computed compliance, 0..1.
    pub compliance_share: f64,
    /// Maximum shear stress per N·m, MPa.
    pub shear_stress_per_nm_mpa: f64,
    /// Maximum shear stress at the rating, MPa.
    pub shear_stress_at_rating_mpa: Option<f64>,
    /// Where the maximum sits.
    pub stress_location: &'static str,
    /// Tensile yield, MPa.
    pub yield_strength_mpa: Option<f64>,
    /// Shear yield, MPa.
    pub shear_yield_mpa: Option<f64>,
    /// Stress over shear yield at the rating.
    pub stress_ratio_at_rating: Option<f64>,
}

#[cfg(test)]
mod tests {
    use crate::mechanics::{BarReport, BarSpec};
    use crate::units::Torque;
    use approx::assert_relative_eq;

    use crate::mechanics::c5;

    #[test]
    fn ratings_in_lbf_ft_match_nist_check_values() {
        // Computed from NIST SP 811's (2008, Appendix B) exact foot and pound-force:
        // 100 / 80 / 450 / 475 / 500 lbf·ft = 135.5818 / 108.4654 / 610.118 / 644.014 /
        // 677.909 N·m.
        for (lbf_ft, nm) in [
            (100.0, 135.5818),
            (80.0, 108.4654),
            (450.0, 610.118),
            (475.0, 644.014),
            (500.0, 677.909),
        ] {
            let bar = BarSpec {
                rating_nm: Some(nm),
                ..c5()
            };
            let j = BarReport::new(&bar).unwrap().to_json();
            assert_relative_eq!(j.rating_lbf_ft.unwrap(), lbf_ft, max_relative = 1e-6);
            assert_relative_eq!(Torque::from_lbf_ft(lbf_ft).nm(), nm, max_relative = 1e-6);
        }
        // Stiffness in lbf·ft/deg: C5's 43.049 N·m/deg × 0.737 562 149 = 31.751 lbf·ft/deg.
        let j = BarReport::new(&c5()).unwrap().to_json();
        assert_relative_eq!(j.stiffness_lbf_ft_per_deg, 31.751, max_relative = 1e-3);
    }

    #[test]
    fn json_has_interface_keys() {
        let bar = BarSpec {
            rating_nm: Some(136.0),
            ..c5()
        };
        let v = serde_json::to_value(BarReport::new(&bar).unwrap().to_json()).unwrap();
        for key in [
            "stiffness_nm_per_rad",
            "stiffness_nm_per_deg",
            "twist_at_rating_deg",
            "shear_stress_at_rating_mpa",
            "stiffness_source",
        ] {
            assert!(v[key].is_number() || v[key].is_string(), "{key}: {v}");
        }
        // Without a rating the rating-dependent keys are null, not missing.
        let v = serde_json::to_value(BarReport::new(&c5()).unwrap().to_json()).unwrap();
        assert!(v["twist_at_rating_deg"].is_null());
        assert!(v.get("twist_at_rating_deg").is_some());
    }
}
