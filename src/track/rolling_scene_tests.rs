//! The rolling-shutter correction measured on rendered clips with known truth (a check
//! against the renderer, not the world): the unknown-readout warning, and the figures that
//! show the correction is not yet better than none (docs/accuracy.md, "Rolling shutter").
//! Kept in the library's tests, not the scene crate's, because they run the test-only
//! `analyze_source_rolling_corrected`.

use crate::analyze::AnalyzeOptions;
use crate::decode::{Frame, MemorySource};
use crate::rig::CameraSpec;
use crate::synth::rolling::rolling_frames;
use crate::synth::{Scenario, Truth, simulate};

/// The slow tool filmed through a rolling shutter at `fps` with sensor noise of three
/// sample steps (seed 11, a tuning seed).
fn rolling_scene(fps: f64) -> Scenario {
    let mut sc = Scenario::preset("slow-tool").unwrap();
    sc.camera.fps_hz = fps;
    sc.effects.noise_sigma = 0.012;
    sc.seed = 11;
    sc
}

/// Per-frame RMS error (degrees; drive, nut) of an analysis of `frames` against the truth
/// at the frames' mid-readout times, with the rig's `rolling_shutter_ms` set to `rig_ms`.
fn rms(sc: &Scenario, truth: &Truth, frames: Vec<Frame>, rig_ms: Option<f64>) -> (f64, f64) {
    let mut rig = sc.rig();
    rig.camera = rig_ms.map(|t| CameraSpec {
        rolling_shutter_ms: Some(t),
    });
    let a = crate::analyze::analyze_source_rolling_corrected(
        Box::new(MemorySource::new(frames, Some(sc.camera.fps_hz))),
        &rig,
        std::path::Path::new("rig.json"),
        &AnalyzeOptions::default(),
    )
    .unwrap();
    let one = |got: &[Option<crate::units::Angle>], want: &[f64]| {
        let e: Vec<f64> = got
            .iter()
            .zip(want)
            .filter_map(|(g, w)| Some(g.as_ref()?.deg() - w))
            .collect();
        let rms = (e.iter().map(|x| x * x).sum::<f64>() / e.len().max(1) as f64).sqrt();
        // A lost frame counts as no measurement, never as a small error.
        if e.len() < want.len() {
            rms + 1000.0 * (want.len() - e.len()) as f64
        } else {
            rms
        }
    };
    (
        one(&a.trace.drive, &truth.trace.drive_deg),
        one(&a.trace.nut, &truth.trace.nut_deg),
    )
}

/// The target: with the rig's readout time, per-frame RMS ≤ 0.3° on a 10 ms readout clip
/// (rendered clip with known truth: a check against the renderer, not the world).
#[test]
#[ignore = "not met yet: 100 fps, 10 ms readout reads 0.346/0.253 deg RMS (drive/nut) corrected, 0.123/0.113 uncorrected"]
fn ten_ms_readout_with_the_rigs_time_within_a_third_of_a_degree() {
    let sc = rolling_scene(100.0);
    let truth = simulate(&sc);
    let frames = rolling_frames(&sc, &truth, 0.010);
    let (d, n) = rms(&sc, &truth, frames, Some(10.0));
    assert!(d <= 0.3 && n <= 0.3, "{d:.3}/{n:.3}");
}

/// The unknown-readout warning: raised for a clip timed by the camera's own clock whose
/// fastest step could skew an angle past the accuracy target; not when the capture rate
/// is given (a high-speed camera's clip) or the rig states the readout (0: global shutter).
#[test]
fn an_unknown_readout_is_warned_of_only_for_a_camera_clocked_clip() {
    let sc = rolling_scene(240.0);
    let truth = simulate(&sc);
    let frames = rolling_frames(&sc, &truth, 0.004);
    let warned = |capture: Option<f64>, ms: Option<f64>| {
        let mut rig = sc.rig();
        rig.capture_fps_hz = capture;
        rig.camera = ms.map(|t| CameraSpec {
            rolling_shutter_ms: Some(t),
        });
        let a = crate::analyze::analyze_source(
            Box::new(MemorySource::new(frames.clone(), Some(240.0))),
            &rig,
            std::path::Path::new("rig.json"),
            &AnalyzeOptions::default(),
            &|_, _| {},
        )
        .unwrap();
        a.warnings.iter().find_map(|w| match w {
            crate::Warning::RollingShutterUnknown { skew_bound_deg, .. } => Some(*skew_bound_deg),
            _ => None,
        })
    };
    let skew = warned(None, None).expect("warned");
    assert!(skew > crate::track::rolling::SKEW_WARN_DEG, "{skew}");
    assert_eq!(warned(Some(240.0), None), None);
    assert_eq!(warned(None, Some(0.0)), None);
}

/// Figures for docs/accuracy.md: per-frame RMS with and without the rig's readout time.
#[test]
#[ignore = "prints figures; run with --ignored --nocapture"]
fn rolling_shutter_figures() {
    for fps in [60.0, 100.0, 240.0] {
        for ms in [5.0, 10.0, 20.0] {
            if ms * 1e-3 > 1.0 / fps {
                // A sensor reads a frame out before it starts the next.
                continue;
            }
            let sc = rolling_scene(fps);
            let truth = simulate(&sc);
            let frames = rolling_frames(&sc, &truth, ms * 1e-3);
            let with = rms(&sc, &truth, frames.clone(), Some(ms));
            let without = rms(&sc, &truth, frames, None);
            println!(
                "{fps} fps, readout {ms} ms: with {:.3}/{:.3}, without {:.3}/{:.3} (drive/nut °)",
                with.0, with.1, without.0, without.1
            );
        }
    }
}
