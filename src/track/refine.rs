//! Pivot refinement, once the whole clip has been measured.
//!
//! A pivot that is off by a pixel makes the stripe's angular position about it wrong by an
//! amount that changes as the part turns (about 0.3° RMS over a 30° turn for 1 px at 40 px
//! radius), and a rig's pivot is read off a frame by a person or by `locate`, so it is rarely
//! exact. Camera shake in the first frame has the same effect. The stripe itself tells where
//! the true pivot is: it is a straight line fixed to the turning part, so its distance from the
//! true pivot P stays constant while its direction turns. Measured from the assumed pivot A,
//! that distance is `e_i = e0 + (P − A)·n_i`, with `n_i` the line's unit normal in frame i.
//!
//! For every measured frame the ring crossings (points of the stripe, in the disc plane) are
//! fitted with a straight line by weighted least squares, giving `n_i` and `e_i`; then `P − A`
//! comes from a linear least-squares fit over all frames (see [`pivot_correction`] for which
//! components a small turn can show). Corrections too small to tell from pixelation are not
//! applied. Each frame's ring crossings are then re-read
//! as angles about P and combined again, with each ring's own constant offset (a stripe that
//! misses the pivot sits at a different angle on each ring) estimated from the whole clip.

use super::unwrap::wrap_pi;

/// Largest pivot correction accepted, px; anything larger means the fit is not to be trusted.
const MAX_CORRECTION_PX: f64 = 6.0;
/// Smallest pivot correction applied, px. A stripe's pixelation biases each frame's line by a
/// few hundredths of a pixel in a way that depends on its angle; over a turn of a few tens of
/// degrees that can fake a correction of about 0.1 px, so corrections must clear this floor
/// (and `PIXELATION_PX` divided by the spread of the stripe's direction, whichever is larger).
const MIN_CORRECTION_PX: f64 = 0.2;
const PIXELATION_PX: f64 = 0.03;
/// Spread (standard deviation) of the stripe's direction above which both components of the
/// pivot correction are fitted, rad (about 17°).
const WIDE_TURN_RAD: f64 = 0.3;
/// Ridge weight per frame on the pivot correction: normals that spread less than about
/// √RIDGE rad (about 0.2°) leave the pivot where the rig put it; above that the fit decides.
const RIDGE: f64 = 1e-5;

/// Per-frame ring data of one mark: `rings[i*k + j]` is ring j's stripe angle relative to
/// frame i's measured angle (rad) and its weight.
pub(crate) struct RingData<'a> {
    pub angles: &'a [Option<f64>],
    pub rings: &'a [(f32, f32)],
    pub radius: &'a [f64],
}

/// Refined angles (same length as the input) and the pivot correction `P − A` in the disc
/// plane, px.
pub(crate) fn refine(d: &RingData<'_>) -> (Vec<Option<f64>>, [f64; 2]) {
    let k = d.radius.len();
    // Per frame line fits.
    let mut fits: Vec<(f64, [f64; 2])> = Vec::new();
    for (i, th) in d.angles.iter().enumerate() {
        let Some(th) = *th else { continue };
        if let Some(fit) = line_fit(th, &d.rings[i * k..(i + 1) * k], d.radius) {
            fits.push(fit);
        }
    }
    let p = if fits.len() >= 3 {
        pivot_correction(&fits)
    } else {
        [0.0, 0.0]
    };

    // Re-read every ring about the refined pivot; two passes for the per-ring offsets.
    let ring_angle = |i: usize, j: usize, th: f64| -> f64 {
        let (e, _) = d.rings[i * k + j];
        let a = th + f64::from(e);
        let q = [d.radius[j] * a.cos() - p[0], d.radius[j] * a.sin() - p[1]];
        th + wrap_pi(q[1].atan2(q[0]) - th)
    };
    let combine = |i: usize, th: f64, offset: &[f64]| -> f64 {
        let (mut sw, mut s) = (0.0, 0.0);
        for j in 0..k {
            let w = f64::from(d.rings[i * k + j].1);
            if w > 0.0 {
                sw += w;
                s += w * (ring_angle(i, j, th) - th - offset[j]);
            }
        }
        if sw > 0.0 { th + s / sw } else { th }
    };
    let zero = vec![0.0; k];
    let first: Vec<Option<f64>> = d
        .angles
        .iter()
        .enumerate()
        .map(|(i, a)| a.map(|th| combine(i, th, &zero)))
        .collect();
    let mut offset = vec![0.0; k];
    let mut wsum = vec![0.0; k];
    for (i, a) in first.iter().enumerate() {
        let (Some(th1), Some(th)) = (*a, d.angles[i]) else {
            continue;
        };
        for j in 0..k {
            let w = f64::from(d.rings[i * k + j].1);
            if w > 0.0 {
                offset[j] += w * (ring_angle(i, j, th) - th1);
                wsum[j] += w;
            }
        }
    }
    let (mut tw, mut tm) = (0.0, 0.0);
    for j in 0..k {
        if wsum[j] > 0.0 {
            offset[j] /= wsum[j];
            tw += wsum[j];
            tm += wsum[j] * offset[j];
        }
    }
    if tw > 0.0 {
        offset.iter_mut().for_each(|o| *o -= tm / tw);
    }
    let out = d
        .angles
        .iter()
        .enumerate()
        .map(|(i, a)| a.map(|th| combine(i, th, &offset)))
        .collect();
    (out, p)
}

/// The pivot correction from per-frame line fits `(e_i, n_i)`, or zero when the fit cannot
/// be trusted. `e_i = e0 + p·n_i`. Over a turn of less than about 40° only the component of
/// `p` along the stripe's mean direction is seen to first order (the component along the
/// mean normal trades against `e0`), and only that component moves relative angles to first
/// order; so for small turns that component alone is fitted, and for larger turns both.
fn pivot_correction(fits: &[(f64, [f64; 2])]) -> [f64; 2] {
    let m = fits.len() as f64;
    let (sx, sy) = fits
        .iter()
        .fold((0.0, 0.0), |a, (_, n)| (a.0 + n[0], a.1 + n[1]));
    let norm = sx.hypot(sy);
    if norm <= 0.0 {
        return [0.0, 0.0];
    }
    let nbar = [sx / norm, sy / norm];
    let tbar = [-nbar[1], nbar[0]];
    // Spread of the normal's direction about its mean, rad.
    let along: Vec<f64> = fits
        .iter()
        .map(|(_, n)| n[0] * tbar[0] + n[1] * tbar[1])
        .collect();
    let mean_a = along.iter().sum::<f64>() / m;
    let spread = (along.iter().map(|a| (a - mean_a).powi(2)).sum::<f64>() / m).sqrt();
    let floor = MIN_CORRECTION_PX.max(PIXELATION_PX / spread.max(1e-6));
    let p = if spread > WIDE_TURN_RAD {
        let mut a = [[0.0f64; 3]; 3];
        let mut b = [0.0f64; 3];
        for (e, n) in fits {
            let row = [1.0, n[0], n[1]];
            for r in 0..3 {
                for c in 0..3 {
                    a[r][c] += row[r] * row[c];
                }
                b[r] += row[r] * e;
            }
        }
        a[1][1] += RIDGE * m;
        a[2][2] += RIDGE * m;
        match solve3(a, b) {
            Some(x) => [x[1], x[2]],
            None => return [0.0, 0.0],
        }
    } else {
        // e_i = c + q·(n_i·t̄): a straight-line fit of e against n·t̄.
        let mean_e = fits.iter().map(|f| f.0).sum::<f64>() / m;
        let (mut sxy, mut sxx) = (0.0, 0.0);
        for ((e, _), a) in fits.iter().zip(&along) {
            sxy += (a - mean_a) * (e - mean_e);
            sxx += (a - mean_a).powi(2);
        }
        if sxx <= 0.0 {
            return [0.0, 0.0];
        }
        let q = sxy / sxx;
        [q * tbar[0], q * tbar[1]]
    };
    let size = p[0].hypot(p[1]);
    if (floor..=MAX_CORRECTION_PX).contains(&size) {
        p
    } else {
        [0.0, 0.0]
    }
}

/// Weighted straight-line fit through a frame's ring crossings. Returns the signed distance of
/// the assumed pivot's line offset `e` and the unit normal `n`, or None with too few rings.
fn line_fit(th: f64, rings: &[(f32, f32)], radius: &[f64]) -> Option<(f64, [f64; 2])> {
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
    let icpt = sv / sw - slope * ss / sw;
    let norm = (1.0 + slope * slope).sqrt();
    let normal = [(-slope * u[0] + n[0]) / norm, (-slope * u[1] + n[1]) / norm];
    Some((icpt / norm, normal))
}

/// Solves a 3×3 linear system by Cramer's rule; None when it is singular.
fn solve3(a: [[f64; 3]; 3], b: [f64; 3]) -> Option<[f64; 3]> {
    let det = |m: &[[f64; 3]; 3]| {
        m[0][0] * (m[1][1] * m[2][2] - m[1][2] * m[2][1])
            - m[0][1] * (m[1][0] * m[2][2] - m[1][2] * m[2][0])
            + m[0][2] * (m[1][0] * m[2][1] - m[1][1] * m[2][0])
    };
    let d = det(&a);
    if d.abs() < 1e-12 {
        return None;
    }
    let mut x = [0.0; 3];
    for (c, xc) in x.iter_mut().enumerate() {
        let mut m = a;
        for r in 0..3 {
            m[r][c] = b[r];
        }
        *xc = det(&m) / d;
    }
    Some(x)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Ring data for a straight stripe through `pivot` (relative to the assumed pivot at the
    /// origin), missing it by `miss` px, turned to each of `angles`.
    fn rings_for(pivot: [f64; 2], miss: f64, angles: &[f64], radius: &[f64]) -> RingData<'static> {
        let mut meas = Vec::new();
        let mut rings = Vec::new();
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
            for x in crossing {
                rings.push(((x - mean) as f32, 1.0f32));
            }
        }
        RingData {
            angles: Box::leak(meas.into_boxed_slice()),
            rings: Box::leak(rings.into_boxed_slice()),
            radius: Box::leak(radius.to_vec().into_boxed_slice()),
        }
    }

    #[test]
    fn recovers_a_misplaced_pivot_and_true_rotations() {
        let radius: Vec<f64> = (0..30).map(|i| 10.0 + 2.0 * i as f64).collect();
        let angles: Vec<f64> = (0..50)
            .map(|i| (-72.0 + 0.8 * i as f64).to_radians())
            .collect();
        let d = rings_for([0.8, -0.6], 0.0, &angles, &radius);
        let (out, p) = refine(&d);
        // Only the component across the stripe's mean normal is observable from a part turning
        // 39°; the part along it trades against the stripe's own miss distance and hardly
        // matters to angles. The mean normal here is at −52° + 90° = 38°.
        let m = 38f64.to_radians();
        let across = |v: [f64; 2]| -v[0] * m.sin() + v[1] * m.cos();
        assert!((across(p) - across([0.8, -0.6])).abs() < 0.05, "{p:?}");
        // Rotations relative to the first frame are exact again (raw ones are off).
        let raw_err = (d.angles[49].unwrap() - d.angles[0].unwrap()) - (angles[49] - angles[0]);
        let err = (out[49].unwrap() - out[0].unwrap()) - (angles[49] - angles[0]);
        assert!(raw_err.abs().to_degrees() > 0.1, "{raw_err}");
        assert!(err.abs().to_degrees() < 0.01, "{}", err.to_degrees());
    }

    #[test]
    fn keeps_an_exact_pivot_and_a_stripe_that_misses_it() {
        let radius: Vec<f64> = (0..30).map(|i| 10.0 + 2.0 * i as f64).collect();
        let angles: Vec<f64> = (0..50)
            .map(|i| (10.0 + 1.5 * i as f64).to_radians())
            .collect();
        let d = rings_for([0.0, 0.0], 2.5, &angles, &radius);
        let (out, p) = refine(&d);
        assert!(p[0].hypot(p[1]) < 0.05, "{p:?}");
        for (i, a) in angles.iter().enumerate() {
            let err = (out[i].unwrap() - out[0].unwrap()) - (a - angles[0]);
            assert!(err.abs().to_degrees() < 0.01);
        }
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
