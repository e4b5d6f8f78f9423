//! The twist zero: the twist the bar held in the first analysed frame, measured against the
//! bar at rest (interface v2, "The twist zero").
//!
//! In: the trace and the blows, or a rest offset measured by [`crate::track::rest_offset`]
//! from a still or a frame of the unloaded bar. Out: a [`TwistZero`] whose `offset` is added
//! to every relative twist, so that `twist = drive − nut + offset` is the absolute wind-up.
//!
//! Order of preference: a rest still (`--zero-still`, batch `<clip>.rest.png`), a rest frame
//! (`--zero-frame`), a quiet stretch before the first blow, and only then the first analysed
//! frame, with a warning that the zero is unverified.
//!
//! A quiet stretch is the samples before the first blow's onset, less the two just before it
//! (at least
//! [`QUIET_MIN_SAMPLES`]) in which neither end moves beyond its noise: a least-squares line
//! through each end's angles changes by no more than 4 standard errors of that change over
//! the stretch (σ·(q−1)·√(12/(q(q²−1))) for q samples of noise σ: the slope's standard error
//! of a straight-line fit, e.g. Montgomery & Runger, *Applied Statistics and Probability for
//! Engineers*, §11.4), and the twist's scatter about its mean stays within 3σ. A bar still
//! springing back from an earlier blow moves; a bar held wound up and perfectly still cannot
//! be told from one at rest, which is why a rest still is preferred.
//!
//! Part of the mechanics stage: it must never import report, `analyze`, `batch`, `find_marks`,
//! `calibrate` or the CLI.

use crate::segment::{NOISE_FLOOR_DEG, Segmentation};
use crate::units::Angle;

/// Fewest samples before the first blow that can show the bar at rest.
pub const QUIET_MIN_SAMPLES: usize = 4;

/// Where the twist zero came from.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum ZeroSource {
    /// A still image of the unloaded bar (`--zero-still`, batch `<clip>.rest.png`).
    Still,
    /// A frame of the clip that shows the unloaded bar (`--zero-frame`).
    Frame,
    /// The still stretch before the first blow.
    QuietStart,
    /// The first analysed frame, not checked to be at rest.
    #[default]
    FirstFrameUnverified,
}

impl ZeroSource {
    /// The name written in reports: `still`, `frame`, `quiet_start`, `first_frame_unverified`.
    pub fn as_str(self) -> &'static str {
        match self {
            ZeroSource::Still => "still",
            ZeroSource::Frame => "frame",
            ZeroSource::QuietStart => "quiet_start",
            ZeroSource::FirstFrameUnverified => "first_frame_unverified",
        }
    }
}

/// The twist zero of an analysis.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct TwistZero {
    /// Where it came from.
    pub source: ZeroSource,
    /// The clip frame that showed the bar at rest (the first frame of a quiet stretch; None
    /// for a still).
    pub frame: Option<u64>,
    /// Twist already in the bar at the first analysed frame (added to every relative twist).
    pub offset: Angle,
    /// Standard uncertainty (1σ) of `offset`, from the angle noise of the frames it rests on.
    pub offset_sigma: Angle,
}

/// The least-squares slope × (q − 1) of `v` over its q samples and that change's standard
/// error for noise `sigma`; None with fewer than three samples.
fn line_change(v: &[f64], sigma: f64) -> Option<(f64, f64)> {
    let q = v.len();
    if q < 3 {
        return None;
    }
    let qf = q as f64;
    let xm = (qf - 1.0) / 2.0;
    let ym = v.iter().sum::<f64>() / qf;
    let (mut sxy, mut sxx) = (0.0, 0.0);
    for (i, y) in v.iter().enumerate() {
        let x = i as f64 - xm;
        sxy += x * (y - ym);
        sxx += x * x;
    }
    let slope = sxy / sxx;
    Some((slope * (qf - 1.0), sigma * (qf - 1.0) / sxx.sqrt()))
}

/// The twist zero from a quiet stretch before the first blow, when there is one: the mean
/// relative twist over the stretch, negated. `twist_rel` is drive − nut relative to the first
/// analysed frame, per sample; `frames` the clip frame of each sample.
pub(crate) fn quiet_start(
    drive: &[Option<f64>],
    nut: &[Option<f64>],
    frames: &[u64],
    seg: &Segmentation,
) -> Option<TwistZero> {
    let n = drive.len().min(nut.len()).min(frames.len());
    // The two samples just before the onset are left out: the impact falls between frames,
    // and the frame before the onset may already show the blow beginning (blur, or a
    // compressed clip's motion prediction).
    let end = seg
        .blows
        .first()
        .map_or(n, |b| b.onset.saturating_sub(2).min(n));
    if end < QUIET_MIN_SAMPLES {
        return None;
    }
    let sd = seg.drive_noise.map_or(0.0, Angle::deg).max(NOISE_FLOOR_DEG);
    let sn = seg.nut_noise.map_or(0.0, Angle::deg).max(NOISE_FLOOR_DEG);
    let pairs: Vec<(f64, f64)> = (0..end)
        .filter_map(|i| Some((drive[i]?, nut[i]?)))
        .collect();
    if pairs.len() < QUIET_MIN_SAMPLES || pairs.len() * 4 < end * 3 {
        return None;
    }
    let d: Vec<f64> = pairs.iter().map(|p| p.0).collect();
    let u: Vec<f64> = pairs.iter().map(|p| p.1).collect();
    for (v, s) in [(&d, sd), (&u, sn)] {
        let (change, se) = line_change(v, s)?;
        if change.abs() > 4.0 * se {
            return None;
        }
    }
    let tw: Vec<f64> = pairs.iter().map(|p| p.0 - p.1).collect();
    let q = tw.len() as f64;
    let mean = tw.iter().sum::<f64>() / q;
    let st = sd.hypot(sn);
    if tw.iter().any(|t| (t - mean).abs() > 4.0 * st) {
        return None;
    }
    Some(TwistZero {
        source: ZeroSource::QuietStart,
        frame: frames.first().copied(),
        offset: Angle::from_deg(-mean),
        offset_sigma: Angle::from_deg(st / q.sqrt()),
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::segment::Blow;

    fn seg(onset: usize, noise: f64) -> Segmentation {
        Segmentation {
            blows: vec![Blow {
                onset,
                end: onset + 10,
                nut_onset: None,
            }],
            drive_noise: Some(Angle::from_deg(noise)),
            nut_noise: Some(Angle::from_deg(noise)),
            ..Segmentation::default()
        }
    }

    #[test]
    fn a_still_start_is_the_zero_and_a_moving_one_is_not() {
        // Alternating ±0.01° noise on a still bar: quiet, zero at the mean (drive − nut mean
        // 0.005° here, so offset −0.005°).
        let n = 20;
        let frames: Vec<u64> = (0..n as u64).collect();
        let drive: Vec<Option<f64>> = (0..n)
            .map(|i| Some(if i % 2 == 0 { 0.0 } else { 0.01 }))
            .collect();
        let nut = vec![Some(0.0); n];
        let z = quiet_start(&drive, &nut, &frames, &seg(14, 0.01)).unwrap();
        assert_eq!(z.source, ZeroSource::QuietStart);
        assert_eq!(z.frame, Some(0));
        assert!((z.offset.deg() + 0.005).abs() < 1e-3, "{:?}", z.offset);
        // A drive end springing back (0.05° per frame over 12 frames) is not quiet.
        let moving: Vec<Option<f64>> = (0..n).map(|i| Some(-0.05 * i as f64)).collect();
        assert!(quiet_start(&moving, &nut, &frames, &seg(12, 0.01)).is_none());
        // Too few samples before the first blow.
        assert!(quiet_start(&drive, &nut, &frames, &seg(5, 0.01)).is_none());
    }
}
