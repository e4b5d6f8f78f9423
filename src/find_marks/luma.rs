//! The luma image the mark finder works on: a frame smoothed by a 3×3 box, with clamped and
//! bilinear sampling.

use crate::decode::Frame;

/// A luma image, 0..1, row-major.
pub(super) struct Img {
    pub(super) w: usize,
    pub(super) h: usize,
    pub(super) v: Vec<f32>,
}

impl Img {
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
