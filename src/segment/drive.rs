//! The drive end's blow onsets: its rises over every scale, the scale whose rises stand
//! clearest above the noise, and each rise's onset walked back to where the drive end left
//! its rest level (steps 3 to 6 of the segment module's doc). Part of the segment stage: it
//! must never import mechanics, report, `analyze`, `batch` or the CLI.

use crate::stats::{median, quantile, weighted_median};

use super::{
    CLEAR_Z, HI_FRACTION, MIN_FRACTION, NEAR_BEST, PEAK_Z, REFRACTORY_FRACTION, SCALES,
    STRONG_FRACTION,
};

/// One rapid advance of the drive end.
#[derive(Debug, Clone, Copy)]
struct Rise {
    /// Last sample at the rest level before the rise (the trough).
    trough: usize,
    /// Highest sample of the rise.
    peak: usize,
    /// Climb from trough to peak, degrees.
    amp: f64,
}

/// Rise of the drive end over `s` samples at every start sample.
fn rise_over(x: &[f64], s: usize) -> Vec<f64> {
    if x.len() <= s {
        return Vec::new();
    }
    (0..x.len() - s).map(|i| x[i + s] - x[i]).collect()
}

/// The blow rise Qₛ at scale s: median of the run maxima of uₛ above `PEAK_Z`·σᵤ.
fn blow_rise(u: &[f64], sigma_u: f64) -> Option<f64> {
    run_maxima_quantile(u, sigma_u, 0.5)
}

/// The `q` quantile of the run maxima of uₛ above `PEAK_Z`·σᵤ.
fn run_maxima_quantile(u: &[f64], sigma_u: f64, q: f64) -> Option<f64> {
    let floor = PEAK_Z * sigma_u;
    let mut maxima = Vec::new();
    let mut run_max: Option<f64> = None;
    for &v in u {
        if v > floor {
            run_max = Some(run_max.map_or(v, |m: f64| m.max(v)));
        } else if let Some(m) = run_max.take() {
            maxima.push(m);
        }
    }
    maxima.extend(run_max);
    quantile(&maxima, q)
}

/// Onsets of every blow in the drive angle `raw` (degrees, gap-filled copy `x`) with noise
/// `sigma`, and the scale used. Rises are looked for among measured samples only, so a rise
/// hidden partly in a gap still counts as one step; indices are mapped back afterwards.
pub(super) fn drive_onsets(raw: &[Option<f64>], x: &[f64], sigma: f64) -> (Vec<usize>, usize, f64) {
    let idx: Vec<usize> = (0..raw.len()).filter(|&i| raw[i].is_some()).collect();
    let xc: Vec<f64> = idx.iter().map(|&i| x[i]).collect();
    let n = xc.len();
    if n < 3 {
        return (Vec::new(), 0, 0.0);
    }
    let sigma_u = sigma * 2f64.sqrt();
    let scales: Vec<usize> = SCALES
        .iter()
        .copied()
        .filter(|&s| s == 1 || s * 4 <= n)
        .collect();
    // (scale, Qₛ/σᵤ, rises found at that scale)
    let mut tried: Vec<(usize, f64, Vec<Rise>)> = Vec::new();
    for &s in &scales {
        let u = rise_over(&xc, s);
        if let Some(q) = blow_rise(&u, sigma_u) {
            tried.push((s, q / sigma_u, rises_at(&xc, s, sigma)));
        }
    }
    // A window longer than a third of the blow spacing it finds blurs blows together.
    let any_pair = tried.iter().any(|t| t.2.len() >= 2);
    let valid: Vec<&(usize, f64, Vec<Rise>)> = tried
        .iter()
        .filter(|(s, _, rises)| {
            !any_pair || median_spacing(rises).is_some_and(|p| (*s as f64) <= p / 3.0)
        })
        .collect();
    let Some(best) = valid.iter().copied().max_by(|a, b| a.1.total_cmp(&b.1)) else {
        return (Vec::new(), 0, 0.0);
    };
    let n_best = best.2.len();
    let best_ratio = best.1;
    let chosen = valid
        .iter()
        .copied()
        .find(|(_, r, rises)| *r >= CLEAR_Z && rises.len() >= n_best)
        .or_else(|| {
            valid
                .iter()
                .copied()
                .find(|(_, r, rises)| *r >= NEAR_BEST * best_ratio && rises.len() >= n_best)
        })
        .unwrap_or(best);
    let (s, rises) = (chosen.0, chosen.2.clone());
    let onsets = rises
        .iter()
        .map(|r| {
            let (trough, peak) = (idx[r.trough], idx[r.peak]);
            // Rest level: median of the measured samples ending at the trough, so that one
            // low noise sample does not set it.
            let rest: Vec<f64> = idx[r.trough.saturating_sub(s)..=r.trough]
                .iter()
                .map(|&i| x[i])
                .collect();
            let base = median(&rest).unwrap_or(x[trough]).min(x[peak]);
            leave_level(x, trough, base, peak, sigma)
        })
        .collect();
    // Median speed of the rises, degrees per measured sample.
    let speeds: Vec<f64> = rises
        .iter()
        .map(|r| r.amp / (r.peak - r.trough).max(1) as f64)
        .collect();
    (dedup_sorted(onsets), s, median(&speeds).unwrap_or(0.0))
}

/// Median spacing of rise troughs, samples.
fn median_spacing(rises: &[Rise]) -> Option<f64> {
    let gaps: Vec<f64> = rises
        .windows(2)
        .map(|w| (w[1].trough as f64) - (w[0].trough as f64))
        .collect();
    median(&gaps)
}

/// Rises of the drive end at scale `s` after the amplitude and refractory filters.
fn rises_at(x: &[f64], s: usize, sigma: f64) -> Vec<Rise> {
    let n = x.len();
    let sigma_u = sigma * 2f64.sqrt();
    let u = rise_over(x, s);
    let Some(q) = run_maxima_quantile(&u, sigma_u, 0.1) else {
        return Vec::new();
    };
    let hi = (HI_FRACTION * q).max(PEAK_Z * sigma_u);
    let lo = (0.5 * hi).max(3.0 * sigma_u);
    // Hysteresis runs [a, b] of u.
    let mut runs: Vec<(usize, usize)> = Vec::new();
    let mut start: Option<usize> = None;
    let mut armed = false;
    for (i, &v) in u.iter().enumerate() {
        if v >= lo {
            if start.is_none() {
                start = Some(i);
                armed = false;
            }
            armed |= v >= hi;
        } else if let Some(a) = start.take()
            && armed
        {
            runs.push((a, i - 1));
        }
    }
    if let Some(a) = start
        && armed
    {
        runs.push((a, u.len() - 1));
    }
    let mut rises: Vec<Rise> = Vec::new();
    for (a, b) in runs {
        let top = (b + s).min(n - 1);
        let peak = argmax(x, a, top);
        let trough = argmin(x, a.saturating_sub(s), peak);
        let rise = Rise {
            trough,
            peak,
            amp: x[peak] - x[trough],
        };
        match rises.last_mut() {
            // Overlapping rise regions are one rise.
            Some(prev) if rise.trough <= prev.peak => {
                let peak = if x[rise.peak] > x[prev.peak] {
                    rise.peak
                } else {
                    prev.peak
                };
                prev.peak = peak;
                prev.amp = x[peak] - x[prev.trough];
            }
            _ => rises.push(rise),
        }
    }
    rises.retain(|r| r.amp >= PEAK_Z * sigma_u);
    // Ringing and rebounds: of two rises closer than half a blow interval only the larger
    // is a blow. The interval comes from the strong rises (at least STRONG_FRACTION of the
    // amplitude-weighted median), which are blows whatever else is there. The reference is
    // refreshed from the survivors, three times (each pass only removes rises).
    for _ in 0..3 {
        let amps: Vec<f64> = rises.iter().map(|r| r.amp).collect();
        let Some(typical) = weighted_median(&amps) else {
            break;
        };
        rises.retain(|r| r.amp >= MIN_FRACTION * typical);
        let strong: Vec<Rise> = rises
            .iter()
            .copied()
            .filter(|r| r.amp >= STRONG_FRACTION * typical)
            .collect();
        let Some(p) = median_spacing(&strong).or_else(|| median_spacing(&rises)) else {
            break;
        };
        let min_gap = REFRACTORY_FRACTION * p;
        let mut kept: Vec<Rise> = Vec::with_capacity(rises.len());
        for r in rises {
            match kept.last_mut() {
                Some(prev) if ((r.trough - prev.trough) as f64) < min_gap => {
                    if r.amp > prev.amp {
                        *prev = r;
                    }
                }
                _ => kept.push(r),
            }
        }
        rises = kept;
    }
    rises
}

/// First index of the largest value in `x[a..=b]`.
pub(super) fn argmax(x: &[f64], a: usize, b: usize) -> usize {
    let mut best = a;
    for i in a..=b {
        if x[i] > x[best] {
            best = i;
        }
    }
    best
}

/// Last index of the smallest value in `x[a..=b]` (the last sample at the rest level).
fn argmin(x: &[f64], a: usize, b: usize) -> usize {
    let mut best = a;
    for i in a..=b {
        if x[i] <= x[best] {
            best = i;
        }
    }
    best
}

/// First sample after `from` (up to `to`) that has left `base`: crossing of
/// max(3σ, 10 % of the rise), walked back while still above max(2σ, 1 % of the rise).
pub(super) fn leave_level(x: &[f64], from: usize, base: f64, to: usize, sigma: f64) -> usize {
    let rise = x[to] - base;
    let cross = (3.0 * sigma).max(0.10 * rise);
    let keep = (3.0 * sigma).max(0.002 * rise);
    let mut c = (from + 1..=to).find(|&i| x[i] - base > cross).unwrap_or(to);
    while c > from + 1 && x[c - 1] - base > keep {
        c -= 1;
    }
    c.max(from.min(to))
}

/// Removes repeated onsets (two rises that refined to the same sample), keeping order.
fn dedup_sorted(mut v: Vec<usize>) -> Vec<usize> {
    v.sort_unstable();
    v.dedup();
    v
}
