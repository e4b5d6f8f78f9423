//! Everything the tool can say about a bar from its rig description: stiffness (and whether
//! it is calibrated or computed), torque from twist, maximum shear stress against shear
//! yield, the drive end's natural frequency and spring-back time, and the spring-back
//! verdict against a measured blow interval and residual twist.
//!
//! In: a validated [`BarSpec`]. Out: [`BarReport`] (SI inside) and its serialisable form
//! [`BarJson`] (unit-suffixed keys), used by `twistmark bar` and available to the analysis
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

use std::f64::consts::PI;

use serde::Serialize;

use crate::error::Result;
use crate::mechanics::bar::{BarSpec, DEFAULT_STRESS_WARN_FRACTION, SectionSpec};
use crate::mechanics::steel::YieldCriterion;
use crate::units::{Angle, Stiffness, Torque};
use crate::warning::Warning;

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
    stiffness: Stiffness,
    computed: Stiffness,
    source: StiffnessSource,
    calibration_stderr: Option<Stiffness>,
    sections: Vec<SectionReport>,
    rating: Option<Torque>,
    criterion: YieldCriterion,
    warn_fraction: f64,
    inertia_kg_m2: Option<f64>,
    inertia_source: Option<InertiaSource>,
    back_damping_nms_per_rad: Option<f64>,
}

/// How much of the peak twist is still there when the next blow lands, as measured.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum MeasuredRecovery {
    /// Residual ≤ 25 % of the peak: the bar sprang back.
    SprangBack,
    /// Residual 25–40 % of the peak.
    Partial,
    /// Residual over 40 % of the peak: still wound up.
    StillWound,
}

/// What the model says about spring-back against the blow interval.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum ModelRecovery {
    /// Spring-back time ≤ half the blow interval.
    WellWithin,
    /// Spring-back time ≤ the blow interval.
    Within,
    /// Spring-back time > the blow interval: the next blow lands while it is wound up.
    TooSlow,
}

/// The spring-back verdict: model, measurement, whether they agree, and one plain sentence.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SpringbackVerdict {
    /// Time between blows, s.
    pub blow_interval_s: f64,
    /// Modelled spring-back time (onset to a quarter of the peak twist), s; null without
    /// drive inertia.
    pub springback_s: Option<f64>,
    /// Residual over peak that the model predicts at the next blow (only with damping).
    pub predicted_residual_fraction: Option<f64>,
    /// Natural frequency of the drive end on the bar, Hz.
    pub natural_frequency_hz: Option<f64>,
    /// The model's verdict; null without drive inertia.
    pub model: Option<ModelRecovery>,
    /// Residual twist over peak twist, as measured.
    pub residual_fraction: Option<f64>,
    /// The measured verdict; null without a measurement.
    pub measured: Option<MeasuredRecovery>,
    /// Whether model and measurement agree; null when either is missing.
    pub agrees: Option<bool>,
    /// One plain sentence for the report.
    pub sentence: String,
}

/// Residual fraction at or below which the bar counts as sprung back (engineering judgement).
pub const SPRANG_BACK_MAX: f64 = 0.25;
/// Residual fraction above which the bar counts as still wound up (engineering judgement).
pub const STILL_WOUND_MIN: f64 = 0.4;

/// Twist over peak twist at time `t_s` after release from rest at the peak, for
/// I·θ̈ + c·θ̇ + k·θ = 0 with natural angular frequency `wn` and damping ratio `zeta`.
fn unwind_fraction(t_s: f64, wn: f64, zeta: f64) -> f64 {
    if zeta < 1.0 - 1e-9 {
        let wd = wn * (1.0 - zeta * zeta).sqrt();
        (-zeta * wn * t_s).exp() * ((wd * t_s).cos() + zeta * wn / wd * (wd * t_s).sin())
    } else if zeta > 1.0 + 1e-9 {
        let r = (zeta * zeta - 1.0).sqrt();
        // s1 = −ωn(ζ − r) written as −ωn/(ζ + r) to avoid cancellation at large ζ.
        let (s1, s2) = (-wn / (zeta + r), -wn * (zeta + r));
        (s2 * (s1 * t_s).exp() - s1 * (s2 * t_s).exp()) / (s2 - s1)
    } else {
        (1.0 + wn * t_s) * (-wn * t_s).exp()
    }
}

/// First time after release at which the twist has fallen to `target` of its peak.
fn release_time_s(wn: f64, zeta: f64, target: f64) -> f64 {
    let mut hi = if zeta < 1.0 - 1e-9 {
        // The response falls monotonically to its first zero, before half a damped period.
        PI / (wn * (1.0 - zeta * zeta).sqrt())
    } else {
        let mut h = 1.0 / wn;
        for _ in 0..200 {
            if unwind_fraction(h, wn, zeta) < target {
                break;
            }
            h *= 2.0;
        }
        h
    };
    let mut lo = 0.0;
    for _ in 0..200 {
        let mid = 0.5 * (lo + hi);
        if unwind_fraction(mid, wn, zeta) > target {
            lo = mid;
        } else {
            hi = mid;
        }
        if hi - lo <= 1e-13 * hi {
            break;
        }
    }
    0.5 * (lo + hi)
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

    /// Natural frequency of the drive end on the bar, f_n = (1/2π)·√(k/I), Hz (theory-of-machines texts).
    pub fn natural_frequency_hz(&self) -> Option<f64> {
        self.inertia_kg_m2
            .map(|i| (self.stiffness.nm_per_rad() / i).sqrt() / (2.0 * PI))
    }

    /// Damping ratio of the unwinding, ζ = c/(2√(kI)); 0 without damping, `None` without
    /// inertia.
    pub fn damping_ratio(&self) -> Option<f64> {
        let i = self.inertia_kg_m2?;
        let c = self.back_damping_nms_per_rad.unwrap_or(0.0);
        Some(c / (2.0 * (self.stiffness.nm_per_rad() * i).sqrt()))
    }

    /// Time for the twist to rise to its peak after a blow: a quarter period, s.
    pub fn rise_s(&self) -> Option<f64> {
        self.natural_frequency_hz().map(|f| 0.25 / f)
    }

    /// Spring-back time, s: from the blow's onset until the twist is down to a quarter of
    /// its peak (see the module doc).
    pub fn springback_s(&self) -> Option<f64> {
        let f = self.natural_frequency_hz()?;
        let wn = 2.0 * PI * f;
        Some(self.rise_s()? + release_time_s(wn, self.damping_ratio()?, SPRANG_BACK_MAX))
    }

    /// The residual twist over peak twist the model predicts when the next blow lands
    /// `blow_interval_s` after this one. Only with `drive_back_damping_nms_per_rad` given:
    /// without damping the undamped model rings for ever and predicts no residual.
    pub fn predicted_residual_fraction(&self, blow_interval_s: f64) -> Option<f64> {
        self.back_damping_nms_per_rad.filter(|c| *c > 0.0)?;
        let wn = 2.0 * PI * self.natural_frequency_hz()?;
        let t = blow_interval_s - self.rise_s()?;
        (t.is_finite() && t > 0.0)
            .then(|| unwind_fraction(t, wn, self.damping_ratio().unwrap_or(0.0)).max(0.0))
    }

    /// Can the bar spring back between blows? Compares the modelled spring-back time with
    /// `blow_interval_s`, and cross-checks against the measured residual twist (twist just
    /// before the next blow) as a fraction of the peak twist. Pass typical values over the
    /// clip's blows (e.g. medians); either measurement may be `None`.
    pub fn springback_verdict(
        &self,
        blow_interval_s: f64,
        residual_twist: Option<Angle>,
        peak_twist: Option<Angle>,
    ) -> SpringbackVerdict {
        let residual_fraction = match (residual_twist, peak_twist) {
            (Some(r), Some(p)) if p.rad().abs() > 0.0 && r.rad().is_finite() => {
                Some((r.rad() / p.rad()).max(0.0))
            }
            _ => None,
        };
        self.verdict_from_fraction(blow_interval_s, residual_fraction)
    }

    /// The spring-back verdict over a clip's blows: the median interval between consecutive
    /// onsets, against the median of residual/peak over every blow that has a next blow
    /// (the last blow's residual is taken at the clip's end, so it is left out). `None`
    /// with fewer than two onsets or a non-increasing onset time.
    ///
    /// `onsets_s`, `residual_twist` and `peak_twist` are per blow, in blow order.
    pub fn springback_verdict_for_blows(
        &self,
        onsets_s: &[f64],
        residual_twist: &[Option<Angle>],
        peak_twist: &[Option<Angle>],
    ) -> Option<SpringbackVerdict> {
        if onsets_s.len() < 2 {
            return None;
        }
        let intervals: Vec<f64> = onsets_s.windows(2).map(|w| w[1] - w[0]).collect();
        if intervals.iter().any(|d| !(d.is_finite() && *d > 0.0)) {
            return None;
        }
        let fractions: Vec<f64> = (0..onsets_s.len() - 1)
            .filter_map(|i| {
                let r = residual_twist.get(i).copied().flatten()?;
                let p = peak_twist.get(i).copied().flatten()?;
                (p.rad().abs() > 0.0 && r.rad().is_finite()).then(|| (r.rad() / p.rad()).max(0.0))
            })
            .collect();
        Some(self.verdict_from_fraction(median(intervals)?, median(fractions)))
    }

    fn verdict_from_fraction(
        &self,
        blow_interval_s: f64,
        residual_fraction: Option<f64>,
    ) -> SpringbackVerdict {
        let springback_s = self.springback_s();
        let model = springback_s.and_then(|t| {
            if !(blow_interval_s.is_finite() && blow_interval_s > 0.0) {
                None
            } else if t <= 0.5 * blow_interval_s {
                Some(ModelRecovery::WellWithin)
            } else if t <= blow_interval_s {
                Some(ModelRecovery::Within)
            } else {
                Some(ModelRecovery::TooSlow)
            }
        });
        let measured = residual_fraction.map(|f| {
            if f <= SPRANG_BACK_MAX {
                MeasuredRecovery::SprangBack
            } else if f <= STILL_WOUND_MIN {
                MeasuredRecovery::Partial
            } else {
                MeasuredRecovery::StillWound
            }
        });
        let agrees = match (model, measured) {
            (Some(m), Some(x)) => Some(match m {
                ModelRecovery::WellWithin => x == MeasuredRecovery::SprangBack,
                ModelRecovery::Within => x != MeasuredRecovery::StillWound,
                ModelRecovery::TooSlow => x != MeasuredRecovery::SprangBack,
            }),
            _ => None,
        };
        let predicted = self.predicted_residual_fraction(blow_interval_s);
        let sentence = springback_sentence(
            blow_interval_s,
            springback_s,
            model,
            predicted,
            residual_fraction,
            agrees,
        );
        SpringbackVerdict {
            blow_interval_s,
            springback_s,
            predicted_residual_fraction: predicted,
            natural_frequency_hz: self.natural_frequency_hz(),
            model,
            residual_fraction,
            measured,
            agrees,
            sentence,
        }
    }

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

/// Median of finite values; `None` when empty.
fn median(mut v: Vec<f64>) -> Option<f64> {
    v.retain(|x| x.is_finite());
    if v.is_empty() {
        return None;
    }
    v.sort_by(f64::total_cmp);
    let n = v.len();
    Some(if n % 2 == 1 {
        v[n / 2]
    } else {
        0.5 * (v[n / 2 - 1] + v[n / 2])
    })
}

fn ms(s: f64) -> String {
    let v = s * 1e3;
    if v < 10.0 {
        format!("{v:.2} ms")
    } else {
        format!("{v:.1} ms")
    }
}

fn springback_sentence(
    interval_s: f64,
    springback_s: Option<f64>,
    model: Option<ModelRecovery>,
    predicted: Option<f64>,
    residual_fraction: Option<f64>,
    agrees: Option<bool>,
) -> String {
    let measured = residual_fraction.map(|f| {
        format!(
            "the measured residual twist is {:.0} % of the peak",
            100.0 * f
        )
    });
    let leaves = predicted
        .map(|p| format!(" (the model leaves {:.0} % of the peak)", 100.0 * p))
        .unwrap_or_default();
    let head = match (model, springback_s) {
        (Some(ModelRecovery::WellWithin), Some(t)) => format!(
            "The bar can spring back in {}, well within the {} between blows{leaves}",
            ms(t),
            ms(interval_s)
        ),
        (Some(ModelRecovery::Within), Some(t)) => format!(
            "The bar can spring back in {}, just within the {} between blows{leaves}",
            ms(t),
            ms(interval_s)
        ),
        (Some(ModelRecovery::TooSlow), Some(t)) => format!(
            "The bar cannot spring back: it needs {} but the next blow lands after {}, while it is still wound up{leaves}",
            ms(t),
            ms(interval_s)
        ),
        _ => match residual_fraction {
            Some(f) if f <= SPRANG_BACK_MAX => {
                return format!(
                    "Without the drive-end inertia only the measurement speaks: {}, so the bar springs back within the {} between blows.",
                    measured.unwrap_or_default(),
                    ms(interval_s)
                );
            }
            Some(f) if f > STILL_WOUND_MIN => {
                return format!(
                    "Without the drive-end inertia only the measurement speaks: {}, so the next blow lands while the bar is still wound up.",
                    measured.unwrap_or_default()
                );
            }
            Some(_) => {
                return format!(
                    "Without the drive-end inertia only the measurement speaks: {}, so the bar springs back only partly in the {} between blows.",
                    measured.unwrap_or_default(),
                    ms(interval_s)
                );
            }
            None => {
                return format!(
                    "Spring-back cannot be judged: the rig gives no drive-end inertia and no residual twist was measured ({} between blows).",
                    ms(interval_s)
                );
            }
        },
    };
    match (agrees, measured) {
        (Some(true), Some(m)) => format!("{head}; {m}, which agrees."),
        (Some(false), Some(m)) => format!(
            "{head}; but {m}, which disagrees: check the drive-end inertia and stiffness, or look for damping or a nut end still turning."
        ),
        _ => format!("{head}."),
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
    use super::*;
    use crate::mechanics::bar::InertiaPart;
    use approx::assert_relative_eq;

    fn c5() -> BarSpec {
        BarSpec::new(vec![
            SectionSpec::square(25.0, 12.7),
            SectionSpec::round(150.0, 16.0),
            SectionSpec::hex(30.0, 19.0),
        ])
    }

    #[test]
    fn natural_frequency_matches_reference() {
        // Computed (f_n = (1/2π)√(k/I), theory-of-machines texts): disk
        // I = 1.000e-4 kg·m² on C1's k = 2551.07 N·m/rad → f_n = 803.86 Hz, period 1.244 ms.
        let bar = BarSpec {
            drive_inertia_kg_m2: Some(1.0e-4),
            ..BarSpec::new(vec![SectionSpec::round(200.0, 16.0)])
        };
        let r = BarReport::new(&bar).unwrap();
        assert_relative_eq!(
            r.natural_frequency_hz().unwrap(),
            803.86,
            max_relative = 1e-3
        );
        // Undamped spring-back to a quarter of the peak: (π/2 + acos ¼)/(2π·f_n) = 0.5720 ms.
        assert_relative_eq!(
            r.springback_s().unwrap(),
            (0.5 * PI + 0.25f64.acos()) / (2.0 * PI * 803.86),
            max_relative = 1e-3
        );
        assert_eq!(r.damping_ratio(), Some(0.0));
        assert!(r.predicted_residual_fraction(0.02).is_none());
        // Same inertia from a solid disk m = 0.5 kg, r = 20 mm (I = ½·m·r²).
        let parts = BarSpec {
            drive_parts: Some(vec![InertiaPart {
                part: Some("anvil".into()),
                mass_kg: 0.5,
                outer_d_mm: 40.0,
                bore_mm: None,
            }]),
            ..BarSpec::new(vec![SectionSpec::round(200.0, 16.0)])
        };
        let r2 = BarReport::new(&parts).unwrap();
        assert_relative_eq!(
            r2.natural_frequency_hz().unwrap(),
            803.86,
            max_relative = 1e-3
        );
        assert_eq!(
            r2.to_json().drive_inertia_source,
            Some(InertiaSource::Parts)
        );
    }

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

    #[test]
    fn springback_verdicts() {
        // k = 2466.5 N·m/rad; I = 1e-3 kg·m² → f_n = 249.9 Hz, spring-back 2.0 ms.
        let bar = BarSpec {
            drive_inertia_kg_m2: Some(1.0e-3),
            ..c5()
        };
        let r = BarReport::new(&bar).unwrap();
        let sb = r.springback_s().unwrap();
        assert_relative_eq!(
            sb,
            (0.5 * PI + 0.25f64.acos()) * (1.0e-3 / 2466.51f64).sqrt(),
            max_relative = 1e-3
        );
        let deg = Angle::from_deg;
        // Slow tool (60 ms between blows), residual 2 % of peak: agrees.
        let v = r.springback_verdict(0.060, Some(deg(0.06)), Some(deg(3.0)));
        assert_eq!(v.model, Some(ModelRecovery::WellWithin));
        assert_eq!(v.measured, Some(MeasuredRecovery::SprangBack));
        assert_eq!(v.agrees, Some(true));
        assert!(
            v.sentence.contains("well within the 60.0 ms"),
            "{}",
            v.sentence
        );
        assert!(v.sentence.contains("1.84 ms"), "{}", v.sentence);
        // Fast blows (1.5 ms apart): the model says too slow; 70 % residual agrees.
        let v = r.springback_verdict(0.0015, Some(deg(2.1)), Some(deg(3.0)));
        assert_eq!(v.model, Some(ModelRecovery::TooSlow));
        assert_eq!(v.measured, Some(MeasuredRecovery::StillWound));
        assert_eq!(v.agrees, Some(true));
        assert!(v.sentence.contains("cannot spring back"), "{}", v.sentence);
        assert!(v.sentence.contains("still wound up"), "{}", v.sentence);
        // Model says fine, measurement says wound up: disagreement is said plainly.
        let v = r.springback_verdict(0.060, Some(deg(2.0)), Some(deg(3.0)));
        assert_eq!(v.agrees, Some(false));
        assert!(v.sentence.contains("disagrees"), "{}", v.sentence);
        // No inertia: the measurement alone.
        let r0 = BarReport::new(&c5()).unwrap();
        let v = r0.springback_verdict(0.020, Some(deg(2.0)), Some(deg(3.0)));
        assert!(v.model.is_none() && v.agrees.is_none());
        assert!(v.sentence.contains("still wound up"), "{}", v.sentence);
        let v = r0.springback_verdict(0.020, None, None);
        assert!(v.sentence.contains("cannot be judged"), "{}", v.sentence);
    }

    #[test]
    fn springback_over_blows_uses_medians() {
        let bar = BarSpec {
            drive_inertia_kg_m2: Some(1.0e-3),
            ..c5()
        };
        let r = BarReport::new(&bar).unwrap();
        let deg = |d: f64| Some(Angle::from_deg(d));
        // Fast tool, synthetic blows 1.5 ms apart (one odd 3 ms gap), residual about 70 % of
        // peak; the last blow's residual (0 at clip end) is ignored.
        let onsets = [0.0, 0.0015, 0.0030, 0.0060, 0.0075];
        let resid = [deg(2.1), deg(2.0), deg(2.2), deg(2.1), deg(0.0)];
        let peak = [deg(3.0); 5];
        let v = r
            .springback_verdict_for_blows(&onsets, &resid, &peak)
            .unwrap();
        assert_relative_eq!(v.blow_interval_s, 0.0015, max_relative = 1e-9);
        assert_relative_eq!(v.residual_fraction.unwrap(), 0.7, max_relative = 1e-9);
        assert_eq!(v.model, Some(ModelRecovery::TooSlow));
        assert_eq!(v.agrees, Some(true));
        assert!(
            r.springback_verdict_for_blows(&[0.0], &resid, &peak)
                .is_none()
        );
        assert!(
            r.springback_verdict_for_blows(&[0.0, 0.0], &resid, &peak)
                .is_none()
        );
        // Missing measurements: the model alone.
        let v = r
            .springback_verdict_for_blows(&[0.0, 0.06], &[None, None], &[None, None])
            .unwrap();
        assert!(v.residual_fraction.is_none() && v.model.is_some());
        assert!(v.sentence.ends_with("between blows."), "{}", v.sentence);
    }

    #[test]
    fn release_time_matches_closed_forms() {
        let wn = 1000.0;
        // Undamped: cos(ωn·t) = ¼ → t = acos(¼)/ωn.
        assert_relative_eq!(
            release_time_s(wn, 0.0, 0.25),
            0.25f64.acos() / wn,
            max_relative = 1e-9
        );
        // Critically damped: (1 + x)·e^(−x) = ¼ at x = 2.692 634 5 (solved independently).
        assert_relative_eq!(
            release_time_s(wn, 1.0, 0.25),
            2.692_634_5 / wn,
            max_relative = 1e-7
        );
        // Heavily over-damped: the slow mode dominates, θ/θp ≈ s2/(s2−s1)·e^(s1·t).
        let z: f64 = 20.0;
        let r = (z * z - 1.0).sqrt();
        let (s1, s2) = (-wn / (z + r), -wn * (z + r));
        let approx = ((s2 / (s2 - s1)) / 0.25).ln() / -s1;
        assert_relative_eq!(release_time_s(wn, z, 0.25), approx, max_relative = 1e-9);
        // ... which tends to ln 4 · c/k (c/k = 2ζ/ωn).
        assert_relative_eq!(approx, 4f64.ln() * 2.0 * z / wn, max_relative = 2e-3);
        // Under-damped: the response at the found time is the target.
        let t = release_time_s(wn, 0.3, 0.25);
        assert_relative_eq!(unwind_fraction(t, wn, 0.3), 0.25, max_relative = 1e-9);
    }

    #[test]
    fn verdict_matches_the_simulated_slow_and_fast_tools() {
        // Synthetic check with known physics: the project's simulated bench (src/synth,
        // presets "slow-tool" and "fast-tool", read from branch synth at 37559b5, not
        // merged here). Its bar: 25 mm of 19 mm hex, 220 mm of 12 mm round, 30 mm of 19 mm
        // hex, G 79.3 GPa; drive inertia 2.0e-3 kg·m²; back-drive damping 22 N·m·s/rad.
        // Onset frames, peak and residual twist (deg) are its truth, as its own test prints
        // them; the last blow's residual is at clip end and is not used.
        let mut bar = BarSpec::new(vec![
            SectionSpec::hex(25.0, 19.0),
            SectionSpec::round(220.0, 12.0),
            SectionSpec::hex(30.0, 19.0),
        ]);
        bar.drive_inertia_kg_m2 = Some(2.0e-3);
        bar.drive_back_damping_nms_per_rad = Some(22.0);
        let r = BarReport::new(&bar).unwrap();
        assert_relative_eq!(r.stiffness().nm_per_deg(), 12.3867, max_relative = 1e-4);
        let run = |fps: f64, frames: &[u32], peak: &[f64], resid: &[f64]| {
            let on: Vec<f64> = frames.iter().map(|&f| f64::from(f) / fps).collect();
            let p: Vec<_> = peak.iter().map(|&d| Some(Angle::from_deg(d))).collect();
            let q: Vec<_> = resid.iter().map(|&d| Some(Angle::from_deg(d))).collect();
            r.springback_verdict_for_blows(&on, &q, &p).unwrap()
        };
        // Slow tool, 1200 blows/min at 1000 fps.
        let slow = run(
            1000.0,
            &[11, 61, 111, 161, 211, 261],
            &[6.25, 8.61, 9.48, 9.89, 11.29, 10.87],
            &[1.06, 0.96, 1.38, 1.75, 2.47, 2.02],
        );
        assert_eq!(slow.model, Some(ModelRecovery::Within), "{}", slow.sentence);
        assert_eq!(slow.measured, Some(MeasuredRecovery::SprangBack));
        assert_eq!(slow.agrees, Some(true), "{}", slow.sentence);
        assert!(
            slow.sentence.contains("can spring back"),
            "{}",
            slow.sentence
        );
        assert!((slow.predicted_residual_fraction.unwrap() - 0.217).abs() < 0.005);
        // Fast tool, 3300 blows/min at 2000 fps.
        let fast = run(
            2000.0,
            &[11, 47, 83, 120, 156, 193, 229, 265, 302, 338],
            &[
                6.49, 8.60, 9.96, 11.03, 11.71, 12.29, 12.59, 12.34, 13.07, 13.31,
            ],
            &[2.95, 2.69, 3.84, 4.83, 5.51, 7.35, 5.78, 7.36, 7.80, 7.95],
        );
        assert_eq!(
            fast.model,
            Some(ModelRecovery::TooSlow),
            "{}",
            fast.sentence
        );
        assert_eq!(fast.measured, Some(MeasuredRecovery::StillWound));
        assert_eq!(fast.agrees, Some(true), "{}", fast.sentence);
        assert!(
            fast.sentence.contains("cannot spring back"),
            "{}",
            fast.sentence
        );
        assert!(fast.sentence.contains("which agrees"), "{}", fast.sentence);
    }

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
