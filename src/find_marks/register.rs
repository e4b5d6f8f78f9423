//! A turning part's pivot refined by registering the part's image between the positions it
//! rested at.
//!
//! The stripe's lines (`pivot.rs`) place the pivot to a tenth or a third of a pixel on a short
//! stripe, and that is not enough: the tracker's angle about a pivot that is off by δ along the
//! stripe is off by δ·sin(θ − θ₀)/r, about 0.2° over a 30° turn for 0.24 px at 20 px radius.
//! The lines' error does not average away over frames either: the paint's edges and the surface
//! texture beside it turn with the part, so a line mis-read in one frame is mis-read the same
//! way in every frame, and the lines from all frames are tangent to a small circle about the
//! true pivot instead of passing through it.
//!
//! What holds by construction is the part's rigid turn: every pixel of the part (paint and the
//! surface's texture) at one rest position maps onto the next rest position by a rotation about
//! the true pivot, whatever the paint or the finish looks like. So:
//!
//! 1. **Rests.** Spans of at least [`MIN_REST_FRAMES`] frames over which the followed stripe's
//!    orientation stays within a band set from its own noise (the median absolute second
//!    difference, which a slow creep does not raise), and within [`MAX_BLUR_PX`] at the
//!    stripe's outer end, are the positions the part rested at. Each rest's frames are averaged
//!    over a square about the pivot (noise down by the square root of their number; moving,
//!    blurred frames are not used).
//! 2. **Registration.** The longest rest is the template `A`. For each other rest `k`, with
//!    `w(x) = p + R(φₖ)(x − p)`, the model is `Bₖ(w(x)) = gₖ·A(x) + oₖ + aₖ·u + bₖ·v` (`u`,
//!    `v` the pixel's offsets from the pivot over the stripe's reach): a rotation about the
//!    shared pivot `p`, a gain and an offset (lamp flicker) and a linear shading change (a lamp
//!    that does not turn with the part). The pivot and every rest's parameters are solved
//!    jointly by Gauss–Newton least squares (the forwards-additive image alignment of Lucas &
//!    Kanade, "An iterative image registration technique with an application to stereo
//!    vision", IJCAI 1981; Baker & Matthews, "Lucas-Kanade 20 Years On: A Unifying Framework",
//!    IJCV 56 (2004) 221–255, section 2), over the disc the stripe reaches, stopped
//!    [`ON_PART_MARGIN_PX`] short of its end: the stripe is painted on the part, so that disc is
//!    the part's by construction (a round stud that does not turn is centred on the pivot and
//!    agrees with it). Both images are read through a binomial filter (σ = 1 px).
//!
//!    A wider disc (a hex nut's flats and corners), keeping the pixels that move with the part,
//!    was tried and made the pivot worse on small nuts; a glint of a lamp on the part inside
//!    the disc is not left out, and the checks below bound what it can do.
//! 3. **Honesty.** The refined pivot is used only when the rests span at least
//!    [`MIN_TURN_DEG`], the solve converged, it moved the pivot less than [`MAX_MOVE_PX`] from
//!    the lines' point, and its standard error (least squares, inflated for the correlation
//!    of neighbouring pixels) is below [`MAX_SE_PX`]. Otherwise the lines' pivot stands.
//!
//! An oblique disc turns in its own plane, which is not a rotation on screen, so a stripe whose
//! length changes as it turns is not refined here.
//!
//! Part of the `find-marks` command (built on decode and track, writing through report): it
//! must never import segment, mechanics, `analyze`, `batch` or the CLI.

use nalgebra::{DMatrix, DVector};

use super::luma::Img;
use crate::decode::Frame;
use crate::stats::median_in_place;

/// A rest is at least this many frames.
pub(super) const MIN_REST_FRAMES: usize = 8;
/// The part may turn within a rest by at most this much at the stripe's outer end, px
/// (chosen on the tuning layouts: 0.25 px left no rest on short nut stripes, whose follower
/// is noisy; a drive end that creeps while it unwinds must not count as resting).
const MAX_BLUR_PX: f64 = 0.5;
/// Rests used at most (the template and the others farthest from it in angle).
const MAX_RESTS: usize = 8;
/// The rests must span at least this turn for the pivot to be refined, degrees.
pub(super) const MIN_TURN_DEG: f64 = 4.0;
/// The refined pivot may differ from the lines' point by at most this much, px.
const MAX_MOVE_PX: f64 = 2.0;
/// The refined pivot's standard error must be below this, px.
const MAX_SE_PX: f64 = 0.1;
/// Pixels a fit reads at most per rest (a disc of about 178 px radius in full).
const MAX_POINTS: usize = 100_000;
/// Gauss–Newton iterations at most.
const MAX_ITER: usize = 30;
/// Parameters per rest other than the template: turn, gain, offset, two shading slopes.
const PER_REST: usize = 5;
/// The registered disc stops this far short of the stripe's outer end, px: the stripe is
/// painted on the part, so the disc it reaches over is the part's, and the ridge component's
/// end lies about 1.5 px beyond the paint's (the 3×3 smoothing).
const ON_PART_MARGIN_PX: f64 = 2.0;

/// Neighbouring pixels' residuals are correlated (the renderer's and the codec's blur, the
/// bilinear reads): the least-squares standard error is multiplied by this, as if one pixel in
/// a 3 × 3 block were independent.
const CORRELATION_INFLATION: f64 = 3.0;

/// Half the side of the square a [`Stack`] must hold for a stripe reaching `reach` px from
/// its pivot: the registered disc, the pivot's largest move and the reads' margin.
pub(super) fn window_half(reach: f64) -> f64 {
    reach + MAX_MOVE_PX + 3.0
}

/// A span of frames in which the part stood still.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(super) struct Rest {
    /// First and last frame (indices into the clip's frames as read), inclusive.
    pub(super) first: usize,
    pub(super) last: usize,
    /// The stripe's orientation there, radians (unwrapped as the track's).
    pub(super) theta: f64,
}

impl Rest {
    fn frames(&self) -> usize {
        self.last + 1 - self.first
    }
}

/// The rests of a track from its orientation in every frame (None where it was not seen).
pub(super) fn rests(series: &[Option<f64>], reach: f64) -> Vec<Rest> {
    // The follower's noise from second differences, which a steady creep does not raise
    // (a drive end unwinding slowly between blows is moving, not resting).
    let mut second: Vec<f64> = series
        .windows(3)
        .filter_map(|w| Some((w[2]? - 2.0 * w[1]? + w[0]?).abs()))
        .collect();
    if second.len() < 2 * MIN_REST_FRAMES {
        return Vec::new();
    }
    let noise = 1.4826 * median_in_place(&mut second).unwrap_or(0.0) / 6f64.sqrt();
    // A rest's frames are averaged, so the part may turn in one by at most MAX_BLUR_PX at the
    // stripe's outer end; a follower too noisy to show that finds no rest.
    let band = (6.0 * noise)
        .max(0.1f64.to_radians())
        .min(MAX_BLUR_PX / reach.max(1.0));
    let mut out = Vec::new();
    let mut t = 0;
    while t < series.len() {
        let Some(th0) = series[t] else {
            t += 1;
            continue;
        };
        // The longest run from t whose whole range of orientation stays within the band.
        let (mut lo, mut hi, mut end) = (th0, th0, t);
        while let Some(Some(th)) = series.get(end + 1) {
            let (l, h) = (lo.min(*th), hi.max(*th));
            if h - l > band {
                break;
            }
            (lo, hi, end) = (l, h, end + 1);
        }
        if end + 1 - t >= MIN_REST_FRAMES {
            let mut th: Vec<f64> = series[t..=end].iter().flatten().copied().collect();
            out.push(Rest {
                first: t,
                last: end,
                theta: median_in_place(&mut th).unwrap_or(th0),
            });
            t = end + 1;
        } else {
            t += 1;
        }
    }
    out
}

/// The rests to register: the longest as the template (first), then the others farthest from
/// it in angle, [`MAX_RESTS`] in all. Empty when they span less than [`MIN_TURN_DEG`].
pub(super) fn choose(mut rests: Vec<Rest>) -> Vec<Rest> {
    let Some(ti) = (0..rests.len()).max_by_key(|&i| (rests[i].frames(), usize::MAX - i)) else {
        return Vec::new();
    };
    let template = rests.remove(ti);
    rests.retain(|r| (r.theta - template.theta).abs() >= 1f64.to_radians());
    rests.sort_by(|a, b| {
        (b.theta - template.theta)
            .abs()
            .total_cmp(&(a.theta - template.theta).abs())
    });
    rests.truncate(MAX_RESTS - 1);
    let span = rests
        .iter()
        .map(|r| (r.theta - template.theta).abs())
        .fold(0.0, f64::max);
    if span < MIN_TURN_DEG.to_radians() {
        return Vec::new();
    }
    rests.insert(0, template);
    rests
}

/// Each chosen rest's frames averaged over a square about the pivot.
pub(super) struct Stack {
    x0: usize,
    y0: usize,
    w: usize,
    h: usize,
    rests: Vec<Rest>,
    sums: Vec<Vec<f32>>,
    counts: Vec<u32>,
}

impl Stack {
    /// A stack for `rests` (from [`choose`]) over the square of half-side `half` px about
    /// `centre`, inside a `width` × `height` frame.
    pub(super) fn new(
        rests: Vec<Rest>,
        centre: [f64; 2],
        half: f64,
        width: usize,
        height: usize,
    ) -> Stack {
        let x0 = (centre[0] - half).floor().clamp(0.0, width as f64) as usize;
        let x1 = ((centre[0] + half).ceil() + 1.0).clamp(0.0, width as f64) as usize;
        let y0 = (centre[1] - half).floor().clamp(0.0, height as f64) as usize;
        let y1 = ((centre[1] + half).ceil() + 1.0).clamp(0.0, height as f64) as usize;
        let (w, h) = (x1.saturating_sub(x0), y1.saturating_sub(y0));
        Stack {
            x0,
            y0,
            w,
            h,
            sums: vec![vec![0.0; w * h]; rests.len()],
            counts: vec![0; rests.len()],
            rests,
        }
    }

    /// Adds frame `t` (its index in the clip as read) to the rest it belongs to, if any.
    pub(super) fn add(&mut self, t: usize, f: &Frame) {
        let Some(k) = self.rests.iter().position(|r| r.first <= t && t <= r.last) else {
            return;
        };
        if (self.x0 + self.w) as u32 > f.width || (self.y0 + self.h) as u32 > f.height {
            return;
        }
        let view = f.view();
        let sum = &mut self.sums[k];
        for y in 0..self.h {
            for x in 0..self.w {
                sum[y * self.w + x] += view.value((self.x0 + x) as u32, (self.y0 + y) as u32);
            }
        }
        self.counts[k] += 1;
    }

    /// The averaged rests, template first; None when a rest received no frame.
    fn means(&self) -> Option<Vec<Plane>> {
        self.sums
            .iter()
            .zip(&self.counts)
            .map(|(s, &n)| {
                (n > 0).then(|| Plane {
                    x0: self.x0 as f64,
                    y0: self.y0 as f64,
                    img: Img {
                        w: self.w,
                        h: self.h,
                        v: binomial(
                            &s.iter().map(|v| v / n as f32).collect::<Vec<_>>(),
                            self.w,
                            self.h,
                        ),
                    },
                })
            })
            .collect()
    }
}

/// The binomial filter [1 4 6 4 1]/16 along rows and columns (σ = 1 px; edges clamped).
/// Both the template and the rests it is matched to are read smoothed, so that the bilinear
/// reads between pixels do not pull the match towards whole-pixel shifts.
fn binomial(v: &[f32], w: usize, h: usize) -> Vec<f32> {
    const K: [f32; 5] = [1.0 / 16.0, 4.0 / 16.0, 6.0 / 16.0, 4.0 / 16.0, 1.0 / 16.0];
    let pass = |src: &[f32], along_x: bool| -> Vec<f32> {
        let mut out = vec![0.0f32; w * h];
        for y in 0..h {
            for x in 0..w {
                let mut acc = 0.0;
                for (k, kv) in K.iter().enumerate() {
                    let o = k as isize - 2;
                    let (xi, yi) = if along_x {
                        ((x as isize + o).clamp(0, w as isize - 1) as usize, y)
                    } else {
                        (x, (y as isize + o).clamp(0, h as isize - 1) as usize)
                    };
                    acc += kv * src[yi * w + xi];
                }
                out[y * w + x] = acc;
            }
        }
        out
    };
    pass(&pass(v, true), false)
}

/// One averaged rest: a window of the frame at (x0, y0).
struct Plane {
    x0: f64,
    y0: f64,
    img: Img,
}

impl Plane {
    /// Bilinear read at frame position `q`; None outside the window (one pixel of margin).
    fn sample(&self, q: [f64; 2]) -> Option<f64> {
        let (x, y) = (q[0] - self.x0, q[1] - self.y0);
        let (w, h) = (self.img.w as f64, self.img.h as f64);
        ((0.0..w - 1.0).contains(&x) && (0.0..h - 1.0).contains(&y))
            .then(|| f64::from(self.img.sample(x, y)))
    }
    /// Value and gradient at `q` (central differences of bilinear reads half a pixel apart).
    fn sample_grad(&self, q: [f64; 2]) -> Option<(f64, [f64; 2])> {
        let v = self.sample(q)?;
        let gx = self.sample([q[0] + 0.5, q[1]])? - self.sample([q[0] - 0.5, q[1]])?;
        let gy = self.sample([q[0], q[1] + 0.5])? - self.sample([q[0], q[1] - 0.5])?;
        Some((v, [gx, gy]))
    }
}

/// What the registration gave.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(super) struct Refined {
    /// The pivot, px.
    pub(super) pivot: [f64; 2],
    /// Its standard error (the larger axis), px.
    pub(super) se_px: f64,
}

/// A template pixel: its position (px) and value.
type Point = ([f64; 2], f64);

/// The template's pixels between `r_lo` and `r_hi` px of `c`: every pixel, or on a coarser
/// grid when the disc holds more than [`MAX_POINTS`] (the work of a fit is bounded whatever
/// the frame size).
fn points(tpl: &Plane, c: [f64; 2], r_lo: f64, r_hi: f64) -> Vec<Point> {
    let area = std::f64::consts::PI * r_hi.max(0.0).powi(2);
    let stride = ((area / MAX_POINTS as f64).sqrt().ceil() as usize).max(1);
    let mut pts = Vec::new();
    let img = &tpl.img;
    for j in (0..img.h).step_by(stride) {
        for i in (0..img.w).step_by(stride) {
            let q = [tpl.x0 + i as f64, tpl.y0 + j as f64];
            let r = (q[0] - c[0]).hypot(q[1] - c[1]);
            if (r_lo..=r_hi).contains(&r) {
                pts.push((q, f64::from(img.v[j * img.w + i])));
            }
        }
    }
    pts
}

/// A converged fit: the parameters (the pivot, then per rest other than the template its
/// turn, gain, offset and two shading slopes) and the pivot's covariance, px².
struct Fit {
    x: DVector<f64>,
    cov_p: [[f64; 2]; 2],
}

/// Gauss–Newton from `x` on the points `pts`: the least-squares fit of every rest to the
/// template by a rotation about one shared pivot. None when it diverges, the normal matrix is
/// singular or it does not converge.
fn solve(
    others: &[Plane],
    pts: &[Point],
    mut x: DVector<f64>,
    p0: [f64; 2],
    scale: f64,
) -> Option<Fit> {
    let m = others.len();
    let np = x.len();
    for _ in 0..MAX_ITER {
        let mut h = DMatrix::<f64>::zeros(np, np);
        let mut g = DVector::<f64>::zeros(np);
        let (mut ssr, mut used) = (0.0, 0usize);
        let p = [x[0], x[1]];
        for (k, b) in others.iter().enumerate() {
            let o = 2 + PER_REST * k;
            let (gain, off, su, sv) = (x[o + 1], x[o + 2], x[o + 3], x[o + 4]);
            let (s, c) = x[o].sin_cos();
            for &(q, a) in pts {
                let d = [q[0] - p[0], q[1] - p[1]];
                let w = [p[0] + c * d[0] - s * d[1], p[1] + s * d[0] + c * d[1]];
                let Some((bv, gr)) = b.sample_grad(w) else {
                    continue;
                };
                let (u, v) = ((q[0] - p0[0]) / scale, (q[1] - p0[1]) / scale);
                let r = bv - (gain * a + off + su * u + sv * v);
                // d w / d p = I − R; d w / d φ = R'(x − p).
                let jr = [
                    gr[0] * (1.0 - c) - gr[1] * s,
                    gr[0] * s + gr[1] * (1.0 - c),
                    gr[0] * (-s * d[0] - c * d[1]) + gr[1] * (c * d[0] - s * d[1]),
                    -a,
                    -1.0,
                    -u,
                    -v,
                ];
                let idx = [0, 1, o, o + 1, o + 2, o + 3, o + 4];
                for (ia, &i) in idx.iter().enumerate() {
                    g[i] -= jr[ia] * r;
                    for (ib, &j) in idx.iter().enumerate() {
                        h[(i, j)] += jr[ia] * jr[ib];
                    }
                }
                ssr += r * r;
                used += 1;
            }
        }
        if used < 50 * m {
            return None;
        }
        let chol = h.cholesky()?;
        let step = chol.solve(&g);
        x += &step;
        if !x.iter().all(|v| v.is_finite()) || (x[0] - p0[0]).hypot(x[1] - p0[1]) > scale {
            return None;
        }
        let moved = step[0].hypot(step[1]);
        let turned = (0..m)
            .map(|k| step[2 + PER_REST * k].abs())
            .fold(0.0, f64::max);
        if moved < 1e-4 && turned < 1e-6 {
            let s2 = ssr / (used as f64 - np as f64).max(1.0);
            let inv = chol.inverse();
            return Some(Fit {
                cov_p: [
                    [inv[(0, 0)] * s2, inv[(0, 1)] * s2],
                    [inv[(1, 0)] * s2, inv[(1, 1)] * s2],
                ],
                x,
            });
        }
    }
    None
}

/// The pivot that best maps the template rest onto the others by rotation (module doc).
/// `p0` is the lines' pivot and `reach` the stripe's outer end's distance from it, px. None
/// when the honesty tests in the module doc fail.
pub(super) fn refine(stack: &Stack, p0: [f64; 2], reach: f64) -> Option<Refined> {
    let planes = stack.means()?;
    let (tpl, others) = planes.split_first()?;
    if others.is_empty() {
        return None;
    }
    let scale = reach.max(4.0);
    let mut x = DVector::<f64>::zeros(2 + PER_REST * others.len());
    x[0] = p0[0];
    x[1] = p0[1];
    let th0 = stack.rests[0].theta;
    for (k, r) in stack.rests[1..].iter().enumerate() {
        x[2 + PER_REST * k] = r.theta - th0;
        x[3 + PER_REST * k] = 1.0;
    }
    let pts = points(tpl, p0, 1.0, reach - ON_PART_MARGIN_PX);
    if pts.len() < 50 {
        return None;
    }
    let fit = solve(others, &pts, x, p0, scale)?;
    // The larger eigenvalue of the pivot's 2 × 2 covariance.
    let [[a, b], [_, d]] = fit.cov_p;
    let big = 0.5 * (a + d) + (0.25 * (a - d).powi(2) + b * b).sqrt();
    let se = CORRELATION_INFLATION * big.max(0.0).sqrt();
    let pivot = [fit.x[0], fit.x[1]];
    if (pivot[0] - p0[0]).hypot(pivot[1] - p0[1]) > MAX_MOVE_PX || se > MAX_SE_PX {
        return None;
    }
    Some(Refined { pivot, se_px: se })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn rests_are_the_still_spans_between_steps() {
        // Still at 0 for 20 frames, a 4-frame turn to 10°, still for 15, a turn to 25°, still.
        let mut s: Vec<Option<f64>> = Vec::new();
        let noise = |t: usize| 0.0005 * ((t * 7919 % 13) as f64 - 6.0) / 6.0;
        for t in 0..20 {
            s.push(Some(noise(t)));
        }
        for t in 0..4 {
            s.push(Some((2.5 * (t + 1) as f64).to_radians()));
        }
        for t in 0..15 {
            s.push(Some(10f64.to_radians() + noise(t)));
        }
        for t in 0..5 {
            s.push(Some((10.0 + 3.0 * (t + 1) as f64).to_radians()));
        }
        for t in 0..30 {
            s.push(Some(25f64.to_radians() + noise(t)));
        }
        let r = rests(&s, 30.0);
        assert_eq!(r.len(), 3, "{r:?}");
        assert!((r[1].theta.to_degrees() - 10.0).abs() < 0.05);
        assert!((r[2].theta.to_degrees() - 25.0).abs() < 0.05);
        let c = choose(r);
        assert!(
            (c[0].theta.to_degrees() - 25.0).abs() < 0.05,
            "the longest rest is the template: {c:?}"
        );
        assert!((c[1].theta.to_degrees()).abs() < 0.05, "then the farthest");
    }

    /// A textured disc with a stripe, turned about `pivot` by `phi`, seen on a still surface.
    fn scene(x: f64, y: f64, pivot: [f64; 2], phi: f64) -> f32 {
        let (dx, dy) = (x - pivot[0], y - pivot[1]);
        let r = dx.hypot(dy);
        if r > 30.0 {
            return (0.3 + 0.05 * ((x * 0.7).sin() * (y * 1.3).cos())) as f32;
        }
        let a = dy.atan2(dx) - phi;
        let (u, v) = (r * a.cos(), r * a.sin());
        let tex = 0.04 * ((u * 0.9 + 0.3).sin() * (v * 1.1).cos());
        // Band-limited, as a lens and the pixel's area make a real edge (a hard edge sampled
        // at points would be aliased, a pattern fixed to the pixel grid that no camera makes).
        let ends = 1.0 / (1.0 + (6.0 - u).exp()) / (1.0 + (u - 26.0).exp());
        let stripe = 0.3 * (-(v / 1.5).powi(2)).exp() * ends;
        (0.35 + tex + stripe) as f32
    }

    fn frame_of(w: u32, h: u32, f: impl Fn(f64, f64) -> f32) -> Frame {
        let data: Vec<u8> = (0..h)
            .flat_map(|y| (0..w).map(move |x| (x, y)))
            .map(|(x, y)| (f(f64::from(x), f64::from(y)) * 255.0).round() as u8)
            .collect();
        Frame::from_u8(0, w, h, data)
    }

    #[test]
    fn registration_finds_the_true_pivot_from_an_offset_start() {
        let pivot = [50.3, 47.6];
        let rs = vec![
            Rest {
                first: 0,
                last: 0,
                theta: 0.0,
            },
            Rest {
                first: 1,
                last: 1,
                theta: 12f64.to_radians(),
            },
            Rest {
                first: 2,
                last: 2,
                theta: 25f64.to_radians(),
            },
        ];
        let p0 = [pivot[0] + 0.3, pivot[1] - 0.25];
        let mut st = Stack::new(rs.clone(), p0, window_half(26.0), 100, 100);
        for (t, r) in rs.iter().enumerate() {
            // The rests' angles as the follower read them: half a degree off.
            let f = frame_of(100, 100, |x, y| {
                scene(x, y, pivot, r.theta + 0.004 * t as f64)
            });
            st.add(t, &f);
        }
        let got = refine(&st, p0, 26.0).expect("refined");
        let err = (got.pivot[0] - pivot[0]).hypot(got.pivot[1] - pivot[1]);
        assert!(err < 0.05, "pivot {:?} off by {err:.3} px", got.pivot);
    }

    #[test]
    fn a_large_disc_is_read_on_a_coarser_grid() {
        let (w, h) = (1200, 1200);
        let tpl = Plane {
            x0: 0.0,
            y0: 0.0,
            img: Img {
                w,
                h,
                v: vec![0.5; w * h],
            },
        };
        let n = points(&tpl, [600.0, 600.0], 1.0, 590.0).len();
        assert!(n <= MAX_POINTS && n > MAX_POINTS / 4, "{n} points");
        // A small disc keeps every pixel.
        let small = points(&tpl, [600.0, 600.0], 0.0, 20.0).len();
        assert!((1200..=1300).contains(&small), "{small} points");
    }

    #[test]
    fn too_little_turn_is_not_refined() {
        let rs = vec![
            Rest {
                first: 0,
                last: 9,
                theta: 0.0,
            },
            Rest {
                first: 12,
                last: 20,
                theta: 2f64.to_radians(),
            },
        ];
        assert!(choose(rs).is_empty());
    }
}
