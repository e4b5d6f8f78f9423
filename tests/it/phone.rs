//! Footage from phones, through the real binary: a clip stored turned with a display-rotation
//! flag analyses with a rig drawn on the displayed picture; a slow-motion clip (blended frames,
//! jittered timestamps written into the file) and phones' codecs analyse with every blow
//! found. Rendered clips with known truth (a check against the renderer, not the world). More
//! slow-motion cases are checked in memory in `tools/scenes/src/synth/phone.rs`.
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
    // `info` names the rotation and gives the displayed size.
    let info = run(["info".as_ref(), clip.as_os_str(), "--json".as_ref()]);
    assert_eq!(info.code, 0, "{}", info.stderr);
    let v: Value = serde_json::from_str(&info.stdout).unwrap();
    assert_eq!(v["display_rotation_deg"], 90, "{v}");
    assert_eq!(
        (v["width"].as_u64(), v["height"].as_u64()),
        (Some(u64::from(w)), Some(u64::from(h)))
    );
    let text = run(["info".as_ref(), clip.as_os_str()]);
    assert!(text.stdout.contains("90° clockwise"), "{}", text.stdout);
    // The rig is the displayed picture's (the scene as rendered).
    let report = analyse(&clip, &sc.rig(), dir.path());
    check_blows(&report, &truth, "rotated");
}

/// The phone clip in memory as 10-bit samples (the 8-bit render × 4, as a 10-bit pipeline
/// stores an 8-bit scene).
fn deep10(f: &Frame) -> Frame {
    let Luma::U8(d) = &f.luma else {
        panic!("8-bit")
    };
    Frame {
        bit_depth: 10,
        luma: Luma::U16(d.iter().map(|&v| u16::from(v) * 4).collect()),
        ..f.clone()
    }
}

/// Phones' formats: a rendered 240 fps clip encoded as 10-bit HEVC (HDR modes) and as H.264
/// High (libx264's profile for 8-bit 4:2:0 with B-frames) analyses through the binary with
/// every blow found and each peak within 5 % (rendered clip with known truth). Skipped, with
/// a message, where the FFmpeg build has no such encoder.
#[test]
fn ten_bit_hevc_and_h264_high_phone_clips_analyse() {
    let sc = phone_scene();
    let truth = simulate(&sc);
    let frames = render_clip(&sc, &truth);
    let dir = tempfile::tempdir().unwrap();
    let (w, h) = (sc.scene.width, sc.scene.height);
    let cases = [
        ("hevc10.mp4", Codec::Hevc { crf: 18 }, 10u8),
        ("h264high.mp4", Codec::H264 { crf: 18 }, 8u8),
    ];
    for (name, codec, depth) in cases {
        let clip = dir.path().join(name);
        let mut wr = match ClipWriter::create_with_depth(&clip, codec, w, h, 240.0, depth) {
            Ok(wr) => wr,
            Err(e) if e.to_string().contains("has no") => {
                eprintln!("skipped {name}: {e}");
                continue;
            }
            Err(e) => panic!("{name}: {e}"),
        };
        for f in &frames {
            let f = if depth == 10 { deep10(f) } else { f.clone() };
            wr.write(&f).unwrap();
        }
        wr.finish().unwrap();
        let info = run(["info".as_ref(), clip.as_os_str(), "--json".as_ref()]);
        assert_eq!(info.code, 0, "{}", info.stderr);
        let sub = dir.path().join(format!("{name}.out"));
        std::fs::create_dir(&sub).unwrap();
        let report = analyse(&clip, &sc.rig(), &sub);
        check_blows(&report, &truth, name);
    }
}

/// A 960 fps slow-motion clip made from 240 fps captures (three of every four frames blended),
/// its jittered timestamps written into the file on a 1/90,000 s tick, analysed through the
/// binary with no capture rate: timed by the timestamps, the made frames flagged, every blow
/// found (precision = recall = 1) and each peak torque within 5 % of the truth's peak over
/// the captured frames.
#[test]
fn a_slow_motion_clip_with_jittered_timestamps_in_the_file_analyses() {
    use twistmark_scenes::synth::phone::{PhoneSpec, phone_clip};
    let sc = phone_scene();
    let truth = simulate(&sc);
    let clip = phone_clip(&sc, &truth, &PhoneSpec::default());
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("slowmo.mov");
    let (w, h) = (sc.scene.width, sc.scene.height);
    let mut wr =
        ClipWriter::create_timed(&path, Codec::Ffv1, w, h, clip.container_fps_hz, 90_000).unwrap();
    for (f, t) in clip.frames.iter().zip(&clip.times_s) {
        wr.write_at(f, (t * 90_000.0).round() as i64).unwrap();
    }
    assert_eq!(wr.finish().unwrap(), clip.frames.len() as u64);
    let mut rig = sc.rig();
    rig.capture_fps_hz = None;
    let report = analyse(&path, &rig, dir.path());
    let timing = &report["summary"]["timing"];
    assert_eq!(timing["source"], "timestamps", "{timing}");
    let made = clip.synthetic.iter().filter(|&&s| s).count() as f64;
    let flagged = timing["interpolated_frames"].as_f64().unwrap()
        + timing["duplicated_frames"].as_f64().unwrap();
    assert!(flagged >= 0.95 * made, "{flagged} of {made} flagged");
    let synthetic = report["trace"]["synthetic"].as_array().unwrap();
    for (i, s) in synthetic.iter().enumerate() {
        if !clip.synthetic[i] {
            assert_eq!(s, false, "captured frame {i} flagged");
        }
    }
    check_blows(&report, &truth, "slow motion");
}

/// The number after `key` in `text` (up to the next space), parsed.
fn number_after(text: &str, key: &str) -> f64 {
    let at = text
        .find(key)
        .unwrap_or_else(|| panic!("no {key:?} in {text}"))
        + key.len();
    let tail = &text[at..];
    let end = tail.find(' ').unwrap_or(tail.len());
    tail[..end]
        .parse()
        .unwrap_or_else(|e| panic!("{key:?}: {e} in {text}"))
}

/// A 240 fps clip read by a 4 ms rolling shutter and timed by the camera's clock (no capture
/// rate given), through the binary: `find-marks` suggests a readout whose 95 % interval holds
/// the 4 ms the clip was rendered with, and `analyze` with the drafted rig reports an
/// estimate in `summary.timing` whose interval holds it too (rendered clip with known truth:
/// a check against the renderer, not the world).
#[test]
fn find_marks_suggests_the_readout_a_rolling_shutter_clip_shows() {
    use twistmark_scenes::synth::rolling::rolling_frames;
    let sc = phone_scene();
    let truth = simulate(&sc);
    let frames = rolling_frames(&sc, &truth, 0.004);
    let dir = tempfile::tempdir().unwrap();
    let clip = dir.path().join("rolling.mkv");
    let (w, h) = (sc.scene.width, sc.scene.height);
    let mut wr = ClipWriter::create(&clip, Codec::Ffv1, w, h, 240.0).unwrap();
    for f in &frames {
        wr.write(f).unwrap();
    }
    wr.finish().unwrap();
    let rig = dir.path().join("draft.json");
    let o = run([
        "find-marks".as_ref(),
        clip.as_os_str(),
        "--out".as_ref(),
        rig.as_os_str(),
    ]);
    assert_eq!(o.code, 0, "{}{}", o.stdout, o.stderr);
    let lo = number_after(&o.stdout, "(95 %: ");
    let hi = number_after(&o.stdout, &format!("(95 %: {lo:.1} to "));
    assert!(lo <= 4.0 && 4.0 <= hi, "{}", o.stdout);
    let mut drafted: twistmark::Rig =
        serde_json::from_str(&std::fs::read_to_string(&rig).unwrap()).unwrap();
    drafted.bar = sc.rig().bar;
    let report = analyse(&clip, &drafted, dir.path());
    let ci = &report["summary"]["timing"]["rolling_shutter_estimate_ci95_ms"];
    let (lo, hi) = (ci[0].as_f64().unwrap(), ci[1].as_f64().unwrap());
    assert!(lo <= 4.0 && 4.0 <= hi, "{ci}");
}

/// A phone's 1080p picture: the 240 fps bench scaled 4.5 times to 1920×1080 (the frame's
/// height from 240 rows), written as H.264, analysed through the binary with a rig drawn on
/// that picture: every blow found and each peak within 5 % (rendered clip with known truth).
#[test]
fn a_1080p_phone_clip_analyses() {
    let mut sc = phone_scene();
    sc.scene = sc.scene.scaled(4.5);
    sc.scene.width = 1920;
    sc.scene.supersample = 4;
    let truth = simulate(&sc);
    let dir = tempfile::tempdir().unwrap();
    let clip = dir.path().join("phone1080.mp4");
    let (w, h) = (sc.scene.width, sc.scene.height);
    assert_eq!((w, h), (1920, 1080));
    let mut wr = match ClipWriter::create(&clip, Codec::H264 { crf: 18 }, w, h, 240.0) {
        Ok(wr) => wr,
        Err(e) if e.to_string().contains("has no") => {
            eprintln!("skipped: {e}");
            return;
        }
        Err(e) => panic!("{e}"),
    };
    for f in render_clip(&sc, &truth) {
        wr.write(&f).unwrap();
    }
    wr.finish().unwrap();
    let report = analyse(&clip, &sc.rig(), dir.path());
    assert_eq!(report["frames"].as_u64(), Some(truth.frames));
    check_blows(&report, &truth, "1080p");
}
