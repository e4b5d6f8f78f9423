//! Spring-back measured from the clip: the real `twistmark analyze` binary on the bundled
//! fixtures. The unwind's measured back-drive damping is compared with the damping the
//! renderer used (`scenario.json` `tool.back_damping_nms_per_rad`), and each held blow's
//! torque gain θp/√(θp² − θr²) (energy balance of a held, pre-wound bar; docs/mechanics.md,
//! "Spring-back measured from the clip") with the same formula on the rendered truth. These
//! are synthetic clips of the project's invented bench with exact known truth
//! (docs/scenes.md): a check of the method, not of the world.
#![cfg(feature = "ffmpeg")]

use serde_json::Value;

use super::common::{analyze_fixture, read_json};

fn run(fixture: &str, clip: &str) -> (Value, Value, Value) {
    let (dir, _, out) = analyze_fixture(fixture, clip);
    (
        read_json(&out.path().join("report.json")),
        read_json(&dir.join("truth.json")),
        read_json(&dir.join("scenario.json")),
    )
}

/// The decay's damping within 2 % of the rendered one; the verdict from the gain over held
/// blows; each held blow's gain within 0.03 of the truth's.
#[test]
fn springback_is_measured_from_the_clip() {
    for (fixture, clip, verdict) in [
        ("demo", "clip_h264.mp4", "still_wound"),
        ("fast-tool", "frames", "still_wound"),
        ("slow-tool", "frames", "sprang_back"),
    ] {
        let (r, t, sc) = run(fixture, clip);
        let sb = &r["springback"];
        let c = sb["measured_back_damping_nms_per_rad"].as_f64().unwrap();
        let want = sc["tool"]["back_damping_nms_per_rad"].as_f64().unwrap();
        assert!(
            (c / want - 1.0).abs() <= 0.02,
            "{fixture}: damping {c:.2} vs {want:.2} N·m·s/rad"
        );
        assert_eq!(sb["measured_from"], "torque_gain", "{fixture}");
        assert_eq!(sb["measured"], verdict, "{fixture}: {}", sb["sentence"]);
        let twist = t["trace"]["twist_deg"].as_array().unwrap();
        let mut held = 0;
        for (b, tb) in r["blows"]
            .as_array()
            .unwrap()
            .iter()
            .zip(t["blows"].as_array().unwrap())
        {
            let Some(g) = b["springback_torque_gain_ratio"].as_f64() else {
                assert!(!b["nut_held"].as_bool().unwrap() || b["pre_strike_twist_deg"].is_null());
                continue;
            };
            held += 1;
            let f = tb["frame"].as_u64().unwrap() as usize;
            let p = tb["peak_twist_deg"].as_f64().unwrap();
            let pre = twist[f - 1].as_f64().unwrap().max(0.0);
            let truth = p / (p * p - pre * pre).sqrt();
            assert!(
                (g - truth).abs() <= 0.03,
                "{fixture} blow {}: gain {g:.3} vs truth {truth:.3}",
                b["index"]
            );
        }
        assert!(held >= 1, "{fixture}: no held blow");
    }
}
