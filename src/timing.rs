//! Which clock times the frames: frame index / capture rate, or each frame's presentation
//! timestamp (docs/conventions.md, "Time"), and the clip's timing summary (`summary.timing`):
//! how even the timestamps are and how many frames were repeated or synthesised rather than
//! captured.
//!
//! Used by `analyze` between track and segment: it must never import segment, mechanics,
//! report, `batch`, `find_marks` or the CLI.

use crate::analyze::FpsSource;
use crate::decode::ClipInfo;
use crate::decode::timing::{Evenness, UNEVEN_TOLERANCE};
use crate::error::{Error, Result};
use crate::track::Trace;
use crate::warning::Warning;

/// Share of frames found repeated or synthesised above which the clip's real capture rate is
/// reported as lower than the file says (a tenth: a few repeats from an encoder that dropped
/// a sensor frame stay below it; a slow-motion mode's blended frames, half or more, do not).
pub const SYNTHETIC_SHARE_WARN: f64 = 0.10;

/// What the user asked for (`--timing`).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum TimingChoice {
    /// Timestamps when the container's rate is the capture rate (no `--fps` and no
    /// `capture_fps_hz` in the rig) and the clip has them; otherwise the capture rate.
    #[default]
    Auto,
    /// Frame index / capture rate, whatever the container's timestamps say.
    Rate,
    /// Each frame's presentation timestamp (an error when the clip has none).
    Timestamps,
}

/// The clock used.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum TimingSource {
    /// Frame index / capture rate.
    CaptureRate,
    /// Presentation timestamps.
    Timestamps,
}

impl TimingSource {
    /// The name written in `summary.timing.source`.
    pub fn as_str(self) -> &'static str {
        match self {
            TimingSource::CaptureRate => "capture_rate",
            TimingSource::Timestamps => "timestamps",
        }
    }
}

/// `summary.timing`: the clock and the frames that were not captured.
#[derive(Debug, Clone, PartialEq)]
pub struct Timing {
    /// The clock used for every time.
    pub source: TimingSource,
    /// Frames that repeat the frame before them (exactly or within a fraction of the noise).
    pub duplicated_frames: usize,
    /// Frames that are a blend or an interpolation of their neighbours.
    pub interpolated_frames: usize,
    /// Median interval between the analysed frames' timestamps, s (None without timestamps).
    pub median_interval_s: Option<f64>,
    /// The interval between timestamps that departs most from the median, s.
    pub worst_interval_s: Option<f64>,
    /// The rate at which frames were really captured, when repeated or synthesised frames
    /// pass [`SYNTHETIC_SHARE_WARN`] of the clip: the nominal rate × the captured share, Hz.
    pub captured_fps_estimate_hz: Option<f64>,
    /// A rolling shutter's readout time estimated from the clip and its 95 % interval, s
    /// (`track::rolling::estimate_readout`; None when the clip does not show it).
    pub rolling_shutter_estimate_s: Option<(f64, (f64, f64))>,
}

/// Chooses the clock ([`TimingChoice`]).
///
/// # Errors
/// [`Error::Option`] when `--timing timestamps` is asked of a clip with no timestamps.
pub fn choose(
    choice: TimingChoice,
    fps_source: FpsSource,
    clip: &ClipInfo,
) -> Result<TimingSource> {
    let has = clip
        .frame_times
        .as_ref()
        .is_some_and(|t| t.times_s.len() as u64 == clip.frames && clip.frames > 0);
    match choice {
        TimingChoice::Rate => Ok(TimingSource::CaptureRate),
        TimingChoice::Timestamps if has => Ok(TimingSource::Timestamps),
        TimingChoice::Timestamps => Err(Error::Option {
            flag: "--timing".into(),
            reason: format!(
                "{} carries no timestamp for every frame (a folder of stills, or a stream \
                 without them); use --timing rate with --fps",
                clip.path.display()
            ),
        }),
        TimingChoice::Auto if has && fps_source == FpsSource::Container => {
            Ok(TimingSource::Timestamps)
        }
        TimingChoice::Auto => Ok(TimingSource::CaptureRate),
    }
}

/// The analysed window `[first, last)` by timestamps: the first frame at or after `start_s`
/// and the frames up to `end_s` inclusive. `last` is `u64::MAX` when the window runs to the
/// end.
pub fn window_by_times(times_s: &[f64], start_s: Option<f64>, end_s: Option<f64>) -> (u64, u64) {
    let first = start_s.map_or(0, |t| times_s.partition_point(|&x| x < t - 1e-12) as u64);
    let last = end_s.map_or(u64::MAX, |t| {
        times_s.partition_point(|&x| x <= t + 1e-12) as u64
    });
    (first, last)
}

/// Gives the trace its samples' timestamps (when the clock is the timestamps), and returns
/// the warning about uneven timing, if any, with the evenness found.
pub fn apply(
    source: TimingSource,
    clip: &ClipInfo,
    trace: &mut Trace,
) -> (Option<Evenness>, Option<Warning>) {
    let Some(times) = clip.frame_times.as_ref() else {
        return (None, None);
    };
    let own: Vec<f64> = trace
        .frames
        .iter()
        .filter_map(|&f| times.times_s.get(f as usize).copied())
        .collect();
    if own.len() != trace.len() {
        return (None, None);
    }
    let even = crate::decode::timing::evenness(&own, times.tick_s);
    let uneven = even.filter(Evenness::uneven);
    let warning = match (source, uneven) {
        (TimingSource::Timestamps, Some(e)) => Some(Warning::UnevenTiming {
            median_interval_ms: e.median_interval_s * 1e3,
            worst_interval_ms: e.worst_interval_s * 1e3,
            at_frame: trace.frames[e.worst_at],
            tolerance: UNEVEN_TOLERANCE,
        }),
        _ => None,
    };
    if source == TimingSource::Timestamps {
        // Counted from the first analysed frame's own time, as frame index / rate would not
        // be: times stay on the clip's clock, so `--start-s` and the trace agree.
        trace.times_s = own;
    }
    (even.filter(|_| source == TimingSource::Timestamps), warning)
}

/// The timing summary, after the synthetic frames are flagged in `trace`; also the warning
/// that the real capture rate is lower than the file says, when they pass
/// [`SYNTHETIC_SHARE_WARN`].
pub fn summary(
    source: TimingSource,
    even: Option<Evenness>,
    trace: &Trace,
    duplicated: usize,
    interpolated: usize,
) -> (Timing, Option<Warning>) {
    let n = trace.len();
    let flagged = duplicated + interpolated;
    let nominal_hz = match even {
        Some(e) if e.median_interval_s > 0.0 => 1.0 / e.median_interval_s,
        _ => trace.time_base.fps_hz(),
    };
    let share = if n == 0 {
        0.0
    } else {
        flagged as f64 / n as f64
    };
    let estimate = (share > SYNTHETIC_SHARE_WARN).then_some(nominal_hz * (1.0 - share));
    let warning = estimate.map(|hz| Warning::SyntheticFrames {
        duplicated,
        interpolated,
        frames: n,
        nominal_fps_hz: nominal_hz,
        captured_fps_estimate_hz: hz,
    });
    (
        Timing {
            source,
            duplicated_frames: duplicated,
            interpolated_frames: interpolated,
            median_interval_s: even.map(|e| e.median_interval_s),
            worst_interval_s: even.map(|e| e.worst_interval_s),
            captured_fps_estimate_hz: estimate,
            rolling_shutter_estimate_s: None,
        },
        warning,
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn window_by_times_takes_frames_inside_the_span() {
        let t = [0.0, 0.004, 0.009, 0.0125, 0.0167];
        assert_eq!(window_by_times(&t, Some(0.005), Some(0.0125)), (2, 4));
        assert_eq!(window_by_times(&t, None, None), (0, u64::MAX));
        assert_eq!(window_by_times(&t, Some(0.004), None), (1, u64::MAX));
    }
}
