//! The rolling-shutter correction and the skew bound at blow peaks, measured on rendered
//! clips with known truth (a check against the renderer, not the world): the target with the
//! rig's readout, the bound's interval holding the truth where the correction cannot, the
//! unknown-readout warning, and the figures of docs/accuracy.md, "Rolling shutter".
//!
//! Tests of part of the track stage: it must never import segment, mechanics, report,
//! `analyze`, `batch`, `find_marks`, `calibrate` or the CLI.

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

/// The same bench in a frame twice as high, with the drive's pivot near the top and the
/// nut's near the bottom (readout offsets ρ of about −0.29 and +0.29), where a rolling
/// shutter reads the two ends far apart in time.
fn off_centre(mut sc: Scenario) -> Scenario {
    sc.scene.height = 480;
    sc.scene.drive.pivot[1] = 100.0;
    sc.scene.nut.pivot[1] = 380.0;
    sc
}

/// Per-frame RMS error (degrees; drive, nut) of an analysis of `frames` against the truth
/// at the frames' mid-readout times, with the rig's `rolling_shutter_ms` set to `rig_ms`. A
/// lost frame adds 1000°: it is no measurement, never a small error.
fn rms(sc: &Scenario, truth: &Truth, frames: Vec<Frame>, rig_ms: Option<f64>) -> (f64, f64) {
    let e = errors(sc, truth, frames, rig_ms);
    let penalised = |(r, lost): (f64, usize)| r + 1000.0 * lost as f64;
    (penalised(e.drive), penalised(e.nut))
}

/// What one analysis of a rolling-shutter clip got wrong.
struct Errors {
    /// Drive and nut: RMS over the measured frames, degrees, and the frames lost.
    drive: (f64, usize),
    nut: (f64, usize),
    /// The largest peak-torque error over the blows as a fraction of the truth's (None when
    /// the blows found are not the truth's, or a peak is null).
    peak: Option<f64>,
    /// Blows whose peak-torque interval holds the truth, of the blows.
    held: (usize, usize),
    /// The readout estimated from the clip and its 95 % interval, s.
    estimate: Option<(f64, (f64, f64))>,
}

/// The analysis of `frames` of `sc` (the container's rate the scene's) with the rig's
/// capture rate set to `capture` and its `rolling_shutter_ms` to `rig_ms`.
fn analyse(
    sc: &Scenario,
    frames: Vec<Frame>,
    capture: Option<f64>,
    rig_ms: Option<f64>,
) -> crate::Analysis {
    let mut rig = sc.rig();
    rig.capture_fps_hz = capture;
    rig.camera = rig_ms.map(|t| CameraSpec {
        rolling_shutter_ms: Some(t),
    });
    crate::analyze::analyze_source(
        Box::new(MemorySource::new(frames, Some(sc.camera.fps_hz))),
        &rig,
        std::path::Path::new("rig.json"),
        &AnalyzeOptions::default(),
        &|_, _| {},
    )
    .unwrap()
}

fn errors(sc: &Scenario, truth: &Truth, frames: Vec<Frame>, rig_ms: Option<f64>) -> Errors {
    let a = analyse(sc, frames, Some(sc.camera.fps_hz), rig_ms);
    let one = |got: &[Option<crate::units::Angle>], want: &[f64]| {
        let e: Vec<f64> = got
            .iter()
            .zip(want)
            .filter_map(|(g, w)| Some(g.as_ref()?.deg() - w))
            .collect();
        let rms = (e.iter().map(|x| x * x).sum::<f64>() / e.len().max(1) as f64).sqrt();
        (rms, want.len() - e.len())
    };
    let matched = a.blows.len() == truth.blows.len();
    let pairs = || a.blows.iter().zip(&truth.blows).filter(|_| matched);
    let peak = pairs()
        .map(|(b, t)| Some((b.peak_torque?.nm() - t.peak_torque_nm).abs() / t.peak_torque_nm))
        .try_fold(0.0f64, |m, e| Some(m.max(e?)))
        .filter(|_| matched);
    let held = pairs()
        .filter(|(b, t)| {
            b.peak_torque_ci95
                .is_some_and(|(lo, hi)| lo.nm() <= t.peak_torque_nm && t.peak_torque_nm <= hi.nm())
        })
        .count();
    Errors {
        drive: one(&a.trace.drive, &truth.trace.drive_deg),
        nut: one(&a.trace.nut, &truth.trace.nut_deg),
        peak,
        held: (held, truth.blows.len()),
        estimate: a.timing.rolling_shutter_estimate_s,
    }
}

/// The target: with the rig's readout time, per-frame RMS ≤ 0.3° on a 10 ms readout clip
/// (rendered clip with known truth: a check against the renderer, not the world), and the
/// correction no worse than none.
#[test]
fn ten_ms_readout_with_the_rigs_time_within_a_third_of_a_degree() {
    let sc = rolling_scene(100.0);
    let truth = simulate(&sc);
    let frames = rolling_frames(&sc, &truth, 0.010);
    let (d, n) = rms(&sc, &truth, frames.clone(), Some(10.0));
    assert!(d <= 0.3 && n <= 0.3, "{d:.3}/{n:.3}");
    let (d0, n0) = rms(&sc, &truth, frames, None);
    assert!(
        d <= d0 && n <= n0 + 0.002,
        "{d:.3}/{n:.3} against {d0:.3}/{n0:.3} uncorrected"
    );
}

/// At 240 fps a blow's rise falls inside one frame, and a 2 ms readout reads the peak's
/// frame while the marks turn fast: the twist there reads high (about +30 % on this bench),
/// which no correction can mend. Every blow's 95 % interval holds the truth all the same,
/// with the skew warning; without the readout, on a clip timed by the camera's clock, the
/// bound of a whole frame interval holds it too.
#[test]
fn a_peak_read_during_a_fast_turn_has_an_interval_that_holds_the_truth() {
    let sc = rolling_scene(240.0);
    let truth = simulate(&sc);
    let frames = rolling_frames(&sc, &truth, 0.002);
    for (ms, capture) in [(Some(2.0), Some(240.0)), (None, None)] {
        let a = analyse(&sc, frames.clone(), capture, ms);
        assert_eq!(a.blows.len(), truth.blows.len(), "{ms:?}");
        let mut worst: f64 = 0.0;
        for (b, t) in a.blows.iter().zip(&truth.blows) {
            let (lo, hi) = b.peak_torque_ci95.expect("an interval");
            let q = b.peak_torque.unwrap().nm();
            worst = worst.max((q - t.peak_torque_nm).abs() / t.peak_torque_nm);
            assert!(
                lo.nm() <= t.peak_torque_nm && t.peak_torque_nm <= hi.nm(),
                "{ms:?}: blow {} read {q:.1}, interval {:.1}..{:.1}, truth {:.1}",
                b.index,
                lo.nm(),
                hi.nm(),
                t.peak_torque_nm
            );
        }
        // The case is the one the bound is for: a peak read well off.
        assert!(worst > 0.1, "{ms:?}: {worst}");
        assert!(
            a.warnings
                .iter()
                .any(|w| matches!(w, crate::Warning::PeakReadoutSkew { .. })),
            "{ms:?}"
        );
    }
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
        let a = analyse(&sc, frames.clone(), capture, ms);
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

/// Figures for docs/accuracy.md: per-frame RMS with and without the rig's readout time, with
/// the marks near the picture's middle rows and far from them.
#[test]
#[ignore = "prints figures; run with --ignored --nocapture"]
fn rolling_shutter_figures() {
    for (layout, place) in [
        ("middle", (|sc| sc) as fn(Scenario) -> Scenario),
        ("off-centre", off_centre),
    ] {
        for fps in [60.0, 100.0, 240.0] {
            for ms in [0.0, 2.0, 4.0, 5.0, 10.0, 16.0] {
                if ms * 1e-3 > 1.0 / fps {
                    // A sensor reads a frame out before it starts the next.
                    continue;
                }
                let sc = place(rolling_scene(fps));
                let truth = simulate(&sc);
                let frames = rolling_frames(&sc, &truth, ms * 1e-3);
                let with = errors(&sc, &truth, frames.clone(), Some(ms));
                let without = errors(&sc, &truth, frames, None);
                let cell = |e: &Errors| {
                    let lost = |(r, l): (f64, usize)| {
                        if l > 0 {
                            format!("{r:.3} ({l} lost)")
                        } else {
                            format!("{r:.3}")
                        }
                    };
                    let peak = e
                        .peak
                        .map_or("–".to_string(), |p| format!("{:.1} %", 100.0 * p));
                    format!(
                        "{} / {} | {peak} | {} of {}",
                        lost(e.drive),
                        lost(e.nut),
                        e.held.0,
                        e.held.1
                    )
                };
                println!(
                    "| {layout} | {fps} | {ms} | {} | {} |",
                    cell(&without),
                    cell(&with)
                );
            }
        }
    }
}

/// Figures: the readout estimated from the clip (`estimate_readout`) against the readout the
/// clip was rendered with.
#[test]
#[ignore = "prints figures; run with --ignored --nocapture"]
fn readout_estimate_figures() {
    for (layout, place) in [
        ("middle", (|sc| sc) as fn(Scenario) -> Scenario),
        ("off-centre", off_centre),
    ] {
        for fps in [60.0, 100.0, 240.0, 480.0] {
            for ms in [0.0, 2.0, 4.0, 10.0, 16.0] {
                if ms * 1e-3 > 1.0 / fps {
                    continue;
                }
                let sc = place(rolling_scene(fps));
                let truth = simulate(&sc);
                let frames = rolling_frames(&sc, &truth, ms * 1e-3);
                let rig = sc.rig();
                let a = crate::analyze::analyze_source(
                    Box::new(MemorySource::new(frames, Some(fps))),
                    &rig,
                    std::path::Path::new("rig.json"),
                    &AnalyzeOptions::default(),
                    &|_, _| {},
                )
                .unwrap();
                println!(
                    "| {layout} | {fps} | {ms} | {:?} |",
                    a.timing.rolling_shutter_estimate_s.map(|(t, (lo, hi))| (
                        1e3 * t,
                        1e3 * lo,
                        1e3 * hi
                    ))
                );
            }
        }
    }
}

/// The held-out rolling-shutter seeds (`tests/held_out_rolling_seeds.txt`), in order.
fn held_out_rolling_seeds() -> Vec<u64> {
    let list = std::fs::read_to_string(concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/tests/held_out_rolling_seeds.txt"
    ))
    .unwrap();
    list.lines()
        .filter(|l| !l.starts_with('#') && !l.trim().is_empty())
        .map(|l| l.trim().parse().unwrap())
        .collect()
}

/// On the first three held-out rolling-shutter scenes (rendered clips with known truth), with
/// the rig's readout: every blow's 95 % peak-torque interval holds the truth, the correction
/// is no worse than none on either mark, and a readout estimate, where one is given, holds
/// the rendered readout. All twelve scenes met these when first run (docs/accuracy.md).
#[test]
fn held_out_rolling_scenes_keep_their_intervals() {
    use crate::synth::rolling::random_rolling_scene;
    for seed in held_out_rolling_seeds().into_iter().take(3) {
        let r = random_rolling_scene(seed);
        let sc = &r.scenario;
        let truth = simulate(sc);
        let frames = rolling_frames(sc, &truth, r.readout_s);
        let with = errors(sc, &truth, frames.clone(), Some(1e3 * r.readout_s));
        let without = errors(sc, &truth, frames, None);
        assert_eq!(with.held.0, with.held.1, "{seed}: intervals");
        assert!(with.held.1 > 0, "{seed}: no blows");
        for (w, o) in [(with.drive, without.drive), (with.nut, without.nut)] {
            assert_eq!(w.1, 0, "{seed}: lost frames");
            assert!(w.0 <= o.0 + 0.002, "{seed}: {:.3} against {:.3}", w.0, o.0);
        }
        if let Some((_, (lo, hi))) = with.estimate {
            assert!(lo <= r.readout_s && r.readout_s <= hi, "{seed}: {lo}..{hi}");
        }
    }
}

/// The held-out rolling-shutter scenes (`tests/held_out_rolling_seeds.txt`, drawn by
/// `random_rolling_scene`): per scene, per-frame RMS without and with the rig's readout,
/// peak-torque intervals that hold the truth, and the readout estimated from the clip
/// (rendered clips with known truth: checks against the renderer, not the world).
#[test]
#[ignore = "renders 12 held-out scenes; run in release with --ignored --nocapture (docs/accuracy.md)"]
fn held_out_rolling_table() {
    use crate::synth::rolling::random_rolling_scene;
    let seeds = held_out_rolling_seeds();
    println!(
        "| seed | fps | readout ms | rows | drive / nut ρ | RMS without, ° | RMS with, ° | worst peak error with | intervals hold with | readout estimate, ms (95 %) |"
    );
    println!("|---|---|---|---|---|---|---|---|---|---|");
    for seed in seeds {
        let r = random_rolling_scene(seed);
        let sc = &r.scenario;
        let truth = simulate(sc);
        let frames = rolling_frames(sc, &truth, r.readout_s);
        let ms = 1e3 * r.readout_s;
        let with = errors(sc, &truth, frames.clone(), Some(ms));
        let without = errors(sc, &truth, frames, None);
        let rho = |y: f64| (y + 0.5) / f64::from(sc.scene.height) - 0.5;
        let lost = |(r, l): (f64, usize)| {
            if l > 0 {
                format!("{r:.3} ({l} lost)")
            } else {
                format!("{r:.3}")
            }
        };
        let est = with.estimate.map_or("none".to_string(), |(t, (lo, hi))| {
            format!("{:.2} ({:.2}–{:.2})", 1e3 * t, 1e3 * lo, 1e3 * hi)
        });
        println!(
            "| {seed} | {} | {ms:.2} | {} | {:+.2} / {:+.2} | {} / {} | {} / {} | {} | {} of {} | {est} |",
            sc.camera.fps_hz,
            sc.scene.height,
            rho(sc.scene.drive.pivot[1]),
            rho(sc.scene.nut.pivot[1]),
            lost(without.drive),
            lost(without.nut),
            lost(with.drive),
            lost(with.nut),
            with.peak
                .map_or("–".to_string(), |p| format!("{:.1} %", 100.0 * p)),
            with.held.0,
            with.held.1,
        );
    }
}
