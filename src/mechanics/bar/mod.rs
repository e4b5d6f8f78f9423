//! The bar as written in the rig file (sections, steel, rating, drive-end inertia,
//! calibration), its validation, and its torsional stiffness from the sections in series.
//!
//! In: the rig's `"bar"` object in mm, GPa, MPa, kg. Out: SI quantities (m, Pa, N·m/rad).
//! Formulas (torsion constant and maximum shear stress per shape) cite their source where
//! they are defined, in [`SectionSpec`]'s methods.
//!
//! Part of the mechanics stage: it must never import report, `analyze`, `batch`, `find_marks`,
//! `calibrate` or the CLI.

mod sections;
mod validate;

use serde::{Deserialize, Serialize};

use crate::mechanics::steel::{self, Steel, YieldCriterion};
use crate::units::Stiffness;

pub use crate::mechanics::steel::DEFAULT_SHEAR_MODULUS_GPA;
pub use sections::SectionSpec;
pub(crate) use sections::segment_compliance;

/// Default fraction of shear yield at which a stress warning is raised. Common practice:
/// 60–80 % is reasonable (engineering judgement) when the grade is uncertain.
pub const DEFAULT_STRESS_WARN_FRACTION: f64 = 0.7;

/// The `"bar"` object of a rig file.
///
/// Every field but `sections` is optional, so the rig format of interface version 1 parses
/// unchanged. Build one in code with [`BarSpec::new`] and struct-update syntax.
#[derive(Debug, Clone, PartialEq, Default, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct BarSpec {
    /// Sections from drive end to nut end; the same torque passes through each.
    pub sections: Vec<SectionSpec>,
    /// Shear modulus for every section without its own, GPa. Beats `steel`; default 79.3.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub shear_modulus_gpa: Option<f64>,
    /// Named steel of the whole bar (see [`crate::mechanics::STEELS`]): gives G and yield.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub steel: Option<String>,
    /// Tensile yield strength of the bar's steel, MPa; beats the bar-level steel's value.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub yield_strength_mpa: Option<f64>,
    /// How shear yield follows from tensile yield (default von Mises).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub yield_criterion: Option<YieldCriterion>,
    /// Fraction of shear yield past which a stress warning is raised (default 0.7).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub stress_warn_fraction: Option<f64>,
    /// The bar's rated torque, N·m.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub rating_nm: Option<f64>,
    /// A measured stiffness that replaces the computed one, N·m/deg.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub calibrated_stiffness_nm_per_deg: Option<f64>,
    /// How the calibrated stiffness was found (written by `twistmark calibrate`).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub calibration: Option<CalibrationSpec>,
    /// Moment of inertia of everything that turns with the drive end, kg·m².
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub drive_inertia_kg_m2: Option<f64>,
    /// Viscous resistance of the tool's mechanism to the drive end turning back while the bar
    /// unwinds, N·m·s/rad (default 0: free unwinding). When large, the bar unwinds with a
    /// time constant of about c/k.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub drive_back_damping_nms_per_rad: Option<f64>,
    /// Parts turning with the drive end (anvil, drive socket), as hollow cylinders; used to
    /// estimate the drive-end inertia when `drive_inertia_kg_m2` is not given.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub drive_parts: Option<Vec<InertiaPart>>,
}

/// A part turning with the drive end, modelled as a hollow cylinder about its own axis:
/// I = ½·m·(rₒ² + rᵢ²) (standard tables, e.g. Beer & Johnston, *Vector Mechanics*,
/// table number from memory). A solid part has no `bore_mm`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct InertiaPart {
    /// What it is (`"anvil"`, `"drive socket"`), for reports only.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub part: Option<String>,
    /// Mass, kg.
    pub mass_kg: f64,
    /// Outside diameter, mm.
    pub outer_d_mm: f64,
    /// Inside diameter, mm (0 or absent for a solid part).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub bore_mm: Option<f64>,
}

impl InertiaPart {
    /// Moment of inertia about the axis, kg·m²: ½·m·(rₒ² + rᵢ²).
    pub fn inertia_kg_m2(&self) -> f64 {
        let ro_m = 0.5e-3 * self.outer_d_mm;
        let ri_m = 0.5e-3 * self.bore_mm.unwrap_or(0.0);
        0.5 * self.mass_kg * (ro_m * ro_m + ri_m * ri_m)
    }
}

/// How a calibrated stiffness was found: the fit's uncertainty and the pairs it used.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct CalibrationSpec {
    /// Number of (torque, twist) pairs.
    pub pairs: usize,
    /// Standard uncertainty of the fitted stiffness, N·m/deg.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub stderr_nm_per_deg: Option<f64>,
    /// Root-mean-square twist residual of the fit, deg.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub rms_residual_deg: Option<f64>,
    /// The stiffness computed from the sections when the calibration was made, N·m/deg.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub computed_stiffness_nm_per_deg: Option<f64>,
    /// The applied torques, N·m.
    #[serde(default)]
    pub torque_nm: Vec<f64>,
    /// The measured twists, deg, in the same order.
    #[serde(default)]
    pub twist_deg: Vec<f64>,
    /// Where the twists came from (`"given"` for typed-in or CSV values).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub twist_source: Option<String>,
    /// The day the checks were made, ISO 8601 (`YYYY-MM-DD`).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub date: Option<String>,
    /// The torque reference used: maker, model, serial number and its own calibration
    /// certificate, as free text.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub reference_wrench: Option<String>,
}

/// The material a section ends up with, and where each value came from.
#[derive(Debug, Clone, PartialEq)]
pub struct Material {
    /// Shear modulus, Pa.
    pub shear_modulus_pa: f64,
    /// Where G came from (`"bar.sections[1].shear_modulus_gpa"`, `"steel 4140-qt425"`, …).
    pub shear_modulus_from: String,
    /// The named steel, if any applies to this section.
    pub steel: Option<&'static Steel>,
    /// Tensile yield strength, Pa, if known.
    pub yield_strength_pa: Option<f64>,
    /// Where Sy came from.
    pub yield_from: Option<String>,
}

impl BarSpec {
    /// A bar of these sections with every other field left at its default.
    pub fn new(sections: Vec<SectionSpec>) -> Self {
        BarSpec {
            sections,
            ..BarSpec::default()
        }
    }

    /// The material of section `index`: G from the section's own `shear_modulus_gpa`, else
    /// its `steel`, else the bar's `shear_modulus_gpa`, else the bar's `steel`, else 79.3 GPa.
    /// Yield from the section's steel when it names one (unknown for `carbon`), else the
    /// bar's `yield_strength_mpa`, else the bar's steel. An unknown steel name (caught by
    /// [`BarSpec::validate`]) is ignored here.
    ///
    /// # Panics
    /// If `index` is not a section index.
    pub fn material(&self, index: usize) -> Material {
        let (sec_steel, sec_g) = self.sections[index].overrides();
        let sec_steel = sec_steel.and_then(steel::steel);
        let bar_steel = self.steel.as_deref().and_then(steel::steel);
        let (g_gpa, g_from) = if let Some(g) = sec_g {
            (g, format!("bar.sections[{index}].shear_modulus_gpa"))
        } else if let Some(s) = sec_steel {
            (s.shear_modulus_gpa, format!("steel {}", s.name))
        } else if let Some(g) = self.shear_modulus_gpa {
            (g, "bar.shear_modulus_gpa".to_string())
        } else if let Some(s) = bar_steel {
            (s.shear_modulus_gpa, format!("steel {}", s.name))
        } else {
            (
                DEFAULT_SHEAR_MODULUS_GPA,
                "default (carbon steel)".to_string(),
            )
        };
        let steel = sec_steel.or(bar_steel);
        let (sy, sy_from) = match (sec_steel, self.yield_strength_mpa, bar_steel) {
            // A section of its own steel takes that steel's yield, known or not.
            (Some(s), _, _) => (
                s.yield_strength_mpa,
                s.yield_strength_mpa.map(|_| format!("steel {}", s.name)),
            ),
            (None, Some(sy), _) => (Some(sy), Some("bar.yield_strength_mpa".to_string())),
            (None, None, Some(s)) => (
                s.yield_strength_mpa,
                s.yield_strength_mpa.map(|_| format!("steel {}", s.name)),
            ),
            (None, None, None) => (None, None),
        };
        Material {
            shear_modulus_pa: g_gpa * 1e9,
            shear_modulus_from: g_from,
            steel,
            yield_strength_pa: sy.map(|v| v * 1e6),
            yield_from: sy_from,
        }
    }

    /// The yield criterion in force (von Mises unless the rig says `"tresca"`).
    pub fn criterion(&self) -> YieldCriterion {
        self.yield_criterion.unwrap_or_default()
    }

    /// Compliance of each section, rad per N·m: Lᵢ/(Gᵢ·Jᵢ).
    pub fn section_compliances(&self) -> Vec<f64> {
        (0..self.sections.len())
            .map(|i| {
                let s = &self.sections[i];
                segment_compliance(
                    s.length_m(),
                    self.material(i).shear_modulus_pa,
                    s.torsion_constant_m4(),
                )
            })
            .collect()
    }

    /// Stiffness computed from the sections in series: 1/k = Σ Lᵢ/(Gᵢ·Jᵢ) (same torque
    /// through each; Philpot, *Mechanics of Materials*, ch. 6, compound shafts, and any
    /// mechanics-of-materials text).
    pub fn computed_stiffness(&self) -> Stiffness {
        let compliance: f64 = self.section_compliances().iter().sum();
        Stiffness::from_nm_per_rad(1.0 / compliance)
    }

    /// The stiffness used for torque: the calibrated one when given, else the computed one.
    pub fn stiffness(&self) -> Stiffness {
        match self.calibrated_stiffness_nm_per_deg {
            Some(k) => Stiffness::from_nm_per_deg(k),
            None => self.computed_stiffness(),
        }
    }

    /// Whether [`BarSpec::stiffness`] is the calibrated or the computed stiffness, for
    /// reports (`"stiffness_source"`).
    pub fn stiffness_source(&self) -> crate::mechanics::StiffnessSource {
        match self.calibrated_stiffness_nm_per_deg {
            Some(_) => crate::mechanics::StiffnessSource::Calibrated,
            None => crate::mechanics::StiffnessSource::Computed,
        }
    }

    /// Moment of inertia of the drive end, kg·m², given directly or summed over
    /// `drive_parts`; `None` when the rig gives neither.
    pub fn drive_inertia_kg_m2(&self) -> Option<f64> {
        self.drive_inertia_kg_m2.or_else(|| {
            self.drive_parts
                .as_ref()
                .map(|parts| parts.iter().map(InertiaPart::inertia_kg_m2).sum())
        })
    }
}

/// Outside check of the square and hexagon constants: a finite-difference Prandtl
/// stress-function solve (Timoshenko & Goodier, ch. 10), in `bar/saint_venant_check.rs`.
#[cfg(test)]
mod saint_venant_check;

/// Case C5 of the tests: a square drive end, a round shank and a hex nut end (25 mm of
/// 12.7 mm square, 150 mm of 16 mm round, 30 mm of 19 mm hex), the bar the stiffness, stress
/// and report tests share.
#[cfg(test)]
pub(crate) fn c5() -> BarSpec {
    BarSpec::new(vec![
        SectionSpec::square(25.0, 12.7),
        SectionSpec::round(150.0, 16.0),
        SectionSpec::hex(30.0, 19.0),
    ])
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::error::Error;
    use crate::units::{Angle, Torque};
    use approx::assert_relative_eq;
    use proptest::prelude::*;

    /// 0.1 %: the tolerance the reference checks ask for.
    const TOL: f64 = 1e-3;

    #[test]
    fn compound_shaft_worked_example_segment_twist_g26() {
        // A compound-shaft worked example of Philpot, *Mechanics of Materials*, ch. 6 (its
        // numbering from memory), segment 1: T = 675.7 N·m,
        // L = 1000 mm, J = 308 102 mm⁴, G = 26 000 MPa → θ = 0.08435 rad = 4.83°.
        let theta = 675.7 * segment_compliance(1.0, 26_000e6, 308_102e-12);
        assert_relative_eq!(theta, 0.08435, max_relative = TOL);
        assert_relative_eq!(theta.to_degrees(), 4.83, max_relative = TOL);
    }

    #[test]
    fn compound_shaft_worked_example_segment_twist_g76() {
        // Another compound-shaft worked example of Philpot, ch. 6 (numbering from memory),
        // segment 1: T = 4253.921 N·m, L = 4000 mm,
        // J = 2 268 758 mm⁴, G = 76 000 MPa → θ = 0.09868 rad = 5.65°.
        let theta = 4253.921 * segment_compliance(4.0, 76_000e6, 2_268_758e-12);
        assert_relative_eq!(theta, 0.09868, max_relative = TOL);
        assert_relative_eq!(theta.to_degrees(), 5.65, max_relative = TOL);
    }

    #[test]
    fn beer_johnston_solid_shaft() {
        // Solutions page for Beer & Johnston 7th ed. ch. 3 (weak source): solid d = 75 mm,
        // L = 2.5 m, G = 77 GPa, T = 4000 N·m → J = 3.106e-6 m⁴, θ = 0.0418 rad;
        // τ_max = 48.29 MPa (computed from 16T/(πd³)).
        let bar = BarSpec {
            shear_modulus_gpa: Some(77.0),
            ..BarSpec::new(vec![SectionSpec::round(2500.0, 75.0)])
        };
        assert_relative_eq!(
            bar.sections[0].torsion_constant_m4(),
            3.106e-6,
            max_relative = TOL
        );
        let theta = Torque::from_nm(4000.0) / bar.stiffness();
        assert_relative_eq!(theta.rad(), 0.041808, max_relative = TOL);
        assert_relative_eq!(theta.deg(), 2.3954, max_relative = TOL);
        let tau = 4000.0 * bar.sections[0].shear_stress_per_nm();
        assert_relative_eq!(tau, 48.29e6, max_relative = TOL);
    }

    #[test]
    fn c1_solid_round() {
        // Check value C1 (computed; θ = TL/(GJ), Beer & Johnston ch. 3): d = 16 mm,
        // L = 200 mm, G = 79.3 GPa, T = 150 N·m → J = 6433.98 mm⁴, θ = 0.058799 rad = 3.3689°,
        // k = 2551.07 N·m/rad = 44.525 N·m/deg, τ_max = 186.51 MPa.
        let bar = BarSpec::new(vec![SectionSpec::round(200.0, 16.0)]);
        assert_relative_eq!(
            bar.sections[0].torsion_constant_m4() * 1e12,
            6433.98,
            max_relative = TOL
        );
        let k = bar.stiffness();
        assert_relative_eq!(k.nm_per_rad(), 2551.07, max_relative = TOL);
        assert_relative_eq!(k.nm_per_deg(), 44.525, max_relative = TOL);
        let theta = Torque::from_nm(150.0) / k;
        assert_relative_eq!(theta.rad(), 0.058799, max_relative = TOL);
        assert_relative_eq!(theta.deg(), 3.3689, max_relative = TOL);
        assert_relative_eq!(
            150.0 * bar.sections[0].shear_stress_per_nm(),
            186.51e6,
            max_relative = TOL
        );
    }

    #[test]
    fn c2_tube() {
        // Check value C2 (computed; J = π(D⁴ − d⁴)/32, Beer & Johnston ch. 3): D = 20, d = 12 mm, L = 200 mm → J = 13 672.2 mm⁴,
        // k = 5421.0 N·m/rad, τ_max at 150 N·m = 109.71 MPa.
        let bar = BarSpec::new(vec![SectionSpec::tube(200.0, 20.0, 12.0)]);
        let s = &bar.sections[0];
        assert_relative_eq!(s.torsion_constant_m4() * 1e12, 13_672.2, max_relative = TOL);
        assert_relative_eq!(bar.stiffness().nm_per_rad(), 5421.0, max_relative = TOL);
        assert_relative_eq!(
            150.0 * s.shear_stress_per_nm(),
            109.71e6,
            max_relative = TOL
        );
    }

    #[test]
    fn c3_square() {
        // s = 12.7 mm → K = 0.140577·s⁴ = 3657.04 mm⁴, τ_max = 4.808/s³ = 2.347 MPa per N·m:
        // values computed from the section formulas, so this checks units and arithmetic;
        // the coefficients themselves are checked against Timoshenko & Goodier's series and
        // table and a finite-difference Prandtl solve in `saint_venant_check`.
        let s = SectionSpec::square(25.0, 12.7);
        assert_relative_eq!(s.torsion_constant_m4() * 1e12, 3657.04, max_relative = TOL);
        assert_relative_eq!(s.shear_stress_per_nm(), 2.347e6, max_relative = TOL);
    }

    #[test]
    fn c4_hexagon_is_not_its_polar_moment() {
        // s = 19 mm across flats → J = 0.11505·s⁴ = 14 993.4 mm⁴, τ_max = 5.328/s³ = 0.7768
        // MPa per N·m: computed from the coefficients, which `saint_venant_check` checks
        // against a finite-difference Prandtl solve. Its polar moment (5√3/8)·a⁴ = 0.12028·s⁴
        // (a = s/√3) is about 4.5 % larger, so J must not be the polar moment.
        let s = SectionSpec::hex(30.0, 19.0);
        let j_mm4 = s.torsion_constant_m4() * 1e12;
        assert_relative_eq!(j_mm4, 14_993.4, max_relative = TOL);
        assert_relative_eq!(s.shear_stress_per_nm(), 0.7768e6, max_relative = TOL);
        let polar_mm4 = 0.12028 * 19f64.powi(4);
        assert!(polar_mm4 / j_mm4 > 1.04 && polar_mm4 / j_mm4 < 1.05);
        // A round bar of d = 19 mm has 12 794.2 mm⁴ (πd⁴/32).
        let r = SectionSpec::round(30.0, 19.0);
        assert_relative_eq!(r.torsion_constant_m4() * 1e12, 12_794.2, max_relative = TOL);
    }

    #[test]
    fn c5_series() {
        // 25 mm of C3 square + 150 mm of C1 round + 30 mm of C4 hex, in series (1/k = Σ L/(GJ),
        // Beer & Johnston ch. 3; square and hex J as in C3, C4) → segment stiffnesses 11 600.1 / 3401.43 / 39 632.6 N·m/rad,
        // k = 2466.51 N·m/rad = 43.049 N·m/deg, twist at 150 N·m = 3.4844°, and the round
        // section supplies 72.5 % of the compliance.
        let bar = c5();
        let c = bar.section_compliances();
        for (ci, want) in c.iter().zip([11_600.1, 3401.43, 39_632.6]) {
            assert_relative_eq!(1.0 / ci, want, max_relative = TOL);
        }
        let k = bar.stiffness();
        assert_relative_eq!(k.nm_per_rad(), 2466.51, max_relative = TOL);
        assert_relative_eq!(k.nm_per_deg(), 43.049, max_relative = TOL);
        assert_relative_eq!(
            (Torque::from_nm(150.0) / k).deg(),
            3.4844,
            max_relative = TOL
        );
        let share = c[1] / c.iter().sum::<f64>();
        assert!((share - 0.725).abs() < 0.0005, "{share}");
    }

    #[test]
    fn inertia_check_values() {
        // Computed (I = ½·m·(rₒ² + rᵢ²), Beer & Johnston Vector Mechanics
        // tables): disk m = 0.5 kg, r = 20 mm → 1.000e-4 kg·m²; hollow cylinder m = 0.3 kg,
        // rₒ = 15 mm, rᵢ = 10 mm → 4.875e-5 kg·m².
        let disk = InertiaPart {
            part: None,
            mass_kg: 0.5,
            outer_d_mm: 40.0,
            bore_mm: None,
        };
        assert_relative_eq!(disk.inertia_kg_m2(), 1.0e-4, max_relative = TOL);
        let hollow = InertiaPart {
            part: Some("socket".into()),
            mass_kg: 0.3,
            outer_d_mm: 30.0,
            bore_mm: Some(20.0),
        };
        assert_relative_eq!(hollow.inertia_kg_m2(), 4.875e-5, max_relative = TOL);
        let bar = BarSpec {
            drive_parts: Some(vec![disk, hollow]),
            ..c5()
        };
        assert_relative_eq!(bar.drive_inertia_kg_m2().unwrap(), 1.4875e-4);
        assert!(c5().drive_inertia_kg_m2().is_none());
    }

    #[test]
    fn material_precedence() {
        let mut bar = BarSpec {
            steel: Some("4140-qt425".into()),
            ..c5()
        };
        let m = bar.material(0);
        assert_eq!(m.shear_modulus_pa, 80.0e9);
        assert_eq!(m.yield_strength_pa, Some(1138.0e6));
        bar.shear_modulus_gpa = Some(78.0);
        bar.yield_strength_mpa = Some(900.0);
        assert_eq!(bar.material(0).shear_modulus_pa, 78.0e9);
        assert_eq!(bar.material(0).yield_strength_pa, Some(900.0e6));
        bar.sections[1] = SectionSpec::Round {
            length_mm: 150.0,
            d_mm: 16.0,
            steel: Some("s2".into()),
            shear_modulus_gpa: None,
        };
        let m = bar.material(1);
        assert_eq!(m.shear_modulus_pa, 80.0e9);
        assert_eq!(m.yield_strength_pa, Some(2000.0e6));
        assert_eq!(m.steel.unwrap().name, "s2");
        // A section in carbon steel does not borrow the bar's yield.
        bar.sections[0] = SectionSpec::Square {
            length_mm: 25.0,
            side_mm: 12.7,
            steel: Some("carbon".into()),
            shear_modulus_gpa: None,
        };
        assert!(bar.material(0).yield_strength_pa.is_none());
        assert_eq!(bar.material(0).shear_modulus_pa, 79.3e9);
        // Default: carbon steel, 79.3 GPa, yield unknown.
        let m = c5().material(2);
        assert_eq!(m.shear_modulus_pa, 79.3e9);
        assert!(m.yield_strength_pa.is_none());
    }

    fn field_of(bar: &BarSpec) -> String {
        match bar.validate() {
            Err(Error::Bar { field, .. }) => field,
            other => panic!("expected a bar error, got {other:?}"),
        }
    }

    #[test]
    fn bad_values_name_their_field() {
        let mut b = c5();
        b.sections[1] = SectionSpec::round(150.0, 0.0);
        assert_eq!(field_of(&b), "bar.sections[1].d_mm");
        b.sections[1] = SectionSpec::round(-1.0, 16.0);
        assert_eq!(field_of(&b), "bar.sections[1].length_mm");
        b.sections[1] = SectionSpec::tube(40.0, 22.0, 22.0);
        assert_eq!(field_of(&b), "bar.sections[1].bore_mm");
        b.sections[1] = SectionSpec::Hex {
            length_mm: 30.0,
            across_flats_mm: 19.0,
            steel: Some("unobtainium".into()),
            shear_modulus_gpa: None,
        };
        assert_eq!(field_of(&b), "bar.sections[1].steel");
        b.sections[1] = SectionSpec::Hex {
            length_mm: 30.0,
            across_flats_mm: 19.0,
            steel: None,
            shear_modulus_gpa: Some(79_300.0),
        };
        assert_eq!(field_of(&b), "bar.sections[1].shear_modulus_gpa");
        let b = BarSpec {
            shear_modulus_gpa: Some(19.9),
            ..c5()
        };
        assert_eq!(field_of(&b), "bar.shear_modulus_gpa");
        let b = BarSpec {
            steel: Some("4140".into()),
            ..c5()
        };
        assert_eq!(field_of(&b), "bar.steel");
        let b = BarSpec {
            drive_inertia_kg_m2: Some(1e-4),
            drive_parts: Some(vec![]),
            ..c5()
        };
        assert_eq!(field_of(&b), "bar.drive_parts");
        let b = BarSpec {
            stress_warn_fraction: Some(1.5),
            ..c5()
        };
        assert_eq!(field_of(&b), "bar.stress_warn_fraction");
        assert_eq!(field_of(&BarSpec::default()), "bar.sections");
        assert!(c5().validate().is_ok());
    }

    #[test]
    fn extended_rig_round_trips_and_names_bad_fields() {
        use crate::rig::Rig;
        use std::path::Path;
        let rig = r#"{
          "rig_version": 1,
          "marks": {
            "drive": {"kind": "radial", "pivot": [160, 120], "radius": [30, 60], "tighten": "cw"},
            "nut":   {"kind": "radial", "pivot": [480, 120], "radius": [30, 60], "tighten": "cw"}
          },
          "bar": {
            "sections": [ {"shape": "square", "length_mm": 25, "side_mm": 12.7, "steel": "s2"},
                          {"shape": "round", "length_mm": 150, "d_mm": 16},
                          {"shape": "hex", "length_mm": 30, "across_flats_mm": 19, "shear_modulus_gpa": 80} ],
            "steel": "4140-qt540",
            "yield_strength_mpa": 800,
            "yield_criterion": "tresca",
            "stress_warn_fraction": 0.6,
            "rating_nm": 136,
            "drive_parts": [ {"part": "anvil", "mass_kg": 0.5, "outer_d_mm": 40},
                             {"mass_kg": 0.3, "outer_d_mm": 30, "bore_mm": 20} ],
            "calibrated_stiffness_nm_per_deg": 40.5,
            "calibration": {"pairs": 2, "stderr_nm_per_deg": 0.2, "torque_nm": [50, 100],
                            "twist_deg": [1.2, 2.5], "twist_source": "given"}
          }
        }"#;
        let parsed = Rig::from_json_str(rig, Path::new("r.json")).unwrap();
        let again = Rig::from_json_str(&parsed.to_json_pretty(), Path::new("r.json")).unwrap();
        assert_eq!(parsed, again);
        let bar = parsed.bar.unwrap();
        assert_eq!(bar.criterion(), YieldCriterion::Tresca);
        assert_eq!(
            bar.stiffness_source(),
            crate::mechanics::StiffnessSource::Calibrated
        );
        assert_relative_eq!(bar.drive_inertia_kg_m2().unwrap(), 1.4875e-4);
        assert_eq!(bar.material(2).shear_modulus_pa, 80.0e9);
        let err = |from: &str, to: &str| {
            assert!(rig.contains(from), "{from}");
            Rig::from_json_str(&rig.replace(from, to), Path::new("r.json"))
                .unwrap_err()
                .to_string()
        };
        let e = err("\"tresca\"", "\"rankine\"");
        assert!(e.contains("bar.yield_criterion"), "{e}");
        let e = err("\"pairs\": 2,", "\"pairs\": 2, \"date\": 1,");
        assert!(e.contains("bar.calibration") && e.contains("date"), "{e}");
        let e = err("\"twist_deg\": [1.2, 2.5]", "\"twist_deg\": [1.2]");
        assert!(e.contains("bar.calibration.twist_deg"), "{e}");
        let e = err("\"bore_mm\": 20}", "\"bore_mm\": 30}");
        assert!(e.contains("bar.drive_parts[1].bore_mm"), "{e}");
        let e = err(
            "\"rating_nm\": 136,",
            "\"rating_nm\": 136, \"drive_inertia_kg_m2\": 1e-4,",
        );
        assert!(e.contains("bar.drive_parts"), "{e}");
        let e = err(
            "\"yield_strength_mpa\": 800",
            "\"yield_strength_mpa\": -800",
        );
        assert!(e.contains("bar.yield_strength_mpa"), "{e}");
    }

    fn arb_section() -> impl Strategy<Value = SectionSpec> {
        prop_oneof![
            (1.0..500.0f64, 3.0..40.0f64).prop_map(|(l, d)| SectionSpec::round(l, d)),
            (1.0..500.0f64, 3.0..40.0f64, 0.05..0.95f64).prop_map(|(l, d, f)| SectionSpec::tube(
                l,
                d,
                d * f
            )),
            (1.0..500.0f64, 3.0..40.0f64).prop_map(|(l, s)| SectionSpec::hex(l, s)),
            (1.0..500.0f64, 3.0..40.0f64).prop_map(|(l, s)| SectionSpec::square(l, s)),
        ]
    }

    proptest! {
        #![proptest_config(ProptestConfig { cases: 256, rng_seed: proptest::test_runner::RngSeed::Fixed(4), ..ProptestConfig::default() })]

        #[test]
        fn adding_a_section_never_stiffens(
            secs in prop::collection::vec(arb_section(), 1..6),
            extra in arb_section(),
            at in 0usize..6,
        ) {
            let before = BarSpec::new(secs.clone()).stiffness().nm_per_rad();
            let mut more = secs;
            let at = at.min(more.len());
            more.insert(at, extra);
            let after = BarSpec::new(more).stiffness().nm_per_rad();
            prop_assert!(after < before * (1.0 + 1e-12), "{after} > {before}");
        }

        #[test]
        fn twist_is_linear_in_torque(
            secs in prop::collection::vec(arb_section(), 1..6),
            t_nm in 1.0..2000.0f64,
            scale in 0.01..100.0f64,
        ) {
            let bar = BarSpec::new(secs);
            let k = bar.stiffness();
            // The bar's twist is the sum of each section's twist T·Lᵢ/(GᵢJᵢ) ...
            let by_sections = |t: f64| -> f64 {
                bar.section_compliances().iter().map(|c| t * c).sum()
            };
            let a: Angle = Torque::from_nm(t_nm) / k;
            prop_assert!((a.rad() - by_sections(t_nm)).abs() <= 1e-12 * a.rad());
            // ... and scales with the torque, as does the largest shear stress.
            let b: Angle = Torque::from_nm(t_nm * scale) / k;
            prop_assert!((b.rad() - scale * a.rad()).abs() <= 1e-12 * b.rad().abs());
            prop_assert!((by_sections(t_nm * scale) - scale * by_sections(t_nm)).abs()
                <= 1e-12 * b.rad());
            let report = crate::mechanics::BarReport::new(&bar).unwrap();
            let s1 = report.max_shear_stress(Torque::from_nm(t_nm));
            let s2 = report.max_shear_stress(Torque::from_nm(t_nm * scale));
            prop_assert_eq!(s1.section, s2.section);
            prop_assert!((s2.stress_pa - scale * s1.stress_pa).abs() <= 1e-9 * s2.stress_pa);
        }

        #[test]
        fn section_order_does_not_matter(
            secs in prop::collection::vec(arb_section(), 1..6),
            rot in 0usize..6,
        ) {
            let k1 = BarSpec::new(secs.clone()).stiffness().nm_per_rad();
            let mut perm = secs;
            let n = perm.len();
            perm.rotate_left(rot % n);
            perm.reverse();
            let k2 = BarSpec::new(perm).stiffness().nm_per_rad();
            prop_assert!((k1 - k2).abs() <= 1e-12 * k1);
        }
    }
}
