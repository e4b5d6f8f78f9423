//! Spring-back of the drive end on the bar: the model (free torsional vibration of the
//! drive-end inertia on the bar, released from rest at the peak twist) and the verdict that
//! compares it with the measured residual twist. See the parent module's doc for the model.
//!
//! Part of the mechanics stage: it must never import report, `analyze`, `batch`, `find_marks`,
//! `calibrate` or the CLI.

use std::f64::consts::PI;

use serde::Serialize;

use super::BarReport;
use crate::mechanics::unwind::{DecayMethod, UnwindMeasurement};
use crate::stats::median;
use crate::units::Angle;

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
    /// What the measured verdict rests on: `"torque_gain"` (held blows, from the clip) or
    /// `"residual_fraction"` (the residual over the peak, when no gain was measured).
    pub measured_from: Option<&'static str>,
    /// Blows in which the nut was held (the only ones the gain is measured on).
    pub held_blows: usize,
    /// Median over held blows of θp/√(θp² − θr²): how much the wind-up left by the blow
    /// before raised the peak torque.
    pub torque_gain_median_ratio: Option<f64>,
    /// Largest such gain.
    pub torque_gain_max_ratio: Option<f64>,
    /// Median over held blows of the energy a blow put into the bar, ½k(θp² − θr²), J.
    pub blow_energy_median_j: Option<f64>,
    /// How the unwinds' decay was measured.
    pub decay_method: Option<DecayMethod>,
    /// Unwinds whose decay was fitted.
    pub decay_fits: usize,
    /// Median time constant of the unwinds' decay, ms.
    pub decay_time_constant_ms: Option<f64>,
    /// Back-drive damping measured from the decay, N·m·s/rad.
    pub measured_back_damping_nms_per_rad: Option<f64>,
    /// Damping ratio from the measurement (with the rig's inertia when the decay alone does
    /// not fix it).
    pub measured_damping_ratio: Option<f64>,
    /// Natural frequency measured from an underdamped unwind, Hz.
    pub measured_natural_frequency_hz: Option<f64>,
    /// The rig's `drive_back_damping_nms_per_rad`, if given (the model's prediction).
    pub rig_back_damping_nms_per_rad: Option<f64>,
    /// How far the rig's damping is from the measured one, %.
    pub damping_rig_vs_measured_pct: Option<f64>,
}

/// Residual fraction at or below which the bar counts as sprung back, used only when no
/// torque gain was measured. A residual fraction f raises a held blow's peak by
/// 1/√(1 − f²) (docs/mechanics.md, "Spring-back measured from the clip"): 0.25 is a gain of
/// 3.3 %, within [`GAIN_SPRANG_BACK_MAX`].
pub const SPRANG_BACK_MAX: f64 = 0.25;
/// Residual fraction above which the bar counts as still wound up (no gain measured): 0.4 is
/// a gain of 9.1 %, just under [`GAIN_STILL_WOUND_MIN`].
pub const STILL_WOUND_MIN: f64 = 0.4;
/// Torque gain at or below which the bar counts as sprung back: the wind-up raises the peak
/// by no more than 5 %, within what a hand torque wrench may deviate (ISO 6789-1:2017,
/// permissible deviation ±4 % or ±6 % by type and class, *from memory*), so not worth acting
/// on.
pub const GAIN_SPRANG_BACK_MAX: f64 = 1.05;
/// Torque gain above which the bar counts as still wound up: twice that margin.
pub const GAIN_STILL_WOUND_MIN: f64 = 1.10;

/// The measured verdict from a torque gain.
pub fn recovery_from_gain(gain: f64) -> MeasuredRecovery {
    if gain <= GAIN_SPRANG_BACK_MAX {
        MeasuredRecovery::SprangBack
    } else if gain <= GAIN_STILL_WOUND_MIN {
        MeasuredRecovery::Partial
    } else {
        MeasuredRecovery::StillWound
    }
}

fn agreement(model: Option<ModelRecovery>, measured: Option<MeasuredRecovery>) -> Option<bool> {
    match (model, measured) {
        (Some(m), Some(x)) => Some(match m {
            ModelRecovery::WellWithin => x == MeasuredRecovery::SprangBack,
            ModelRecovery::Within => x != MeasuredRecovery::StillWound,
            ModelRecovery::TooSlow => x != MeasuredRecovery::SprangBack,
        }),
        _ => None,
    }
}

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
        Some(self.verdict_from_fraction(median(&intervals)?, median(&fractions)))
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
        let agrees = agreement(model, measured);
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
            measured_from: residual_fraction.map(|_| "residual_fraction"),
            held_blows: 0,
            torque_gain_median_ratio: None,
            torque_gain_max_ratio: None,
            blow_energy_median_j: None,
            decay_method: None,
            decay_fits: 0,
            decay_time_constant_ms: None,
            measured_back_damping_nms_per_rad: None,
            measured_damping_ratio: None,
            measured_natural_frequency_hz: None,
            rig_back_damping_nms_per_rad: self.back_damping_nms_per_rad,
            damping_rig_vs_measured_pct: None,
        }
    }

    /// The spring-back verdict from what the clip measured ([`UnwindMeasurement`]): the
    /// median torque gain over blows where the nut was held decides (else, with no held blow,
    /// the residual over the peak over held blows; else none), and the rig's inertia and
    /// damping, when given, are a prediction compared with it. `None` with fewer than two
    /// onsets or a non-increasing onset time.
    pub fn springback_verdict_measured(
        &self,
        onsets_s: &[f64],
        m: &UnwindMeasurement,
    ) -> Option<SpringbackVerdict> {
        if onsets_s.len() < 2 {
            return None;
        }
        let intervals: Vec<f64> = onsets_s.windows(2).map(|w| w[1] - w[0]).collect();
        if intervals.iter().any(|d| !(d.is_finite() && *d > 0.0)) {
            return None;
        }
        let mut v = self.verdict_from_fraction(median(&intervals)?, m.residual_fraction_held);
        if let Some(g) = m.torque_gain_median {
            v.measured = Some(recovery_from_gain(g));
            v.measured_from = Some("torque_gain");
        }
        v.agrees = agreement(v.model, v.measured);
        v.held_blows = m.held_blows;
        v.torque_gain_median_ratio = m.torque_gain_median;
        v.torque_gain_max_ratio = m.torque_gain_max;
        v.blow_energy_median_j = m.energy_median_j;
        v.decay_method = m.decay_method;
        v.decay_fits = m.decay_fits;
        v.decay_time_constant_ms = m.decay_rate_per_s.map(|l| 1e3 / l);
        v.measured_back_damping_nms_per_rad = m.back_damping_nms_per_rad;
        v.measured_damping_ratio = m.damping_ratio;
        v.measured_natural_frequency_hz = m.natural_frequency_hz;
        v.damping_rig_vs_measured_pct =
            match (v.rig_back_damping_nms_per_rad, m.back_damping_nms_per_rad) {
                (Some(r), Some(c)) if c > 0.0 => Some(100.0 * (r / c - 1.0)),
                _ => None,
            };
        v.sentence = measured_sentence(&v, m.damping_includes_inertia);
        Some(v)
    }
}

fn pct(gain: f64) -> String {
    format!("{:.1} %", 100.0 * (gain - 1.0))
}

/// The verdict's sentence when it rests on the clip's own measurement.
fn measured_sentence(v: &SpringbackVerdict, with_inertia: bool) -> String {
    let interval = ms(v.blow_interval_s);
    let mut out = match (v.torque_gain_median_ratio, v.measured) {
        (Some(g), Some(x)) => {
            let state = match x {
                MeasuredRecovery::SprangBack => "the bar springs back between blows",
                MeasuredRecovery::Partial => "the bar springs back only partly between blows",
                MeasuredRecovery::StillWound => {
                    "the next blow lands while the bar is still wound up"
                }
            };
            format!(
                "Over {} blow(s) with the nut held, the wind-up left from the blow before raised the peak torque by {} (median; at most {}), so {state} ({interval} apart).",
                v.held_blows,
                pct(g),
                pct(v.torque_gain_max_ratio.unwrap_or(g))
            )
        }
        (None, Some(x)) => format!(
            "No held blow's gain could be measured; the residual twist is {:.0} % of the peak, so the bar {} ({interval} between blows).",
            100.0 * v.residual_fraction.unwrap_or(f64::NAN),
            match x {
                MeasuredRecovery::SprangBack => "springs back",
                MeasuredRecovery::Partial => "springs back only partly",
                MeasuredRecovery::StillWound => "is still wound up when the next blow lands",
            }
        ),
        _ => format!(
            "No blow held the nut, so the torque gain from residual wind-up was not measured (it needs blows where the nut did not turn; {interval} between blows)."
        ),
    };
    if let Some(tau) = v.decay_time_constant_ms {
        out.push_str(&format!(
            " The unwind decays with a time constant of {tau:.1} ms"
        ));
        if let Some(c) = v.measured_back_damping_nms_per_rad {
            out.push_str(&format!(
                " (back-drive damping {c:.1} N·m·s/rad{})",
                if with_inertia {
                    ""
                } else {
                    ", without the inertia term"
                }
            ));
        }
        out.push('.');
    }
    match (v.model, v.springback_s, v.agrees) {
        (Some(_), Some(t), Some(a)) => out.push_str(&format!(
            " The rig's model springs back in {}, which {} the measurement{}.",
            ms(t),
            if a { "agrees with" } else { "disagrees with" },
            v.damping_rig_vs_measured_pct
                .map(|p| if p.abs() < 0.5 {
                    "; its damping matches the measured one to within 0.5 %".to_string()
                } else {
                    format!("; its damping is {p:+.0} % off the measured one")
                })
                .unwrap_or_default()
        )),
        (Some(_), Some(t), None) => {
            out.push_str(&format!(" The rig's model springs back in {}.", ms(t)))
        }
        _ => {}
    }
    out
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

#[cfg(test)]
mod tests {
    use super::*;
    use crate::mechanics::InertiaSource;
    use crate::mechanics::bar::InertiaPart;
    use crate::mechanics::{BarSpec, SectionSpec};
    use approx::assert_relative_eq;

    use crate::mechanics::c5;

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
        // Synthetic check with known physics: the project's simulated bench (tools/scenes/src/synth,
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
}
