//! Frame times from a container's presentation timestamps, and how even they are.
//!
//! Phones store the capture rate in the container but time frames by their presentation
//! timestamps, which may jitter or skip (variable frame rate). These helpers turn a stream's
//! timestamps into seconds and measure the worst departure from the nominal interval.
//!
//! Part of the decode stage: it must never import track, segment, mechanics, report, `analyze`,
//! `batch`, `find_marks`, `calibrate` or the CLI.

/// Largest departure of one frame interval from the median interval, as a fraction of the
/// median, before timing counts as uneven (a warning giving the worst gap). A tenth of a
/// frame keeps the rounding of millisecond time bases (1 tick in 4 at 240 fps is 0.04 ms of
/// a 4.17 ms interval, 1 %) well inside, and flags a skipped or doubled frame (100 %).
pub const UNEVEN_TOLERANCE: f64 = 0.10;

/// Each frame's presentation time, as the container stores it.
#[derive(Debug, Clone, PartialEq)]
pub struct FrameTimes {
    /// Presentation time of each frame in decoding output order, s, from the first frame's.
    pub times_s: Vec<f64>,
    /// The container's timestamp resolution (one tick), s.
    pub tick_s: f64,
}

impl FrameTimes {
    /// Presentation times from timestamps in stream ticks of `tick_s` seconds: sorted into
    /// presentation order and counted from the first. None when there are none.
    pub fn from_ticks(ticks: &mut [i64], tick_s: f64) -> Option<FrameTimes> {
        if ticks.is_empty() || !(tick_s.is_finite() && tick_s > 0.0) {
            return None;
        }
        ticks.sort_unstable();
        let t0 = ticks[0];
        Some(FrameTimes {
            times_s: ticks
                .iter()
                .map(|&t| t.saturating_sub(t0) as f64 * tick_s)
                .collect(),
            tick_s,
        })
    }

    /// The median and worst interval ([`evenness`]), with this clip's tick.
    pub fn evenness(&self) -> Option<Evenness> {
        evenness(&self.times_s, self.tick_s)
    }
}

/// How even a run of frame times is.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Evenness {
    /// Median interval between successive frames, s.
    pub median_interval_s: f64,
    /// The interval that departs most from the median, s.
    pub worst_interval_s: f64,
    /// Index of the frame that ends the worst interval.
    pub worst_at: usize,
    /// Timestamp resolution, s: a departure of one tick is rounding, never unevenness.
    pub tick_s: f64,
}

impl Evenness {
    /// True when the worst interval departs from the median by more than
    /// [`UNEVEN_TOLERANCE`] of it and by more than one timestamp tick.
    pub fn uneven(&self) -> bool {
        (self.worst_interval_s - self.median_interval_s).abs()
            > (UNEVEN_TOLERANCE * self.median_interval_s).max(self.tick_s * 1.001)
    }
}

/// The median and worst frame interval of `times_s` (increasing; timestamps `tick_s` apart at
/// best); None with fewer than three frames or a zero median.
pub fn evenness(times_s: &[f64], tick_s: f64) -> Option<Evenness> {
    if times_s.len() < 3 {
        return None;
    }
    let gaps: Vec<f64> = times_s.windows(2).map(|w| w[1] - w[0]).collect();
    let median = crate::stats::median(&gaps)?;
    if median.is_nan() || median <= 0.0 {
        return None;
    }
    let (k, &worst) = gaps
        .iter()
        .enumerate()
        .max_by(|a, b| (a.1 - median).abs().total_cmp(&(b.1 - median).abs()))?;
    Some(Evenness {
        median_interval_s: median,
        worst_interval_s: worst,
        worst_at: k + 1,
        tick_s,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ticks_become_seconds_from_the_first_in_presentation_order() {
        let mut t = [1003, 1000, 1008, 1005];
        let s = FrameTimes::from_ticks(&mut t, 1e-3).unwrap().times_s;
        assert_eq!(s.len(), 4);
        assert!((s[1] - 0.003).abs() < 1e-12 && (s[3] - 0.008).abs() < 1e-12);
        assert!(FrameTimes::from_ticks(&mut [], 1e-3).is_none());
        assert!(FrameTimes::from_ticks(&mut [1], 0.0).is_none());
    }

    #[test]
    fn a_skipped_frame_is_uneven_and_rounding_is_not() {
        // 240 fps on a 1 ms time base: intervals of 4 and 5 ticks are rounding.
        let ms: Vec<f64> = (0..100)
            .map(|i| (i as f64 * 1000.0 / 240.0).round() * 1e-3)
            .collect();
        assert!(!evenness(&ms, 1e-3).unwrap().uneven());
        let fine: Vec<f64> = (0..100)
            .map(|i| (i as f64 * 90_000.0 / 240.0).round() / 90_000.0)
            .collect();
        assert!(!evenness(&fine, 1.0 / 90_000.0).unwrap().uneven());
        let mut skipped = fine.clone();
        for t in skipped.iter_mut().skip(50) {
            *t += 1.0 / 240.0;
        }
        let e = evenness(&skipped, 1.0 / 90_000.0).unwrap();
        assert!(e.uneven());
        assert_eq!(e.worst_at, 50);
        assert!((e.worst_interval_s - 2.0 / 240.0).abs() < 1e-4);
    }
}
