//! The one function that chains the pipeline: decode → track → segment → mechanics.
//! Decoding and tracking overlap, and no frame buffer is allocated per frame: the source
//! decodes on a thread of its own and hands frames to the tracker, on a second thread at a
//! lower priority, through a short queue of recycled slots ([`decode::Slot`]); the calling
//! thread waits for both. A video decoder whose picture rows are packed hands over
//! references to its own pictures (no copy); every other source reads into the slots' buffers.

use std::path::Path;
use std::sync::mpsc;

use crate::decode::{self, ClipInfo, FrameSource, Slot};
use crate::error::{Error, Result};
use crate::mechanics::{self, BarReport, BlowMetrics, SpringbackVerdict, Summary};
use crate::rig::Rig;
use crate::segment::{self, Segmentation};
use crate::track::{Trace, Tracker};
use crate::units::TimeBase;
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
    /// Per-frame angles.
    pub trace: Trace,
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
    let (first, last) = window(opts, time_base, clip.frames, &mut warnings)?;
    let mut tracker = Tracker::new(rig, rig_path, clip.width, clip.height)?;

    let total = last.min(clip.frames).saturating_sub(first);
    track_pipelined(source, &mut tracker, (first, last), total, progress)?;

    let (trace, track_warnings) = tracker.finish(time_base);
    warnings.extend(track_warnings);
    let segmentation = segment::find_blows(&trace);
    warnings.extend(segmentation.warnings.iter().cloned());
    let (mut blows, mut summary, mech_warnings) =
        mechanics::blow_metrics(&trace, &segmentation, rig.bar.as_ref());
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
        let residual: Vec<_> = blows.iter().map(|m| m.residual_twist).collect();
        let peak: Vec<_> = blows.iter().map(|m| m.peak_twist).collect();
        b.springback_verdict_for_blows(&onsets, &residual, &peak)
    });
    if let Some(b) = &bar {
        warnings.extend(b.warnings());
        if let Some(w) = summary
            .peak_torque
            .and_then(|t| b.stress_warning(t, "measured peak"))
        {
            warnings.push(w);
        }
    }
    Ok(Analysis {
        clip,
        rig: rig.clone(),
        time_base,
        fps_source,
        trace,
        segmentation,
        blows,
        summary,
        bar,
        springback,
        warnings,
    })
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
    tracker: &mut Tracker,
    (first, last): (u64, u64),
    total: u64,
    progress: &(dyn Fn(u64, u64) + Sync),
) -> Result<()> {
    let path = source.info().path.clone();
    std::thread::scope(|scope| -> Result<()> {
        let (full_tx, full_rx) = mpsc::sync_channel::<Slot>(QUEUE_DEPTH);
        let (empty_tx, empty_rx) = mpsc::sync_channel::<Slot>(QUEUE_DEPTH + 1);
        for _ in 0..QUEUE_DEPTH + 1 {
            let _ = empty_tx.send(Slot::new());
        }
        let decoder = scope.spawn(move || -> Result<()> {
            let mut spare: Option<Slot> = None;
            loop {
                let mut slot = match spare.take() {
                    Some(s) => s,
                    None => match empty_rx.recv() {
                        Ok(s) => s,
                        Err(_) => return Ok(()),
                    },
                };
                if !source.read_slot(&mut slot)? {
                    return Ok(());
                }
                let index = slot.view().index;
                if index >= last {
                    return Ok(());
                }
                if index < first {
                    spare = Some(slot);
                } else if full_tx.send(slot).is_err() {
                    return Ok(());
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

/// The analysed frame range `[first, last)` from the time window.
fn window(
    opts: &AnalyzeOptions,
    tb: TimeBase,
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
    let first = opts.start_s.map_or(0, |t| tb.frame_at(t).ceil() as u64);
    // Without --end-s, read to the end of the stream whatever the container claims.
    let mut last = opts
        .end_s
        .map_or(u64::MAX, |t| tb.frame_at(t).floor() as u64 + 1);
    if opts.end_s.is_some() && last > frames {
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
