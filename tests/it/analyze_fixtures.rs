//! The main job, end to end: the real `twistmark analyze` binary on every bundled fixture, its
//! report compared number by number with the truth the renderer wrote.
//!
//! These are synthetic clips of the project's own invented test bench, rendered with exact known
//! truth (see docs/scenes.md); the tolerances are the project's accuracy targets, loosened where a
//! lossy codec or the realism knobs make that necessary (stated beside each).
//!
//! Each run's trace is also hashed and compared with `trace_hashes.json` beside this file:
//! a regression value, not an outside check. It proves that a change made for speed alone
//! leaves every fixture clip's `drive_deg` and `nut_deg` bit-identical. After a change meant to
//! alter the tracker's arithmetic, regenerate it with
//! `REGENERATE_TRACE_HASHES=1 cargo test --test it analyze_fixtures::` (and regenerate
//! docs/accuracy.md), and say so in the commit.
#![cfg(feature = "ffmpeg")]

use std::path::{Path, PathBuf};

use assert_cmd::Command;
use serde_json::Value;

fn root() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

fn read_json(p: &Path) -> Value {
    serde_json::from_str(&std::fs::read_to_string(p).unwrap()).unwrap()
}

fn f(v: &Value) -> f64 {
    v.as_f64().unwrap_or(f64::NAN)
}

/// Tolerances for one clip.
struct Tol {
    /// Per-frame angle RMS, degrees (drive and nut).
    angle_rms_deg: f64,
    /// Mean absolute error of the per-blow nut advance, degrees.
    nut_advance_mae_deg: f64,
    /// Relative error of each blow's peak torque.
    peak_torque_rel: f64,
}

/// Target: ≤ 0.10° RMS on lossless clips and stills, ≤ 0.10° nut-advance MAE, peak torque
/// within 3 %.
const LOSSLESS: Tol = Tol {
    angle_rms_deg: 0.10,
    nut_advance_mae_deg: 0.10,
    peak_torque_rel: 0.03,
};
/// Target: ≤ 0.20° RMS on compressed clips with noise, flicker or shake; torque within 3 %.
const COMPRESSED: Tol = Tol {
    angle_rms_deg: 0.20,
    nut_advance_mae_deg: 0.10,
    peak_torque_rel: 0.03,
};

/// The committed trace hashes, and the lock that serialises their regeneration (the tests of
/// this module run on parallel threads of one process).
const HASHES: &str = "tests/it/trace_hashes.json";
static HASHES_LOCK: std::sync::Mutex<()> = std::sync::Mutex::new(());

/// FNV-1a (64-bit) over every frame's `drive_deg` then `nut_deg`, as the bits of the f64 read
/// back from report.json (which prints the shortest text that reads back to the same f64);
/// a lost mark (null) hashes as u64::MAX.
fn trace_hash(report: &Value) -> String {
    let mut h: u64 = 0xcbf2_9ce4_8422_2325;
    let drive = report["trace"]["drive_deg"].as_array().unwrap();
    let nut = report["trace"]["nut_deg"].as_array().unwrap();
    for (d, n) in drive.iter().zip(nut) {
        for v in [d, n] {
            let bits = v.as_f64().map_or(u64::MAX, f64::to_bits);
            for byte in bits.to_le_bytes() {
                h ^= u64::from(byte);
                h = h.wrapping_mul(0x0100_0000_01b3);
            }
        }
    }
    format!("{h:016x}")
}

/// Compares this clip's trace hash with the committed one, or with
/// `REGENERATE_TRACE_HASHES=1` writes it into the file.
fn check_trace_hash(what: &str, report: &Value) {
    let got = trace_hash(report);
    let path = root().join(HASHES);
    let _guard = HASHES_LOCK.lock().unwrap_or_else(|e| e.into_inner());
    let mut file = read_json(&path);
    if std::env::var_os("REGENERATE_TRACE_HASHES").is_some_and(|v| v == "1") {
        file["hashes"][what] = Value::String(got);
        let text = serde_json::to_string_pretty(&file).unwrap() + "\n";
        let tmp = path.with_extension("json.tmp");
        std::fs::write(&tmp, text).unwrap();
        std::fs::rename(&tmp, &path).unwrap();
        return;
    }
    let want = file["hashes"][what].as_str().unwrap_or("(none)");
    assert_eq!(
        got, want,
        "{what}: the trace is no longer bit-identical to the committed one ({HASHES}); if the \
         change was meant to alter the tracking, regenerate with REGENERATE_TRACE_HASHES=1 \
         cargo test --test it analyze_fixtures::"
    );
}

fn check(fixture: &str, clip: &str, tol: Tol) {
    let dir = root().join("fixtures").join(fixture);
    let out = tempfile::tempdir().unwrap();
    let assert = Command::cargo_bin("twistmark")
        .unwrap()
        .arg("analyze")
        .arg(dir.join(clip))
        .arg("--rig")
        .arg(dir.join("rig.json"))
        .arg("--out")
        .arg(out.path())
        .assert()
        .success();
    let stdout = String::from_utf8_lossy(&assert.get_output().stdout).to_string();
    let stderr = String::from_utf8_lossy(&assert.get_output().stderr).to_string();
    assert!(!stdout.contains("panicked") && !stderr.contains("panicked"));
    assert!(
        stdout.contains("not a calibrated measurement"),
        "caution missing:\n{stdout}"
    );

    let truth = read_json(&dir.join("truth.json"));
    let report = read_json(&out.path().join("report.json"));
    let what = format!("{fixture}/{clip}");
    check_trace_hash(&what, &report);
    // Every fixture frame was captured: none is flagged as repeated or synthesised.
    let timing = &report["summary"]["timing"];
    assert_eq!(
        (&timing["duplicated_frames"], &timing["interpolated_frames"]),
        (&Value::from(0), &Value::from(0)),
        "{what}: frames flagged as not captured: {timing}"
    );

    // Every frame analysed, none lost.
    assert_eq!(report["frames"], truth["frames"], "{what}: frame count");
    for key in ["drive_deg", "nut_deg"] {
        let got = report["trace"][key].as_array().unwrap();
        let want = truth["trace"][key].as_array().unwrap();
        assert_eq!(got.len(), want.len(), "{what}: {key} length");
        let mut sq = 0.0;
        for (g, w) in got.iter().zip(want) {
            assert!(!g.is_null(), "{what}: {key} lost a frame");
            sq += (f(g) - f(w)).powi(2);
        }
        let rms = (sq / got.len() as f64).sqrt();
        assert!(
            rms <= tol.angle_rms_deg,
            "{what}: {key} RMS {rms:.3}° > {}°",
            tol.angle_rms_deg
        );
    }

    // No missed and no extra blows; onsets within one frame.
    let got = report["blows"].as_array().unwrap();
    let want = truth["blows"].as_array().unwrap();
    assert_eq!(got.len(), want.len(), "{what}: blow count");
    let mut nut_err = 0.0;
    for (g, w) in got.iter().zip(want) {
        let df = (f(&g["frame"]) - f(&w["frame"])).abs();
        assert!(
            df <= 1.0,
            "{what}: blow {} onset frame {} vs {}",
            w["index"],
            g["frame"],
            w["frame"]
        );
        nut_err += (f(&g["nut_advance_deg"]) - f(&w["nut_advance_deg"])).abs();
        let (pg, pw) = (f(&g["peak_torque_nm"]), f(&w["peak_torque_nm"]));
        assert!(
            (pg - pw).abs() <= tol.peak_torque_rel * pw,
            "{what}: blow {} peak torque {pg:.1} vs truth {pw:.1} N·m",
            w["index"]
        );
    }
    let mae = nut_err / want.len() as f64;
    assert!(
        mae <= tol.nut_advance_mae_deg,
        "{what}: nut advance MAE {mae:.3}°"
    );

    // Summary numbers.
    let (rg, rw) = (
        f(&report["summary"]["blow_rate_per_min"]),
        f(&truth["summary"]["blow_rate_per_min"]),
    );
    if rw.is_nan() {
        // One blow: no rate in the truth, and none may be invented.
        assert!(rg.is_nan(), "{what}: blow rate {rg} from a single blow");
    } else {
        assert!(
            (rg - rw).abs() <= 0.02 * rw,
            "{what}: blow rate {rg:.0} vs {rw:.0}"
        );
    }
    let (ng, nw) = (
        f(&report["summary"]["nut_total_deg"]),
        f(&truth["summary"]["nut_total_deg"]),
    );
    assert!(
        (ng - nw).abs() <= 0.15,
        "{what}: nut total {ng:.2} vs {nw:.2}"
    );
    let (kg, kw) = (
        f(&report["summary"]["bar_stiffness_nm_per_deg"]),
        f(&truth["summary"]["bar_stiffness_nm_per_deg"]),
    );
    assert!(
        (kg - kw).abs() <= 1e-6 * kw,
        "{what}: stiffness {kg} vs {kw}"
    );

    // The other files are there and parse.
    let blows_csv = std::fs::read_to_string(out.path().join("blows.csv")).unwrap();
    assert_eq!(
        blows_csv.lines().count(),
        want.len() + 1,
        "{what}: blows.csv rows"
    );
    let trace_csv = std::fs::read_to_string(out.path().join("trace.csv")).unwrap();
    assert_eq!(
        trace_csv.lines().count() as u64,
        truth["frames"].as_u64().unwrap() + 1
    );
}

#[test]
fn slow_tool_stills() {
    check("slow-tool", "frames", LOSSLESS);
}

#[test]
fn slow_tool_ffv1() {
    check("slow-tool", "clip_ffv1.mkv", LOSSLESS);
}

#[test]
fn slow_tool_h264() {
    check("slow-tool", "clip_h264.mp4", COMPRESSED);
}

#[test]
fn slow_tool_mjpeg() {
    check("slow-tool", "clip_mjpeg.avi", COMPRESSED);
}

#[test]
fn fast_tool_stills() {
    check("fast-tool", "frames", LOSSLESS);
}

#[test]
fn fast_tool_ffv1() {
    check("fast-tool", "clip_ffv1.mkv", LOSSLESS);
}

#[test]
fn fast_tool_h264() {
    check("fast-tool", "clip_h264.mp4", COMPRESSED);
}

#[test]
fn fast_tool_mjpeg() {
    check("fast-tool", "clip_mjpeg.avi", COMPRESSED);
}

#[test]
fn noisy_fast_tool_h264_with_flicker_and_shake() {
    check("fast-tool-noisy", "clip_h264.mp4", COMPRESSED);
}

#[test]
fn ccw_red_paint_on_bare_steel() {
    check("ccw-red-bare", "frames", LOSSLESS);
}

#[test]
fn tiff16_at_4000_fps() {
    check("tiff16-4000fps", "frames", LOSSLESS);
}

#[test]
fn oblique_drive_disc() {
    check("oblique-drive", "clip_ffv1.mkv", LOSSLESS);
}

#[test]
fn demo_clip() {
    check("demo", "clip_h264.mp4", COMPRESSED);
}
