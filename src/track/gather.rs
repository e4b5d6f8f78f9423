//! Bilinear samples of a frame at many precomputed points at once: the polar grids' inner loop.
//!
//! Each point is given by its top-left neighbour (flat index into the frame) and its fractions
//! `fx`, `fy` within that pixel. A whole-grid shift (camera shake) is split once into a
//! whole-pixel index offset and fractions that are added to every point's; a fraction that
//! passes 1 carries into the next pixel. The value is
//! `top + fy·(bottom − top)` with `top = p00 + fx·(p01 − p00)` and `bottom` likewise.
//!
//! On x86-64 processors with AVX2 (checked at run time) 8-bit frames are sampled eight points
//! at a time with gather loads; the arithmetic is the same operations in the same order, so the
//! values are bit-identical to the plain loop (a unit test checks this).
//!
//! Part of the track stage: it must never import segment, mechanics, report, `analyze`,
//! `batch`, `find_marks`, `calibrate` or the CLI.

/// A grid shift split into a whole-pixel index offset and the fractions left over
/// (each in 0..1), as [`super::polar::PolarGrid`] makes it.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct Shift {
    /// Added to every point's flat index.
    pub base: isize,
    /// Added to every point's fractions.
    pub fx: f32,
    pub fy: f32,
}

impl Shift {
    /// No shift.
    pub const ZERO: Shift = Shift {
        base: 0,
        fx: 0.0,
        fy: 0.0,
    };
}

/// A frame's sample type: 8 or 16 bit.
pub(crate) trait Sample: Copy + Into<f32> {
    /// The samples as bytes when they are 8-bit (the vector path's case).
    fn bytes(d: &[Self]) -> Option<&[u8]>;
}

impl Sample for u8 {
    fn bytes(d: &[u8]) -> Option<&[u8]> {
        Some(d)
    }
}

impl Sample for u16 {
    fn bytes(_: &[u16]) -> Option<&[u8]> {
        None
    }
}

/// Samples ahead whose pixels are prefetched: round a ring almost every sample reads a new
/// cache line, and the frame was just written by the decoding thread.
const PREFETCH_AHEAD: usize = 32;

/// Points per gather (eight 32-bit lanes of an AVX2 register).
const LANES: usize = 8;

/// A frame to sample: its samples, row length and the scale that maps a sample to 0..=1.
#[derive(Debug, Clone, Copy)]
pub(crate) struct Image<'a, T> {
    pub d: &'a [T],
    pub w: usize,
    pub scale: f32,
}

/// Grid points: each one's top-left neighbour (flat index into the frame) and its fractions
/// towards +x and +y within that pixel; the three slices have one length.
#[derive(Debug, Clone, Copy)]
pub(crate) struct Points<'a> {
    pub idx: &'a [u32],
    pub fx: &'a [f32],
    pub fy: &'a [f32],
}

impl<'a> Points<'a> {
    /// Points `a..b`.
    pub fn range(self, a: usize, b: usize) -> Points<'a> {
        Points {
            idx: &self.idx[a..b],
            fx: &self.fx[a..b],
            fy: &self.fy[a..b],
        }
    }
}

/// Writes the scaled bilinear sample of every point of `pts` (as many as `out` has), moved
/// by `shift`, into `out`.
///
/// Every shifted point's 2×2 block must lie inside the frame (the grids keep their shifts
/// inside it); `range` bounds `pts.idx` and is what the vector path's bounds check uses.
///
/// # Safety
/// `range.0 ≤ i ≤ range.1` for every `i` in `pts.idx` (the grids pass the smallest and largest
/// index of the taps `pts` was cut from). The vector path checks its 4-byte loads against
/// `range` only, so a range that does not bound the indices lets it read outside the frame.
/// (Scanning the indices here instead would cost a pass over them on every call; debug builds
/// do scan them and panic on a false range.)
///
/// # Panics
/// When a block falls outside the frame (plain path), or the slices' lengths differ.
pub(crate) unsafe fn bilinear<T: Sample>(
    img: Image<'_, T>,
    pts: Points<'_>,
    range: (u32, u32),
    shift: Shift,
    out: &mut [f32],
) {
    let n = out.len();
    assert!(pts.idx.len() == n && pts.fx.len() == n && pts.fy.len() == n);
    debug_assert!(
        pts.idx.iter().all(|&i| (range.0..=range.1).contains(&i)),
        "gather::bilinear: range {range:?} does not bound the indices"
    );
    #[cfg(target_arch = "x86_64")]
    if let Some(bytes) = T::bytes(img.d)
        && std::arch::is_x86_feature_detected!("avx2")
        && gather_fits(bytes.len(), img.w, range, shift)
        && n >= LANES
    {
        let bytes = Image {
            d: bytes,
            w: img.w,
            scale: img.scale,
        };
        // Whole blocks, then one more block ending at the last point (it overlaps the one
        // before; the overlapped points get the same values again).
        let full = n - n % LANES;
        let blocks = [(0, full), (n - LANES, n)];
        for &(a, b) in &blocks[..if full == n { 1 } else { 2 }] {
            // SAFETY: AVX2 is present (checked above), and `gather_fits` checked that every
            // 4-byte load of every point (its index plus the shift, with or without a carry in
            // each direction, on its row and the next) lies inside the frame, given that
            // `range` bounds the indices (this function's contract).
            unsafe { avx2::bilinear(bytes, pts.range(a, b), shift, &mut out[a..b]) };
        }
        return;
    }
    plain(img, pts, shift, out);
}

/// One point, moved by `shift`: the same arithmetic as the vector path.
#[inline(always)]
pub(crate) fn one<T: Sample>(d: &[T], w: usize, i: u32, fx: f32, fy: f32, shift: Shift) -> f32 {
    // Branch-free carries: the fractions vary from point to point, so a branch here would be
    // mispredicted about half the time. A sum of exactly 1 stays in its pixel with weight 1
    // on the far neighbour, so an unshifted point never carries.
    let x = fx + shift.fx;
    let y = fy + shift.fy;
    let cx = usize::from(x > 1.0);
    let cy = usize::from(y > 1.0);
    let x = x - cx as f32;
    let y = y - cy as f32;
    let i = (i as isize + shift.base) as usize + cx + cy * w;
    let (p00, p01): (f32, f32) = (d[i].into(), d[i + 1].into());
    let (p10, p11): (f32, f32) = (d[i + w].into(), d[i + w + 1].into());
    let top = p00 + x * (p01 - p00);
    let bot = p10 + x * (p11 - p10);
    top + y * (bot - top)
}

/// The plain loop, with prefetching.
fn plain<T: Sample>(img: Image<'_, T>, pts: Points<'_>, shift: Shift, out: &mut [f32]) {
    let (d, w) = (img.d, img.w);
    for (s, o) in out.iter_mut().enumerate() {
        if let Some(&ahead) = pts.idx.get(s + PREFETCH_AHEAD) {
            prefetch(d, (ahead as isize + shift.base) as usize, w);
        }
        *o = one(d, w, pts.idx[s], pts.fx[s], pts.fy[s], shift) * img.scale;
    }
}

/// Asks the processor to fetch the two pixel rows of the block at `at` ahead of use.
#[inline(always)]
fn prefetch<T>(d: &[T], at: usize, w: usize) {
    prefetch_rows(d, at, w, 2);
}

/// Asks the processor to fetch the cache lines of `d[at]`, `d[at + w]`, … (`rows` of them,
/// those inside `d`) ahead of use. A hint only: it never faults and changes no value.
#[inline(always)]
pub(crate) fn prefetch_rows<T>(d: &[T], at: usize, w: usize, rows: usize) {
    #[cfg(target_arch = "x86_64")]
    for r in 0..rows {
        if let Some(px) = d.get(at + r * w) {
            use std::arch::x86_64::{_MM_HINT_T0, _mm_prefetch};
            // SAFETY: `px` is a valid reference into `d`; a prefetch reads and writes nothing.
            unsafe { _mm_prefetch::<_MM_HINT_T0>(std::ptr::from_ref(px).cast()) };
        }
    }
    #[cfg(not(target_arch = "x86_64"))]
    let _ = (d, at, w, rows);
}

/// Whether 4-byte loads at every point's block, moved by `shift` (with or without a carry
/// each way), on both of its rows, stay inside a frame of `len` bytes: the nearest read starts
/// at `min + base`, the farthest ends at `max + base + 1 + w` (carries) `+ w` (bottom row)
/// `+ 4`. Indices must also fit the gathers' 32-bit lanes.
#[cfg(target_arch = "x86_64")]
fn gather_fits(len: usize, w: usize, (min, max): (u32, u32), shift: Shift) -> bool {
    let near = i64::from(min) + shift.base as i64;
    let far = i64::from(max) + shift.base as i64 + 1 + 2 * w as i64 + 4;
    near >= 0 && far <= len as i64 && len <= i32::MAX as usize
}

#[cfg(target_arch = "x86_64")]
mod avx2 {
    use std::arch::x86_64::*;

    use super::{Image, LANES, PREFETCH_AHEAD, Points, Shift, prefetch};

    /// [`super::plain`] for 8-bit samples, eight points at a time (`out.len()` a multiple of
    /// eight).
    ///
    /// # Safety
    /// The processor must have AVX2, and 4-byte loads at every point's index plus
    /// `shift.base`, plus one carry each way, on its row and the next, must lie inside `d`.
    #[target_feature(enable = "avx2")]
    pub(super) unsafe fn bilinear(
        img: Image<'_, u8>,
        pts: Points<'_>,
        shift: Shift,
        out: &mut [f32],
    ) {
        let (d, w, scale) = (img.d, img.w, img.scale);
        let (idx, fx, fy) = (pts.idx, pts.fx, pts.fy);
        let one = _mm256_set1_ps(1.0);
        let one_i = _mm256_set1_epi32(1);
        let row = _mm256_set1_epi32(w as i32);
        let base = _mm256_set1_epi32(shift.base as i32);
        let (sx, sy) = (_mm256_set1_ps(shift.fx), _mm256_set1_ps(shift.fy));
        let low = _mm256_set1_epi32(0xff);
        let k = _mm256_set1_ps(scale);
        let top_row = d.as_ptr().cast::<i32>();
        let bottom_row = d[w..].as_ptr().cast::<i32>();
        for s in (0..out.len()).step_by(LANES) {
            for a in (s + PREFETCH_AHEAD..s + PREFETCH_AHEAD + LANES).take_while(|&a| a < idx.len())
            {
                prefetch(d, (idx[a] as isize + shift.base) as usize, w);
            }
            // SAFETY: all loads and stores: s + LANES ≤ out.len() = idx.len() = fx.len() =
            // fy.len(); the gathers' bounds are the caller's contract.
            unsafe {
                let x = _mm256_add_ps(_mm256_loadu_ps(fx.as_ptr().add(s)), sx);
                let y = _mm256_add_ps(_mm256_loadu_ps(fy.as_ptr().add(s)), sy);
                let cx = _mm256_cmp_ps::<_CMP_GT_OQ>(x, one);
                let cy = _mm256_cmp_ps::<_CMP_GT_OQ>(y, one);
                let x = _mm256_sub_ps(x, _mm256_and_ps(cx, one));
                let y = _mm256_sub_ps(y, _mm256_and_ps(cy, one));
                let mut i = _mm256_loadu_si256(idx.as_ptr().add(s).cast());
                i = _mm256_add_epi32(i, base);
                i = _mm256_add_epi32(i, _mm256_and_si256(_mm256_castps_si256(cx), one_i));
                i = _mm256_add_epi32(i, _mm256_and_si256(_mm256_castps_si256(cy), row));
                let top = _mm256_i32gather_epi32::<1>(top_row, i);
                let bot = _mm256_i32gather_epi32::<1>(bottom_row, i);
                let byte = |v: __m256i| _mm256_cvtepi32_ps(_mm256_and_si256(v, low));
                let next = |v: __m256i| byte(_mm256_srli_epi32::<8>(v));
                let (p00, p01) = (byte(top), next(top));
                let (p10, p11) = (byte(bot), next(bot));
                let t = _mm256_add_ps(p00, _mm256_mul_ps(x, _mm256_sub_ps(p01, p00)));
                let b = _mm256_add_ps(p10, _mm256_mul_ps(x, _mm256_sub_ps(p11, p10)));
                let v = _mm256_add_ps(t, _mm256_mul_ps(y, _mm256_sub_ps(b, t)));
                _mm256_storeu_ps(out.as_mut_ptr().add(s), _mm256_mul_ps(v, k));
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;
    use rand::rngs::ChaCha8Rng;
    use rand::{RngExt, SeedableRng};

    proptest! {
        /// The vector path (where the processor has it) and the plain loop give bit-identical
        /// values, for any points, fractions and shift that keep the blocks in the frame.
        #[test]
        fn vector_and_plain_paths_agree_to_the_bit(
            seed in any::<u64>(),
            n in 0usize..70,
            sfx in 0.0f32..1.0,
            sfy in 0.0f32..1.0,
            base_x in 0isize..3,
            base_y in 0isize..3,
        ) {
            let (w, h) = (37usize, 23usize);
            let mut rng = ChaCha8Rng::seed_from_u64(seed);
            let mut next = || rng.random::<u64>();
            let d: Vec<u8> = (0..w * h).map(|_| next() as u8).collect();
            // Points whose shifted blocks (with carries) stay inside: x ≤ w − 6, y ≤ h − 6.
            let idx: Vec<u32> = (0..n)
                .map(|_| {
                    let x = (next() % (w as u64 - 6)) as usize;
                    let y = (next() % (h as u64 - 6)) as usize;
                    (y * w + x) as u32
                })
                .collect();
            let frac = |v: u64| (v % 1025) as f32 / 1024.0;
            let fx: Vec<f32> = (0..n).map(|_| frac(next())).collect();
            let fy: Vec<f32> = (0..n).map(|_| frac(next())).collect();
            let shift = Shift { base: base_y * w as isize + base_x, fx: sfx, fy: sfy };
            let range = (
                idx.iter().copied().min().unwrap_or(0),
                idx.iter().copied().max().unwrap_or(0),
            );
            let img = Image { d: &d[..], w, scale: 1.0 / 255.0 };
            let pts = Points { idx: &idx, fx: &fx, fy: &fy };
            let mut fast = vec![0.0f32; n];
            // SAFETY: `range` is the smallest and largest of `idx`, computed just above.
            unsafe { bilinear(img, pts, range, shift, &mut fast) };
            let mut slow = vec![0.0f32; n];
            plain(img, pts, shift, &mut slow);
            for (a, b) in fast.iter().zip(&slow) {
                prop_assert_eq!(a.to_bits(), b.to_bits());
            }
        }
    }

    #[test]
    #[cfg(debug_assertions)]
    #[should_panic(expected = "does not bound the indices")]
    fn a_false_range_is_caught_in_debug_builds() {
        let d = vec![0u8; 32 * 32];
        let idx = [40u32; 8];
        let img = Image {
            d: &d[..],
            w: 32,
            scale: 1.0,
        };
        let pts = Points {
            idx: &idx,
            fx: &[0.0; 8],
            fy: &[0.0; 8],
        };
        let mut out = [0.0f32; 8];
        // SAFETY: deliberately false range; the debug check panics before any sample is read.
        unsafe { bilinear(img, pts, (0, 1), Shift::ZERO, &mut out) };
    }

    #[test]
    fn reproduces_a_linear_ramp_and_carries_across_pixels() {
        // Bilinear interpolation is exact on a plane: value = 2x + 3y.
        let (w, h) = (16usize, 12usize);
        let d: Vec<u16> = (0..h)
            .flat_map(|y| (0..w).map(move |x| (2 * x + 3 * y) as u16))
            .collect();
        let idx = [3 * w as u32 + 4];
        let shift = Shift {
            base: w as isize + 1,
            fx: 0.75,
            fy: 0.5,
        };
        let mut out = [0.0f32];
        let img = Image {
            d: &d[..],
            w,
            scale: 1.0,
        };
        let pts = Points {
            idx: &idx,
            fx: &[0.5],
            fy: &[0.75],
        };
        // SAFETY: one index, so (idx[0], idx[0]) bounds it.
        unsafe { bilinear(img, pts, (idx[0], idx[0]), shift, &mut out) };
        // Point (4.5, 3.75) moved by (1.75, 1.5): (6.25, 5.25), carried in both directions.
        assert!(
            (out[0] - (2.0 * 6.25 + 3.0 * 5.25)).abs() < 1e-5,
            "{}",
            out[0]
        );
    }
}
