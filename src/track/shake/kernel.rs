//! The binomial smoothing kernel (σ = 1 px) folded with bilinear interpolation, through which
//! the shake registration reads the frame. Smoothing makes the image locally close to linear
//! over a pixel, which is what bilinear resampling and the gradient step assume; without it the
//! estimate locks to preferred sub-pixel phases ("peak locking": Nobach & Honkanen, Exp. Fluids
//! 38 (2005) 511–515).

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
