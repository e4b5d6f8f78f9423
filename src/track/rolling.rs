//! Rolling shutter: the angle at each frame's mid-readout time, from stripes read row by row.
//!
//! A rolling-shutter sensor reads row y of a frame at `t_frame + ρ(y)·T`, with
//! `ρ(y) = (y + 0.5)/height − 0.5` (−½ at the picture's top edge, +½ at its bottom edge; pixel
//! centres at integer y, docs/conventions.md) and T the readout time (rig
//! `camera.rolling_shutter_ms`). A stripe turning at ω is seen on each ring where it was when
//! that ring's crossing row was read: ring k reads `θ_mid + ω·T·ρ_k`, so the stripe shears.
//! Method, per frame:
//!
//! 1. From the tracker's rings and the row where each ring saw the stripe, the weighted mean
//!    readout offset ρ̄ (`readout_row`): the robust fit's angle is the stripe's angle at the
//!    instant `t + ρ̄·T`; and the slope of the rings' angles on ρ, the shear, which is ω·T
//!    plus a bias of its own of a few tenths of a degree per unit of ρ (the stripe's edges
//!    and the pixel grid), taken as the shear's median over the frames at rest.
//! 2. The rate of turn at that instant. Where the mark turns smoothly, from the captured
//!    neighbours: the backward and forward differences of the angles over their read
//!    instants, combined by the minmod limiter (the smaller of two of one sign, else zero),
//!    which leaves a frame beside a step, at a reversal or at the clip's ends as read. Where
//!    the frame was read in a turn much faster than the slower side shows (the limited rate
//!    below half the faster side: a blow's rise between frames), the neighbours cannot give
//!    it, and the frame's own shear less its bias does, when significant at three standard
//!    deviations; a stripe lying along the rows has no shear to show, and stays as read.
//! 3. The frame's angle at mid-readout is `θ(ρ̄) − ω·T·ρ̄`. Angles stay relative to the
//!    first analysed frame.
//!
//! Frames flagged synthetic are corrected but never serve as neighbours. Side-view marks are
//! not corrected. What no correction can mend, a blow's rise shorter than a frame interval
//! read by a slow readout, is bounded where a blow's peak is read
//! (`mechanics::blows::skew`). Accuracy on rendered clips: docs/accuracy.md, "Rolling
//! shutter".
//!
//! Part of the track stage: it must never import segment, mechanics, report, `analyze`,
//! `batch`, `find_marks`, `calibrate` or the CLI.

use crate::rig::{Mark, Rig};
use crate::track::polar::PolarGrid;
use crate::track::{Trace, unwrap::wrap_pi};
use crate::units::Angle;
use crate::warning::Warning;

/// Factor on the variance of the rings' shear slope for the rings' errors being correlated
/// (neighbouring rings are 1 px apart; a bilinear tap spans 2 px, and the centroid windows of
/// neighbouring rings overlap on the same pixels).
const RING_CORRELATION: f64 = 4.0;

/// Where one measurement was read in a rolling shutter's readout.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Readout {
    /// Weighted mean readout offset ρ̄ of the rows where the rings saw the stripe.
    pub rho: f64,
    /// The slope of the rings' angles on ρ, rad per unit of ρ (ω·T plus a bias of its own),
    /// and its variance; None when the rings give no lever.
    pub shear: Option<(f64, f64)>,
}

impl Readout {
    /// The same in the trace's sense (angles × `sign`).
    pub(crate) fn signed(self, sign: f64) -> Readout {
        Readout {
            rho: self.rho,
            shear: self.shear.map(|(b, v)| (sign * b, v)),
        }
    }
}

/// Per frame, each mark's [`Readout`] (None where the mark was lost or is a side-view mark),
/// with shears in the trace's sense (tightening positive).
#[derive(Debug, Clone, Default, PartialEq)]
pub struct ReadoutRows {
    /// The drive mark's.
    pub drive: Vec<Option<Readout>>,
    /// The nut mark's.
    pub nut: Vec<Option<Readout>>,
}

/// Where the stripe measured at grid angle `angle` (rad) was read (the module's step 1): from
/// the rings the measurement used (`rings`: each ring's angle relative to `angle` and its
/// weight; `reference`: the same angles in the first frame, at rest, NaN for a ring unused
/// there), the grid moved by `shift`
/// in a frame `height` rows high. None when no ring has weight.
pub(crate) fn readout_row(
    grid: &PolarGrid,
    angle: f64,
    rings: &[(f32, f32)],
    reference: &[f64],
    shift: [f64; 2],
    height: u32,
) -> Option<Readout> {
    let (pivot, map, _) = grid.geometry();
    let mut pts: Vec<(f64, f64, f64)> = Vec::with_capacity(rings.len());
    for (k, &(rel, w)) in rings.iter().enumerate() {
        if w <= 0.0 {
            continue;
        }
        let a = angle + f64::from(rel);
        let r = grid.radius[k];
        let (u, v) = (r * a.cos(), r * a.sin());
        let y = pivot[1] + shift[1] + map[1][0] * u + map[1][1] * v;
        let rho = (y + 0.5) / f64::from(height) - 0.5;
        // Each ring's own departure from its reading at rest: the ring's offset, and what
        // the stripe's edges and the pixel grid do to that ring, cancel.
        let e = f64::from(rel) - reference.get(k).copied().unwrap_or(f64::NAN);
        if !e.is_finite() {
            continue;
        }
        pts.push((rho, e, f64::from(w)));
    }
    let sw: f64 = pts.iter().map(|p| p.2).sum();
    if sw <= 0.0 {
        return None;
    }
    let rho = pts.iter().map(|p| p.2 * p.0).sum::<f64>() / sw;
    let e_bar = pts.iter().map(|p| p.2 * p.1).sum::<f64>() / sw;
    let s_rr: f64 = pts.iter().map(|p| p.2 * (p.0 - rho).powi(2)).sum();
    let s_re: f64 = pts.iter().map(|p| p.2 * (p.0 - rho) * (p.1 - e_bar)).sum();
    let n = pts.len();
    let shear = (n >= 4 && s_rr > 1e-12 * sw)
        .then(|| {
            let b = s_re / s_rr;
            // Weights as inverse variances up to one scale, estimated from the residuals.
            let scale = pts
                .iter()
                .map(|p| p.2 * (p.1 - e_bar - b * (p.0 - rho)).powi(2))
                .sum::<f64>()
                / (n - 2) as f64;
            // Neighbouring rings are 1 px apart and share pixels through the bilinear taps and
            // the centroid windows, so their errors are not independent: the variance is
            // inflated by RING_CORRELATION. A slope not significant at 3 standard deviations
            // is no measurement of the shear (a stripe lying along the rows has no lever).
            let v = RING_CORRELATION * scale / s_rr;
            (b, v)
        })
        .filter(|&(b, v)| b.is_finite() && v.is_finite() && v > 0.0);
    Some(Readout { rho, shear })
}

/// Moves every radial mark's angle to its frame's mid-readout time (the module's method),
/// for a readout of `readout_s` seconds. Does nothing with a zero readout.
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
    row: &[Option<Readout>],
    times: &[f64],
    synthetic: &[bool],
    readout_s: f64,
) {
    // Each captured, measured frame: its read instant and angle.
    let knots: Vec<(usize, f64, f64)> = (0..series.len())
        .filter(|&i| !synthetic[i])
        .filter_map(|i| Some((i, times[i] + row[i]?.rho * readout_s, series[i]?.rad())))
        .collect();
    let sides = |i: usize, a: f64, tau: f64| -> (Option<f64>, Option<f64>) {
        let at = knots.partition_point(|k| k.0 < i);
        let here = knots.get(at).filter(|k| k.0 == i).copied();
        let prev = at.checked_sub(1).and_then(|j| knots.get(j)).copied();
        let next = knots.get(at + usize::from(here.is_some())).copied();
        let me = here.unwrap_or((i, tau, a));
        let slope = |p: (usize, f64, f64), q: (usize, f64, f64)| {
            let dt = q.1 - p.1;
            (dt > 0.0).then(|| wrap_pi(q.2 - p.2) / dt)
        };
        (
            prev.and_then(|p| slope(p, me)),
            next.and_then(|q| slope(me, q)),
        )
    };
    // The shear's own bias: its median over the frames at rest (neither neighbour turned
    // more than REST_PER_READOUT_RAD over a readout).
    let rest: Vec<f64> = (0..series.len())
        .filter_map(|i| {
            let (a, r) = (series[i]?, row[i]?);
            let (b, f) = sides(i, a.rad(), times[i] + r.rho * readout_s);
            let still =
                |x: Option<f64>| x.is_some_and(|x| (x * readout_s).abs() < REST_PER_READOUT_RAD);
            (still(b) && still(f)).then_some(r.shear?.0)
        })
        .collect();
    let bias = crate::stats::median(&rest);
    let mut out: Vec<Option<Angle>> = series.to_vec();
    for (i, slot) in out.iter_mut().enumerate() {
        let (Some(a), Some(r)) = (series[i], row[i]) else {
            continue;
        };
        // The rate of turn at the read instant: the limited slope of the two sides. Where
        // the mark turns smoothly both sides agree and this is the rate; beside a sudden
        // step, at a reversal or at the clip's ends it is zero, and the frame keeps its
        // angle (when a step fell between two frames, no frame shows on which side of the
        // mid-readout instant it fell).
        let (bk, fw) = sides(i, a.rad(), times[i] + r.rho * readout_s);
        let rate = match (bk, fw) {
            (Some(x), Some(y)) => minmod(x, y),
            _ => 0.0,
        };
        // In a frame read while the mark turned much faster than the slower side shows (a
        // blow's rise between frames), the neighbours cannot give the rate at the read
        // instant; the frame's own shear, less its bias at rest, can, where it is
        // significant at three standard deviations.
        let fast = bk.into_iter().chain(fw).map(f64::abs).fold(0.0, f64::max);
        if let (Some(c), Some((b, v))) = (bias, r.shear)
            && rate.abs() < OWN_SHEAR_SHARE * fast
            && (b - c).powi(2) > 9.0 * v
        {
            *slot = Some(Angle::from_rad(a.rad() - (b - c) * r.rho));
            continue;
        }
        *slot = Some(Angle::from_rad(a.rad() - rate * r.rho * readout_s));
    }
    // Still relative to the first analysed frame.
    if let Some(Some(z)) = out.first().copied() {
        let z = z.rad();
        for v in out.iter_mut().flatten() {
            *v = Angle::from_rad(v.rad() - z);
        }
    }
    series.copy_from_slice(&out);
}

/// A frame is read in a fast turn, and its own shear used, when the limited rate of its two
/// sides is below this share of the faster side.
const OWN_SHEAR_SHARE: f64 = 0.5;

/// A mark is at rest for the shear's bias when it turns less than this over one readout, rad
/// (a hundredth of a degree).
const REST_PER_READOUT_RAD: f64 = 0.01 * std::f64::consts::PI / 180.0;

/// The minmod slope limiter: of two slopes of one sign, the smaller in magnitude; zero when
/// their signs differ (Roe, P. L., "Characteristic-based schemes for the Euler equations",
/// Annual Review of Fluid Mechanics 18, 1986, pp. 337-365; *from memory*). It never makes a
/// frame overshoot either neighbour.
fn minmod(a: f64, b: f64) -> f64 {
    if a * b <= 0.0 {
        0.0
    } else if a.abs() < b.abs() {
        a
    } else {
        b
    }
}

/// Frames whose two neighbouring rates differ by more than this share of the larger are not
/// steady enough to measure the readout on (a blow's rise, a reversal).
const STEADY_SHARE: f64 = 0.3;

/// Most frames the readout estimate uses (evenly thinned beyond), which bounds its pairwise
/// slopes to about 80,000.
const ESTIMATE_MAX_FRAMES: usize = 400;

/// An estimate of the readout time T from the clip itself, s, with its 95 % interval: in
/// every captured frame where a radial mark turns steadily (its backward and forward rates
/// agree within 30 %), the stripe's shear across the rings is `ω·T + c`, where
/// c is the shear's own bias (the stripe's edges and the pixel grid, which do not depend on
/// the readout). T is the Theil–Sen slope of shear on rate over those frames (the median of
/// the slopes between every pair), with the distribution-free 95 % interval of Sen (P. K. Sen,
/// "Estimates of the regression coefficient based on Kendall's tau", Journal of the American
/// Statistical Association 63, 1968, pp. 1379-1389, §3: the slopes ranked
/// (N ∓ C)/2, C = 1.96·√(n(n−1)(2n+5)/18), N pairs). A median of slopes is used because
/// frames read in a fast turn shear more than ω·T (the stripe bends), and a least-squares
/// line follows the few such frames. Capped at the captured frame interval. None with fewer
/// than eight such frames, or when the interval reaches zero (the clip does not show the
/// readout) or lies wholly beyond a frame interval.
pub fn estimate_readout(trace: &Trace, rows: &ReadoutRows) -> Option<(f64, (f64, f64))> {
    let mut pts: Vec<(f64, f64)> = Vec::new();
    for (series, row) in [(&trace.drive, &rows.drive), (&trace.nut, &rows.nut)] {
        if row.len() != series.len() {
            continue;
        }
        let knots: Vec<(usize, f64, f64)> = (0..series.len())
            .filter(|&i| !trace.is_synthetic(i))
            .filter_map(|i| Some((i, trace.t_s(i), series[i]?.rad())))
            .collect();
        for w in knots.windows(3) {
            let (p, me, q) = (w[0], w[1], w[2]);
            let (Some(r), true) = (row[me.0], me.0 == p.0 + 1 && q.0 == me.0 + 1) else {
                continue;
            };
            let Some((b, _)) = r.shear else { continue };
            let (dt0, dt1) = (me.1 - p.1, q.1 - me.1);
            if dt0 <= 0.0 || dt1 <= 0.0 {
                continue;
            }
            let (r0, r1) = (wrap_pi(me.2 - p.2) / dt0, wrap_pi(q.2 - me.2) / dt1);
            if (r0 - r1).abs() > STEADY_SHARE * r0.abs().max(r1.abs()) {
                continue;
            }
            pts.push((0.5 * (r0 + r1), b));
        }
    }
    if pts.len() < 8 {
        return None;
    }
    let stride = pts.len().div_ceil(ESTIMATE_MAX_FRAMES);
    let pts: Vec<(f64, f64)> = pts.into_iter().step_by(stride).collect();
    let mut slopes: Vec<f64> = Vec::with_capacity(pts.len() * (pts.len() - 1) / 2);
    for (k, p) in pts.iter().enumerate() {
        for q in &pts[k + 1..] {
            let dx = q.0 - p.0;
            if dx != 0.0 {
                slopes.push((q.1 - p.1) / dx);
            }
        }
    }
    let n_pairs = slopes.len();
    if n_pairs < 8 {
        return None;
    }
    slopes.sort_by(f64::total_cmp);
    let t = crate::stats::median(&slopes)?;
    let n = pts.len() as f64;
    let c = 1.96 * (n * (n - 1.0) * (2.0 * n + 5.0) / 18.0).sqrt();
    let rank = |x: f64| (x.round().max(1.0) as usize).min(n_pairs) - 1;
    let lo = slopes[rank((n_pairs as f64 - c) / 2.0)];
    let hi = slopes[rank((n_pairs as f64 + c) / 2.0 + 1.0)];
    // A sensor reads one frame out before it starts the next (*common practice*): T is at
    // most the captured frame interval, so the estimate and its interval are capped there,
    // and an interval wholly beyond it is no estimate.
    let gaps: Vec<f64> = (1..trace.len())
        .filter(|&i| !trace.is_synthetic(i) && !trace.is_synthetic(i - 1))
        .map(|i| trace.t_s(i) - trace.t_s(i - 1))
        .collect();
    let frame_s = crate::stats::median(&gaps).unwrap_or(f64::INFINITY);
    (lo > 0.0 && lo <= frame_s && t.is_finite()).then_some((t.min(frame_s), (lo, hi.min(frame_s))))
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
    let rho = rho_max(rig, height).into_iter().fold(0.0f64, f64::max);
    let step_deg = (rate * interval).to_degrees();
    let skew_deg = step_deg * rho;
    (skew_deg > SKEW_WARN_DEG).then_some(Warning::RollingShutterUnknown {
        max_step_deg: step_deg,
        skew_bound_deg: skew_deg,
    })
}

/// The largest readout offset |ρ| over the rows each mark is read on (drive, nut) in a frame
/// `height` rows high: a radial mark's annulus (pivot ± outer radius), a side mark's stretch
/// of bar (its axis points ± the bar's radius).
pub fn rho_max(rig: &Rig, height: u32) -> [f64; 2] {
    let rho = |y: f64| ((y + 0.5) / f64::from(height) - 0.5).abs().min(0.5);
    let of = |m: &Mark| -> f64 {
        let rows: Vec<f64> = match m {
            Mark::Radial(r) => vec![r.pivot[1] - r.radius[1], r.pivot[1] + r.radius[1]],
            Mark::Side(s) => s
                .axis
                .iter()
                .flat_map(|p| [p[1] - s.radius_px, p[1] + s.radius_px])
                .collect(),
        };
        rows.into_iter().map(rho).fold(0.0, f64::max)
    };
    [of(&rig.marks.drive), of(&rig.marks.nut)]
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
#[path = "rolling_scene_tests.rs"]
mod scene_tests;

#[cfg(test)]
mod tests {
    use super::*;

    /// A stripe turning at a steady rate: the neighbours' rate moves each frame with a
    /// neighbour on both sides by ω·T·ρ̄, exactly (the ends, with one neighbour, keep their
    /// angles; angles are relative to the first frame, so interior differences are checked).
    #[test]
    fn steady_turning_is_moved_to_mid_readout() {
        let (t_r, w, rho) = (0.01, 2.0, 0.3);
        let times: Vec<f64> = (0..6).map(|i| f64::from(i) * 0.004).collect();
        // Seen at t + ρ·T.
        let mut series: Vec<Option<Angle>> = times
            .iter()
            .map(|t| Some(Angle::from_rad(w * (t + rho * t_r))))
            .collect();
        let row = vec![Some(Readout { rho, shear: None }); 6];
        correct_series(&mut series, &row, &times, &[false; 6], t_r);
        let at = |i: usize| series[i].unwrap().rad();
        for i in 2..5 {
            let want = w * (times[i] - times[1]);
            assert!((at(i) - at(1) - want).abs() < 1e-12, "{i}");
        }
        // The first frame is not moved, so the interior sits ω·T·ρ̄ below its uncorrected
        // reading relative to it.
        assert!((at(1) - (w * times[1] - w * rho * t_r)).abs() < 1e-12);
    }

    /// A trace at 240 fps whose drive turns at a rate that changes smoothly (a sine of
    /// period 40 frames, up to 600°/s) and whose nut rests, with each frame's drive shear
    /// `ω·T + c` plus a small deterministic scatter; the nut gives no shear.
    fn sheared(readout_s: f64, bias: f64) -> (Trace, ReadoutRows) {
        let n = 200;
        let fps = 240.0;
        let w = |i: usize| 600f64.to_radians() * (std::f64::consts::TAU * i as f64 / 40.0).sin();
        let mut a = 0.0;
        let mut drive = Vec::with_capacity(n);
        for i in 0..n {
            drive.push(Some(Angle::from_rad(a)));
            a += w(i) / fps;
        }
        let rows = ReadoutRows {
            drive: (0..n)
                .map(|i| {
                    let scatter = 0.002 * ((i * 7919) % 13) as f64 / 13.0 - 0.001;
                    Some(Readout {
                        rho: 0.1,
                        shear: Some((w(i) * readout_s + bias + scatter, 1e-6)),
                    })
                })
                .collect(),
            nut: vec![None; n],
        };
        let trace = Trace {
            time_base: crate::units::TimeBase::from_fps(fps, "t").unwrap(),
            times_s: Vec::new(),
            synthetic: Vec::new(),
            frames: (0..n as u64).collect(),
            drive,
            nut: vec![Some(Angle::from_rad(0.0)); n],
            drive_confidence: vec![1.0; n],
            nut_confidence: vec![1.0; n],
            drive_zero_screen: None,
            nut_zero_screen: None,
        };
        (trace, rows)
    }

    /// The readout comes back from the shear's slope on the rate, its bias aside, with an
    /// interval that holds it; a shear that does not follow the rate (a global shutter)
    /// gives no estimate.
    #[test]
    fn the_readout_is_the_slope_of_shear_on_rate() {
        let (trace, rows) = sheared(0.003, 0.004);
        let (t, (lo, hi)) = estimate_readout(&trace, &rows).expect("an estimate");
        assert!((t - 0.003).abs() < 2e-4, "{t}");
        assert!(lo <= 0.003 && 0.003 <= hi, "{lo}..{hi}");
        let (trace, rows) = sheared(0.0, 0.004);
        assert_eq!(estimate_readout(&trace, &rows), None);
    }

    /// minmod: the smaller of two slopes of one sign, zero across a reversal.
    #[test]
    fn minmod_limits_and_stops_at_reversals() {
        assert_eq!(minmod(2.0, 3.0), 2.0);
        assert_eq!(minmod(-3.0, -2.0), -2.0);
        assert_eq!(minmod(2.0, -1.0), 0.0);
        assert_eq!(minmod(0.0, 5.0), 0.0);
    }

    /// At rest next to a sudden step the neighbours disagree (one slope is zero), and the
    /// resting frames are not moved.
    #[test]
    fn a_resting_frame_beside_a_step_keeps_its_angle() {
        let times: Vec<f64> = (0..4).map(|i| f64::from(i) * 0.016).collect();
        let mut series: Vec<Option<Angle>> = [0.0, 0.0, 0.5, 0.5]
            .iter()
            .map(|&a| Some(Angle::from_rad(a)))
            .collect();
        let row = vec![
            Some(Readout {
                rho: -0.3,
                shear: None,
            });
            4
        ];
        correct_series(&mut series, &row, &times, &[false; 4], 0.01);
        assert!(series[1].unwrap().rad().abs() < 1e-12, "{:?}", series[1]);
        assert!(
            (series[2].unwrap().rad() - 0.5).abs() < 1e-12,
            "{:?}",
            series[2]
        );
    }
}
