//! Following a side mark's stripes through a clip's profiles (one profile P(φ) per frame, see
//! `mod.rs`): the stripe's angle is the centroid of its contrast over a straight baseline drawn
//! between the profile at φ ± (stripe half-width + margin), so `angle = asin(offset / R)` is
//! measured in the angle domain directly. Beyond [`MAX_FACING_DEG`] from facing the camera the
//! stripe is not measured: the frame is a loss (None), never a guess. With N stripes equally
//! spaced, each visible one gives θ = φₖ − 2πk/N, averaged with weight cos φₖ. A stripe that
//! touches the core of a static line along the bar (a lamp's reflection, `layers.rs`) is not
//! measured either: there the two cannot be told apart. Self-check: the paint's width in bar
//! angle does not change as the bar turns (the profile is in bar angle), so a ridge whose width
//! at half height is not within a factor [`WIDTH_RATIO`] of the stripe's width where it was
//! first measured is not this stripe alone (paint merged with a line's remains, or only part
//! of it seen): that frame is a loss, not a reading. After a loss, every stripe seen in
//! range is a candidate, and the bar angle nearest the last measured one is taken: right
//! whenever the bar turned less than half the stripe spacing while no stripe was measurable.
//!
//! Part of the track stage: it must never import segment, mechanics, report, `analyze`,
//! `batch`, `find_marks`, `calibrate` or the CLI.

use std::f64::consts::{PI, TAU};

use super::{MAX_FACING_DEG, RANGE_DEG, STEP_DEG};

/// Largest factor by which a stripe's width at half height may differ from its width where it
/// was first measured: the true width is fixed; blur of a pixel, which spans more bar angle
/// towards the silhouette, and the half-height crossings' noise widen or narrow it a little.
const WIDTH_RATIO: f64 = 1.5;

/// Follows one stripe pattern (polarity, width, count) through profiles.
#[derive(Debug, Clone)]
pub(super) struct Follower<'a> {
    /// Profile bin angles, rad.
    pub phi: &'a [f64],
    pub stripes: u32,
    /// +1 when the paint is brighter than the steel (in the profile), −1 when darker.
    pub polarity: f32,
    /// Stripe half-width in bar angle, rad.
    pub half: f64,
    /// Least contrast of a stripe worth measuring (profile units).
    pub min_contrast: f32,
    /// Bar-angle intervals (rad) of static lines' cores: a stripe touching one is not measured.
    pub cores: &'a [(f64, f64)],
    /// Bar angle of the last measurement, or its prediction while lost (continuous), rad.
    pub last: Option<f64>,
    /// Turn per frame at the last measurement, rad.
    pub vel: f64,
    /// True while no stripe is measured.
    pub lost: bool,
    /// The stripe's width at half height (rad) where it was first measured, once it was.
    pub width: Option<f64>,
}

impl Follower<'_> {
    fn bin(p: f64) -> isize {
        ((p.to_degrees() + RANGE_DEG) / STEP_DEG).round() as isize
    }

    /// Stripe centroid near `guess` (rad) in the profile, within `window` (rad), with its peak
    /// contrast and its width at half height (rad); None when no stripe is there, it is beyond
    /// the measurable range, it touches a static line's core, or its width is not the stripe's.
    pub fn centroid(&self, prof: &[f32], guess: f64, window: f64) -> Option<(f64, f32, f64)> {
        let lim = MAX_FACING_DEG.to_radians();
        let nb = prof.len() as isize;
        let (lo, hi) = (
            Self::bin(guess - window).max(0),
            Self::bin(guess + window).min(nb - 1),
        );
        if lo >= hi {
            return None;
        }
        let mut best = (lo, f32::NEG_INFINITY);
        for k in lo..=hi {
            let v = self.polarity * prof[k as usize];
            if v > best.1 {
                best = (k, v);
            }
        }
        // The ridge's middle at half its height over the lowest nearby value, not its
        // highest bin: on a flat-topped stripe (wide paint, or a colour projection that
        // saturates) the highest bin may sit at an edge.
        let reach = Self::bin(self.half + 8f64.to_radians()) - Self::bin(0.0);
        let (fa, fb) = ((best.0 - reach).max(0), (best.0 + reach).min(nb - 1));
        let floor = (fa..=fb)
            .map(|k| self.polarity * prof[k as usize])
            .fold(f32::INFINITY, f32::min);
        let mid = 0.5 * (best.1 + floor);
        let (mut l, mut r) = (best.0, best.0);
        while l > fa && self.polarity * prof[(l - 1) as usize] > mid {
            l -= 1;
        }
        while r < fb && self.polarity * prof[(r + 1) as usize] > mid {
            r += 1;
        }
        let pk = self.phi[((l + r) / 2) as usize];
        if pk.abs() > lim {
            return None;
        }
        let width = (r - l + 1) as f64 * STEP_DEG.to_radians();
        if let Some(w0) = self.width
            && !(w0 / WIDTH_RATIO..=w0 * WIDTH_RATIO).contains(&width)
        {
            return None;
        }
        // Baseline between the profile at pk ± (half + margin).
        let m = self.half + 4f64.to_radians();
        let (ka, kb) = (Self::bin(pk - m), Self::bin(pk + m));
        if ka < 0 || kb >= nb {
            return None;
        }
        let (va, vb) = (
            self.polarity * prof[ka as usize],
            self.polarity * prof[kb as usize],
        );
        let (mut sw, mut sp) = (0.0f64, 0.0f64);
        for k in ka..=kb {
            let f = (k - ka) as f32 / (kb - ka) as f32;
            let base = va + (vb - va) * f;
            let c = self.polarity * prof[k as usize] - base;
            if c > 0.0 {
                sw += f64::from(c);
                sp += f64::from(c) * self.phi[k as usize];
            }
        }
        // Above the baseline on both sides: an edge (steel beside a brighter line) is no stripe.
        let peak_c = best.1 - va.max(vb);
        if sw <= 0.0 || peak_c < self.min_contrast {
            return None;
        }
        let c = sp / sw;
        let reach = self.half;
        if self
            .cores
            .iter()
            .any(|&(a, b)| c + reach >= a && c - reach <= b)
        {
            return None;
        }
        (c.abs() <= lim).then_some((c, peak_c, width))
    }

    /// The bar angle (continuous, rad) in the next frame's profile, with its contrast, or None.
    pub fn step(&mut self, prof: &[f32]) -> Option<(f64, f32)> {
        if self.lost {
            return self.reacquire(prof);
        }
        let last = self.last? + self.vel;
        let step = TAU / f64::from(self.stripes);
        let window = (0.45 * step).min(25f64.to_radians());
        let (mut sw, mut st, mut conf) = (0.0, 0.0, 0.0f32);
        for k in 0..self.stripes {
            let off = step * f64::from(k);
            let front = (last + off + PI).rem_euclid(TAU) - PI;
            if front.abs() > MAX_FACING_DEG.to_radians() + window {
                continue;
            }
            if let Some((c, pc, wd)) = self.centroid(prof, front, window) {
                self.width.get_or_insert(wd);
                let w = c.cos();
                let th = last + (c - front);
                sw += w;
                st += w * th;
                conf = conf.max(pc);
            }
        }
        if sw <= 0.0 {
            self.lost = true;
            self.vel = 0.0;
            return None;
        }
        let th = st / sw;
        self.vel = th - (last - self.vel);
        self.last = Some(th);
        Some((th, conf))
    }

    /// After a loss: every stripe in range, each read as every stripe index, and the bar angle
    /// nearest the last measured one.
    fn reacquire(&mut self, prof: &[f32]) -> Option<(f64, f32)> {
        let last = self.last?;
        let lim = MAX_FACING_DEG.to_radians();
        let step = TAU / f64::from(self.stripes);
        let mut seen: Vec<(f64, f32, f64)> = Vec::new();
        let mut g = -lim;
        while g <= lim {
            if let Some((c, pc, wd)) = self.centroid(prof, g, 6f64.to_radians())
                && !seen.iter().any(|s| (s.0 - c).abs() < 2f64.to_radians())
            {
                seen.push((c, pc, wd));
            }
            g += 8f64.to_radians();
        }
        let mut best: Option<(f64, f64, f32, f64)> = None;
        for (c, pc, wd) in seen {
            for k in 0..self.stripes {
                let th = c - step * f64::from(k);
                let th = th + TAU * ((last - th) / TAU).round();
                let d = (th - last).abs();
                if best.is_none_or(|b| d < b.0) {
                    best = Some((d, th, pc, wd));
                }
            }
        }
        let (_, th, pc, wd) = best?;
        self.width.get_or_insert(wd);
        self.lost = false;
        self.vel = 0.0;
        self.last = Some(th);
        Some((th, pc))
    }
}
