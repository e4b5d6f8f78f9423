//! A blow's peak twist from noisy samples: quadratic Savitzky–Golay smoothing, a least-squares
//! parabola through the top of the peak, whether the peak fell on or beside a lost or missing
//! frame, and the 95 % intervals of the peak twist and its torque. Part of the mechanics
//! stage: it must never import report, `analyze`, `batch` or the CLI.

use crate::track::Trace;
use crate::units::{Angle, Stiffness, Torque};

/// A peak twist's 95 % interval and its torque's.
pub(super) type PeakIntervals = (Option<(Angle, Angle)>, Option<(Torque, Torque)>);

/// 95 % intervals of a peak twist and its torque: ±1.96σ from one sample's twist noise and
/// the systematic uncertainty common to every reading (the zero's and the tracker's validated
/// term; and, for the torque, the stiffness's relative uncertainty), with
/// the upper end raised by the under-read fraction of the peak (a sampled peak can only read
/// low) and both ends moved out by a rolling shutter's skew bound in degrees (a bound, not a
/// standard deviation, so added in full: `bounds` = (under-read fraction, skew degrees)).
/// Independent standard uncertainties add in quadrature (JCGM 100:2008, §5.1.2).
pub(super) fn peak_intervals(
    peak: Option<Angle>,
    twist_sigma_deg: f64,
    systematic_sigma_deg: f64,
    bounds: (f64, f64),
    stiffness: Option<(Stiffness, f64)>,
) -> PeakIntervals {
    let (under_read, skew_deg) = (bounds.0, bounds.1.max(0.0));
    let Some(p) = peak.map(Angle::deg).filter(|p| p.is_finite()) else {
        return (None, None);
    };
    let s_tw = twist_sigma_deg.hypot(systematic_sigma_deg);
    let up = under_read.max(0.0) * p.abs();
    let tw = (
        Angle::from_deg(p - 1.96 * s_tw - skew_deg),
        Angle::from_deg(p + 1.96 * s_tw + up + skew_deg),
    );
    let tq = stiffness.map(|(k, rel)| {
        let kd = k.nm_per_deg();
        let t = kd * p;
        let s = (kd * s_tw).hypot(t.abs() * rel);
        (
            Torque::from_nm(t - 1.96 * s - kd * skew_deg),
            Torque::from_nm(t + 1.96 * s + kd * (up + skew_deg)),
        )
    });
    (Some(tw), tq)
}

/// Quadratic Savitzky–Golay smoothing with half-width `h` (window 2h+1), applied where the
/// whole window is measured; other samples are left as measured. Coefficients
/// cⱼ = (3(3h²+3h−1) − 15j²) / ((2h−1)(2h+1)(2h+3)) (Savitzky & Golay 1964, quadratic
/// smoothing; for h = 2 they are (−3, 12, 17, 12, −3)/35).
pub(super) fn savitzky_golay(v: &[Option<f64>], h: usize) -> Vec<Option<f64>> {
    if h == 0 {
        return v.to_vec();
    }
    let c = sg_coefficients(h);
    (0..v.len()).map(|i| sg_at(v, i, &c).or(v[i])).collect()
}

/// Quadratic Savitzky–Golay smoothing coefficients for half-width `h` (see
/// [`savitzky_golay`]).
fn sg_coefficients(h: usize) -> Vec<f64> {
    let hf = h as f64;
    let den = (2.0 * hf - 1.0) * (2.0 * hf + 1.0) * (2.0 * hf + 3.0);
    (0..=2 * h)
        .map(|j| {
            let jf = j as f64 - hf;
            (3.0 * (3.0 * hf * hf + 3.0 * hf - 1.0) - 15.0 * jf * jf) / den
        })
        .collect()
}

/// The smoothed value at `i` with coefficients `c` (window 2h+1 = `c.len()`), None when
/// the window leaves the trace or holds a lost sample.
fn sg_at(v: &[Option<f64>], i: usize, c: &[f64]) -> Option<f64> {
    let h = c.len() / 2;
    if i < h || i + h >= v.len() {
        return None;
    }
    c.iter()
        .enumerate()
        .try_fold(0.0, |acc, (j, cj)| Some(acc + cj * v[i + j - h]?))
}

/// True when a lost frame (a null twist) lies next to the blow's highest measured twist (one
/// frame either side, within `a..b`), or when no twist in the blow is measured. A blow's
/// twist pulse has one maximum (it rises while the blow drives the bar, then rings back), so
/// the true peak lies within a frame of the highest sample; only a lost frame there could
/// hold a higher value, and then the peak read from the others could be low. A lost frame
/// further down the rise or the fall cannot.
pub(super) fn peak_on_lost(twist: &[Option<f64>], a: usize, b: usize) -> bool {
    match highest_sample(twist, a, b) {
        None => true,
        Some(top) => {
            (top.saturating_sub(1).max(a)..=(top + 1).min(b - 1)).any(|i| twist[i].is_none())
        }
    }
}

/// True when the blow's highest measured twist (within `a..b`) has a neighbouring sample
/// more than [`GAP_FRAMES`] frame intervals away in time: a frame between them is missing
/// from the trace (set aside as repeated or interpolated, or never delivered by the camera),
/// and the true peak may lie in it, as it may on a lost frame ([`peak_on_lost`]). On a trace
/// thinned evenly to its captured rate the interval is the captured one, so only an uneven
/// gap counts.
pub(super) fn peak_beside_gap(trace: &Trace, twist: &[Option<f64>], a: usize, b: usize) -> bool {
    let fps = trace.time_base.fps_hz();
    let Some(top) = highest_sample(twist, a, b) else {
        return false;
    };
    let limit = GAP_FRAMES / fps;
    let gap = |i: usize, j: usize| trace.t_s(j) - trace.t_s(i) > limit;
    (top > 0 && gap(top - 1, top)) || (top + 1 < trace.len() && gap(top, top + 1))
}

/// Index of the highest measured twist within `a..b` (None when none is measured).
pub(super) fn highest_sample(twist: &[Option<f64>], a: usize, b: usize) -> Option<usize> {
    (a..b)
        .filter_map(|i| Some((i, twist[i]?)))
        .max_by(|x, y| x.1.total_cmp(&y.1))
        .map(|(i, _)| i)
}

/// Time between neighbouring samples, in frame intervals, above which a frame is taken to be
/// missing between them (one missing frame makes two intervals).
const GAP_FRAMES: f64 = 1.5;

/// The peak twist of one blow `[a, b)`, degrees. The top of the twist peak (the samples,
/// around the highest lightly smoothed one, within 20 % of the blow's twist range below
/// it) is fitted by a least-squares parabola and its highest value taken, so that every
/// sample of the top averages out frame noise. The fit is kept only when its residuals are
/// no larger than 1.5 × the twist noise `sigma_deg` (a sharp or ringing top is not a
/// parabola); otherwise the top 10 %, then 5 %, is tried, and finally the lightly smoothed
/// maximum is used, or the raw maximum when that stands more than 2σ above it (a top too
/// sharp for the smoothing).
pub(super) fn peak_twist_deg(
    raw: &[Option<f64>],
    smooth: &[Option<f64>],
    a: usize,
    b: usize,
    sigma_deg: f64,
) -> Option<f64> {
    let (mut top, mut peak) = (None, f64::NEG_INFINITY);
    let mut low = f64::INFINITY;
    for (i, v) in smooth.iter().enumerate().take(b).skip(a) {
        if let Some(v) = *v {
            low = low.min(v);
            if v > peak {
                peak = v;
                top = Some(i);
            }
        }
    }
    let top = top?;
    for frac in [0.2, 0.1, 0.05] {
        let floor = peak - frac * (peak - low);
        let above = |i: usize| smooth[i].is_some_and(|v| v >= floor);
        let mut l = top;
        while l > a && above(l - 1) {
            l -= 1;
        }
        let mut r = top;
        while r + 1 < b && above(r + 1) {
            r += 1;
        }
        if r - l + 1 < 5 {
            break;
        }
        if let Some((best, rms)) = parabola_top(raw, l, r)
            && rms <= 1.5 * sigma_deg
        {
            return Some(best);
        }
    }
    // No parabola fits: the lightly smoothed maximum, unless the raw maximum stands more
    // than 2σ above it (a top too sharp for the smoothing, seen above the noise).
    let raw_peak = raw[a..b].iter().flatten().copied().max_by(f64::total_cmp)?;
    Some(if raw_peak - peak > 2.0 * sigma_deg {
        raw_peak
    } else {
        peak
    })
}

/// Least-squares parabola through the measured samples of `v[l..=r]`: its highest value
/// within `[l, r]` (the vertex when it lies inside, else the higher end) and the RMS of the
/// residuals. None with fewer than five measured samples or a singular fit.
fn parabola_top(v: &[Option<f64>], l: usize, r: usize) -> Option<(f64, f64)> {
    let mid = (l + r) as f64 / 2.0;
    let pts: Vec<(f64, f64)> = (l..=r)
        .filter_map(|i| Some((i as f64 - mid, v[i]?)))
        .collect();
    if pts.len() < 5 {
        return None;
    }
    // Normal equations for y = c0 + c1·x + c2·x².
    let mut s = [0.0f64; 5];
    let mut t = [0.0f64; 3];
    for &(x, y) in &pts {
        let mut p = 1.0;
        for (k, sk) in s.iter_mut().enumerate() {
            *sk += p;
            if k < 3 {
                t[k] += p * y;
            }
            p *= x;
        }
    }
    let m = [[s[0], s[1], s[2]], [s[1], s[2], s[3]], [s[2], s[3], s[4]]];
    let c = crate::stats::solve3(m, t, 1e-12)?;
    let f = |x: f64| c[0] + c[1] * x + c[2] * x * x;
    let (xl, xr) = (l as f64 - mid, r as f64 - mid);
    let mut best = f(xl).max(f(xr));
    if c[2] < 0.0 {
        let xv = -c[1] / (2.0 * c[2]);
        if (xl..=xr).contains(&xv) {
            best = best.max(f(xv));
        }
    }
    let rms = (pts.iter().map(|&(x, y)| (y - f(x)).powi(2)).sum::<f64>() / pts.len() as f64).sqrt();
    (best.is_finite() && rms.is_finite()).then_some((best, rms))
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    #[test]
    fn savitzky_golay_keeps_a_parabola() {
        let v: Vec<Option<f64>> = (0..20).map(|i| Some(-((i as f64) - 9.5).powi(2))).collect();
        let s = savitzky_golay(&v, 3);
        for i in 3..17 {
            assert_relative_eq!(s[i].unwrap(), v[i].unwrap(), epsilon = 1e-9);
        }
    }
}
