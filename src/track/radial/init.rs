//! The first frame: finds the stripe's polarity, width and per-ring offsets, and builds the
//! coarse grid that later frames search.
//!
//! Part of the track stage: it must never import segment, mechanics, report, `analyze`,
//! `batch`, `find_marks`, `calibrate` or the CLI.

use std::f64::consts::PI;

use super::coarse::{
    Coarse, best_ring_median, box_half_bins, box_pass, circular_window_max, ring_stats,
};
use super::distractor::{Distractors, RingFacts};
use super::fine::fine_extent;
use super::robust::median_of;
use super::{
    COARSE_BINS_PER_HALF_WIDTH, HALF_WIDTHS_PX, INIT_MIN_RINGS, INIT_MIN_Z, MIN_COARSE_BINS,
    Measurement, RadialTracker, StripeModel,
};
use crate::decode::FrameRef;
use crate::track::unwrap::wrap_pi;

impl RadialTracker {
    /// Marks the first frame's features beside the stripe (`distractor.rs`), from its whole
    /// rings in `polar` and the fine centres just measured there.
    fn learn_distractors(&mut self) {
        let Some(model) = self.model.as_ref() else {
            return;
        };
        let (n, step) = (self.grid.bins, self.grid.step());
        let facts: Vec<RingFacts> = (0..self.grid.rings)
            .map(|k| {
                let hw_b = model.half_width_px / (self.grid.radius[k] * step);
                let (half, flank) = fine_extent(hw_b, hw_b.max(3.0), n);
                RingFacts {
                    centre: self.ring_ok[k].then_some(self.ring_c[k]),
                    half,
                    flank: flank as f64,
                    stride: self.stride[k] as f64,
                    sigma: self.sigma[k],
                }
            })
            .collect();
        self.distractors = Distractors::learn(&self.polar, n, &facts, model.polarity);
    }

    /// Learns the stripe from the first frame and measures it there.
    ///
    /// # Errors
    /// A one-line reason when the annulus shows no stripe.
    pub fn init(&mut self, frame: FrameRef<'_>, shift: [f64; 2]) -> Result<Measurement, String> {
        let src = self.grid.prepare_with(frame, shift, self.colour);
        self.grid.sample(&src, &mut self.polar);
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
        coarse.load(frame, shift, self.colour);
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
        let measured = self.measure_at(None);
        self.sig_ref = self.sig_last;
        self.learn_distractors();
        if self.sig_ref < self.init_min_sig {
            return Err(format!(
                "the stripe does not stand out from the metal's own texture around the annulus (significance {:.1}, need {}); paint that differs from the metal only in colour cannot be seen in monochrome footage: film in colour, or use a paint much brighter or darker than the metal",
                self.sig_ref, self.init_min_sig
            ));
        }
        match measured {
            Some(m) => Ok(m),
            None => Err(
                "the stripe found in the first frame could not be measured consistently across the annulus; check pivot and radius in the rig"
                    .to_string(),
            ),
        }
    }
}
