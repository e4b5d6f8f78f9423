//! Camera translation from a square patch around the rig's `fixed` mark, relative to the first
//! frame: the estimate used whenever no moving mark lies in that patch (see `mod.rs`).
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
//!
//! Part of the track stage: it must never import segment, mechanics, report, `analyze`,
//! `batch`, `find_marks`, `calibrate` or the CLI.

use crate::decode::{FrameRef, LumaRef};
use crate::rig::RadialMark;

use super::kernel::folded_kernel;

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
pub(crate) struct PatchEstimator {
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

impl PatchEstimator {
    /// Plans the patch around `mark` in frames of `width × height`.
    pub fn new(mark: &RadialMark, width: u32, height: u32) -> PatchEstimator {
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
        PatchEstimator {
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

    /// Copies the region around the patch and smooths it with a binomial kernel (σ = 1 px).
    /// Smoothing makes the image locally close to linear over a pixel, which is what bilinear
    /// resampling and the gradient step assume; without it the shift locks to preferred
    /// sub-pixel phases ("peak locking": Nobach & Honkanen, Exp. Fluids 38 (2005) 511–515).
    fn load(&mut self, frame: FrameRef<'_>) {
        let scale = 1.0 / frame.max_value();
        let (ox, oy) = (self.origin[0], self.origin[1]);
        let [sw, sh] = self.size;
        let fw = frame.width as usize;
        match frame.luma {
            LumaRef::U8(v) => copy_region(v, fw, ox, oy, sw, sh, scale, &mut self.raw),
            LumaRef::U16(v) => copy_region(v, fw, ox, oy, sw, sh, scale, &mut self.raw),
        }
        // Binomial kernel, horizontal then vertical; the borders repeat the edge sample.
        let clampi = |i: i64, n: usize| i.clamp(0, n as i64 - 1) as usize;
        for y in 0..sh {
            let row = &self.raw[y * sw..(y + 1) * sw];
            let out = &mut self.tmp[y * sw..(y + 1) * sw];
            for (x, o) in out.iter_mut().enumerate() {
                *o = hpass(|i| row[clampi(i, sw)], x as i64, sw);
            }
        }
        for y in 0..sh {
            let r = |d: i64| clampi(y as i64 + d, sh) * sw;
            let (m2, m1, z, p1, p2) = (r(-2), r(-1), r(0), r(1), r(2));
            for x in 0..sw {
                let t = &self.tmp;
                self.smooth[z + x] = k5(t[m2 + x], t[m1 + x], t[z + x], t[p1 + x], t[p2 + x]);
            }
        }
    }

    /// Where template point `p` moved by `d` falls in the region: the top-left pixel of its
    /// bilinear block and the fractions (clamped to the region, as the smoothing is).
    fn cell(&self, p: [f64; 2], d: [f64; 2]) -> ([usize; 2], [f32; 2]) {
        let [sw, sh] = self.size;
        let x = (p[0] + d[0] - self.origin[0] as f64).clamp(0.0, (sw - 1) as f64);
        let y = (p[1] + d[1] - self.origin[1] as f64).clamp(0.0, (sh - 1) as f64);
        let x0 = (x as usize).min(sw - 2);
        let y0 = (y as usize).min(sh - 2);
        ([x0, y0], [(x - x0 as f64) as f32, (y - y0 as f64) as f32])
    }

    /// Smooths, for every template point at the whole-pixel shift `whole`, the 2×2 block its
    /// bilinear sample reads, straight from the frame. Gives the same values as smoothing the
    /// whole region (`load`) and reading the block from it.
    fn load_blocks(&mut self, frame: FrameRef<'_>, whole: [i64; 2]) {
        let scale = 1.0 / frame.max_value();
        match frame.luma {
            LumaRef::U8(v) => self.blocks_t(v, frame.width as usize, scale, whole),
            LumaRef::U16(v) => self.blocks_t(v, frame.width as usize, scale, whole),
        }
    }

    fn blocks_t<T: Copy + Into<f32>>(&mut self, v: &[T], fw: usize, scale: f32, whole: [i64; 2]) {
        let [sw, sh] = self.size;
        let (ox, oy) = (self.origin[0], self.origin[1]);
        let d = [whole[0] as f64, whole[1] as f64];
        let clampi = |i: i64, n: usize| i.clamp(0, n as i64 - 1) as usize;
        // The region's pixel (x, y), scaled, with the region's edge repeated.
        let raw = |x: i64, y: i64| v[(oy + clampi(y, sh)) * fw + ox + clampi(x, sw)].into() * scale;
        for i in 0..self.pts.len() {
            if let Some(&p) = self.pts.get(i + PREFETCH_AHEAD) {
                // The six rows a later point's block reads.
                let ([x, y], _) = self.cell(p, d);
                let first = (oy + y.saturating_sub(2)) * fw + ox + x.saturating_sub(2);
                super::super::gather::prefetch_rows(v, first, fw, 6);
            }
            let ([x0, y0], _) = self.cell(self.pts[i], d);
            if x0 >= 2 && x0 + 3 < sw && y0 >= 2 && y0 + 3 < sh {
                // Inside the region: the same arithmetic as below, without the edge clamps.
                let mut h = [[0.0f32; 2]; 6];
                for (r, row) in h.iter_mut().enumerate() {
                    let start = (oy + y0 - 2 + r) * fw + ox + x0 - 2;
                    let pixels = &v[start..start + 6];
                    let p: [f32; 6] = std::array::from_fn(|c| pixels[c].into() * scale);
                    for (c, out) in row.iter_mut().enumerate() {
                        *out = k5(p[c], p[c + 1], p[c + 2], p[c + 3], p[c + 4]);
                    }
                }
                let vpass = |r: usize, c: usize| {
                    k5(h[r][c], h[r + 1][c], h[r + 2][c], h[r + 3][c], h[r + 4][c])
                };
                self.blk[i] = [vpass(0, 0), vpass(0, 1), vpass(1, 0), vpass(1, 1)];
                continue;
            }
            let (x0, y0) = (x0 as i64, y0 as i64);
            // Horizontal pass on the 6 rows the vertical pass needs, for the block's 2 columns.
            let mut h = [[0.0f32; 2]; 6];
            for (r, row) in h.iter_mut().enumerate() {
                let y = y0 - 2 + r as i64;
                for (c, out) in row.iter_mut().enumerate() {
                    *out = hpass(|x| raw(x, y), x0 + c as i64, sw);
                }
            }
            let mut b = [0.0f32; 4];
            for (r, pair) in [[0usize, 1], [2, 3]].into_iter().enumerate() {
                let y = y0 + r as i64;
                for (c, &slot) in pair.iter().enumerate() {
                    // The vertical pass of `load`, row indices clamped to the region.
                    let t = |dy: i64| h[(clampi(y + dy, sh) as i64 - (y0 - 2)) as usize][c];
                    b[slot] = k5(t(-2), t(-1), t(0), t(1), t(2));
                }
            }
            self.blk[i] = b;
        }
    }

    /// The sums of [`Self::gather_sums`] at the shift `d`, read straight from the frame through
    /// the folded kernel; None when some point's 6×6 neighbourhood at this shift leaves the
    /// region (the per-point path then repeats the region's edge there, as the first frame's
    /// smoothing did).
    fn folded_sums(&self, frame: FrameRef<'_>, d: [f64; 2]) -> Option<[f64; 5]> {
        let [sw, sh] = self.size;
        let (wx, wy) = (d[0].floor(), d[1].floor());
        let (x, y) = (wx as i64, wy as i64);
        let c = self.corners;
        let inside = !self.corner_at.is_empty()
            && c[0] + x >= 2
            && c[1] + x + 3 < sw as i64
            && c[2] + y >= 2
            && c[3] + y + 3 < sh as i64;
        if !inside {
            return None;
        }
        let fw = frame.width as usize;
        // The neighbourhood of a block corner (cx, cy) starts at base + cy·fw + cx; each point
        // reads 8 samples on each of 6 rows (the last two weighted 0), all inside the frame.
        // (base itself may lie before the frame; every corner's start lies inside it.)
        let base = (self.origin[1] as i64 + y - 2) * fw as i64 + self.origin[0] as i64 + x - 2;
        let first = base + c[2] * fw as i64 + c[0];
        let last = base + (c[3] + 5) * fw as i64 + c[1] + 8;
        if first < 0 {
            return None;
        }
        let k = folded_kernel(
            (d[0] - wx) as f32,
            (d[1] - wy) as f32,
            1.0 / frame.max_value(),
        );
        match frame.luma {
            LumaRef::U8(v) if last <= v.len() as i64 => Some(self.folded_t(v, fw, base, &k)),
            LumaRef::U16(v) if last <= v.len() as i64 => Some(self.folded_t(v, fw, base, &k)),
            _ => None,
        }
    }

    fn folded_t<T: Copy + Into<f32>>(
        &self,
        v: &[T],
        fw: usize,
        base: i64,
        k: &[[f32; 8]; 6],
    ) -> [f64; 5] {
        let start =
            |[cx, cy]: [u32; 2]| (base + i64::from(cy) * fw as i64 + i64::from(cx)) as usize;
        self.update_sums(self.corner_at.iter().enumerate().map(|(i, &corner)| {
            if let Some(&later) = self.corner_at.get(i + PREFETCH_AHEAD) {
                // The six rows a later point reads: the frame was just decoded, likely on the
                // other core, so each row is a cache miss that is better started early.
                super::super::gather::prefetch_rows(v, start(later), fw, 6);
            }
            let at = start(corner);
            let mut acc = [0.0f32; 8];
            for (r, kr) in k.iter().enumerate() {
                let row = &v[at + r * fw..at + r * fw + 8];
                for u in 0..8 {
                    acc[u] += row[u].into() * kr[u];
                }
            }
            super::super::sum_lanes(acc)
        }))
    }

    /// Bilinear samples of the smoothed frame at every template point moved by `d` (read from
    /// the blocks of `load_blocks`), reduced to the sums the update needs.
    fn gather_sums(&self, d: [f64; 2]) -> [f64; 5] {
        self.update_sums(self.pts.iter().zip(&self.blk).map(|(p, v)| {
            let (_, [fx, fy]) = self.cell(*p, d);
            let top = v[0] + fx * (v[1] - v[0]);
            let bot = v[2] + fx * (v[3] - v[2]);
            top + fy * (bot - top)
        }))
    }

    /// Σs, Σs·(t − t̄), Σgx·s, Σgy·s and Σs² over the template points' samples s (in the
    /// points' order), the sums one update needs.
    fn update_sums(&self, samples: impl Iterator<Item = f32>) -> [f64; 5] {
        let t_mean = self.t_mean as f32;
        let (mut ss, mut sst, mut sgx, mut sgy, mut sss) = (0.0f32, 0.0f32, 0.0f32, 0.0f32, 0.0f32);
        for (i, s) in samples.enumerate() {
            ss += s;
            sst += s * (self.tmpl[i] - t_mean);
            sgx += self.gx[i] * s;
            sgy += self.gy[i] * s;
            sss += s * s;
        }
        [ss, sst, sgx, sgy, sss].map(f64::from)
    }
}

/// Binomial smoothing kernel [1 4 6 4 1]/16 (σ = 1 px).
const K: [f32; 5] = [1.0 / 16.0, 4.0 / 16.0, 6.0 / 16.0, 4.0 / 16.0, 1.0 / 16.0];

/// The binomial kernel over five samples in a row (either direction), in the one order of
/// operations every smoothing path uses, so their values agree to the bit.
#[inline(always)]
fn k5(a: f32, b: f32, c: f32, d: f32, e: f32) -> f32 {
    K[0] * (a + e) + K[1] * (b + d) + K[2] * c
}

/// The horizontal smoothing pass at column `x` of a row of `sw` samples read through `row`
/// (which repeats the edge sample beyond the row). The same arithmetic inside and at the
/// borders, so a value does not depend on where it was computed.
fn hpass(row: impl Fn(i64) -> f32, x: i64, sw: usize) -> f32 {
    if x >= 2 && x + 2 < sw as i64 {
        k5(row(x - 2), row(x - 1), row(x), row(x + 1), row(x + 2))
    } else {
        (0..5).map(|i| K[i as usize] * row(x + i - 2)).sum()
    }
}

/// Template points ahead whose pixel rows are prefetched.
const PREFETCH_AHEAD: usize = 8;

/// Room around the patch for the shift, px.
const REGION_MARGIN_PX: usize = 10;

#[allow(clippy::too_many_arguments)]
fn copy_region<T: Copy + Into<f32>>(
    v: &[T],
    fw: usize,
    ox: usize,
    oy: usize,
    sw: usize,
    sh: usize,
    scale: f32,
    out: &mut [f32],
) {
    for y in 0..sh {
        let row = &v[(oy + y) * fw + ox..(oy + y) * fw + ox + sw];
        for (o, &p) in out[y * sw..(y + 1) * sw].iter_mut().zip(row) {
            *o = p.into() * scale;
        }
    }
}

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
        use rand::{RngExt, SeedableRng};
        let (w, h) = (96u32, 80u32);
        let mut rng = rand::rngs::ChaCha8Rng::seed_from_u64(7);
        let data: Vec<u8> = (0..w * h).map(|_| rng.random()).collect();
        let frame = Frame::from_u8(0, w, h, data);
        let mark = RadialMark {
            pivot: [20.0, 60.0],
            radius: [2.0, 15.0],
            tighten: None,
            ellipse: None,
        };
        let mut est = PatchEstimator::new(&mark, w, h);
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
        let mut est = PatchEstimator::new(m, sc.scene.width, sc.scene.height);
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
        let mut est = PatchEstimator::new(m, sc.scene.width, sc.scene.height);
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
