//! Frames the camera or its encoder made rather than captured: exact or near-exact repeats
//! (an encoder repeating a frame the sensor dropped) and blends or interpolations of their
//! neighbours (a slow-motion mode's up-converted frames).
//!
//! The statistics are read on the marks' own regions (each radial mark's annulus, each side
//! mark's band), in 8-bit sample units, from three frames in a row, s₋, s, s₊:
//!
//! Before either test, a change of the whole picture's brightness between the frames compared
//! (lamp flicker) is taken out by a gain and offset fitted over the region (`affine_match`):
//! the tests read noise, and a lamp's smooth swing is not noise. Without this, a noise-free
//! clip under a flickering lamp had most of its frames flagged as blends (they lie on the line
//! between their neighbours) and its peaks read from the few left.
//!
//! - repeat: the trimmed mean of |s − s₋| falls below a fifth of its local median. A captured
//!   frame carries sensor noise of its own, so it never equals the frame before; a repeat does
//!   up to the coder's error.
//! - blend or interpolation: the trimmed mean of |s − (s₋ + s₊)/2| falls below 0.6 of the
//!   trimmed mean of |s₊ − s₋|/2. A frame made as a weighted mean of two captured frames lies
//!   on the line between them, and so does every frame between them (a linear blend of linear
//!   blends), so it agrees with its neighbours' average better than independent noise allows:
//!   for a captured frame with white noise σ the ratio is √(1.5)/√(0.5) ≈ 1.7, for a blend it
//!   is the quantisation alone. A motion-compensated interpolation moves the stripe instead
//!   of fading it, but still averages the two frames' noise wherever nothing moves, which is
//!   almost all of the annulus; the trimmed means (the largest fifth of the differences left
//!   out) keep the moving stripe from deciding.
//!
//! This is the residual test of the frame-rate up-conversion detectors in the literature:
//! an interpolated frame is predicted by its neighbours far better than a captured one
//! (Bestagini, Battaglia, Milani, Tagliasacchi and Tubaro, "Detection of temporal
//! interpolation in video sequences", IEEE ICASSP 2013, *from memory*; the same authors'
//! "Local tampering detection in video sequences", IEEE MMSP 2013, *from memory*), here on
//! the annulus only and normalised by the frame's own temporal difference, so it needs no
//! trained threshold.
//!
//! Where nothing is noisy enough to tell (a noise-free render, or a phone encoder that has
//! smoothed the noise away, with differences under a quarter of a sample step) no frame is
//! flagged: the detector never guesses.
//!
//! Part of the track stage: it must never import segment, mechanics, report, `analyze`,
//! `batch`, `find_marks`, `calibrate` or the CLI.

use crate::decode::{FrameRef, LumaRef};
use crate::rig::{Mark, Rig};
use crate::track::Trace;
use crate::units::TimeBase;

/// Most sample points per mark region (spread evenly over it).
const MAX_POINTS_PER_MARK: usize = 4096;
/// Share of the largest absolute differences left out of the trimmed means.
const TRIM: f64 = 0.2;
/// A repeat differs from the frame before by less than this share of the local median.
const REPEAT_FRACTION: f32 = 0.2;
/// A blend's residual against its neighbours' mean is below this share of half their
/// difference (a captured frame's is about 1.7 times it).
const BLEND_RATIO: f32 = 0.6;
/// Differences below this, in 8-bit sample steps, are too small to tell anything.
const MIN_TELL_LSB: f32 = 0.25;
/// Half-width of the window over which the local median of frame differences is taken.
const LOCAL_HALF: usize = 15;

/// Which frames were flagged, in the order they were pushed.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct SyntheticFlags {
    /// One per frame: true for a repeat or a blend.
    pub synthetic: Vec<bool>,
    /// Frames flagged as repeats.
    pub duplicated: usize,
    /// Frames flagged as blends or interpolations.
    pub interpolated: usize,
    /// One per frame: true for a frame flagged as a blend (a subset of `synthetic`).
    pub blend: Vec<bool>,
}

impl SyntheticFlags {
    /// Keeps blend-flagged frames as captured when they are at most `max_share` of the clip,
    /// and returns how many were kept (0 when the blends were set aside or there were none).
    ///
    /// A slow-motion mode synthesises a fixed share of its frames, half or more for the usual
    /// 2× to 8× up-conversion, all through the stretch it covers. A few blend-like frames
    /// scattered over a clip are not that: the blend test's premise (a captured frame carries
    /// noise of its own, independent of its neighbours') fails where the picture holds little
    /// noise and changes linearly in time, as on a part turning steadily, or where an encoder
    /// predicts a frame from both neighbours, and such frames are captured ones. Setting them
    /// aside would leave gaps beside the very peaks a blow is measured by. Repeats (a frame
    /// equal to the one before) stay flagged however few: an encoder that repeats a dropped
    /// frame does so now and then.
    pub fn keep_sporadic_blends(&mut self, max_share: f64) -> usize {
        let n = self.synthetic.len();
        if n == 0 || self.interpolated == 0 || self.interpolated as f64 > max_share * n as f64 {
            return 0;
        }
        for (s, b) in self.synthetic.iter_mut().zip(&mut self.blend) {
            if *b {
                *s = false;
                *b = false;
            }
        }
        std::mem::take(&mut self.interpolated)
    }
}

/// Reads the mark regions of each frame and flags the frames that were not captured.
pub struct SyntheticDetector {
    points: Vec<usize>,
    width: u32,
    height: u32,
    prev2: Vec<f32>,
    prev: Vec<f32>,
    cur: Vec<f32>,
    scratch: Vec<f32>,
    seen: usize,
    /// Per frame: trimmed mean |s − s₋| (NaN for the first).
    step: Vec<f32>,
    /// Per frame: trimmed mean |s − (s₋ + s₊)/2| (NaN at the ends).
    resid: Vec<f32>,
    /// Per frame: trimmed mean |s₊ − s₋| / 2 (NaN at the ends).
    span: Vec<f32>,
}

impl SyntheticDetector {
    /// A detector over the rig's mark regions in `width × height` frames.
    pub fn new(rig: &Rig, width: u32, height: u32) -> Self {
        let mut points = Vec::new();
        let marks = [
            Some(&rig.marks.drive),
            Some(&rig.marks.nut),
            rig.marks.fixed.as_ref(),
        ];
        for m in marks.into_iter().flatten() {
            points.extend(region(m, width, height));
        }
        points.sort_unstable();
        points.dedup();
        SyntheticDetector {
            points,
            width,
            height,
            prev2: Vec::new(),
            prev: Vec::new(),
            cur: Vec::new(),
            scratch: Vec::new(),
            seen: 0,
            step: Vec::new(),
            resid: Vec::new(),
            span: Vec::new(),
        }
    }

    /// Reads one frame (frames in clip order, each once).
    pub fn push(&mut self, f: FrameRef<'_>) {
        // The samples go into the buffer the frame before last used (`cur` is empty between
        // pushes, its buffer handed back at the end of the previous one).
        let mut s = std::mem::take(&mut self.cur);
        s.clear();
        if f.width == self.width && f.height == self.height {
            match f.luma {
                LumaRef::U8(d) => s.extend(self.points.iter().map(|&i| f32::from(d[i]))),
                LumaRef::U16(d) => {
                    let k = 255.0 / f.max_value();
                    s.extend(self.points.iter().map(|&i| f32::from(d[i]) * k));
                }
            }
        }
        self.cur = s;
        let n = self.cur.len();
        let step = if self.seen >= 1 && self.prev.len() == n && n > 0 {
            let (g, o) = affine_match(&self.prev, &self.cur);
            trimmed_mean(
                &mut self.scratch,
                self.cur
                    .iter()
                    .zip(&self.prev)
                    .map(|(a, b)| (a - (g * b + o)).abs()),
            )
        } else {
            f32::NAN
        };
        self.step.push(step);
        self.resid.push(f32::NAN);
        self.span.push(f32::NAN);
        if self.seen >= 2 && self.prev.len() == n && self.prev2.len() == n && n > 0 {
            // The middle frame, `prev`, against its neighbours.
            let (a, b, c) = (&self.prev2, &self.prev, &self.cur);
            let r = trimmed_mean(
                &mut self.scratch,
                a.iter()
                    .zip(b)
                    .zip(c)
                    .map(|((a, b), c)| (b - 0.5 * (a + c)).abs()),
            );
            let (g, o) = affine_match(a, c);
            let d = trimmed_mean(
                &mut self.scratch,
                a.iter().zip(c).map(|(a, c)| 0.5 * (c - (g * a + o)).abs()),
            );
            let k = self.seen - 1;
            self.resid[k] = r;
            self.span[k] = d;
        }
        // Rotate: prev2 ← prev ← cur, and the oldest buffer is reused next time.
        let oldest = std::mem::take(&mut self.prev2);
        self.prev2 = std::mem::take(&mut self.prev);
        self.prev = std::mem::replace(&mut self.cur, oldest);
        self.seen += 1;
    }

    /// The flags, one per frame pushed.
    pub fn finish(self) -> SyntheticFlags {
        classify(&self.step, &self.resid, &self.span)
    }
}

/// Flags from the per-frame statistics (see the module doc).
fn classify(step: &[f32], resid: &[f32], span: &[f32]) -> SyntheticFlags {
    let n = step.len();
    let mut out = SyntheticFlags {
        synthetic: vec![false; n],
        blend: vec![false; n],
        ..SyntheticFlags::default()
    };
    let mut win: Vec<f32> = Vec::with_capacity(2 * LOCAL_HALF + 1);
    for k in 0..n {
        let e = step[k];
        let lo = k.saturating_sub(LOCAL_HALF);
        let hi = (k + LOCAL_HALF + 1).min(n);
        win.clear();
        win.extend(step[lo..hi].iter().copied().filter(|v| v.is_finite()));
        let local = crate::stats::upper_median_f32(&mut win);
        let repeat =
            e.is_finite() && local.is_some_and(|m| m >= MIN_TELL_LSB && e < REPEAT_FRACTION * m);
        if repeat {
            out.synthetic[k] = true;
            out.duplicated += 1;
            continue;
        }
        let (r, d) = (resid[k], span[k]);
        if r.is_finite() && d.is_finite() && d >= MIN_TELL_LSB && r < BLEND_RATIO * d {
            out.synthetic[k] = true;
            out.blend[k] = true;
            out.interpolated += 1;
        }
    }
    out
}

/// The gain and offset `(g, o)` that map `x` onto `y` (y ≈ g·x + o): a change of the whole
/// picture's brightness between two frames (lamp flicker, an exposure step). The repeat and
/// blend tests read a captured frame's own noise, so this part of the change, which every
/// pixel shares, is taken out of the differences they compare against; otherwise a
/// noise-free picture under a smoothly varying lamp lies on the line between its neighbours
/// like a blend, and sits still at the lamp's turning points like a repeat. Both frames are
/// noisy, so the gain is the ratio of their spreads about their means (the reduced major
/// axis line, which unlike a least-squares fit of y on x is not pulled towards 0 by the noise
/// in x; Sokal & Rohlf, *Biometry*, 3rd ed. (1995), §14.13, *from memory*); the means then
/// give the offset. With no spread, or no positive correlation, the gain is 1.
fn affine_match(x: &[f32], y: &[f32]) -> (f32, f32) {
    let n = x.len().min(y.len());
    if n == 0 {
        return (1.0, 0.0);
    }
    let nf = n as f64;
    let mx = x[..n].iter().map(|&v| f64::from(v)).sum::<f64>() / nf;
    let my = y[..n].iter().map(|&v| f64::from(v)).sum::<f64>() / nf;
    let (mut sxx, mut sxy, mut syy) = (0.0f64, 0.0f64, 0.0f64);
    for (&a, &b) in x[..n].iter().zip(&y[..n]) {
        let (dx, dy) = (f64::from(a) - mx, f64::from(b) - my);
        sxx += dx * dx;
        sxy += dx * dy;
        syy += dy * dy;
    }
    let g = if sxx > 1e-9 * nf && sxy > 0.0 {
        (syy / sxx).sqrt()
    } else {
        1.0
    };
    (g as f32, (my - g * mx) as f32)
}

/// Mean of the smallest (1 − [`TRIM`]) share of `vals`.
fn trimmed_mean(scratch: &mut Vec<f32>, vals: impl Iterator<Item = f32>) -> f32 {
    scratch.clear();
    scratch.extend(vals);
    if scratch.is_empty() {
        return f32::NAN;
    }
    let keep = ((scratch.len() as f64 * (1.0 - TRIM)).ceil() as usize).clamp(1, scratch.len());
    if keep < scratch.len() {
        scratch.select_nth_unstable_by(keep - 1, f32::total_cmp);
    }
    let s: f64 = scratch[..keep].iter().map(|&v| f64::from(v)).sum();
    (s / keep as f64) as f32
}

/// Pixel offsets (y·width + x) of a mark's region, at most [`MAX_POINTS_PER_MARK`], on a grid.
fn region(m: &Mark, width: u32, height: u32) -> Vec<usize> {
    let (w, h) = (f64::from(width), f64::from(height));
    // Bounding box and membership test.
    type Inside<'a> = Box<dyn Fn(f64, f64) -> bool + 'a>;
    let (bx, inside): ([f64; 4], Inside<'_>) = match m {
        Mark::Radial(r) => {
            let [cx, cy] = r.pivot;
            let [r0, r1] = r.radius;
            (
                [cx - r1, cy - r1, cx + r1, cy + r1],
                Box::new(move |x, y| {
                    let d = (x - cx).hypot(y - cy);
                    // An oblique disc's annulus is narrower across; the inner limit is kept
                    // only where it cannot cut into it.
                    d <= r1 && (r.ellipse.is_some() || d >= r0)
                }),
            )
        }
        Mark::Side(s) => {
            let [[x0, y0], [x1, y1]] = s.axis;
            let rad = s.radius_px;
            (
                [
                    x0.min(x1) - rad,
                    y0.min(y1) - rad,
                    x0.max(x1) + rad,
                    y0.max(y1) + rad,
                ],
                Box::new(move |x, y| {
                    let (dx, dy) = (x1 - x0, y1 - y0);
                    let l2 = (dx * dx + dy * dy).max(1e-9);
                    let t = (((x - x0) * dx + (y - y0) * dy) / l2).clamp(0.0, 1.0);
                    (x - x0 - t * dx).hypot(y - y0 - t * dy) <= rad
                }),
            )
        }
    };
    let x_lo = bx[0].floor().max(0.0);
    let y_lo = bx[1].floor().max(0.0);
    let x_hi = bx[2].ceil().min(w - 1.0);
    let y_hi = bx[3].ceil().min(h - 1.0);
    if !(x_hi >= x_lo && y_hi >= y_lo) {
        return Vec::new();
    }
    let area = (x_hi - x_lo + 1.0) * (y_hi - y_lo + 1.0);
    let stride = (area / MAX_POINTS_PER_MARK as f64).sqrt().ceil().max(1.0) as usize;
    let mut out = Vec::new();
    let mut y = y_lo as usize;
    while y as f64 <= y_hi {
        let mut x = x_lo as usize;
        while x as f64 <= x_hi {
            if inside(x as f64, y as f64) {
                out.push(y * width as usize + x);
            }
            x += stride;
        }
        y += stride;
    }
    out
}

/// The trace's captured samples only, for timing, onsets and peaks: the synthetic samples
/// are left out, each kept sample keeps its clip frame index and its time (written into
/// `times_s`), and the time base becomes the captured rate. Also returns the index in
/// `trace` of each kept sample. With nothing flagged, the trace is returned as it is.
pub fn captured_only(trace: &Trace) -> (Trace, Vec<usize>) {
    let n = trace.len();
    if !(0..n).any(|i| trace.is_synthetic(i)) {
        return (trace.clone(), (0..n).collect());
    }
    let keep: Vec<usize> = (0..n).filter(|&i| !trace.is_synthetic(i)).collect();
    let pick = |v: &[Option<crate::units::Angle>]| keep.iter().map(|&i| v[i]).collect();
    let pickf = |v: &[f32]| keep.iter().map(|&i| v[i]).collect();
    // The captured rate: one over the median interval between captured frames (repeats may
    // sit between frames rather than replace one, so the kept share alone can mislead).
    let kept_t: Vec<f64> = keep.iter().map(|&i| trace.t_s(i)).collect();
    let gaps: Vec<f64> = kept_t.windows(2).map(|w| w[1] - w[0]).collect();
    let rate = match crate::stats::median(&gaps) {
        Some(g) if g > 0.0 => 1.0 / g,
        _ => trace.time_base.fps_hz() * keep.len() as f64 / n as f64,
    };
    let out = Trace {
        time_base: TimeBase::from_fps(rate, "captured rate").unwrap_or(trace.time_base),
        times_s: keep.iter().map(|&i| trace.t_s(i)).collect(),
        synthetic: Vec::new(),
        frames: keep.iter().map(|&i| trace.frames[i]).collect(),
        drive: pick(&trace.drive),
        nut: pick(&trace.nut),
        drive_confidence: pickf(&trace.drive_confidence),
        nut_confidence: pickf(&trace.nut_confidence),
        drive_zero_screen: trace.drive_zero_screen,
        nut_zero_screen: trace.nut_zero_screen,
    };
    (out, keep)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::decode::Frame;
    use rand::rngs::ChaCha8Rng;
    use rand::{RngExt, SeedableRng};

    fn noisy(seed: u64, n: usize, base: f32, sigma: f32) -> Vec<f32> {
        let mut rng = ChaCha8Rng::seed_from_u64(seed);
        (0..n)
            .map(|_| {
                // Sum of uniforms: near-Gaussian, σ per unit spread.
                let g: f32 = (0..12).map(|_| rng.random::<f32>()).sum::<f32>() - 6.0;
                base + sigma * g
            })
            .collect()
    }

    fn frame(index: u64, v: &[f32]) -> Frame {
        Frame::from_u8(
            index,
            64,
            64,
            v.iter()
                .map(|&x| x.round().clamp(0.0, 255.0) as u8)
                .collect(),
        )
    }

    fn rig_over_all() -> Rig {
        let json = r#"{"rig_version": 1, "marks": {
            "drive": {"kind": "radial", "pivot": [20, 32], "radius": [2, 18], "tighten": "cw"},
            "nut": {"kind": "radial", "pivot": [44, 32], "radius": [2, 18], "tighten": "cw"}}}"#;
        serde_json::from_str(json).unwrap()
    }

    #[test]
    fn captured_frames_pass_and_repeats_and_blends_are_flagged() {
        // Captured frames: noise σ = 3 sample steps on a flat grey; then a repeat, then three
        // blends between two captured frames at weights 1/4, 1/2, 3/4.
        let real: Vec<Vec<f32>> = (0..20).map(|k| noisy(k, 64 * 64, 100.0, 3.0)).collect();
        let mut seq: Vec<(Vec<f32>, bool)> = Vec::new();
        for (k, r) in real.iter().enumerate() {
            seq.push((r.clone(), false));
            if k == 5 {
                seq.push((r.clone(), true));
            }
            if k == 10 {
                let nxt = &real[k + 1];
                for w in [0.25f32, 0.5, 0.75] {
                    let b = r
                        .iter()
                        .zip(nxt)
                        .map(|(a, b)| (1.0 - w) * a + w * b)
                        .collect();
                    seq.push((b, true));
                }
            }
        }
        let frames: Vec<Frame> = seq
            .iter()
            .enumerate()
            .map(|(i, (v, _))| frame(i as u64, v))
            .collect();
        let mut d = SyntheticDetector::new(&rig_over_all(), 64, 64);
        for f in &frames {
            d.push(f.view());
        }
        let flags = d.finish();
        let truth: Vec<bool> = seq.iter().map(|s| s.1).collect();
        assert_eq!(flags.synthetic, truth);
        assert_eq!((flags.duplicated, flags.interpolated), (1, 3));
    }

    /// Blend flags on at most the given share of the frames are kept as captured (and the
    /// count returned); a larger share, as a slow-motion mode makes, stays set aside; repeats
    /// stay flagged either way.
    #[test]
    fn sporadic_blends_are_kept_and_an_up_converted_share_is_not() {
        let flags = |blends: &[usize], repeat: usize, n: usize| {
            let mut f = SyntheticFlags {
                synthetic: vec![false; n],
                blend: vec![false; n],
                duplicated: 1,
                interpolated: blends.len(),
            };
            for &b in blends {
                f.synthetic[b] = true;
                f.blend[b] = true;
            }
            f.synthetic[repeat] = true;
            f
        };
        // 3 blends in 100 frames: kept.
        let mut few = flags(&[10, 44, 45], 70, 100);
        assert_eq!(few.keep_sporadic_blends(0.10), 3);
        assert_eq!(few.interpolated, 0);
        assert_eq!(few.synthetic.iter().filter(|&&s| s).count(), 1);
        assert!(few.synthetic[70], "the repeat stays flagged");
        // Every other frame a blend (2× up-conversion): set aside.
        let half: Vec<usize> = (1..100).step_by(2).collect();
        let mut many = flags(&half, 70, 100);
        assert_eq!(many.keep_sporadic_blends(0.10), 0);
        assert_eq!(many.interpolated, 50);
        assert!(half.iter().all(|&b| many.synthetic[b]));
    }

    #[test]
    fn noise_free_frames_are_never_flagged() {
        let flat = vec![100.0f32; 64 * 64];
        let mut d = SyntheticDetector::new(&rig_over_all(), 64, 64);
        for i in 0..10 {
            d.push(frame(i, &flat).view());
        }
        let f = d.finish();
        assert!(f.synthetic.iter().all(|&s| !s));
    }

    /// A noise-free textured picture under a lamp flickering at 120 Hz, filmed at 2000 fps:
    /// every frame was captured. Its brightness swings smoothly, so each frame lies near the
    /// line between its neighbours, which the blend test read as interpolation before the
    /// lamp's gain was taken out (it flagged nearly every frame).
    #[test]
    fn a_flickering_lamp_on_noise_free_frames_is_not_taken_for_blends() {
        let texture: Vec<f32> = (0..64 * 64)
            .map(|i| {
                let (x, y) = ((i % 64) as f32, (i / 64) as f32);
                60.0 + 25.0 * (x * 0.7).sin() + 20.0 * (y * 0.45 + x * 0.1).cos()
            })
            .collect();
        let mut d = SyntheticDetector::new(&rig_over_all(), 64, 64);
        for k in 0..60u64 {
            let t = k as f32 / 2000.0;
            let gain = 1.0 + 0.12 * (std::f32::consts::TAU * 120.0 * t + 0.5).sin();
            let v: Vec<f32> = texture.iter().map(|p| p * gain).collect();
            d.push(frame(k, &v).view());
        }
        let f = d.finish();
        assert_eq!((f.duplicated, f.interpolated), (0, 0), "{f:?}");
    }

    /// Blends between noisy captured frames are still flagged when the lamp flickers too.
    #[test]
    fn blends_under_a_flickering_lamp_are_still_flagged() {
        let gain = |k: usize| 1.0 + 0.12 * (std::f32::consts::TAU * 120.0 * k as f32 / 500.0).sin();
        let real: Vec<Vec<f32>> = (0..20)
            .map(|k| {
                noisy(100 + k as u64, 64 * 64, 100.0, 3.0)
                    .into_iter()
                    .map(|v| v * gain(k))
                    .collect()
            })
            .collect();
        let mut seq: Vec<(Vec<f32>, bool)> = Vec::new();
        for (k, r) in real.iter().enumerate() {
            seq.push((r.clone(), false));
            if k == 8 {
                let nxt = &real[k + 1];
                let b = r.iter().zip(nxt).map(|(a, b)| 0.5 * (a + b)).collect();
                seq.push((b, true));
            }
        }
        let mut d = SyntheticDetector::new(&rig_over_all(), 64, 64);
        for (i, (v, _)) in seq.iter().enumerate() {
            d.push(frame(i as u64, v).view());
        }
        let flags = d.finish();
        let truth: Vec<bool> = seq.iter().map(|s| s.1).collect();
        assert_eq!(flags.synthetic, truth);
    }

    #[test]
    fn captured_only_keeps_times_and_clip_frames() {
        let n = 8;
        let trace = Trace {
            time_base: TimeBase::from_fps(960.0, "t").unwrap(),
            times_s: Vec::new(),
            synthetic: (0..n).map(|i| i % 4 != 0).collect(),
            frames: (0..n as u64).collect(),
            drive: vec![None; n],
            nut: vec![None; n],
            drive_confidence: vec![0.0; n],
            nut_confidence: vec![0.0; n],
            drive_zero_screen: None,
            nut_zero_screen: None,
        };
        let (c, keep) = captured_only(&trace);
        assert_eq!(keep, vec![0, 4]);
        assert_eq!(c.frames, vec![0, 4]);
        assert!((c.t_s(1) - 4.0 / 960.0).abs() < 1e-12);
        assert!((c.time_base.fps_hz() - 240.0).abs() < 1e-9);
    }
}
