//! Camera shake from the rig's `fixed` mark: the translation of the image around that mark in
//! each frame, relative to the first frame.
//!
//! Method: Lucas–Kanade image registration in its inverse-compositional form (Baker & Matthews,
//! "Lucas-Kanade 20 Years On: A Unifying Framework", IJCV 56 (2004) 221–255), for a pure
//! translation, with a gain and offset fitted each iteration so lighting flicker does not read
//! as motion. The template is the square patch around the fixed mark (its stripe, the stripe's
//! ends and the disc around it) in the first frame, subsampled to at most `MAX_POINTS` pixels;
//! its gradients and the 2×2 normal matrix are computed once, so each iteration costs one
//! bilinear gather of the patch and a few sums. The previous frame's shift is the start point,
//! so shake that builds up over frames is followed.

use crate::decode::{Frame, Luma};
use crate::rig::RadialMark;

/// Largest number of template pixels used.
const MAX_POINTS: usize = 1024;
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
        let count = (x1.saturating_sub(x0) + 1) * (y1.saturating_sub(y0) + 1);
        let stride = ((count as f64 / MAX_POINTS as f64).sqrt().ceil() as usize).max(1);
        let mut pts = Vec::new();
        for y in (y0..=y1).step_by(stride) {
            for x in (x0..=x1).step_by(stride) {
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
        }
    }

    /// Takes the template from the first frame. Returns false when the patch has too little
    /// texture to register (then shake is not corrected).
    pub fn init(&mut self, frame: &Frame) -> bool {
        self.load(frame);
        let (ox, oy, sw) = (self.origin[0], self.origin[1], self.size[0]);
        let sm = &self.smooth;
        let px = |x: usize, y: usize| sm[(y - oy) * sw + (x - ox)];
        let (mut sxx, mut sxy, mut syy) = (0.0f64, 0.0f64, 0.0f64);
        let mut sum = 0.0f64;
        for (i, p) in self.pts.iter().enumerate() {
            let (x, y) = (p[0] as usize, p[1] as usize);
            self.tmpl[i] = px(x, y);
            let gx = 0.5 * (px(x + 1, y) - px(x - 1, y));
            let gy = 0.5 * (px(x, y + 1) - px(x, y - 1));
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
        true
    }

    /// The translation of this frame's image relative to the first frame, px (x right, y down),
    /// or None when the patch no longer matches the first frame (correlation below
    /// `MIN_CORRELATION` after the photometric fit: the fixed mark is obscured or gone); the
    /// last good shift is then kept for the next frame's start.
    pub fn estimate(&mut self, frame: &Frame) -> Option<[f64; 2]> {
        self.load(frame);
        let mut d = self.shift;
        let n = self.pts.len() as f64;
        let mut corr = 0.0;
        for _ in 0..MAX_ITER {
            // One pass: Σs, Σs·(t − t̄), Σgx·s, Σgy·s. With the photometric fit s ≈ g·t + b,
            // the residual is e = (s − s̄)/g − (t − t̄), so Σg·e needs only these sums and the
            // template's own Σgx, Σgy and Σg·(t − t̄), computed once.
            let [ss, sst, sgx, sgy, sss] = self.gather_sums(d);
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
    /// sub-pixel phases ("peak locking", facts.md §7.3).
    fn load(&mut self, frame: &Frame) {
        let scale = 1.0 / frame.max_value();
        let (ox, oy) = (self.origin[0], self.origin[1]);
        let [sw, sh] = self.size;
        let fw = frame.width as usize;
        match &frame.luma {
            Luma::U8(v) => copy_region(v, fw, ox, oy, sw, sh, scale, &mut self.raw),
            Luma::U16(v) => copy_region(v, fw, ox, oy, sw, sh, scale, &mut self.raw),
        }
        // Binomial kernel [1 4 6 4 1]/16 (σ = 1 px), horizontal then vertical; the borders
        // repeat the edge sample.
        const K: [f32; 5] = [1.0 / 16.0, 4.0 / 16.0, 6.0 / 16.0, 4.0 / 16.0, 1.0 / 16.0];
        let clampi = |i: i64, n: usize| i.clamp(0, n as i64 - 1) as usize;
        for y in 0..sh {
            let row = &self.raw[y * sw..(y + 1) * sw];
            let out = &mut self.tmp[y * sw..(y + 1) * sw];
            for x in 0..sw {
                out[x] = if x >= 2 && x + 2 < sw {
                    K[0] * (row[x - 2] + row[x + 2])
                        + K[1] * (row[x - 1] + row[x + 1])
                        + K[2] * row[x]
                } else {
                    (0..5)
                        .map(|i| K[i] * row[clampi(x as i64 + i as i64 - 2, sw)])
                        .sum()
                };
            }
        }
        for y in 0..sh {
            let r = |d: i64| clampi(y as i64 + d, sh) * sw;
            let (m2, m1, z, p1, p2) = (r(-2), r(-1), r(0), r(1), r(2));
            for x in 0..sw {
                let t = &self.tmp;
                self.smooth[z + x] = K[0] * (t[m2 + x] + t[p2 + x])
                    + K[1] * (t[m1 + x] + t[p1 + x])
                    + K[2] * t[z + x];
            }
        }
    }

    /// Bilinear samples of the smoothed region at every template point moved by `d`, reduced
    /// to the four sums the update needs.
    fn gather_sums(&self, d: [f64; 2]) -> [f64; 5] {
        let [sw, sh] = self.size;
        let (ox, oy) = (self.origin[0] as f64, self.origin[1] as f64);
        let v = &self.smooth;
        let t_mean = self.t_mean as f32;
        let (mut ss, mut sst, mut sgx, mut sgy, mut sss) = (0.0f32, 0.0f32, 0.0f32, 0.0f32, 0.0f32);
        for (i, p) in self.pts.iter().enumerate() {
            let x = (p[0] + d[0] - ox).clamp(0.0, (sw - 1) as f64);
            let y = (p[1] + d[1] - oy).clamp(0.0, (sh - 1) as f64);
            let x0 = (x as usize).min(sw - 2);
            let y0 = (y as usize).min(sh - 2);
            let fx = (x - x0 as f64) as f32;
            let fy = (y - y0 as f64) as f32;
            let j = y0 * sw + x0;
            let top = v[j] + fx * (v[j + 1] - v[j]);
            let bot = v[j + sw] + fx * (v[j + sw + 1] - v[j + sw]);
            let s = top + fy * (bot - top);
            ss += s;
            sst += s * (self.tmpl[i] - t_mean);
            sgx += self.gx[i] * s;
            sgy += self.gy[i] * s;
            sss += s * s;
        }
        [
            f64::from(ss),
            f64::from(sst),
            f64::from(sgx),
            f64::from(sgy),
            f64::from(sss),
        ]
    }
}

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
    use crate::rig::Mark;
    use crate::synth::{Scenario, render_frame, simulate};

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
        assert!(est.init(&f0));
        let (mut worst, mut sq) = (0.0f64, 0.0f64);
        for i in 1..40 {
            let d = est.estimate(&render_frame(&sc, &truth, i)).unwrap();
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
