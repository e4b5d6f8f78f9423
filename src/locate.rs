//! Finds the painted marks in a clip and drafts a rig: each stripe's pivot (where its lines
//! across frames meet), its annulus, its role from its motion, its tightening direction, and an
//! oblique disc's ellipse from the disc's outline where the outline is visible.
//!
//! # Method
//!
//! 1. **Stripes.** A painted stripe is a *ridge*: brighter (or darker) than the surface on
//!    *both* sides. Per pixel and for eight directions the response is
//!    `min(I(p) − I(p + d·n), I(p) − I(p − d·n))` with `d` = [`RIDGE_OFFSET_PX`]: a step edge
//!    (the hex nut's outline, a bracket's border) has one side equal to the centre and scores
//!    zero, and a round highlight is rejected afterwards because its component is not elongated.
//!    Components are grown by hysteresis and kept when long and thin (weighted second moments,
//!    Hu, IRE Trans. Information Theory, 1962).
//! 2. **Tracks.** Each first-frame stripe is followed frame by frame inside a window around
//!    its last position; its orientation is unwrapped modulo π.
//! 3. **Pivot.** A radial stripe's centre line passes through its pivot, so the pivot is the
//!    least-squares intersection of the track's lines: minimise Σ (nₜ·(p − cₜ))² over all
//!    frames (nₜ the line normal, cₜ the centroid). It is only defined when the stripe turned;
//!    below [`MIN_SPAN_DEG`] the pivot is not decided and a warning says so.
//! 4. **Roles.** A stripe that never turns is the fixed mark; of the turning stripes, the one
//!    with the most back-and-forth travel (total variation) is the drive end, the next the nut.
//! 5. **Tightening.** The drive end's fast steps (the blows) run the tightening way: the sign
//!    of Σ Δθ·|Δθ|² over the drive's frame steps. The nut end's net advance gives its own.
//! 6. **Ellipse.** Rays from the pivot find the disc's outline (the strongest luma step
//!    beyond the stripe); a centred conic `A x² + B xy + C y² = 1` chosen by consensus over
//!    fixed triples of those points, then fitted by trimmed least squares, gives the axes
//!    (eigenvalues) and the major-axis direction (eigenvector). It is used only when the fit
//!    is tight (RMS ≤ 1.2 % of the major axis); a hexagon does not fit.
//!
//! At most the first [`MAX_FRAMES`] frames are read.

use std::f64::consts::PI;
use std::path::Path;

use crate::decode::{self, Frame};
use crate::error::{Error, Result};
use crate::rig::{Ellipse, Mark, Marks, RIG_VERSION, RadialMark, Rig, Role, Spin};
use crate::warning::Warning;

/// Half the ridge test's span, px: stripes up to about `2 × (d − 1)` = 8 px wide are found.
pub const RIDGE_OFFSET_PX: i32 = 5;
/// Below this turn over the clip a stripe's pivot is not decided from its motion, degrees.
pub const MIN_SPAN_DEG: f64 = 4.0;
/// A stripe that turns less than this over the clip is taken as fixed, degrees (the jitter of
/// a short stripe's orientation under noise and flicker stays below it).
const STILL_DEG: f64 = 2.0;
/// Hysteresis thresholds of the ridge response (luma, 0..1).
const SEED: f32 = 0.06;
const GROW: f32 = 0.03;
/// A component keeps only pixels whose response is at least this fraction of its peak.
const CORE: f64 = 0.35;
/// A radial stripe's lines over the clip pass within this RMS distance of their
/// intersection, px; a track whose lines do not meet is not a radial stripe.
const MAX_LINE_RMS_PX: f64 = 1.5;
/// A stripe is at least this long, px, and this many times longer than wide.
const MIN_LENGTH_PX: f64 = 14.0;
const MIN_ELONGATION: f64 = 3.5;
/// Frames read at most (the first ones of the clip).
pub const MAX_FRAMES: u64 = 1500;
/// The annulus is the stripe's span trimmed by this much at the inner and outer ends, px
/// (as the project's exact rigs are drawn).
/// The ridge component reaches about 1.5 px past each painted end (the 3×3 smoothing), so
/// that is added to the trims.
const TRIM_INNER_PX: f64 = 4.0 + 1.5;
const TRIM_OUTER_PX: f64 = 2.0 + 1.5;

/// Options of [`locate`].
#[derive(Debug, Clone, Default)]
pub struct LocateOptions {
    /// The camera's capture rate, written into the draft rig as `capture_fps_hz`.
    pub fps_hz: Option<f64>,
}

/// How a mark's pivot was decided.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum PivotFrom {
    /// Intersection of the stripe's lines over the clip.
    Lines,
    /// Not decided from motion: placed at the stripe's end (fixed marks, or too little turn).
    StripeEnd,
}

/// One mark found in the clip.
#[derive(Debug, Clone, PartialEq)]
pub struct FoundMark {
    /// The role given to it (None: a stripe that was not used).
    pub role: Option<Role>,
    /// The drafted rig mark.
    pub mark: RadialMark,
    /// How the pivot was decided.
    pub pivot_from: PivotFrom,
    /// Net turn over the clip on screen, degrees (clockwise positive).
    pub net_deg: f64,
    /// Total back-and-forth travel over the clip, degrees.
    pub travel_deg: f64,
    /// True when the paint is darker than the surface around it.
    pub dark: bool,
}

/// What [`locate`] found.
#[derive(Debug, Clone)]
pub struct Located {
    /// The draft rig (no bar: the user fills it in).
    pub rig: Rig,
    /// Every stripe found, with its role.
    pub marks: Vec<FoundMark>,
    /// What could not be decided, or was decided with doubt.
    pub warnings: Vec<Warning>,
    /// The clip's first frame (for the preview).
    pub first: Frame,
    /// Frames read.
    pub frames_read: u64,
}

/// A luma image, 0..1, row-major.
struct Img {
    w: usize,
    h: usize,
    v: Vec<f32>,
}

impl Img {
    /// The frame, smoothed by a 3×3 box (noise down by 3 before the ridge test).
    fn from_frame(f: &Frame) -> Img {
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
    fn at(&self, x: i32, y: i32) -> f32 {
        let x = x.clamp(0, self.w as i32 - 1) as usize;
        let y = y.clamp(0, self.h as i32 - 1) as usize;
        self.v[y * self.w + x]
    }
    /// Bilinear sample at a sub-pixel position (clamped to the frame).
    fn sample(&self, x: f64, y: f64) -> f32 {
        let x = x.clamp(0.0, (self.w - 1) as f64);
        let y = y.clamp(0.0, (self.h - 1) as f64);
        let (x0, y0) = (x.floor() as i32, y.floor() as i32);
        let (fx, fy) = ((x - x0 as f64) as f32, (y - y0 as f64) as f32);
        let a = self.at(x0, y0) * (1.0 - fx) + self.at(x0 + 1, y0) * fx;
        let b = self.at(x0, y0 + 1) * (1.0 - fx) + self.at(x0 + 1, y0 + 1) * fx;
        a * (1.0 - fy) + b * fy
    }
}

/// A stripe seen in one frame.
#[derive(Debug, Clone, Copy)]
struct Seg {
    /// Weighted centroid, px.
    c: [f64; 2],
    /// Orientation of the long axis, radians in (−π/2, π/2].
    theta: f64,
    /// Extent along the long axis from the centroid: min and max projection, px.
    ext: [f64; 2],
    /// Long-axis length, px.
    length: f64,
    dark: bool,
}

impl Seg {
    fn dir(&self) -> [f64; 2] {
        [self.theta.cos(), self.theta.sin()]
    }
    fn ends(&self) -> [[f64; 2]; 2] {
        let u = self.dir();
        [
            [
                self.c[0] + self.ext[0] * u[0],
                self.c[1] + self.ext[0] * u[1],
            ],
            [
                self.c[0] + self.ext[1] * u[0],
                self.c[1] + self.ext[1] * u[1],
            ],
        ]
    }
}

/// The ridge test's eight directions, as integer offsets about `RIDGE_OFFSET_PX` long.
fn offsets() -> [(i32, i32); 8] {
    let d = RIDGE_OFFSET_PX as f64;
    let mut o = [(0, 0); 8];
    for (k, v) in o.iter_mut().enumerate() {
        let a = k as f64 * PI / 8.0;
        *v = ((d * a.cos()).round() as i32, (d * a.sin()).round() as i32);
    }
    o
}

/// Stripes inside the window `[x0, x1) × [y0, y1)` of `img`.
fn detect(img: &Img, win: [usize; 4]) -> Vec<Seg> {
    let [x0, x1, y0, y1] = win;
    let (ww, wh) = (x1 - x0, y1 - y0);
    if ww < 3 || wh < 3 {
        return Vec::new();
    }
    let offs = offsets();
    let mut out = Vec::new();
    for dark in [false, true] {
        let sgn = if dark { -1.0 } else { 1.0 };
        let mut r = vec![0f32; ww * wh];
        for y in y0..y1 {
            for x in x0..x1 {
                let c = sgn * img.at(x as i32, y as i32);
                let mut best = 0f32;
                for &(dx, dy) in &offs {
                    let a = sgn * img.at(x as i32 + dx, y as i32 + dy);
                    let b = sgn * img.at(x as i32 - dx, y as i32 - dy);
                    best = best.max((c - a).min(c - b));
                }
                r[(y - y0) * ww + (x - x0)] = best;
            }
        }
        // Hysteresis components (8-connected).
        let mut seen = vec![false; ww * wh];
        let mut stack = Vec::new();
        for s in 0..ww * wh {
            if seen[s] || r[s] < SEED {
                continue;
            }
            seen[s] = true;
            stack.push(s);
            let mut pts: Vec<(f64, f64, f64)> = Vec::new();
            while let Some(i) = stack.pop() {
                let (px, py) = (i % ww, i / ww);
                pts.push(((px + x0) as f64, (py + y0) as f64, f64::from(r[i])));
                for dy in -1i32..=1 {
                    for dx in -1i32..=1 {
                        let (nx, ny) = (px as i32 + dx, py as i32 + dy);
                        if nx < 0 || ny < 0 || nx >= ww as i32 || ny >= wh as i32 {
                            continue;
                        }
                        let j = ny as usize * ww + nx as usize;
                        if !seen[j] && r[j] >= GROW {
                            seen[j] = true;
                            stack.push(j);
                        }
                    }
                }
            }
            // Keep the component's strong core: a faint ridge that touches the stripe (a
            // smoothed bracket border, say) must not stretch it.
            let peak = pts.iter().map(|p| p.2).fold(0.0, f64::max);
            pts.retain(|p| p.2 >= CORE * peak);
            if pts.len() < 20 {
                continue;
            }
            if let Some(seg) = segment(&pts, dark) {
                out.push(centre_line(img, seg));
            }
        }
    }
    out
}

/// A component's centroid, orientation and extent; None unless long and thin.
fn segment(pts: &[(f64, f64, f64)], dark: bool) -> Option<Seg> {
    let sw: f64 = pts.iter().map(|p| p.2).sum();
    if sw <= 0.0 {
        return None;
    }
    let cx = pts.iter().map(|p| p.0 * p.2).sum::<f64>() / sw;
    let cy = pts.iter().map(|p| p.1 * p.2).sum::<f64>() / sw;
    let (mut sxx, mut sxy, mut syy) = (0.0, 0.0, 0.0);
    for p in pts {
        let (dx, dy) = (p.0 - cx, p.1 - cy);
        sxx += p.2 * dx * dx;
        sxy += p.2 * dx * dy;
        syy += p.2 * dy * dy;
    }
    let (sxx, sxy, syy) = (sxx / sw, sxy / sw, syy / sw);
    let theta = 0.5 * (2.0 * sxy).atan2(sxx - syy);
    let tr = sxx + syy;
    let disc = ((sxx - syy).powi(2) + 4.0 * sxy * sxy).sqrt();
    let minor = (0.5 * (tr - disc)).max(0.0);
    let (u0, u1) = (theta.cos(), theta.sin());
    let (mut lo, mut hi) = (f64::INFINITY, f64::NEG_INFINITY);
    for p in pts {
        let s = (p.0 - cx) * u0 + (p.1 - cy) * u1;
        lo = lo.min(s);
        hi = hi.max(s);
    }
    let length = hi - lo + 1.0;
    let width = (12.0 * minor).sqrt().max(1.0);
    if length < MIN_LENGTH_PX || length < MIN_ELONGATION * width {
        return None;
    }
    Some(Seg {
        c: [cx, cy],
        theta: wrap_half(theta),
        ext: [lo - 0.5, hi + 0.5],
        length,
        dark,
    })
}

/// Refines a stripe's centre line to sub-pixel: across the stripe, every pixel along it, the
/// centroid of the paint's contrast over the local surface (the lower of the two profile
/// ends) gives a centre point; a straight line fitted to those points by least squares gives
/// the centroid and orientation. The thresholded component alone is biased by its pixel mask.
fn centre_line(img: &Img, seg: Seg) -> Seg {
    let u = seg.dir();
    let nrm = [-u[1], u[0]];
    let sgn = if seg.dark { -1.0f32 } else { 1.0 };
    let half = f64::from(RIDGE_OFFSET_PX) + 1.0;
    let mut pts: Vec<(f64, f64)> = Vec::new();
    let mut s = seg.ext[0] + 3.0;
    while s <= seg.ext[1] - 3.0 {
        let base = [seg.c[0] + s * u[0], seg.c[1] + s * u[1]];
        let prof: Vec<(f64, f32)> = (0..=(4.0 * half) as i32)
            .map(|k| {
                let t = -half + 0.5 * f64::from(k);
                (
                    t,
                    sgn * img.sample(base[0] + t * nrm[0], base[1] + t * nrm[1]),
                )
            })
            .collect();
        let floor = prof[0].1.max(prof[prof.len() - 1].1);
        let (mut sw, mut st) = (0.0, 0.0);
        for (t, v) in &prof {
            let w = f64::from((v - floor).max(0.0));
            sw += w;
            st += w * t;
        }
        if sw > 0.0 {
            pts.push((s, st / sw));
        }
        s += 1.0;
    }
    if pts.len() < 6 {
        return seg;
    }
    let n = pts.len() as f64;
    let ms = pts.iter().map(|p| p.0).sum::<f64>() / n;
    let mt = pts.iter().map(|p| p.1).sum::<f64>() / n;
    let sst: f64 = pts.iter().map(|p| (p.0 - ms) * (p.1 - mt)).sum();
    let sss: f64 = pts.iter().map(|p| (p.0 - ms).powi(2)).sum();
    if sss <= 0.0 {
        return seg;
    }
    let slope = sst / sss;
    let c = [
        seg.c[0] + ms * u[0] + mt * nrm[0],
        seg.c[1] + ms * u[1] + mt * nrm[1],
    ];
    Seg {
        c,
        theta: wrap_half(seg.theta + slope.atan()),
        ext: [seg.ext[0] - ms, seg.ext[1] - ms],
        ..seg
    }
}

/// Wraps an orientation to (−π/2, π/2].
fn wrap_half(a: f64) -> f64 {
    let mut a = a % PI;
    if a <= -PI / 2.0 {
        a += PI;
    }
    if a > PI / 2.0 {
        a -= PI;
    }
    a
}

/// One stripe followed through the clip.
struct Track {
    first: Seg,
    last: Seg,
    /// Per frame: the stripe seen (None where it was not found), with its unwrapped orientation.
    seen: Vec<Option<(Seg, f64)>>,
    /// Unwrapped orientation of the last sighting.
    theta: f64,
}

impl Track {
    /// Looks for the stripe in a new frame, near where it was last seen.
    fn follow(&mut self, img: &Img) {
        let [a, b] = self.last.ends();
        let m = self.last.length * 0.35 + 8.0;
        let x0 = (a[0].min(b[0]) - m).floor().max(0.0) as usize;
        let x1 = ((a[0].max(b[0]) + m).ceil() as usize + 1).min(img.w);
        let y0 = (a[1].min(b[1]) - m).floor().max(0.0) as usize;
        let y1 = ((a[1].max(b[1]) + m).ceil() as usize + 1).min(img.h);
        let found = detect(img, [x0, x1.max(x0), y0, y1.max(y0)])
            .into_iter()
            .filter(|s| s.dark == self.last.dark && s.length > 0.5 * self.first.length)
            .map(|s| {
                let dth = wrap_half(s.theta - self.last.theta).abs();
                let dc =
                    ((s.c[0] - self.last.c[0]).powi(2) + (s.c[1] - self.last.c[1]).powi(2)).sqrt();
                (s, dc + dth.to_degrees() * 0.5, dth, dc)
            })
            .filter(|(_, _, dth, dc)| *dth < 35f64.to_radians() && *dc < 0.6 * self.last.length)
            .min_by(|x, y| x.1.total_cmp(&y.1));
        match found {
            Some((s, _, _, _)) => {
                let th = self.theta + wrap_half(s.theta - self.last.theta);
                self.theta = th;
                self.last = s;
                self.seen.push(Some((s, th)));
            }
            None => self.seen.push(None),
        }
    }

    fn angles(&self) -> Vec<f64> {
        self.seen.iter().flatten().map(|s| s.1).collect()
    }
    /// Back-swing: total variation of the orientation smoothed over five frames (so that
    /// noise does not count) minus the net turn, degrees. The drive end swings back after
    /// every blow; the nut end only advances.
    fn back_swing(&self) -> f64 {
        let a = self.angles();
        if a.len() < 6 {
            return 0.0;
        }
        let sm: Vec<f64> = a.windows(5).map(|w| w.iter().sum::<f64>() / 5.0).collect();
        let tv: f64 = sm.windows(2).map(|w| (w[1] - w[0]).abs()).sum();
        let net = (sm[sm.len() - 1] - sm[0]).abs();
        (tv - net).max(0.0).to_degrees()
    }
    /// Net turn and total variation, degrees.
    fn motion(&self) -> (f64, f64) {
        let a = self.angles();
        let net = a.last().copied().unwrap_or(0.0) - a.first().copied().unwrap_or(0.0);
        let tv: f64 = a.windows(2).map(|w| (w[1] - w[0]).abs()).sum();
        (net.to_degrees(), tv.to_degrees())
    }
    fn span_deg(&self) -> f64 {
        let a = self.angles();
        let lo = a.iter().copied().fold(f64::INFINITY, f64::min);
        let hi = a.iter().copied().fold(f64::NEG_INFINITY, f64::max);
        (hi - lo).max(0.0).to_degrees()
    }
    /// Least-squares intersection of the stripe's lines over the clip.
    fn pivot(&self) -> Option<[f64; 2]> {
        let (mut a11, mut a12, mut a22, mut b1, mut b2) = (0.0, 0.0, 0.0, 0.0, 0.0);
        for (s, _) in self.seen.iter().flatten() {
            let n = [-s.theta.sin(), s.theta.cos()];
            let d = n[0] * s.c[0] + n[1] * s.c[1];
            a11 += n[0] * n[0];
            a12 += n[0] * n[1];
            a22 += n[1] * n[1];
            b1 += n[0] * d;
            b2 += n[1] * d;
        }
        let det = a11 * a22 - a12 * a12;
        if det.abs() < 1e-12 {
            return None;
        }
        Some([(a22 * b1 - a12 * b2) / det, (a11 * b2 - a12 * b1) / det])
    }
    /// RMS distance of the track's lines from `p`, px.
    fn line_rms(&self, p: [f64; 2]) -> f64 {
        let mut s2 = 0.0;
        let mut n = 0usize;
        for (s, _) in self.seen.iter().flatten() {
            let nn = [-s.theta.sin(), s.theta.cos()];
            s2 += (nn[0] * (p[0] - s.c[0]) + nn[1] * (p[1] - s.c[1])).powi(2);
            n += 1;
        }
        (s2 / n.max(1) as f64).sqrt()
    }
    /// True when the track looks like a radial stripe: its lines meet at one point, and that
    /// point lies on the stripe's line beyond (or at) one of its ends, not in its middle.
    fn is_radial(&self) -> bool {
        let Some(p) = self.pivot() else { return false };
        if self.line_rms(p) > MAX_LINE_RMS_PX {
            return false;
        }
        let s = &self.first;
        let u = s.dir();
        let along = (p[0] - s.c[0]) * u[0] + (p[1] - s.c[1]) * u[1];
        let q = 0.25 * (s.ext[1] - s.ext[0]);
        let outside = along <= s.ext[0] + q || along >= s.ext[1] - q;
        let near = along >= s.ext[0] - 1.5 * s.length && along <= s.ext[1] + 1.5 * s.length;
        outside && near
    }
    /// The stripe's screen length at the 90th over the 10th percentile over the clip (a
    /// disc seen at an angle foreshortens the stripe as it turns).
    fn length_ratio(&self) -> f64 {
        let mut l: Vec<f64> = self.seen.iter().flatten().map(|s| s.0.length).collect();
        if l.len() < 10 {
            return 1.0;
        }
        l.sort_by(f64::total_cmp);
        let lo = l[l.len() / 10];
        let hi = l[l.len() * 9 / 10];
        if lo > 0.0 { hi / lo } else { 1.0 }
    }
    /// Σ Δθ·|Δθ|² over the frame steps: its sign is the direction of the fastest steps.
    fn sign_steps(&self) -> f64 {
        let a = self.angles();
        a.windows(2)
            .map(|w| {
                let d = w[1] - w[0];
                d * d.abs() * d.abs()
            })
            .sum()
    }
}

/// Finds the marks in the clip at `clip` and drafts a rig.
///
/// # Errors
/// [`Error::Input`]/[`Error::Decode`] when the clip cannot be read; [`Error::Mark`] naming the
/// role when fewer than two turning stripes are found (the drive and nut ends cannot be drafted).
pub fn locate(clip: &Path, opts: &LocateOptions) -> Result<Located> {
    let mut source = decode::open(clip)?;
    let mut frame = Frame::empty();
    if !source.read_into(&mut frame)? {
        return Err(Error::input(clip, "the clip has no frames"));
    }
    let first = frame.clone();
    let mut count = 1u64;
    let next = move || -> Result<Option<Frame>> {
        if count >= MAX_FRAMES || !source.read_into(&mut frame)? {
            return Ok(None);
        }
        count += 1;
        Ok(Some(frame.clone()))
    };
    locate_stream(clip, first, next, opts)
}

/// As [`locate`], on frames already in memory (first frame first).
///
/// # Errors
/// As [`locate`].
pub fn locate_frames(clip: &Path, frames: &[Frame], opts: &LocateOptions) -> Result<Located> {
    let Some(first) = frames.first() else {
        return Err(Error::input(clip, "the clip has no frames"));
    };
    let mut rest = frames[1..].iter().take(MAX_FRAMES as usize - 1);
    locate_stream(clip, first.clone(), || Ok(rest.next().cloned()), opts)
}

/// The work of [`locate`]: the first frame, then the others one at a time.
fn locate_stream(
    clip: &Path,
    first: Frame,
    mut next: impl FnMut() -> Result<Option<Frame>>,
    opts: &LocateOptions,
) -> Result<Located> {
    let first = &first;
    if first.width < 16 || first.height < 16 {
        return Err(Error::input(
            clip,
            format!(
                "the {}x{} frame is too small to hold a mark",
                first.width, first.height
            ),
        ));
    }
    let img0 = Img::from_frame(first);
    let mut tracks: Vec<Track> = detect(&img0, [0, img0.w, 0, img0.h])
        .into_iter()
        .map(|s| Track {
            first: s,
            last: s,
            seen: vec![Some((s, s.theta))],
            theta: s.theta,
        })
        .collect();
    let mut warnings = Vec::new();
    let mut n = 1usize;
    while let Some(f) = next()? {
        let f = &f;
        n += 1;
        if (f.width, f.height) != (first.width, first.height) {
            return Err(Error::input(
                clip,
                format!(
                    "frame {} is {}x{} but the clip started at {}x{}; re-encode the clip at one frame size",
                    f.index, f.width, f.height, first.width, first.height
                ),
            ));
        }
        let img = Img::from_frame(f);
        for t in tracks.iter_mut() {
            t.follow(&img);
        }
    }
    // A stripe seen in under half the frames is not a mark we can rely on.
    tracks.retain(|t| t.seen.iter().flatten().count() * 2 >= n);

    // Moving stripes, most travel first; still ones.
    let mut moving: Vec<&Track> = Vec::new();
    let mut still: Vec<&Track> = Vec::new();
    for t in &tracks {
        let span = t.span_deg();
        if span < STILL_DEG {
            still.push(t);
        } else if span < MIN_SPAN_DEG || t.is_radial() {
            moving.push(t);
        }
    }
    // The two longest turning stripes are the drive and nut marks (painted stripes are long;
    // a sliver between two parts that happens to turn is short); of the two, the one that
    // swings back more is the drive end.
    moving.sort_by(|a, b| b.first.length.total_cmp(&a.first.length));
    if moving.len() >= 2 && moving[1].back_swing() > moving[0].back_swing() {
        moving.swap(0, 1);
    }
    if moving.len() < 2 {
        return Err(Error::Mark {
            mark: if moving.is_empty() { "drive" } else { "nut" }.into(),
            reason: format!(
                "found {} turning stripe(s) in {} frame(s) of {}; need the drive and the nut stripe: use a clip with at least one blow, paint 3-8 px wide stripes that contrast with the surface, or write the rig by hand",
                moving.len(),
                n,
                clip.display()
            ),
        });
    }
    if moving.len() > 2 {
        warnings.push(unsure(
            "roles",
            format!(
                "{} turning stripes found; the two longest were taken as drive and nut, check the preview",
                moving.len()
            ),
        ));
    }
    let nm = moving[1].motion();
    let (db, nb) = (moving[0].back_swing(), moving[1].back_swing());
    if db < 2.0 * nb.max(0.25) {
        warnings.push(unsure(
            "drive/nut",
            format!(
                "the two turning stripes swing back alike ({db:.1}° and {nb:.1}° over the clip); the one that swings back more was called the drive end, swap \"drive\" and \"nut\" if the preview shows otherwise"
            ),
        ));
    }

    // Tightening: the drive's fast steps.
    let drive_steps = moving[0].sign_steps();
    let drive_spin = if drive_steps >= 0.0 {
        Spin::Cw
    } else {
        Spin::Ccw
    };
    let nut_spin = if nm.0.abs() >= 0.5 {
        if nm.0 > 0.0 { Spin::Cw } else { Spin::Ccw }
    } else {
        warnings.push(unsure(
            "nut tighten",
            format!(
                "the nut stripe advanced only {:.2}° over the clip; its tightening direction was copied from the drive end",
                nm.0
            ),
        ));
        drive_spin
    };
    if nm.0.abs() >= 0.5 && nut_spin != drive_spin {
        warnings.push(unsure(
            "tighten",
            "the drive end's blows and the nut's advance turn opposite ways on screen; check each mark's \"tighten\" against the preview".to_string(),
        ));
    }

    let mut marks = Vec::new();
    let drive = radial_from(
        moving[0],
        Role::Drive,
        Some(drive_spin),
        &img0,
        &mut warnings,
    );
    let nut = radial_from(moving[1], Role::Nut, Some(nut_spin), &img0, &mut warnings);
    marks.push(drive.clone());
    marks.push(nut.clone());
    for t in moving.iter().skip(2) {
        marks.push(FoundMark {
            role: None,
            ..radial_from(t, Role::Nut, None, &img0, &mut Vec::new())
        });
    }
    // The fixed mark: the longest still stripe.
    still.sort_by(|a, b| b.first.length.total_cmp(&a.first.length));
    let fixed = still.first().map(|t| fixed_from(t));
    if still.len() > 1 {
        warnings.push(unsure(
            "fixed",
            format!(
                "{} still stripes found; the longest was taken as the fixed mark",
                still.len()
            ),
        ));
    }
    if fixed.is_none() {
        warnings.push(unsure(
            "fixed",
            "no still stripe found, so the draft has no fixed mark and camera shake will not be corrected; paint a stripe on something that does not move".to_string(),
        ));
    }
    if let Some(f) = &fixed {
        marks.push(f.clone());
    }
    for t in still.iter().skip(1) {
        marks.push(FoundMark {
            role: None,
            ..fixed_from(t)
        });
    }
    let rig = Rig {
        rig_version: RIG_VERSION,
        capture_fps_hz: opts.fps_hz,
        marks: Marks {
            drive: Mark::Radial(drive.mark),
            nut: Mark::Radial(nut.mark),
            fixed: fixed.map(|f| Mark::Radial(f.mark)),
        },
        bar: None,
    };
    Ok(Located {
        rig,
        marks,
        warnings,
        first: first.clone(),
        frames_read: n as u64,
    })
}

fn unsure(item: &str, reason: String) -> Warning {
    Warning::LocateUnsure {
        item: item.into(),
        reason,
    }
}

/// The still stripe as a fixed mark: pivot at its first end, annulus along it.
fn fixed_from(t: &Track) -> FoundMark {
    let s = t.first;
    let [a, _] = s.ends();
    let u = s.dir();
    // The painted end lies about 1.5 px inside the component's end (the 3×3 smoothing).
    let pivot = [a[0] + 1.5 * u[0], a[1] + 1.5 * u[1]];
    let len = s.ext[1] - s.ext[0] - 3.0;
    let inner = 4.0f64.min(0.25 * len);
    FoundMark {
        role: Some(Role::Fixed),
        mark: RadialMark {
            pivot: round2(pivot),
            radius: [round1(inner), round1((len - 2.0).max(inner + 2.0))],
            tighten: None,
            ellipse: None,
        },
        pivot_from: PivotFrom::StripeEnd,
        net_deg: 0.0,
        travel_deg: t.motion().1,
        dark: s.dark,
    }
}

/// A turning stripe as a radial mark.
fn radial_from(
    t: &Track,
    role: Role,
    tighten: Option<Spin>,
    img: &Img,
    warnings: &mut Vec<Warning>,
) -> FoundMark {
    let s = t.first;
    let span = t.span_deg();
    let (pivot, from) = match t.pivot() {
        Some(p) if span >= MIN_SPAN_DEG => (p, PivotFrom::Lines),
        _ => {
            warnings.push(unsure(
                &format!("{} pivot", role.name()),
                format!(
                    "the {} stripe turned only {span:.1}° over the clip, too little to place its pivot; it was put at the stripe's end nearer the frame centre: read the true centre of rotation off the preview",
                    role.name()
                ),
            ));
            let [a, b] = s.ends();
            let (cx, cy) = (img.w as f64 / 2.0, img.h as f64 / 2.0);
            let da = (a[0] - cx).hypot(a[1] - cy);
            let db = (b[0] - cx).hypot(b[1] - cy);
            (if da < db { a } else { b }, PivotFrom::StripeEnd)
        }
    };
    let ellipse = if from == PivotFrom::Lines {
        outline_ellipse(img, pivot, &s)
    } else {
        None
    };
    let lr = t.length_ratio();
    if ellipse.is_none() && lr > 1.03 {
        warnings.push(unsure(
            &format!("{} ellipse", role.name()),
            format!(
                "the {} stripe's length on screen changes by {:.0} % as it turns, a sign of a disc seen at an angle, but the disc's outline is not clear enough to measure; if the disc is tilted, add \"ellipse\" by hand",
                role.name(),
                100.0 * (lr - 1.0)
            ),
        ));
    }
    // Annulus: the stripe's end radii in the disc plane.
    let to_disc = |p: [f64; 2]| -> f64 {
        let (dx, dy) = (p[0] - pivot[0], p[1] - pivot[1]);
        match ellipse {
            None => dx.hypot(dy),
            Some(e) => {
                let phi = e.major_deg.to_radians();
                let u = dx * phi.cos() + dy * phi.sin();
                let v = (-dx * phi.sin() + dy * phi.cos()) / e.axis_ratio;
                u.hypot(v)
            }
        }
    };
    let [a, b] = s.ends();
    let (ra, rb) = (to_disc(a), to_disc(b));
    let (r_in, r_out) = (ra.min(rb), ra.max(rb));
    let inner = r_in + TRIM_INNER_PX;
    let outer = (r_out - TRIM_OUTER_PX).max(inner + 4.0);
    let (net, tv) = t.motion();
    FoundMark {
        role: Some(role),
        mark: RadialMark {
            pivot: round2(pivot),
            radius: [round1(inner), round1(outer)],
            tighten,
            ellipse,
        },
        pivot_from: from,
        net_deg: net,
        travel_deg: tv,
        dark: s.dark,
    }
}

fn round1(v: f64) -> f64 {
    (v * 10.0).round() / 10.0
}
fn round2(p: [f64; 2]) -> [f64; 2] {
    [
        (p[0] * 100.0).round() / 100.0,
        (p[1] * 100.0).round() / 100.0,
    ]
}

/// Smallest luma step (over 2 px) taken as a point of the disc's outline.
const OUTLINE_MIN_STEP: f32 = 0.012;
/// Below this axis ratio the outline counts as an ellipse; above, as a circle.
const CIRCLE_RATIO: f64 = 0.97;

/// The disc's outline about `pivot` as an ellipse, when it is visible and fits tightly.
fn outline_ellipse(img: &Img, pivot: [f64; 2], s: &Seg) -> Option<Ellipse> {
    let [a, b] = s.ends();
    let reach = (a[0] - pivot[0])
        .hypot(a[1] - pivot[1])
        .max((b[0] - pivot[0]).hypot(b[1] - pivot[1]));
    let stripe_dir = (s.c[1] - pivot[1]).atan2(s.c[0] - pivot[0]);
    let mut pts = Vec::new();
    let rays = 180;
    for k in 0..rays {
        let al = k as f64 * 2.0 * PI / rays as f64;
        let off = ((al - stripe_dir + PI).rem_euclid(2.0 * PI) - PI).abs();
        if off < 12f64.to_radians() {
            continue;
        }
        let (c, sn) = (al.cos(), al.sin());
        let (r0, r1) = (0.4 * reach, 2.2 * reach);
        let step = 0.25;
        let grad = |r: f64| -> Option<f32> {
            let (x, y) = (pivot[0] + r * c, pivot[1] + r * sn);
            if x < 1.0 || y < 1.0 || x > (img.w - 2) as f64 || y > (img.h - 2) as f64 {
                return None;
            }
            Some((img.sample(x + c, y + sn) - img.sample(x - c, y - sn)).abs())
        };
        let mut best = (0.0f32, 0.0f64);
        let mut r = r0;
        while r < r1 {
            let Some(g) = grad(r) else { break };
            if g > best.0 {
                best = (g, r);
            }
            r += step;
        }
        if best.0 > OUTLINE_MIN_STEP {
            // Sub-sample peak: a parabola through the gradient at the peak and its neighbours.
            let rb = best.1;
            let mut re = rb;
            if let (Some(gm), Some(gp)) = (grad(rb - step), grad(rb + step)) {
                let den = f64::from(gm - 2.0 * best.0 + gp);
                if den < 0.0 {
                    re = rb + 0.5 * step * f64::from(gm - gp) / den;
                }
            }
            pts.push([re * c, re * sn]);
        }
    }
    if pts.len() < rays / 4 {
        return None;
    }
    // Consensus first (other parts' edges are caught by some rays): the centred conic
    // through three of the points that most points agree with (within 1 px along their ray),
    // over a fixed set of triples (RANSAC, Fischler & Bolles 1981, from memory); then
    // trimmed least squares on those points.
    let resid = |sol: &[f64; 3], p: &[f64; 2]| -> f64 {
        let r = p[0].hypot(p[1]);
        let (c, sn) = (p[0] / r, p[1] / r);
        let qv = sol[0] * c * c + sol[1] * c * sn + sol[2] * sn * sn;
        if qv > 0.0 {
            (r - 1.0 / qv.sqrt()).abs()
        } else {
            f64::INFINITY
        }
    };
    let feat = |p: &[f64; 2]| [p[0] * p[0], p[0] * p[1], p[1] * p[1]];
    let mut seed = 0x9e37_79b9_7f4a_7c15_u64;
    let mut pick = |n: usize| {
        seed ^= seed << 13;
        seed ^= seed >> 7;
        seed ^= seed << 17;
        (seed % n as u64) as usize
    };
    let mut keep: Vec<bool> = vec![true; pts.len()];
    let mut best_count = 0;
    for _ in 0..400 {
        let (i, j, k) = (pick(pts.len()), pick(pts.len()), pick(pts.len()));
        if i == j || j == k || i == k {
            continue;
        }
        let m = [feat(&pts[i]), feat(&pts[j]), feat(&pts[k])];
        let Some(sol) = solve3(m, [1.0, 1.0, 1.0]) else {
            continue;
        };
        let count = pts.iter().filter(|p| resid(&sol, p) < 1.0).count();
        if count > best_count {
            best_count = count;
            for (kp, p) in keep.iter_mut().zip(&pts) {
                *kp = resid(&sol, p) < 1.0;
            }
        }
    }
    if best_count < rays / 4 {
        return None;
    }
    let mut q = None;
    for _ in 0..4 {
        let mut m = [[0.0f64; 3]; 3];
        let mut v = [0.0f64; 3];
        for (p, k) in pts.iter().zip(&keep) {
            if !k {
                continue;
            }
            let f = [p[0] * p[0], p[0] * p[1], p[1] * p[1]];
            for i in 0..3 {
                for j in 0..3 {
                    m[i][j] += f[i] * f[j];
                }
                v[i] += f[i];
            }
        }
        let sol = solve3(m, v)?;
        // Radial residual of each point: r_fit = 1/sqrt(f·sol) along its direction.
        let res: Vec<f64> = pts
            .iter()
            .map(|p| {
                let r = p[0].hypot(p[1]);
                let (c, sn) = (p[0] / r, p[1] / r);
                let qv = sol[0] * c * c + sol[1] * c * sn + sol[2] * sn * sn;
                if qv > 0.0 {
                    (r - 1.0 / qv.sqrt()).abs()
                } else {
                    f64::INFINITY
                }
            })
            .collect();
        let mut sorted: Vec<f64> = res
            .iter()
            .zip(&keep)
            .filter(|(_, k)| **k)
            .map(|(r, _)| *r)
            .collect();
        if sorted.is_empty() {
            return None;
        }
        sorted.sort_by(f64::total_cmp);
        let med = sorted[sorted.len() / 2];
        let cut = (2.5 * med).max(0.75);
        for (k, r) in keep.iter_mut().zip(&res) {
            *k = *r <= cut;
        }
        q = Some((sol, res));
    }
    let (sol, res) = q?;
    let inl: Vec<f64> = res
        .iter()
        .zip(&keep)
        .filter(|(_, k)| **k)
        .map(|(r, _)| *r)
        .collect();
    if inl.len() < rays / 4 {
        return None;
    }
    let rms = (inl.iter().map(|r| r * r).sum::<f64>() / inl.len() as f64).sqrt();
    // Eigen-decomposition of [[A, B/2], [B/2, C]].
    let (aa, bb, cc) = (sol[0], sol[1] / 2.0, sol[2]);
    let tr = aa + cc;
    let d = ((aa - cc).powi(2) + 4.0 * bb * bb).sqrt();
    let (l1, l2) = (0.5 * (tr - d), 0.5 * (tr + d));
    if l1 <= 0.0 {
        return None;
    }
    let major = 1.0 / l1.sqrt();
    let minor = 1.0 / l2.sqrt();
    if rms > 0.012 * major || major < reach * 0.9 {
        return None;
    }
    let ratio = minor / major;
    if ratio >= CIRCLE_RATIO {
        return None;
    }
    // Eigenvector of the smaller eigenvalue: the major axis.
    let phi = 0.5 * (2.0 * bb).atan2(aa - cc) + PI / 2.0;
    let mut deg = phi.to_degrees().rem_euclid(180.0);
    if deg > 90.0 {
        deg -= 180.0;
    }
    Some(Ellipse {
        axis_ratio: (ratio * 1000.0).round() / 1000.0,
        major_deg: (deg * 10.0).round() / 10.0,
    })
}

/// Solves a 3×3 linear system by Cramer's rule; None when singular.
fn solve3(m: [[f64; 3]; 3], v: [f64; 3]) -> Option<[f64; 3]> {
    let det = |m: &[[f64; 3]; 3]| {
        m[0][0] * (m[1][1] * m[2][2] - m[1][2] * m[2][1])
            - m[0][1] * (m[1][0] * m[2][2] - m[1][2] * m[2][0])
            + m[0][2] * (m[1][0] * m[2][1] - m[1][1] * m[2][0])
    };
    let d = det(&m);
    if d.abs() < 1e-300 || !d.is_finite() {
        return None;
    }
    let mut out = [0.0; 3];
    for (k, o) in out.iter_mut().enumerate() {
        let mut mk = m;
        for i in 0..3 {
            mk[i][k] = v[i];
        }
        *o = det(&mk) / d;
    }
    Some(out)
}

/// Writes the preview: the first frame with every mark's pivot, annulus (both rims, through
/// the ellipse on an oblique disc), its first-frame stripe line and a label with its role.
///
/// # Errors
/// [`Error::Output`] naming `path` when the PNG cannot be written.
pub fn write_preview(found: &Located, path: &Path) -> Result<()> {
    use crate::report::overlay::{
        DRIVE, FIXED, NUT, View, disc_point, font, label, thick_line, to_rgb,
    };
    let font = font()?;
    let s = crate::report::overlay::scale_for(found.first.width);
    let mut img = to_rgb(&found.first, s);
    let view = View { s: s as f32 };
    let grey = image::Rgb([200, 200, 200]);
    for m in &found.marks {
        let colour = match m.role {
            Some(Role::Drive) => DRIVE,
            Some(Role::Nut) => NUT,
            Some(Role::Fixed) => FIXED,
            None => grey,
        };
        let r = &m.mark;
        for rad in r.radius {
            let steps = 144;
            for k in 0..steps {
                let a0 = k as f64 * 2.0 * PI / steps as f64;
                let a1 = (k + 1) as f64 * 2.0 * PI / steps as f64;
                let p0 = disc_point(r.pivot, rad, a0, r.ellipse.as_ref());
                let p1 = disc_point(r.pivot, rad, a1, r.ellipse.as_ref());
                thick_line(&mut img, view.p(p0.0, p0.1), view.p(p1.0, p1.1), colour, 2);
            }
        }
        let c = view.p(r.pivot[0], r.pivot[1]);
        let arm = 6.0 * s as f32;
        thick_line(&mut img, (c.0 - arm, c.1), (c.0 + arm, c.1), colour, 2);
        thick_line(&mut img, (c.0, c.1 - arm), (c.0, c.1 + arm), colour, 2);
        let name = match m.role {
            Some(role) => role.name().to_string(),
            None => "unused stripe".to_string(),
        };
        let mut text = name;
        if let Some(t) = r.tighten {
            text.push_str(match t {
                Spin::Cw => " (tightens cw)",
                Spin::Ccw => " (tightens ccw)",
            });
        }
        if m.pivot_from == PivotFrom::StripeEnd && m.role != Some(Role::Fixed) {
            text.push_str(" pivot?");
        }
        if let Some(e) = r.ellipse {
            text.push_str(&format!(" b/a {:.2}", e.axis_ratio));
        }
        let top = disc_point(r.pivot, r.radius[1], -PI / 2.0, r.ellipse.as_ref());
        let (lx, ly) = view.p(r.pivot[0], top.1);
        label(
            &mut img,
            &font,
            lx as i32 - 30 * s as i32,
            ly as i32 - 14 * s as i32,
            7.0 * s as f32,
            &text,
        );
    }
    crate::report::rulers::draw_pixel_rulers(&mut img, s, &font);
    img.save(path).map_err(|e| Error::Output {
        path: path.to_path_buf(),
        reason: format!(
            "could not write the preview PNG: {e}; check the folder exists and is writable"
        ),
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn img(w: usize, h: usize, f: impl Fn(f64, f64) -> f32) -> Img {
        let mut v = Vec::with_capacity(w * h);
        for y in 0..h {
            for x in 0..w {
                v.push(f(x as f64, y as f64));
            }
        }
        Img { w, h, v }
    }

    #[test]
    fn a_stripe_is_found_but_a_step_edge_and_a_round_highlight_are_not() {
        // A 5 px bright stripe at 30° through (60, 60), a vertical step edge at x = 100 and a
        // Gaussian highlight (σ 9 px, peak 0.4) at (40, 100): only the stripe is a stripe.
        let (c, s) = (30f64.to_radians().cos(), 30f64.to_radians().sin());
        let im = img(140, 140, |x, y| {
            let mut v = if x >= 100.0 { 0.6 } else { 0.15 };
            let (dx, dy) = (x - 60.0, y - 60.0);
            let along = dx * c + dy * s;
            let across = -dx * s + dy * c;
            if across.abs() <= 2.5 && along.abs() <= 25.0 && x < 100.0 {
                v = 0.85;
            }
            let g = ((x - 40.0).powi(2) + (y - 110.0).powi(2)) / (2.0 * 81.0);
            v + 0.4 * (-g).exp() as f32
        });
        let segs = detect(&im, [0, 140, 0, 140]);
        assert_eq!(segs.len(), 1, "{segs:?}");
        let sg = centre_line(&im, segs[0]);
        assert!(
            (sg.theta.to_degrees() - 30.0).abs() < 0.5,
            "{:.2}°",
            sg.theta.to_degrees()
        );
        let off = -(sg.c[0] - 60.0) * s + (sg.c[1] - 60.0) * c;
        assert!(off.abs() < 0.2, "line off by {off:.3} px");
    }

    #[test]
    fn lines_turning_about_a_point_meet_there() {
        let p = [50.3, 40.7];
        let seen = (0..20)
            .map(|k| {
                let a = (10.0 + k as f64).to_radians();
                let c = [p[0] + 30.0 * a.cos(), p[1] + 30.0 * a.sin()];
                let s = Seg {
                    c,
                    theta: wrap_half(a),
                    ext: [-20.0, 20.0],
                    length: 40.0,
                    dark: false,
                };
                Some((s, a))
            })
            .collect::<Vec<_>>();
        let first = seen[0].unwrap().0;
        let t = Track {
            first,
            last: first,
            seen,
            theta: 0.0,
        };
        let q = t.pivot().unwrap();
        assert!((q[0] - p[0]).hypot(q[1] - p[1]) < 1e-6);
        assert!(t.line_rms(q) < 1e-6);
        // The pivot lies 10 px beyond the stripe's inner end: a radial stripe.
        assert!(t.is_radial());
        assert!((t.span_deg() - 19.0).abs() < 1e-9);
    }

    #[test]
    fn an_elliptic_outline_gives_its_axes_and_a_hexagon_does_not_fit() {
        // Outline of a disc of radius 60 seen at b/a = 0.55, major axis at 25°: bright inside.
        let (ratio, phi) = (0.55f64, 25f64.to_radians());
        let inside = |x: f64, y: f64| {
            let (dx, dy) = (x - 80.0, y - 80.0);
            let u = dx * phi.cos() + dy * phi.sin();
            let v = (-dx * phi.sin() + dy * phi.cos()) / ratio;
            u.hypot(v) < 60.0
        };
        let im = img(160, 160, |x, y| {
            // 4×4 supersampled edge.
            let mut a = 0.0;
            for j in 0..4 {
                for i in 0..4 {
                    if inside(x - 0.375 + 0.25 * i as f64, y - 0.375 + 0.25 * j as f64) {
                        a += 1.0;
                    }
                }
            }
            0.1 + 0.4 * a / 16.0
        });
        let stripe = Seg {
            c: [80.0 + 30.0 * phi.cos(), 80.0 + 30.0 * phi.sin()],
            theta: phi,
            ext: [-25.0, 25.0],
            length: 50.0,
            dark: false,
        };
        let e = outline_ellipse(&im, [80.0, 80.0], &stripe).expect("ellipse");
        assert!((e.axis_ratio - ratio).abs() < 0.01, "{e:?}");
        assert!((e.major_deg - 25.0).abs() < 1.0, "{e:?}");

        // A hexagon (apothem 55) about the same centre is not taken for an ellipse.
        let hex = img(160, 160, |x, y| {
            let (dx, dy) = (x - 80.0, y - 80.0);
            let d = (0..3)
                .map(|k| {
                    let a = (k as f64 * 60.0 + 10.0).to_radians();
                    (dx * a.cos() + dy * a.sin()).abs()
                })
                .fold(0.0, f64::max);
            if d < 55.0 { 0.5 } else { 0.1 }
        });
        assert_eq!(outline_ellipse(&hex, [80.0, 80.0], &stripe), None);
    }

    #[test]
    fn orientations_wrap_to_a_half_turn() {
        for a in [-3.0, -1.6, 0.0, 1.6, 3.0, 7.0] {
            let w = wrap_half(a);
            assert!(w > -PI / 2.0 - 1e-12 && w <= PI / 2.0 + 1e-12);
            assert!(((a - w) / PI - ((a - w) / PI).round()).abs() < 1e-9);
        }
    }
}
