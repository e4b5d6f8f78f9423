//! A later frame: the coarse search over the whole circle, the fine centre per ring and the
//! robust combination of the rings (the module's steps 3–6).
//!
//! Part of the track stage: it must never import segment, mechanics, report, `analyze`,
//! `batch`, `find_marks`, `calibrate` or the CLI.

use std::f64::consts::PI;

use super::coarse::{Coarse, adjusted};
use super::fine::{fine_extent, floor_i64};
use super::robust::{median_of, weighted_median};
use super::{
    LOST_MIN_SIG, LOST_SIG_CAP, LOST_SIG_FRACTION, LOST_Z_FRACTION, MIN_INLIER_FRACTION,
    Measurement, RING_MIN_Z, RadialTracker, StripeModel, TUKEY_C,
};
use crate::stats::median3;
use crate::track::polar::Prepared;
use crate::track::unwrap::{unwrap_near, wrap_pi};

impl RadialTracker {
    pub(super) fn measure_with(
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
        // The peak against the score elsewhere on the circle: a stripe that has faded into
        // the metal's texture (or was never more than a bump of it) is not measured.
        self.sig_last = coarse.significance(j_best, sep, &mut self.sig_buf);
        let bar = (LOST_SIG_FRACTION * self.sig_ref).clamp(LOST_MIN_SIG, LOST_SIG_CAP);
        if !first && self.sig_last < bar {
            return None;
        }
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
        let mut distracted = 0usize;
        if !first {
            self.distractors.next_frame();
        }
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
            // A ring whose window or flanks would read a feature marked in the first frame
            // (a glint beside the stripe's path) is left out (`distractor.rs`).
            if let Some(frame) = src.as_ref()
                && self.ring_ok[k]
            {
                let (h, f) = fine_extent(hw_b, flank, self.grid.bins);
                let reach = h + f as f64 + self.stride[k] as f64;
                let c = self.ring_c[k];
                let span = (floor_i64(c - reach), floor_i64(c + reach) + 1);
                if self.distractors.hits(k, span.0, span.1)
                    && self.static_feature_in(
                        k,
                        span,
                        c,
                        (model.polarity, model.half_width_px),
                        frame,
                    )
                {
                    self.ring_ok[k] = false;
                    distracted += 1;
                }
            }
            if self.ring_ok[k] {
                moves[good % 3] = self.ring_c[k] - c0;
                good += 1;
            }
        }
        if distracted > 0 {
            self.distracted_frames += 1;
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
}
