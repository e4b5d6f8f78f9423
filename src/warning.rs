//! Typed warnings: data-quality problems that leave a usable result. They are returned
//! inside results; the library never prints them. Each `Display` says what happened and
//! what to do about it.
//!
//! A shared leaf: it must never import any other module of the crate.

use std::fmt;

/// A problem that did not stop the analysis but that the user should know about.
#[derive(Debug, Clone, PartialEq)]
#[non_exhaustive]
pub enum Warning {
    /// No capture rate was given, so the container's rate was used for timing.
    ContainerFps {
        /// The container's frame rate.
        container_fps_hz: f64,
    },
    /// Numbered stills skip some numbers.
    FrameGap {
        /// The last number before the gap.
        after: u64,
        /// The first number after the gap.
        next: u64,
    },
    /// A mark tracked on colour turned less than its own part's brightness texture while at
    /// rest (most often lossy video coding the paint's colour behind the part), so its angles
    /// in that run are null (`track::texture`).
    ColourLagsTexture {
        /// The mark's role.
        mark: String,
        /// First frame of the run (clip frame index).
        first_frame: u64,
        /// Last frame of the run (clip frame index, inclusive).
        last_frame: u64,
        /// The largest lag seen in the run, degrees.
        lag_deg: f64,
    },
    /// In a run of frames the line of a mark's tracked stripe lay askew of the stripe seen in
    /// the first frames, so the tracker was reading another feature; those angles are null
    /// (`track::stripe_identity`).
    StripeAskew {
        /// The mark's role.
        mark: String,
        /// First frame of the run (clip frame index).
        first_frame: u64,
        /// Last frame of the run (clip frame index, inclusive).
        last_frame: u64,
        /// The largest skew seen in the run, degrees.
        skew_deg: f64,
    },
    /// A mark could not be found in a run of frames; those frames are null in the trace.
    MarkLost {
        /// The mark's role.
        mark: String,
        /// First frame of the run (clip frame index).
        first_frame: u64,
        /// Last frame of the run (clip frame index, inclusive).
        last_frame: u64,
    },
    /// The fixed mark's region could not be registered to the first frame in a run of frames
    /// (obscured, or moved beyond the search), so camera shake is unknown there; every mark's
    /// angle is null in those frames.
    ShakeUnregistered {
        /// First frame of the run (clip frame index).
        first_frame: u64,
        /// Last frame of the run (clip frame index, inclusive).
        last_frame: u64,
    },
    /// The rig has no bar, so torque fields are null.
    NoBar,
    /// Fewer blows than needed for a blow rate were found.
    FewBlows {
        /// How many blows were found.
        count: usize,
    },
    /// The requested time window was clipped to the clip's length.
    WindowClipped {
        /// What was clipped.
        detail: String,
    },
    /// A section's shear stress passes the warning fraction of shear yield.
    StressHigh {
        /// The section, e.g. `bar.sections[1] (round)`.
        section: String,
        /// Maximum shear stress in MPa.
        stress_mpa: f64,
        /// Shear yield used, in MPa.
        shear_yield_mpa: f64,
        /// What torque the stress is for (`rating`, `measured peak`).
        at: String,
    },
    /// `find-marks` could not decide something, or decided it with doubt.
    FindMarksUnsure {
        /// What was not decided (`drive pivot`, `roles`, `fixed`, ...).
        item: String,
        /// What was seen and what to check.
        reason: String,
    },
    /// No rest still, rest frame or quiet stretch before the first blow: twist is zeroed at
    /// the first analysed frame, which may already hold wind-up.
    TwistZeroUnverified {
        /// The first analysed frame (clip frame index).
        frame: u64,
    },
    /// The decoder flagged frames as damaged; they are null in the trace, never measured.
    DamagedFrames {
        /// How many frames were damaged.
        count: u64,
        /// The first damaged frame (clip frame index).
        first_frame: u64,
        /// The last damaged frame (clip frame index).
        last_frame: u64,
    },
    /// The frames' timestamps are uneven beyond the tolerance (the clip is timed by them).
    UnevenTiming {
        /// Median interval between frames, ms.
        median_interval_ms: f64,
        /// The interval that departs most from the median, ms.
        worst_interval_ms: f64,
        /// The clip frame that ends that interval.
        at_frame: u64,
        /// Departure allowed, as a fraction of the median interval.
        tolerance: f64,
    },
    /// Many frames were repeated or synthesised rather than captured: the real capture rate
    /// is lower than the file says.
    SyntheticFrames {
        /// Frames that repeat the one before.
        duplicated: usize,
        /// Frames that blend or interpolate their neighbours.
        interpolated: usize,
        /// Analysed frames.
        frames: usize,
        /// The rate the file's timing says, Hz.
        nominal_fps_hz: f64,
        /// Nominal rate × the captured share, Hz.
        captured_fps_estimate_hz: f64,
    },
    /// A rolling shutter's row skew may exceed the tracking accuracy, and its readout time is
    /// unknown.
    RollingShutterUnknown {
        /// Largest angle change over one frame interval seen in the clip, degrees.
        max_step_deg: f64,
        /// Skew that change would give at a readout of a whole frame interval, degrees.
        skew_bound_deg: f64,
    },
    /// A self-check found the marks' angles impossible for the rig in a run of frames; both
    /// marks are null there, and no torque is computed from them.
    SelfCheck {
        /// First frame of the run (clip frame index).
        first_frame: u64,
        /// Last frame of the run (clip frame index, inclusive).
        last_frame: u64,
        /// What was impossible.
        check: String,
    },
    /// A blow's peak twist fell on or next to frames where a mark was lost, so its peak was
    /// not measured: its peak twist and torque are null.
    BlowPeakLost {
        /// The blow's onset (clip frame index).
        frame: u64,
    },
    /// A blow's highest twist sits next to a frame missing from the trace (set aside as a
    /// repeated or interpolated frame, or a gap in the camera's timestamps): its peak may lie
    /// in that frame, so the blow's peak twist and torque are null.
    BlowPeakBesideGap {
        /// The blow's onset (clip frame index).
        frame: u64,
    },
    /// Blows whose peak was read in a frame where the marks turned fast enough for a rolling
    /// shutter to skew the twist by more than 5 % of the peak; the peaks' intervals include
    /// the bound (mechanics::blows::skew).
    PeakReadoutSkew {
        /// How many blows.
        blows: usize,
        /// The worst one's onset (clip frame index).
        frame: u64,
        /// Bound on the skew of the twist in its peak's frame, degrees.
        bound_deg: f64,
        /// Its peak twist, degrees.
        peak_deg: f64,
        /// Whether the readout time was stated in the rig (else bounded by the frame interval).
        stated: bool,
    },
    /// The clip's peak torque is the highest of only some blows' peaks: the others' peaks were
    /// not measured (lost marks), and any of them may have been higher.
    PeakTorqueFromSomeBlows {
        /// Blows whose peak torque was measured.
        measured: usize,
        /// Blows in the clip.
        blows: usize,
    },
    /// The rig's fixed (reference) mark could not be read in the first frame, so the clip was
    /// measured without it: no camera-shake correction was made.
    FixedMarkUnread {
        /// Why the fixed mark's stripe could not be read.
        reason: String,
        /// True when the drive and nut marks tighten the same way on screen, so that the turn
        /// of a camera roll enters both angles alike and cancels in the twist (drive − nut).
        roll_cancels: bool,
    },
    /// Any other data-quality note with its own explanation.
    Note(String),
}

impl fmt::Display for Warning {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Warning::ContainerFps { container_fps_hz } => write!(
                f,
                "no capture rate given; using the container's {container_fps_hz} fps, which is \
                 probably the playback rate: pass --fps or set capture_fps_hz in the rig"
            ),
            Warning::FrameGap { after, next } => write!(
                f,
                "stills numbering jumps from {after} to {next}: {} frame(s) missing, so times after \
                 the gap assume no frame was lost",
                next.saturating_sub(*after).saturating_sub(1)
            ),
            Warning::ShakeUnregistered {
                first_frame,
                last_frame,
            } => write!(
                f,
                "the fixed mark's region did not match the first frame in frames \
                 {first_frame}..={last_frame}, so camera shake is unknown there and those \
                 angles are null (check that nothing covers the fixed mark and that the camera \
                 is held firmly)"
            ),
            Warning::ColourLagsTexture {
                mark,
                first_frame,
                last_frame,
                lag_deg,
            } => write!(
                f,
                "mark '{mark}' is tracked on its paint's colour, and in frames \
                 {first_frame}..={last_frame} that colour turned up to {lag_deg:.2}° less than \
                 the part's own surface texture did at rest, so the colour track is behind the \
                 part there and those angles are null (compressed video often codes colour \
                 behind brightness: record with less compression or a lossless codec; else \
                 check that the paint stays inside the annulus, or use a paint that differs \
                 from the metal in brightness)"
            ),
            Warning::StripeAskew {
                mark,
                first_frame,
                last_frame,
                skew_deg,
            } => write!(
                f,
                "mark '{mark}': in frames {first_frame}..={last_frame} the tracked stripe's line \
                 lay up to {skew_deg:.0}° askew of the stripe seen in the first frames, so the \
                 tracker was reading something else there (a scratch, a recess edge, a hole or \
                 a blur trail) and those angles are null (check that nothing but the paint \
                 crosses the annulus, and the mark's pivot and radii against the first frame)"
            ),
            Warning::MarkLost {
                mark,
                first_frame,
                last_frame,
            } => write!(
                f,
                "mark '{mark}' lost in frames {first_frame}..={last_frame}; those angles are null \
                 (check lighting, focus and that the paint stays inside the annulus)"
            ),
            Warning::NoBar => write!(
                f,
                "the rig has no bar, so torque is not computed: add a \"bar\" with its sections"
            ),
            Warning::FewBlows { count } => write!(
                f,
                "only {count} blow(s) found; a blow rate needs at least two (use a longer clip or \
                 check the drive mark)"
            ),
            Warning::WindowClipped { detail } => write!(f, "time window clipped: {detail}"),
            Warning::StressHigh {
                section,
                stress_mpa,
                shear_yield_mpa,
                at,
            } => write!(
                f,
                "{section}: maximum shear stress {stress_mpa:.0} MPa at the {at} is {:.0} % of the \
                 shear yield {shear_yield_mpa:.0} MPa; the bar may take a permanent set",
                100.0 * stress_mpa / shear_yield_mpa
            ),
            Warning::FindMarksUnsure { item, reason } => write!(f, "find-marks, {item}: {reason}"),
            Warning::TwistZeroUnverified { frame } => write!(
                f,
                "twist zero unverified: the clip shows no still stretch before the first blow, so \
                 twist is measured from frame {frame}, which may already hold wind-up (every \
                 torque would then read low); give a still of the unloaded bar with --zero-still \
                 or a frame that shows it with --zero-frame"
            ),
            Warning::DamagedFrames {
                count,
                first_frame,
                last_frame,
            } => {
                let which = if count == &1 {
                    format!("frame {first_frame} is")
                } else {
                    format!("{count} frames between {first_frame} and {last_frame} are")
                };
                write!(
                    f,
                    "{which} damaged in the file (flagged by the decoder): they are null in the \
                     trace and were not measured; re-export the clip from the camera for a \
                     complete trace"
                )
            }
            Warning::UnevenTiming {
                median_interval_ms,
                worst_interval_ms,
                at_frame,
                tolerance,
            } => write!(
                f,
                "the frames' timestamps are uneven: the interval ending at frame {at_frame} is \
                 {worst_interval_ms:.3} ms against a median of {median_interval_ms:.3} ms (more \
                 than {:.0} % off); every time uses the real timestamps, but a camera that drops \
                 or repeats frames may have missed part of a blow",
                tolerance * 100.0
            ),
            Warning::SyntheticFrames {
                duplicated,
                interpolated,
                frames,
                nominal_fps_hz,
                captured_fps_estimate_hz,
            } => write!(
                f,
                "{duplicated} repeated and {interpolated} synthesised (blended or interpolated) \
                 frames out of {frames}: the camera really captured about \
                 {captured_fps_estimate_hz:.0} fps, not the {nominal_fps_hz:.0} fps the file \
                 says; those frames are left out of peaks, onsets and timing, so peaks are \
                 sampled at the lower rate"
            ),
            Warning::RollingShutterUnknown {
                max_step_deg,
                skew_bound_deg,
            } => write!(
                f,
                "a mark turns up to {max_step_deg:.2}° between frames: a rolling shutter could \
                 skew its angle by up to {skew_bound_deg:.2}° across the stripe; if the camera \
                 has one (phones do), give its readout time as \"camera\": \
                 {{\"rolling_shutter_ms\": t}} in the rig"
            ),
            Warning::SelfCheck {
                first_frame,
                last_frame,
                check,
            } => write!(
                f,
                "self-check, frames {first_frame}..={last_frame}: {check}; both marks are null \
                 there (check that each annulus holds its own mark's paint and nothing else)"
            ),
            Warning::PeakTorqueFromSomeBlows { measured, blows } => write!(
                f,
                "the peak torque is the highest of the {measured} of {blows} blows whose peak was \
                 measured; the other blows' peaks were lost, and any of them may have been \
                 higher, so the clip's true peak torque may be higher than printed"
            ),
            Warning::BlowPeakLost { frame } => write!(
                f,
                "the blow at frame {frame} peaks on frames where a mark was lost, so its peak \
                 twist and torque are null (check the warnings on lost marks)"
            ),
            Warning::PeakReadoutSkew {
                blows,
                frame,
                bound_deg,
                peak_deg,
                stated,
            } => write!(
                f,
                "{blows} blow(s) peak in a frame read while the marks turned fast: a rolling \
                 shutter {} could skew the twist there by up to {bound_deg:.2}° (the blow at \
                 frame {frame}: {:.0} % of its {peak_deg:.2}° peak); the peaks' 95 % intervals \
                 include that; film at a higher frame rate, keep the marks near the picture's \
                 middle rows, or use a global-shutter camera",
                if *stated {
                    "of the rig's readout time"
                } else {
                    "(readout not given, so bounded by the frame interval)"
                },
                100.0 * bound_deg / peak_deg.abs().max(f64::MIN_POSITIVE)
            ),
            Warning::BlowPeakBesideGap { frame } => write!(
                f,
                "the blow at frame {frame} peaks next to a frame missing from the trace (set \
                 aside as repeated or interpolated, or a gap in the timestamps), so its peak \
                 twist and torque are null: the true peak may lie in that frame"
            ),
            Warning::FixedMarkUnread {
                reason,
                roll_cancels,
            } => {
                write!(
                    f,
                    "the fixed (reference) mark could not be read in the first frame ({reason}), \
                     so camera shake is not removed: the drive and nut are measured about their \
                     pivots as if the camera stood still. "
                )?;
                if *roll_cancels {
                    write!(
                        f,
                        "The turn of a camera roll is the same at both ends and cancels in the \
                         twist (drive − nut), but the shift that shake or a roll gives each mark \
                         moves it off its pivot, and that error stays in the twist; "
                    )?;
                } else {
                    write!(
                        f,
                        "A camera roll does not enter the drive and nut angles alike here (they \
                         tighten opposite ways on screen, or one is a side view), so it adds to \
                         the twist, and so does the shift that shake gives each mark; "
                    )?;
                }
                write!(
                    f,
                    "mount the camera firmly, or make the fixed mark stand out from its metal"
                )
            }
            Warning::Note(s) => f.write_str(s),
        }
    }
}

/// A mark lost in more runs than this is told in one line, not one line per run.
pub(crate) const LOST_RUNS_IN_FULL: usize = 3;

/// The warnings as lines for a person to read: each warning's own text, except that a mark
/// lost in more than three (`LOST_RUNS_IN_FULL`) separate runs is told once, where its first run
/// stood, with the frame count, the run count and the frames they span (every run stays in
/// the result and in report.json). A clip whose stripe flickers out for single frames would
/// otherwise print a screen of near-identical lines and hide the other warnings.
pub fn condensed(warnings: &[Warning]) -> Vec<String> {
    // Per mark (there are few): its runs, in one pass.
    let mut by_mark: Vec<(&str, Vec<(u64, u64)>)> = Vec::new();
    for w in warnings {
        if let Warning::MarkLost {
            mark,
            first_frame,
            last_frame,
        } = w
        {
            match by_mark.iter_mut().find(|(m, _)| *m == mark.as_str()) {
                Some((_, runs)) => runs.push((*first_frame, *last_frame)),
                None => by_mark.push((mark, vec![(*first_frame, *last_frame)])),
            }
        }
    }
    let runs_of = |m: &str| {
        by_mark
            .iter()
            .find(|(k, _)| *k == m)
            .map_or(&[][..], |(_, r)| r.as_slice())
    };
    let mut told: Vec<&str> = Vec::new();
    let mut out = Vec::with_capacity(warnings.len());
    for w in warnings {
        if let Warning::MarkLost { mark, .. } = w {
            let runs = runs_of(mark);
            if runs.len() > LOST_RUNS_IN_FULL {
                if !told.contains(&mark.as_str()) {
                    told.push(mark);
                    let frames: u64 = runs.iter().map(|(a, b)| b.saturating_sub(*a) + 1).sum();
                    let first = runs.iter().map(|r| r.0).min().unwrap_or(0);
                    let last = runs.iter().map(|r| r.1).max().unwrap_or(0);
                    out.push(format!(
                        "mark '{mark}' lost in {frames} frames over {} separate runs between frames \
                         {first} and {last} (each run is listed in report.json); those angles are \
                         null (check lighting, focus and that the paint stays inside the annulus)",
                        runs.len()
                    ));
                }
                continue;
            }
        }
        out.push(w.to_string());
    }
    out
}

#[cfg(test)]
mod condensed_tests {
    use super::*;

    fn lost(mark: &str, a: u64, b: u64) -> Warning {
        Warning::MarkLost {
            mark: mark.into(),
            first_frame: a,
            last_frame: b,
        }
    }

    #[test]
    fn many_lost_runs_of_one_mark_are_one_line_and_few_stay_as_they_are() {
        let w = vec![
            Warning::Note("first".into()),
            lost("drive", 11, 11),
            lost("nut", 40, 42),
            lost("drive", 101, 101),
            lost("drive", 103, 104),
            lost("drive", 195, 196),
            Warning::Note("last".into()),
        ];
        let lines = condensed(&w);
        assert_eq!(lines.len(), 4, "{lines:#?}");
        assert_eq!(lines[0], "first");
        assert!(
            lines[1].starts_with(
                "mark 'drive' lost in 6 frames over 4 separate runs between frames 11 and 196"
            ),
            "{}",
            lines[1]
        );
        assert_eq!(lines[2], lost("nut", 40, 42).to_string());
        assert_eq!(lines[3], "last");
        // Three runs are still told one by one.
        assert_eq!(condensed(&w[1..5]).len(), 4);
    }
}
