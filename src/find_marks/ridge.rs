//! Stripes in one frame: a painted stripe is a ridge, brighter (or darker) than the surface on
//! both sides. Components of the ridge response are kept when long and thin (weighted second
//! moments, Hu 1962, "Visual pattern recognition by moment invariants", IRE Trans. Inf.
//! Theory), and each one's centre line is refined to sub-pixel.
//!
//! Part of the `find-marks` command (built on decode and track, writing through report): it
//! must never import segment, mechanics, `analyze`, `batch` or the CLI.

use std::f64::consts::PI;

use super::luma::Img;

/// Half the ridge test's span, px: stripes up to about `2 × (d − 1)` = 8 px wide are found.
pub const RIDGE_OFFSET_PX: i32 = 5;
/// Hysteresis thresholds of the ridge response (luma, 0..1).
const SEED: f32 = 0.06;
const GROW: f32 = 0.03;
/// A component keeps only pixels whose response is at least this fraction of its peak.
const CORE: f64 = 0.35;
/// A stripe is at least this long, px, and this many times longer than wide.
const MIN_LENGTH_PX: f64 = 14.0;
const MIN_ELONGATION: f64 = 3.5;

/// A stripe seen in one frame.
#[derive(Debug, Clone, Copy)]
pub(super) struct Seg {
    /// Weighted centroid, px.
    pub(super) c: [f64; 2],
    /// Orientation of the long axis, radians in (−π/2, π/2].
    pub(super) theta: f64,
    /// Extent along the long axis from the centroid: min and max projection, px.
    pub(super) ext: [f64; 2],
    /// Long-axis length, px.
    pub(super) length: f64,
    pub(super) dark: bool,
    /// Mean ridge response over the stripe's core, luma: how strongly it stands out.
    pub(super) contrast: f64,
}

impl Seg {
    pub(super) fn dir(&self) -> [f64; 2] {
        [self.theta.cos(), self.theta.sin()]
    }
    pub(super) fn ends(&self) -> [[f64; 2]; 2] {
        let u = self.dir();
        [
            [
                self.c[0] + self.ext[0] * u[0],
                self.c[1] + self.ext[0] * u[1],
            ],
            [
                self.c[0] + self.ext[1] * u[0],
                self.c[1] + self.ext[1] * u[1],
            ],
        ]
    }
}

/// The ridge test's eight directions, as integer offsets about `RIDGE_OFFSET_PX` long.
pub(super) fn offsets() -> [(i32, i32); 8] {
    let d = RIDGE_OFFSET_PX as f64;
    let mut o = [(0, 0); 8];
    for (k, v) in o.iter_mut().enumerate() {
        let a = k as f64 * PI / 8.0;
        *v = ((d * a.cos()).round() as i32, (d * a.sin()).round() as i32);
    }
    o
}

/// Stripes inside the window `[x0, x1) × [y0, y1)` of `img`.
pub(super) fn detect(img: &Img, win: [usize; 4]) -> Vec<Seg> {
    let [x0, x1, y0, y1] = win;
    let (ww, wh) = (x1 - x0, y1 - y0);
    if ww < 3 || wh < 3 {
        return Vec::new();
    }
    let offs = offsets();
    let mut out = Vec::new();
    for dark in [false, true] {
        let sgn = if dark { -1.0 } else { 1.0 };
        let mut r = vec![0f32; ww * wh];
        for y in y0..y1 {
            for x in x0..x1 {
                let c = sgn * img.at(x as i32, y as i32);
                let mut best = 0f32;
                for &(dx, dy) in &offs {
                    let a = sgn * img.at(x as i32 + dx, y as i32 + dy);
                    let b = sgn * img.at(x as i32 - dx, y as i32 - dy);
                    best = best.max((c - a).min(c - b));
                }
                r[(y - y0) * ww + (x - x0)] = best;
            }
        }
        // Hysteresis components (8-connected).
        let mut seen = vec![false; ww * wh];
        let mut stack = Vec::new();
        for s in 0..ww * wh {
            if seen[s] || r[s] < SEED {
                continue;
            }
            seen[s] = true;
            stack.push(s);
            let mut pts: Vec<(f64, f64, f64)> = Vec::new();
            while let Some(i) = stack.pop() {
                let (px, py) = (i % ww, i / ww);
                pts.push(((px + x0) as f64, (py + y0) as f64, f64::from(r[i])));
                for dy in -1i32..=1 {
                    for dx in -1i32..=1 {
                        let (nx, ny) = (px as i32 + dx, py as i32 + dy);
                        if nx < 0 || ny < 0 || nx >= ww as i32 || ny >= wh as i32 {
                            continue;
                        }
                        let j = ny as usize * ww + nx as usize;
                        if !seen[j] && r[j] >= GROW {
                            seen[j] = true;
                            stack.push(j);
                        }
                    }
                }
            }
            // Keep the component's strong core: a faint ridge that touches the stripe (a
            // smoothed bracket border, say) must not stretch it.
            let peak = pts.iter().map(|p| p.2).fold(0.0, f64::max);
            pts.retain(|p| p.2 >= CORE * peak);
            if pts.len() < 20 {
                continue;
            }
            if let Some(seg) = segment(&pts, dark) {
                out.push(centre_line(img, seg));
            }
        }
    }
    out
}

/// A component's centroid, orientation and extent; None unless long and thin.
pub(super) fn segment(pts: &[(f64, f64, f64)], dark: bool) -> Option<Seg> {
    let sw: f64 = pts.iter().map(|p| p.2).sum();
    if sw <= 0.0 {
        return None;
    }
    let cx = pts.iter().map(|p| p.0 * p.2).sum::<f64>() / sw;
    let cy = pts.iter().map(|p| p.1 * p.2).sum::<f64>() / sw;
    let (mut sxx, mut sxy, mut syy) = (0.0, 0.0, 0.0);
    for p in pts {
        let (dx, dy) = (p.0 - cx, p.1 - cy);
        sxx += p.2 * dx * dx;
        sxy += p.2 * dx * dy;
        syy += p.2 * dy * dy;
    }
    let (sxx, sxy, syy) = (sxx / sw, sxy / sw, syy / sw);
    let theta = 0.5 * (2.0 * sxy).atan2(sxx - syy);
    let tr = sxx + syy;
    let disc = ((sxx - syy).powi(2) + 4.0 * sxy * sxy).sqrt();
    let minor = (0.5 * (tr - disc)).max(0.0);
    let (u0, u1) = (theta.cos(), theta.sin());
    let (mut lo, mut hi) = (f64::INFINITY, f64::NEG_INFINITY);
    for p in pts {
        let s = (p.0 - cx) * u0 + (p.1 - cy) * u1;
        lo = lo.min(s);
        hi = hi.max(s);
    }
    let length = hi - lo + 1.0;
    let width = (12.0 * minor).sqrt().max(1.0);
    if length < MIN_LENGTH_PX || length < MIN_ELONGATION * width {
        return None;
    }
    Some(Seg {
        c: [cx, cy],
        theta: wrap_half(theta),
        ext: [lo - 0.5, hi + 0.5],
        length,
        dark,
        contrast: sw / pts.len() as f64,
    })
}

/// Refines a stripe's centre line to sub-pixel: across the stripe, every pixel along it, the
/// centroid of the paint's contrast over the local surface (the lower of the two profile
/// ends) gives a centre point; a straight line fitted to those points by least squares gives
/// the centroid and orientation. The thresholded component alone is biased by its pixel mask.
pub(super) fn centre_line(img: &Img, seg: Seg) -> Seg {
    let u = seg.dir();
    let nrm = [-u[1], u[0]];
    let sgn = if seg.dark { -1.0f32 } else { 1.0 };
    let half = f64::from(RIDGE_OFFSET_PX) + 1.0;
    let mut pts: Vec<(f64, f64)> = Vec::new();
    let mut s = seg.ext[0] + 3.0;
    while s <= seg.ext[1] - 3.0 {
        let base = [seg.c[0] + s * u[0], seg.c[1] + s * u[1]];
        let prof: Vec<(f64, f32)> = (0..=(4.0 * half) as i32)
            .map(|k| {
                let t = -half + 0.5 * f64::from(k);
                (
                    t,
                    sgn * img.sample(base[0] + t * nrm[0], base[1] + t * nrm[1]),
                )
            })
            .collect();
        let floor = prof[0].1.max(prof[prof.len() - 1].1);
        let (mut sw, mut st) = (0.0, 0.0);
        for (t, v) in &prof {
            let w = f64::from((v - floor).max(0.0));
            sw += w;
            st += w * t;
        }
        if sw > 0.0 {
            pts.push((s, st / sw));
        }
        s += 1.0;
    }
    if pts.len() < 6 {
        return seg;
    }
    let n = pts.len() as f64;
    let ms = pts.iter().map(|p| p.0).sum::<f64>() / n;
    let mt = pts.iter().map(|p| p.1).sum::<f64>() / n;
    let sst: f64 = pts.iter().map(|p| (p.0 - ms) * (p.1 - mt)).sum();
    let sss: f64 = pts.iter().map(|p| (p.0 - ms).powi(2)).sum();
    if sss <= 0.0 {
        return seg;
    }
    let slope = sst / sss;
    let c = [
        seg.c[0] + ms * u[0] + mt * nrm[0],
        seg.c[1] + ms * u[1] + mt * nrm[1],
    ];
    Seg {
        c,
        theta: wrap_half(seg.theta + slope.atan()),
        ext: [seg.ext[0] - ms, seg.ext[1] - ms],
        ..seg
    }
}

/// Wraps an orientation to (−π/2, π/2].
pub(super) fn wrap_half(a: f64) -> f64 {
    let mut a = a % PI;
    if a <= -PI / 2.0 {
        a += PI;
    }
    if a > PI / 2.0 {
        a -= PI;
    }
    a
}

#[cfg(test)]
mod tests {
    use super::*;

    fn img(w: usize, h: usize, f: impl Fn(f64, f64) -> f32) -> Img {
        Img::from_fn(w, h, f)
    }

    #[test]
    fn a_stripe_is_found_but_a_step_edge_and_a_round_highlight_are_not() {
        // A 5 px bright stripe at 30° through (60, 60), a vertical step edge at x = 100 and a
        // Gaussian highlight (σ 9 px, peak 0.4) at (40, 100): only the stripe is a stripe.
        let (c, s) = (30f64.to_radians().cos(), 30f64.to_radians().sin());
        let im = img(140, 140, |x, y| {
            let mut v = if x >= 100.0 { 0.6 } else { 0.15 };
            let (dx, dy) = (x - 60.0, y - 60.0);
            let along = dx * c + dy * s;
            let across = -dx * s + dy * c;
            if across.abs() <= 2.5 && along.abs() <= 25.0 && x < 100.0 {
                v = 0.85;
            }
            let g = ((x - 40.0).powi(2) + (y - 110.0).powi(2)) / (2.0 * 81.0);
            v + 0.4 * (-g).exp() as f32
        });
        let segs = detect(&im, [0, 140, 0, 140]);
        assert_eq!(segs.len(), 1, "{segs:?}");
        let sg = centre_line(&im, segs[0]);
        assert!(
            (sg.theta.to_degrees() - 30.0).abs() < 0.5,
            "{:.2}°",
            sg.theta.to_degrees()
        );
        let off = -(sg.c[0] - 60.0) * s + (sg.c[1] - 60.0) * c;
        assert!(off.abs() < 0.2, "line off by {off:.3} px");
    }

    #[test]
    fn orientations_wrap_to_a_half_turn() {
        for a in [-3.0, -1.6, 0.0, 1.6, 3.0, 7.0] {
            let w = wrap_half(a);
            assert!(w > -PI / 2.0 - 1e-12 && w <= PI / 2.0 + 1e-12);
            assert!(((a - w) / PI - ((a - w) / PI).round()).abs() < 1e-9);
        }
    }
}
