//! The luma image the mark finder works on: a frame smoothed by a 3×3 box, with clamped and
//! bilinear sampling.
//!
//! Part of the `find-marks` command (built on decode and track, writing through report): it
//! must never import segment, mechanics, `analyze`, `batch` or the CLI.

use crate::decode::Frame;

/// A luma image, 0..1, row-major.
pub(super) struct Img {
    pub(super) w: usize,
    pub(super) h: usize,
    pub(super) v: Vec<f32>,
}

impl Img {
    /// An image whose value at pixel (x, y) is `f(x, y)`: test pictures drawn from formulas.
    #[cfg(test)]
    pub(super) fn from_fn(w: usize, h: usize, f: impl Fn(f64, f64) -> f32) -> Img {
        let v = (0..h)
            .flat_map(|y| (0..w).map(move |x| (x, y)))
            .map(|(x, y)| f(x as f64, y as f64))
            .collect();
        Img { w, h, v }
    }

    /// The frame, smoothed by a 3×3 box (noise down by 3 before the ridge test).
    pub(super) fn from_frame(f: &Frame) -> Img {
        let (w, h) = (f.width as usize, f.height as usize);
        let mut raw = vec![0f32; w * h];
        for y in 0..h {
            for x in 0..w {
                raw[y * w + x] = f.value(x as u32, y as u32);
            }
        }
        let mut v = raw.clone();
        for y in 1..h.saturating_sub(1) {
            for x in 1..w.saturating_sub(1) {
                let mut s = 0.0;
                for dy in 0..3 {
                    for dx in 0..3 {
                        s += raw[(y + dy - 1) * w + x + dx - 1];
                    }
                }
                v[y * w + x] = s / 9.0;
            }
        }
        Img { w, h, v }
    }
    pub(super) fn at(&self, x: i32, y: i32) -> f32 {
        let x = x.clamp(0, self.w as i32 - 1) as usize;
        let y = y.clamp(0, self.h as i32 - 1) as usize;
        self.v[y * self.w + x]
    }
    /// Bilinear sample at a sub-pixel position (clamped to the frame).
    pub(super) fn sample(&self, x: f64, y: f64) -> f32 {
        let x = x.clamp(0.0, (self.w - 1) as f64);
        let y = y.clamp(0.0, (self.h - 1) as f64);
        let (x0, y0) = (x.floor() as i32, y.floor() as i32);
        let (fx, fy) = ((x - x0 as f64) as f32, (y - y0 as f64) as f32);
        let a = self.at(x0, y0) * (1.0 - fx) + self.at(x0 + 1, y0) * fx;
        let b = self.at(x0, y0 + 1) * (1.0 - fx) + self.at(x0 + 1, y0 + 1) * fx;
        a * (1.0 - fy) + b * fy
    }
}

/// Where a frame differs from the first: a count of changed pixels over any window in O(1)
/// (a summed-area table; Crow, "Summed-area tables for texture mapping", SIGGRAPH 1984).
/// A pixel has changed when, after scaling the frame to the first frame's mean luma (so light
/// flicker does not count), it differs from the first frame by more than six times the noise
/// (estimated from the median absolute difference of the first two frames) or 0.02.
pub(super) struct Change {
    first: Vec<f32>,
    mean0: f64,
    thr: Option<f32>,
    /// (w + 1) × (h + 1) summed-area table of changed pixels.
    sat: Vec<u32>,
    w: usize,
    h: usize,
}

impl Change {
    pub(super) fn new(img0: &Img) -> Change {
        Change {
            first: img0.v.clone(),
            mean0: mean(&img0.v),
            thr: None,
            sat: vec![0; (img0.w + 1) * (img0.h + 1)],
            w: img0.w,
            h: img0.h,
        }
    }

    /// Takes in a new frame of the same size.
    pub(super) fn update(&mut self, img: &Img) {
        let m = mean(&img.v);
        let g = if m > 1e-6 {
            (self.mean0 / m) as f32
        } else {
            1.0
        };
        let thr = *self.thr.get_or_insert_with(|| {
            let mut d: Vec<f32> = img
                .v
                .iter()
                .zip(&self.first)
                .map(|(a, b)| (a * g - b).abs())
                .collect();
            let mid = d.len() / 2;
            let med = *d.select_nth_unstable_by(mid, f32::total_cmp).1;
            // MAD of a difference of two noisy frames: σ_diff = 1.4826 × median; σ = σ_diff / √2.
            (6.0 * 1.4826 * med / std::f32::consts::SQRT_2).max(0.02)
        });
        let w1 = self.w + 1;
        for y in 0..self.h {
            let mut row = 0u32;
            for x in 0..self.w {
                let i = y * self.w + x;
                row += u32::from((img.v[i] * g - self.first[i]).abs() > thr);
                self.sat[(y + 1) * w1 + x + 1] = self.sat[y * w1 + x + 1] + row;
            }
        }
    }

    /// Changed pixels in the window `[x0, x1) × [y0, y1)`.
    pub(super) fn count(&self, win: [usize; 4]) -> u32 {
        let [x0, x1, y0, y1] = win;
        let w1 = self.w + 1;
        let (x1, y1) = (x1.min(self.w), y1.min(self.h));
        if x0 >= x1 || y0 >= y1 {
            return 0;
        }
        self.sat[y1 * w1 + x1] + self.sat[y0 * w1 + x0]
            - self.sat[y0 * w1 + x1]
            - self.sat[y1 * w1 + x0]
    }
}

fn mean(v: &[f32]) -> f64 {
    v.iter().map(|&x| f64::from(x)).sum::<f64>() / v.len().max(1) as f64
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_changed_patch_is_counted_and_flicker_is_not() {
        let (w, h) = (40, 30);
        let base: Vec<f32> = (0..w * h).map(|i| 0.3 + 0.001 * (i % 7) as f32).collect();
        let img0 = Img {
            w,
            h,
            v: base.clone(),
        };
        let mut c = Change::new(&img0);
        // 10 % brighter overall (flicker), and a 3×2 patch changed by 0.3.
        let mut v: Vec<f32> = base.iter().map(|x| x * 1.1).collect();
        for y in 10..12 {
            for x in 5..8 {
                v[y * w + x] += 0.3;
            }
        }
        c.update(&Img { w, h, v });
        assert_eq!(c.count([0, w, 0, h]), 6);
        assert_eq!(c.count([5, 8, 10, 12]), 6);
        assert_eq!(c.count([20, 40, 0, 30]), 0);
    }
}
