//! Camera shake from the rig's `fixed` mark: the translation of the image around that mark in
//! each frame, relative to the first frame.
//!
//! Method: Lucas–Kanade image registration in its inverse-compositional form (Baker & Matthews,
//! "Lucas-Kanade 20 Years On: A Unifying Framework", IJCV 56 (2004) 221–255), for a pure
//! translation, with a gain and offset fitted each iteration so lighting flicker does not read
//! as motion. The template is the square patch around the fixed mark (its stripe, the stripe's
//! ends and the disc around it) in the first frame, reduced to its `MAX_POINTS` most
//! informative pixels: the strongest gradients, taken evenly over `ORIENTATION_BINS` edge
//! directions so that every direction of motion stays constrained (flat pixels add nothing to
//! the normal matrix but noise; keeping the high-gradient pixels is common practice in direct
//! image registration). Its gradients and the 2×2 normal matrix are computed once, so each
//! iteration costs one
//! bilinear gather of the patch and a few sums. The previous frame's shift is the start point,
//! so shake that builds up over frames is followed.
//!
//! The frame is smoothed (binomial kernel, σ = 1 px) before it is sampled. In later frames the
//! smoothing is not done over the region at all: the template points sit on whole pixels, so
//! every point's sample at a shift d reads its 6×6 neighbourhood with the same weights (the
//! binomial pass and the bilinear one folded into one 6×6 kernel, rebuilt per iteration from
//! d's fraction; [`folded_kernel`]). Points whose neighbourhood would cross the region's edge
//! (a shake of many pixels) take the per-point path instead: the 2×2 smoothed blocks they land
//! on, with the region's edge repeated as the first frame's smoothing repeats it.

mod kernel;
mod sample;

use crate::decode::FrameRef;
use crate::rig::RadialMark;

/// Largest number of template pixels used.
const MAX_POINTS: usize = 256;
/// Edge-direction classes the template pixels are spread over (over 180°).
const ORIENTATION_BINS: usize = 8;
/// Iterations per frame at most.
const MAX_ITER: usize = 8;
/// Below this correlation with the first frame's patch the registration is not trusted.
const MIN_CORRELATION: f64 = 0.8;
/// Stop when an update is smaller than this, px.
const CONVERGED_PX: f64 = 2e-3;

/// Estimates the image translation around the fixed mark.
pub(crate) struct ShakeEstimator {
    pts: Vec<[f64; 2]>,
    tmpl: Vec<f32>,
    gx: Vec<f32>,
    gy: Vec<f32>,
    hinv: [[f64; 2]; 2],
    t_mean: f64,
    t_var: f64,
    /// Σgx, Σgy and Σg·(t − t̄) over the template.
    g_sum: [f64; 2],
    g_t: [f64; 2],
    shift: [f64; 2],
    /// The smoothed copy of the region around the patch: origin, size, values, scratch.
    origin: [usize; 2],
    size: [usize; 2],
    smooth: Vec<f32>,
    tmp: Vec<f32>,
    raw: Vec<f32>,
    /// Per template point: the smoothed 2×2 block its bilinear sample reads (top-left,
    /// top-right, bottom-left, bottom-right) at the whole-pixel shift `blk_at`.
    blk: Vec<[f32; 4]>,
    blk_at: Option<[i64; 2]>,
    /// Per template point, region coordinates (x, y) of its block's top-left pixel at a zero
    /// shift, and their range (x min, x max, y min, y max): built by `init` for the folded
    /// kernel's path.
    corner_at: Vec<[u32; 2]>,
    corners: [i64; 4],
}

impl ShakeEstimator {
    /// Plans the patch around `mark` in frames of `width × height`.
    pub fn new(mark: &RadialMark, width: u32, height: u32) -> ShakeEstimator {
        let (w, h) = (width as usize, height as usize);
        let half = mark.radius[1] + 4.0;
        let x0 = ((mark.pivot[0] - half).floor() as i64).max(1) as usize;
        let x1 = ((mark.pivot[0] + half).ceil() as i64)
            .min(w as i64 - 2)
            .max(1) as usize;
        let y0 = ((mark.pivot[1] - half).floor() as i64).max(1) as usize;
        let y1 = ((mark.pivot[1] + half).ceil() as i64)
            .min(h as i64 - 2)
            .max(1) as usize;
        // Every pixel of the patch is a candidate; `init` keeps the most informative ones.
        let mut pts = Vec::new();
        for y in y0..=y1 {
            for x in x0..=x1 {
                pts.push([x as f64, y as f64]);
            }
        }
        let n = pts.len();
        let ox = x0.saturating_sub(REGION_MARGIN_PX);
        let oy = y0.saturating_sub(REGION_MARGIN_PX);
        let ex = (x1 + REGION_MARGIN_PX).min(w - 1);
        let ey = (y1 + REGION_MARGIN_PX).min(h - 1);
        let size = [ex - ox + 1, ey - oy + 1];
        let cells = size[0] * size[1];
        ShakeEstimator {
            pts,
            tmpl: vec![0.0; n],
            gx: vec![0.0; n],
            gy: vec![0.0; n],
            hinv: [[0.0; 2]; 2],
            t_mean: 0.0,
            t_var: 0.0,
            g_sum: [0.0; 2],
            g_t: [0.0; 2],
            shift: [0.0, 0.0],
            origin: [ox, oy],
            size,
            smooth: vec![0.0; cells],
            tmp: vec![0.0; cells],
            raw: vec![0.0; cells],
            blk: vec![[0.0; 4]; n],
            blk_at: None,
            corner_at: Vec::new(),
            corners: [0; 4],
        }
    }

    /// Takes the template from the first frame. Returns false when the patch has too little
    /// texture to register (then shake is not corrected).
    pub fn init(&mut self, frame: FrameRef<'_>) -> bool {
        self.load(frame);
        let (ox, oy, sw) = (self.origin[0], self.origin[1], self.size[0]);
        let sm = &self.smooth;
        let px = |x: usize, y: usize| sm[(y - oy) * sw + (x - ox)];
        let grad = |p: &[f64; 2]| {
            let (x, y) = (p[0] as usize, p[1] as usize);
            (
                0.5 * (px(x + 1, y) - px(x - 1, y)),
                0.5 * (px(x, y + 1) - px(x, y - 1)),
            )
        };
        if self.pts.len() > MAX_POINTS {
            // Strongest gradients per edge direction, then the strongest of the rest.
            let mut by_bin: Vec<Vec<(f32, usize)>> = vec![Vec::new(); ORIENTATION_BINS];
            for (i, p) in self.pts.iter().enumerate() {
                let (gx, gy) = grad(p);
                let dir = gy.atan2(gx).rem_euclid(std::f32::consts::PI);
                let b = ((dir / std::f32::consts::PI * ORIENTATION_BINS as f32) as usize)
                    .min(ORIENTATION_BINS - 1);
                by_bin[b].push((gx * gx + gy * gy, i));
            }
            let mut keep = Vec::with_capacity(MAX_POINTS);
            let mut rest = Vec::new();
            for mut bin in by_bin {
                bin.sort_unstable_by(|a, b| b.0.total_cmp(&a.0).then(a.1.cmp(&b.1)));
                let quota = (MAX_POINTS / ORIENTATION_BINS).min(bin.len());
                keep.extend(bin[..quota].iter().map(|c| c.1));
                rest.extend_from_slice(&bin[quota..]);
            }
            rest.sort_unstable_by(|a, b| b.0.total_cmp(&a.0).then(a.1.cmp(&b.1)));
            keep.extend(rest.iter().take(MAX_POINTS - keep.len()).map(|c| c.1));
            // Row-major order, for memory locality in every later frame.
            keep.sort_unstable();
            self.pts = keep.iter().map(|&i| self.pts[i]).collect();
            let n = self.pts.len();
            for v in [&mut self.tmpl, &mut self.gx, &mut self.gy] {
                v.truncate(n);
            }
            self.blk.truncate(n);
        }
        let (mut sxx, mut sxy, mut syy) = (0.0f64, 0.0f64, 0.0f64);
        let mut sum = 0.0f64;
        for (i, p) in self.pts.iter().enumerate() {
            let (x, y) = (p[0] as usize, p[1] as usize);
            self.tmpl[i] = px(x, y);
            let (gx, gy) = grad(p);
            self.gx[i] = gx;
            self.gy[i] = gy;
            sxx += f64::from(gx * gx);
            sxy += f64::from(gx * gy);
            syy += f64::from(gy * gy);
            sum += f64::from(self.tmpl[i]);
        }
        let n = self.pts.len().max(1) as f64;
        self.t_mean = sum / n;
        self.t_var = self
            .tmpl
            .iter()
            .map(|&t| (f64::from(t) - self.t_mean).powi(2))
            .sum::<f64>()
            / n;
        self.g_sum = [
            self.gx.iter().map(|&g| f64::from(g)).sum(),
            self.gy.iter().map(|&g| f64::from(g)).sum(),
        ];
        let mut g_t = [0.0f64; 2];
        for i in 0..self.pts.len() {
            let dt = f64::from(self.tmpl[i]) - self.t_mean;
            g_t[0] += f64::from(self.gx[i]) * dt;
            g_t[1] += f64::from(self.gy[i]) * dt;
        }
        self.g_t = g_t;
        // A little Tikhonov damping keeps a patch with one dominant edge direction stable.
        let damp = 1e-3 * (sxx + syy);
        let (a, b, d) = (sxx + damp, sxy, syy + damp);
        let det = a * d - b * b;
        if det <= 1e-12 || self.t_var < 1e-8 {
            return false;
        }
        self.hinv = [[d / det, -b / det], [-b / det, a / det]];
        self.plan_corners();
        true
    }

    /// Each template point's block corner at a zero shift, and their range.
    fn plan_corners(&mut self) {
        let mut corners = [i64::MAX, i64::MIN, i64::MAX, i64::MIN];
        self.corner_at = self
            .pts
            .iter()
            .map(|p| {
                let ([x0, y0], _) = self.cell(*p, [0.0, 0.0]);
                let (x, y) = (x0 as i64, y0 as i64);
                corners = [
                    corners[0].min(x),
                    corners[1].max(x),
                    corners[2].min(y),
                    corners[3].max(y),
                ];
                [x0 as u32, y0 as u32]
            })
            .collect();
        self.corners = corners;
    }

    /// The translation of this frame's image relative to the first frame, px (x right, y down),
    /// or None when the patch no longer matches the first frame (correlation below
    /// `MIN_CORRELATION` after the photometric fit: the fixed mark is obscured or gone); the
    /// last good shift is then kept for the next frame's start.
    pub fn estimate(&mut self, frame: FrameRef<'_>) -> Option<[f64; 2]> {
        self.blk_at = None;
        let mut d = self.shift;
        let n = self.pts.len() as f64;
        let mut corr = 0.0;
        for _ in 0..MAX_ITER {
            // One pass: Σs, Σs·(t − t̄), Σgx·s, Σgy·s. With the photometric fit s ≈ g·t + b,
            // the residual is e = (s − s̄)/g − (t − t̄), so Σg·e needs only these sums and the
            // template's own Σgx, Σgy and Σg·(t − t̄), computed once.
            let sums = match self.folded_sums(frame, d) {
                Some(sums) => sums,
                None => {
                    let whole = [d[0].floor() as i64, d[1].floor() as i64];
                    if self.blk_at != Some(whole) {
                        self.load_blocks(frame, whole);
                        self.blk_at = Some(whole);
                    }
                    self.gather_sums(d)
                }
            };
            let [ss, sst, sgx, sgy, sss] = sums;
            let s_mean = ss / n;
            let gain = sst / n / self.t_var;
            let s_var = sss / n - s_mean * s_mean;
            corr = if s_var > 0.0 {
                sst / n / (s_var * self.t_var).sqrt()
            } else {
                0.0
            };
            if gain <= 0.05 {
                corr = 0.0;
                break;
            }
            let bx = (sgx - s_mean * self.g_sum[0]) / gain - self.g_t[0];
            let by = (sgy - s_mean * self.g_sum[1]) / gain - self.g_t[1];
            let dx = self.hinv[0][0] * bx + self.hinv[0][1] * by;
            let dy = self.hinv[1][0] * bx + self.hinv[1][1] * by;
            d = [d[0] - dx, d[1] - dy];
            if dx.hypot(dy) < CONVERGED_PX {
                break;
            }
        }
        if corr >= MIN_CORRELATION && d[0].is_finite() && d[1].is_finite() {
            self.shift = d;
            Some(d)
        } else {
            None
        }
    }
}

/// Room around the patch for the shift, px.
const REGION_MARGIN_PX: usize = 10;

#[cfg(test)]
mod tests {
    use super::*;
    use crate::decode::Frame;
    use crate::rig::Mark;
    use crate::synth::{Scenario, render_frame, simulate};

    #[test]
    fn smoothed_blocks_equal_the_smoothed_region() {
        // Seeded noise frame; the patch sits near the frame's corner so that the region's
        // edges (where the smoothing repeats the edge sample) are exercised too.
        use rand::{Rng, SeedableRng};
        let (w, h) = (96u32, 80u32);
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(7);
        let data: Vec<u8> = (0..w * h).map(|_| rng.random()).collect();
        let frame = Frame::from_u8(0, w, h, data);
        let mark = RadialMark {
            pivot: [20.0, 60.0],
            radius: [2.0, 15.0],
            tighten: None,
            ellipse: None,
        };
        let mut est = ShakeEstimator::new(&mark, w, h);
        est.load(frame.view());
        let sw = est.size[0];
        for whole in [[0i64, 0], [3, -2], [-9, 7], [-30, 30], [12, -14]] {
            est.load_blocks(frame.view(), whole);
            let d = [whole[0] as f64, whole[1] as f64];
            for (i, p) in est.pts.iter().enumerate() {
                let ([x0, y0], _) = est.cell(*p, d);
                let j = y0 * sw + x0;
                let want = [
                    est.smooth[j],
                    est.smooth[j + 1],
                    est.smooth[j + sw],
                    est.smooth[j + sw + 1],
                ];
                assert_eq!(est.blk[i], want, "point {i} at shift {whole:?}");
            }
        }
    }

    #[test]
    fn folded_kernel_sums_equal_the_smoothed_block_sums() {
        // A rendered frame of the bench scene (synthetic), its template chosen by `init`.
        let sc = Scenario::preset("fast-tool").unwrap();
        let truth = simulate(&sc);
        let rig = sc.rig();
        let Some(Mark::Radial(m)) = &rig.marks.fixed else {
            panic!("preset has a fixed mark")
        };
        let mut est = ShakeEstimator::new(m, sc.scene.width, sc.scene.height);
        assert!(est.init(render_frame(&sc, &truth, 0).view()));
        let frame = render_frame(&sc, &truth, 5);
        for d in [
            [0.0, 0.0],
            [0.3, -0.2],
            [1.7, -1.25],
            [-2.6, 2.9],
            [4.05, 3.5],
        ] {
            let folded = est.folded_sums(frame.view(), d).expect("inside the region");
            est.load_blocks(frame.view(), [d[0].floor() as i64, d[1].floor() as i64]);
            let blocks = est.gather_sums(d);
            for (a, b) in folded.iter().zip(&blocks) {
                assert!(
                    (a - b).abs() <= 2e-5 * (a.abs() + b.abs()) + 1e-6,
                    "shift {d:?}: {folded:?} against {blocks:?}"
                );
            }
        }
        // A shift that takes points' neighbourhoods past the region's edge is left to the
        // per-point path.
        assert!(est.folded_sums(frame.view(), [-40.0, 0.0]).is_none());
        assert!(est.folded_sums(frame.view(), [0.0, -21.5]).is_none());
    }

    #[test]
    fn recovers_the_rendered_shake() {
        // Synthetic clip with known per-frame shake (the renderer's truth), 1 px σ.
        let mut sc = Scenario::preset("fast-tool").unwrap();
        sc.effects.shake_sigma_px = 1.0;
        // The renderer anti-aliases edges on an n×n sub-pixel grid, so an axis-aligned edge
        // (the bracket plate) only moves in steps of 1/n px. 16×16 keeps that step (1/16 px)
        // below what is checked here.
        sc.scene.supersample = 16;
        let truth = simulate(&sc);
        let rig = sc.rig();
        let Some(Mark::Radial(m)) = &rig.marks.fixed else {
            panic!("preset has a fixed mark")
        };
        let mut est = ShakeEstimator::new(m, sc.scene.width, sc.scene.height);
        let f0 = render_frame(&sc, &truth, 0);
        assert!(est.init(f0.view()));
        let (mut worst, mut sq) = (0.0f64, 0.0f64);
        for i in 1..40 {
            let d = est.estimate(render_frame(&sc, &truth, i).view()).unwrap();
            let t = truth.shake_px[i as usize];
            let t0 = truth.shake_px[0];
            let e = (d[0] - (t[0] - t0[0])).hypot(d[1] - (t[1] - t0[1]));
            worst = worst.max(e);
            sq += e * e;
        }
        let rms = (sq / 39.0).sqrt();
        // Both frames' edges are quantised to 1/16 px by the renderer, so up to ~0.09 px of
        // the worst case is the scene's, not the estimator's.
        assert!(
            worst < 0.1 && rms < 0.06,
            "shift error worst {worst} px, RMS {rms} px"
        );
    }
}
