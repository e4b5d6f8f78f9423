//! Everything the tool can say about a bar from its rig description: stiffness (and whether
//! it is calibrated or computed), torque from twist, maximum shear stress against shear
//! yield, the drive end's natural frequency and spring-back time, and the spring-back
//! verdict against a measured blow interval and residual twist.
//!
//! In: a validated [`BarSpec`]. Out: [`BarReport`] (SI inside) and its serialisable form
//! [`BarJson`](crate::report::BarJson) (unit-suffixed keys), used by `twistmark bar` and available to the analysis
//! report.
//!
//! Spring-back model (free torsional vibration of a disc on a massless shaft, any
//! theory-of-machines text): the bar is a massless torsion spring of stiffness k with
//! the drive-end inertia I on it, so I·θ̈ + k·θ = 0 and f_n = (1/2π)·√(k/I). A blow throws
//! the drive end forward and the twist rises to its peak in a quarter period, (π/2)·√(I/k)
//! (forward damping neglected). The bar then unwinds from rest at the peak against the tool's
//! resistance to turning back, a viscous damping c (`drive_back_damping_nms_per_rad`,
//! default 0): I·θ̈ + c·θ̇ + k·θ = 0, damping ratio ζ = c/(2√(kI)), whose free response from
//! rest is the standard under-, critically or over-damped solution (any vibrations text).
//! **Spring-back time** is counted from the blow's onset, like the blow interval, until the
//! twist has fallen to a quarter of its peak, the same fraction below which a measured
//! residual counts as sprung back. Undamped it is (π/2 + acos ¼)·√(I/k) ≈ 0.46 of a period;
//! with heavy damping it approaches ln 4 · c/k.
//!
//! # Use from an analysis report
//!
//! - `BarReport::new(&bar)?` once per rig (it validates the bar).
//! - [`BarReport::torque`] for a twist, [`BarReport::stiffness_source`] for the report's
//!   `"stiffness_source"` (also on [`BarSpec::stiffness_source`]).
//! - [`BarReport::stress_warning`]`(peak_torque, "measured peak")` for the clip's highest
//!   peak torque, plus [`BarReport::warnings`] for the rating.
//! - [`BarReport::springback_verdict_for_blows`]`(&onsets_s, &residual_twist, &peak_twist)`
//!   for the clip's verdict and its one sentence (`verdict.sentence`).
//! - [`BarReport::to_json`] for a `"bar"` block with unit-suffixed keys.
//!
//! Part of the mechanics stage: it must never import report, `analyze`, `batch`, `find_marks`,
//! `calibrate` or the CLI.

use serde::Serialize;

use crate::error::Result;
use crate::mechanics::bar::{BarSpec, DEFAULT_STRESS_WARN_FRACTION, SectionSpec};
use crate::mechanics::steel::YieldCriterion;
use crate::units::{Angle, Stiffness, Torque};
use crate::warning::Warning;

mod springback;
pub use springback::{
    GAIN_SPRANG_BACK_MAX, GAIN_STILL_WOUND_MIN, MeasuredRecovery, ModelRecovery, SpringbackVerdict,
    recovery_from_gain,
};

/// The caution printed and written wherever a torque is shown (two full sentences).
pub const TORQUE_CAUTION: &str = "A torque estimated from video is a model (bar stiffness × \
twist), not a calibrated measurement. Finish wheel nuts with a calibrated torque wrench to the \
vehicle maker's specification.";

/// Where the stiffness used for torque came from.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum StiffnessSource {
    /// `calibrated_stiffness_nm_per_deg` in the rig.
    Calibrated,
    /// Computed from the sections and steel.
    Computed,
}

impl StiffnessSource {
    /// `"calibrated"` or `"computed"`.
    pub fn name(self) -> &'static str {
        match self {
            StiffnessSource::Calibrated => "calibrated",
            StiffnessSource::Computed => "computed",
        }
    }
    /// The same as [`StiffnessSource::name`], as written in reports.
    pub fn as_str(self) -> &'static str {
        self.name()
    }
}

/// Where the drive-end inertia came from.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum InertiaSource {
    /// `drive_inertia_kg_m2`.
    Given,
    /// Summed over `drive_parts` as hollow cylinders.
    Parts,
}

/// One section as the report sees it.
#[derive(Debug, Clone, PartialEq)]
pub struct SectionReport {
    /// Index in `bar.sections`.
    pub index: usize,
    /// `round`, `tube`, `hex` or `square`.
    pub shape: &'static str,
    /// Length, m.
    pub length_m: f64,
    /// Named steel that applies, if any.
    pub steel: Option<&'static str>,
    /// Shear modulus, Pa.
    pub shear_modulus_pa: f64,
    /// Where G came from.
    pub shear_modulus_from: String,
    /// Torsion constant, m⁴.
    pub torsion_constant_m4: f64,
    /// This section's own stiffness G·J/L.
    pub stiffness: Stiffness,
    /// Its share of the bar's computed compliance, 0..1.
    pub compliance_share: f64,
    /// Maximum shear stress per unit torque, Pa per N·m.
    pub shear_stress_per_nm: f64,
    /// Where that maximum sits.
    pub stress_location: &'static str,
    /// Tensile yield strength, Pa, if known.
    pub yield_strength_pa: Option<f64>,
    /// Shear yield under the bar's criterion, Pa, if known.
    pub shear_yield_pa: Option<f64>,
}

impl SectionReport {
    /// How warnings and reports name this section, e.g. `bar.sections[1] (round)`.
    pub fn label(&self) -> String {
        format!("bar.sections[{}] ({})", self.index, self.shape)
    }
}

/// The largest shear stress over the sections at one torque.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PeakStress {
    /// Index of the section carrying it.
    pub section: usize,
    /// The stress, Pa.
    pub stress_pa: f64,
}

/// The bar's stiffness, stress and timing, ready to print or serialise.
///
/// ```
/// use twistmark::mechanics::{BarReport, BarSpec, SectionSpec};
/// use twistmark::Angle;
/// // Check value C1 (θ = T·L/(G·J), Beer & Johnston ch. 3): d = 16 mm, L = 200 mm round bar, k = 44.525 N·m/deg.
/// let bar = BarSpec::new(vec![SectionSpec::round(200.0, 16.0)]);
/// let report = BarReport::new(&bar).unwrap();
/// let t = report.torque(Angle::from_deg(3.3689));
/// assert!((t.nm() - 150.0).abs() < 0.1);
/// ```
#[derive(Debug, Clone, PartialEq)]
pub struct BarReport {
    pub(crate) stiffness: Stiffness,
    pub(crate) computed: Stiffness,
    pub(crate) source: StiffnessSource,
    pub(crate) calibration_stderr: Option<Stiffness>,
    pub(crate) sections: Vec<SectionReport>,
    pub(crate) rating: Option<Torque>,
    pub(crate) criterion: YieldCriterion,
    pub(crate) warn_fraction: f64,
    pub(crate) inertia_kg_m2: Option<f64>,
    pub(crate) inertia_source: Option<InertiaSource>,
    pub(crate) back_damping_nms_per_rad: Option<f64>,
}

impl BarReport {
    /// Builds the report for a bar.
    ///
    /// # Errors
    /// [`crate::Error::Bar`] naming the field when the bar does not validate.
    pub fn new(bar: &BarSpec) -> Result<BarReport> {
        bar.validate()?;
        let compliances = bar.section_compliances();
        let total: f64 = compliances.iter().sum();
        let criterion = bar.criterion();
        let sections = bar
            .sections
            .iter()
            .enumerate()
            .map(|(i, s)| {
                let m = bar.material(i);
                SectionReport {
                    index: i,
                    shape: s.shape_name(),
                    length_m: s.length_m(),
                    steel: m.steel.map(|st| st.name),
                    shear_modulus_pa: m.shear_modulus_pa,
                    shear_modulus_from: m.shear_modulus_from,
                    torsion_constant_m4: s.torsion_constant_m4(),
                    stiffness: Stiffness::from_nm_per_rad(1.0 / compliances[i]),
                    compliance_share: compliances[i] / total,
                    shear_stress_per_nm: s.shear_stress_per_nm(),
                    stress_location: SectionSpec::stress_location(s),
                    yield_strength_pa: m.yield_strength_pa,
                    shear_yield_pa: m.yield_strength_pa.map(|sy| criterion.shear_yield(sy)),
                }
            })
            .collect();
        let computed = bar.computed_stiffness();
        let (source, calibration_stderr) = match bar.calibrated_stiffness_nm_per_deg {
            Some(_) => (
                StiffnessSource::Calibrated,
                bar.calibration
                    .as_ref()
                    .and_then(|c| c.stderr_nm_per_deg)
                    .map(Stiffness::from_nm_per_deg),
            ),
            None => (StiffnessSource::Computed, None),
        };
        let inertia_source = if bar.drive_inertia_kg_m2.is_some() {
            Some(InertiaSource::Given)
        } else if bar.drive_parts.is_some() {
            Some(InertiaSource::Parts)
        } else {
            None
        };
        Ok(BarReport {
            stiffness: bar.stiffness(),
            computed,
            source,
            calibration_stderr,
            sections,
            rating: bar.rating_nm.map(Torque::from_nm),
            criterion,
            warn_fraction: bar
                .stress_warn_fraction
                .unwrap_or(DEFAULT_STRESS_WARN_FRACTION),
            inertia_kg_m2: bar.drive_inertia_kg_m2(),
            inertia_source,
            back_damping_nms_per_rad: bar.drive_back_damping_nms_per_rad,
        })
    }

    /// The stiffness used for torque (calibrated when the rig has one).
    pub fn stiffness(&self) -> Stiffness {
        self.stiffness
    }
    /// The stiffness computed from the sections, whatever is used.
    pub fn computed_stiffness(&self) -> Stiffness {
        self.computed
    }
    /// Whether [`BarReport::stiffness`] is calibrated or computed.
    pub fn stiffness_source(&self) -> StiffnessSource {
        self.source
    }
    /// The sections, drive end first.
    pub fn sections(&self) -> &[SectionReport] {
        &self.sections
    }
    /// The rated torque, if the rig gives one.
    pub fn rating(&self) -> Option<Torque> {
        self.rating
    }
    /// Torque = stiffness × twist. A model, not a calibrated measurement.
    pub fn torque(&self, twist: Angle) -> Torque {
        self.stiffness * twist
    }
    /// Twist at a torque: T/k.
    pub fn twist_at(&self, torque: Torque) -> Angle {
        torque / self.stiffness
    }

    /// The largest maximum shear stress over the sections at this torque (its magnitude).
    pub fn max_shear_stress(&self, torque: Torque) -> PeakStress {
        let t = torque.nm().abs();
        self.sections
            .iter()
            .map(|s| PeakStress {
                section: s.index,
                stress_pa: s.shear_stress_per_nm * t,
            })
            .fold(
                PeakStress {
                    section: 0,
                    stress_pa: f64::NEG_INFINITY,
                },
                |a, b| if b.stress_pa > a.stress_pa { b } else { a },
            )
    }

    /// The highest ratio of shear stress to shear yield over sections whose yield is known,
    /// at this torque, with the section.
    pub fn max_stress_ratio(&self, torque: Torque) -> Option<(usize, f64)> {
        let t = torque.nm().abs();
        self.sections
            .iter()
            .filter_map(|s| {
                s.shear_yield_pa
                    .map(|ty| (s.index, s.shear_stress_per_nm * t / ty))
            })
            .fold(None, |best: Option<(usize, f64)>, c| match best {
                Some(b) if b.1 >= c.1 => Some(b),
                _ => Some(c),
            })
    }

    /// [`Warning::StressHigh`] naming the section when its shear stress at `torque` passes
    /// the warning fraction of its shear yield; `at` says which torque (`"rating"`,
    /// `"measured peak"`). `None` when below, or when no section's yield is known.
    pub fn stress_warning(&self, torque: Torque, at: &str) -> Option<Warning> {
        let (i, ratio) = self.max_stress_ratio(torque)?;
        if ratio < self.warn_fraction {
            return None;
        }
        let s = &self.sections[i];
        Some(Warning::StressHigh {
            section: s.label(),
            stress_mpa: s.shear_stress_per_nm * torque.nm().abs() * 1e-6,
            shear_yield_mpa: s.shear_yield_pa.unwrap_or(f64::NAN) * 1e-6,
            at: at.to_string(),
        })
    }

    /// Warnings that follow from the rig alone: stress at the rating.
    pub fn warnings(&self) -> Vec<Warning> {
        self.rating
            .and_then(|r| self.stress_warning(r, "rating"))
            .into_iter()
            .collect()
    }

    /// Drive-end inertia, kg·m², if the rig gives it or its parts.
    pub fn drive_inertia_kg_m2(&self) -> Option<f64> {
        self.inertia_kg_m2
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    use crate::mechanics::c5;

    #[test]
    fn stress_at_rating_is_largest_over_sections() {
        // C5 at 150 N·m: square 2.347 MPa/N·m (C3) → 352.0 MPa; round 186.51 MPa (C1);
        // hex 0.7768 MPa/N·m (C4) → 116.5 MPa. The square carries the largest.
        let bar = BarSpec {
            rating_nm: Some(150.0),
            ..c5()
        };
        let r = BarReport::new(&bar).unwrap();
        let p = r.max_shear_stress(Torque::from_nm(150.0));
        assert_eq!(p.section, 0);
        assert_relative_eq!(p.stress_pa, 150.0 * 2.347e6, max_relative = 1e-3);
        let j = r.to_json();
        assert_relative_eq!(
            j.shear_stress_at_rating_mpa.unwrap(),
            352.05,
            max_relative = 1e-3
        );
        assert_relative_eq!(j.twist_at_rating_deg.unwrap(), 3.4844, max_relative = 1e-3);
        assert_relative_eq!(j.sections[1].compliance_share, 0.725, max_relative = 1e-3);
        // 150 N·m = 110.634 lbf·ft (exact factor, NIST SP 811).
        assert_relative_eq!(
            j.rating_lbf_ft.unwrap(),
            150.0 * 0.737_562_149_277_265,
            max_relative = 1e-12
        );
        assert_eq!(j.stiffness_source, StiffnessSource::Computed);
        assert!(j.stress_ratio_at_rating.is_none(), "carbon: no yield known");
        assert!(r.warnings().is_empty());
    }

    #[test]
    fn stress_warning_names_the_section() {
        // 4140 annealed: Sy 417 MPa (eFunda) → τy = 240.8 MPa von Mises, 208.5 MPa Tresca.
        // At 100 N·m the square carries 234.7 MPa: 97 % (von Mises) and 113 % (Tresca).
        let bar = BarSpec {
            steel: Some("4140-annealed".into()),
            rating_nm: Some(100.0),
            ..c5()
        };
        let r = BarReport::new(&bar).unwrap();
        let w = r.stress_warning(Torque::from_nm(100.0), "rating").unwrap();
        match &w {
            Warning::StressHigh {
                section,
                stress_mpa,
                shear_yield_mpa,
                at,
            } => {
                assert_eq!(section, "bar.sections[0] (square)");
                assert_relative_eq!(*stress_mpa, 234.7, max_relative = 1e-3);
                assert_relative_eq!(*shear_yield_mpa, 417.0 / 3f64.sqrt(), max_relative = 1e-9);
                assert_eq!(at, "rating");
            }
            other => panic!("{other:?}"),
        }
        assert!(w.to_string().contains("bar.sections[0] (square)"));
        // Below the fraction: 50 N·m → 117 MPa = 49 % of yield.
        assert!(r.stress_warning(Torque::from_nm(50.0), "rating").is_none());
        // Tresca is stricter: 80 N·m → 187.8 MPa, 78 % of 240.8 but 90 % of 208.5.
        let strict = BarSpec {
            yield_criterion: Some(YieldCriterion::Tresca),
            stress_warn_fraction: Some(0.8),
            ..bar.clone()
        };
        let rs = BarReport::new(&strict).unwrap();
        assert!(rs.stress_warning(Torque::from_nm(80.0), "peak").is_some());
        let lax = BarSpec {
            stress_warn_fraction: Some(0.8),
            ..bar
        };
        let rl = BarReport::new(&lax).unwrap();
        assert!(rl.stress_warning(Torque::from_nm(80.0), "peak").is_none());
    }

    #[test]
    fn per_section_steel_moves_the_critical_section() {
        // Square drive in S2 (τy 1155 MPa), rest 4140 annealed (τy 241 MPa): at 50 N·m the
        // square carries the most stress (117 MPa) but the round is closest to yield
        // (62.2 MPa / 240.8 = 26 % vs 10 %).
        let mut bar = BarSpec {
            steel: Some("4140-annealed".into()),
            ..c5()
        };
        bar.sections[0] = SectionSpec::Square {
            length_mm: 25.0,
            side_mm: 12.7,
            steel: Some("s2".into()),
            shear_modulus_gpa: None,
        };
        let r = BarReport::new(&bar).unwrap();
        let t = Torque::from_nm(50.0);
        assert_eq!(r.max_shear_stress(t).section, 0);
        assert_eq!(r.max_stress_ratio(t).unwrap().0, 1);
    }

    #[test]
    fn calibrated_stiffness_is_used_and_labelled() {
        let bar = BarSpec {
            calibrated_stiffness_nm_per_deg: Some(40.0),
            ..c5()
        };
        let r = BarReport::new(&bar).unwrap();
        assert_eq!(r.stiffness_source(), StiffnessSource::Calibrated);
        assert_relative_eq!(r.stiffness().nm_per_deg(), 40.0, max_relative = 1e-12);
        assert_relative_eq!(
            r.computed_stiffness().nm_per_deg(),
            43.049,
            max_relative = 1e-3
        );
        assert_relative_eq!(
            r.torque(Angle::from_deg(2.0)).nm(),
            80.0,
            max_relative = 1e-12
        );
        let j = r.to_json();
        assert_relative_eq!(
            j.calibrated_vs_computed_pct.unwrap(),
            100.0 * (40.0 / 43.049 - 1.0),
            max_relative = 1e-3
        );
        let v = serde_json::to_value(&j).unwrap();
        assert_eq!(v["stiffness_source"], "calibrated");
    }
}
