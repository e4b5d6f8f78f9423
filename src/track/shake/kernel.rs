//! The binomial smoothing kernel the shake registration samples through, folded with bilinear
//! interpolation, and the region copy.

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
pub(super) const K: [f32; 5] = [1.0 / 16.0, 4.0 / 16.0, 6.0 / 16.0, 4.0 / 16.0, 1.0 / 16.0];

/// The binomial kernel over five samples in a row (either direction), in the one order of
/// operations every smoothing path uses, so their values agree to the bit.
#[inline(always)]
pub(super) fn k5(a: f32, b: f32, c: f32, d: f32, e: f32) -> f32 {
    K[0] * (a + e) + K[1] * (b + d) + K[2] * c
}

/// The horizontal smoothing pass at column `x` of a row of `sw` samples read through `row`
/// (which repeats the edge sample beyond the row). The same arithmetic inside and at the
/// borders, so a value does not depend on where it was computed.
pub(super) fn hpass(row: impl Fn(i64) -> f32, x: i64, sw: usize) -> f32 {
    if x >= 2 && x + 2 < sw as i64 {
        k5(row(x - 2), row(x - 1), row(x), row(x + 1), row(x + 2))
    } else {
        (0..5).map(|i| K[i as usize] * row(x + i - 2)).sum()
    }
}

#[allow(clippy::too_many_arguments)]
pub(super) fn copy_region<T: Copy + Into<f32>>(
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
