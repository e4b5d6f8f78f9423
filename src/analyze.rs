//! The one function that chains the pipeline: decode → track → segment → mechanics.
//! Decoding and tracking overlap, and no frame buffer is allocated per frame: the source
//! decodes on a thread of its own and hands frames to the tracker, on a second thread at a
//! lower priority, through a short queue of recycled slots ([`decode::Slot`]); the calling
//! thread waits for both. A video decoder whose picture rows are packed hands over
//! references to its own pictures (no copy); every other source reads into the slots' buffers.
//!
//! Layering: the one place that chains decode → track → segment → mechanics → report. Only
//! `batch` and the CLI run it (report reads its `Analysis`), and it must never import the CLI.

use std::path::{Path, PathBuf};
use std::sync::mpsc;

use crate::decode::{self, ChromaRef, ClipInfo, Frame, FrameRef, FrameSource, Luma, LumaRef, Slot};
use crate::error::{Error, Result};
use crate::mechanics::{
    self, BarReport, BlowMetrics, SpringbackVerdict, Summary, TwistZero, ZeroSource,
};
use crate::rig::Rig;
use crate::segment::{self, Segmentation};
use crate::track::synthetic::{self, SyntheticDetector};
use crate::track::{Trace, Tracker};
use crate::units::{Angle, TimeBase};
use crate::warning::Warning;

/// Frames in flight between the decoder and the tracker.
const QUEUE_DEPTH: usize = 4;

/// What the user asked for, beyond the clip and the rig.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct AnalyzeOptions {
    /// Capture rate from the command line; overrides the rig's `capture_fps_hz`.
    pub fps_hz: Option<f64>,
    /// Start of the analysed window, s (capture time).
    pub start_s: Option<f64>,
    /// End of the analysed window, s (capture time).
    pub end_s: Option<f64>,
    /// A still image of the unloaded bar from the same camera position: the twist zero.
    pub zero_still: Option<PathBuf>,
    /// A clip frame (0-based, counted in the whole clip) that shows the bar unloaded.
    pub zero_frame: Option<u64>,
    /// Which clock times the frames (`--timing`).
    pub timing: crate::timing::TimingChoice,
    /// Also fit the blow model to the clip (`--fit-model`; docs/mechanics.md, "The blow
    /// model"). Off by default: the fit takes seconds, several times the time of decoding
    /// and tracking a typical clip, and `predict` fits it from the report when it is absent.
    pub fit_model: bool,
}

/// Where the capture rate came from.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum FpsSource {
    /// `--fps`.
    Option,
    /// The rig's `capture_fps_hz`.
    Rig,
    /// The container (probably the playback rate).
    Container,
}

/// Everything one analysis found.
#[derive(Debug, Clone)]
pub struct Analysis {
    /// The clip.
    pub clip: ClipInfo,
    /// The rig used.
    pub rig: Rig,
    /// The capture rate used for all timing.
    pub time_base: TimeBase,
    /// Where the capture rate came from.
    pub fps_source: FpsSource,
    /// The clock that timed the frames, and the frames that were not captured.
    pub timing: crate::timing::Timing,
    /// Per-frame angles.
    pub trace: Trace,
    /// What the drive and nut marks were tracked on (luma or their paint's colour).
    pub signals: [crate::track::Signal; 2],
    /// How far the camera moved, measured on the fixed mark (None without one).
    pub camera_motion: Option<crate::track::CameraMotion>,
    /// Blows and blow rate.
    pub segmentation: Segmentation,
    /// Per-blow metrics.
    pub blows: Vec<BlowMetrics>,
    /// Clip-level results.
    pub summary: Summary,
    /// The bar's stiffness, stress and timing (None without a bar in the rig).
    pub bar: Option<BarReport>,
    /// Whether the bar could spring back between blows: the model against the measured
    /// residual twist (None without a bar or with fewer than two blows).
    pub springback: Option<SpringbackVerdict>,
    /// The lumped blow model fitted to the clip (`mechanics::fit`): None without a bar,
    /// `Err(reason)` when it could not be fitted or no peak torque was measured.
    pub model: Option<std::result::Result<mechanics::ModelFit, String>>,
    /// Every warning from every stage, in pipeline order.
    pub warnings: Vec<Warning>,
}

/// Chooses the capture rate: `--fps`, then the rig, then the container with a warning.
///
/// # Errors
/// [`Error::Option`] when no rate is known or the chosen one is not positive.
pub fn capture_rate(
    opts: &AnalyzeOptions,
    rig: &Rig,
    clip: &ClipInfo,
) -> Result<(TimeBase, FpsSource, Option<Warning>)> {
    if let Some(fps) = opts.fps_hz {
        return Ok((TimeBase::from_fps(fps, "--fps")?, FpsSource::Option, None));
    }
    if let Some(fps) = rig.capture_fps_hz {
        return Ok((
            TimeBase::from_fps(fps, "capture_fps_hz")?,
            FpsSource::Rig,
            None,
        ));
    }
    match clip.container_fps_hz {
        Some(fps) if fps.is_finite() && fps > 0.0 => Ok((
            TimeBase::from_fps(fps, "container frame rate")?,
            FpsSource::Container,
            Some(Warning::ContainerFps {
                container_fps_hz: fps,
            }),
        )),
        _ => Err(Error::Option {
            flag: "--fps".into(),
            reason: format!(
                "{} has no frame rate of its own: give the camera's capture rate with --fps or capture_fps_hz in the rig",
                clip.path.display()
            ),
        }),
    }
}

/// Analyses a clip (video file or stills folder) with a rig.
///
/// # Errors
/// Any [`Error`] from opening, decoding, the rig's fit to the frame, or a mark with no paint.
pub fn analyze(clip: &Path, rig: &Rig, rig_path: &Path, opts: &AnalyzeOptions) -> Result<Analysis> {
    analyze_source(decode::open(clip)?, rig, rig_path, opts, &|_, _| {})
}

/// Analyses frames from any source; `progress(done, total)` is called as frames are tracked.
///
/// # Errors
/// As [`analyze`].
pub fn analyze_source(
    source: Box<dyn FrameSource>,
    rig: &Rig,
    rig_path: &Path,
    opts: &AnalyzeOptions,
    progress: &(dyn Fn(u64, u64) + Sync),
) -> Result<Analysis> {
    let clip = source.info().clone();
    let mut warnings = clip.warnings.clone();
    let (time_base, fps_source, fps_warning) = capture_rate(opts, rig, &clip)?;
    let origin = match fps_source {
        FpsSource::Option => "--fps",
        FpsSource::Rig => "capture_fps_hz",
        FpsSource::Container => "the container's frame rate (give --fps)",
    };
    crate::sanity::check_fps(time_base.fps_hz(), origin)?;
    warnings.extend(fps_warning);
    let timing_source = crate::timing::choose(opts.timing, fps_source, &clip)?;
    let stamps = clip
        .frame_times
        .as_ref()
        .filter(|_| timing_source == crate::timing::TimingSource::Timestamps)
        .map(|t| t.times_s.as_slice());
    let (first, last) = window(opts, time_base, stamps, clip.frames, &mut warnings)?;
    let rest_still = rest_still(opts, &clip)?;
    let mut tracker = Tracker::new(rig, rig_path, clip.width, clip.height)?;
    let mut detector = SyntheticDetector::new(rig, clip.width, clip.height);

    let total = last.min(clip.frames).saturating_sub(first);
    let kept = track_pipelined(
        source,
        (&mut tracker, &mut detector),
        (first, last),
        (opts.zero_still.is_some(), opts.zero_frame),
        total,
        progress,
    )?;

    let readout_rows = tracker.readout_rows();
    let signals = tracker.signals();
    let camera_motion = tracker.camera_motion();
    let (mut trace, track_warnings) = tracker.finish(time_base);
    // A mark lost in most frames cannot be measured: refuse, and write no torque.
    crate::track::check_measured(&trace, &track_warnings)?;
    warnings.extend(track_warnings);
    let (evenness, timing_warning) = crate::timing::apply(timing_source, &clip, &mut trace);
    warnings.extend(timing_warning);
    let mut flags = detector.finish();
    let kept_blends = flags.keep_sporadic_blends(crate::timing::SYNTHETIC_SHARE_WARN);
    if kept_blends > 0 {
        warnings.push(Warning::Note(format!(
            "{kept_blends} frame(s) looked like blends of their neighbours, too few (at most \
             {:.0} % of the clip) for a slow-motion mode's up-conversion; they are kept as \
             captured frames",
            100.0 * crate::timing::SYNTHETIC_SHARE_WARN
        )));
    }
    if flags.synthetic.len() == trace.len() {
        trace.synthetic = flags.synthetic;
    }
    // A rolling shutter (`track::rolling`): with the rig's readout time each angle is moved
    // to its frame's mid-readout instant; without it, a warning when a consumer camera's clip
    // turns fast enough for the skew to pass the tracking accuracy.
    let camera_clock = fps_source == FpsSource::Container;
    let readout_estimate = crate::track::rolling::estimate_readout(&trace, &readout_rows);
    match rig.rolling_shutter_s() {
        Some(readout_s) => crate::track::rolling::correct(&mut trace, &readout_rows, readout_s),
        None if rig.camera.and_then(|c| c.rolling_shutter_ms).is_some() => {}
        None => warnings.extend(crate::track::rolling::unknown_readout_warning(
            &trace,
            rig,
            clip.height,
            camera_clock,
        )),
    }
    let (mut timing, synthetic_warning) = crate::timing::summary(
        timing_source,
        evenness,
        &trace,
        flags.duplicated,
        flags.interpolated,
    );
    timing.rolling_shutter_estimate_s = readout_estimate;
    if let Some((t, (lo, hi))) = readout_estimate.filter(|_| camera_clock && rig.camera.is_none()) {
        warnings.push(Warning::Note(format!(
            "the stripes shear as a rolling shutter reading its rows over about {:.1} ms would \
             make them (95 %: {:.1} to {:.1} ms); if the camera has one (phones do), give it as \
             \"camera\": {{\"rolling_shutter_ms\": {:.1}}} in the rig (or the camera maker's \
             figure) so that the angles are read at each frame's mid-readout time",
            1e3 * t,
            1e3 * lo,
            1e3 * hi,
            1e3 * t
        )));
    }
    warnings.extend(synthetic_warning);
    // Onsets, peaks and every time come from the captured frames only; the blows found on
    // them are then indexed into the whole trace for the report.
    let (captured, kept_samples) = synthetic::captured_only(&trace);
    let mut segmentation = segment::find_blows(&captured);
    warnings.extend(segmentation.warnings.iter().cloned());
    let zero = measured_zero(rig, rig_path, opts, &clip, rest_still, kept, &segmentation)?;
    let reading = mechanics::Reading {
        skew: readout_skew(rig, clip.height, camera_clock, captured.time_base.fps_hz()),
        tracking_sigma: Angle::from_deg(crate::track::validation::twist_sigma_deg(
            &crate::track::validation::Footage {
                lossy: clip.lossy(),
                camera_shift_rms_px: camera_motion.map(|m| m.shift_rms_px),
                lost_share: crate::track::lost_share(&trace.drive)
                    .max(crate::track::lost_share(&trace.nut)),
            },
        )),
    };
    let (mut blows, mut summary, mech_warnings) =
        mechanics::blow_metrics_read(&captured, &segmentation, rig.bar.as_ref(), zero, reading);
    crate::segment::reindex_blows(&mut segmentation.blows, &kept_samples, trace.len());
    warnings.extend(mech_warnings);
    warnings.extend(crate::sanity::check_results(
        rig,
        rig_path,
        &mut blows,
        &mut summary,
    )?);
    let bar = rig.bar.as_ref().map(BarReport::new).transpose()?;
    let springback = bar.as_ref().and_then(|b| {
        let onsets: Vec<f64> = blows.iter().map(|m| m.t_s).collect();
        b.springback_verdict_measured(&onsets, &summary.unwind)
    });
    if let Some(spec) = rig.bar.as_ref() {
        warnings.extend(mechanics::bar_sense_warnings(spec));
    }
    if let Some(b) = &bar {
        warnings.extend(b.warnings());
        if let Some(w) = summary
            .peak_torque
            .and_then(|t| b.stress_warning(t, "measured peak"))
        {
            warnings.push(w);
        }
    }
    let model = opts.fit_model.then(|| {
        let obs = mechanics::ClipObs::of(
            &trace,
            time_base.fps_hz(),
            &blows,
            &summary,
            [segmentation.drive_noise, segmentation.nut_noise],
        );
        let peak_measured = summary.peak_torque.is_some_and(|t| t.nm().is_finite());
        mechanics::blow_model(obs, peak_measured)
    });
    let model = model.flatten();
    Ok(Analysis {
        clip,
        rig: rig.clone(),
        time_base,
        fps_source,
        timing,
        trace,
        signals,
        camera_motion,
        segmentation,
        blows,
        summary,
        bar,
        springback,
        model,
        warnings,
    })
}

/// How the clip's rows were read, for the bound on a rolling shutter's skew at each blow's
/// peak: the rig's readout time over the captured frame interval; with none given, a clip
/// timed by the camera's own clock (a consumer camera's, which reads its rows in turn) is
/// bounded by a readout of the whole interval; a readout of 0 (global shutter) or a clip
/// given its capture rate (a high-speed camera's) has none.
fn readout_skew(
    rig: &Rig,
    height: u32,
    camera_clock: bool,
    captured_fps_hz: f64,
) -> Option<mechanics::ReadoutSkew> {
    let rho_max = crate::track::rolling::rho_max(rig, height);
    match (
        rig.rolling_shutter_s(),
        rig.camera.and_then(|c| c.rolling_shutter_ms),
    ) {
        (Some(t), _) => Some(mechanics::ReadoutSkew {
            readout_per_interval: (t * captured_fps_hz).min(1.0),
            rho_max,
            stated: true,
        }),
        (None, None) if camera_clock => Some(mechanics::ReadoutSkew {
            readout_per_interval: 1.0,
            rho_max,
            stated: false,
        }),
        _ => None,
    }
}

/// The rest still named by `--zero-still`, read before any frame is tracked so that a bad
/// file stops the run at once.
fn rest_still(opts: &AnalyzeOptions, clip: &ClipInfo) -> Result<Option<Frame>> {
    if opts.zero_still.is_some() && opts.zero_frame.is_some() {
        return Err(Error::Option {
            flag: "--zero-frame".into(),
            reason: "give either --zero-still or --zero-frame, not both".into(),
        });
    }
    if let Some(n) = opts.zero_frame
        && clip.frames > 0
        && n >= clip.frames
    {
        return Err(Error::Option {
            flag: "--zero-frame".into(),
            reason: format!(
                "frame {n} is past the clip's last frame ({} frames; frames count from 0)",
                clip.frames
            ),
        });
    }
    opts.zero_still
        .as_deref()
        .map(decode::read_still)
        .transpose()
}

/// The twist zero from a rest still or a rest frame (None when neither was given: the
/// mechanics then look for a quiet start). Its uncertainty is one frame's twist noise at each
/// end of the pair: σ_twist·√2.
fn measured_zero(
    rig: &Rig,
    rig_path: &Path,
    opts: &AnalyzeOptions,
    clip: &ClipInfo,
    rest_still: Option<Frame>,
    kept: Kept,
    seg: &Segmentation,
) -> Result<Option<TwistZero>> {
    let (source, rest, rest_path) = match (rest_still, opts.zero_frame) {
        (Some(f), _) => (
            ZeroSource::Still,
            f,
            opts.zero_still.clone().unwrap_or_default(),
        ),
        (None, Some(n)) => match kept.rest {
            Some(f) => (ZeroSource::Frame, f, clip.path.clone()),
            None => {
                return Err(Error::Option {
                    flag: "--zero-frame".into(),
                    reason: format!(
                        "the clip ended before frame {n}; give a frame inside the clip (frames count from 0)"
                    ),
                });
            }
        },
        (None, None) => return Ok(None),
    };
    let Some(first) = kept.first else {
        return Ok(None);
    };
    let offset = crate::track::rest_offset(rig, rig_path, &rest, &rest_path, &first)?;
    let sigma = seg
        .drive_noise
        .map_or(0.0, |a| a.deg())
        .hypot(seg.nut_noise.map_or(0.0, |a| a.deg()))
        * 2f64.sqrt();
    Ok(Some(TwistZero {
        source,
        frame: (source == ZeroSource::Frame).then_some(rest.index),
        offset,
        offset_sigma: crate::units::Angle::from_deg(sigma),
    }))
}

/// Frames kept from the decoder for the twist zero: the first analysed frame and the rest
/// frame asked for with `--zero-frame`.
#[derive(Default)]
struct Kept {
    first: Option<Frame>,
    rest: Option<Frame>,
}

/// An owned copy of a borrowed frame.
fn owned(f: FrameRef<'_>) -> Frame {
    Frame {
        index: f.index,
        width: f.width,
        height: f.height,
        bit_depth: f.bit_depth,
        luma: match f.luma {
            LumaRef::U8(d) => Luma::U8(d.to_vec()),
            LumaRef::U16(d) => Luma::U16(d.to_vec()),
        },
        chroma: f.chroma.as_ref().map(ChromaRef::to_owned_planes),
        damaged: f.damaged,
    }
}

/// Decodes on one thread and tracks on another, through a short queue of recycled slots;
/// the calling thread waits for both. For a video this keeps FFmpeg's decoding threads fed
/// while the tracker works (tracking between decoder calls on one thread held back the next
/// packet), and the tracking thread runs at a lower priority ([`TRACKER_NICE`]), so that
/// where it competes with decoding for a core, decoding goes first and tracking takes the
/// gaps. Both together took about 9 % off `analyze` on a 720p H.264 clip (docs/performance.md,
/// fifth pass).
fn track_pipelined(
    mut source: Box<dyn FrameSource>,
    (tracker, detector): (&mut Tracker, &mut SyntheticDetector),
    (first, last): (u64, u64),
    (keep_first, zero_frame): (bool, Option<u64>),
    total: u64,
    progress: &(dyn Fn(u64, u64) + Sync),
) -> Result<Kept> {
    let path = source.info().path.clone();
    // The decoder reads on past the window when the rest frame lies after it.
    let stop = last.max(zero_frame.map_or(0, |n| n.saturating_add(1)));
    std::thread::scope(|scope| -> Result<Kept> {
        let (full_tx, full_rx) = mpsc::sync_channel::<Slot>(QUEUE_DEPTH);
        let (empty_tx, empty_rx) = mpsc::sync_channel::<Slot>(QUEUE_DEPTH + 1);
        for _ in 0..QUEUE_DEPTH + 1 {
            let _ = empty_tx.send(Slot::new());
        }
        let decoder = scope.spawn(move || -> Result<Kept> {
            let mut kept = Kept::default();
            let mut spare: Option<Slot> = None;
            loop {
                let mut slot = match spare.take() {
                    Some(s) => s,
                    None => match empty_rx.recv() {
                        Ok(s) => s,
                        Err(_) => return Ok(kept),
                    },
                };
                if !source.read_slot(&mut slot)? {
                    return Ok(kept);
                }
                let index = slot.view().index;
                if index >= stop {
                    return Ok(kept);
                }
                if zero_frame == Some(index) {
                    kept.rest = Some(owned(slot.view()));
                }
                if index == first && (keep_first || zero_frame.is_some()) {
                    kept.first = Some(owned(slot.view()));
                }
                if index < first || index >= last {
                    spare = Some(slot);
                } else if full_tx.send(slot).is_err() {
                    return Ok(kept);
                }
            }
        });
        let tracking = scope.spawn(move || -> Result<()> {
            yield_to_decoding();
            // An early return (a tracking error) drops this thread's ends of the queue, which
            // stops the decoder.
            let mut done = 0u64;
            for mut slot in full_rx.iter() {
                tracker.push_ref(slot.view())?;
                detector.push(slot.view());
                done += 1;
                progress(done, total);
                // The picture goes back to the decoder's pool now, not when the slot is next
                // filled. The decoder may already have finished and dropped its end: the
                // frames still queued must be tracked all the same, so a failed recycle is
                // not a stop.
                slot.release();
                let _ = empty_tx.send(slot);
            }
            Ok(())
        });
        let tracked = tracking.join().unwrap_or_else(|_| {
            Err(Error::Input {
                path: path.clone(),
                reason: "the tracking thread stopped unexpectedly".into(),
            })
        });
        let decoded = decoder.join().unwrap_or_else(|_| {
            Err(Error::Input {
                path: path.clone(),
                reason: "the decoder thread stopped unexpectedly".into(),
            })
        });
        tracked?;
        decoded
    })
}

/// Niceness of the tracking thread on Linux (0 is normal, 19 the lowest). FFmpeg's decoding
/// threads wait on one another, so a decoding thread kept off a core by the tracker holds up
/// the others; at a lower priority the tracker takes the cores' idle gaps instead, and the
/// queue absorbs the delay. Measured on the 2,000-frame 720p H.264 bench clip, 16 alternating
/// rounds: 5, 10 and 19 took 3.6, 4.0 and 5.1 % off `analyze`. 10 keeps most of that while
/// still giving tracking a fair share of a machine busy with other programs (about a tenth
/// of a core against each program at normal priority).
#[cfg(target_os = "linux")]
const TRACKER_NICE: libc::c_int = 10;

/// Lowers the calling thread's scheduling priority to [`TRACKER_NICE`] unless it is lower
/// already (Linux, where a thread's niceness is its own; elsewhere nothing). A hint: failure
/// changes nothing else.
fn yield_to_decoding() {
    #[cfg(target_os = "linux")]
    // SAFETY: getpriority and setpriority only read their arguments; the id is this thread's.
    unsafe {
        let tid = libc::gettid() as libc::id_t;
        if libc::getpriority(libc::PRIO_PROCESS, tid) < TRACKER_NICE {
            let _ = libc::setpriority(libc::PRIO_PROCESS, tid, TRACKER_NICE);
        }
    }
}

/// The analysed frame range `[first, last)` from the time window: by the frames' timestamps
/// when they time the clip (`stamps`), else by frame index / capture rate.
fn window(
    opts: &AnalyzeOptions,
    tb: TimeBase,
    stamps: Option<&[f64]>,
    frames: u64,
    warnings: &mut Vec<Warning>,
) -> Result<(u64, u64)> {
    let check = |v: Option<f64>, flag: &str| -> Result<()> {
        match v {
            Some(t) if !(t.is_finite() && t >= 0.0) => Err(Error::Option {
                flag: flag.into(),
                reason: format!("must be a time in seconds at or after 0, got {t}"),
            }),
            _ => Ok(()),
        }
    };
    check(opts.start_s, "--start-s")?;
    check(opts.end_s, "--end-s")?;
    let (first, mut last) = match stamps {
        Some(t) => crate::timing::window_by_times(t, opts.start_s, opts.end_s),
        None => (
            opts.start_s.map_or(0, |t| tb.frame_at(t).ceil() as u64),
            // Without --end-s, read to the end of the stream whatever the container claims.
            opts.end_s
                .map_or(u64::MAX, |t| tb.frame_at(t).floor() as u64 + 1),
        ),
    };
    let last_is_past = |t: f64| match stamps {
        Some(s) => s.last().is_some_and(|&e| t > e),
        None => last > frames,
    };
    if opts.end_s.is_some_and(last_is_past) {
        warnings.push(Warning::WindowClipped {
            detail: format!(
                "--end-s is past the clip's last frame ({frames} frames); analysing to the end"
            ),
        });
        last = u64::MAX;
    }
    if first >= last.min(frames) {
        return Err(Error::Option {
            flag: "--start-s".into(),
            reason: format!(
                "the window holds no frames (clip has {frames} frames, {:.4} s at {} fps); move --start-s earlier or --end-s later",
                tb.seconds(frames as f64),
                tb.fps_hz()
            ),
        });
    }
    Ok((first, last))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::decode::{Frame, MemorySource};
    use crate::synth::{Scenario, render_frame, simulate};

    /// The tracking thread yields to decoding, and the caller's own thread keeps its priority.
    #[cfg(target_os = "linux")]
    #[test]
    fn tracking_runs_at_a_lower_priority_than_the_caller() {
        // SAFETY: getpriority only reads its arguments; the id is the calling thread's.
        let own = || unsafe { libc::getpriority(libc::PRIO_PROCESS, libc::gettid() as libc::id_t) };
        let before = own();
        let inside = std::thread::spawn(move || {
            yield_to_decoding();
            own()
        })
        .join()
        .unwrap();
        assert!(inside >= TRACKER_NICE.max(before), "{inside}");
        let sc = Scenario::preset("fast-tool").unwrap();
        let truth = simulate(&sc);
        let frames: Vec<Frame> = (0..3).map(|i| render_frame(&sc, &truth, i)).collect();
        let src = Box::new(MemorySource::new(frames, None));
        let opts = AnalyzeOptions::default();
        analyze_source(src, &sc.rig(), Path::new("rig.json"), &opts, &|_, _| {}).unwrap();
        assert_eq!(own(), before);
    }

    /// A fast-tool take filmed from 8 ms after its fourth blow (the bar wound up and
    /// springing back), as rendered frames with the renderer's truth (synthetic check).
    fn wound_take() -> (Scenario, crate::synth::Truth, Vec<Frame>) {
        let mut sc = Scenario::preset("fast-tool").unwrap();
        sc.camera.start_s = Some(sc.tool.first_blow_s + 3.0 * 60.0 / 3300.0 + 0.008);
        let truth = simulate(&sc);
        let frames = crate::synth::render_clip(&sc, &truth);
        (sc, truth, frames)
    }

    /// RMS of absolute twist against the truth, degrees, and the worst relative peak-torque
    /// error over blows matched by onset frame (±1).
    fn against_truth(a: &Analysis, truth: &crate::synth::Truth) -> (f64, f64) {
        let off = a.summary.twist_zero.offset.deg();
        let first = a.trace.frames[0] as usize;
        let mut sq = 0.0;
        let mut n = 0.0;
        for (i, f) in a.trace.frames.iter().enumerate() {
            if let Some(t) = a.trace.twist(i) {
                sq += (t.deg() + off - truth.trace.twist_deg[*f as usize]).powi(2);
                n += 1.0;
            }
        }
        assert!(first < truth.frames as usize);
        let mut worst: f64 = 0.0;
        for b in &a.blows {
            let Some(t) = truth.blows.iter().find(|t| t.frame.abs_diff(b.frame) <= 1) else {
                continue;
            };
            let q = b.peak_torque.unwrap().nm();
            worst = worst.max((q / t.peak_torque_nm - 1.0).abs());
        }
        ((sq / n).sqrt(), worst)
    }

    #[test]
    fn a_wound_take_with_a_rest_still_reads_the_absolute_twist() {
        // The twist-zero check: a take that starts wound, with a still of the bar at rest,
        // gives the absolute twist within 0.2° RMS and every blow's torque within 3 %.
        let (sc, truth, frames) = wound_take();
        assert!(
            truth.twist_offset_deg() > 3.0,
            "{}",
            truth.twist_offset_deg()
        );
        let dir = tempfile::tempdir().unwrap();
        let still = dir.path().join("take.rest.png");
        crate::synth::write_rest_still(&sc, &still).unwrap();
        let opts = AnalyzeOptions {
            zero_still: Some(still),
            ..AnalyzeOptions::default()
        };
        let src = Box::new(MemorySource::new(frames.clone(), None));
        let a = analyze_source(src, &sc.rig(), Path::new("rig.json"), &opts, &|_, _| {}).unwrap();
        assert_eq!(a.summary.twist_zero.source, ZeroSource::Still);
        let (rms, worst) = against_truth(&a, &truth);
        assert!(rms < 0.2, "twist RMS {rms}°");
        assert!(a.blows.len() >= 5);
        assert!(worst < 0.03, "worst torque error {worst}");
        // Without the still, the zero is unverified and a warning says so.
        let src = Box::new(MemorySource::new(frames, None));
        let opts = AnalyzeOptions::default();
        let b = analyze_source(src, &sc.rig(), Path::new("rig.json"), &opts, &|_, _| {}).unwrap();
        assert_eq!(
            b.summary.twist_zero.source,
            ZeroSource::FirstFrameUnverified
        );
        assert!(
            b.warnings
                .iter()
                .any(|w| matches!(w, Warning::TwistZeroUnverified { .. }))
        );
    }

    fn b_frames_few(sc: &Scenario, truth: &crate::synth::Truth) -> Vec<Frame> {
        (0..3).map(|i| render_frame(sc, truth, i)).collect()
    }

    #[test]
    fn a_late_window_is_zeroed_at_a_rest_frame_before_it() {
        // `--start-s` after the hammering began, `--zero-frame 0` (the bench at rest):
        // torques match the truth instead of reading low (synthetic check).
        let sc = Scenario::preset("fast-tool").unwrap();
        let truth = simulate(&sc);
        let frames = crate::synth::render_clip(&sc, &truth);
        let opts = AnalyzeOptions {
            start_s: Some(0.05),
            zero_frame: Some(0),
            ..AnalyzeOptions::default()
        };
        let src = Box::new(MemorySource::new(frames.clone(), None));
        let a = analyze_source(src, &sc.rig(), Path::new("rig.json"), &opts, &|_, _| {}).unwrap();
        assert_eq!(a.summary.twist_zero.source, ZeroSource::Frame);
        assert_eq!(a.summary.twist_zero.frame, Some(0));
        let (rms, worst) = against_truth(&a, &truth);
        assert!(rms < 0.2 && worst < 0.03, "{rms}° {worst}");
        // The whole clip starts still: the quiet start is the zero, offset near 0.
        let src = Box::new(MemorySource::new(frames, None));
        let opts = AnalyzeOptions::default();
        let b = analyze_source(src, &sc.rig(), Path::new("rig.json"), &opts, &|_, _| {}).unwrap();
        assert_eq!(b.summary.twist_zero.source, ZeroSource::QuietStart);
        assert!(b.summary.twist_zero.offset.deg().abs() < 0.05);
        // A rest frame past the clip is refused.
        let src = Box::new(MemorySource::new(b_frames_few(&sc, &truth), None));
        let opts = AnalyzeOptions {
            zero_frame: Some(10_000),
            ..AnalyzeOptions::default()
        };
        assert!(analyze_source(src, &sc.rig(), Path::new("rig.json"), &opts, &|_, _| {}).is_err());
    }

    #[test]
    fn every_frame_is_tracked_up_to_the_last_one() {
        // Regression: the tracker stopped when the finished decoder stopped taking buffers
        // back, dropping the frames still queued (up to QUEUE_DEPTH at the clip's end).
        // Synthetic fast-tool scene (invented bench, known truth).
        let sc = Scenario::preset("fast-tool").unwrap();
        let truth = simulate(&sc);
        for n in [1u64, 2, 3, 8, 13] {
            let frames: Vec<Frame> = (0..n).map(|i| render_frame(&sc, &truth, i)).collect();
            let src = Box::new(MemorySource::new(frames, None));
            let a = analyze_source(
                src,
                &sc.rig(),
                Path::new("rig.json"),
                &AnalyzeOptions::default(),
                &|_, _| {},
            )
            .unwrap();
            assert_eq!(a.trace.frames, (0..n).collect::<Vec<_>>(), "{n} frames");
            assert_eq!(a.trace.drive.len(), n as usize);
        }
    }

    /// Tracking a video decoder's own pictures (held in place) and tracking frames read into
    /// memory first give the same trace, whole clip and time window alike. Synthetic
    /// fast-tool fixture (invented bench, known truth).
    #[cfg(feature = "ffmpeg")]
    #[test]
    fn held_pictures_and_copied_frames_track_alike() {
        let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("fixtures/fast-tool");
        let rig_path = dir.join("rig.json");
        let rig = Rig::from_path(&rig_path).unwrap();
        let windows = [
            AnalyzeOptions::default(),
            AnalyzeOptions {
                start_s: Some(0.010),
                end_s: Some(0.040),
                ..AnalyzeOptions::default()
            },
        ];
        for clip in ["clip_h264.mp4", "clip_ffv1.mkv", "clip_mjpeg.avi"] {
            let path = dir.join(clip);
            let mut src = decode::open(&path).unwrap();
            let fps = src.info().container_fps_hz;
            let mut frames = Vec::new();
            let mut f = Frame::empty();
            while src.read_into(&mut f).unwrap() {
                frames.push(f.clone());
            }
            for opts in &windows {
                let held = analyze_source(
                    decode::open(&path).unwrap(),
                    &rig,
                    &rig_path,
                    opts,
                    &|_, _| {},
                )
                .unwrap();
                let memory = Box::new(MemorySource::new(frames.clone(), fps));
                let copied = analyze_source(memory, &rig, &rig_path, opts, &|_, _| {}).unwrap();
                assert!(!held.trace.frames.is_empty());
                assert_eq!(held.trace.frames, copied.trace.frames, "{clip}");
                assert_eq!(held.trace.drive, copied.trace.drive, "{clip}");
                assert_eq!(held.trace.nut, copied.trace.nut, "{clip}");
            }
        }
    }
}
