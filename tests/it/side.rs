//! Side-view marks (`"kind": "side"`): a bar with stripes painted along it, seen from the side,
//! rendered with exact truth by the project's own side-view renderer (synthetic clips of our
//! invented bench) and measured by the tracker. The side-view target: angle RMS ≤ 0.5° within
//! ±60° of facing the camera, with one and with several stripes; near the silhouette a loss
//! (None and a warning), never a wrong value.

use std::path::Path;

use twistmark::Warning;
use twistmark::rig::Rig;
use twistmark::track::Tracker;
use twistmark::units::TimeBase;
use twistmark_scenes::synth::side::SideScene;
use twistmark_scenes::synth::side_random::{SideClip, held_out_side_seeds, random_side_clip};

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

// --- Side views under a lamp's line (randomised scenes, exact truth) ---------------------
//
// `twistmark_scenes::synth::side_random` draws side views with a static specular line along the bar,
// paint of any colour, one to three stripes, colour or monochrome cameras, and motions that
// carry the paint across the line or round the back of the bar. Rendered clips with known
// truth are the checks. Targets: angle RMS ≤ 0.5° over the measured frames, and at least 95 %
// of the frames in which every stripe is round the back read null.

/// Frames per randomised side clip.
const SIDE_FRAMES: usize = 120;

/// One clip's figures.
struct SideScore {
    rms_deg: f64,
    worst_deg: f64,
    measured: usize,
    out_of_view: usize,
    out_of_view_null: usize,
}

fn run_side_clip(clip: &SideClip) -> SideScore {
    let sc = &clip.scene;
    let mark = serde_json::to_value(sc.mark()).unwrap();
    let json = serde_json::json!({"rig_version": 1, "marks": {"drive": mark, "nut": mark}});
    let rig = Rig::from_json_str(&json.to_string(), Path::new("side.json")).unwrap();
    let mut t = Tracker::new(&rig, Path::new("side.json"), sc.width, sc.height).unwrap();
    for i in 0..clip.truth_rad.len() {
        if let Err(e) = t.push(&clip.frame(i)) {
            println!("  refused: {e}");
            return SideScore {
                rms_deg: f64::NAN,
                worst_deg: f64::NAN,
                measured: 0,
                out_of_view: 0,
                out_of_view_null: 0,
            };
        }
    }
    let (tr, warnings) = t.finish(TimeBase::from_fps(1000.0, "test").unwrap());
    let truth: Vec<f64> = clip.truth_rad.iter().map(|a| a.to_degrees()).collect();
    if std::env::var_os("TWISTMARK_SIDE_DEBUG").is_some() {
        println!("{:?}\n{warnings:?}", clip.scene.lamp);
        for (i, g) in tr.drive.iter().enumerate() {
            println!(
                "  frame {i:3}: truth {:8.3}° read {:?}",
                truth[i] - truth[0],
                g.map(|g| (g.deg() * 1000.0).round() / 1000.0)
            );
        }
    }
    let (mut s2, mut measured, mut worst) = (0.0, 0usize, 0.0f64);
    let (mut out, mut out_null) = (0usize, 0usize);
    for (i, g) in tr.drive.iter().enumerate() {
        if clip.out_of_view(i) {
            out += 1;
            out_null += usize::from(g.is_none());
        }
        if let Some(g) = g {
            let e = g.deg() - (truth[i] - truth[0]);
            s2 += e * e;
            measured += 1;
            worst = worst.max(e.abs());
        }
    }
    SideScore {
        rms_deg: (s2 / measured.max(1) as f64).sqrt(),
        worst_deg: worst,
        measured,
        out_of_view: out,
        out_of_view_null: out_null,
    }
}

/// Runs the seeds, prints one line each and the median and worst, and returns the clips
/// that miss a target.
fn side_seeds(seeds: &[u64], frames: usize) -> Vec<String> {
    let mut misses = Vec::new();
    let mut rms = Vec::new();
    for &seed in seeds {
        let clip = random_side_clip(seed, frames);
        let s = run_side_clip(&clip);
        let null_share = if s.out_of_view > 0 {
            s.out_of_view_null as f64 / s.out_of_view as f64
        } else {
            1.0
        };
        println!(
            "seed {seed:>10}: {:?}, {} stripe(s), {} paint, {} camera: RMS {:.3}°, worst {:.3}°, measured {}/{}, out of view {} (null {:.0} %)",
            clip.motion,
            clip.scene.stripes,
            clip.paint,
            if clip.colour_camera { "colour" } else { "mono" },
            s.rms_deg,
            s.worst_deg,
            s.measured,
            frames,
            s.out_of_view,
            100.0 * null_share
        );
        rms.push(s.rms_deg);
        if s.rms_deg.is_nan() || s.rms_deg > 0.5 || s.measured == 0 || null_share < 0.95 {
            misses.push(format!(
                "seed {seed}: RMS {:.3}°, measured {}, null {:.0} % of {} out of view",
                s.rms_deg,
                s.measured,
                100.0 * null_share,
                s.out_of_view
            ));
        }
    }
    rms.sort_by(f64::total_cmp);
    println!(
        "side views, {} seeds: median RMS {:.3}°, worst {:.3}°; {} miss a target",
        rms.len(),
        rms[rms.len() / 2],
        rms[rms.len() - 1],
        misses.len()
    );
    misses
}

/// The held-out side views: the first list, or with `TWISTMARK_SIDE_LIST=second` the second
/// (`tests/held_out_side_seeds_second.txt`, drawn after the first had been run three times),
/// or with `TWISTMARK_SIDE_LIST=third` the third (drawn after the second's first run).
fn held_out_side() -> Vec<u64> {
    if std::env::var("TWISTMARK_SIDE_LIST").is_ok_and(|v| v == "second") {
        held_out_side_seeds(include_str!("../held_out_side_seeds_second.txt"))
    } else if std::env::var("TWISTMARK_SIDE_LIST").is_ok_and(|v| v == "third") {
        held_out_side_seeds(include_str!("../held_out_side_seeds_third.txt"))
    } else {
        held_out_side_seeds(include_str!("../held_out_side_seeds.txt"))
    }
}

/// Every held-out side-view seed of both lists (tuning seeds must be none of them).
fn all_held_out_side() -> Vec<u64> {
    let mut v = held_out_side_seeds(include_str!("../held_out_side_seeds.txt"));
    v.extend(held_out_side_seeds(include_str!(
        "../held_out_side_seeds_second.txt"
    )));
    v.extend(held_out_side_seeds(include_str!(
        "../held_out_side_seeds_third.txt"
    )));
    v
}

/// Tuning seeds (1 to 24; none is held out): figures only, for tuning.
#[test]
#[ignore = "tuning figures, not a check: run with --ignored --nocapture"]
fn side_views_under_a_lamp_tuning_seeds() {
    let seeds: Vec<u64> = match std::env::var("TWISTMARK_SIDE_SEEDS") {
        Ok(s) => s.split(',').filter_map(|v| v.trim().parse().ok()).collect(),
        Err(_) => (1..=24).collect(),
    };
    let held = all_held_out_side();
    assert!(seeds.iter().all(|s| !held.contains(s)), "a held-out seed");
    let misses = side_seeds(&seeds, SIDE_FRAMES);
    println!("{misses:#?}");
}

/// Every held-out side view (release build recommended).
#[test]
#[ignore = "not met yet (2026-12-05, release, docs/accuracy.md): third list (24 seeds, first run, TWISTMARK_SIDE_LIST=third) 19 within 0.5 deg RMS (worst 0.254), 5 all null; no clip of any list over 0.5 deg; out-of-view frames 100 % null"]
fn side_views_under_a_lamp_meet_the_targets_on_held_out_seeds() {
    let misses = side_seeds(&held_out_side(), SIDE_FRAMES);
    assert!(misses.is_empty(), "{misses:#?}");
}

#[test]
fn a_static_line_is_not_taken_for_white_paint() {
    // White paint on a bar under a lamp whose line is brighter than the paint, 30° from facing:
    // the paint swings across the line; the stripe is read, not the line.
    let mut sc = SideScene::bench(1);
    sc.supersample = 3;
    sc.paint = 0.85;
    sc.noise_sigma = 0.006;
    sc.seed = 5;
    sc.lamp = Some(twistmark_scenes::synth::side::LampLine {
        phi_rad: 30f64.to_radians(),
        sigma_rad: 2.5f64.to_radians(),
        peak: 0.45,
        paint_gloss: 0.0,
    });
    let truth: Vec<f64> = (0..80)
        .map(|i| -10.0 + 55.0 * (i as f64 / 80.0 * std::f64::consts::TAU).sin())
        .collect();
    let (got, warnings) = run(&sc, &truth);
    let (rms, lost, worst) = score(&got, &truth);
    println!(
        "side, white paint under a lamp's line: RMS {rms:.3}°, worst {worst:.3}°, lost {lost}"
    );
    assert!(rms <= 0.5, "RMS {rms:.3}°");
    assert!(lost < 30, "lost {lost} of 80");
    assert!(
        warnings
            .iter()
            .any(|w| matches!(w, Warning::Note(n) if n.contains("static line"))),
        "{warnings:?}"
    );
}

#[test]
fn a_stripe_round_the_back_reads_null_not_the_lamps_line() {
    // One stripe turned round the back after ten frames and held there: the lamp's line is
    // still in view, and must not be read as the paint.
    let mut sc = SideScene::bench(1);
    sc.supersample = 3;
    sc.lamp = Some(twistmark_scenes::synth::side::LampLine {
        phi_rad: (-20f64).to_radians(),
        sigma_rad: 2.0f64.to_radians(),
        peak: 0.4,
        paint_gloss: 0.3,
    });
    let truth: Vec<f64> = (0..90)
        .map(|i| match i {
            0..10 => 5.0,
            10..20 => 5.0 + 17.5 * (i - 9) as f64,
            _ => 180.0 + 0.2 * i as f64,
        })
        .collect();
    let (got, _) = run(&sc, &truth);
    let behind = got.iter().zip(&truth).filter(|(_, w)| **w > 120.0);
    let (n, null) = behind.fold((0, 0), |(n, z), (g, _)| {
        (n + 1, z + usize::from(g.is_none()))
    });
    println!("side, stripe round the back: {null} of {n} frames null");
    assert!(null as f64 >= 0.95 * n as f64, "{null} of {n} null");
    let (rms, _, _) = score(&got, &truth);
    assert!(rms <= 0.5, "RMS {rms:.3}° over the frames read");
}

/// CI: tuning side seed 9 (blows, one black stripe, colour camera), whose paint faces the
/// camera on the lamp's bright line in the first frame. Before dark paint was read across a
/// bright line (`src/track/side/see_through.rs`) the line's core was not measured, the first
/// frame had no reading, and the whole clip was null (0 of 120 frames); now every frame is
/// read within the side-view target. A regression check on a tuning seed (rendered clip with
/// exact truth), not held-out evidence.
#[test]
fn dark_paint_on_the_lamps_line_in_the_first_frame_is_read_across_it() {
    let clip = random_side_clip(9, SIDE_FRAMES);
    let s = run_side_clip(&clip);
    assert!(
        s.measured >= 110 && s.rms_deg < 0.2,
        "measured {} of {SIDE_FRAMES}, RMS {:.3}°",
        s.measured,
        s.rms_deg
    );
}

/// CI: tuning side seed 13 (a white stripe swinging beside the lamp's line, colour camera).
/// The line lay inside the paint's swing, so the quantiles over the whole clip missed it, and
/// the first frame's reading (the zero) leaned on it: every frame read about 0.83° off, with
/// nothing said. Lines are now looked for again on the frames where the paint was elsewhere
/// (`src/track/side/layers.rs`), and a zero that cannot be read clear of a line is no reading:
/// the clip must be read within 0.3° RMS or not at all. A regression check on a tuning seed
/// (rendered clip with exact truth), not held-out evidence.
#[test]
fn a_line_inside_the_paints_swing_does_not_shift_the_zero() {
    let clip = random_side_clip(13, SIDE_FRAMES);
    let s = run_side_clip(&clip);
    assert!(
        s.measured == 0 || s.rms_deg < 0.3,
        "measured {} of {SIDE_FRAMES}, RMS {:.3}°",
        s.measured,
        s.rms_deg
    );
}
