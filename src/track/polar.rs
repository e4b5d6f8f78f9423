//! A polar sampling grid over one mark's annulus, built once per clip.
//!
//! The annulus is cut into `rings` circles (in the disc's own plane) and `bins` equal angular
//! steps. Each sample point's screen position is precomputed, as its top-left bilinear
//! neighbour and its fractions within that pixel, so sampling a frame is a gather of
//! `rings × bins × 4` values whatever the frame size (`gather.rs`).
//!
//! A disc seen obliquely (rig `ellipse`) is mapped back to a circle: disc-plane point
//! `r·(cos α, sin α)` appears on screen at `pivot + M·r·(cos α, sin α)` with
//! `M = R(φ)·diag(1, b/a)·R(−φ)` (orthographic view of a tilted circle: the axis along `φ` keeps
//! its length and the perpendicular one shrinks by `b/a`). Angles are therefore measured in the
//! disc's plane; they equal screen angles when there is no ellipse.
//!
//! Part of the track stage: it must never import segment, mechanics, report, `analyze`,
//! `batch`, `find_marks`, `calibrate` or the CLI.

use std::f64::consts::PI;

use super::gather::{self, Image, Sample, Shift};
use crate::decode::{ChromaRef, FrameRef, LumaRef};
use crate::rig::RadialMark;

/// Target spacing of angular samples along the mid-radius circle, px.
const BIN_SPACING_PX: f64 = 0.75;
/// Bounds on the number of angular samples.
const MIN_BINS: usize = 180;
const MAX_BINS: usize = 4096;
/// The span [`PolarGrid::sample_span`] returns when it sampled a whole ring: unbounded.
pub(crate) const WHOLE_RING: (i64, i64) = (i64::MIN / 4, i64::MAX / 4);
/// Bounds on the number of rings (rings are 1 px apart until the cap is reached).
const MIN_RINGS: usize = 2;
const MAX_RINGS: usize = 32;

/// Precomputed sample positions and bilinear taps over an annulus.
#[derive(Debug, Clone)]
pub(crate) struct PolarGrid {
    /// Number of rings.
    pub rings: usize,
    /// Number of angular samples per ring.
    pub bins: usize,
    /// Disc-plane radius of each ring, px.
    pub radius: Vec<f64>,
    /// Screen offset of each sample from the pivot (ring-major).
    offset: Vec<[f32; 2]>,
    /// Index of each sample's top-left neighbour, for the unshifted grid.
    idx: Vec<u32>,
    /// Smallest and largest of `idx`.
    idx_range: (u32, u32),
    /// Fractional position of each sample within its top-left pixel (towards +x and +y),
    /// unshifted grid.
    fx: Vec<f32>,
    fy: Vec<f32>,
    /// Range of the top-left neighbours' columns and rows over the grid: x0 min, x0 max,
    /// y0 min, y0 max (to keep a shifted grid inside the frame).
    bbox: [usize; 4],
    pivot: [f64; 2],
    /// The 2×2 disc-to-screen map `M`.
    map: [[f64; 2]; 2],
    width: usize,
    height: usize,
}

impl PolarGrid {
    /// Builds the grid for a radial mark in frames of `width × height` (both ≥ 2).
    pub fn new(mark: &RadialMark, width: u32, height: u32) -> PolarGrid {
        let [ri, ro] = mark.radius;
        let rings = ((ro - ri).round() as usize).clamp(MIN_RINGS, MAX_RINGS);
        let dr = (ro - ri) / rings as f64;
        let radius: Vec<f64> = (0..rings).map(|k| ri + (k as f64 + 0.5) * dr).collect();
        let r_mid = 0.5 * (ri + ro);
        let bins = ((2.0 * PI * r_mid / BIN_SPACING_PX).ceil() as usize).clamp(MIN_BINS, MAX_BINS);
        PolarGrid::build(
            mark.pivot,
            disc_to_screen(mark),
            radius,
            bins,
            width as usize,
            height as usize,
        )
    }

    /// A grid over some of this grid's rings (`rings`, indices) with `bins` angular samples.
    pub fn subgrid(&self, rings: &[usize], bins: usize) -> PolarGrid {
        PolarGrid::build(
            self.pivot,
            self.map,
            rings.iter().map(|&k| self.radius[k]).collect(),
            bins,
            self.width,
            self.height,
        )
    }

    fn build(
        pivot: [f64; 2],
        map: [[f64; 2]; 2],
        radius: Vec<f64>,
        bins: usize,
        width: usize,
        height: usize,
    ) -> PolarGrid {
        let rings = radius.len();
        let dirs: Vec<(f64, f64)> = (0..bins)
            .map(|j| (2.0 * PI * j as f64 / bins as f64).sin_cos())
            .collect();
        let mut offset = Vec::with_capacity(rings * bins);
        for &r in &radius {
            for &(sin, cos) in &dirs {
                let (u, v) = (r * cos, r * sin);
                offset.push([
                    (map[0][0] * u + map[0][1] * v) as f32,
                    (map[1][0] * u + map[1][1] * v) as f32,
                ]);
            }
        }
        let mut grid = PolarGrid {
            rings,
            bins,
            radius,
            offset,
            idx: Vec::new(),
            idx_range: (0, 0),
            fx: Vec::new(),
            fy: Vec::new(),
            bbox: [0; 4],
            pivot,
            map,
            width,
            height,
        };
        let taps: Vec<(u32, [f32; 2])> = grid
            .offset
            .iter()
            .map(|o| grid.tap(f64::from(o[0]), f64::from(o[1])))
            .collect();
        grid.idx = taps.iter().map(|t| t.0).collect();
        grid.fx = taps.iter().map(|t| t.1[0]).collect();
        grid.fy = taps.iter().map(|t| t.1[1]).collect();
        grid.idx_range = (
            grid.idx.iter().copied().min().unwrap_or(0),
            grid.idx.iter().copied().max().unwrap_or(0),
        );
        let w = grid.width;
        let (mut x_lo, mut x_hi, mut y_lo, mut y_hi) = (usize::MAX, 0, usize::MAX, 0);
        for &i in &grid.idx {
            let (x, y) = (i as usize % w, i as usize / w);
            x_lo = x_lo.min(x);
            x_hi = x_hi.max(x);
            y_lo = y_lo.min(y);
            y_hi = y_hi.max(y);
        }
        grid.bbox = [x_lo, x_hi, y_lo, y_hi];
        grid
    }

    /// The pivot, the disc-to-screen map and the pixels the unshifted grid reads:
    /// `[x_lo, x_hi, y_lo, y_hi]`, inclusive, covering every sample's four bilinear taps.
    pub fn geometry(&self) -> ([f64; 2], [[f64; 2]; 2], [usize; 4]) {
        let [x0, x1, y0, y1] = self.bbox;
        (self.pivot, self.map, [x0, x1 + 1, y0, y1 + 1])
    }

    /// Angular step between bins, rad.
    pub fn step(&self) -> f64 {
        2.0 * PI / self.bins as f64
    }

    /// Screen angle (from +x towards +y) of the disc-plane direction `alpha`.
    pub fn screen_angle(&self, alpha: f64) -> f64 {
        let (u, v) = (alpha.cos(), alpha.sin());
        let m = &self.map;
        (m[1][0] * u + m[1][1] * v).atan2(m[0][0] * u + m[0][1] * v)
    }

    /// Top-left neighbour (flat index) and fractions of the point `pivot + (ox, oy)`, clamped
    /// to the frame.
    fn tap(&self, ox: f64, oy: f64) -> (u32, [f32; 2]) {
        let x = (self.pivot[0] + ox).clamp(0.0, (self.width - 1) as f64);
        let y = (self.pivot[1] + oy).clamp(0.0, (self.height - 1) as f64);
        let x0 = (x.floor() as usize).min(self.width - 2);
        let y0 = (y.floor() as usize).min(self.height - 2);
        (
            (y0 * self.width + x0) as u32,
            [(x - x0 as f64) as f32, (y - y0 as f64) as f32],
        )
    }

    /// `frame` made ready for sampling on this grid moved by `shift` (camera shake; zero uses
    /// the precomputed taps): the scale of its samples and the shift's split into whole pixels
    /// and fractions, worked out once for all of a frame's samples.
    ///
    /// # Panics
    /// When the frame size differs from the grid's.
    pub fn prepare<'a>(&self, frame: FrameRef<'a>, shift: [f64; 2]) -> Prepared<'a> {
        self.prepare_with(frame, shift, None)
    }

    /// As [`Self::prepare`], but every sample is the colour projection `weights` of the
    /// frame at the sample's point, when given (track/colour.rs): luma interpolated as
    /// always, chroma interpolated at the same point from its own samples
    /// ([`ChromaRef::at_point`]; taken as neutral in a frame without colour), projected and
    /// clamped to 0..=1. Only the points the tracker reads are projected.
    pub fn prepare_with<'a>(
        &self,
        frame: FrameRef<'a>,
        shift: [f64; 2],
        weights: Option<ColourWeights>,
    ) -> Prepared<'a> {
        assert_eq!(
            (frame.width as usize, frame.height as usize),
            (self.width, self.height)
        );
        Prepared {
            luma: frame.luma,
            scale: 1.0 / frame.max_value(),
            shift: self.shift_parts(shift),
            colour: weights.map(|weights| ColourTaps {
                chroma: frame.chroma,
                weights,
                height: frame.height,
            }),
        }
    }

    /// Samples the frame on the grid into `out` (`rings × bins`, ring-major, values 0..=1).
    ///
    /// # Panics
    /// When `out` has the wrong length.
    pub fn sample(&self, frame: &Prepared<'_>, out: &mut [f32]) {
        assert_eq!(out.len(), self.offset.len());
        self.sample_range(frame, 0..self.offset.len(), out);
    }

    /// Samples ring `k` only, into its place in `out` (laid out as for [`Self::sample`]).
    pub fn sample_ring(&self, frame: &Prepared<'_>, k: usize, out: &mut [f32]) {
        let n = self.bins;
        self.sample_range(frame, k * n..(k + 1) * n, &mut out[k * n..(k + 1) * n]);
    }

    /// Samples every `stride`-th bin from `from` to `to` of ring `k` (continuous bin numbers,
    /// wrapped around the ring) into their places in `out` (laid out as for [`Self::sample`]).
    /// A span of a whole ring or more samples the whole ring. Returns the span sampled,
    /// `(from, to)` unwrapped, or an unbounded span for a whole ring.
    pub fn sample_span(
        &self,
        frame: &Prepared<'_>,
        k: usize,
        from: i64,
        to: i64,
        stride: usize,
        out: &mut [f32],
    ) -> (i64, i64) {
        let n = self.bins as i64;
        if to - from + 1 >= n {
            self.sample_ring(frame, k, out);
            return WHOLE_RING;
        }
        if stride > 1 {
            let span = (k, from, to, stride);
            match frame.luma {
                LumaRef::U8(d) => self.sample_strided(d, frame, span, out),
                LumaRef::U16(d) => self.sample_strided(d, frame, span, out),
            }
            return (from, to);
        }
        let base = k * self.bins;
        let a = from.rem_euclid(n) as usize;
        let b = to.rem_euclid(n) as usize;
        if a <= b {
            self.sample_range(frame, base + a..base + b + 1, &mut out[base + a..=base + b]);
        } else {
            let end = base + self.bins;
            self.sample_range(frame, base + a..end, &mut out[base + a..end]);
            self.sample_range(frame, base..base + b + 1, &mut out[base..=base + b]);
        }
        (from, to)
    }

    /// The taps of ring `k`'s bins `0, m, 2m, …` (below `bins`), in that order: the lattice a
    /// fine centre reads on a ring whose bins are closer than it needs (`radial.rs`). Sampling
    /// them with [`Self::sample_lattice`] gives exactly the values [`Self::sample_span`] gives at
    /// those bins, into consecutive places, so a window can be read in place.
    pub fn lattice(&self, k: usize, m: usize) -> LatticeTaps {
        let flat: Vec<usize> = (0..self.bins)
            .step_by(m.max(1))
            .map(|j| k * self.bins + j)
            .collect();
        let idx: Vec<u32> = flat.iter().map(|&i| self.idx[i]).collect();
        LatticeTaps {
            range: (
                idx.iter().copied().min().unwrap_or(0),
                idx.iter().copied().max().unwrap_or(0),
            ),
            fx: flat.iter().map(|&i| self.fx[i]).collect(),
            fy: flat.iter().map(|&i| self.fy[i]).collect(),
            idx,
        }
    }

    /// Samples lattice points `range` (positions in `lat`, which this grid made) into `out`
    /// (same length), with the frame's shift applied exactly as [`Self::sample`] applies it.
    pub fn sample_lattice(
        &self,
        lat: &LatticeTaps,
        frame: &Prepared<'_>,
        range: std::ops::Range<usize>,
        out: &mut [f32],
    ) {
        let pts = lat.points().range(range.start, range.end);
        self.gather(pts, lat.range, frame, out);
    }

    /// Samples the grid points `range` (flat, ring-major indices) into `out` (same length).
    fn sample_range(&self, frame: &Prepared<'_>, range: std::ops::Range<usize>, out: &mut [f32]) {
        let pts = points(&self.idx, &self.fx, &self.fy).range(range.start, range.end);
        self.gather(pts, self.idx_range, frame, out);
    }

    /// Bilinear samples of the frame at `pts` (taps of this grid; `idx_range` is the smallest
    /// and largest of their indices), into `out` (same length), values 0..=1.
    ///
    /// Its two callers pass `pts` cut from taps whose range was computed from those same taps
    /// when they were made (`PolarGrid::new`'s `idx_range`, `LatticeTaps::range`), and the taps
    /// never change after: that is what makes the unsafe gather below sound.
    fn gather(
        &self,
        pts: gather::Points<'_>,
        idx_range: (u32, u32),
        frame: &Prepared<'_>,
        out: &mut [f32],
    ) {
        let (w, scale, sh) = (self.width, frame.scale, frame.shift);
        if let Some(c) = frame.colour {
            match frame.luma {
                LumaRef::U8(d) => colour_gather(Image { d, w, scale }, pts, sh, c, out),
                LumaRef::U16(d) => colour_gather(Image { d, w, scale }, pts, sh, c, out),
            }
            return;
        }
        match frame.luma {
            // SAFETY: `idx_range` is the smallest and largest index of the taps `pts` was cut
            // from (see above), so it bounds every index of `pts`.
            LumaRef::U8(d) => unsafe {
                gather::bilinear(gather::Image { d, w, scale }, pts, idx_range, sh, out)
            },
            // SAFETY: as above.
            LumaRef::U16(d) => unsafe {
                gather::bilinear(gather::Image { d, w, scale }, pts, idx_range, sh, out)
            },
        }
    }

    /// Samples bins `from, from + stride, … ≤ to` (unwrapped) of ring `k` into their places
    /// in `out`; `span` is `(k, from, to, stride)`.
    fn sample_strided<T: Sample>(
        &self,
        d: &[T],
        frame: &Prepared<'_>,
        span: (usize, i64, i64, usize),
        out: &mut [f32],
    ) {
        let (k, from, to, stride) = span;
        let (w, n) = (self.width, self.bins as i64);
        let flat = |j: i64| k * self.bins + j.rem_euclid(n) as usize;
        let (sh, scale) = (frame.shift, frame.scale);
        let mut j = from;
        while j <= to {
            let i = flat(j);
            let (idx, fx, fy) = (self.idx[i], self.fx[i], self.fy[i]);
            out[i] = match frame.colour {
                Some(c) => colour_one(Image { d, w, scale }, idx, fx, fy, sh, c),
                None => gather::one(d, w, idx, fx, fy, sh) * scale,
            };
            j += stride as i64;
        }
    }

    /// A shift as a whole-pixel index offset and the fractions left over, limited so that the
    /// grid stays inside the frame.
    fn shift_parts(&self, shift: [f64; 2]) -> Shift {
        if shift == [0.0, 0.0] {
            return Shift::ZERO;
        }
        let lim = |v: f64, lo: usize, hi: usize, n: usize| -> (isize, f32) {
            let (min, max) = (-(lo as f64), (n as f64 - 3.0 - hi as f64).max(-(lo as f64)));
            let v = v.clamp(min, max);
            let i = v.floor();
            (i as isize, (v - i) as f32)
        };
        let (ix, fxs) = lim(shift[0], self.bbox[0], self.bbox[1], self.width);
        let (iy, fys) = lim(shift[1], self.bbox[2], self.bbox[3], self.height);
        Shift {
            base: iy * self.width as isize + ix,
            fx: fxs,
            fy: fys,
        }
    }
}

/// A frame made ready for sampling one grid ([`PolarGrid::prepare`]).
#[derive(Debug, Clone, Copy)]
pub(crate) struct Prepared<'a> {
    luma: LumaRef<'a>,
    /// Maps a sample to 0..=1.
    scale: f32,
    /// The grid's shift, split into whole pixels and fractions.
    shift: Shift,
    /// The colour projection sampled instead of luma, if any.
    colour: Option<ColourTaps<'a>>,
}

/// A learnt projection of (Y′, Cb, Cr) that a mark is tracked on instead of luma
/// (track/colour.rs): `offset + w · (Y′ 0..1, Cb, Cr −0.5..0.5)`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct ColourWeights {
    pub w: [f32; 3],
    pub offset: f32,
}

/// What a colour sample needs besides the luma.
#[derive(Debug, Clone, Copy)]
struct ColourTaps<'a> {
    chroma: Option<ChromaRef<'a>>,
    weights: ColourWeights,
    /// The frame's height (the width is the grid's).
    height: u32,
}

/// [`colour_one`] at every point of `pts` into `out` (same length). A plain loop: three
/// interpolations a point, on the few thousand points a frame's search reads.
fn colour_gather<T: Sample>(
    img: Image<'_, T>,
    pts: gather::Points<'_>,
    shift: Shift,
    c: ColourTaps<'_>,
    out: &mut [f32],
) {
    assert!(pts.idx.len() == out.len() && pts.fx.len() == out.len() && pts.fy.len() == out.len());
    for (k, o) in out.iter_mut().enumerate() {
        *o = colour_one(img, pts.idx[k], pts.fx[k], pts.fy[k], shift, c);
    }
}

/// The colour projection at one grid point moved by `shift`: luma as [`gather::one`] reads
/// it, chroma at the same point ([`ChromaRef::at_point`]), projected and clamped to 0..=1.
#[inline]
fn colour_one<T: Sample>(
    img: Image<'_, T>,
    i: u32,
    fx: f32,
    fy: f32,
    shift: Shift,
    c: ColourTaps<'_>,
) -> f32 {
    let y_luma = gather::one(img.d, img.w, i, fx, fy, shift) * img.scale;
    let (cb, cr) = match c.chroma {
        Some(ch) => {
            let p = (i as isize + shift.base) as usize;
            let x = (p % img.w) as f32 + fx + shift.fx;
            let y = (p / img.w) as f32 + fy + shift.fy;
            ch.at_point(x, y, img.w as u32, c.height)
        }
        None => (0.0, 0.0),
    };
    let ColourWeights { w, offset } = c.weights;
    (offset + w[0] * y_luma + w[1] * cb + w[2] * cr).clamp(0.0, 1.0)
}

/// The taps of every m-th bin of one ring ([`PolarGrid::lattice`]).
#[derive(Debug, Clone)]
pub(crate) struct LatticeTaps {
    idx: Vec<u32>,
    fx: Vec<f32>,
    fy: Vec<f32>,
    /// Smallest and largest of `idx`.
    range: (u32, u32),
}

impl LatticeTaps {
    /// Number of lattice points.
    pub fn len(&self) -> usize {
        self.idx.len()
    }

    fn points(&self) -> gather::Points<'_> {
        points(&self.idx, &self.fx, &self.fy)
    }
}

/// Taps as the gather takes them.
fn points<'a>(idx: &'a [u32], fx: &'a [f32], fy: &'a [f32]) -> gather::Points<'a> {
    gather::Points { idx, fx, fy }
}

/// The disc-to-screen map `M = R(φ)·diag(1, b/a)·R(−φ)` (identity without an ellipse).
fn disc_to_screen(mark: &RadialMark) -> [[f64; 2]; 2] {
    match mark.ellipse {
        None => [[1.0, 0.0], [0.0, 1.0]],
        Some(e) => {
            let (s, c) = e.major_deg.to_radians().sin_cos();
            let q = e.axis_ratio;
            [
                [c * c + q * s * s, (1.0 - q) * c * s],
                [(1.0 - q) * c * s, s * s + q * c * c],
            ]
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::decode::Frame;
    use crate::rig::{Ellipse, Spin};

    /// A 48×48 frame whose Y′, Cb and Cr are affine in position (4:2:0, centred siting:
    /// chroma sample (i, j) at luma (2i + 0.5, 2j + 0.5)), with integer values at every
    /// sample, so that bilinear interpolation reproduces the affine functions exactly
    /// inside the chroma samples' span.
    fn affine_colour_frame(siting: crate::decode::ChromaSiting) -> Frame {
        let x_of = |i: u32| {
            if siting == crate::decode::ChromaSiting::Centre {
                2.0 * f64::from(i) + 0.5
            } else {
                2.0 * f64::from(i)
            }
        };
        let y_of = |j: u32| 2.0 * f64::from(j) + 0.5;
        let luma = (0..48u32)
            .flat_map(|y| (0..48u32).map(move |x| (40 + 2 * x + y) as u8))
            .collect();
        let mut f = Frame::from_u8(0, 48, 48, luma);
        let plane = |g: &dyn Fn(f64, f64) -> f64| -> Vec<u8> {
            (0..24u32)
                .flat_map(|j| (0..24u32).map(move |i| (i, j)))
                .map(|(i, j)| {
                    let v = g(x_of(i), y_of(j));
                    assert!(v.fract() == 0.0 && (0.0..=255.0).contains(&v), "{v}");
                    v as u8
                })
                .collect()
        };
        f.chroma = Some(crate::decode::Chroma {
            width: 24,
            height: 24,
            cb: plane(&|x, y| 30.0 + 2.0 * x + 2.0 * (y - 0.5)),
            cr: plane(&|x, y| 220.0 - 2.0 * x - 2.0 * (y - 0.5)),
            siting,
        });
        f
    }

    /// A colour sample is the projection of Y′, Cb and Cr at the sample's own point: on a
    /// frame where all three are affine in position (so exact bilinear values are known in
    /// closed form), every sample of a grid moved by a fractional shift equals
    /// `offset + w · (Y′, Cb, Cr)` evaluated there, for both 4:2:0 sitings. A check against
    /// the closed form, not against the code's own arithmetic.
    #[test]
    fn a_colour_sample_projects_luma_and_chroma_at_the_same_point() {
        use crate::decode::ChromaSiting;
        let m = RadialMark {
            pivot: [24.0, 24.0],
            radius: [4.0, 18.0],
            tighten: Some(Spin::Cw),
            ellipse: None,
        };
        let g = PolarGrid::new(&m, 48, 48);
        let weights = ColourWeights {
            w: [0.5, 1.0, -0.7],
            offset: 0.3,
        };
        let shift = [0.3, -0.6];
        for (siting, x_off) in [(ChromaSiting::Centre, 0.5), (ChromaSiting::Left, 0.0)] {
            let f = affine_colour_frame(siting);
            let mut out = vec![0.0; g.offset.len()];
            g.sample(&g.prepare_with(f.view(), shift, Some(weights)), &mut out);
            for (k, o) in g.offset.iter().enumerate() {
                let x = 24.0 + f64::from(o[0]) + shift[0];
                let y = 24.0 + f64::from(o[1]) + shift[1];
                // Inside the span of chroma sample positions, where nothing is clamped.
                if !(x_off..=46.0 + x_off).contains(&x) || !(0.5..=46.5).contains(&y) {
                    continue;
                }
                let luma = (40.0 + 2.0 * x + y) / 255.0;
                let cb = (30.0 + 2.0 * x + 2.0 * (y - 0.5) - 128.0) / 255.0;
                let cr = (220.0 - 2.0 * x - 2.0 * (y - 0.5) - 128.0) / 255.0;
                let want = 0.3 + 0.5 * luma + cb - 0.7 * cr;
                assert!((0.0..=1.0).contains(&want));
                assert!(
                    (f64::from(out[k]) - want).abs() < 2e-5,
                    "{siting:?} ({x:.3}, {y:.3}): {} vs {want}",
                    out[k]
                );
            }
        }
    }

    fn mark(ellipse: Option<Ellipse>) -> RadialMark {
        RadialMark {
            pivot: [40.0, 30.0],
            radius: [10.0, 20.0],
            tighten: Some(Spin::Cw),
            ellipse,
        }
    }

    #[test]
    fn samples_a_linear_ramp_exactly() {
        // Bilinear interpolation reproduces a linear function exactly: value = x / 255.
        let (w, h) = (80u32, 60u32);
        let data: Vec<u8> = (0..h).flat_map(|_| (0..w).map(|x| x as u8)).collect();
        let frame = Frame::from_u8(0, w, h, data);
        let g = PolarGrid::new(&mark(None), w, h);
        let mut out = vec![0.0; g.rings * g.bins];
        g.sample(&g.prepare(frame.view(), [0.0, 0.0]), &mut out);
        for k in 0..g.rings {
            for j in (0..g.bins).step_by(17) {
                let a = g.step() * j as f64;
                let x = 40.0 + g.radius[k] * a.cos();
                assert!((f64::from(out[k * g.bins + j]) - x / 255.0).abs() < 1e-4);
            }
        }
        // A shift of +1.5 px in x reads 1.5 grey levels more.
        let mut shifted = vec![0.0; out.len()];
        g.sample(&g.prepare(frame.view(), [1.5, 0.0]), &mut shifted);
        for (a, b) in out.iter().zip(&shifted) {
            assert!((b - a - 1.5 / 255.0).abs() < 1e-4);
        }
    }

    #[test]
    fn a_lattice_samples_exactly_what_strided_spans_sample() {
        // A textured frame (a hash of the position), so any misplaced tap changes a value.
        let (w, h) = (80u32, 60u32);
        let data: Vec<u8> = (0..w * h)
            .map(|i| (i.wrapping_mul(2_654_435_761) >> 24) as u8)
            .collect();
        let frame = Frame::from_u8(0, w, h, data);
        let g = PolarGrid::new(&mark(None), w, h);
        let n = g.bins as i64;
        for shift in [[0.0, 0.0], [1.3, -0.7], [-2.5, 3.25]] {
            for (k, m) in [(0usize, 2usize), (3, 3), (g.rings - 1, 5)] {
                let lat = g.lattice(k, m);
                assert_eq!(lat.len(), g.bins.div_ceil(m));
                // A span inside the first turn, as the fine centres sample one.
                let (q0, q1) = (7usize, lat.len() - 3);
                let mut along = vec![f32::NAN; lat.len()];
                let frame = g.prepare(frame.view(), shift);
                g.sample_lattice(&lat, &frame, q0..q1 + 1, &mut along[q0..=q1]);
                let mut ring = vec![f32::NAN; g.rings * g.bins];
                let span = g.sample_span(&frame, k, (q0 * m) as i64, (q1 * m) as i64, m, &mut ring);
                assert!(span.1 - span.0 < n);
                for q in q0..=q1 {
                    let v = ring[k * g.bins + q * m];
                    assert_eq!(
                        along[q].to_bits(),
                        v.to_bits(),
                        "ring {k}, m {m}, bin {}",
                        q * m
                    );
                }
            }
        }
    }

    #[test]
    fn ellipse_map_keeps_major_axis_and_shrinks_minor() {
        let g = PolarGrid::new(
            &mark(Some(Ellipse {
                axis_ratio: 0.5,
                major_deg: 30.0,
            })),
            80,
            60,
        );
        let m = g.map;
        let (s, c) = 30f64.to_radians().sin_cos();
        let major = [m[0][0] * c + m[0][1] * s, m[1][0] * c + m[1][1] * s];
        assert!((major[0] - c).abs() < 1e-12 && (major[1] - s).abs() < 1e-12);
        let minor = [-s * m[0][0] + c * m[0][1], -s * m[1][0] + c * m[1][1]];
        assert!((minor[0] + 0.5 * s).abs() < 1e-12 && (minor[1] - 0.5 * c).abs() < 1e-12);
        // Along the axes, the disc angle and the screen angle agree.
        assert!((g.screen_angle(30f64.to_radians()) - 30f64.to_radians()).abs() < 1e-12);
        assert!((g.screen_angle(120f64.to_radians()) - 120f64.to_radians()).abs() < 1e-12);
    }
}
