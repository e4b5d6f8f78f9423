//! Pivot refinement, once the whole clip has been measured.
//!
//! A pivot that is off by a pixel makes the stripe's angular position about it wrong by an
//! amount that changes as the part turns (about 0.3° RMS over a 30° turn for 1 px at 40 px
//! radius), and a rig's pivot is read off a frame by a person or by `find-marks`, so it is rarely
//! exact. Camera shake in the first frame has the same effect.
//!
//! The stripe's *direction* does not depend on the pivot: it is a straight line fixed to the
//! turning part, so its direction turns exactly with the part. It is a noisier measure than the
//! angular position (its lever is the annulus width, not the radius), so it is not used frame
//! by frame. Instead, for every frame the ring crossings (points of the stripe, in the disc
//! plane) are fitted with a straight line by weighted least squares, and the difference
//! between its direction and the measured angle is modelled over the whole clip as
//! `a + b·sin θ + c·cos θ` (to first order in pivot error / radius, that is exactly the form of
//! the error an offset pivot causes). The fitted `b·sin θ + c·cos θ` is then added to every
//! frame's angle. When the part turns little, the three terms are nearly collinear, but the
//! fitted curve is still well determined inside the range of angles actually seen, which is
//! the only place it is used; the constant `a` cancels in relative angles.
//!
//! Honesty: frames whose direction is far from the first fit (a glint or a recess crossing
//! the rings) are left out of the final fit, and the correction is applied only when its change
//! over the angles seen is at least `MIN_SIGNIFICANCE` standard errors (least-squares
//! covariance over whole-degree means of the kept frames: frames at one angle share the
//! direction's bias there, so they count once). Otherwise the rig's pivot is kept and the
//! tracker says so.
//! The fit needs one angle and one direction offset per frame (16 bytes each), no per-ring data.
//!
//! Part of the track stage: it must never import segment, mechanics, report, `analyze`,
//! `batch`, `find_marks`, `calibrate` or the CLI.

use super::unwrap::wrap_pi;

/// What the refinement needs from one frame, computed as the frame is measured so that no
/// per-ring data is kept for the clip: the direction of the straight line through the ring
/// crossings less the measured angle `th` (rad, wrapped to ±π), or None when the line is not
/// determined. `rings[j]` is ring j's stripe angle relative to `th` (rad) and its weight.
pub(crate) fn direction_offset(th: f64, rings: &[(f32, f32)], radius: &[f64]) -> Option<f64> {
    line_direction(th, rings, radius).map(|dir| wrap_pi(dir - th))
}

/// A correction that changes relative angles by less than this over the clip (0.1°) is not
/// applied: the stripe direction's own pixelation bias, which depends on the angle, can fake
/// a few hundredths of a degree over a clip, while a pivot error worth correcting (a few
/// tenths of a pixel over a turn of tens of degrees) makes a larger one.
const MIN_CORRECTION_RAD: f64 = 0.1 * std::f64::consts::PI / 180.0;
/// The measured angles must fall in at least this many distinct whole degrees: a clip that
/// sits at a handful of angles lets the curve follow the direction's bias at each of them.
const MIN_DISTINCT_DEG: usize = 12;
/// The steepest the correction may be over the angles seen, |d(correction)/dθ|: a tenth.
/// The form `b·sin θ + c·cos θ` is the first-order term of the error an offset pivot makes
/// (offset d at radius r: amplitude d/r, so a slope of at most d/r), and the second-order
/// term it leaves out is about (d/r)²/2, 0.29° at d/r = 0.1, beyond the angle targets; a
/// steeper fitted curve is not a pivot error this step can correct. It is what a stripe
/// direction pulled by something else gives (a stripe read on another feature for a few
/// frames fitted a 30° "correction" on tuning seed 202, and the drive then read 3.6° ahead in
/// its first blow). The slope is what a correction does to a torque (a slope of 0.1 scales
/// every angle change by 10 %), and it is well determined inside the seen range even when the
/// part turns too little to separate b and c.
const MAX_SLOPE: f64 = 0.1;
/// Frames needed before the correction is fitted.
const MIN_FRAMES: usize = 8;
/// Frames whose direction disagrees with the fitted curve by more than this many robust
/// standard deviations are left out of the final fit.
const OUTLIER_SIGMAS: f64 = 4.0;

/// The fitted correction's change over the angles seen must exceed this many of its own
/// standard errors to be applied (a significance test on the one quantity that is used).
const MIN_SIGNIFICANCE: f64 = 4.0;

/// What the refinement did.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum Outcome {
    /// The correction was applied.
    Applied,
    /// Nothing to refine: too few frames, too few angles, or a correction too small to matter.
    Unneeded,
    /// A correction large enough to matter was fitted, but it is not distinguishable from the
    /// stripe direction's own noise (or from features that are not paint pulling it): the rig's
    /// pivot is kept.
    NotSignificant,
    /// The fitted correction is steeper than any pivot error it can model ([`MAX_SLOPE`]):
    /// the stripe's direction was pulled by something else, and the rig's pivot is kept.
    Implausible,
}

/// Refined angles, same length as `angles`, and what was done; `offsets[i]` is frame i's
/// [`direction_offset`].
pub(crate) fn refine(
    angles: &[Option<f64>],
    offsets: &[Option<f64>],
) -> (Vec<Option<f64>>, Outcome) {
    // (θ_i, direction − θ_i) for every frame with a usable line fit.
    let pts: Vec<(f64, f64)> = angles
        .iter()
        .zip(offsets)
        .filter_map(|(th, y)| Some(((*th)?, (*y)?)))
        .collect();
    let Some(mut coef) = fit_curve(&pts, None) else {
        return (angles.to_vec(), Outcome::Unneeded);
    };
    // One robust pass: drop frames far from the first fit, refit.
    let resid: Vec<f64> = pts
        .iter()
        .map(|&(t, y)| (y - eval(coef, t)).abs())
        .collect();
    let mut sorted = resid.clone();
    sorted.sort_by(f64::total_cmp);
    let scale = 1.4826 * sorted[sorted.len() / 2];
    let keep = (scale > 0.0).then_some((resid.as_slice(), OUTLIER_SIGMAS * scale));
    if let Some(k) = keep
        && let Some(c) = fit_curve(&pts, Some(k))
    {
        coef = c;
    }
    let corr = |t: f64| coef[1] * t.sin() + coef[2] * t.cos();
    let (lo, hi) = angles
        .iter()
        .flatten()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), &t| {
            (lo.min(corr(t)), hi.max(corr(t)))
        });
    let mut degs: Vec<i64> = angles
        .iter()
        .flatten()
        .map(|t| t.to_degrees().floor() as i64)
        .collect();
    degs.sort_unstable();
    degs.dedup();
    if hi - lo < MIN_CORRECTION_RAD || degs.len() < MIN_DISTINCT_DEG {
        return (angles.to_vec(), Outcome::Unneeded);
    }
    // Significance: the correction's change between the extreme angles seen, against its
    // standard error from the residuals of the kept frames (least-squares covariance
    // σ²·(AᵀA)⁻¹). A stripe whose direction is pulled by a recess, a glint or a rim gives a
    // scattered, poorly determined curve, and then the rig's pivot is kept.
    let (tmin, tmax) = angles
        .iter()
        .flatten()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), &t| {
            (lo.min(t), hi.max(t))
        });
    // The correction's slope over the seen range (a sinusoid: sampled finely enough that its
    // largest value is missed by at most about a part in a thousand over a range up to a turn).
    let steepest = (0..=64)
        .map(|k| tmin + (tmax - tmin) * f64::from(k) / 64.0)
        .map(|t| (coef[1] * t.cos() - coef[2] * t.sin()).abs())
        .fold(0.0, f64::max);
    if steepest > MAX_SLOPE {
        return (angles.to_vec(), Outcome::Implausible);
    }
    let g = [0.0, tmax.sin() - tmin.sin(), tmax.cos() - tmin.cos()];
    let change = g[1] * coef[1] + g[2] * coef[2];
    // The direction's bias depends on the angle (pixelation, compression, texture under the
    // stripe), so frames at one angle share their error: a part at rest for a hundred frames
    // gives one independent reading, not a hundred. The standard error is therefore taken
    // over whole-degree means of the kept frames (the units that are independent; cluster
    // means, as for any correlated sample: Cochran, *Sampling Techniques*, 3rd ed., ch. 9, *from memory*),
    // which a pivot error's smooth curve survives and an angle-by-angle bias does not.
    let means = degree_means(&pts, keep);
    match change_std_error(&means, None, coef, g) {
        Some(se) if change.abs() >= MIN_SIGNIFICANCE * se => (
            angles.iter().map(|a| a.map(|t| t + corr(t))).collect(),
            Outcome::Applied,
        ),
        _ => (angles.to_vec(), Outcome::NotSignificant),
    }
}

/// The mean angle and mean direction offset of the kept points in each whole degree of angle.
fn degree_means(pts: &[(f64, f64)], keep: Option<(&[f64], f64)>) -> Vec<(f64, f64)> {
    let mut bins: std::collections::BTreeMap<i64, (f64, f64, usize)> = Default::default();
    for (i, &(t, y)) in pts.iter().enumerate() {
        if let Some((r, lim)) = keep
            && r[i] > lim
        {
            continue;
        }
        let e = bins.entry(t.to_degrees().floor() as i64).or_default();
        e.0 += t;
        e.1 += y;
        e.2 += 1;
    }
    bins.into_values()
        .map(|(st, sy, n)| (st / n as f64, sy / n as f64))
        .collect()
}

/// Standard error of gᵀ·coef for the least-squares fit of `fit_curve` over the kept points.
fn change_std_error(
    pts: &[(f64, f64)],
    keep: Option<(&[f64], f64)>,
    coef: [f64; 3],
    g: [f64; 3],
) -> Option<f64> {
    let mut a = [[0.0f64; 3]; 3];
    let (mut ss, mut used) = (0.0, 0usize);
    for (i, &(t, y)) in pts.iter().enumerate() {
        if let Some((r, lim)) = keep
            && r[i] > lim
        {
            continue;
        }
        let row = [1.0, t.sin(), t.cos()];
        for r in 0..3 {
            for c in 0..3 {
                a[r][c] += row[r] * row[c];
            }
        }
        ss += (y - eval(coef, t)).powi(2);
        used += 1;
    }
    if used <= 3 {
        return None;
    }
    let ridge = 1e-9 * used as f64;
    a[1][1] += ridge;
    a[2][2] += ridge;
    let sigma2 = ss / (used - 3) as f64;
    // gᵀ(AᵀA)⁻¹g = gᵀx with (AᵀA)x = g.
    let x = solve3(a, g)?;
    let q = g[0] * x[0] + g[1] * x[1] + g[2] * x[2];
    (q >= 0.0).then(|| (sigma2 * q).sqrt())
}

fn eval(c: [f64; 3], t: f64) -> f64 {
    c[0] + c[1] * t.sin() + c[2] * t.cos()
}

/// Least-squares fit of `y ≈ a + b·sin θ + c·cos θ`, leaving out points whose residual is
/// above the limit when one is given. None with too few points or a singular system.
fn fit_curve(pts: &[(f64, f64)], keep: Option<(&[f64], f64)>) -> Option<[f64; 3]> {
    let mut a = [[0.0f64; 3]; 3];
    let mut b = [0.0f64; 3];
    let mut used = 0;
    for (i, &(t, y)) in pts.iter().enumerate() {
        if let Some((r, lim)) = keep
            && r[i] > lim
        {
            continue;
        }
        let row = [1.0, t.sin(), t.cos()];
        for r in 0..3 {
            for c in 0..3 {
                a[r][c] += row[r] * row[c];
            }
            b[r] += row[r] * y;
        }
        used += 1;
    }
    if used < MIN_FRAMES {
        return None;
    }
    // A whisker of ridge keeps a part that never turns (all rows equal) solvable; the fitted
    // curve inside the seen range is unaffected.
    let ridge = 1e-9 * used as f64;
    a[1][1] += ridge;
    a[2][2] += ridge;
    solve3(a, b)
}

/// Direction (rad, near `th`) of the weighted straight line through a frame's ring crossings,
/// or None with too few rings or too little radial spread.
fn line_direction(th: f64, rings: &[(f32, f32)], radius: &[f64]) -> Option<f64> {
    let u = [th.cos(), th.sin()];
    let n = [-u[1], u[0]];
    let (mut sw, mut ss, mut sv, mut sss, mut ssv) = (0.0, 0.0, 0.0, 0.0, 0.0);
    let mut used = 0;
    for (j, &(e, w)) in rings.iter().enumerate() {
        if w <= 0.0 {
            continue;
        }
        let w = f64::from(w);
        let a = th + f64::from(e);
        let q = [radius[j] * a.cos(), radius[j] * a.sin()];
        let s = q[0] * u[0] + q[1] * u[1];
        let v = q[0] * n[0] + q[1] * n[1];
        sw += w;
        ss += w * s;
        sv += w * v;
        sss += w * s * s;
        ssv += w * s * v;
        used += 1;
    }
    if used < 3 {
        return None;
    }
    let var = sss / sw - (ss / sw).powi(2);
    if var < 1.0 {
        return None;
    }
    let slope = (ssv / sw - ss / sw * sv / sw) / var;
    Some(th + slope.atan())
}

/// Solves a 3×3 linear system; None when it is singular ([`crate::stats::solve3`]).
fn solve3(a: [[f64; 3]; 3], b: [f64; 3]) -> Option<[f64; 3]> {
    crate::stats::solve3(a, b, 1e-12)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Measured angles and direction offsets for a straight stripe through `pivot` (relative
    /// to the assumed pivot at the origin), missing it by `miss` px, turned to each of `angles`.
    fn rings_for(
        pivot: [f64; 2],
        miss: f64,
        angles: &[f64],
        radius: &[f64],
    ) -> (Vec<Option<f64>>, Vec<Option<f64>>) {
        let mut meas = Vec::new();
        let mut offsets = Vec::new();
        for &a in angles {
            let u = [a.cos(), a.sin()];
            let n = [-u[1], u[0]];
            // Crossings of the line {P + miss·n + t·u} with circles of radius r about the origin.
            let c = [pivot[0] + miss * n[0], pivot[1] + miss * n[1]];
            let mut crossing = Vec::new();
            for &r in radius {
                let bq = c[0] * u[0] + c[1] * u[1];
                let cq = c[0] * c[0] + c[1] * c[1] - r * r;
                let t = -bq + (bq * bq - cq).sqrt();
                crossing.push((c[1] + t * u[1]).atan2(c[0] + t * u[0]));
            }
            let mean = crossing.iter().sum::<f64>() / crossing.len() as f64;
            meas.push(Some(mean));
            let rings: Vec<(f32, f32)> = crossing
                .iter()
                .map(|x| ((x - mean) as f32, 1.0f32))
                .collect();
            offsets.push(direction_offset(mean, &rings, radius));
        }
        (meas, offsets)
    }

    #[test]
    fn corrects_a_misplaced_pivot() {
        let radius: Vec<f64> = (0..30).map(|i| 10.0 + 2.0 * i as f64).collect();
        let angles: Vec<f64> = (0..50)
            .map(|i| (-72.0 + 1.0 * i as f64).to_radians())
            .collect();
        let (meas, offsets) = rings_for([0.8, -0.6], 0.0, &angles, &radius);
        let (out, outcome) = refine(&meas, &offsets);
        assert_eq!(outcome, Outcome::Applied);
        let raw_err = (meas[49].unwrap() - meas[0].unwrap()) - (angles[49] - angles[0]);
        assert!(raw_err.abs().to_degrees() > 0.3, "{}", raw_err.to_degrees());
        for (i, a) in angles.iter().enumerate() {
            let err = (out[i].unwrap() - out[0].unwrap()) - (a - angles[0]);
            assert!(
                err.abs().to_degrees() < 0.03,
                "frame {i}: {}",
                err.to_degrees()
            );
        }
    }

    #[test]
    fn keeps_an_exact_pivot_and_a_stripe_that_misses_it() {
        let radius: Vec<f64> = (0..30).map(|i| 10.0 + 2.0 * i as f64).collect();
        let angles: Vec<f64> = (0..50)
            .map(|i| (10.0 + 1.5 * i as f64).to_radians())
            .collect();
        let (meas, offsets) = rings_for([0.0, 0.0], 2.5, &angles, &radius);
        let out = refine(&meas, &offsets).0;
        for (i, a) in angles.iter().enumerate() {
            let err = (out[i].unwrap() - out[0].unwrap()) - (a - angles[0]);
            assert!(err.abs().to_degrees() < 0.01);
        }
    }

    #[test]
    fn a_direction_pulled_by_scatter_keeps_the_rig_pivot() {
        // The direction offsets replaced by seeded scatter far larger than any pivot error's
        // signature (as a glint or a recess crossing the rings would give): not applied.
        use rand::{RngExt, SeedableRng};
        let mut rng = rand::rngs::ChaCha8Rng::seed_from_u64(3);
        let angles: Vec<Option<f64>> = (0..60)
            .map(|i| Some((-20.0 + 0.8 * i as f64).to_radians()))
            .collect();
        let offsets: Vec<Option<f64>> =
            (0..60).map(|_| Some(rng.random_range(-0.2..0.2))).collect();
        let (out, outcome) = refine(&angles, &offsets);
        assert_ne!(outcome, Outcome::Applied);
        assert_eq!(out, angles);
    }

    #[test]
    fn a_stripe_read_on_another_feature_for_many_frames_keeps_the_rig_pivot() {
        // Tuning seed 202's drive, in shape: a stripe tracked about a pivot 1 px off for 140
        // frames, then read on another feature (11° further on, its "line" 27° askew) in the
        // remaining 95, more than a robust pass can drop. The fit asks for a correction far
        // steeper than a pivot error makes; applied, it skewed the first 140 frames by degrees.
        let radius: Vec<f64> = (0..30).map(|i| 10.0 + 2.0 * i as f64).collect();
        let angles: Vec<f64> = (0..140)
            .map(|i| (43.0 + 0.2 * i as f64).to_radians())
            .collect();
        let (mut meas, mut offsets) = rings_for([0.6, 0.8], 0.0, &angles, &radius);
        let good = refine(&meas, &offsets);
        assert_eq!(good.1, Outcome::Applied, "the clean part alone is refined");
        for i in 0..95 {
            meas.push(Some((82.0 + 0.02 * f64::from(i)).to_radians()));
            offsets.push(Some((-27.0f64).to_radians()));
        }
        let (out, outcome) = refine(&meas, &offsets);
        assert_eq!(outcome, Outcome::Implausible);
        assert_eq!(out, meas);
    }

    #[test]
    fn solve3_known_system() {
        let x = solve3(
            [[2.0, 1.0, 0.0], [1.0, 3.0, 1.0], [0.0, 1.0, 4.0]],
            [3.0, 5.0, 5.0],
        )
        .unwrap();
        for (g, w) in x.iter().zip([1.0, 1.0, 1.0]) {
            assert!((g - w).abs() < 1e-12);
        }
    }
}
