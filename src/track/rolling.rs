//! Rolling shutter: the angle at each frame's mid-readout time, from stripes read row by row.
//!
//! A rolling-shutter sensor reads row y of a frame at `t_frame + ρ(y)·T`, with
//! `ρ(y) = (y + 0.5)/height − 0.5` (−½ at the picture's top edge, +½ at its bottom edge; pixel
//! centres at integer y, docs/conventions.md) and T the readout time (rig
//! `camera.rolling_shutter_ms`). A turning stripe is therefore seen where it was at the time
//! its rows were read, not at `t_frame`. Method:
//!
//! 1. Per frame, the tracker's ring centres are combined with the weights it gave them; the
//!    stripe's readout offset `ρ` is the weighted mean of the rows where the rings saw it
//!    ([`readout_row`]). The robust fit's angle is the stripe's angle at that instant: the
//!    rings' angles change linearly with their rows' times (the stripe shears), and a weighted
//!    mean of them is the angle at the weighted mean time.
//! 2. Each measured frame is then a sample of the mark's angle θ(t) at its own instant
//!    `τ_i = t_i + ρ_i·T`. Those samples (captured frames only, in time order) are joined by
//!    the shape-preserving piecewise cubic Hermite interpolant of Fritsch & Carlson
//!    ("Monotone piecewise cubic interpolation", SIAM J. Numer. Anal. 17(2), 238–246, 1980),
//!    with the derivatives of Fritsch & Butland ("A method for constructing local monotone
//!    piecewise cubic interpolants", SIAM J. Sci. Stat. Comput. 5(2), 300–304, 1984): it
//!    neither overshoots a blow's sudden rise nor rings on the rest before it.
//! 3. Each frame's angle becomes its measurement moved by the interpolant's change from `τ_i`
//!    to `t_i`: `θ_i − (P(τ_i) − P(t_i))`, which is `P(t_i)` for a captured frame. Angles stay
//!    relative to the first analysed frame.
//!
//! What limits it: between captured frames the interpolant can only guess; a blow that rises
//! within one frame interval is sampled at the rows' instants, not in between, so the
//! correction there is as good as the capture rate allows (docs/accuracy.md gives figures).

use crate::rig::{Mark, Rig};
use crate::track::polar::PolarGrid;
use crate::track::{Trace, unwrap::wrap_pi};
use crate::units::Angle;
use crate::warning::Warning;

/// Per frame, each mark's readout offset ρ (a fraction of the readout time from the frame's
/// middle row; None where the mark was lost or is a side-view mark).
#[derive(Debug, Clone, Default, PartialEq)]
pub struct ReadoutRows {
    /// The drive mark's.
    pub drive: Vec<Option<f64>>,
    /// The nut mark's.
    pub nut: Vec<Option<f64>>,
}

/// Where the stripe measured at grid angle `angle` (rad) was read: the weighted mean, over the
/// rings the measurement used (`rings`: each ring's angle relative to `angle` and its weight),
/// of the readout offset ρ of the row where that ring saw the stripe, the grid moved by
/// `shift` in a frame `height` rows high. None when no ring has weight.
pub(crate) fn readout_row(
    grid: &PolarGrid,
    angle: f64,
    rings: &[(f32, f32)],
    shift: [f64; 2],
    height: u32,
) -> Option<f64> {
    let (pivot, map, _) = grid.geometry();
    let (mut sw, mut swy) = (0.0, 0.0);
    for (k, &(rel, w)) in rings.iter().enumerate() {
        if w <= 0.0 {
            continue;
        }
        let a = angle + f64::from(rel);
        let r = grid.radius[k];
        let (u, v) = (r * a.cos(), r * a.sin());
        let y = pivot[1] + shift[1] + map[1][0] * u + map[1][1] * v;
        sw += f64::from(w);
        swy += f64::from(w) * y;
    }
    (sw > 0.0).then(|| (swy / sw + 0.5) / f64::from(height) - 0.5)
}

/// Moves every radial mark's angle to its frame's mid-readout time (the module's method),
/// for a readout of `readout_s` seconds. Frames flagged synthetic are moved too but never
/// serve as samples. Does nothing with a zero readout.
pub fn correct(trace: &mut Trace, rows: &ReadoutRows, readout_s: f64) {
    if readout_s <= 0.0 || !readout_s.is_finite() {
        return;
    }
    let times: Vec<f64> = (0..trace.len()).map(|i| trace.t_s(i)).collect();
    let synthetic: Vec<bool> = (0..trace.len()).map(|i| trace.is_synthetic(i)).collect();
    for (series, row) in [(&mut trace.drive, &rows.drive), (&mut trace.nut, &rows.nut)] {
        if row.len() != series.len() {
            continue;
        }
        correct_series(series, row, &times, &synthetic, readout_s);
    }
}

fn correct_series(
    series: &mut [Option<Angle>],
    row: &[Option<f64>],
    times: &[f64],
    synthetic: &[bool],
    readout_s: f64,
) {
    let mut knots: Vec<(f64, f64)> = series
        .iter()
        .zip(row)
        .zip(times)
        .zip(synthetic)
        .filter_map(|(((a, r), &t), &s)| match (a, r) {
            (Some(a), Some(r)) if !s => Some((t + r * readout_s, a.rad())),
            _ => None,
        })
        .collect();
    knots.sort_by(|a, b| a.0.total_cmp(&b.0));
    // Two samples read at the same instant (to a nanosecond) become their mean.
    let mut merged: Vec<(f64, f64, u32)> = Vec::with_capacity(knots.len());
    for (t, a) in knots {
        match merged.last_mut() {
            Some(m) if t - m.0 < 1e-9 => {
                m.1 += a;
                m.2 += 1;
            }
            _ => merged.push((t, a, 1)),
        }
    }
    let (xs, ys): (Vec<f64>, Vec<f64>) = merged
        .iter()
        .map(|&(t, a, n)| (t, a / f64::from(n)))
        .unzip();
    let Some(p) = Pchip::new(xs, ys) else {
        return;
    };
    for ((a, r), &t) in series.iter_mut().zip(row).zip(times) {
        if let (Some(v), Some(r)) = (a.as_mut(), r) {
            let tau = t + r * readout_s;
            *v = Angle::from_rad(v.rad() - (p.eval(tau) - p.eval(t)));
        }
    }
    // Still relative to the first analysed frame.
    if let Some(Some(z)) = series.first().copied() {
        let z = z.rad();
        for v in series.iter_mut().flatten() {
            *v = Angle::from_rad(v.rad() - z);
        }
    }
}

/// The shape-preserving piecewise cubic Hermite interpolant (the module's step 2), extended
/// beyond its ends along its end tangents.
struct Pchip {
    x: Vec<f64>,
    y: Vec<f64>,
    d: Vec<f64>,
}

impl Pchip {
    /// None with fewer than two points; `x` strictly increasing.
    fn new(x: Vec<f64>, y: Vec<f64>) -> Option<Pchip> {
        let n = x.len();
        if n < 2 {
            return None;
        }
        let h: Vec<f64> = x.windows(2).map(|w| w[1] - w[0]).collect();
        let del: Vec<f64> = (0..n - 1).map(|k| (y[k + 1] - y[k]) / h[k]).collect();
        let mut d = vec![0.0; n];
        if n == 2 {
            d.fill(del[0]);
            return Some(Pchip { x, y, d });
        }
        for k in 1..n - 1 {
            let (a, b) = (del[k - 1], del[k]);
            if a * b > 0.0 {
                // Weighted harmonic mean (Fritsch & Butland 1984).
                let w1 = 2.0 * h[k] + h[k - 1];
                let w2 = h[k] + 2.0 * h[k - 1];
                d[k] = (w1 + w2) / (w1 / a + w2 / b);
            }
        }
        d[0] = end_slope(h[0], h[1], del[0], del[1]);
        d[n - 1] = end_slope(h[n - 2], h[n - 3], del[n - 2], del[n - 3]);
        Some(Pchip { x, y, d })
    }

    fn eval(&self, t: f64) -> f64 {
        let n = self.x.len();
        if t <= self.x[0] {
            return self.y[0] + self.d[0] * (t - self.x[0]);
        }
        if t >= self.x[n - 1] {
            return self.y[n - 1] + self.d[n - 1] * (t - self.x[n - 1]);
        }
        let k = self.x.partition_point(|&v| v <= t) - 1;
        let h = self.x[k + 1] - self.x[k];
        let s = (t - self.x[k]) / h;
        // Cubic Hermite basis.
        let (s2, s3) = (s * s, s * s * s);
        let h00 = 2.0 * s3 - 3.0 * s2 + 1.0;
        let h10 = s3 - 2.0 * s2 + s;
        let h01 = -2.0 * s3 + 3.0 * s2;
        let h11 = s3 - s2;
        h00 * self.y[k] + h10 * h * self.d[k] + h01 * self.y[k + 1] + h11 * h * self.d[k + 1]
    }
}

/// The end derivative: the three-point one-sided estimate, kept to the shape of the data
/// (zero when it turns against the end interval's slope, at most three times that slope when
/// the data turn there), as in Fritsch & Carlson's end conditions.
fn end_slope(h0: f64, h1: f64, del0: f64, del1: f64) -> f64 {
    let d = ((2.0 * h0 + h1) * del0 - h0 * del1) / (h0 + h1);
    if d * del0 <= 0.0 {
        0.0
    } else if del0 * del1 <= 0.0 && d.abs() > (3.0 * del0).abs() {
        3.0 * del0
    } else {
        d
    }
}

/// The skew a rolling shutter may put on an angle before the rig must give its readout time:
/// the project's per-frame accuracy target for compressed clips, degrees (docs/accuracy.md;
/// every consumer camera compresses).
pub const SKEW_WARN_DEG: f64 = 0.20;

/// [`Warning::RollingShutterUnknown`] when the rig gives no readout time, the clip was timed
/// by the camera's own clock (`camera_clock`: no capture rate was given, so the file's rate or
/// timestamps are the capture's, as consumer cameras write them; high-speed cameras write a
/// playback rate and are given `--fps` or `capture_fps_hz`), and the fastest turn seen could
/// skew an angle beyond [`SKEW_WARN_DEG`].
///
/// The bound: a sensor finishes reading one frame before it starts the next, so its readout
/// T is at most the captured frame interval Δ (*common practice*: a rolling shutter's readout
/// fits in the frame time). A mark turning at ω and read at readout offset ρ is seen ω·T·|ρ|
/// away from its mid-readout angle, at most (largest step over Δ)·max|ρ|, with ρ taken over
/// the rows the marks' annuli cover.
pub fn unknown_readout_warning(
    trace: &Trace,
    rig: &Rig,
    height: u32,
    camera_clock: bool,
) -> Option<Warning> {
    if !camera_clock || rig.camera.and_then(|c| c.rolling_shutter_ms).is_some() {
        return None;
    }
    let (rate, interval) = fastest_rate(trace)?;
    let rho = [&rig.marks.drive, &rig.marks.nut]
        .into_iter()
        .filter_map(|m| match m {
            Mark::Radial(r) => Some(r),
            Mark::Side(_) => None,
        })
        .flat_map(|r| [r.pivot[1] - r.radius[1], r.pivot[1] + r.radius[1]])
        .map(|y| ((y + 0.5) / f64::from(height) - 0.5).abs().min(0.5))
        .fold(0.0f64, f64::max);
    let step_deg = (rate * interval).to_degrees();
    let skew_deg = step_deg * rho;
    (skew_deg > SKEW_WARN_DEG).then_some(Warning::RollingShutterUnknown {
        max_step_deg: step_deg,
        skew_bound_deg: skew_deg,
    })
}

/// The largest rate of turn of a radial mark between neighbouring captured frames, rad/s,
/// and the median interval between them, s (None with fewer than two such frames).
pub fn fastest_rate(trace: &Trace) -> Option<(f64, f64)> {
    let mut best: Option<f64> = None;
    let mut gaps: Vec<f64> = Vec::new();
    for series in [&trace.drive, &trace.nut] {
        let mut prev: Option<(f64, f64)> = None;
        for (i, a) in series.iter().enumerate() {
            if trace.is_synthetic(i) {
                continue;
            }
            let Some(a) = a else {
                prev = None;
                continue;
            };
            let t = trace.t_s(i);
            if let Some((tp, ap)) = prev
                && t > tp
            {
                let r = wrap_pi(a.rad() - ap).abs() / (t - tp);
                best = Some(best.map_or(r, |b: f64| b.max(r)));
                gaps.push(t - tp);
            }
            prev = Some((t, a.rad()));
        }
    }
    let best = best?;
    let mid = gaps.len() / 2;
    let interval = *gaps.select_nth_unstable_by(mid, f64::total_cmp).1;
    Some((best, interval))
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    #[test]
    fn the_interpolant_passes_its_points_and_is_exact_on_lines() {
        let x: Vec<f64> = vec![0.0, 0.7, 1.0, 2.5, 3.0];
        let y: Vec<f64> = x.iter().map(|v| 2.0 * v - 1.0).collect();
        let p = Pchip::new(x.clone(), y.clone()).unwrap();
        for (a, b) in x.iter().zip(&y) {
            assert!((p.eval(*a) - b).abs() < 1e-12);
        }
        for t in [-0.5, 0.3, 1.7, 2.9, 3.4] {
            assert!((p.eval(t) - (2.0 * t - 1.0)).abs() < 1e-12, "{t}");
        }
    }

    proptest! {
        /// Monotone data give a monotone interpolant (no overshoot at a step).
        #[test]
        fn monotone_data_stay_monotone(steps in prop::collection::vec((0.1f64..2.0, 0.0f64..5.0), 3..12)) {
            let mut x = vec![0.0];
            let mut y = vec![0.0];
            for (dx, dy) in &steps {
                x.push(x.last().unwrap() + dx);
                y.push(y.last().unwrap() + dy);
            }
            let p = Pchip::new(x.clone(), y.clone()).unwrap();
            let (lo, hi) = (x[0], *x.last().unwrap());
            let mut prev = p.eval(lo);
            for i in 1..=400 {
                let v = p.eval(lo + (hi - lo) * f64::from(i) / 400.0);
                prop_assert!(v >= prev - 1e-9, "{} < {}", v, prev);
                prop_assert!(v <= *y.last().unwrap() + 1e-9);
                prev = v;
            }
        }
    }
}
