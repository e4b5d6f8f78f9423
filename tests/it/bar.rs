//! `twistmark bar` and `twistmark calibrate` run as the real binary: numbers against the
//! reference check values (each source named beside its value), the
//! interface keys, calibration written into a rig, and one-line errors for bad input.

use std::path::{Path, PathBuf};

use approx::assert_relative_eq;
use assert_cmd::Command;
use serde_json::Value;

/// 0.1 %: the tolerance the reference checks ask for.
const TOL: f64 = 1e-3;

/// The interface's example bar replaced by the reference bar C5 (θ = T·L/(G·J) in series, Beer & Johnston, *Mechanics of Materials*, ch. 3): 25 mm of
/// ½-in square, 150 mm of 16 mm round, 30 mm of 19 mm hex; G = 79.3 GPa.
const C5_RIG: &str = r#"{
  "rig_version": 1,
  "capture_fps_hz": 2000,
  "marks": {
    "drive": {"kind": "radial", "pivot": [160, 120], "radius": [30, 60], "tighten": "cw"},
    "nut":   {"kind": "radial", "pivot": [480, 120], "radius": [30, 60], "tighten": "cw"}
  },
  "bar": {
    "sections": [ {"shape": "square", "length_mm": 25,  "side_mm": 12.7},
                  {"shape": "round",  "length_mm": 150, "d_mm": 16},
                  {"shape": "hex",    "length_mm": 30,  "across_flats_mm": 19} ],
    "shear_modulus_gpa": 79.3,
    "rating_nm": 150
  }
}"#;

/// The rig example of the project's interface specification (its "Rig file" section),
/// verbatim in its bar.
const INTERFACE_RIG: &str = r#"{
  "rig_version": 1,
  "capture_fps_hz": 2000,
  "marks": {
    "drive": {"kind": "radial", "pivot": [160, 120], "radius": [30, 60], "tighten": "cw"},
    "nut":   {"kind": "radial", "pivot": [480, 120], "radius": [30, 60], "tighten": "cw"},
    "fixed": {"kind": "radial", "pivot": [320, 400], "radius": [10, 30]}
  },
  "bar": {
    "sections": [ {"shape": "round", "length_mm": 150, "d_mm": 16},
                  {"shape": "tube",  "length_mm": 40,  "d_mm": 22, "bore_mm": 14},
                  {"shape": "hex",   "length_mm": 30,  "across_flats_mm": 19},
                  {"shape": "square","length_mm": 25,  "side_mm": 12.7} ],
    "shear_modulus_gpa": 79.3,
    "rating_nm": 136
  }
}"#;

fn write(dir: &Path, name: &str, text: &str) -> PathBuf {
    let p = dir.join(name);
    std::fs::write(&p, text).unwrap();
    p
}

fn bin() -> Command {
    Command::cargo_bin("twistmark").unwrap()
}

fn bar_json(rig: &Path) -> Value {
    let out = bin()
        .args(["bar", "--json", "--rig"])
        .arg(rig)
        .assert()
        .success()
        .get_output()
        .stdout
        .clone();
    serde_json::from_slice(&out).unwrap()
}

fn num(v: &Value, key: &str) -> f64 {
    v[key]
        .as_f64()
        .unwrap_or_else(|| panic!("{key} missing in {v}"))
}

#[test]
fn bar_json_matches_c5_check_values() {
    let dir = tempfile::tempdir().unwrap();
    let rig = write(dir.path(), "rig.json", C5_RIG);
    let v = bar_json(&rig);
    // C5, computed by hand from 1/k = Σ L/(GJ) (Beer & Johnston, Mechanics of Materials, ch. 3)
    // with J = 0.140577·s⁴ for the square and 0.11505·s⁴ for the hexagon; those two
    // coefficients are checked against Timoshenko & Goodier's series and a finite-difference
    // Prandtl solve in src/mechanics/bar/saint_venant_check.rs, so this test checks the
    // binary's wiring, units and series sum: k = 2466.51 N·m/rad = 43.049 N·m/deg, twist at
    // 150 N·m = 3.4844°.
    assert_relative_eq!(num(&v, "stiffness_nm_per_rad"), 2466.51, max_relative = TOL);
    assert_relative_eq!(num(&v, "stiffness_nm_per_deg"), 43.049, max_relative = TOL);
    assert_relative_eq!(num(&v, "twist_at_rating_deg"), 3.4844, max_relative = TOL);
    // Largest over sections: the square, C3 τ = T/(0.208·s³) = 2.347 MPa per N·m (Timoshenko
    // & Goodier, ch. 10, table for rectangular bars, k₂ = 0.208) → 352.05 MPa at 150 N·m.
    assert_relative_eq!(
        num(&v, "shear_stress_at_rating_mpa"),
        2.347 * 150.0,
        max_relative = TOL
    );
    assert_eq!(
        v["shear_stress_at_rating_section"],
        "bar.sections[0] (square)"
    );
    // Section stiffnesses GJ/L = 11 600.1 / 3401.43 / 39 632.6 N·m/rad; the round section
    // supplies 72.5 % of the compliance (C5, computed as above).
    let secs = v["sections"].as_array().unwrap();
    for (s, want) in secs.iter().zip([11_600.1, 3401.43, 39_632.6]) {
        assert_relative_eq!(num(s, "stiffness_nm_per_rad"), want, max_relative = TOL);
    }
    assert!((num(&secs[1], "compliance_share") - 0.725).abs() < 5e-4);
    // 150 N·m in lbf·ft from the exact foot and pound-force: 1 N·m = 0.737 562 149 277 265
    // lbf·ft (NIST SP 811, 2008, Appendix B.9).
    assert_relative_eq!(
        num(&v, "rating_lbf_ft"),
        150.0 * 0.737_562_149_277_265,
        max_relative = 1e-9
    );
    assert_eq!(v["stiffness_source"], "computed");
    assert!(v["natural_frequency_hz"].is_null());
    assert!(v["caution"].as_str().unwrap().contains("not a calibrated"));
}

#[test]
fn bar_text_says_torque_is_a_model() {
    let dir = tempfile::tempdir().unwrap();
    let rig = write(dir.path(), "rig.json", C5_RIG);
    let out = bin().args(["bar", "--rig"]).arg(&rig).assert().success();
    let text = String::from_utf8(out.get_output().stdout.clone()).unwrap();
    assert!(text.contains("43.049 N·m/deg"), "{text}");
    assert!(text.contains("computed from the sections"), "{text}");
    assert!(text.contains("not a calibrated measurement"), "{text}");
    assert!(text.contains("torque wrench"), "{text}");
}

#[test]
fn interface_example_rig_still_parses() {
    let dir = tempfile::tempdir().unwrap();
    let rig = write(dir.path(), "rig.json", INTERFACE_RIG);
    let v = bar_json(&rig);
    for key in [
        "stiffness_nm_per_rad",
        "stiffness_nm_per_deg",
        "twist_at_rating_deg",
        "shear_stress_at_rating_mpa",
    ] {
        assert!(v[key].is_number(), "{key}: {v}");
    }
    // Consistency: twist at rating = rating / k.
    assert_relative_eq!(
        num(&v, "twist_at_rating_deg"),
        136.0 / num(&v, "stiffness_nm_per_deg"),
        max_relative = 1e-9
    );
}

#[test]
fn springback_from_drive_parts() {
    // Computed (I = ½·m·r², f_n = (1/2π)·√(k/I), theory-of-machines texts): a disk of 0.5 kg, r = 20 mm has I = 1.000e-4 kg·m²; on C1's
    // k = 2551.07 N·m/rad (d = 16 mm, L = 200 mm) f_n = 803.86 Hz, period 1.244 ms.
    let rig = C5_RIG.replace(
        r#""sections": [ {"shape": "square", "length_mm": 25,  "side_mm": 12.7},
                  {"shape": "round",  "length_mm": 150, "d_mm": 16},
                  {"shape": "hex",    "length_mm": 30,  "across_flats_mm": 19} ],"#,
        r#""sections": [ {"shape": "round", "length_mm": 200, "d_mm": 16} ],
    "drive_parts": [ {"part": "anvil", "mass_kg": 0.5, "outer_d_mm": 40} ],"#,
    );
    let dir = tempfile::tempdir().unwrap();
    let v = bar_json(&write(dir.path(), "rig.json", &rig));
    assert_relative_eq!(num(&v, "stiffness_nm_per_rad"), 2551.07, max_relative = TOL);
    assert_relative_eq!(num(&v, "drive_inertia_kg_m2"), 1.0e-4, max_relative = TOL);
    assert_relative_eq!(num(&v, "natural_frequency_hz"), 803.86, max_relative = TOL);
    // Spring-back (onset to a quarter of the peak twist, undamped): (π/2 + acos ¼)/(2π·f_n).
    let want_ms =
        (0.5 * std::f64::consts::PI + 0.25f64.acos()) / (2.0 * std::f64::consts::PI * 803.86) * 1e3;
    assert_relative_eq!(num(&v, "springback_ms"), want_ms, max_relative = TOL);
}

#[test]
fn springback_with_back_drive_damping() {
    // The project's simulated bench (synthetic, known physics): 25 mm of 19 mm hex, 220 mm of
    // 12 mm round, 30 mm of 19 mm hex; I = 2.0e-3 kg·m², back-drive damping 22 N·m·s/rad.
    // k = 709.71 N·m/rad; ζ = 22/(2√(kI)) = 9.233; spring-back to a quarter of the peak
    // 45.58 ms (rise π/2·√(I/k) plus the over-damped release, solved independently).
    let rig = C5_RIG.replace(
        r#""sections": [ {"shape": "square", "length_mm": 25,  "side_mm": 12.7},
                  {"shape": "round",  "length_mm": 150, "d_mm": 16},
                  {"shape": "hex",    "length_mm": 30,  "across_flats_mm": 19} ],"#,
        r#""sections": [ {"shape": "hex", "length_mm": 25, "across_flats_mm": 19},
                  {"shape": "round", "length_mm": 220, "d_mm": 12},
                  {"shape": "hex", "length_mm": 30, "across_flats_mm": 19} ],
    "drive_inertia_kg_m2": 2.0e-3,
    "drive_back_damping_nms_per_rad": 22,"#,
    );
    let dir = tempfile::tempdir().unwrap();
    let v = bar_json(&write(dir.path(), "rig.json", &rig));
    assert_relative_eq!(num(&v, "stiffness_nm_per_rad"), 709.71, max_relative = TOL);
    assert_relative_eq!(num(&v, "damping_ratio"), 9.2329, max_relative = TOL);
    assert_relative_eq!(num(&v, "springback_ms"), 45.575, max_relative = TOL);
    assert_eq!(v["drive_inertia_source"], "given");
    fails_naming(
        &rig.replace(
            r#""drive_back_damping_nms_per_rad": 22"#,
            r#""drive_back_damping_nms_per_rad": -1"#,
        ),
        "bar.drive_back_damping_nms_per_rad",
    );
}

#[test]
fn steel_and_stress_warning() {
    // 4140 annealed: Sy = 417 MPa (eFunda) → τy = 240.8 MPa (von Mises). At 150 N·m the
    // square carries 352 MPa: 146 % of shear yield, so a warning names the square.
    let rig = C5_RIG.replace(
        r#""shear_modulus_gpa": 79.3,"#,
        r#""steel": "4140-annealed","#,
    );
    let dir = tempfile::tempdir().unwrap();
    let rig = write(dir.path(), "rig.json", &rig);
    let out = bin()
        .args(["bar", "--json", "--rig"])
        .arg(&rig)
        .assert()
        .success();
    let stderr = String::from_utf8(out.get_output().stderr.clone()).unwrap();
    assert!(stderr.contains("bar.sections[0] (square)"), "{stderr}");
    let v: Value = serde_json::from_slice(&out.get_output().stdout).unwrap();
    assert_relative_eq!(
        num(&v, "stress_ratio_at_rating"),
        2.347 * 150.0 / (417.0 / 3f64.sqrt()),
        max_relative = TOL
    );
    assert_eq!(v["warnings"].as_array().unwrap().len(), 1);
    // G of 4140 per MatWeb: 80.0 GPa, so k is 80/79.3 times C5's.
    assert_relative_eq!(
        num(&v, "stiffness_nm_per_rad"),
        2466.51 * 80.0 / 79.3,
        max_relative = TOL
    );
}

/// Runs `bar` on a rig and checks the failure: exit 1, one line on stderr naming `field`.
fn fails_naming(rig_text: &str, field: &str) {
    let dir = tempfile::tempdir().unwrap();
    let rig = write(dir.path(), "rig.json", rig_text);
    let out = bin().args(["bar", "--rig"]).arg(&rig).assert().code(1);
    let stderr = String::from_utf8(out.get_output().stderr.clone()).unwrap();
    assert_eq!(
        stderr.trim_end().lines().count(),
        1,
        "not one line: {stderr}"
    );
    assert!(stderr.contains(field), "{field} not named: {stderr}");
    assert!(stderr.contains("rig.json"), "file not named: {stderr}");
    assert!(!stderr.contains("panicked"), "{stderr}");
}

#[test]
fn bad_bars_fail_with_one_line_naming_the_field() {
    let r = |from: &str, to: &str| {
        assert!(C5_RIG.contains(from), "{from}");
        C5_RIG.replace(from, to)
    };
    // Zero and negative dimensions.
    fails_naming(
        &r(r#""side_mm": 12.7"#, r#""side_mm": 0"#),
        "bar.sections[0].side_mm",
    );
    fails_naming(
        &r(r#""length_mm": 150"#, r#""length_mm": -150"#),
        "bar.sections[1].length_mm",
    );
    fails_naming(
        &r(r#""across_flats_mm": 19"#, r#""across_flats_mm": -19"#),
        "bar.sections[2].across_flats_mm",
    );
    // Bore no smaller than the outside diameter.
    fails_naming(
        &r(
            r#"{"shape": "round",  "length_mm": 150, "d_mm": 16}"#,
            r#"{"shape": "tube", "length_mm": 150, "d_mm": 16, "bore_mm": 16}"#,
        ),
        "bar.sections[1].bore_mm",
    );
    fails_naming(
        &r(
            r#"{"shape": "round",  "length_mm": 150, "d_mm": 16}"#,
            r#"{"shape": "tube", "length_mm": 150, "d_mm": 16, "bore_mm": 20}"#,
        ),
        "bar.sections[1].bore_mm",
    );
    // Unknown shape and unknown steel names.
    fails_naming(
        &r(r#""shape": "hex""#, r#""shape": "oval""#),
        "bar.sections[2].shape",
    );
    fails_naming(
        &r(
            r#""shear_modulus_gpa": 79.3,"#,
            r#""steel": "unobtainium","#,
        ),
        "bar.steel",
    );
    fails_naming(
        &r(r#""d_mm": 16}"#, r#""d_mm": 16, "steel": "s7"}"#),
        "bar.sections[1].steel",
    );
    // Shear modulus outside 20-250 GPa, bar-level and per section.
    fails_naming(
        &r(
            r#""shear_modulus_gpa": 79.3"#,
            r#""shear_modulus_gpa": 79300"#,
        ),
        "bar.shear_modulus_gpa",
    );
    fails_naming(
        &r(
            r#""shear_modulus_gpa": 79.3"#,
            r#""shear_modulus_gpa": 19.9"#,
        ),
        "bar.shear_modulus_gpa",
    );
    fails_naming(
        &r(r#""d_mm": 16}"#, r#""d_mm": 16, "shear_modulus_gpa": 260}"#),
        "bar.sections[1].shear_modulus_gpa",
    );
    // Unknown fields stay errors.
    fails_naming(&r(r#""rating_nm""#, r#""rating_Nm""#), "rating_Nm");
    fails_naming(
        &r(r#""d_mm": 16}"#, r#""d_mm": 16, "bore_mm": 4}"#),
        "bore_mm",
    );
    // A rig without a bar.
    let no_bar = C5_RIG.split(",\n  \"bar\"").next().unwrap().to_string() + "\n}";
    fails_naming(&no_bar, "bar");
}

#[test]
fn missing_rig_file_is_one_line() {
    let out = bin()
        .args(["bar", "--rig", "no/such/rig.json"])
        .assert()
        .code(1);
    let stderr = String::from_utf8(out.get_output().stderr.clone()).unwrap();
    assert_eq!(stderr.trim_end().lines().count(), 1, "{stderr}");
    assert!(stderr.contains("no/such/rig.json"), "{stderr}");
}

#[test]
fn calibrate_writes_k_that_bar_then_uses() {
    let dir = tempfile::tempdir().unwrap();
    let rig = write(dir.path(), "rig.json", C5_RIG);
    let out_rig = dir.path().join("calibrated.json");
    // Synthetic checks made with k = 40.0 N·m/deg exactly (known truth): twist = T/40.
    let out = bin()
        .args(["calibrate", "--json", "--rig"])
        .arg(&rig)
        .args([
            "--pair", "40:1", "--pair", "80:2", "--pair", "120:3", "--out",
        ])
        .arg(&out_rig)
        .assert()
        .success();
    let v: Value = serde_json::from_slice(&out.get_output().stdout).unwrap();
    assert_relative_eq!(
        num(&v, "calibrated_stiffness_nm_per_deg"),
        40.0,
        max_relative = 1e-12
    );
    assert!(num(&v, "stderr_nm_per_deg") < 1e-9);
    let b = bar_json(&out_rig);
    assert_eq!(b["stiffness_source"], "calibrated");
    assert_relative_eq!(num(&b, "stiffness_nm_per_deg"), 40.0, max_relative = 1e-12);
    assert_relative_eq!(
        num(&b, "computed_stiffness_nm_per_deg"),
        43.049,
        max_relative = TOL
    );
    assert_relative_eq!(
        num(&b, "twist_at_rating_deg"),
        150.0 / 40.0,
        max_relative = 1e-12
    );
    let written: Value = serde_json::from_slice(&std::fs::read(&out_rig).unwrap()).unwrap();
    assert_eq!(written["bar"]["calibration"]["pairs"], 3);
    assert_eq!(written["marks"]["drive"]["tighten"], "cw");
}

#[test]
fn calibrate_reads_csv_and_reports_residuals() {
    let dir = tempfile::tempdir().unwrap();
    let rig = write(dir.path(), "rig.json", C5_RIG);
    // 100 lbf·ft = 135.5818 N·m (NIST SP 811, 2008, Appendix B.9); twists made with k = 45 N·m/deg
    // plus ±0.01° of invented noise.
    let csv = write(
        dir.path(),
        "checks.csv",
        "torque_lbf_ft,twist_deg\n50,1.5164\n100,3.0029\n",
    );
    let out = bin()
        .args(["calibrate", "--json", "--rig"])
        .arg(&rig)
        .arg("--csv")
        .arg(&csv)
        .assert()
        .success();
    let v: Value = serde_json::from_slice(&out.get_output().stdout).unwrap();
    let k = num(&v, "calibrated_stiffness_nm_per_deg");
    let u = num(&v, "stderr_nm_per_deg");
    assert!((k - 45.0).abs() < 3.0 * u + 0.05, "k = {k} ± {u}");
    assert_relative_eq!(
        num(&v["pairs"][1], "torque_nm"),
        135.5818,
        max_relative = 1e-6
    );
    assert!(v["written_to"].is_null());
}

#[test]
fn calibrate_bad_input_is_one_line() {
    let dir = tempfile::tempdir().unwrap();
    let rig = write(dir.path(), "rig.json", C5_RIG);
    for args in [
        vec!["--pair", "100-2"],
        vec!["--pair", "100:2"],
        vec!["--pair", "-100:2", "--pair", "50:1"],
        vec![],
    ] {
        let out = bin()
            .args(["calibrate", "--rig"])
            .arg(&rig)
            .args(&args)
            .assert()
            .code(1);
        let stderr = String::from_utf8(out.get_output().stderr.clone()).unwrap();
        assert_eq!(stderr.trim_end().lines().count(), 1, "{args:?}: {stderr}");
        assert!(stderr.contains("--pair"), "{args:?}: {stderr}");
        assert!(!stderr.contains("panicked"));
    }
}
