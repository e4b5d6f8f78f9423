//! An oblique disc's ellipse from its outline: rays from the pivot find the disc's edge, a
//! centred conic `A x² + B xy + C y² = 1` is chosen by consensus and fitted by trimmed least
//! squares, and its eigen-decomposition gives the axis ratio and the major-axis direction.
//!
//! Part of the `find-marks` command (built on decode and track, writing through report): it
//! must never import segment, mechanics, `analyze`, `batch` or the CLI.

use std::f64::consts::PI;

use super::luma::Img;
use super::ridge::Seg;
use crate::rig::Ellipse;

/// Smallest luma step (over 2 px) taken as a point of the disc's outline.
pub(super) const OUTLINE_MIN_STEP: f32 = 0.012;
/// Below this axis ratio the outline counts as an ellipse; above, as a circle.
pub(super) const CIRCLE_RATIO: f64 = 0.97;

/// The disc's outline about `pivot` as an ellipse, when it is visible and fits tightly.
pub(super) fn outline_ellipse(img: &Img, pivot: [f64; 2], s: &Seg) -> Option<Ellipse> {
    let [a, b] = s.ends();
    let reach = (a[0] - pivot[0])
        .hypot(a[1] - pivot[1])
        .max((b[0] - pivot[0]).hypot(b[1] - pivot[1]));
    let stripe_dir = (s.c[1] - pivot[1]).atan2(s.c[0] - pivot[0]);
    let mut pts = Vec::new();
    let rays = 180;
    for k in 0..rays {
        let al = k as f64 * 2.0 * PI / rays as f64;
        let off = ((al - stripe_dir + PI).rem_euclid(2.0 * PI) - PI).abs();
        if off < 12f64.to_radians() {
            continue;
        }
        let (c, sn) = (al.cos(), al.sin());
        let (r0, r1) = (0.4 * reach, 2.2 * reach);
        let step = 0.25;
        let grad = |r: f64| -> Option<f32> {
            let (x, y) = (pivot[0] + r * c, pivot[1] + r * sn);
            if x < 1.0 || y < 1.0 || x > (img.w - 2) as f64 || y > (img.h - 2) as f64 {
                return None;
            }
            Some((img.sample(x + c, y + sn) - img.sample(x - c, y - sn)).abs())
        };
        let mut best = (0.0f32, 0.0f64);
        let mut r = r0;
        while r < r1 {
            let Some(g) = grad(r) else { break };
            if g > best.0 {
                best = (g, r);
            }
            r += step;
        }
        if best.0 > OUTLINE_MIN_STEP {
            // Sub-sample peak: a parabola through the gradient at the peak and its neighbours.
            let rb = best.1;
            let mut re = rb;
            if let (Some(gm), Some(gp)) = (grad(rb - step), grad(rb + step)) {
                let den = f64::from(gm - 2.0 * best.0 + gp);
                if den < 0.0 {
                    re = rb + 0.5 * step * f64::from(gm - gp) / den;
                }
            }
            pts.push([re * c, re * sn]);
        }
    }
    if pts.len() < rays / 4 {
        return None;
    }
    // Consensus first (other parts' edges are caught by some rays): the centred conic
    // through three of the points that most points agree with (within 1 px along their ray),
    // over a fixed set of triples (RANSAC, Fischler & Bolles 1981, from memory); then
    // trimmed least squares on those points.
    let resid = |sol: &[f64; 3], p: &[f64; 2]| -> f64 {
        let r = p[0].hypot(p[1]);
        let (c, sn) = (p[0] / r, p[1] / r);
        let qv = sol[0] * c * c + sol[1] * c * sn + sol[2] * sn * sn;
        if qv > 0.0 {
            (r - 1.0 / qv.sqrt()).abs()
        } else {
            f64::INFINITY
        }
    };
    let feat = |p: &[f64; 2]| [p[0] * p[0], p[0] * p[1], p[1] * p[1]];
    let mut seed = 0x9e37_79b9_7f4a_7c15_u64;
    let mut pick = |n: usize| {
        seed ^= seed << 13;
        seed ^= seed >> 7;
        seed ^= seed << 17;
        (seed % n as u64) as usize
    };
    let mut keep: Vec<bool> = vec![true; pts.len()];
    let mut best_count = 0;
    for _ in 0..400 {
        let (i, j, k) = (pick(pts.len()), pick(pts.len()), pick(pts.len()));
        if i == j || j == k || i == k {
            continue;
        }
        let m = [feat(&pts[i]), feat(&pts[j]), feat(&pts[k])];
        let Some(sol) = solve3(m, [1.0, 1.0, 1.0]) else {
            continue;
        };
        let count = pts.iter().filter(|p| resid(&sol, p) < 1.0).count();
        if count > best_count {
            best_count = count;
            for (kp, p) in keep.iter_mut().zip(&pts) {
                *kp = resid(&sol, p) < 1.0;
            }
        }
    }
    if best_count < rays / 4 {
        return None;
    }
    let mut q = None;
    for _ in 0..4 {
        let mut m = [[0.0f64; 3]; 3];
        let mut v = [0.0f64; 3];
        for (p, k) in pts.iter().zip(&keep) {
            if !k {
                continue;
            }
            let f = [p[0] * p[0], p[0] * p[1], p[1] * p[1]];
            for i in 0..3 {
                for j in 0..3 {
                    m[i][j] += f[i] * f[j];
                }
                v[i] += f[i];
            }
        }
        let sol = solve3(m, v)?;
        // Radial residual of each point: r_fit = 1/sqrt(f·sol) along its direction.
        let res: Vec<f64> = pts
            .iter()
            .map(|p| {
                let r = p[0].hypot(p[1]);
                let (c, sn) = (p[0] / r, p[1] / r);
                let qv = sol[0] * c * c + sol[1] * c * sn + sol[2] * sn * sn;
                if qv > 0.0 {
                    (r - 1.0 / qv.sqrt()).abs()
                } else {
                    f64::INFINITY
                }
            })
            .collect();
        let mut sorted: Vec<f64> = res
            .iter()
            .zip(&keep)
            .filter(|(_, k)| **k)
            .map(|(r, _)| *r)
            .collect();
        if sorted.is_empty() {
            return None;
        }
        sorted.sort_by(f64::total_cmp);
        let med = sorted[sorted.len() / 2];
        let cut = (2.5 * med).max(0.75);
        for (k, r) in keep.iter_mut().zip(&res) {
            *k = *r <= cut;
        }
        q = Some((sol, res));
    }
    let (sol, res) = q?;
    let inl: Vec<f64> = res
        .iter()
        .zip(&keep)
        .filter(|(_, k)| **k)
        .map(|(r, _)| *r)
        .collect();
    if inl.len() < rays / 4 {
        return None;
    }
    let rms = (inl.iter().map(|r| r * r).sum::<f64>() / inl.len() as f64).sqrt();
    // Eigen-decomposition of [[A, B/2], [B/2, C]].
    let (aa, bb, cc) = (sol[0], sol[1] / 2.0, sol[2]);
    let tr = aa + cc;
    let d = ((aa - cc).powi(2) + 4.0 * bb * bb).sqrt();
    let (l1, l2) = (0.5 * (tr - d), 0.5 * (tr + d));
    if l1 <= 0.0 {
        return None;
    }
    let major = 1.0 / l1.sqrt();
    let minor = 1.0 / l2.sqrt();
    if rms > 0.012 * major || major < reach * 0.9 {
        return None;
    }
    let ratio = minor / major;
    if ratio >= CIRCLE_RATIO {
        return None;
    }
    // Eigenvector of the smaller eigenvalue: the major axis.
    let phi = 0.5 * (2.0 * bb).atan2(aa - cc) + PI / 2.0;
    let mut deg = phi.to_degrees().rem_euclid(180.0);
    if deg > 90.0 {
        deg -= 180.0;
    }
    Some(Ellipse {
        axis_ratio: (ratio * 1000.0).round() / 1000.0,
        major_deg: (deg * 10.0).round() / 10.0,
    })
}

/// Solves a 3×3 linear system; None when singular ([`crate::stats::solve3`]).
pub(super) fn solve3(m: [[f64; 3]; 3], v: [f64; 3]) -> Option<[f64; 3]> {
    crate::stats::solve3(m, v, 1e-300)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn img(w: usize, h: usize, f: impl Fn(f64, f64) -> f32) -> Img {
        Img::from_fn(w, h, f)
    }

    #[test]
    fn an_elliptic_outline_gives_its_axes_and_a_hexagon_does_not_fit() {
        // Outline of a disc of radius 60 seen at b/a = 0.55, major axis at 25°: bright inside.
        let (ratio, phi) = (0.55f64, 25f64.to_radians());
        let inside = |x: f64, y: f64| {
            let (dx, dy) = (x - 80.0, y - 80.0);
            let u = dx * phi.cos() + dy * phi.sin();
            let v = (-dx * phi.sin() + dy * phi.cos()) / ratio;
            u.hypot(v) < 60.0
        };
        let im = img(160, 160, |x, y| {
            // 4×4 supersampled edge.
            let mut a = 0.0;
            for j in 0..4 {
                for i in 0..4 {
                    if inside(x - 0.375 + 0.25 * i as f64, y - 0.375 + 0.25 * j as f64) {
                        a += 1.0;
                    }
                }
            }
            0.1 + 0.4 * a / 16.0
        });
        let stripe = Seg {
            c: [80.0 + 30.0 * phi.cos(), 80.0 + 30.0 * phi.sin()],
            theta: phi,
            ext: [-25.0, 25.0],
            length: 50.0,
            dark: false,
            contrast: 0.3,
        };
        let e = outline_ellipse(&im, [80.0, 80.0], &stripe).expect("ellipse");
        assert!((e.axis_ratio - ratio).abs() < 0.01, "{e:?}");
        assert!((e.major_deg - 25.0).abs() < 1.0, "{e:?}");

        // A hexagon (apothem 55) about the same centre is not taken for an ellipse.
        let hex = img(160, 160, |x, y| {
            let (dx, dy) = (x - 80.0, y - 80.0);
            let d = (0..3)
                .map(|k| {
                    let a = (k as f64 * 60.0 + 10.0).to_radians();
                    (dx * a.cos() + dy * a.sin()).abs()
                })
                .fold(0.0, f64::max);
            if d < 55.0 { 0.5 } else { 0.1 }
        });
        assert_eq!(outline_ellipse(&hex, [80.0, 80.0], &stripe), None);
    }
}
