//! The fine centre of the stripe on one ring: a baseline-corrected centroid in a window that
//! re-centres on its answer (the module's step 5).
//!
//! Part of the track stage: it must never import segment, mechanics, report, `analyze`,
//! `batch`, `find_marks`, `calibrate` or the CLI.

use super::{FINE_STOP_BINS, RING_MIN_Z, RadialTracker};
use crate::track::polar::{Prepared, WHOLE_RING};

impl RadialTracker {
    /// Fine centre of the stripe on ring `k` near bin `c0` (continuous), starting from c0 moved
    /// by `lead` bins. Sets `ring_c[k]`, `ring_z[k]` and `ring_ok[k]`.
    ///
    /// With a frame (`src`), samples the first window and two samples either side, and more
    /// when the window moves past them; without one, reads the whole ring from `polar` (the
    /// first frame). A window that would reach beyond `2h` of c0 fails the ring (its centre has
    /// moved more than `h`, so it could not count anyway).
    #[allow(clippy::too_many_arguments)]
    pub(super) fn fine_ring(
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
    /// [`crate::track::polar::PolarGrid::sample_span`] does.
    pub(super) fn sample_bins(
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
pub(super) struct Window {
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
    pub(super) fn sums(&self, v: &[f32]) -> (f32, f32) {
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

/// The bins a fine centre reads on one ring: the multiples of `m`.
pub(super) struct Lattice {
    m: i64,
    mf: f64,
    /// Flank samples each side: as many as fill the flank's bins, at least one.
    nf: i64,
}

impl Lattice {
    pub(super) fn new(stride: usize, flank_bins: i64) -> Lattice {
        let m = stride.max(1) as i64;
        Lattice {
            m,
            mf: m as f64,
            nf: ((flank_bins as f64 / m as f64).round() as i64).max(1),
        }
    }
    /// The lattice bin at or below `x`.
    pub(super) fn down(&self, x: f64) -> i64 {
        floor_i64(x / self.mf) * self.m
    }
    /// The lattice bin at or above `x`.
    pub(super) fn up(&self, x: f64) -> i64 {
        -floor_i64(-x / self.mf) * self.m
    }
    /// Bins the flank samples reach beyond a window's edge.
    pub(super) fn flank_bins(&self) -> i64 {
        self.m * self.nf
    }
}

/// ⌊x⌋ for |x| < 2⁵³, without a call into the maths library (which `floor` is on processors
/// without SSE4.1's rounding instruction): truncate, then step down for negative fractions.
#[inline(always)]
pub(super) fn floor_i64(x: f64) -> i64 {
    let t = x as i64;
    t - i64::from((t as f64) > x)
}

/// Half-length `h` of the fine centroid window and its flank length `f`, bins, for a stripe
/// half-width of `hw_b` bins on a ring of `n` bins.
pub(super) fn fine_extent(hw_b: f64, flank: f64, n: usize) -> (f64, i64) {
    let h = (hw_b + (0.6 * hw_b).max(3.0)).min(n as f64 / 4.0);
    let f = flank.ceil().min(n as f64 / 8.0) as i64;
    (h, f)
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    proptest! {
        #[test]
        fn floor_i64_equals_floor(x in -1e9f64..1e9) {
            prop_assert_eq!(floor_i64(x), x.floor() as i64);
            let whole = x.round();
            prop_assert_eq!(floor_i64(whole), whole as i64);
        }
    }
}
