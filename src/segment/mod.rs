//! Stage 3, segment: splits the motion into impact blows.
//!
//! In: a [`Trace`]. Out: the onset sample of every blow (the first sample of the drive end's
//! rapid advance after an impact), the nut end's onset within each blow, and the blow rate.
//!
//! # Method
//!
//! Nothing about the tool's blow rate is assumed; every scale comes from the trace itself, so
//! the same code works from about 10 to about 400 frames per blow.
//!
//! 1. **Gaps.** Lost samples (`None`, or a non-finite angle) are bridged by straight lines for
//!    detection only; every quantity reported later uses measured samples.
//! 2. **Noise.** The angle noise σ is estimated from second differences,
//!    σ = 1.4826 · MAD(Δ²x) / √6. Second differences remove the smooth part of the motion
//!    (spring-back, creep), so what is left is noise (difference-based variance estimation:
//!    Gasser, Sroka & Jennen-Steinmetz, *Biometrika* 73 (1986) 625–633, from memory). The
//!    median absolute deviation, scaled by 1.4826 to match a Gaussian σ, ignores the few
//!    large values at the corners of each blow (Hampel, *JASA* 69 (1974) 383–393; Rousseeuw &
//!    Croux, *JASA* 88 (1993) 1273–1283). σ is floored at [`NOISE_FLOOR_DEG`], below anything
//!    a tracker resolves, so a noise-free trace does not make every wiggle significant.
//! 3. **Rise at several scales.** For each window length s in a ladder of 1 to 64 samples,
//!    uₛ(i) = x(i+s) − x(i) is how far the drive end advanced in s samples; its noise is
//!    σᵤ = σ·√2. The *blow rise* at scale s, Qₛ, is the median of the run maxima of uₛ
//!    above [`PEAK_Z`]·σᵤ (a one-sided Gaussian tail of 6 σ is about 1 in 10⁹ samples, so
//!    noise alone almost never gets there). A scale is usable only if its window is at
//!    most a third of the spacing of the blows it finds (a longer window blurs blows
//!    together). Of the usable scales, the one used is the smallest at which
//!    Qₛ ≥ [`CLEAR_Z`]·σᵤ and which finds at least as many blows (steps 4 and 5) as the
//!    usable scale with the best Qₛ/σᵤ; failing that, the smallest within [`NEAR_BEST`] of
//!    that best ratio with as many blows; failing that, the best. So the window is short
//!    enough to keep neighbouring blows apart, long enough to lift a slow rise (high frame
//!    rate) out of the noise, and not fooled by a short window that sees only the few
//!    steepest rises (for example across gaps).
//! 4. **Rises.** A rise is a run of uₛ ≥ τ_lo containing a sample ≥ τ_hi, with
//!    τ_hi = max([`HI_FRACTION`]·Q₁₀, 6σᵤ) and τ_lo = max(τ_hi/2, 3σᵤ), where Q₁₀ is the 10th
//!    percentile of the run maxima of step 3 (low, so that weak blows after strong ones — a
//!    nut that ran freely and then tightened — still count). The two thresholds
//!    (hysteresis) stop noise from splitting one rise into several. A rise's amplitude is
//!    the drive end's climb from the trough before the run to the peak after it; rises
//!    under 6σᵤ are dropped (6σ: about one false rise per 10⁹ samples of pure noise, so
//!    even a long clip with a single blow gets no false one).
//! 5. **Impacts, not ringing.** The reference amplitude is the amplitude-weighted median
//!    of the rises (the size below which half the total climb lies), so that many small
//!    ringing rises after each blow do not drag it down. The blow interval P is the median
//!    spacing of the strong rises (at least [`STRONG_FRACTION`] of the reference): blows,
//!    whatever ringing, rebound or weak blows are also there. Of two rises closer than
//!    [`REFRACTORY_FRACTION`]·P only the larger is kept: a blow's ringing follows it within
//!    a fraction of the interval, and the tool's rate jitters far less than half an
//!    interval. A rise below [`MIN_FRACTION`] of the reference is never a blow (the tail of
//!    a long ring); a weak blow, a tenth of the strong ones, a whole interval after a strong
//!    one is kept. These steps are repeated three times with the reference refreshed from
//!    the survivors.
//! 6. **Onset.** The rest level is the median of the s + 1 measured samples ending at the
//!    trough. From the trough, the onset is the first sample more than max(3σ, 10 % of the
//!    rise) above the rest level, walked back while the previous sample is still more than
//!    max(3σ, 0.2 % of the rise) above it: the first sample that has visibly left the rest
//!    level (3σ: a sample at rest passes it about once in 700). Spring-back before the blow ends at the trough, so a drive end
//!    moving backwards between blows never triggers a blow.
//! 7. **Nut onset.** The nut rests between blows, so its level before a blow and after it
//!    are means over its quiet spells (samples that agree with their running mean within
//!    3σ). It moved in the blow when the settled advance exceeds
//!    max([`NUT_MIN_MOVE_DEG`], 5 × its noise σ_nut·√(1/q₀ + 1/q₁)), or its highest angle
//!    rises more than max([`NUT_MIN_MOVE_DEG`], 5σ_nut) above the level before. Its onset is
//!    found as in step 6, on a trailing mean wide enough to lift the advance 6 noise widths
//!    above the noise when the advance is small.
//! 8. **Rate.** Blows per minute = 60 / the mean of the onset intervals that lie within
//!    [`RATE_SCREEN`] of their median: the median screens out an interval that is not one
//!    blow (a pause, a blow lost in a gap) as robustly as the median itself, while the mean
//!    of the rest removes most of the whole-frame rounding of each interval (±1 frame in 10
//!    frames is ±10 % on one interval). Its spread is the standard deviation of the
//!    per-interval rates.
//! 9. **Direction check.** The same search runs on the negated drive angle; if it finds
//!    blows whose rises are more than [`REVERSED_SPEED`] times faster than the tightening
//!    ones (or there are none that way), the rig's `tighten` is probably reversed and a
//!    warning says so: the "blows" found would be the spring-backs.
//!
//! Layering: uses only the trace from track and the shared `stats`; it must never import
//! mechanics, report, `analyze`, `batch` or the CLI (`tests/it/layering.rs` checks).

mod drive;
mod nut;

use crate::stats::{mad, median};
use crate::track::Trace;
use crate::units::Angle;
use crate::warning::Warning;

use drive::drive_onsets;
use nut::nut_onset;

/// One blow, as sample indices into the trace.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Blow {
    /// First sample of the drive end's rapid advance.
    pub onset: usize,
    /// One past the last sample of this blow: the next blow's onset, or the trace length.
    pub end: usize,
    /// First sample of the nut end's advance within the blow, if it moved.
    pub nut_onset: Option<usize>,
}

/// Blows found in a trace and the blow rate.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Segmentation {
    /// Blows in time order, non-overlapping.
    pub blows: Vec<Blow>,
    /// Blow rate, blows per minute: 60 / the median-screened mean interval (None with fewer
    /// than two blows).
    pub rate_per_min: Option<f64>,
    /// Spread of the blow rate (standard deviation of per-interval rates), blows per minute.
    pub rate_spread_per_min: Option<f64>,
    /// Estimated angle noise of the drive end (σ, one sample), when measurable.
    pub drive_noise: Option<Angle>,
    /// Estimated angle noise of the nut end (σ, one sample), when measurable.
    pub nut_noise: Option<Angle>,
    /// The rise window used for detection, samples (0 when nothing was detected).
    pub scale_samples: usize,
    /// Data-quality notes.
    pub warnings: Vec<Warning>,
}

/// Re-indexes blows found on a trace cut to its captured frames
/// ([`crate::track::synthetic::captured_only`]) into the whole trace: `kept[i]` is the
/// whole-trace index of captured sample i, and `n` the whole trace's length.
pub fn reindex_blows(blows: &mut [Blow], kept: &[usize], n: usize) {
    let at = |i: usize| kept.get(i).copied().unwrap_or(n);
    for b in blows {
        b.onset = at(b.onset);
        b.end = at(b.end);
        b.nut_onset = b.nut_onset.map(at);
    }
}

/// Lowest angle noise assumed, degrees: below what any tracker resolves from video.
pub const NOISE_FLOOR_DEG: f64 = 0.002;
/// Window lengths tried, samples (about √2 apart).
const SCALES: [usize; 12] = [1, 2, 3, 4, 6, 8, 12, 16, 24, 32, 48, 64];
/// A run maximum of uₛ counts towards the blow rise only above this many σᵤ.
pub const PEAK_Z: f64 = 6.0;
/// A scale is clear enough when the blow rise is this many σᵤ.
pub const CLEAR_Z: f64 = 10.0;
/// When no scale is clear, the smallest scale within this fraction of the best Qₛ/σᵤ is
/// used: a longer window gains little there and starts to merge neighbouring blows.
pub const NEAR_BEST: f64 = 0.8;
/// Upper hysteresis threshold as a fraction of the blow rise.
pub const HI_FRACTION: f64 = 0.35;
/// A rise below this fraction of the amplitude-weighted median is not a blow (the tail of a
/// ring after the spring-back, a tremor); a tenth, as when a free-running nut tightens, is.
pub const MIN_FRACTION: f64 = 0.05;
/// A rise of at least this fraction of the amplitude-weighted median is surely a blow, and
/// sets the blow interval.
pub const STRONG_FRACTION: f64 = 0.6;
/// Two blows closer than this fraction of the median interval are one blow and its ringing.
pub const REFRACTORY_FRACTION: f64 = 0.5;
/// Intervals further than this fraction from the median interval are left out of the blow
/// rate (a blow lost in a gap, a pause of the trigger).
pub const RATE_SCREEN: f64 = 0.25;
/// Rises in the loosening direction this many times faster than the tightening ones suggest
/// a reversed `tighten` in the rig.
pub const REVERSED_SPEED: f64 = 2.0;
/// Smallest nut rise, degrees, that counts as the nut moving within a blow.
pub const NUT_MIN_MOVE_DEG: f64 = 0.05;

/// Finds the blows in a trace from the drive end's motion.
///
/// Never panics: an empty, all-lost or motionless trace gives no blows and a
/// [`Warning::FewBlows`].
///
/// ```
/// use twistmark_scenes::synth::{Scenario, simulate};
/// use twistmark::{Angle, TimeBase, Trace};
/// // The project's invented bench: a fast tool filmed at 2,000 fps, with known truth.
/// let sc = Scenario::preset("fast-tool").unwrap();
/// let truth = simulate(&sc);
/// let n = truth.trace.drive_deg.len();
/// let angles = |v: &[f64]| v.iter().map(|&d| Some(Angle::from_deg(d))).collect();
/// let trace = Trace {
///     time_base: TimeBase::from_fps(truth.fps, "fps").unwrap(),
///     times_s: Vec::new(),
///     synthetic: Vec::new(),
///     frames: (0..n as u64).collect(),
///     drive: angles(&truth.trace.drive_deg),
///     nut: angles(&truth.trace.nut_deg),
///     drive_confidence: vec![1.0; n],
///     nut_confidence: vec![1.0; n],
///     drive_zero_screen: None,
///     nut_zero_screen: None,
/// };
/// let seg = twistmark::segment::find_blows(&trace);
/// assert_eq!(seg.blows.len(), truth.blows.len());
/// for (b, t) in seg.blows.iter().zip(&truth.blows) {
///     // Within one frame: an impact just before a frame instant shows almost no motion yet.
///     assert!((b.onset as u64).abs_diff(t.frame) <= 1);
/// }
/// let rate = seg.rate_per_min.unwrap();
/// assert!((rate - truth.summary.blow_rate_per_min.unwrap()).abs() < 0.01 * rate);
/// ```
pub fn find_blows(trace: &Trace) -> Segmentation {
    let n = trace.len().min(trace.drive.len()).min(trace.nut.len());
    let drive = degrees(&trace.drive[..n]);
    let nut = degrees(&trace.nut[..n]);
    let drive_sigma = noise_sigma(&drive);
    let nut_sigma = noise_sigma(&nut);
    let mut seg = Segmentation {
        drive_noise: drive_sigma.map(Angle::from_deg),
        nut_noise: nut_sigma.map(Angle::from_deg),
        ..Segmentation::default()
    };
    if let (Some(x), Some(sigma)) = (fill_gaps(&drive), drive_sigma) {
        let (onsets, scale, speed) = drive_onsets(&drive, &x, sigma);
        seg.scale_samples = scale;
        // Rapid steps in the loosening direction, much faster than the tightening ones, mean
        // the rig's tightening direction is probably reversed (the "blows" found would be
        // the spring-backs).
        let reversed: Vec<Option<f64>> = drive.iter().map(|d| d.map(|v| -v)).collect();
        if let Some(xr) = fill_gaps(&reversed) {
            let (back, _, back_speed) = drive_onsets(&reversed, &xr, sigma);
            if back.len() >= 2 && (onsets.len() < 2 || back_speed > REVERSED_SPEED * speed) {
                seg.warnings.push(Warning::Note(
                    "the drive mark makes its rapid steps in the loosening direction: check \
                     \"tighten\" of the marks in the rig (cw or ccw as seen on screen)"
                        .into(),
                ));
            }
        }
        let nut_filled = fill_gaps(&nut);
        for (k, &onset) in onsets.iter().enumerate() {
            let end = onsets.get(k + 1).copied().unwrap_or(n);
            let prev = k.checked_sub(1).map_or(0, |j| onsets[j]);
            let nut_onset = match (&nut_filled, nut_sigma) {
                (Some(y), Some(s)) => nut_onset(&nut, y, s, onset, end, prev),
                _ => None,
            };
            seg.blows.push(Blow {
                onset,
                end,
                nut_onset,
            });
        }
    }
    let onset_times: Vec<f64> = seg
        .blows
        .iter()
        .filter(|b| b.onset < trace.len())
        .map(|b| trace.t_s(b.onset))
        .collect();
    (seg.rate_per_min, seg.rate_spread_per_min) = blow_rate(&onset_times);
    if seg.blows.len() < 2 {
        seg.warnings.push(Warning::FewBlows {
            count: seg.blows.len(),
        });
    }
    seg
}

/// Blow rate and its spread, blows per minute, from onset times in seconds (the trace's
/// times: frame index / capture rate, or the frames' timestamps; step 8 of the module doc).
/// None with fewer than two blows.
fn blow_rate(onset_times_s: &[f64]) -> (Option<f64>, Option<f64>) {
    let rates: Vec<f64> = onset_times_s
        .windows(2)
        .filter_map(|w| {
            let dt_s = w[1] - w[0];
            (dt_s > 0.0).then(|| 60.0 / dt_s)
        })
        .collect();
    if rates.is_empty() {
        return (None, None);
    }
    let intervals_s: Vec<f64> = rates.iter().map(|r| 60.0 / r).collect();
    let rate = median(&intervals_s).map(|med| {
        let kept: Vec<f64> = intervals_s
            .iter()
            .copied()
            .filter(|dt| (dt - med).abs() <= RATE_SCREEN * med)
            .collect();
        let mean_s = kept.iter().sum::<f64>() / kept.len().max(1) as f64;
        60.0 / if mean_s > 0.0 { mean_s } else { med }
    });
    let mean = rates.iter().sum::<f64>() / rates.len() as f64;
    let var = rates.iter().map(|r| (r - mean).powi(2)).sum::<f64>() / rates.len() as f64;
    (rate, Some(var.sqrt()))
}

/// Angles in degrees, with non-finite values treated as lost.
pub(crate) fn degrees(v: &[Option<Angle>]) -> Vec<Option<f64>> {
    v.iter()
        .map(|a| a.map(Angle::deg).filter(|d| d.is_finite()))
        .collect()
}

/// Bridges lost samples with straight lines (held flat before the first and after the last
/// measured sample). None when nothing was measured.
pub(crate) fn fill_gaps(v: &[Option<f64>]) -> Option<Vec<f64>> {
    let first = v.iter().position(Option::is_some)?;
    let mut out = vec![0.0; v.len()];
    let mut last_i = first;
    let mut last_v = v[first]?;
    for slot in out.iter_mut().take(first + 1) {
        *slot = last_v;
    }
    for i in first + 1..v.len() {
        if let Some(val) = v[i] {
            let gap = (i - last_i) as f64;
            for (j, slot) in out.iter_mut().enumerate().take(i).skip(last_i + 1) {
                let f = (j - last_i) as f64 / gap;
                *slot = last_v + f * (val - last_v);
            }
            out[i] = val;
            last_i = i;
            last_v = val;
        }
    }
    for slot in out.iter_mut().skip(last_i + 1) {
        *slot = last_v;
    }
    Some(out)
}

/// Per-sample noise σ in degrees from the MAD of second differences of consecutive measured
/// samples (see the module doc), floored at [`NOISE_FLOOR_DEG`]. None with fewer than three
/// measured samples in a row anywhere.
pub(crate) fn noise_sigma(v: &[Option<f64>]) -> Option<f64> {
    let d2: Vec<f64> = v
        .windows(3)
        .filter_map(|w| Some(w[2]? - 2.0 * w[1]? + w[0]?))
        .collect();
    if d2.is_empty() {
        return if v.iter().any(Option::is_some) {
            Some(NOISE_FLOOR_DEG)
        } else {
            None
        };
    }
    let mad = mad(&d2)?;
    Some((1.4826 * mad / 6f64.sqrt()).max(NOISE_FLOOR_DEG))
}

/// Samples used to estimate a rest level before a blow: a tenth of the median blow length,
/// between 1 and 16 samples.
pub(crate) fn rest_window(onsets: &[usize], n: usize) -> usize {
    let lengths: Vec<f64> = onsets
        .windows(2)
        .map(|w| (w[1] - w[0]) as f64)
        .chain(
            onsets
                .last()
                .map(|&o| (n - o) as f64)
                .filter(|_| onsets.len() == 1),
        )
        .collect();
    let len = median(&lengths).unwrap_or(10.0);
    ((len / 10.0).floor() as usize).clamp(1, 16)
}

#[cfg(test)]
pub(crate) mod tests {
    use super::*;
    use crate::units::TimeBase;
    use rand::rngs::ChaCha8Rng;
    use rand::{RngExt, SeedableRng};

    /// A synthetic drive/nut trace: each blow rises over `rise` samples (half-sine velocity),
    /// springs back by `back_deg` over a third of the interval, with the nut advancing
    /// `nut_deg` per blow after a lag. Returns the trace and the true onsets.
    pub(crate) struct Scene {
        pub period: f64,
        pub blows: usize,
        pub lead: usize,
        pub rise: usize,
        pub amp_deg: f64,
        pub back_deg: f64,
        pub nut_deg: f64,
        pub nut_lag: usize,
        pub noise_deg: f64,
        pub jitter: f64,
        pub gaps: usize,
        pub seed: u64,
        /// From this blow on (0-based), rise, spring-back and nut advance are scaled by
        /// `late_scale` (a nut that runs freely first and then tightens).
        pub late_from: usize,
        pub late_scale: f64,
        /// Amplitude of a decaying ring on the drive end after each rise, degrees (period
        /// twice the rise time, decaying by e every period).
        pub ring_deg: f64,
    }

    impl Scene {
        pub fn new(period: f64) -> Scene {
            Scene {
                period,
                blows: 12,
                lead: (period / 2.0) as usize + 3,
                rise: ((period / 12.0).round() as usize).max(1),
                amp_deg: 5.0,
                back_deg: 2.5,
                nut_deg: 1.0,
                nut_lag: ((period / 30.0).round() as usize).max(1),
                noise_deg: 0.0,
                jitter: 0.0,
                gaps: 0,
                seed: 7,
                late_from: usize::MAX,
                late_scale: 1.0,
                ring_deg: 0.0,
            }
        }

        pub fn build(&self) -> (Trace, Vec<usize>) {
            let mut rng = ChaCha8Rng::seed_from_u64(self.seed);
            let mut onsets = Vec::new();
            let mut t = self.lead as f64;
            for _ in 0..self.blows {
                onsets.push(t.round() as usize);
                t += self.period * (1.0 + self.jitter * (rng.random::<f64>() * 2.0 - 1.0));
            }
            let n = (t + self.period * 0.3) as usize;
            let mut drive = vec![0.0f64; n];
            let mut nut = vec![0.0f64; n];
            let back_len = ((self.period / 3.0) as usize).max(1);
            for (k, &o) in onsets.iter().enumerate() {
                let next = onsets.get(k + 1).copied().unwrap_or(n);
                let g = if k >= self.late_from {
                    self.late_scale
                } else {
                    1.0
                };
                for i in o..n {
                    let tau = (i - o + 1) as f64;
                    // Drive: rise then spring-back (both permanent offsets from here on).
                    let r = self.rise as f64;
                    let up = if tau >= r {
                        1.0
                    } else {
                        (1.0 - (std::f64::consts::PI * tau / r).cos()) / 2.0
                    };
                    let after = tau - r;
                    let back = if after <= 0.0 {
                        0.0
                    } else if after >= back_len as f64 {
                        1.0
                    } else {
                        after / back_len as f64
                    };
                    let ring = if after > 0.0 {
                        let period = 2.0 * r;
                        self.ring_deg
                            * (-after / period).exp()
                            * (2.0 * std::f64::consts::PI * after / period).sin()
                    } else {
                        0.0
                    };
                    drive[i] += g * (self.amp_deg * up - self.back_deg * back + ring);
                    // Nut: advances over `rise` samples after its lag.
                    let nl = tau - self.nut_lag as f64;
                    let nu = if nl <= 0.0 {
                        0.0
                    } else if nl >= r {
                        1.0
                    } else {
                        nl / r
                    };
                    nut[i] += g * self.nut_deg * nu;
                }
                let _ = next;
            }
            let mut d: Vec<Option<Angle>> = drive
                .iter()
                .map(|&v| {
                    let e = self.noise_deg * gauss(&mut rng);
                    Some(Angle::from_deg(v + e))
                })
                .collect();
            let mut nn: Vec<Option<Angle>> = nut
                .iter()
                .map(|&v| Some(Angle::from_deg(v + self.noise_deg * gauss(&mut rng))))
                .collect();
            for _ in 0..self.gaps {
                let a = rng.random_range(0..n);
                // Gaps shorter than the blow's spring-back: a blow hidden whole in a gap
                // cannot be seen as a rise by any method.
                let len = rng.random_range(1..=((self.period / 20.0) as usize).max(2));
                for i in a..(a + len).min(n) {
                    d[i] = None;
                    nn[i] = None;
                }
            }
            let trace = Trace {
                time_base: TimeBase::from_fps(1000.0, "test").unwrap(),
                times_s: Vec::new(),
                synthetic: Vec::new(),
                frames: (0..n as u64).collect(),
                drive_confidence: vec![1.0; n],
                nut_confidence: vec![1.0; n],
                drive: d,
                nut: nn,
                drive_zero_screen: None,
                nut_zero_screen: None,
            };
            (trace, onsets)
        }
    }

    pub(crate) fn gauss(rng: &mut ChaCha8Rng) -> f64 {
        // Box–Muller.
        let u1: f64 = rng.random::<f64>().max(1e-12);
        let u2: f64 = rng.random();
        (-2.0 * u1.ln()).sqrt() * (2.0 * std::f64::consts::PI * u2).cos()
    }

    /// Detected onsets match the truth one-to-one within `tol` samples.
    fn assert_matches(found: &[Blow], truth: &[usize], tol: usize, what: &str) {
        let f: Vec<usize> = found.iter().map(|b| b.onset).collect();
        assert_eq!(f.len(), truth.len(), "{what}: found {f:?}, truth {truth:?}");
        for (a, b) in f.iter().zip(truth) {
            assert!(
                a.abs_diff(*b) <= tol,
                "{what}: onset {a} vs truth {b}; found {f:?}, truth {truth:?}"
            );
        }
    }

    #[test]
    fn finds_every_blow_clean_from_10_to_400_samples_per_blow() {
        for period in [10.0, 17.0, 40.0, 100.0, 400.0] {
            let sc = Scene::new(period);
            let (trace, truth) = sc.build();
            let seg = find_blows(&trace);
            assert_matches(&seg.blows, &truth, 1, &format!("clean, {period} per blow"));
            let rate = seg.rate_per_min.unwrap();
            assert!((rate - 60_000.0 / period).abs() < 0.02 * 60_000.0 / period);
        }
    }

    #[test]
    fn finds_every_blow_with_noise_jitter_and_gaps() {
        for period in [10.0, 17.0, 40.0, 100.0, 400.0] {
            for seed in 1..=4u64 {
                let mut sc = Scene::new(period);
                sc.noise_deg = 0.2;
                sc.jitter = 0.08;
                sc.gaps = 6;
                sc.seed = seed;
                let (trace, truth) = sc.build();
                let seg = find_blows(&trace);
                let tol = ((period / 20.0).ceil() as usize).max(2);
                assert_matches(
                    &seg.blows,
                    &truth,
                    tol,
                    &format!("noisy, {period} per blow, seed {seed}"),
                );
            }
        }
    }

    #[test]
    fn weak_blows_after_strong_ones_are_all_found() {
        // Free-running nut first (blows 1-8 rise 30°), then a tight joint (blows 9-12 rise
        // 3°): a tenth of the early rises, and only a third of the blows.
        for period in [17.0, 40.0, 100.0, 400.0] {
            let mut sc = Scene::new(period);
            sc.amp_deg = 30.0;
            sc.back_deg = 5.0;
            sc.nut_deg = 20.0;
            sc.late_from = 8;
            sc.late_scale = 0.1;
            sc.noise_deg = 0.05;
            let (trace, truth) = sc.build();
            let seg = find_blows(&trace);
            let tol = ((period / 20.0).ceil() as usize).max(2);
            assert_matches(&seg.blows, &truth, tol, &format!("weak late, {period}"));
        }
    }

    #[test]
    fn ringing_after_each_blow_is_not_a_blow() {
        // A ring of 1.5° (30 % of the 5° rise) after every blow, whose upswings are as fast
        // as the rise itself.
        for period in [40.0, 100.0, 400.0] {
            for noise in [0.0, 0.05] {
                let mut sc = Scene::new(period);
                sc.ring_deg = 1.5;
                sc.noise_deg = noise;
                let (trace, truth) = sc.build();
                let seg = find_blows(&trace);
                let tol = ((period / 20.0).ceil() as usize).max(2);
                assert_matches(
                    &seg.blows,
                    &truth,
                    tol,
                    &format!("ringing, {period}, {noise}"),
                );
            }
        }
    }

    #[test]
    fn random_scenes_have_no_missed_or_extra_blows() {
        // 400 seeded scenes: 10 to 400 samples per blow, noise up to 0.2°, jitter up to
        // 10 %, up to 7 gaps, rings up to 1.5°, rises 2-12°, any spring-back and nut advance.
        let mut rng = ChaCha8Rng::seed_from_u64(99);
        let (mut blows, mut late) = (0usize, 0usize);
        for k in 0..400 {
            let period = 10.0 * 40f64.powf(rng.random::<f64>());
            let mut sc = Scene::new(period);
            sc.noise_deg = rng.random::<f64>() * 0.2;
            sc.jitter = rng.random::<f64>() * 0.1;
            sc.gaps = rng.random_range(0..8);
            sc.ring_deg = if period > 30.0 {
                rng.random::<f64>() * 1.5
            } else {
                0.0
            };
            sc.amp_deg = 2.0 + rng.random::<f64>() * 10.0;
            sc.back_deg = sc.amp_deg * rng.random::<f64>() * 0.8;
            sc.nut_deg = rng.random::<f64>() * (sc.amp_deg - sc.back_deg);
            sc.seed = k;
            sc.blows = rng.random_range(2..15);
            let (trace, truth) = sc.build();
            let seg = find_blows(&trace);
            let f: Vec<usize> = seg.blows.iter().map(|b| b.onset).collect();
            assert_eq!(
                f.len(),
                truth.len(),
                "scene {k}, {period:.1} per blow: {f:?} vs {truth:?}"
            );
            let tol = ((period / 20.0).ceil() as usize).max(2);
            blows += f.len();
            late += f
                .iter()
                .zip(&truth)
                .filter(|(a, b)| a.abs_diff(**b) > tol)
                .count();
        }
        // An onset hidden in a gap cannot be placed better than the gap: allow 1 %.
        assert!(
            late * 100 <= blows,
            "{late} of {blows} onsets off by more than tol"
        );
    }

    #[test]
    fn nut_onset_follows_drive_by_the_lag() {
        let mut sc = Scene::new(100.0);
        sc.nut_lag = 5;
        let (trace, truth) = sc.build();
        let seg = find_blows(&trace);
        assert_eq!(seg.blows.len(), truth.len());
        for b in &seg.blows {
            let lag = b.nut_onset.unwrap() - b.onset;
            assert!((4..=6).contains(&lag), "lag {lag}");
        }
    }

    #[test]
    fn nut_that_does_not_move_has_no_onset() {
        let mut sc = Scene::new(40.0);
        sc.nut_deg = 0.0;
        sc.back_deg = 5.0;
        sc.noise_deg = 0.05;
        let (trace, truth) = sc.build();
        let seg = find_blows(&trace);
        assert_eq!(seg.blows.len(), truth.len());
        assert!(seg.blows.iter().all(|b| b.nut_onset.is_none()));
    }

    #[test]
    fn noise_estimate_matches_the_added_noise() {
        let mut sc = Scene::new(40.0);
        sc.noise_deg = 0.1;
        let (trace, _) = sc.build();
        let s = noise_sigma(&degrees(&trace.drive)).unwrap();
        assert!((s - 0.1).abs() < 0.015, "σ = {s}");
    }

    #[test]
    fn empty_all_lost_and_constant_traces_give_no_blows() {
        let mut sc = Scene::new(40.0);
        sc.blows = 0;
        let (mut trace, _) = sc.build();
        assert!(find_blows(&trace).blows.is_empty());
        trace.drive.iter_mut().for_each(|d| *d = None);
        let seg = find_blows(&trace);
        assert!(seg.blows.is_empty());
        assert_eq!(seg.warnings, vec![Warning::FewBlows { count: 0 }]);
        trace.frames.clear();
        trace.drive.clear();
        trace.nut.clear();
        assert!(find_blows(&trace).blows.is_empty());
    }

    #[test]
    fn blow_rate_ignores_a_missing_blow_and_frame_rounding() {
        // 3,300 blows/min at 2,000 fps: 36.36 frames per blow, onsets rounded to frames, and
        // the blow at 109 missing (a 73-frame interval).
        let onsets: Vec<f64> = [0u64, 36, 73, 145, 182, 218, 255, 291]
            .iter()
            .map(|&f| f as f64 / 2000.0)
            .collect();
        let (rate, spread) = blow_rate(&onsets);
        let rate = rate.unwrap();
        assert!((rate - 3300.0).abs() < 0.01 * 3300.0, "{rate}");
        assert!(spread.unwrap() > 0.0);
        assert_eq!(blow_rate(&[0.0025]), (None, None));
        assert_eq!(blow_rate(&[]), (None, None));
    }

    #[test]
    fn long_traces_with_many_or_one_blow() {
        // 500 blows of 100 samples, and one 200,000-sample blow with a small noisy nut
        // advance: no missed or extra blow, and no false blow from noise in the long dwell
        // (speed is for benchmarks, not for this test).
        let mut sc = Scene::new(100.0);
        sc.blows = 500;
        sc.noise_deg = 0.1;
        let (trace, truth) = sc.build();
        let seg = find_blows(&trace);
        assert_eq!(seg.blows.len(), truth.len());
        let mut sc = Scene::new(200_000.0);
        sc.blows = 1;
        sc.lead = 10;
        sc.rise = 20;
        sc.nut_deg = 0.05;
        sc.noise_deg = 0.1;
        let (trace, _) = sc.build();
        let seg = find_blows(&trace);
        assert_eq!(seg.blows.len(), 1);
        assert!(seg.blows[0].onset.abs_diff(10) <= 2, "{:?}", seg.blows);
    }

    #[test]
    fn blows_that_run_backwards_suggest_checking_tighten() {
        let (mut trace, _) = Scene::new(40.0).build();
        let seg = find_blows(&trace);
        assert!(
            seg.warnings
                .iter()
                .all(|w| !w.to_string().contains("\"tighten\"")),
            "the right way round: no hint"
        );
        for d in trace.drive.iter_mut().chain(trace.nut.iter_mut()) {
            *d = d.map(|a| -a);
        }
        let seg = find_blows(&trace);
        assert!(
            seg.warnings
                .iter()
                .any(|w| w.to_string().contains("\"tighten\"")),
            "{:?}",
            seg.warnings
        );
    }

    mod props {
        use super::*;
        use proptest::prelude::*;

        fn arb_trace() -> impl Strategy<Value = Trace> {
            prop::collection::vec(
                (
                    prop::option::of(-1000.0f64..1000.0),
                    prop::option::of(-1000.0f64..1000.0),
                ),
                0..300,
            )
            .prop_map(|v| {
                let n = v.len();
                Trace {
                    time_base: TimeBase::from_fps(2000.0, "t").unwrap(),
                    times_s: Vec::new(),
                    synthetic: Vec::new(),
                    frames: (5..5 + n as u64).collect(),
                    drive: v.iter().map(|p| p.0.map(Angle::from_deg)).collect(),
                    nut: v.iter().map(|p| p.1.map(Angle::from_deg)).collect(),
                    drive_confidence: vec![1.0; n],
                    nut_confidence: vec![1.0; n],
                    drive_zero_screen: None,
                    nut_zero_screen: None,
                }
            })
        }

        fn check(trace: &Trace) -> Result<(), TestCaseError> {
            let seg = find_blows(trace);
            let n = trace.len();
            for (k, b) in seg.blows.iter().enumerate() {
                prop_assert!(b.onset < b.end && b.end <= n);
                if let Some(next) = seg.blows.get(k + 1) {
                    prop_assert_eq!(b.end, next.onset);
                } else {
                    prop_assert_eq!(b.end, n);
                }
                if let Some(no) = b.nut_onset {
                    prop_assert!(no >= b.onset && no < b.end);
                }
            }
            if let Some(r) = seg.rate_per_min {
                prop_assert!(r.is_finite() && r > 0.0);
            }
            Ok(())
        }

        proptest! {
            #[test]
            fn blows_are_sorted_disjoint_and_inside(trace in arb_trace()) {
                check(&trace)?;
            }

            #[test]
            fn step_traces_never_break_invariants(
                steps in prop::collection::vec((1usize..60, -5.0f64..20.0, prop::bool::ANY), 0..30),
                constant in -50.0f64..50.0,
            ) {
                let mut drive = Vec::new();
                let mut level = constant;
                for (len, jump, lost) in steps {
                    level += jump;
                    for _ in 0..len {
                        drive.push(if lost { None } else { Some(Angle::from_deg(level)) });
                    }
                }
                let n = drive.len();
                let trace = Trace {
                    time_base: TimeBase::from_fps(1000.0, "t").unwrap(),
                    times_s: Vec::new(),
                    synthetic: Vec::new(),
                    frames: (0..n as u64).collect(),
                    nut: drive.clone(),
                    drive,
                    drive_confidence: vec![1.0; n],
                    nut_confidence: vec![1.0; n],
                    drive_zero_screen: None,
                    nut_zero_screen: None,
                };
                check(&trace)?;
            }
        }
    }
}
