//! The binomial smoothing kernel (σ = 1 px) folded with bilinear interpolation, through which
//! the shake registration reads the frame. Smoothing makes the image locally close to linear
//! over a pixel, which is what bilinear resampling and the gradient step assume; without it the
//! estimate locks to preferred sub-pixel phases ("peak locking": Nobach & Honkanen, Exp. Fluids
//! 38 (2005) 511–515).
//!
//! Part of the track stage: it must never import segment, mechanics, report, `analyze`,
//! `batch`, `find_marks`, `calibrate` or the CLI.

use crate::decode::{FrameRef, LumaRef};

/// The 6×6 weights (rows top to bottom, 8 columns of which the last two are 0) that give a
/// point's bilinear sample, at fractions `fx`, `fy` within its pixel, of the frame smoothed
/// by the binomial kernel, from the raw samples around it (times `scale`). Both passes are
/// linear, so they fold into one: along x, the bilinear weights (1 − fx, fx) on the smoothed
/// samples at x0 and x0 + 1 put `(1 − fx)·K[u] + fx·K[u − 1]` on raw column x0 − 2 + u
/// (K taken as 0 outside its five taps); along y likewise.
pub(super) fn folded_kernel(fx: f32, fy: f32, scale: f32) -> [[f32; 8]; 6] {
    let taps = |f: f32| -> [f32; 6] {
        std::array::from_fn(|u| {
            let here = if u < 5 { K[u] } else { 0.0 };
            let left = if u >= 1 { K[u - 1] } else { 0.0 };
            (1.0 - f) * here + f * left
        })
    };
    let (kx, ky) = (taps(fx), taps(fy));
    std::array::from_fn(|r| {
        std::array::from_fn(|u| if u < 6 { ky[r] * kx[u] * scale } else { 0.0 })
    })
}

/// Binomial smoothing kernel [1 4 6 4 1]/16 (σ = 1 px).
const K: [f32; 5] = [1.0 / 16.0, 4.0 / 16.0, 6.0 / 16.0, 4.0 / 16.0, 1.0 / 16.0];

/// The frame smoothed by the binomial kernel and read bilinearly at `q` (luma scaled to 0..1),
/// or None when the 6×6 neighbourhood it reads leaves the frame.
pub(super) fn sample(frame: FrameRef<'_>, q: [f64; 2]) -> Option<f32> {
    let (fw, fh) = (frame.width as i64, frame.height as i64);
    let (xf, yf) = (q[0].floor(), q[1].floor());
    let (x0, y0) = (xf as i64 - 2, yf as i64 - 2);
    if !(x0 >= 0 && y0 >= 0 && x0 + 6 <= fw && y0 + 6 <= fh) {
        return None;
    }
    let k = folded_kernel(
        (q[0] - xf) as f32,
        (q[1] - yf) as f32,
        1.0 / frame.max_value(),
    );
    let at = (y0 * fw + x0) as usize;
    let fw = fw as usize;
    Some(match frame.luma {
        LumaRef::U8(v) => dot6(v, at, fw, &k),
        LumaRef::U16(v) => dot6(v, at, fw, &k),
    })
}

#[inline(always)]
fn dot6<T: Copy + Into<f32>>(v: &[T], at: usize, fw: usize, k: &[[f32; 8]; 6]) -> f32 {
    let mut acc = 0.0f32;
    for (r, kr) in k.iter().enumerate() {
        let row = &v[at + r * fw..at + r * fw + 6];
        for u in 0..6 {
            acc += row[u].into() * kr[u];
        }
    }
    acc
}
