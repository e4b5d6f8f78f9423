//! Footage from phones, through the real binary: a clip stored turned with a display-rotation
//! flag analyses with a rig drawn on the displayed picture. A rendered clip with known truth
//! (a check against the renderer, not the world). The slow-motion clips (made frames,
//! jittered timestamps) are checked in memory in `tools/scenes/src/synth/phone.rs`.
#![cfg(feature = "ffmpeg")]

use serde_json::Value;
use twistmark::decode::{Frame, Luma};
use twistmark_scenes::encode::{ClipWriter, Codec};
use twistmark_scenes::synth::{Scenario, render_clip, simulate};

use crate::common::run;

/// The slow tool filmed at 240 fps with sensor noise of 3 sample steps.
fn phone_scene() -> Scenario {
    let mut sc = Scenario::preset("slow-tool").unwrap();
    sc.camera.fps_hz = 240.0;
    sc.effects.noise_sigma = 0.012;
    sc.seed = 11;
    sc
}

/// The displayed frame as stored for a player that turns it 90° clockwise: the stored
/// picture is the displayed one turned 90° counter-clockwise.
fn stored_for_90_cw(f: &Frame) -> Frame {
    let Luma::U8(d) = &f.luma else {
        panic!("8-bit")
    };
    let (w, h) = (f.width as usize, f.height as usize);
    // Stored is h wide and w high; stored (xs, ys) is displayed (w − 1 − ys, xs).
    let mut out = Vec::with_capacity(d.len());
    for ys in 0..w {
        for xs in 0..h {
            out.push(d[xs * w + (w - 1 - ys)]);
        }
    }
    Frame::from_u8(f.index, h as u32, w as u32, out)
}

fn analyse(clip: &std::path::Path, rig: &twistmark::Rig, dir: &std::path::Path) -> Value {
    let rig_path = dir.join("rig.json");
    std::fs::write(&rig_path, serde_json::to_string_pretty(rig).unwrap()).unwrap();
    let out = dir.join("out");
    let o = run([
        "analyze".as_ref(),
        clip.as_os_str(),
        "--rig".as_ref(),
        rig_path.as_os_str(),
        "--out".as_ref(),
        out.as_os_str(),
    ]);
    assert_eq!(o.code, 0, "{}{}", o.stdout, o.stderr);
    serde_json::from_str(&std::fs::read_to_string(out.join("report.json")).unwrap()).unwrap()
}

fn check_blows(report: &Value, truth: &twistmark_scenes::synth::Truth, what: &str) {
    let blows = report["blows"].as_array().unwrap();
    assert_eq!(
        blows.len(),
        truth.blows.len(),
        "{what}: {}",
        report["warnings"]
    );
    for (b, t) in blows.iter().zip(&truth.blows) {
        let q = b["peak_torque_nm"].as_f64().unwrap();
        assert!(
            (q - t.peak_torque_nm).abs() <= 0.05 * t.peak_torque_nm,
            "{what}: blow {} peak {q:.1} N·m, truth {:.1}",
            b["index"],
            t.peak_torque_nm
        );
    }
}

#[test]
fn a_clip_stored_turned_with_a_rotation_flag_reads_in_its_displayed_orientation() {
    let sc = phone_scene();
    let truth = simulate(&sc);
    let dir = tempfile::tempdir().unwrap();
    let clip = dir.path().join("turned.mov");
    let (w, h) = (sc.scene.width, sc.scene.height);
    let mut wr = ClipWriter::create_rotated(&clip, Codec::Ffv1, h, w, 240.0, 90).unwrap();
    for f in render_clip(&sc, &truth) {
        wr.write(&stored_for_90_cw(&f)).unwrap();
    }
    wr.finish().unwrap();
    // The rig is the displayed picture's (the scene as rendered).
    let report = analyse(&clip, &sc.rig(), dir.path());
    check_blows(&report, &truth, "rotated");
}
