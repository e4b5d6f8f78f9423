//! Sub-frame timing: when, between two frames, an end started to move.
//!
//! In: an angle series (degrees per sample), the onset sample found by
//! [`crate::segment`] (the first sample clearly above the rest level), the rest level before
//! it and one sample's noise. Out: the start of the motion in fractional samples, and its
//! noise-limited standard uncertainty.
//!
//! - **Drive end (impulsive start).** A hammer blow shorter than a frame hands the drive end a
//!   velocity at once, so just after the impact θ(t) − θ₀ ≈ v·(t − t₀) (free vibration after an
//!   impulse, θ = (H/√(kI))·sin(ωn·t); Rao, *Mechanical Vibrations*, 5th ed., §4.2, response to
//!   an impulse, *from memory*). The start is the line through the first two moving samples
//!   carried back to the rest level: t₀ = i − (yᵢ − base)/(yᵢ₊₁ − yᵢ).
//! - **Nut end (start from rest under a net torque).** The nut breaks away when the bar's
//!   torque passes the static friction torque; the kinetic friction is lower, so it starts with
//!   a finite angular acceleration α from rest: θ − θ₀ ≈ ½α·(t − t₀)² (uniform acceleration,
//!   any dynamics text). √(θ − θ₀) is then linear in t, and the start is that line carried back
//!   to zero: t₀ = i − √(yᵢ − base)/(√(yᵢ₊₁ − base) − √(yᵢ − base)).
//!
//! The start must lie within the two frames before the onset sample (an onset sample is at
//! most the second moving sample); further back, the motion does not follow the assumed form
//! and no sub-frame time is given. Noise: a change δ in yᵢ moves t₀ by δ/slope, so the standard
//! uncertainty is σ·√2/slope in samples for the line (two samples' noise) and the same through
//! the square root's derivative for the parabola. Curvature of the true motion over the first
//! two samples is not in this figure; docs/mechanics.md gives the errors measured on rendered
//! clips.
//!
//! Part of the mechanics stage: it must never import report, `analyze`, `batch`, `find_marks`,
//! `calibrate` or the CLI.

/// How an end starts to move.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Start {
    /// With a velocity (impulse): linear.
    Impulsive,
    /// From rest with an acceleration: parabolic.
    FromRest,
}

/// The start of motion in fractional samples and its standard uncertainty in samples.
/// `None` when the two samples from `onset` are missing or do not rise.
pub fn motion_start(
    y: &[Option<f64>],
    onset: usize,
    base: f64,
    sigma: f64,
    start: Start,
) -> Option<(f64, f64)> {
    let a = (*y.get(onset)?)? - base;
    let b = (*y.get(onset + 1)?)? - base;
    if !(a.is_finite() && b.is_finite() && b > a && a >= 0.0) {
        return None;
    }
    let i = onset as f64;
    let sigma = sigma.max(0.0);
    let (t0, u) = match start {
        Start::Impulsive => {
            let s = b - a;
            (i - a / s, sigma * 2f64.sqrt() / s)
        }
        Start::FromRest => {
            let (ra, rb) = (a.sqrt(), b.sqrt());
            let s = rb - ra;
            // d√y/dy = 1/(2√y): noise σ on y is σ/(2√y) on √y (at least σ/… for y near 0).
            let su = sigma / (2.0 * rb.max(1e-9));
            (i - ra / s, su * 2f64.sqrt() / s)
        }
    };
    // An onset sample is at most the second moving sample: a start further back means the
    // motion does not follow the assumed form, and no sub-frame time is given.
    (t0.is_finite() && t0 > i - 2.0).then_some((t0.min(i), u))
}

/// The value of `y` at fractional sample `t`, linear between samples.
pub fn value_at(y: &[Option<f64>], t: f64) -> Option<f64> {
    if !(t.is_finite() && t >= 0.0) {
        return None;
    }
    let i = t.floor() as usize;
    let f = t - i as f64;
    let a = (*y.get(i)?)?;
    if f <= 0.0 {
        return Some(a);
    }
    let b = (*y.get(i + 1)?)?;
    Some(a + f * (b - a))
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    #[test]
    fn a_line_is_carried_back_exactly() {
        // Motion starting at sample 9.3 with 2°/sample: y = 2(t − 9.3) after it.
        let y: Vec<Option<f64>> = (0..20)
            .map(|i| Some(5.0 + (2.0 * (i as f64 - 9.3)).max(0.0)))
            .collect();
        let (t0, u) = motion_start(&y, 10, 5.0, 0.0, Start::Impulsive).unwrap();
        assert_relative_eq!(t0, 9.3, epsilon = 1e-12);
        assert_eq!(u, 0.0);
    }

    #[test]
    fn a_parabola_is_carried_back_exactly() {
        // Uniform acceleration from rest at sample 9.6: y = 0.5·3·(t − 9.6)².
        let y: Vec<Option<f64>> = (0..20)
            .map(|i| {
                let d = (i as f64 - 9.6).max(0.0);
                Some(1.0 + 1.5 * d * d)
            })
            .collect();
        let (t0, u) = motion_start(&y, 10, 1.0, 0.01, Start::FromRest).unwrap();
        assert_relative_eq!(t0, 9.6, epsilon = 1e-12);
        assert!(u > 0.0 && u < 0.1);
        // The line would place it later: the parabola's first samples are slow.
        let (tl, _) = motion_start(&y, 10, 1.0, 0.0, Start::Impulsive).unwrap();
        assert!(tl > 9.6);
    }

    #[test]
    fn interpolates_between_samples() {
        let y = [Some(1.0), Some(3.0), None];
        assert_eq!(value_at(&y, 0.25), Some(1.5));
        assert_eq!(value_at(&y, 1.0), Some(3.0));
        assert_eq!(value_at(&y, 1.5), None);
    }
}
