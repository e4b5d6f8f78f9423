//! Side-view marks (`"kind": "side"`): a bar with stripes painted along it, seen from the side,
//! rendered with exact truth by the project's own side-view renderer (synthetic clips of our
//! invented bench) and measured by the tracker. The side-view target: angle RMS ≤ 0.5° within
//! ±60° of facing the camera, with one and with several stripes; near the silhouette a loss
//! (None and a warning), never a wrong value.

use std::path::Path;

use twistmark::Warning;
use twistmark::rig::Rig;
use twistmark::synth::side::SideScene;
use twistmark::track::Tracker;
use twistmark::units::TimeBase;

/// Measures the bar angle per frame (relative to frame 0, degrees) for the true angles
/// `truth_deg` (absolute, from facing the camera).
fn run(sc: &SideScene, truth_deg: &[f64]) -> (Vec<Option<f64>>, Vec<Warning>) {
    let mark = serde_json::to_value(sc.mark()).unwrap();
    let json = serde_json::json!({
        "rig_version": 1,
        "marks": {"drive": mark, "nut": mark}
    });
    let rig = Rig::from_json_str(&json.to_string(), Path::new("side.json")).unwrap();
    let mut t = Tracker::new(&rig, Path::new("side.json"), sc.width, sc.height).unwrap();
    for (i, a) in truth_deg.iter().enumerate() {
        t.push(&sc.render(i as u64, a.to_radians())).unwrap();
    }
    let (tr, w) = t.finish(TimeBase::from_fps(1000.0, "test").unwrap());
    (tr.drive.iter().map(|a| a.map(|a| a.deg())).collect(), w)
}

/// RMS error over the measured frames, the number of lost frames, and the largest error.
fn score(got: &[Option<f64>], truth_deg: &[f64]) -> (f64, usize, f64) {
    let (mut s2, mut n, mut lost, mut worst) = (0.0, 0usize, 0usize, 0.0f64);
    for (g, w) in got.iter().zip(truth_deg) {
        match g {
            Some(g) => {
                let e = g - (w - truth_deg[0]);
                s2 += e * e;
                n += 1;
                worst = worst.max(e.abs());
            }
            None => lost += 1,
        }
    }
    ((s2 / n.max(1) as f64).sqrt(), lost, worst)
}

/// A swing between −60° and +60° with uneven steps (fixed seed), starting facing the camera.
fn swing(frames: usize, amp: f64) -> Vec<f64> {
    let mut s = 0x2545_f491_4f6c_dd1d_u64;
    (0..frames)
        .map(|i| {
            s ^= s << 13;
            s ^= s >> 7;
            s ^= s << 17;
            let jitter = (s % 1000) as f64 / 1000.0 - 0.5;
            let p = i as f64 / frames as f64 * std::f64::consts::TAU * 1.5;
            if i == 0 {
                0.0
            } else {
                amp * p.sin() + 0.8 * jitter
            }
        })
        .map(|a: f64| a.clamp(-amp, amp))
        .collect()
}

#[test]
fn one_stripe_within_60_degrees_meets_the_target() {
    let sc = SideScene::bench(1);
    let truth = swing(90, 60.0);
    let (got, _) = run(&sc, &truth);
    let (rms, lost, worst) = score(&got, &truth);
    println!("side, 1 stripe, ±60°: RMS {rms:.3}°, worst {worst:.3}°, lost {lost}");
    assert_eq!(lost, 0);
    assert!(rms <= 0.5, "RMS {rms:.3}°");
}

#[test]
fn past_the_measurable_range_the_stripe_is_lost_not_misread() {
    let sc = SideScene::bench(1);
    let truth = swing(90, 85.0);
    let (got, warnings) = run(&sc, &truth);
    let (rms, lost, worst) = score(&got, &truth);
    println!(
        "side, 1 stripe, ±85°: RMS {rms:.3}° over measured frames, worst {worst:.3}°, lost {lost}"
    );
    assert!(lost > 0, "frames beyond the range must be losses");
    assert!(worst <= 1.5, "a measured frame is off by {worst:.2}°");
    assert!(rms <= 0.5, "RMS {rms:.3}°");
    for (g, w) in got.iter().zip(&truth) {
        if w.abs() < 55.0 {
            assert!(g.is_some(), "lost at {w:.1}° from facing");
        }
    }
    assert!(
        warnings
            .iter()
            .any(|w| matches!(w, Warning::MarkLost { mark, .. } if mark == "drive")),
        "{warnings:?}"
    );
}

#[test]
fn three_stripes_hand_over_through_full_turns() {
    // 120° apart: one stripe is always within ±60°, so a full turn and more is measured.
    let sc = SideScene::bench(3);
    let truth: Vec<f64> = (0..160).map(|i| i as f64 * 2.7).collect();
    let (got, _) = run(&sc, &truth);
    let (rms, lost, worst) = score(&got, &truth);
    println!("side, 3 stripes, 0..429°: RMS {rms:.3}°, worst {worst:.3}°, lost {lost}");
    assert_eq!(lost, 0);
    assert!(rms <= 0.5, "RMS {rms:.3}°");
}

#[test]
fn four_stripes_turning_backwards_stay_continuous() {
    let sc = SideScene::bench(4);
    let truth: Vec<f64> = (0..120).map(|i| -(i as f64) * 3.3).collect();
    let (got, _) = run(&sc, &truth);
    let (rms, lost, worst) = score(&got, &truth);
    println!("side, 4 stripes, 0..-393°: RMS {rms:.3}°, worst {worst:.3}°, lost {lost}");
    assert_eq!(lost, 0);
    assert!(rms <= 0.5, "RMS {rms:.3}°");
}

#[test]
fn two_stripes_lose_only_where_neither_faces_the_camera() {
    // 180° apart: near ±90° both stripes are at the silhouette, so those frames are losses.
    let sc = SideScene::bench(2);
    let truth: Vec<f64> = (0..120).map(|i| i as f64 * 3.0).collect();
    let (got, _) = run(&sc, &truth);
    let (rms, lost, worst) = score(&got, &truth);
    println!("side, 2 stripes, 0..357°: RMS {rms:.3}°, worst {worst:.3}°, lost {lost}");
    assert!(rms <= 0.5, "RMS {rms:.3}°");
    assert!(worst <= 1.5, "worst {worst:.2}°");
    for (g, w) in got.iter().zip(&truth) {
        let facing = (w + 90.0).rem_euclid(180.0) - 90.0;
        if facing.abs() <= 55.0 {
            assert!(
                g.is_some(),
                "lost at {w:.0}° (a stripe {facing:.0}° from facing)"
            );
        }
    }
}

#[test]
fn analyze_accepts_a_side_view_rig_end_to_end() {
    // The real binary on 8-bit PNG stills of a side view: drive and nut both given as side
    // marks on the same bar (so their twist is zero), turning in uneven steps within ±50°.
    let mut sc = SideScene::bench(3);
    sc.supersample = 4;
    let tmp = tempfile::tempdir().unwrap();
    let frames = tmp.path().join("frames");
    std::fs::create_dir_all(&frames).unwrap();
    let truth = swing(40, 50.0);
    for (i, a) in truth.iter().enumerate() {
        let f = sc.render(i as u64, a.to_radians());
        let twistmark::decode::Luma::U8(data) = &f.luma else {
            panic!("8-bit")
        };
        image::GrayImage::from_raw(f.width, f.height, data.clone())
            .unwrap()
            .save(frames.join(format!("f_{i:03}.png")))
            .unwrap();
    }
    let mark = serde_json::to_value(sc.mark()).unwrap();
    let rig = serde_json::json!({"rig_version": 1, "capture_fps_hz": 1000, "marks": {"drive": mark, "nut": mark}});
    let rig_path = tmp.path().join("rig.json");
    std::fs::write(&rig_path, rig.to_string()).unwrap();
    let out = tmp.path().join("out");
    assert_cmd::Command::cargo_bin("twistmark")
        .unwrap()
        .arg("analyze")
        .arg(&frames)
        .arg("--rig")
        .arg(&rig_path)
        .arg("--out")
        .arg(&out)
        .assert()
        .success();
    let rep: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("report.json")).unwrap()).unwrap();
    let got = rep["trace"]["drive_deg"].as_array().unwrap();
    assert_eq!(got.len(), truth.len());
    let s2: f64 = got
        .iter()
        .zip(&truth)
        .map(|(g, w)| (g.as_f64().unwrap() - (w - truth[0])).powi(2))
        .sum();
    let rms = (s2 / truth.len() as f64).sqrt();
    println!("side, analyze binary, 3 stripes: RMS {rms:.3}°");
    assert!(rms <= 0.5, "RMS {rms:.3}°");
}
