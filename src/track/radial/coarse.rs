//! The coarse search: box (matched-filter) responses of whole rings, their sum over rings, and
//! the peak of that score (the module's steps 1–4), with the first frame's matched filter.
//!
//! Part of the track stage: it must never import segment, mechanics, report, `analyze`,
//! `batch`, `find_marks`, `calibrate` or the CLI.

use std::f64::consts::PI;

/// Fewest background bins the significance is judged from.
const MIN_BACKGROUND_BINS: usize = 16;

use super::{PRIOR_SPAN_RAD, PRIOR_WEIGHT, StripeModel};
use crate::decode::FrameRef;
use crate::track::polar::{ColourWeights, PolarGrid};
use crate::track::unwrap::wrap_pi;

/// The coarse search's grid and buffers (see the module's step 1).
pub(super) struct Coarse {
    pub(super) grid: PolarGrid,
    pub(super) polar: Vec<f32>,
    pub(super) mean: Vec<f32>,
    pub(super) sigma: Vec<f32>,
    /// Per coarse ring: the stripe's offset (coarse bins) and the box half-width (coarse bins).
    pub(super) offset_bins: Vec<i64>,
    pub(super) half_bins: Vec<usize>,
    /// Summed box response per coarse bin.
    pub(super) score: Vec<f32>,
}

impl Coarse {
    /// Samples the coarse rings whole and measures each one's mean and noise.
    pub(super) fn load(
        &mut self,
        frame: FrameRef<'_>,
        shift: [f64; 2],
        weights: Option<ColourWeights>,
    ) {
        let src = self.grid.prepare_with(frame, shift, weights);
        self.grid.sample(&src, &mut self.polar);
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
    pub(super) fn score(&mut self, model: &StripeModel) {
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

    /// How far the score's peak at `j` stands above the score elsewhere on the circle:
    /// (peak − median) / (1.4826 × MAD), the median and the median absolute deviation taken
    /// over the bins more than `sep` from `j` (1.4826 × MAD estimates σ for Gaussian data;
    /// Rousseeuw & Croux, "Alternatives to the median absolute deviation", JASA 88, 1993).
    /// The pixel noise that scales each ring's score is measured between neighbouring samples,
    /// so it misses texture as wide as the stripe (mottle, scratches, a nut's flats); this
    /// measures the stripe against that texture. Infinite when too few bins remain to judge.
    pub(super) fn significance(&self, j: usize, sep: usize, buf: &mut Vec<f32>) -> f64 {
        let n = self.grid.bins;
        buf.clear();
        for (i, &z) in self.score.iter().enumerate() {
            let d = (i as i64 - j as i64).rem_euclid(n as i64) as usize;
            if d.min(n - d) > sep {
                buf.push(z);
            }
        }
        if buf.len() < MIN_BACKGROUND_BINS {
            return f64::INFINITY;
        }
        let mid = buf.len() / 2;
        let med = *buf.select_nth_unstable_by(mid, f32::total_cmp).1;
        buf.iter_mut().for_each(|z| *z = (*z - med).abs());
        let mad = *buf.select_nth_unstable_by(mid, f32::total_cmp).1;
        let peak = self.score[j] - med;
        let spread = (1.4826 * mad).max(1e-3 * peak.abs()).max(1e-6);
        f64::from(peak / spread)
    }

    /// The highest score within `reach` bins of `j`.
    pub(super) fn local_peak(&self, j: usize, reach: usize) -> usize {
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
    pub(super) fn half_max(&self, j: usize, reach: usize) -> (f64, f64) {
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

/// Over the bins of `resp` (ring-major: `rings` rows of equal length), the highest median
/// over rings (element `rings / 2` of the sorted column) and the first bin that has it, when
/// it beats `floor`; `column` is scratch of `rings` values. A median beats the best so far
/// exactly when at least `rings − rings / 2` of its column do, so a bin where fewer do is
/// passed over without the selection (the first frame's matched filter: most of its cost).
pub(super) fn best_ring_median(
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

/// Score `z` of a coarse candidate at angle `theta` (rad) after the prior.
pub(super) fn adjusted(
    model: &StripeModel,
    z: f64,
    theta: f64,
    pred: Option<f64>,
    trust: f64,
) -> f64 {
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
pub(super) fn ring_stats(ring: &[f32], radius: f64, step: f64) -> (f32, f32) {
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
pub(super) fn lane_sum(a: &[f32], b: &[f32], f: impl Fn(f32, f32) -> f32) -> f32 {
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
    crate::track::sum_lanes(acc)
}

/// Box half-width, bins, of a stripe half-width `hw_px` on a ring of `radius` with angular
/// `step` and `n` bins.
pub(super) fn box_half_bins(hw_px: f64, radius: f64, step: f64, n: usize) -> usize {
    ((hw_px / (radius * step)).round() as usize).clamp(1, n / 4)
}

/// Fills `out[j]` with `polarity × (box mean at j + shift − ring mean) / noise`, clipped to
/// ±`clip` (`add`: adds to `out` instead). A sliding window sum, so O(bins) per ring.
#[allow(clippy::too_many_arguments)]
pub(super) fn box_pass(
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

/// ring), by the monotone-queue sliding maximum: O(n) whatever `hb` (`queue` is scratch).
pub(super) fn circular_window_max(
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
