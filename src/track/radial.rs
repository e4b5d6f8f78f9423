//! The angle of one radial stripe in one frame, from the polar samples of its annulus.
//!
//! Method, per frame (all buffers are owned by the tracker and reused; nothing is allocated):
//! 1. Sample the annulus on the precomputed [`PolarGrid`] (rings × angular bins).
//! 2. Normalise each ring by its own mean and noise level (the noise is estimated from
//!    differences of samples 1 px apart), so a global gain or offset change (lighting flicker)
//!    leaves every score unchanged.
//! 3. Coarse search over the whole circle: per ring, a box of the stripe's width against the
//!    ring mean, signed by the stripe's polarity, clipped to a fraction of the stripe's own
//!    first-frame contrast, and summed over rings after shifting each ring by its own stripe
//!    offset. Clipping makes a blob (a specular highlight) that covers a few rings score less
//!    than the stripe, which crosses all of them. Among the local maxima, a soft prior favours
//!    the angle predicted from the recent velocity; the penalty is mild so a blow that jumps
//!    tens of degrees in one frame is still followed.
//! 4. The half-maximum points of that score give the stripe's centre and its width in this
//!    frame; a width above the first frame's means motion blur, and the fine windows widen.
//! 5. Fine centre per ring: the centroid of the stripe's excess over a straight baseline drawn
//!    through the two flanks, with a window re-centred on the estimate until it stops moving
//!    (so the window is symmetric about the answer and truncation does not bias it). This is
//!    the brightness-weighted centroid refinement of Crocker & Grier (1996), applied along a
//!    ring (facts.md §7.3).
//! 6. The ring centres, less each ring's offset learnt in the first frame, are combined with
//!    inverse-variance weights (contrast² × radius²) and Tukey's biweight (Tukey's bisquare
//!    M-estimator, c = 4.685 × scale, scale = 1.4826 × MAD), which drops rings spoilt by a
//!    highlight, a compression block or the pivot's hub.
//!
//! The first frame decides the stripe's polarity (bright or dark paint, found by contrast, so
//! its colour need not be known), its width, each ring's offset (a stripe that misses the pivot
//! a little sits at a different angle on each ring) and the reference contrast that later
//! frames are judged against.

use std::f64::consts::PI;

use super::polar::PolarGrid;
use super::unwrap::{unwrap_near, wrap_pi};
use crate::decode::Frame;

/// Candidate stripe half-widths tried in the first frame, px of arc.
const HALF_WIDTHS_PX: [f64; 11] = [1.0, 1.5, 2.0, 3.0, 4.0, 5.5, 7.0, 9.0, 12.0, 16.0, 21.0];
/// Per-ring contrast (excess / noise) a ring needs to count.
const RING_MIN_Z: f64 = 2.5;
/// Median per-ring contrast needed in the first frame to accept a stripe.
const INIT_MIN_Z: f64 = 4.0;
/// Fraction of rings that must show the stripe in the first frame.
const INIT_MIN_RINGS: f64 = 0.5;
/// A frame's median ring contrast must reach this fraction of the first frame's.
const LOST_Z_FRACTION: f64 = 0.15;
/// Fraction of rings that must agree for a measurement to stand.
const MIN_INLIER_FRACTION: f64 = 0.4;
/// Prior: a candidate this far from the prediction loses `PRIOR_WEIGHT` of the reference score.
const PRIOR_SPAN_RAD: f64 = PI / 2.0;
const PRIOR_WEIGHT: f64 = 0.3;
/// Rings used by the coarse search at most.
const COARSE_RINGS: usize = 16;
/// Tukey biweight tuning constant (95 % efficiency at the normal distribution).
const TUKEY_C: f64 = 4.685;

/// One measurement of a mark in one frame.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct Measurement {
    /// Disc-plane angle of the stripe, rad, from the grid's zero direction towards +y, made
    /// continuous with the tracker's previous measurements.
    pub angle: f64,
    /// 0..=1.
    pub confidence: f32,
}

/// What the first frame taught about the stripe.
#[derive(Debug, Clone)]
struct StripeModel {
    /// +1 for paint brighter than the metal, −1 for darker.
    polarity: f32,
    /// Stripe half-width, px of arc.
    half_width_px: f64,
    /// Each ring's angular offset from the stripe's mean angle, rad.
    offset: Vec<f64>,
    /// The same, rounded to bins, for the coarse search.
    offset_bins: Vec<i64>,
    /// Median per-ring contrast in the first frame.
    z_ref: f64,
    /// Clip level for one ring's coarse score.
    clip: f32,
    /// Coarse score of the stripe in the first frame.
    score_ref: f64,
    /// Half-width (bins) of the coarse score's peak at half maximum in the first frame.
    peak_half_bins: f64,
}

/// Tracks one radial mark through a clip.
pub(crate) struct RadialTracker {
    grid: PolarGrid,
    polar: Vec<f32>,
    mean: Vec<f32>,
    sigma: Vec<f32>,
    score: Vec<f32>,
    scratch: Vec<f32>,
    ring_c: Vec<f64>,
    ring_z: Vec<f64>,
    ring_ok: Vec<bool>,
    sort_buf: Vec<(f64, f64)>,
    dev_buf: Vec<(f64, f64)>,
    /// Per ring, from the last measurement: angle relative to the result (rad) and weight.
    ring_out: Vec<(f32, f32)>,
    model: Option<StripeModel>,
    /// Last good continuous angle, its velocity (rad/frame) and frames since it.
    last: Option<f64>,
    velocity: f64,
    since_good: u32,
}

impl RadialTracker {
    /// A tracker over `grid`; the stripe is learnt from the first frame given to [`Self::init`].
    pub fn new(grid: PolarGrid) -> RadialTracker {
        let (k, n) = (grid.rings, grid.bins);
        RadialTracker {
            polar: vec![0.0; k * n],
            mean: vec![0.0; k],
            sigma: vec![0.0; k],
            score: vec![0.0; n],
            scratch: vec![0.0; n],
            ring_c: vec![0.0; k],
            ring_z: vec![0.0; k],
            ring_ok: vec![false; k],
            sort_buf: Vec::with_capacity(k.max(n)),
            dev_buf: Vec::with_capacity(k),
            ring_out: vec![(0.0, 0.0); k],
            model: None,
            last: None,
            velocity: 0.0,
            since_good: 0,
            grid,
        }
    }

    /// The sampling grid.
    pub fn grid(&self) -> &PolarGrid {
        &self.grid
    }

    /// Per ring, from the last successful measurement: the ring's stripe angle minus the
    /// measured angle (rad), and the ring's weight in the result (0 when not used).
    pub fn rings(&self) -> &[(f32, f32)] {
        &self.ring_out
    }

    /// Learns the stripe from the first frame and measures it there.
    ///
    /// # Errors
    /// A one-line reason when the annulus shows no stripe.
    pub fn init(&mut self, frame: &Frame, shift: [f64; 2]) -> Result<Measurement, String> {
        self.grid.sample(frame, shift, &mut self.polar);
        self.ring_stats();
        let (k_n, n) = (self.grid.rings, self.grid.bins);
        let step = self.grid.step();
        let r_mid = self.grid.radius.iter().sum::<f64>() / k_n as f64;

        // Matched-filter search over polarity, width and angle: per ring, box mean against the
        // ring mean, scaled by √(box length) (white-noise matched-filter gain); then the median
        // over rings, which a blob covering under half of the rings cannot win.
        let mut best = (f64::NEG_INFINITY, 1.0f32, HALF_WIDTHS_PX[0], 0usize);
        let mut column = vec![0.0f64; k_n];
        let mut resp = [vec![0.0f32; k_n * n], vec![0.0f32; k_n * n]];
        for &hw_px in HALF_WIDTHS_PX
            .iter()
            .filter(|&&h| h / r_mid <= 0.4 && h / r_mid >= 0.5 * step)
        {
            for k in 0..k_n {
                let hb = self.box_half_bins(hw_px, k);
                self.box_response(k, hb, 0, f32::INFINITY, 1.0);
                let gain = ((2 * hb + 1) as f32).sqrt();
                // Allow a stripe that misses the pivot a little: take each ring's best response
                // within one box half-width.
                for (p, polarity) in [1.0f32, -1.0].into_iter().enumerate() {
                    for j in 0..n {
                        let mut m = f32::NEG_INFINITY;
                        for d in -(hb as i64)..=(hb as i64) {
                            let jj = (j as i64 + d).rem_euclid(n as i64) as usize;
                            m = m.max(polarity * self.scratch[jj]);
                        }
                        resp[p][k * n + j] = m * gain;
                    }
                }
            }
            for (p, polarity) in [1.0f32, -1.0].into_iter().enumerate() {
                for j in 0..n {
                    for k in 0..k_n {
                        column[k] = f64::from(resp[p][k * n + j]);
                    }
                    column.sort_unstable_by(f64::total_cmp);
                    let med = column[k_n / 2];
                    if med > best.0 {
                        best = (med, polarity, hw_px, j);
                    }
                }
            }
        }
        let (_, polarity, hw_px, j_best) = best;

        // Fine centres per ring at the coarse angle, no offsets yet.
        let mut offset = vec![0.0; k_n];
        let c0 = j_best as f64;
        for k in 0..k_n {
            let hw_b = hw_px / (self.grid.radius[k] * step);
            self.fine_ring(k, c0, hw_b, hw_b.max(3.0), polarity);
        }
        let valid = self.ring_ok.iter().filter(|&&o| o).count();
        let z_med = median_of(&self.ring_z, &mut self.sort_buf);
        if z_med < INIT_MIN_Z || (valid as f64) < INIT_MIN_RINGS * k_n as f64 {
            return Err(format!(
                "no painted stripe found in the annulus (best contrast {z_med:.1}× the noise on {valid} of {k_n} rings, need {INIT_MIN_Z}× on half); check pivot and radius in the rig against the first frame, and the lighting"
            ));
        }
        // Ring offsets: a straight stripe passing e px from the pivot sits at asin(e/r) on the
        // ring of radius r. Fit e by weighted least squares on the residuals against 1/r.
        let theta_c = c0 * step;
        let (mut sw, mut sx, mut sy, mut sxx, mut sxy) = (0.0, 0.0, 0.0, 0.0, 0.0);
        for k in 0..k_n {
            if !self.ring_ok[k] {
                continue;
            }
            let e = wrap_pi(self.ring_c[k] * step - theta_c);
            let x = 1.0 / self.grid.radius[k];
            let w = self.ring_z[k].min(30.0).powi(2);
            sw += w;
            sx += w * x;
            sy += w * e;
            sxx += w * x * x;
            sxy += w * x * e;
        }
        let var = sxx / sw - (sx / sw).powi(2);
        let miss_px = if var > 1e-12 {
            (sxy / sw - sx / sw * sy / sw) / var
        } else {
            0.0
        };
        let mut mean_off = 0.0;
        for (k, o) in offset.iter_mut().enumerate() {
            *o = (miss_px / self.grid.radius[k]).clamp(-1.0, 1.0).asin();
            mean_off += *o;
        }
        mean_off /= k_n as f64;
        offset.iter_mut().for_each(|o| *o -= mean_off);
        let offset_bins = offset.iter().map(|o| (o / step).round() as i64).collect();

        let clip = (0.5 * z_med).max(1.5) as f32;
        let mut model = StripeModel {
            polarity,
            half_width_px: hw_px,
            offset,
            offset_bins,
            z_ref: z_med,
            clip,
            score_ref: 0.0,
            peak_half_bins: 0.0,
        };
        self.coarse_score(&model);
        let j0 = (theta_c + mean_off).div_euclid(step) as usize % n;
        let j0 = self.local_peak(j0, 3 + (hw_px / (r_mid * step)) as usize);
        model.score_ref = f64::from(self.score[j0]);
        let (_, half) = self.half_max(j0, n / 4);
        model.peak_half_bins = half;
        self.model = Some(model);
        match self.measure_at(true) {
            Some(m) => Ok(m),
            None => Err(
                "the stripe found in the first frame could not be measured consistently across the annulus; check pivot and radius in the rig"
                    .to_string(),
            ),
        }
    }

    /// Measures the stripe in a later frame; `None` when it cannot be found with confidence.
    pub fn measure(&mut self, frame: &Frame, shift: [f64; 2]) -> Option<Measurement> {
        self.grid.sample(frame, shift, &mut self.polar);
        self.ring_stats();
        self.measure_at(false)
    }

    fn measure_at(&mut self, first: bool) -> Option<Measurement> {
        let model = self.model.take()?;
        let out = self.measure_with(&model, first);
        self.model = Some(model);
        match out {
            Some(m) => {
                if let Some(last) = self.last {
                    let gap = f64::from(self.since_good + 1);
                    self.velocity = (m.angle - last) / gap;
                }
                self.last = Some(m.angle);
                self.since_good = 0;
            }
            None => self.since_good += 1,
        }
        out
    }

    fn measure_with(&mut self, model: &StripeModel, first: bool) -> Option<Measurement> {
        let (k_n, n) = (self.grid.rings, self.grid.bins);
        let step = self.grid.step();
        self.coarse_score(model);

        // Prediction and how far to trust it.
        let pred = self
            .last
            .map(|l| l + self.velocity * f64::from(self.since_good + 1));
        let trust = if self.since_good == 0 { 1.0 } else { 0.3 };

        // Local maxima, best and runner-up by prior-adjusted score.
        let sep = (2.0 * model.peak_half_bins).max(6.0) as usize;
        let mut best: Option<(f64, usize)> = None;
        for j in 0..n {
            let z = self.score[j];
            if z <= 0.0 {
                continue;
            }
            let l = self.score[(j + n - 1) % n];
            let r = self.score[(j + 1) % n];
            if !(z > l && z >= r) {
                continue;
            }
            let adj = self.adjusted(model, j, pred, trust);
            if best.is_none_or(|b| adj > b.0) {
                best = Some((adj, j));
            }
        }
        let (_, j_best) = best?;
        let mut second = 0.0f32;
        for j in 0..n {
            let d = (j as i64 - j_best as i64).rem_euclid(n as i64) as usize;
            if d.min(n - d) > sep {
                second = second.max(self.score[j]);
            }
        }
        let peak = self.score[j_best];
        if f64::from(peak) < 0.2 * model.score_ref && !first {
            return None;
        }
        let (centre, half) = self.half_max(j_best, n / 4);
        let extra = (half - model.peak_half_bins).max(0.0);

        // Fine centre per ring.
        let r_mid = self.grid.radius.iter().sum::<f64>() / k_n as f64;
        for k in 0..k_n {
            let hw_b = model.half_width_px / (self.grid.radius[k] * step) + extra;
            let c0 = centre + model.offset[k] / step;
            self.fine_ring(k, c0, hw_b, hw_b.max(3.0), model.polarity);
        }
        let z_med = median_of(&self.ring_z, &mut self.sort_buf);
        if z_med < (LOST_Z_FRACTION * model.z_ref).max(RING_MIN_Z) {
            return None;
        }

        // Robust combination of ring angles (Tukey biweight).
        let theta_c = centre * step;
        self.sort_buf.clear();
        for k in 0..k_n {
            if self.ring_ok[k] {
                let e = wrap_pi(self.ring_c[k] * step - theta_c) - model.offset[k];
                let w = self.ring_z[k].min(30.0).powi(2) * self.grid.radius[k].powi(2);
                self.sort_buf.push((e, w));
            }
        }
        let valid = self.sort_buf.len();
        if (valid as f64) < MIN_INLIER_FRACTION * k_n as f64 {
            return None;
        }
        let mut mu = weighted_median(&mut self.sort_buf);
        let floor = 0.05 / r_mid;
        // Scale from the weighted median absolute deviation.
        self.dev_buf.clear();
        self.dev_buf
            .extend(self.sort_buf.iter().map(|&(e, w)| ((e - mu).abs(), w)));
        let mad = weighted_median(&mut self.dev_buf);
        let scale = (1.4826 * mad).max(floor);
        let c = TUKEY_C * scale;
        let mut inliers = 0usize;
        for _ in 0..5 {
            let (mut sw, mut swe) = (0.0, 0.0);
            inliers = 0;
            for &(e, w) in &self.sort_buf {
                let u = (e - mu) / c;
                if u.abs() < 1.0 {
                    let t = 1.0 - u * u;
                    sw += w * t * t;
                    swe += w * t * t * e;
                    inliers += 1;
                }
            }
            if sw <= 0.0 {
                return None;
            }
            let next = swe / sw;
            let done = (next - mu).abs() < 1e-9;
            mu = next;
            if done {
                break;
            }
        }
        let inlier_frac = inliers as f64 / k_n as f64;
        if inlier_frac < MIN_INLIER_FRACTION {
            return None;
        }
        // Each ring's angle relative to the result, and its final weight, for the pivot
        // refinement done once the whole clip is seen (see `refine.rs`).
        for k in 0..k_n {
            let ring_theta = wrap_pi(self.ring_c[k] * step - theta_c);
            let e = ring_theta - model.offset[k];
            let u = (e - mu) / c;
            let w = if self.ring_ok[k] && u.abs() < 1.0 {
                let t = 1.0 - u * u;
                self.ring_z[k].min(30.0).powi(2) * self.grid.radius[k].powi(2) * t * t
            } else {
                0.0
            };
            self.ring_out[k] = ((ring_theta - mu) as f32, w as f32);
        }
        let raw = wrap_pi(theta_c + mu);
        let angle = match pred {
            Some(p) => unwrap_near(p, raw, 2.0 * PI),
            None => raw,
        };
        let ambiguity = if peak > 0.0 {
            (f64::from(second / peak) - 0.7).max(0.0) / 0.3
        } else {
            1.0
        };
        let confidence = ((z_med / (0.5 * model.z_ref)).min(1.0)
            * inlier_frac.min(1.0)
            * (1.0 - ambiguity.min(0.9)))
        .clamp(0.0, 1.0) as f32;
        Some(Measurement { angle, confidence })
    }

    /// Score of coarse candidate `j` after the prior.
    fn adjusted(&self, model: &StripeModel, j: usize, pred: Option<f64>, trust: f64) -> f64 {
        let z = f64::from(self.score[j]);
        match pred {
            None => z,
            Some(p) => {
                let d = wrap_pi(j as f64 * self.grid.step() - p).abs() / PRIOR_SPAN_RAD;
                z - trust * PRIOR_WEIGHT * model.score_ref * d * d
            }
        }
    }

    /// Ring means and noise levels (mean absolute difference of samples ~1 px apart × √π/2,
    /// which is σ for Gaussian noise: E|X − Y| = 2σ/√π for independent X, Y ~ N(μ, σ²)).
    fn ring_stats(&mut self) {
        let n = self.grid.bins;
        for k in 0..self.grid.rings {
            let ring = &self.polar[k * n..(k + 1) * n];
            let lag =
                ((1.0 / (self.grid.radius[k] * self.grid.step())).round() as usize).clamp(1, n - 1);
            let s: f32 = ring.iter().sum();
            let mut d = 0.0f32;
            for (a, b) in ring[lag..].iter().zip(ring) {
                d += (a - b).abs();
            }
            for (a, b) in ring.iter().zip(&ring[n - lag..]) {
                d += (a - b).abs();
            }
            self.mean[k] = s / n as f32;
            self.sigma[k] = ((d / n as f32) * PI.sqrt() as f32 / 2.0).max(1.0 / 1024.0);
        }
    }

    fn box_half_bins(&self, hw_px: f64, k: usize) -> usize {
        ((hw_px / (self.grid.radius[k] * self.grid.step())).round() as usize)
            .clamp(1, self.grid.bins / 4)
    }

    /// Fills `scratch[j]` with `polarity × (box mean at j + shift − ring mean) / noise`, clipped
    /// (`add`: adds to `score` instead). A sliding window sum, so O(bins) per ring.
    fn box_response(&mut self, k: usize, hb: usize, shift: i64, clip: f32, polarity: f32) {
        self.box_pass(k, hb, shift, clip, polarity, false);
    }

    fn box_pass(&mut self, k: usize, hb: usize, shift: i64, clip: f32, polarity: f32, add: bool) {
        let n = self.grid.bins;
        let ring = &self.polar[k * n..(k + 1) * n];
        let inv = 1.0 / (2 * hb + 1) as f64;
        let (m, sd) = (f64::from(self.mean[k]), f64::from(self.sigma[k]));
        // Window for j = 0 covers bins shift − hb ..= shift + hb (wrapped).
        let mut lo = (shift - hb as i64).rem_euclid(n as i64) as usize;
        let mut hi = (shift + hb as i64).rem_euclid(n as i64) as usize;
        let mut sum = 0.0f64;
        let mut i = lo;
        for _ in 0..2 * hb + 1 {
            sum += f64::from(ring[i]);
            i = if i + 1 == n { 0 } else { i + 1 };
        }
        let out = if add {
            &mut self.score
        } else {
            &mut self.scratch
        };
        let scale = inv / sd;
        for o in out.iter_mut() {
            let v = (polarity * ((sum * scale - m / sd) as f32)).clamp(-clip, clip);
            if add {
                *o += v;
            } else {
                *o = v;
            }
            sum -= f64::from(ring[lo]);
            lo = if lo + 1 == n { 0 } else { lo + 1 };
            hi = if hi + 1 == n { 0 } else { hi + 1 };
            sum += f64::from(ring[hi]);
        }
    }

    /// The clipped, offset-aligned sum over rings of the box response (into `score`).
    fn coarse_score(&mut self, model: &StripeModel) {
        self.score.iter_mut().for_each(|s| *s = 0.0);
        // At most COARSE_RINGS rings, evenly spaced: enough to place the stripe to a bin or two.
        let stride = self.grid.rings.div_ceil(COARSE_RINGS);
        for k in (0..self.grid.rings).step_by(stride) {
            let hb = self.box_half_bins(model.half_width_px, k);
            self.box_pass(
                k,
                hb,
                model.offset_bins[k],
                model.clip,
                model.polarity,
                true,
            );
        }
    }

    /// The highest score within `reach` bins of `j`.
    fn local_peak(&self, j: usize, reach: usize) -> usize {
        let n = self.grid.bins;
        let mut best = j;
        for d in -(reach as i64)..=(reach as i64) {
            let jj = (j as i64 + d).rem_euclid(n as i64) as usize;
            if self.score[jj] > self.score[best] {
                best = jj;
            }
        }
        best
    }

    /// Centre and half-width (bins) of the score's peak at `j`, from its half-maximum points
    /// (linearly interpolated), searching at most `reach` bins each way.
    fn half_max(&self, j: usize, reach: usize) -> (f64, f64) {
        let n = self.grid.bins as i64;
        let at = |i: i64| f64::from(self.score[i.rem_euclid(n) as usize]);
        let top = at(j as i64);
        let half = 0.5 * top;
        let mut edge = [0.0f64; 2];
        for (side, dir) in [(0usize, -1i64), (1, 1)] {
            let mut i = j as i64;
            let mut steps = 0;
            while at(i + dir) > half && steps < reach {
                i += dir;
                steps += 1;
            }
            let (a, b) = (at(i), at(i + dir));
            let frac = if a > b { (a - half) / (a - b) } else { 0.5 };
            edge[side] = i as f64 + dir as f64 * frac.clamp(0.0, 1.0);
        }
        (0.5 * (edge[0] + edge[1]), 0.5 * (edge[1] - edge[0]))
    }

    /// Fine centre of the stripe on ring `k` near bin `c0` (continuous). Sets `ring_c[k]`,
    /// `ring_z[k]` and `ring_ok[k]`.
    fn fine_ring(&mut self, k: usize, c0: f64, hw_b: f64, flank: f64, polarity: f32) {
        let n = self.grid.bins;
        let ni = n as i64;
        let ring = &self.polar[k * n..(k + 1) * n];
        // Windows are far shorter than the ring, so one conditional wrap suffices (and avoids
        // an integer division per sample).
        let at = |j: i64| {
            let j = if j < 0 {
                j + ni
            } else if j >= ni {
                j - ni
            } else {
                j
            };
            f64::from(ring[j.clamp(0, ni - 1) as usize])
        };
        let s = f64::from(polarity);
        let h = (hw_b + (0.6 * hw_b).max(3.0)).min(n as f64 / 4.0);
        let f = flank.ceil().min(n as f64 / 8.0) as i64;
        let mut c = c0;
        let mut amp = 0.0;
        let mut ok = false;
        for _ in 0..8 {
            let lo = (c - h - 0.5).floor() as i64;
            let hi = (c + h + 0.5).ceil() as i64;
            let (mut bl, mut br) = (0.0, 0.0);
            for d in 1..=f {
                bl += at(lo - d);
                br += at(hi + d);
            }
            bl /= f as f64;
            br /= f as f64;
            let xl = lo as f64 - (f as f64 + 1.0) / 2.0;
            let xr = hi as f64 + (f as f64 + 1.0) / 2.0;
            let slope = (br - bl) / (xr - xl);
            let (mut sw, mut swj) = (0.0, 0.0);
            for j in lo..=hi {
                let u = j as f64 - c;
                let w = (h + 0.5 - u.abs()).clamp(0.0, 1.0);
                if w <= 0.0 {
                    continue;
                }
                let g = s * (at(j) - (bl + slope * (j as f64 - xl)));
                if g > 0.0 {
                    sw += w * g;
                    swj += w * g * j as f64;
                }
            }
            if sw <= 0.0 {
                ok = false;
                break;
            }
            amp = sw / (2.0 * hw_b + 1.0);
            let next = swj / sw;
            ok = true;
            let done = (next - c).abs() < 1e-3;
            c = next;
            if done {
                break;
            }
        }
        let z = amp / f64::from(self.sigma[k]);
        self.ring_c[k] = c;
        self.ring_z[k] = if ok { z } else { 0.0 };
        self.ring_ok[k] = ok && z >= RING_MIN_Z && (c - c0).abs() <= h;
    }
}

/// Median of `v` (using `buf` as scratch, no allocation once `buf` has capacity).
fn median_of(v: &[f64], buf: &mut Vec<(f64, f64)>) -> f64 {
    buf.clear();
    buf.extend(v.iter().map(|&x| (x, 1.0)));
    buf.sort_unstable_by(|a, b| a.0.total_cmp(&b.0));
    if buf.is_empty() {
        0.0
    } else {
        buf[buf.len() / 2].0
    }
}

/// Weighted median of `(value, weight)` pairs (sorts in place).
fn weighted_median(v: &mut [(f64, f64)]) -> f64 {
    v.sort_unstable_by(|a, b| a.0.total_cmp(&b.0));
    let total: f64 = v.iter().map(|p| p.1).sum();
    let mut acc = 0.0;
    for p in v.iter() {
        acc += p.1;
        if acc >= 0.5 * total {
            return p.0;
        }
    }
    v.last().map_or(0.0, |p| p.0)
}
