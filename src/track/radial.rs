//! The angle of one radial stripe in one frame, from the polar samples of its annulus.
//!
//! Method, per frame (all buffers are owned by the tracker and reused; nothing is allocated):
//! 1. Sample the annulus on the coarse grid: a few of the rings (at most `COARSE_RINGS`), whole,
//!    with angular bins about a quarter of the stripe's width apart (a [`PolarGrid`] built
//!    once the first frame has shown the stripe).
//! 2. Normalise each coarse ring by its own mean and noise level (the noise is estimated from
//!    differences of neighbouring samples), so a global gain or offset change (lighting flicker)
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
//! 5. Fine centre per ring, on the full grid (every ring; equal angular bins, 0.75 px apart on
//!    the middle ring, and every m-th bin read on inner rings where they are closer than
//!    0.75 px), sampled only in the window that ring's centroid reads: the centroid of the
//!    stripe's excess over a straight baseline drawn through the two flanks, with a window
//!    re-centred on the estimate until it stops moving (so the window is symmetric about the
//!    answer and truncation does not bias it). This is
//!    the brightness-weighted centroid refinement of Crocker & Grier (1996), applied along a
//!    ring (J. Colloid Interface Sci. 179, 1996). Each ring's window starts at the coarse prediction moved by the
//!    median of the last three good rings' moves: the coarse centre's error is common to all
//!    rings, so the window starts near its answer and re-centres fewer times.
//! 6. The ring centres, less each ring's offset learnt in the first frame, are combined with
//!    inverse-variance weights (contrast² × radius²) and Tukey's biweight (Tukey's bisquare
//!    M-estimator, c = 4.685 × scale, scale = 1.4826 × MAD), which drops rings spoilt by a
//!    highlight, a compression block or the pivot's hub.
//!
//! The first frame is sampled whole on the full grid. It decides the stripe's polarity (bright
//! or dark paint, found by contrast, so its colour need not be known), its width, each ring's
//! offset (a stripe that misses the pivot a little sits at a different angle on each ring), the
//! reference contrast that later frames are judged against, and each ring's noise level
//! relative to its nearest coarse ring (later frames scale the coarse rings' noise by it).
//!
//! Cost: a 1280×720 clip's mark of 32 rings × 964 bins is about 31,000 samples whole; per later
//! frame the coarse grid and the fine windows take a few thousand (docs/performance.md).

use std::f64::consts::PI;

use super::polar::{LatticeTaps, PolarGrid, Prepared, WHOLE_RING};
use super::unwrap::{unwrap_near, wrap_pi};
use crate::decode::FrameRef;

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
const COARSE_RINGS: usize = 4;
/// Coarse bins per stripe half-width on the outermost coarse ring, at least.
const COARSE_BINS_PER_HALF_WIDTH: f64 = 1.5;
/// Fewest coarse bins around the circle.
const MIN_COARSE_BINS: usize = 90;
/// The fine centre reads every m-th bin of a ring whose bins are closer than this, px of arc
/// (the grid's bins are equal angles, so an inner ring's are far closer than an outer one's).
const FINE_SPACING_PX: f64 = 0.75;
/// The fine centre's window stops following its centroid when a step is shorter than this,
/// bins.
const FINE_STOP_BINS: f64 = 1e-3;
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
    /// Median per-ring contrast in the first frame.
    z_ref: f64,
    /// Clip level for one ring's coarse score.
    clip: f32,
    /// Coarse score of the stripe in the first frame.
    score_ref: f64,
    /// Half-width (coarse bins) of the coarse score's peak at half maximum in the first frame.
    peak_half_bins: f64,
}

/// The coarse search's grid and buffers (see the module's step 1).
struct Coarse {
    grid: PolarGrid,
    polar: Vec<f32>,
    mean: Vec<f32>,
    sigma: Vec<f32>,
    /// Per coarse ring: the stripe's offset (coarse bins) and the box half-width (coarse bins).
    offset_bins: Vec<i64>,
    half_bins: Vec<usize>,
    /// Summed box response per coarse bin.
    score: Vec<f32>,
}

impl Coarse {
    /// Samples the coarse rings whole and measures each one's mean and noise.
    fn load(&mut self, frame: FrameRef<'_>, shift: [f64; 2]) {
        self.grid
            .sample(&self.grid.prepare(frame, shift), &mut self.polar);
        let n = self.grid.bins;
        for k in 0..self.grid.rings {
            let (m, s) = ring_stats(
                &self.polar[k * n..(k + 1) * n],
                self.grid.radius[k],
                self.grid.step(),
            );
            self.mean[k] = m;
            self.sigma[k] = s;
        }
    }

    /// The clipped, offset-aligned sum over rings of the box response (into `score`).
    fn score(&mut self, model: &StripeModel) {
        self.score.iter_mut().for_each(|s| *s = 0.0);
        let n = self.grid.bins;
        for k in 0..self.grid.rings {
            box_pass(
                &self.polar[k * n..(k + 1) * n],
                self.mean[k],
                self.sigma[k],
                self.half_bins[k],
                self.offset_bins[k],
                model.clip,
                model.polarity,
                &mut self.score,
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
}

/// Tracks one radial mark through a clip.
pub(crate) struct RadialTracker {
    grid: PolarGrid,
    polar: Vec<f32>,
    mean: Vec<f32>,
    sigma: Vec<f32>,
    scratch: Vec<f32>,
    /// One fine window's lattice samples, flanks included (`fine_ring`).
    lattice: Vec<f32>,
    ring_c: Vec<f64>,
    ring_z: Vec<f64>,
    ring_ok: Vec<bool>,
    sort_buf: Vec<(f64, f64)>,
    dev_buf: Vec<(f64, f64)>,
    /// Per ring, from the last measurement: angle relative to the result (rad) and weight.
    ring_out: Vec<(f32, f32)>,
    /// The rings the coarse search uses (indices into `grid`, increasing).
    coarse_rings: Vec<usize>,
    /// Per ring: the position in `coarse_rings` of the nearest coarse ring.
    near: Vec<usize>,
    /// Per ring: its noise level over the nearest coarse ring's, from the first frame.
    sigma_ratio: Vec<f32>,
    /// Built by [`Self::init`].
    coarse: Option<Coarse>,
    /// Per ring: the fine centre reads every `stride[k]`-th bin.
    stride: Vec<usize>,
    /// Per ring whose stride is above 1: the taps of its lattice bins, and their samples in
    /// consecutive places (bin `q·stride` at `q`), so a window is read in place.
    lat_taps: Vec<Option<LatticeTaps>>,
    lat_vals: Vec<Vec<f32>>,
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
        // At most COARSE_RINGS rings, evenly spaced: enough to place the stripe to a bin or two.
        let coarse_rings: Vec<usize> = (0..k).step_by(k.div_ceil(COARSE_RINGS)).collect();
        let near = (0..k)
            .map(|r| {
                (0..coarse_rings.len())
                    .min_by_key(|&i| coarse_rings[i].abs_diff(r))
                    .expect("a grid has at least one ring")
            })
            .collect();
        let stride = grid
            .radius
            .iter()
            .map(|&r| ((FINE_SPACING_PX / (r * grid.step())).floor() as usize).max(1))
            .collect::<Vec<_>>();
        let lat_taps: Vec<Option<LatticeTaps>> = stride
            .iter()
            .enumerate()
            .map(|(r, &m)| (m > 1).then(|| grid.lattice(r, m)))
            .collect();
        let lat_vals = lat_taps
            .iter()
            .map(|t| vec![0.0; t.as_ref().map_or(0, LatticeTaps::len)])
            .collect();
        RadialTracker {
            stride,
            lat_taps,
            lat_vals,
            polar: vec![0.0; k * n],
            mean: vec![0.0; k],
            sigma: vec![0.0; k],
            scratch: vec![0.0; n],
            lattice: Vec::with_capacity(2 * n),
            ring_c: vec![0.0; k],
            ring_z: vec![0.0; k],
            ring_ok: vec![false; k],
            sort_buf: Vec::with_capacity(k.max(n)),
            dev_buf: Vec::with_capacity(k),
            ring_out: vec![(0.0, 0.0); k],
            coarse_rings,
            near,
            sigma_ratio: vec![1.0; k],
            coarse: None,
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
    pub fn init(&mut self, frame: FrameRef<'_>, shift: [f64; 2]) -> Result<Measurement, String> {
        self.grid
            .sample(&self.grid.prepare(frame, shift), &mut self.polar);
        let n = self.grid.bins;
        for k in 0..self.grid.rings {
            (self.mean[k], self.sigma[k]) = ring_stats(
                &self.polar[k * n..(k + 1) * n],
                self.grid.radius[k],
                self.grid.step(),
            );
        }
        let k_n = self.grid.rings;
        let step = self.grid.step();
        let r_mid = self.grid.radius.iter().sum::<f64>() / k_n as f64;

        // Matched-filter search over polarity, width and angle: per ring, box mean against the
        // ring mean, scaled by √(box length) (white-noise matched-filter gain); then the median
        // over rings, which a blob covering under half of the rings cannot win.
        let mut best = (f64::NEG_INFINITY, 1.0f32, HALF_WIDTHS_PX[0], 0usize);
        let mut column = vec![0.0f64; k_n];
        let mut resp = [vec![0.0f32; k_n * n], vec![0.0f32; k_n * n]];
        let mut window = std::collections::VecDeque::with_capacity(n);
        for &hw_px in HALF_WIDTHS_PX
            .iter()
            .filter(|&&h| h / r_mid <= 0.4 && h / r_mid >= 0.5 * step)
        {
            for k in 0..k_n {
                let hb = box_half_bins(hw_px, self.grid.radius[k], step, n);
                box_pass(
                    &self.polar[k * n..(k + 1) * n],
                    self.mean[k],
                    self.sigma[k],
                    hb,
                    0,
                    f32::INFINITY,
                    1.0,
                    &mut self.scratch,
                    false,
                );
                let gain = ((2 * hb + 1) as f32).sqrt();
                // Allow a stripe that misses the pivot a little: take each ring's best response
                // within one box half-width.
                for (p, polarity) in [1.0f32, -1.0].into_iter().enumerate() {
                    let out = &mut resp[p][k * n..(k + 1) * n];
                    circular_window_max(&self.scratch, polarity, hb, out, &mut window);
                    out.iter_mut().for_each(|m| *m *= gain);
                }
            }
            for (p, polarity) in [1.0f32, -1.0].into_iter().enumerate() {
                if let Some((med, j)) = best_ring_median(&resp[p], k_n, best.0, &mut column) {
                    best = (med, polarity, hw_px, j);
                }
            }
        }
        let (_, polarity, hw_px, j_best) = best;

        // Fine centres per ring at the coarse angle, no offsets yet.
        let mut offset = vec![0.0; k_n];
        let c0 = j_best as f64;
        for k in 0..k_n {
            let hw_b = hw_px / (self.grid.radius[k] * step);
            self.fine_ring(k, c0, 0.0, hw_b, hw_b.max(3.0), polarity, None);
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

        // The coarse grid: bins a quarter of the stripe's width apart on the outermost coarse
        // ring (never finer than the full grid).
        let r_out = self.grid.radius[*self.coarse_rings.last().expect("at least one ring")];
        let n_c = ((2.0 * PI * r_out * COARSE_BINS_PER_HALF_WIDTH / hw_px).ceil() as usize)
            .clamp(MIN_COARSE_BINS.min(n), n);
        let grid = self.grid.subgrid(&self.coarse_rings, n_c);
        let step_c = grid.step();
        let rc = grid.rings;
        let mut coarse = Coarse {
            offset_bins: self
                .coarse_rings
                .iter()
                .map(|&k| (offset[k] / step_c).round() as i64)
                .collect(),
            half_bins: grid
                .radius
                .iter()
                .map(|&r| box_half_bins(hw_px, r, step_c, n_c))
                .collect(),
            polar: vec![0.0; rc * n_c],
            mean: vec![0.0; rc],
            sigma: vec![0.0; rc],
            score: vec![0.0; n_c],
            grid,
        };
        coarse.load(frame, shift);
        for k in 0..k_n {
            self.sigma_ratio[k] = self.sigma[k] / coarse.sigma[self.near[k]];
        }

        let clip = (0.5 * z_med).max(1.5) as f32;
        let mut model = StripeModel {
            polarity,
            half_width_px: hw_px,
            offset,
            z_ref: z_med,
            clip,
            score_ref: 0.0,
            peak_half_bins: 0.0,
        };
        coarse.score(&model);
        let j0 = (theta_c + mean_off).div_euclid(step_c) as usize % n_c;
        let j0 = coarse.local_peak(j0, 3 + (hw_px / (r_mid * step_c)) as usize);
        model.score_ref = f64::from(coarse.score[j0]);
        let (_, half) = coarse.half_max(j0, n_c / 4);
        model.peak_half_bins = half;
        self.model = Some(model);
        self.coarse = Some(coarse);
        match self.measure_at(None) {
            Some(m) => Ok(m),
            None => Err(
                "the stripe found in the first frame could not be measured consistently across the annulus; check pivot and radius in the rig"
                    .to_string(),
            ),
        }
    }

    /// Measures the stripe in a later frame; `None` when it cannot be found with confidence.
    ///
    /// Only the coarse grid is sampled whole (for the search over the whole circle and the
    /// noise level); each ring of the full grid is sampled only in the window its fine centre
    /// reads, and its noise level is the nearest coarse ring's, scaled by their ratio in the
    /// first frame.
    pub fn measure(&mut self, frame: FrameRef<'_>, shift: [f64; 2]) -> Option<Measurement> {
        let coarse = self.coarse.as_mut()?;
        coarse.load(frame, shift);
        for k in 0..self.grid.rings {
            self.sigma[k] = coarse.sigma[self.near[k]] * self.sigma_ratio[k];
        }
        let frame = self.grid.prepare(frame, shift);
        self.measure_at(Some(frame))
    }

    /// Measures from the coarse grid's samples and the full grid's: all of those in the first
    /// frame (`src` is None), else sampled from `src` where the fine centres need them.
    fn measure_at(&mut self, src: Option<Prepared<'_>>) -> Option<Measurement> {
        let model = self.model.take()?;
        let mut coarse = self.coarse.take()?;
        let out = self.measure_with(&model, &mut coarse, src);
        self.model = Some(model);
        self.coarse = Some(coarse);
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

    fn measure_with(
        &mut self,
        model: &StripeModel,
        coarse: &mut Coarse,
        src: Option<Prepared<'_>>,
    ) -> Option<Measurement> {
        let first = src.is_none();
        let k_n = self.grid.rings;
        let step = self.grid.step();
        coarse.score(model);
        let (n_c, step_c) = (coarse.grid.bins, coarse.grid.step());

        // Prediction and how far to trust it.
        let pred = self
            .last
            .map(|l| l + self.velocity * f64::from(self.since_good + 1));
        let trust = if self.since_good == 0 { 1.0 } else { 0.3 };

        // Local maxima, best and runner-up by prior-adjusted score.
        // (In coarse bins; the runner-up must lie beyond twice the peak's half-width, and at
        // least 6 full-grid bins away.)
        let sep = (2.0 * model.peak_half_bins)
            .max(6.0 * step / step_c)
            .max(2.0) as usize;
        let score = &coarse.score;
        let mut best: Option<(f64, usize)> = None;
        for j in 0..n_c {
            let z = score[j];
            if z <= 0.0 {
                continue;
            }
            let l = score[(j + n_c - 1) % n_c];
            let r = score[(j + 1) % n_c];
            if !(z > l && z >= r) {
                continue;
            }
            let adj = adjusted(model, f64::from(z), j as f64 * step_c, pred, trust);
            if best.is_none_or(|b| adj > b.0) {
                best = Some((adj, j));
            }
        }
        let (_, j_best) = best?;
        let mut second = 0.0f32;
        for (j, &z) in score.iter().enumerate() {
            let d = (j as i64 - j_best as i64).rem_euclid(n_c as i64) as usize;
            if d.min(n_c - d) > sep {
                second = second.max(z);
            }
        }
        let peak = score[j_best];
        if f64::from(peak) < 0.2 * model.score_ref && !first {
            return None;
        }
        // Centre and blur widening, converted to full-grid bins.
        let (centre_c, half_c) = coarse.half_max(j_best, n_c / 4);
        let centre = centre_c * step_c / step;
        let extra = (half_c - model.peak_half_bins).max(0.0) * step_c / step;

        // Fine centre per ring.
        let r_mid = self.grid.radius.iter().sum::<f64>() / k_n as f64;
        // Every ring's centre sits off its prediction c0 by nearly the same number of bins
        // (the coarse centre's error; bins are equal angles on every ring), so each ring starts
        // from c0 moved by the median of the last three good rings' moves, which leaves it
        // only its own noise to converge over.
        let mut moves = [0.0f64; 3];
        let mut good = 0usize;
        for k in 0..k_n {
            let hw_b = model.half_width_px / (self.grid.radius[k] * step) + extra;
            let c0 = centre + model.offset[k] / step;
            let flank = hw_b.max(3.0);
            let lead = match good {
                0 => 0.0,
                1 => moves[0],
                2 => 0.5 * (moves[0] + moves[1]),
                _ => median3(moves),
            };
            self.fine_ring(k, c0, lead, hw_b, flank, model.polarity, src.as_ref());
            if self.ring_ok[k] {
                moves[good % 3] = self.ring_c[k] - c0;
                good += 1;
            }
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

    /// Fine centre of the stripe on ring `k` near bin `c0` (continuous), starting from c0 moved
    /// by `lead` bins. Sets `ring_c[k]`, `ring_z[k]` and `ring_ok[k]`.
    ///
    /// With a frame (`src`), samples the first window and two samples either side, and more
    /// when the window moves past them; without one, reads the whole ring from `polar` (the
    /// first frame). A window that would reach beyond `2h` of c0 fails the ring (its centre has
    /// moved more than `h`, so it could not count anyway).
    #[allow(clippy::too_many_arguments)]
    fn fine_ring(
        &mut self,
        k: usize,
        c0: f64,
        lead: f64,
        hw_b: f64,
        flank: f64,
        polarity: f32,
        src: Option<&Prepared<'_>>,
    ) {
        let n = self.grid.bins;
        let ni = n as i64;
        let s = f64::from(polarity);
        let (h, f) = fine_extent(hw_b, flank, n);
        // The bins read are the multiples of m; each stands for m bins, so a sample's weight
        // is the part of its m bins inside the window c ± h (with m = 1: 1 bin, as in the
        // module's step 5), and the flanks are as many samples as fill f bins.
        let lat = Lattice::new(self.stride[k], f);
        let (m, mf, nf) = (lat.m, lat.mf, lat.nf);
        let limit = (
            lat.down(c0 - 2.0 * h - 0.5 * mf) - lat.flank_bins(),
            lat.up(c0 + 2.0 * h + 0.5 * mf) + lat.flank_bins(),
        );
        // The first window: at c0 moved by `lead`, which may take it a quarter of its
        // half-length from c0 at most.
        let start = c0 + lead.clamp(-0.25 * h, 0.25 * h);
        let first = (
            lat.down(start - h - 2.5 * mf) - lat.flank_bins(),
            lat.up(start + h + 2.5 * mf) + lat.flank_bins(),
        );
        // A strided ring whose window cannot leave the ring's first turn (bins 0..n) is
        // sampled into its lattice's consecutive places and read there in place; otherwise
        // the bins are sampled into their places on the ring (`polar`) and gathered.
        let compact = src.is_some()
            && self.lat_taps[k].is_some()
            && limit.0.min(first.0) >= 0
            && limit.1.max(first.1) < ni;
        let mut span = match src {
            Some(frame) => self.sample_bins(k, compact, frame, first),
            None => WHOLE_RING,
        };
        let mut c = start;
        let mut amp = 0.0;
        let mut ok = false;
        for _ in 0..8 {
            let lo = lat.down(c - h - 0.5 * mf);
            let hi = lat.up(c + h + 0.5 * mf);
            let (need_lo, need_hi) = (lo - lat.flank_bins(), hi + lat.flank_bins());
            if need_lo < span.0 || need_hi > span.1 {
                let Some(frame) = src else {
                    ok = false;
                    break;
                };
                if need_lo < limit.0 || need_hi > limit.1 {
                    ok = false;
                    break;
                }
                let want = (need_lo.min(span.0), need_hi.max(span.1));
                span = if want.1 - want.0 + 1 >= ni {
                    self.sample_bins(k, compact, frame, want)
                } else {
                    if want.0 < span.0 {
                        self.sample_bins(k, compact, frame, (want.0, span.0 - m));
                    }
                    if want.1 > span.1 {
                        self.sample_bins(k, compact, frame, (span.1 + m, want.1));
                    }
                    want
                };
            }
            // The lattice samples from the left flank's far end to the right flank's: read
            // in place when they are contiguous, else gathered into `lattice` (windows are
            // far shorter than the ring, so one conditional wrap suffices).
            let ring = &self.polar[k * n..(k + 1) * n];
            let (from, to) = (lo - lat.flank_bins(), hi + lat.flank_bins());
            let samples: &[f32] = if compact {
                // Inside `span`, which lies within 0..n here.
                &self.lat_vals[k][(from / m) as usize..=(to / m) as usize]
            } else if m == 1 && from >= 0 && to < ni {
                &ring[from as usize..=to as usize]
            } else {
                let buf = &mut self.lattice;
                buf.clear();
                if from >= 0 && to < ni {
                    buf.extend(ring[from as usize..=to as usize].iter().step_by(m as usize));
                } else {
                    let wrap = |j: i64| {
                        if j < 0 {
                            j + ni
                        } else if j >= ni {
                            j - ni
                        } else {
                            j
                        }
                    };
                    let mut j = from;
                    while j <= to {
                        buf.push(ring[wrap(j).clamp(0, ni - 1) as usize]);
                        j += m;
                    }
                }
                buf
            };
            let nfu = nf as usize;
            let (left, rest) = samples.split_at(nfu);
            let (window, right) = rest.split_at(rest.len() - nfu);
            let mean = |v: &[f32]| v.iter().map(|&x| f64::from(x)).sum::<f64>() / nf as f64;
            let (bl, br) = (mean(left), mean(right));
            let xl = lo as f64 - mf * (nf as f64 + 1.0) / 2.0;
            let xr = hi as f64 + mf * (nf as f64 + 1.0) / 2.0;
            let slope = (br - bl) / (xr - xl);
            // The window's weights and baseline relative to the current centre c, in f32:
            // offsets stay within the window, so nothing is lost to the bins' magnitude.
            let shape = Window {
                u0: (lo as f64 - c) as f32,
                du: mf as f32,
                reach: (h + 0.5 * mf) as f32,
                polarity: s as f32,
                base_c: (bl + slope * (c - xl)) as f32,
                slope: slope as f32,
            };
            let (sw, swu) = shape.sums(window);
            let (sw, swu) = (f64::from(sw), f64::from(swu));
            if sw <= 0.0 {
                ok = false;
                break;
            }
            amp = mf * sw / (2.0 * hw_b + 1.0);
            let next = c + swu / sw;
            ok = true;
            let done = (next - c).abs() < FINE_STOP_BINS;
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

    /// Samples ring `k`'s lattice bins `from..=to` (unwrapped; multiples of its stride) from
    /// `frame`: into the lattice's consecutive places when `compact` (the bins must then lie
    /// within 0..n), else into their places on the ring. Returns the span sampled, as
    /// [`PolarGrid::sample_span`] does.
    fn sample_bins(
        &mut self,
        k: usize,
        compact: bool,
        frame: &Prepared<'_>,
        (from, to): (i64, i64),
    ) -> (i64, i64) {
        let m = self.stride[k] as i64;
        match self.lat_taps[k].as_ref() {
            Some(taps) if compact => {
                let (a, b) = ((from / m) as usize, (to / m) as usize + 1);
                let out = &mut self.lat_vals[k][a..b];
                self.grid.sample_lattice(taps, frame, a..b, out);
                (from, to)
            }
            _ => self
                .grid
                .sample_span(frame, k, from, to, self.stride[k], &mut self.polar),
        }
    }
}

/// One fine-centre window on a ring, relative to its current centre c: the samples sit at
/// offsets `u0, u0 + du, …` (bins) from c; the baseline through the flanks is
/// `base_c + slope·u`; a sample's weight is the part of its `du` bins inside c ± h, i.e.
/// `(reach − |u|)/du` held to 0..=1, with `reach = h + du/2`.
struct Window {
    u0: f32,
    du: f32,
    reach: f32,
    polarity: f32,
    base_c: f32,
    slope: f32,
}

impl Window {
    /// Σw·g and Σw·g·u over the window's samples `v`, where g is a sample's excess over the
    /// baseline, signed by the polarity, and counted only where positive. Eight partial sums
    /// run side by side, so the loop has no chain of dependent additions and vectorises.
    fn sums(&self, v: &[f32]) -> (f32, f32) {
        const L: usize = 8;
        let inv_du = 1.0 / self.du;
        let term = |i: usize, x: f32| {
            let u = self.u0 + self.du * i as f32;
            // max/min rather than clamp: clamp's NaN rule keeps the loop from vectorising
            // (measured 15 % slower over the whole tracker); nothing here is NaN.
            #[allow(clippy::manual_clamp)]
            let w = ((self.reach - u.abs()) * inv_du).max(0.0).min(1.0);
            let g = (self.polarity * (x - (self.base_c + self.slope * u))).max(0.0);
            (w * g, w * g * u)
        };
        let (mut sw, mut swu) = ([0.0f32; L], [0.0f32; L]);
        let blocks = v.chunks_exact(L);
        let rest = blocks.remainder();
        for (b, block) in blocks.enumerate() {
            for l in 0..L {
                let (a, au) = term(b * L + l, block[l]);
                sw[l] += a;
                swu[l] += au;
            }
        }
        let done = v.len() - rest.len();
        for (l, &x) in rest.iter().enumerate() {
            let (a, au) = term(done + l, x);
            sw[l] += a;
            swu[l] += au;
        }
        (sw.iter().sum(), swu.iter().sum())
    }
}

/// Over the bins of `resp` (ring-major: `rings` rows of equal length), the highest median
/// over rings (element `rings / 2` of the sorted column) and the first bin that has it, when
/// it beats `floor`; `column` is scratch of `rings` values. A median beats the best so far
/// exactly when at least `rings − rings / 2` of its column do, so a bin where fewer do is
/// passed over without the selection (the first frame's matched filter: most of its cost).
fn best_ring_median(
    resp: &[f32],
    rings: usize,
    floor: f64,
    column: &mut [f64],
) -> Option<(f64, usize)> {
    let n = resp.len() / rings;
    let need = rings - rings / 2;
    let (mut bar, mut best) = (floor, None);
    for j in 0..n {
        let mut above = 0;
        for (k, c) in column.iter_mut().enumerate() {
            *c = f64::from(resp[k * n + j]);
            above += usize::from(*c > bar);
        }
        if above < need {
            continue;
        }
        let (_, &mut med, _) = column.select_nth_unstable_by(rings / 2, f64::total_cmp);
        if med > bar {
            (bar, best) = (med, Some((med, j)));
        }
    }
    best
}

/// The middle one of three values.
fn median3([a, b, c]: [f64; 3]) -> f64 {
    a.max(b).min(a.min(b).max(c))
}

/// Score `z` of a coarse candidate at angle `theta` (rad) after the prior.
fn adjusted(model: &StripeModel, z: f64, theta: f64, pred: Option<f64>, trust: f64) -> f64 {
    match pred {
        None => z,
        Some(p) => {
            let d = wrap_pi(theta - p).abs() / PRIOR_SPAN_RAD;
            z - trust * PRIOR_WEIGHT * model.score_ref * d * d
        }
    }
}

/// Mean and noise level of one ring of `n` samples on radius `radius` with angular `step`:
/// the noise is the mean absolute difference of samples ~1 px apart × √π/2, which is σ for
/// Gaussian noise (E|X − Y| = 2σ/√π for independent X, Y ~ N(μ, σ²)).
fn ring_stats(ring: &[f32], radius: f64, step: f64) -> (f32, f32) {
    let n = ring.len();
    let lag = ((1.0 / (radius * step)).round() as usize).clamp(1, n - 1);
    let s = lane_sum(ring, ring, |a, _| a);
    let d = lane_sum(&ring[lag..], ring, |a, b| (a - b).abs())
        + lane_sum(ring, &ring[n - lag..], |a, b| (a - b).abs());
    (
        s / n as f32,
        ((d / n as f32) * PI.sqrt() as f32 / 2.0).max(1.0 / 1024.0),
    )
}

/// Σ `f(a[i], b[i])` over the shorter of the two slices, in eight partial sums side by side (so
/// the loop has no chain of dependent additions and vectorises), added up in a fixed order.
#[inline(always)]
fn lane_sum(a: &[f32], b: &[f32], f: impl Fn(f32, f32) -> f32) -> f32 {
    const L: usize = 8;
    let n = a.len().min(b.len());
    let (a, b) = (&a[..n], &b[..n]);
    let mut acc = [0.0f32; L];
    for (x, y) in a.chunks_exact(L).zip(b.chunks_exact(L)) {
        for l in 0..L {
            acc[l] += f(x[l], y[l]);
        }
    }
    let done = n - n % L;
    for (l, (&x, &y)) in a[done..].iter().zip(&b[done..]).enumerate() {
        acc[l] += f(x, y);
    }
    super::sum_lanes(acc)
}

/// Box half-width, bins, of a stripe half-width `hw_px` on a ring of `radius` with angular
/// `step` and `n` bins.
fn box_half_bins(hw_px: f64, radius: f64, step: f64, n: usize) -> usize {
    ((hw_px / (radius * step)).round() as usize).clamp(1, n / 4)
}

/// Fills `out[j]` with `polarity × (box mean at j + shift − ring mean) / noise`, clipped to
/// ±`clip` (`add`: adds to `out` instead). A sliding window sum, so O(bins) per ring.
#[allow(clippy::too_many_arguments)]
fn box_pass(
    ring: &[f32],
    mean: f32,
    sigma: f32,
    hb: usize,
    shift: i64,
    clip: f32,
    polarity: f32,
    out: &mut [f32],
    add: bool,
) {
    let n = ring.len();
    let inv = 1.0 / (2 * hb + 1) as f64;
    let (m, sd) = (f64::from(mean), f64::from(sigma));
    // Window for j = 0 covers bins shift − hb ..= shift + hb (wrapped).
    let mut lo = (shift - hb as i64).rem_euclid(n as i64) as usize;
    let mut hi = (shift + hb as i64).rem_euclid(n as i64) as usize;
    let mut sum = 0.0f64;
    let mut i = lo;
    for _ in 0..2 * hb + 1 {
        sum += f64::from(ring[i]);
        i = if i + 1 == n { 0 } else { i + 1 };
    }
    let scale = inv / sd;
    for o in out.iter_mut() {
        let v = (polarity * ((sum * scale - m / sd) as f32)).clamp(-clip, clip);
        if add {
            *o += v;
        } else {
            *o = v;
        }
        // One dependent addition per bin: the sample entering less the one leaving.
        hi = if hi + 1 == n { 0 } else { hi + 1 };
        sum += f64::from(ring[hi]) - f64::from(ring[lo]);
        lo = if lo + 1 == n { 0 } else { lo + 1 };
    }
}

/// The bins a fine centre reads on one ring: the multiples of `m`.
struct Lattice {
    m: i64,
    mf: f64,
    /// Flank samples each side: as many as fill the flank's bins, at least one.
    nf: i64,
}

impl Lattice {
    fn new(stride: usize, flank_bins: i64) -> Lattice {
        let m = stride.max(1) as i64;
        Lattice {
            m,
            mf: m as f64,
            nf: ((flank_bins as f64 / m as f64).round() as i64).max(1),
        }
    }
    /// The lattice bin at or below `x`.
    fn down(&self, x: f64) -> i64 {
        floor_i64(x / self.mf) * self.m
    }
    /// The lattice bin at or above `x`.
    fn up(&self, x: f64) -> i64 {
        -floor_i64(-x / self.mf) * self.m
    }
    /// Bins the flank samples reach beyond a window's edge.
    fn flank_bins(&self) -> i64 {
        self.m * self.nf
    }
}

/// ⌊x⌋ for |x| < 2⁵³, without a call into the maths library (which `floor` is on processors
/// without SSE4.1's rounding instruction): truncate, then step down for negative fractions.
#[inline(always)]
fn floor_i64(x: f64) -> i64 {
    let t = x as i64;
    t - i64::from((t as f64) > x)
}

/// Half-length `h` of the fine centroid window and its flank length `f`, bins, for a stripe
/// half-width of `hw_b` bins on a ring of `n` bins.
fn fine_extent(hw_b: f64, flank: f64, n: usize) -> (f64, i64) {
    let h = (hw_b + (0.6 * hw_b).max(3.0)).min(n as f64 / 4.0);
    let f = flank.ceil().min(n as f64 / 8.0) as i64;
    (h, f)
}

/// `out[j]` = the largest of `sign × src[j + d]` for |d| ≤ `hb` (indices wrapped around the
/// ring), by the monotone-queue sliding maximum: O(n) whatever `hb` (`queue` is scratch).
fn circular_window_max(
    src: &[f32],
    sign: f32,
    hb: usize,
    out: &mut [f32],
    queue: &mut std::collections::VecDeque<(usize, f32)>,
) {
    let n = src.len();
    let hb = hb.min(n / 2);
    let at = |i: usize| sign * src[(i + n - hb % n) % n];
    queue.clear();
    // Position i of the extended sequence holds element (i − hb) mod n; out[j] is the maximum
    // over positions j ..= j + 2 hb.
    for i in 0..n + 2 * hb {
        let v = at(i);
        while queue.back().is_some_and(|&(_, b)| b <= v) {
            queue.pop_back();
        }
        queue.push_back((i, v));
        if i >= 2 * hb {
            let j = i - 2 * hb;
            while queue.front().is_some_and(|&(p, _)| p < j) {
                queue.pop_front();
            }
            out[j] = queue.front().expect("the queue holds position i").1;
        }
    }
}

/// Median of `v` (using `buf` as scratch, no allocation once `buf` has capacity).
fn median_of(v: &[f64], buf: &mut Vec<(f64, f64)>) -> f64 {
    buf.clear();
    buf.extend(v.iter().map(|&x| (x, 1.0)));
    if buf.is_empty() {
        return 0.0;
    }
    let mid = buf.len() / 2;
    buf.select_nth_unstable_by(mid, |a, b| a.0.total_cmp(&b.0))
        .1
        .0
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

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    proptest! {
        #[test]
        fn the_best_ring_median_is_the_one_found_by_sorting_every_bin(
            (rings, n, levels) in (1usize..40, 1usize..50).prop_flat_map(|(rings, n)| {
                // Values from a small set, so that ties between bins and with the floor occur.
                (Just(rings), Just(n), prop::collection::vec(-3i8..6, rings * n))
            }),
            floor in prop::sample::select(vec![f64::NEG_INFINITY, -1.0, 0.0, 2.0]),
        ) {
            let resp: Vec<f32> = levels.iter().map(|&v| f32::from(v)).collect();
            let mut want: Option<(f64, usize)> = None;
            for j in 0..n {
                let mut col: Vec<f64> = (0..rings).map(|k| f64::from(resp[k * n + j])).collect();
                col.sort_by(f64::total_cmp);
                let med = col[rings / 2];
                if med > want.map_or(floor, |w| w.0) {
                    want = Some((med, j));
                }
            }
            let mut column = vec![0.0; rings];
            prop_assert_eq!(best_ring_median(&resp, rings, floor, &mut column), want);
        }

        #[test]
        fn floor_i64_equals_floor(x in -1e9f64..1e9) {
            prop_assert_eq!(floor_i64(x), x.floor() as i64);
            let whole = x.round();
            prop_assert_eq!(floor_i64(whole), whole as i64);
        }

        #[test]
        fn sliding_maximum_equals_the_direct_one(
            src in proptest::collection::vec(-10.0f32..10.0, 1..60),
            hb in 0usize..40,
            negative in any::<bool>(),
        ) {
            let sign = if negative { -1.0 } else { 1.0 };
            let n = src.len();
            let mut out = vec![0.0; n];
            let mut q = std::collections::VecDeque::new();
            circular_window_max(&src, sign, hb, &mut out, &mut q);
            let h = hb.min(n / 2) as i64;
            for j in 0..n {
                let direct = (-h..=h)
                    .map(|d| sign * src[(j as i64 + d).rem_euclid(n as i64) as usize])
                    .fold(f32::NEG_INFINITY, f32::max);
                prop_assert_eq!(out[j], direct, "j = {}", j);
            }
        }
    }
}
