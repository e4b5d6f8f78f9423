//! Spring-back measured from the clip: each unwind's decay between blows, the wind-up left
//! at each strike, the torque gain that wind-up causes and the energy each blow put in.
//!
//! In: the absolute twist and the nut angle per sample (degrees), the frame rate, and per
//! blow its span, peak twist, residual and whether the nut was held. Out:
//! [`UnwindMeasurement`] (SI inside). The derivations are in docs/mechanics.md, "Spring-back
//! measured from the clip".
//!
//! - **Decay.** Between blows the nut is at rest and the drive end unwinds against the tool's
//!   resistance to turning back: I·θ̈ + c·θ̇ + k·θ = 0, released from rest at the peak (Rao,
//!   *Mechanical Vibrations*, 5th ed., §2.6, viscously damped free vibration). Overdamped
//!   (ζ > 1), the response is a sum of two decaying exponentials; the fast one, rate ≈ c/I,
//!   is gone within a frame or two at the rates cameras film, so what the clip shows is the
//!   slow one, θ(t) = A·e^(−λt) with λ = ωn·(ζ − √(ζ² − 1)). It is fitted by least squares
//!   (λ by golden-section search, A in closed form). Since λ is a root of I·λ² − c·λ + k = 0,
//!   the damping follows as c = k/λ + I·λ (the I·λ term needs the rig's inertia and is left
//!   out without it; it is small when ζ is large). Underdamped (the twist swings back up
//!   after a minimum), the logarithmic decrement over n successive maxima,
//!   δ = (1/n)·ln(x₀/xₙ), gives ζ = δ/√(4π² + δ²) and the damped period gives
//!   ωn = ωd/√(1 − ζ²) (Rao, §2.6.3; Thomson & Dahleh, *Theory of Vibration with
//!   Applications*, 5th ed., §2.6 — section numbers *from memory*).
//! - **Gain.** If each blow adds a fixed energy E to a held bar already wound to θr, the peak
//!   satisfies ½kθp² = ½kθr² + E, so θp² = θr² + 2E/k; the same blow on an unwound bar
//!   would peak at √(θp² − θr²). The torque gain the residual wind-up causes is therefore
//!   θp/√(θp² − θr²) and the energy E = ½k(θp² − θr²). Only blows where the nut was held
//!   qualify: a slipping nut takes part of the energy into the joint.
//!
//! Part of the mechanics stage: it must never import report, `analyze`, `batch`, `find_marks`,
//! `calibrate` or the CLI.

use crate::stats::median;
use crate::units::{Angle, Stiffness};

/// Fewest samples in an unwind for a decay fit.
pub const DECAY_MIN_SAMPLES: usize = 6;

/// How an unwind's decay was measured.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum DecayMethod {
    /// Least-squares fit of A·e^(−λt) (overdamped unwind).
    Exponential,
    /// Logarithmic decrement over successive maxima (underdamped unwind).
    LogDecrement,
}

/// One unwind's decay, as measured.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct DecayFit {
    /// How it was measured.
    pub method: DecayMethod,
    /// Decay rate of the envelope, 1/s: λ (exponential) or ζ·ωn (log decrement).
    pub rate_per_s: f64,
    /// Damping ratio (log decrement only; the exponential alone does not fix it).
    pub damping_ratio: Option<f64>,
    /// Undamped natural frequency, Hz (log decrement only).
    pub natural_frequency_hz: Option<f64>,
    /// Samples used.
    pub samples: usize,
}

impl DecayFit {
    /// 1/rate, s.
    pub fn time_constant_s(&self) -> f64 {
        1.0 / self.rate_per_s
    }
}

/// One blow as the unwind measurement needs it (sample indices into the trace).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct UnwindBlow {
    /// Onset sample.
    pub onset: usize,
    /// First sample after the unwind (the next onset, or the end of the trace).
    pub end: usize,
    /// Peak twist, degrees.
    pub peak_deg: Option<f64>,
    /// Twist just before this blow's onset (the wind-up it struck), degrees.
    pub pre_strike_deg: Option<f64>,
    /// The nut did not advance in this blow.
    pub held: bool,
}

/// What the clip says about one blow's spring-back.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct BlowUnwind {
    /// The nut was held (did not advance) in this blow.
    pub held: bool,
    /// Twist just before this blow (the residual wind-up it struck).
    pub pre_strike_twist: Option<Angle>,
    /// θp/√(θp² − θr²): how much the wind-up left by the last blow raised this peak (held
    /// blows only).
    pub torque_gain: Option<f64>,
    /// ½k(θp² − θr²), J (held blows with a stiffness only).
    pub energy_j: Option<f64>,
    /// The decay of the unwind after this blow's peak.
    pub decay: Option<DecayFit>,
}

/// Spring-back over a clip.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct UnwindMeasurement {
    /// Per blow, in blow order.
    pub blows: Vec<BlowUnwind>,
    /// Median decay rate over the fitted unwinds, 1/s.
    pub decay_rate_per_s: Option<f64>,
    /// Which method the median is over (the more common one).
    pub decay_method: Option<DecayMethod>,
    /// Unwinds fitted.
    pub decay_fits: usize,
    /// Back-drive damping from the decay: c = k/λ + I·λ (exponential) or 2ζ·√(k·I) with
    /// I = k/ωn² (log decrement), N·m·s/rad.
    pub back_damping_nms_per_rad: Option<f64>,
    /// Whether the I·λ term was included (the rig gave the inertia).
    pub damping_includes_inertia: bool,
    /// Damping ratio: measured (log decrement) or from the measured c and the rig's inertia.
    pub damping_ratio: Option<f64>,
    /// Natural frequency, Hz: measured (log decrement) only.
    pub natural_frequency_hz: Option<f64>,
    /// Blows with the nut held.
    pub held_blows: usize,
    /// Median torque gain over held blows.
    pub torque_gain_median: Option<f64>,
    /// Largest torque gain over held blows.
    pub torque_gain_max: Option<f64>,
    /// Median blow energy over held blows, J.
    pub energy_median_j: Option<f64>,
    /// Median residual over peak twist over held blows that have a next blow.
    pub residual_fraction_held: Option<f64>,
}

/// θp/√(θp² − θr²) for a peak `peak` struck on a wind-up `pre` (any angle unit); a negative
/// wind-up counts as none. `None` when the peak is not above the wind-up.
pub fn torque_gain(peak: f64, pre: f64) -> Option<f64> {
    let r = pre.max(0.0);
    let d = peak * peak - r * r;
    (peak.is_finite() && r.is_finite() && peak > 0.0 && d > 0.0).then(|| peak / d.sqrt())
}

/// ½k(θp² − θr²), J, for angles in radians and k in N·m/rad; a negative wind-up counts as none.
pub fn blow_energy_j(k: Stiffness, peak: Angle, pre: Angle) -> Option<f64> {
    let (p, r) = (peak.rad(), pre.rad().max(0.0));
    let e = 0.5 * k.nm_per_rad() * (p * p - r * r);
    (e.is_finite() && e > 0.0).then_some(e)
}

/// Least-squares fit of y ≈ A·e^(−λ·t) for t = i/fps over `y`; returns (λ, A, rms residual).
/// λ is searched over [1e-3/s, fps] by golden section on ln λ (the sum of squares is
/// unimodal in λ for data of one sign).
pub fn fit_exponential(y: &[f64], fps: f64) -> Option<(f64, f64, f64)> {
    if y.len() < 3 || !(fps.is_finite() && fps > 0.0) || y.iter().any(|v| !v.is_finite()) {
        return None;
    }
    let sse = |lam: f64| {
        let (mut se, mut sy) = (0.0, 0.0);
        for (i, v) in y.iter().enumerate() {
            let e = (-lam * i as f64 / fps).exp();
            se += e * e;
            sy += e * v;
        }
        let a = sy / se;
        let r: f64 = y
            .iter()
            .enumerate()
            .map(|(i, v)| (v - a * (-lam * i as f64 / fps).exp()).powi(2))
            .sum();
        (r, a)
    };
    let (mut lo, mut hi) = ((1e-3f64).ln(), fps.ln());
    let g = 0.5 * (5f64.sqrt() - 1.0);
    let (mut x1, mut x2) = (hi - g * (hi - lo), lo + g * (hi - lo));
    let (mut f1, mut f2) = (sse(x1.exp()).0, sse(x2.exp()).0);
    for _ in 0..200 {
        if hi - lo < 1e-10 {
            break;
        }
        if f1 <= f2 {
            hi = x2;
            x2 = x1;
            f2 = f1;
            x1 = hi - g * (hi - lo);
            f1 = sse(x1.exp()).0;
        } else {
            lo = x1;
            x1 = x2;
            f1 = f2;
            x2 = lo + g * (hi - lo);
            f2 = sse(x2.exp()).0;
        }
    }
    let lam = (0.5 * (lo + hi)).exp();
    let (r, a) = sse(lam);
    Some((lam, a, (r / y.len() as f64).sqrt()))
}

/// Successive maxima of `y` (3-point, refined by the parabola through them): (position in
/// samples, value).
fn maxima(y: &[f64]) -> Vec<(f64, f64)> {
    (1..y.len().saturating_sub(1))
        .filter(|&i| y[i] > y[i - 1] && y[i] >= y[i + 1])
        .map(|i| {
            let (a, b, c) = (y[i - 1], y[i], y[i + 1]);
            let den = a - 2.0 * b + c;
            let d = if den < 0.0 { 0.5 * (a - c) / den } else { 0.0 };
            (i as f64 + d, b - 0.25 * (a - c) * d)
        })
        .collect()
}

/// Logarithmic decrement over the successive maxima of `y` (the first maximum is the
/// first sample when it is the highest of its neighbours): δ = (1/n)·ln(x₀/xₙ),
/// ζ = δ/√(4π² + δ²), ωd = 2π·n/(t_n − t₀), ωn = ωd/√(1 − ζ²) (Rao, §2.6.3). Returns
/// (ζ, ωn in rad/s, maxima used). Needs two maxima above `floor`.
pub fn log_decrement(y: &[f64], fps: f64, floor: f64) -> Option<(f64, f64, usize)> {
    let mut peaks = Vec::new();
    if y.len() >= 2 && y[0] >= y[1] {
        peaks.push((0.0, y[0]));
    }
    peaks.extend(maxima(y));
    let peaks: Vec<_> = peaks.into_iter().take_while(|p| p.1 > floor).collect();
    let n = peaks.len().checked_sub(1).filter(|&n| n >= 1)?;
    let (t0, x0) = peaks[0];
    let (tn, xn) = peaks[n];
    let delta = (x0 / xn).ln() / n as f64;
    let period_s = (tn - t0) / (n as f64 * fps);
    if !(delta.is_finite() && delta > 0.0 && period_s > 0.0) {
        return None;
    }
    let two_pi = 2.0 * std::f64::consts::PI;
    let zeta = delta / (two_pi * two_pi + delta * delta).sqrt();
    let wn = two_pi / period_s / (1.0 - zeta * zeta).sqrt();
    Some((zeta, wn, n + 1))
}

/// Whether the twist swings back up after a minimum by more than `tol` (an underdamped
/// unwind).
fn swings_back(y: &[f64], tol: f64) -> bool {
    let mut lowest = f64::INFINITY;
    y.iter().any(|&v| {
        lowest = lowest.min(v);
        v - lowest > tol
    })
}

/// The unwind after one blow's peak: the samples from just after the peak (and after the
/// nut came to rest) to just before `b.end`, and its fit.
fn fit_unwind(
    twist: &[Option<f64>],
    nut: &[Option<f64>],
    b: &UnwindBlow,
    fps: f64,
    twist_sigma: f64,
    nut_tol: f64,
) -> Option<DecayFit> {
    let end = b.end.min(twist.len()).min(nut.len());
    if b.onset >= end {
        return None;
    }
    let peak = (b.onset..end)
        .filter_map(|i| Some((i, twist[i]?)))
        .max_by(|a, c| a.1.total_cmp(&c.1))?
        .0;
    // The nut's level at the end of the unwind; the fit starts after its last move.
    let tail: Vec<f64> = nut[end.saturating_sub(4).max(peak)..end]
        .iter()
        .flatten()
        .copied()
        .collect();
    let rest = median(&tail)?;
    let moved = (peak..end)
        .rev()
        .find(|&i| nut[i].is_some_and(|v| (v - rest).abs() > nut_tol));
    // One more sample after the peak or the nut's last move lets the fast mode die out.
    let start = moved.map_or(peak + 1, |i| i + 2).max(peak + 1);
    if end < start + DECAY_MIN_SAMPLES {
        return None;
    }
    let y: Vec<f64> = twist[start..end].iter().copied().collect::<Option<_>>()?;
    let tol = 3.0 * twist_sigma;
    if swings_back(&y, tol) {
        let from_peak: Vec<f64> = twist[peak..end].iter().copied().collect::<Option<_>>()?;
        let (zeta, wn, used) = log_decrement(&from_peak, fps, tol)?;
        return Some(DecayFit {
            method: DecayMethod::LogDecrement,
            rate_per_s: zeta * wn,
            damping_ratio: Some(zeta),
            natural_frequency_hz: Some(wn / (2.0 * std::f64::consts::PI)),
            samples: used,
        });
    }
    let (lam, a, _rms) = fit_exponential(&y, fps)?;
    // Resolved only when the fitted curve falls by more than the noise over the window.
    let fall = a * (1.0 - (-lam * (y.len() - 1) as f64 / fps).exp());
    (a > 0.0 && fall > tol).then_some(DecayFit {
        method: DecayMethod::Exponential,
        rate_per_s: lam,
        damping_ratio: None,
        natural_frequency_hz: None,
        samples: y.len(),
    })
}

/// Measures spring-back over a clip. `twist_deg` is the absolute twist and `nut_deg` the
/// nut angle per sample; `twist_sigma_deg`/`nut_sigma_deg` one sample's noise; `stiffness`
/// and `inertia_kg_m2` the bar's (either may be unknown).
pub fn measure(
    twist_deg: &[Option<f64>],
    nut_deg: &[Option<f64>],
    fps: f64,
    blows: &[UnwindBlow],
    (twist_sigma_deg, nut_sigma_deg): (f64, f64),
    stiffness: Option<Stiffness>,
    inertia_kg_m2: Option<f64>,
) -> UnwindMeasurement {
    let nut_tol = (3.0 * nut_sigma_deg).max(0.05);
    let per: Vec<BlowUnwind> = blows
        .iter()
        .map(|b| {
            let decay = fit_unwind(twist_deg, nut_deg, b, fps, twist_sigma_deg, nut_tol);
            let (gain, energy) = match (b.held, b.peak_deg, b.pre_strike_deg) {
                (true, Some(p), Some(r)) => (
                    torque_gain(p, r),
                    stiffness
                        .and_then(|k| blow_energy_j(k, Angle::from_deg(p), Angle::from_deg(r))),
                ),
                _ => (None, None),
            };
            BlowUnwind {
                held: b.held,
                pre_strike_twist: b.pre_strike_deg.map(Angle::from_deg),
                torque_gain: gain,
                energy_j: energy,
                decay,
            }
        })
        .collect();
    let fits: Vec<DecayFit> = per.iter().filter_map(|b| b.decay).collect();
    let n_log = fits
        .iter()
        .filter(|f| f.method == DecayMethod::LogDecrement)
        .count();
    let method = (!fits.is_empty()).then(|| {
        if 2 * n_log > fits.len() {
            DecayMethod::LogDecrement
        } else {
            DecayMethod::Exponential
        }
    });
    let chosen: Vec<&DecayFit> = fits.iter().filter(|f| Some(f.method) == method).collect();
    let rate = median(&chosen.iter().map(|f| f.rate_per_s).collect::<Vec<_>>());
    let k = stiffness.map(Stiffness::nm_per_rad);
    let (c, zeta, fnat) = match method {
        Some(DecayMethod::LogDecrement) => {
            let z = median(
                &chosen
                    .iter()
                    .filter_map(|f| f.damping_ratio)
                    .collect::<Vec<_>>(),
            );
            let f = median(
                &chosen
                    .iter()
                    .filter_map(|f| f.natural_frequency_hz)
                    .collect::<Vec<_>>(),
            );
            let c = match (k, z, f) {
                (Some(k), Some(z), Some(f)) => {
                    let wn = 2.0 * std::f64::consts::PI * f;
                    // I = k/ωn², c = 2ζ√(kI) = 2ζk/ωn.
                    Some(2.0 * z * k / wn)
                }
                _ => None,
            };
            (c, z, f)
        }
        Some(DecayMethod::Exponential) => {
            let c = k
                .zip(rate)
                .map(|(k, l)| k / l + inertia_kg_m2.unwrap_or(0.0) * l);
            let z = c
                .zip(k)
                .zip(inertia_kg_m2)
                .map(|((c, k), i)| c / (2.0 * (k * i).sqrt()));
            (c, z, None)
        }
        None => (None, None, None),
    };
    let held: Vec<(usize, &BlowUnwind)> = per.iter().enumerate().filter(|(_, b)| b.held).collect();
    let gains: Vec<f64> = held.iter().filter_map(|(_, b)| b.torque_gain).collect();
    let fractions: Vec<f64> = held
        .iter()
        .filter(|(i, _)| i + 1 < blows.len())
        .filter_map(|(i, _)| {
            let p = blows[*i].peak_deg?;
            let r = blows[i + 1].pre_strike_deg?;
            (p > 0.0).then(|| (r / p).max(0.0))
        })
        .collect();
    UnwindMeasurement {
        decay_rate_per_s: rate,
        decay_method: method,
        decay_fits: chosen.len(),
        back_damping_nms_per_rad: c.filter(|c| c.is_finite() && *c > 0.0),
        damping_includes_inertia: method == Some(DecayMethod::LogDecrement)
            || inertia_kg_m2.is_some(),
        damping_ratio: zeta,
        natural_frequency_hz: fnat,
        held_blows: held.len(),
        torque_gain_median: median(&gains),
        torque_gain_max: gains
            .iter()
            .copied()
            .fold(None, |m: Option<f64>, g| Some(m.map_or(g, |m| m.max(g)))),
        energy_median_j: median(
            &held
                .iter()
                .filter_map(|(_, b)| b.energy_j)
                .collect::<Vec<_>>(),
        ),
        residual_fraction_held: median(&fractions),
        blows: per,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;
    use std::f64::consts::PI;

    /// Free response from rest at θ₀ of I·θ̈ + c·θ̇ + k·θ = 0 (Rao, *Mechanical Vibrations*,
    /// 5th ed., §2.6: under- and overdamped solutions).
    fn released(t: f64, th0: f64, wn: f64, z: f64) -> f64 {
        if z < 1.0 {
            let wd = wn * (1.0 - z * z).sqrt();
            th0 * (-z * wn * t).exp() * ((wd * t).cos() + z * wn / wd * (wd * t).sin())
        } else {
            let r = (z * z - 1.0).sqrt();
            let (s1, s2) = (-wn / (z + r), -wn * (z + r));
            th0 * (s2 * (s1 * t).exp() - s1 * (s2 * t).exp()) / (s2 - s1)
        }
    }

    #[test]
    fn exponential_fit_recovers_the_overdamped_rate_and_damping() {
        // Demo-like bench: k = 709.7 N·m/rad, I = 0.002 kg·m², c = 22 N·m·s/rad (ζ ≈ 9.2);
        // slow root λ = ωn(ζ − √(ζ²−1)) (Rao §2.6, overdamped case), c = k/λ + I·λ.
        let (k, i, c): (f64, f64, f64) = (709.7, 0.002, 22.0);
        let wn = (k / i).sqrt();
        let z = c / (2.0 * (k * i).sqrt());
        let fps = 2000.0;
        let y: Vec<f64> = (2..40)
            .map(|n| released(n as f64 / fps, 12.0, wn, z))
            .collect();
        let (lam, _, rms) = fit_exponential(&y, fps).unwrap();
        let lam_true = wn * (z - (z * z - 1.0).sqrt());
        assert_relative_eq!(lam, lam_true, max_relative = 1e-3);
        assert!(rms < 1e-3);
        assert_relative_eq!(k / lam + i * lam, c, max_relative = 1e-3);
    }

    #[test]
    fn log_decrement_recovers_zeta_and_wn() {
        // ζ = 0.05, f_n = 95 Hz sampled at 4,000 fps: δ = 2πζ/√(1−ζ²) (Rao §2.6.3).
        let (z, f) = (0.05, 95.0);
        let wn = 2.0 * PI * f;
        let fps = 4000.0;
        let y: Vec<f64> = (0..160)
            .map(|n| released(n as f64 / fps, 10.0, wn, z))
            .collect();
        let (zeta, w, used) = log_decrement(&y, fps, 0.1).unwrap();
        assert!(used >= 3);
        assert_relative_eq!(zeta, z, max_relative = 0.02);
        assert_relative_eq!(w, wn, max_relative = 0.01);
        assert!(swings_back(&y, 0.1));
    }

    #[test]
    fn gain_and_energy_follow_the_energy_balance() {
        // θp² = θr² + 2E/k: a bar at 6° struck with the energy that alone gives 8° peaks at 10°;
        // gain 10/8 = 1.25, E = ½·k·(8° in rad)².
        assert_relative_eq!(torque_gain(10.0, 6.0).unwrap(), 1.25, max_relative = 1e-12);
        assert_eq!(torque_gain(10.0, -1.0), Some(1.0));
        assert_eq!(torque_gain(5.0, 6.0), None);
        let k = Stiffness::from_nm_per_rad(700.0);
        let e = blow_energy_j(k, Angle::from_deg(10.0), Angle::from_deg(6.0)).unwrap();
        assert_relative_eq!(
            e,
            0.5 * 700.0 * 8f64.to_radians().powi(2),
            max_relative = 1e-12
        );
    }

    #[test]
    fn measure_uses_held_blows_for_the_gain_and_every_unwind_for_the_decay() {
        // Three blows 36 samples apart at 2,000 fps on a bar that decays with τ = 31 ms
        // (rendered-free analytic trace: a check against the model's closed form).
        let fps = 2000.0;
        let tau = 0.031;
        let mut twist = vec![Some(0.0); 10];
        let mut nut = vec![Some(0.0); 10];
        let mut pre = 0.0f64;
        let mut blows = Vec::new();
        for b in 0..3 {
            let onset = twist.len();
            let peak = (pre * pre + 64.0f64).sqrt(); // 8° of energy on the wind-up
            for n in 0..36 {
                let v = if n < 3 {
                    pre + (peak - pre) * (n + 1) as f64 / 3.0
                } else {
                    peak * (-(n - 2) as f64 / fps / tau).exp()
                };
                twist.push(Some(v));
                nut.push(Some(if b == 0 && n < 3 { n as f64 } else { 3.0 }));
            }
            blows.push(UnwindBlow {
                onset,
                end: twist.len(),
                peak_deg: Some(peak),
                pre_strike_deg: Some(pre),
                held: b > 0,
            });
            pre = twist.last().unwrap().unwrap();
        }
        let k = Stiffness::from_nm_per_rad(709.7);
        let m = measure(&twist, &nut, fps, &blows, (0.01, 0.01), Some(k), None);
        assert_eq!(m.held_blows, 2);
        assert!(m.blows[0].torque_gain.is_none());
        let g = m.blows[1].torque_gain.unwrap();
        let p1 = blows[1].peak_deg.unwrap();
        assert_relative_eq!(g, p1 / 8.0, max_relative = 1e-9);
        assert_relative_eq!(
            m.blows[2].energy_j.unwrap(),
            0.5 * 709.7 * 8f64.to_radians().powi(2),
            max_relative = 1e-9
        );
        assert_eq!(m.decay_fits, 3);
        assert_relative_eq!(1.0 / m.decay_rate_per_s.unwrap(), tau, max_relative = 1e-3);
        // Without the inertia c = k/λ = k·τ.
        assert_relative_eq!(
            m.back_damping_nms_per_rad.unwrap(),
            709.7 * tau,
            max_relative = 1e-3
        );
        assert!(!m.damping_includes_inertia);
    }
}
