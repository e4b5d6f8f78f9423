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
const MAX_POINTS: usize = 6000;
/// Iterations per frame at most.
const MAX_ITER: usize = 12;
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
    samples: Vec<f32>,
    shift: [f64; 2],
    width: usize,
    height: usize,
}

impl ShakeEstimator {
    /// Plans the patch around `mark` in frames of `width × height`.
    pub fn new(mark: &RadialMark, width: u32, height: u32) -> ShakeEstimator {
        let (w, h) = (width as usize, height as usize);
        let half = mark.radius[1] + 4.0;
        let x0 = ((mark.pivot[0] - half).floor() as i64).max(1) as usize;
        let x1 = ((mark.pivot[0] + half).ceil() as i64).min(w as i64 - 2).max(1) as usize;
        let y0 = ((mark.pivot[1] - half).floor() as i64).max(1) as usize;
        let y1 = ((mark.pivot[1] + half).ceil() as i64).min(h as i64 - 2).max(1) as usize;
        let count = (x1.saturating_sub(x0) + 1) * (y1.saturating_sub(y0) + 1);
        let stride = ((count as f64 / MAX_POINTS as f64).sqrt().ceil() as usize).max(1);
        let mut pts = Vec::new();
        for y in (y0..=y1).step_by(stride) {
            for x in (x0..=x1).step_by(stride) {
                pts.push([x as f64, y as f64]);
            }
        }
        let n = pts.len();
        ShakeEstimator {
            pts,
            tmpl: vec![0.0; n],
            gx: vec![0.0; n],
            gy: vec![0.0; n],
            hinv: [[0.0; 2]; 2],
            t_mean: 0.0,
            t_var: 0.0,
            samples: vec![0.0; n],
            shift: [0.0, 0.0],
            width: w,
            height: h,
        }
    }

    /// Takes the template from the first frame. Returns false when the patch has too little
    /// texture to register (then shake is not corrected).
    pub fn init(&mut self, frame: &Frame) -> bool {
        let px = |x: usize, y: usize| frame.value(x as u32, y as u32);
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

    /// The translation of this frame's image relative to the first frame, px (x right, y down).
    pub fn estimate(&mut self, frame: &Frame) -> [f64; 2] {
        let mut d = self.shift;
        for _ in 0..MAX_ITER {
            self.gather(frame, d);
            let n = self.pts.len() as f64;
            let s_mean = self.samples.iter().map(|&s| f64::from(s)).sum::<f64>() / n;
            let cov = self
                .samples
                .iter()
                .zip(&self.tmpl)
                .map(|(&s, &t)| (f64::from(s) - s_mean) * (f64::from(t) - self.t_mean))
                .sum::<f64>()
                / n;
            let gain = cov / self.t_var;
            if gain <= 0.05 {
                break;
            }
            let (mut bx, mut by) = (0.0f64, 0.0f64);
            for i in 0..self.pts.len() {
                let e = (f64::from(self.samples[i]) - s_mean) / gain
                    - (f64::from(self.tmpl[i]) - self.t_mean);
                bx += f64::from(self.gx[i]) * e;
                by += f64::from(self.gy[i]) * e;
            }
            let dx = self.hinv[0][0] * bx + self.hinv[0][1] * by;
            let dy = self.hinv[1][0] * bx + self.hinv[1][1] * by;
            d = [d[0] - dx, d[1] - dy];
            if dx.hypot(dy) < CONVERGED_PX {
                break;
            }
        }
        if d[0].is_finite() && d[1].is_finite() {
            self.shift = d;
        }
        self.shift
    }

    fn gather(&mut self, frame: &Frame, d: [f64; 2]) {
        let scale = 1.0 / frame.max_value();
        match &frame.luma {
            Luma::U8(v) => self.gather_t(v, scale, d),
            Luma::U16(v) => self.gather_t(v, scale, d),
        }
    }

    fn gather_t<T: Copy + Into<f32>>(&mut self, v: &[T], scale: f32, d: [f64; 2]) {
        let (w, h) = (self.width, self.height);
        for (o, p) in self.samples.iter_mut().zip(&self.pts) {
            let x = (p[0] + d[0]).clamp(0.0, (w - 1) as f64);
            let y = (p[1] + d[1]).clamp(0.0, (h - 1) as f64);
            let x0 = (x.floor() as usize).min(w - 2);
            let y0 = (y.floor() as usize).min(h - 2);
            let fx = (x - x0 as f64) as f32;
            let fy = (y - y0 as f64) as f32;
            let i = y0 * w + x0;
            *o = ((1.0 - fx) * (1.0 - fy) * v[i].into()
                + fx * (1.0 - fy) * v[i + 1].into()
                + (1.0 - fx) * fy * v[i + w].into()
                + fx * fy * v[i + w + 1].into())
                * scale;
        }
    }
}
