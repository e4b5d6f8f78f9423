//! Sampling the frame for the shake registration: the smoothed region, the per-point smoothed
//! blocks, and the folded-kernel sums read straight from the frame.

use super::ShakeEstimator;
use super::kernel::{copy_region, folded_kernel, hpass, k5};
use crate::decode::{FrameRef, LumaRef};

impl ShakeEstimator {
    /// Copies the region around the patch and smooths it with a binomial kernel (σ = 1 px).
    /// Smoothing makes the image locally close to linear over a pixel, which is what bilinear
    /// resampling and the gradient step assume; without it the shift locks to preferred
    /// sub-pixel phases ("peak locking": Nobach & Honkanen, Exp. Fluids 38 (2005) 511–515).
    pub(super) fn load(&mut self, frame: FrameRef<'_>) {
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
    pub(super) fn cell(&self, p: [f64; 2], d: [f64; 2]) -> ([usize; 2], [f32; 2]) {
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
    pub(super) fn load_blocks(&mut self, frame: FrameRef<'_>, whole: [i64; 2]) {
        let scale = 1.0 / frame.max_value();
        match frame.luma {
            LumaRef::U8(v) => self.blocks_t(v, frame.width as usize, scale, whole),
            LumaRef::U16(v) => self.blocks_t(v, frame.width as usize, scale, whole),
        }
    }

    pub(super) fn blocks_t<T: Copy + Into<f32>>(
        &mut self,
        v: &[T],
        fw: usize,
        scale: f32,
        whole: [i64; 2],
    ) {
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
                crate::track::gather::prefetch_rows(v, first, fw, 6);
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
    pub(super) fn folded_sums(&self, frame: FrameRef<'_>, d: [f64; 2]) -> Option<[f64; 5]> {
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

    pub(super) fn folded_t<T: Copy + Into<f32>>(
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
                crate::track::gather::prefetch_rows(v, start(later), fw, 6);
            }
            let at = start(corner);
            let mut acc = [0.0f32; 8];
            for (r, kr) in k.iter().enumerate() {
                let row = &v[at + r * fw..at + r * fw + 8];
                for u in 0..8 {
                    acc[u] += row[u].into() * kr[u];
                }
            }
            crate::track::sum_lanes(acc)
        }))
    }

    /// Bilinear samples of the smoothed frame at every template point moved by `d` (read from
    /// the blocks of `load_blocks`), reduced to the sums the update needs.
    pub(super) fn gather_sums(&self, d: [f64; 2]) -> [f64; 5] {
        self.update_sums(self.pts.iter().zip(&self.blk).map(|(p, v)| {
            let (_, [fx, fy]) = self.cell(*p, d);
            let top = v[0] + fx * (v[1] - v[0]);
            let bot = v[2] + fx * (v[3] - v[2]);
            top + fy * (bot - top)
        }))
    }

    /// Σs, Σs·(t − t̄), Σgx·s, Σgy·s and Σs² over the template points' samples s (in the
    /// points' order), the sums one update needs.
    pub(super) fn update_sums(&self, samples: impl Iterator<Item = f32>) -> [f64; 5] {
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

/// Template points ahead whose pixel rows are prefetched.
const PREFETCH_AHEAD: usize = 8;
