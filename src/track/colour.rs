//! Colour marks: where a clip has colour, a mark whose paint differs from its metal more in
//! colour than in brightness is tracked on the projection of (Y′, Cb, Cr) that best separates
//! the two, learnt from the first frame: Fisher's linear discriminant, w = S_w⁻¹ (μ_paint −
//! μ_metal) with S_w the pooled within-class scatter (R. A. Fisher, "The use of multiple
//! measurements in taxonomic problems", Annals of Eugenics 7 (1936) 179–188; Duda, Hart &
//! Stork, Pattern Classification, 2nd ed., §3.8.2).
//!
//! The radial tracker samples the projection instead of luma (`PolarGrid::prepare_with`): at
//! each grid point it reads luma as always, reads chroma at the same point from its own
//! samples (bilinear, by their siting), and projects the two. Only the points a frame's search
//! reads are projected, a few thousand, so colour costs about what luma does; projecting a
//! plane over each mark's whole box cost 10 ms a frame at 720p (docs/performance.md). Paint
//! is mapped to 0.75 and metal to 0.25; the tracker normalises each ring by its own mean and
//! noise, so lighting flicker (a common gain on Y′, Cb and Cr, which scales the projection)
//! does not matter.
//!
//! Labels come from the first frame without knowing the paint's colour: the annulus is cut
//! into angular sectors; the metal is the sectors' median colour, and the stripe is the run of
//! sectors around the one farthest from it (per-channel robust z, MAD scale). Everything else
//! in the annulus (recesses, pits, glints, holes) lands in the metal class. The metal's mean is
//! robust, so they do not move it, but its scatter is the plain one, so they spread the class
//! along their own directions of colour and the discriminant gives those directions little
//! weight: a white glint beside a red stripe does not read as paint.
//!
//! When the projection does not at least double Fisher's separation J = Δᵀ S_w⁻¹ Δ over luma
//! alone (a monochrome camera, neutral chroma, or paint that already stands out in brightness),
//! the mark keeps the exact luma path.
//!
//! Part of the track stage: it must never import segment, mechanics, report, `analyze`,
//! `batch`, `find_marks`, `calibrate` or the CLI.

// 3×3 matrix algebra on (Y′, Cb, Cr) reads most plainly with indices.
#![allow(clippy::needless_range_loop)]

use crate::decode::{FrameRef, LumaRef};
use crate::stats::median_in_place;

use super::polar::{ColourWeights, PolarGrid};

/// Chroma must multiply the luma-only separation by this much to be used.
const MIN_GAIN_OVER_LUMA: f64 = 2.0;
/// Sample noise floor added to the scatter's diagonal: 8-bit quantisation, (1/255)²/12 per
/// channel, times four for sensor noise (common practice).
const RIDGE: f64 = 4.0 * (1.0 / 255.0) * (1.0 / 255.0) / 12.0;
/// Pixels kept around the grid's box beyond the camera shift, px.
const BOX_MARGIN_PX: usize = 2;

/// A mark's learnt projection.
#[derive(Debug, Clone)]
pub(crate) struct ColourProjection {
    /// Weights on (Y′, Cb, Cr) and offset, scaled so that metal maps to 0.25 and paint to
    /// 0.75.
    pub weights: ColourWeights,
    /// Fisher's separation with colour and with luma alone (for tests and notes).
    pub separation: (f64, f64),
}

/// Y′ (0..1) of 8-bit luma.
#[inline]
fn luma_at(d: &[u8], w: u32, x: usize, y: usize) -> f32 {
    f32::from(d[y * w as usize + x]) / 255.0
}

fn inv3(m: [[f64; 3]; 3]) -> Option<[[f64; 3]; 3]> {
    let det = m[0][0] * (m[1][1] * m[2][2] - m[1][2] * m[2][1])
        - m[0][1] * (m[1][0] * m[2][2] - m[1][2] * m[2][0])
        + m[0][2] * (m[1][0] * m[2][1] - m[1][1] * m[2][0]);
    if det.abs() < 1e-300 || !det.is_finite() {
        return None;
    }
    let c = |a: usize, b: usize, c: usize, d: usize| m[a][b] * m[c][d];
    let r = [
        [
            c(1, 1, 2, 2) - c(1, 2, 2, 1),
            c(0, 2, 2, 1) - c(0, 1, 2, 2),
            c(0, 1, 1, 2) - c(0, 2, 1, 1),
        ],
        [
            c(1, 2, 2, 0) - c(1, 0, 2, 2),
            c(0, 0, 2, 2) - c(0, 2, 2, 0),
            c(0, 2, 1, 0) - c(0, 0, 1, 2),
        ],
        [
            c(1, 0, 2, 1) - c(1, 1, 2, 0),
            c(0, 1, 2, 0) - c(0, 0, 2, 1),
            c(0, 0, 1, 1) - c(0, 1, 1, 0),
        ],
    ];
    Some(r.map(|row| row.map(|v| v / det)))
}

/// Mean and scatter (covariance) of colour samples.
pub(super) fn moments(px: &[[f32; 3]]) -> ([f64; 3], [[f64; 3]; 3]) {
    let n = px.len().max(1) as f64;
    let mut mu = [0.0; 3];
    for p in px {
        for k in 0..3 {
            mu[k] += f64::from(p[k]);
        }
    }
    mu = mu.map(|v| v / n);
    let mut s = [[0.0; 3]; 3];
    for p in px {
        let d = [0, 1, 2].map(|k| f64::from(p[k]) - mu[k]);
        for a in 0..3 {
            for b in 0..3 {
                s[a][b] += d[a] * d[b];
            }
        }
    }
    (mu, s.map(|r| r.map(|v| v / n)))
}

/// χ²₃ at 0.975: the reweighting cut on squared Mahalanobis distance in three channels.
const CHI2_3_975: f64 = 9.348;
/// 0.975 / P(χ²₅ ≤ χ²₃,₀.₉₇₅): makes the covariance of the kept points consistent at the
/// normal distribution (Croux & Haesbroeck, "Influence function and efficiency of the minimum
/// covariance determinant scatter matrix estimator", J. Multivariate Anal. 71, 1999, eq. 2.4
/// for the reweighting step; P(χ²₅ ≤ 9.348) = 0.904).
const REWEIGHT_CONSISTENCY: f64 = 0.975 / 0.904;

/// Mean and covariance of `px` after one reweighting step: the points within the χ²₃ 97.5 %
/// ellipsoid of the plain moments are kept and their moments taken, scaled to be consistent
/// at the normal (the reweighting step of the MCD estimator, Rousseeuw & Van Driessen, "A
/// fast algorithm for the minimum covariance determinant estimator", Technometrics 41, 1999,
/// §2; started here from the plain moments, not from the MCD subset). Glints, pits and rims
/// caught in a learning class then pull its mean and scatter far less. The plain moments when
/// too few points would remain.
fn robust_moments(px: &[[f32; 3]]) -> ([f64; 3], [[f64; 3]; 3]) {
    let (mu, s) = moments(px);
    let mut sr = s;
    for (k, row) in sr.iter_mut().enumerate() {
        row[k] += RIDGE;
    }
    let Some(si) = inv3(sr) else {
        return (mu, s);
    };
    let kept: Vec<[f32; 3]> = px
        .iter()
        .copied()
        .filter(|p| {
            let d = [0, 1, 2].map(|k| f64::from(p[k]) - mu[k]);
            let d2: f64 = (0..3)
                .map(|a| (0..3).map(|b| d[a] * si[a][b] * d[b]).sum::<f64>())
                .sum();
            d2 <= CHI2_3_975
        })
        .collect();
    if kept.len() < 8 || kept.len() == px.len() {
        return (mu, s);
    }
    let (mk, sk) = moments(&kept);
    (mk, sk.map(|r| r.map(|v| v * REWEIGHT_CONSISTENCY)))
}

impl ColourProjection {
    /// Learns the projection for the mark sampled by `grid` from the first frame (moved by
    /// `shift`). None when the frame has no colour, its luma is deeper than 8 bit, no stripe
    /// stands out, or colour adds too little over luma.
    pub fn learn(
        frame: FrameRef<'_>,
        grid: &PolarGrid,
        shift: [f64; 2],
    ) -> Option<ColourProjection> {
        let chroma = frame.chroma?;
        let LumaRef::U8(luma) = frame.luma else {
            return None;
        };
        let (pivot, map, grid_box) = grid.geometry();
        let (r_lo, r_hi) = {
            let r = &grid.radius;
            let half = if r.len() > 1 {
                0.5 * (r[1] - r[0])
            } else {
                0.5
            };
            (r[0] - half, r[r.len() - 1] + half)
        };
        // Screen → disc plane: the inverse of the 2×2 map.
        let det = map[0][0] * map[1][1] - map[0][1] * map[1][0];
        if det.abs() < 1e-9 {
            return None;
        }
        let inv = [
            [map[1][1] / det, -map[0][1] / det],
            [-map[1][0] / det, map[0][0] / det],
        ];
        let r_mid = 0.5 * (r_lo + r_hi);
        let sectors = ((std::f64::consts::TAU * r_mid / 3.0).round() as usize).clamp(36, 240);
        let mut px: Vec<(usize, [f32; 3])> = Vec::new();
        let (w, h) = (frame.width, frame.height);
        let [x0, x1, y0, y1] = shifted_box(grid_box, shift, w, h);
        for y in y0..=y1 {
            for x in x0..=x1 {
                let dx = x as f64 - pivot[0] - shift[0];
                let dy = y as f64 - pivot[1] - shift[1];
                let u = inv[0][0] * dx + inv[0][1] * dy;
                let v = inv[1][0] * dx + inv[1][1] * dy;
                let r = (u * u + v * v).sqrt();
                if r < r_lo || r > r_hi {
                    continue;
                }
                let a = v.atan2(u) + std::f64::consts::PI;
                let s = ((a / std::f64::consts::TAU * sectors as f64) as usize).min(sectors - 1);
                let (cb, cr) = chroma.at(x as u32, y as u32, w, h);
                px.push((s, [luma_at(luma, w, x, y), cb, cr]));
            }
        }
        if px.len() < 50 {
            return None;
        }
        // Sector means.
        let mut sum = vec![[0.0f64; 3]; sectors];
        let mut cnt = vec![0usize; sectors];
        for (s, c) in &px {
            cnt[*s] += 1;
            for k in 0..3 {
                sum[*s][k] += f64::from(c[k]);
            }
        }
        let means: Vec<Option<[f64; 3]>> = (0..sectors)
            .map(|s| (cnt[s] >= 2).then(|| sum[s].map(|v| v / cnt[s] as f64)))
            .collect();
        let filled: Vec<[f64; 3]> = means.iter().flatten().copied().collect();
        if filled.len() < sectors / 2 {
            return None;
        }
        let mut centre = [0.0; 3];
        let mut spread = [0.0; 3];
        for k in 0..3 {
            let mut v: Vec<f64> = filled.iter().map(|m| m[k]).collect();
            centre[k] = median_in_place(&mut v).unwrap_or(0.0);
            let mut dev: Vec<f64> = filled.iter().map(|m| (m[k] - centre[k]).abs()).collect();
            spread[k] = (1.4826 * median_in_place(&mut dev).unwrap_or(0.0)).max(1.0 / 255.0);
        }
        let score: Vec<f64> = means
            .iter()
            .map(|m| {
                m.map_or(0.0, |m| {
                    (0..3)
                        .map(|k| ((m[k] - centre[k]) / spread[k]).powi(2))
                        .sum()
                })
            })
            .collect();
        let (peak, &best) = score.iter().enumerate().max_by(|a, b| a.1.total_cmp(b.1))?;
        if best < 9.0 {
            return None;
        }
        // The stripe: the run of sectors around the peak scoring at least half of it.
        let mut stripe = vec![false; sectors];
        stripe[peak] = true;
        let limit = sectors / 6;
        for dir in [1isize, -1] {
            for step in 1..=limit as isize {
                let s = (peak as isize + dir * step).rem_euclid(sectors as isize) as usize;
                if score[s] < 0.5 * best {
                    break;
                }
                stripe[s] = true;
            }
        }
        let width = stripe.iter().filter(|&&b| b).count();
        let guard = (2 * width).max(sectors / 24) as isize;
        let far = |s: usize| {
            let d = (s as isize - peak as isize).rem_euclid(sectors as isize);
            d.min(sectors as isize - d) > guard
        };
        let paint: Vec<[f32; 3]> = px.iter().filter(|p| stripe[p.0]).map(|p| p.1).collect();
        let metal: Vec<[f32; 3]> = px.iter().filter(|p| far(p.0)).map(|p| p.1).collect();
        if paint.len() < 8 || metal.len() < 50 {
            return None;
        }
        let (mp, sp) = robust_moments(&paint);
        // The metal's mean is robust (a glint must not move it), but its scatter is the plain
        // one: everything the annulus shows that is not paint (glints, recesses, pits, holes,
        // a washer's edge) spreads the metal class along its own direction of colour, and the
        // discriminant then gives that direction little weight, so none of it can look like
        // paint. The robust scatter dropped exactly those points.
        let (mm, _) = robust_moments(&metal);
        let sm = moments(&metal).1;
        let mut sw = [[0.0; 3]; 3];
        for a in 0..3 {
            for b in 0..3 {
                sw[a][b] = sm[a][b] + sp[a][b] + if a == b { RIDGE } else { 0.0 };
            }
        }
        let delta = [0, 1, 2].map(|k| mp[k] - mm[k]);
        let si = inv3(sw)?;
        let wv = [0, 1, 2].map(|a| (0..3).map(|b| si[a][b] * delta[b]).sum::<f64>());
        let j_colour: f64 = (0..3).map(|k| wv[k] * delta[k]).sum();
        let j_luma = delta[0] * delta[0] / sw[0][0];
        if !(j_colour.is_finite() && j_colour > MIN_GAIN_OVER_LUMA * j_luma) {
            return None;
        }
        // Map metal to 0.25 and paint to 0.75: v = 0.25 + 0.5 (w·c − w·μm) / (w·Δ).
        let pm: f64 = (0..3).map(|k| wv[k] * mm[k]).sum();
        let g = 0.5 / j_colour;
        let wf = wv.map(|v| (v * g) as f32);
        let offset = (0.25 - pm * g) as f32;
        Some(ColourProjection {
            weights: ColourWeights { w: wf, offset },
            separation: (j_colour, j_luma),
        })
    }
}

/// The grid's box moved by `shift` and grown by the shift's size and a margin, inside a
/// `w × h` frame: [x_lo, x_hi, y_lo, y_hi], inclusive.
fn shifted_box(b: [usize; 4], shift: [f64; 2], w: u32, h: u32) -> [usize; 4] {
    let grow = |lo: usize, hi: usize, s: f64, n: u32| -> (usize, usize) {
        let m = BOX_MARGIN_PX as f64 + 1.0;
        let lo = (lo as f64 + s.min(0.0) - m).floor().max(0.0) as usize;
        let hi = ((hi as f64 + s.max(0.0) + m).ceil() as usize).min(n as usize - 1);
        (lo, hi)
    };
    let (x0, x1) = grow(b[0], b[1], shift[0], w);
    let (y0, y1) = grow(b[2], b[3], shift[1], h);
    [x0, x1, y0, y1]
}

#[cfg(test)]
mod tests {

    #[test]
    fn glints_in_a_learning_class_barely_move_its_robust_mean() {
        // 200 metal pixels spread ±0.02 about 0.4, plus 10 % glints at 1.0 (a lamp's reflection).
        let mut px: Vec<[f32; 3]> = (0..200)
            .map(|i| {
                let e = ((i * 37 % 41) as f32 / 40.0 - 0.5) * 0.04;
                [0.4 + e, 0.5 - e, 0.5 + 0.5 * e]
            })
            .collect();
        px.extend(std::iter::repeat_n([1.0f32, 0.5, 0.5], 20));
        let (plain, _) = moments(&px);
        let (robust, s) = robust_moments(&px);
        assert!((plain[0] - 0.4).abs() > 0.05, "{plain:?}");
        assert!((robust[0] - 0.4).abs() < 0.005, "{robust:?}");
        assert!(s[0][0].sqrt() < 0.03, "{s:?}");
    }

    proptest::proptest! {
        /// The robust mean lies within the points' bounding box, and the covariance's diagonal
        /// is never negative.
        #[test]
        fn robust_moments_stay_within_the_data(
            px in proptest::collection::vec(proptest::array::uniform3(0.0f32..1.0), 1..120),
        ) {
            let (mu, s) = robust_moments(&px);
            for k in 0..3 {
                let lo = px.iter().map(|p| f64::from(p[k])).fold(f64::INFINITY, f64::min);
                let hi = px.iter().map(|p| f64::from(p[k])).fold(f64::NEG_INFINITY, f64::max);
                proptest::prop_assert!(mu[k] >= lo - 1e-6 && mu[k] <= hi + 1e-6);
                proptest::prop_assert!(s[k][k] >= 0.0);
            }
        }
    }
    use super::*;
    use crate::decode::{Chroma, ChromaSiting, Frame};
    use crate::rig::{RadialMark, Spin};

    /// A 96×96 colour frame: metal (Y 0.6, neutral), an orange-ish stripe at `deg` with the
    /// same luma, on a ring around (48, 48).
    fn frame(deg: f64, chroma: bool) -> Frame {
        let mut f = painted(deg, |i, j, paint| {
            let tex = ((i * 7 + j * 13) % 5) as f64 * 0.01;
            let (b, r) = if paint { (90, 175) } else { (128, 128) };
            (0.6 + tex, b, r)
        });
        if !chroma {
            f.chroma = None;
        }
        f
    }

    /// A 96×96 colour frame with a stripe from (48, 48) at `deg`: `look(i, j, paint)` gives
    /// pixel (i, j)'s Y′ (0..1), Cb and Cr (8-bit).
    fn painted(deg: f64, look: impl Fn(u32, u32, bool) -> (f64, u8, u8)) -> Frame {
        let (w, h) = (96u32, 96u32);
        let (s, c) = deg.to_radians().sin_cos();
        let (mut y, mut cb, mut cr) = (Vec::new(), Vec::new(), Vec::new());
        for j in 0..h {
            for i in 0..w {
                let (dx, dy) = (f64::from(i) - 48.0, f64::from(j) - 48.0);
                let paint = dx * c + dy * s > 0.0 && (-dx * s + dy * c).abs() < 3.0;
                let (yy, b, r) = look(i, j, paint);
                y.push((yy * 255.0).round() as u8);
                cb.push(b);
                cr.push(r);
            }
        }
        let mut f = Frame::from_u8(0, w, h, y);
        f.chroma = Some(Chroma {
            width: w,
            height: h,
            cb,
            cr,
            siting: ChromaSiting::Centre,
        });
        f
    }

    fn grid() -> PolarGrid {
        PolarGrid::new(
            &RadialMark {
                pivot: [48.0, 48.0],
                radius: [10.0, 40.0],
                tighten: Some(Spin::Cw),
                ellipse: None,
            },
            96,
            96,
        )
    }

    /// Learns `f`'s projection on [`grid`] and returns it with the projected value at a screen
    /// angle (degrees) on the ring nearest `radius` px from the pivot.
    fn projected_ring(f: &Frame, radius: f64) -> (ColourProjection, impl Fn(f64) -> f32) {
        let g = grid();
        let p = ColourProjection::learn(f.view(), &g, [0.0, 0.0]).expect("colour helps");
        let mut out = vec![0.0; g.rings * g.bins];
        g.sample(
            &g.prepare_with(f.view(), [0.0, 0.0], Some(p.weights)),
            &mut out,
        );
        let k = (0..g.rings)
            .min_by(|&a, &b| {
                (g.radius[a] - radius)
                    .abs()
                    .total_cmp(&(g.radius[b] - radius).abs())
            })
            .unwrap();
        let bins = g.bins;
        let at = move |deg: f64| out[k * bins + (deg / 360.0 * bins as f64).round() as usize];
        (p, at)
    }

    #[test]
    fn a_stripe_seen_only_in_colour_is_projected_bright_on_dull_metal() {
        let f = frame(30.0, true);
        let (p, at) = projected_ring(&f, 20.0);
        assert!(p.separation.0 > 2.0 * p.separation.1, "{:?}", p.separation);
        // The grid's samples on the projection: on the stripe (the ring nearest 20 px out, at
        // 30°) and on metal (same ring, at 120°).
        assert!((at(30.0) - 0.75).abs() < 0.1, "{}", at(30.0));
        assert!((at(120.0) - 0.25).abs() < 0.1, "{}", at(120.0));
    }

    /// A dark metal face with a red stripe that is also brighter than the metal, and a white
    /// glint (a lamp's reflection) elsewhere on the annulus: the glint lands in the metal class,
    /// and the projection must keep it near metal. Learnt from robust scatter, which drops the
    /// glint's pixels, the discriminant leaned on brightness and projected the glint as
    /// brighter than paint.
    #[test]
    fn a_glint_in_the_annulus_does_not_project_like_paint() {
        let glint = [
            48.0 + 22.0 * 120f64.to_radians().cos(),
            48.0 + 22.0 * 120f64.to_radians().sin(),
        ];
        let f = painted(30.0, |i, j, paint| {
            let lit = (f64::from(i) - glint[0]).hypot(f64::from(j) - glint[1]) < 5.0;
            // Metal with a mottle in brightness and in colour (±0.02 in Y′, ±3 levels in Cb
            // and Cr); paint that differs from it in both.
            let tex = ((i * 7 + j * 13) % 5) as f64 * 0.01;
            let ct = ((i * 11 + j * 5) % 7) as u8;
            if paint {
                (0.45, 118, 150)
            } else if lit {
                (0.95, 128, 128)
            } else {
                (0.2 + tex, 125 + ct, 131 - ct)
            }
        });
        let (_, at) = projected_ring(&f, 22.0);
        let (paint, metal, lit) = (at(30.0), at(200.0), at(120.0));
        assert!((paint - 0.75).abs() < 0.1, "paint {paint}");
        assert!((metal - 0.25).abs() < 0.1, "metal {metal}");
        // Nearer metal than paint: below the midpoint.
        assert!(lit < 0.5, "glint {lit} (paint {paint}, metal {metal})");
    }

    #[test]
    fn monochrome_frames_keep_the_luma_path() {
        let g = grid();
        assert!(ColourProjection::learn(frame(30.0, false).view(), &g, [0.0, 0.0]).is_none());
        // Neutral chroma (a monochrome camera in a colour container) adds nothing either.
        let mut f = frame(30.0, true);
        if let Some(c) = f.chroma.as_mut() {
            c.cb.fill(128);
            c.cr.fill(128);
        }
        assert!(ColourProjection::learn(f.view(), &g, [0.0, 0.0]).is_none());
    }

    #[test]
    fn inverse_of_a_symmetric_matrix() {
        let m = [[4.0, 1.0, 0.5], [1.0, 3.0, 0.2], [0.5, 0.2, 2.0]];
        let i = inv3(m).unwrap();
        for a in 0..3 {
            for b in 0..3 {
                let p: f64 = (0..3).map(|k| m[a][k] * i[k][b]).sum();
                assert!((p - if a == b { 1.0 } else { 0.0 }).abs() < 1e-12);
            }
        }
    }
}
