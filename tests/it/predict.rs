//! `twistmark predict`: the real binary on a report that `analyze` wrote from the bundled
//! slow-tool stills (a synthetic clip of the project's invented bench, docs/scenes.md), its
//! prediction for a stiffer bar compared with the renderer's own simulation of that bar (known
//! truth: a check of the method, not of the world), and its one-line refusals.

use std::path::{Path, PathBuf};

use serde_json::Value;
use twistmark::mechanics::SectionSpec;
use twistmark_scenes::synth::{Scenario, simulate};

use super::common::{fixture, one_line_error, run};

/// Analyses the slow-tool stills into `dir` and returns the report's path.
fn analysed(dir: &Path) -> PathBuf {
    let fx = fixture("slow-tool");
    let out = run([
        "analyze".as_ref(),
        fx.join("frames").as_os_str(),
        "--rig".as_ref(),
        fx.join("rig.json").as_os_str(),
        "--out".as_ref(),
        dir.join("out").as_os_str(),
        "--fit-model".as_ref(),
    ]);
    assert_eq!(out.code, 0, "{}", out.stderr);
    dir.join("out").join("report.json")
}

/// The fixture's scenario with the round section's diameter set to `d_mm`, and a bar-only
/// file for it.
fn other_bar(dir: &Path, d_mm: f64) -> (Scenario, PathBuf) {
    let text = std::fs::read_to_string(fixture("slow-tool").join("scenario.json")).unwrap();
    let mut sc: Scenario = serde_json::from_str(&text).unwrap();
    for s in &mut sc.bar.sections {
        if s.shape_name() == "round" {
            *s = SectionSpec::round(s.length_m() * 1e3, d_mm);
        }
    }
    let path = dir.join("other-bar.json");
    std::fs::write(&path, serde_json::to_string(&sc.bar).unwrap()).unwrap();
    (sc, path)
}

fn args(report: &Path, rig: &Path, extra: &[&str]) -> Vec<std::ffi::OsString> {
    let mut v: Vec<std::ffi::OsString> = vec![
        "predict".into(),
        "--report".into(),
        report.into(),
        "--rig".into(),
        rig.into(),
    ];
    v.extend(extra.iter().map(Into::into));
    v
}

#[test]
fn predicts_a_stiffer_bar_from_an_analysed_clip() {
    let tmp = tempfile::tempdir().unwrap();
    let report = analysed(tmp.path());
    let r: Value = serde_json::from_str(&std::fs::read_to_string(&report).unwrap()).unwrap();
    assert!(
        r["model"]["parameters"]["drive_inertia_kg_m2"]["value"].is_f64(),
        "report.json carries the fitted model: {}",
        r["model"]
    );
    let (sc, bar) = other_bar(tmp.path(), 13.0);
    let truth = simulate(&sc);
    let out = run(args(&report, &bar, &["--json"]));
    assert_eq!(out.code, 0, "{}", out.stderr);
    let p: Value = serde_json::from_str(&out.stdout).unwrap();
    let got = p["holding_torque_nm"].as_f64().unwrap();
    let want = truth.model.joint_torque_end_nm;
    let ci = &p["holding_torque_ci95_nm"];
    let (lo, hi) = (ci[0].as_f64().unwrap(), ci[1].as_f64().unwrap());
    eprintln!("holding {got:.1} [{lo:.1}, {hi:.1}] vs truth {want:.1}");
    // The 95 % interval holds the renderer's truth for the other bar. (The 5 % target is
    // not met yet; see docs/mechanics.md, "How well it does".)
    assert!(lo <= want && want <= hi, "[{lo:.1}, {hi:.1}] vs {want:.1}");
    let blows = p["blows"].as_array().unwrap();
    assert_eq!(blows.len(), truth.blows.len());
    for (b, t) in blows.iter().zip(&truth.blows) {
        let pk = b["peak_torque_nm"].as_f64().unwrap();
        let ci = &b["peak_torque_ci95_nm"];
        let (lo, hi) = (ci[0].as_f64().unwrap(), ci[1].as_f64().unwrap());
        let w = t.model_peak_torque_nm;
        eprintln!("blow {}: {pk:.1} [{lo:.1}, {hi:.1}] vs {w:.1}", t.index);
        assert!(lo <= w && w <= hi, "blow {}", t.index);
    }
    assert_eq!(p["limits"].as_bool(), Some(got <= 136.0));

    // A report written without --fit-model: predict fits the same model from the report's
    // trace (to its rounding) and says that it does.
    let mut doc = r.clone();
    doc.as_object_mut().unwrap().remove("model");
    let bare = tmp.path().join("no-model.json");
    std::fs::write(&bare, doc.to_string()).unwrap();
    let refit = run(args(&bare, &bar, &["--json"]));
    assert_eq!(refit.code, 0, "{}", refit.stderr);
    assert!(refit.stderr.contains("fitting"), "{}", refit.stderr);
    let q: Value = serde_json::from_str(&refit.stdout).unwrap();
    let again = q["holding_torque_nm"].as_f64().unwrap();
    assert!(
        (again - got).abs() <= 0.01 * got,
        "refitted holding {again:.2} vs stored {got:.2} N·m"
    );
    let ex = p["extrapolation"].as_array().unwrap();
    assert!(
        ex.iter()
            .any(|e| e.as_str().unwrap().contains("stiffer bar")),
        "{ex:?}"
    );

    // The text form says it is a model and defers to the maker and a torque wrench.
    let text = run(args(&report, &bar, &[]));
    assert_eq!(text.code, 0, "{}", text.stderr);
    for needle in [
        "holding torque",
        "limits:",
        "extrapolates:",
        "not a measurement",
        "calibrated torque wrench",
    ] {
        assert!(
            text.stdout.contains(needle),
            "'{needle}' missing: {}",
            text.stdout
        );
    }
}

#[test]
fn refuses_bad_inputs_with_one_line() {
    let tmp = tempfile::tempdir().unwrap();
    let report = analysed(tmp.path());
    let (_, bar) = other_bar(tmp.path(), 13.0);
    let doc: Value = serde_json::from_str(&std::fs::read_to_string(&report).unwrap()).unwrap();

    // A report made without a bar: no stiffness, no model.
    let mut no_bar = doc.clone();
    no_bar.as_object_mut().unwrap().remove("model");
    no_bar["summary"]["bar_stiffness_nm_per_rad"] = Value::Null;
    no_bar["summary"]["bar_stiffness_nm_per_deg"] = Value::Null;
    let p = tmp.path().join("no-bar.json");
    std::fs::write(&p, no_bar.to_string()).unwrap();
    one_line_error(&run(args(&p, &bar, &[])), &["no-bar.json", "without a bar"]);

    // A report without a stored model whose peak torque was withheld: nothing is fitted.
    let mut withheld = doc.clone();
    withheld.as_object_mut().unwrap().remove("model");
    withheld["summary"]["peak_torque_nm"] = Value::Null;
    let p = tmp.path().join("withheld.json");
    std::fs::write(&p, withheld.to_string()).unwrap();
    one_line_error(
        &run(args(&p, &bar, &[])),
        &["withheld.json", "no peak torque"],
    );

    // A model of another version: predict says to analyze again.
    let mut old = doc.clone();
    old["model"] = serde_json::json!({ "internal": [0.0, 1.0] });
    let p = tmp.path().join("old.json");
    std::fs::write(&p, old.to_string()).unwrap();
    one_line_error(&run(args(&p, &bar, &[])), &["old.json", "analyze", "again"]);

    // The fit's refusal as analyze stores it (too few blows) is passed on.
    let mut few = doc.clone();
    let parsed: twistmark::report::Report = serde_json::from_value(doc.clone()).unwrap();
    let mut obs = parsed.clip_obs().expect("the report has a bar");
    obs.blow_t_s.truncate(2);
    let reason = twistmark::mechanics::fit(&obs).unwrap_err().to_string();
    few["model"] = serde_json::json!({ "error": reason });
    let p = tmp.path().join("few.json");
    std::fs::write(&p, few.to_string()).unwrap();
    one_line_error(&run(args(&p, &bar, &[])), &["few.json", "at least 3"]);

    // Missing files, not a report, and out-of-range numbers.
    let missing = tmp.path().join("nope.json");
    one_line_error(
        &run(args(&missing, &bar, &[])),
        &["nope.json", "no such report file"],
    );
    one_line_error(&run(args(&report, &missing, &[])), &["nope.json"]);
    one_line_error(
        &run(args(&bar, &bar, &[])),
        &["not a twistmark report.json"],
    );
    one_line_error(&run(args(&report, &bar, &["--blows", "0"])), &["--blows"]);
    one_line_error(
        &run(args(&report, &bar, &["--blows", "100000"])),
        &["--blows", "200"],
    );
    one_line_error(
        &run(args(&report, &bar, &["--blows", "many"])),
        &["--blows"],
    );
    one_line_error(
        &run(args(&report, &bar, &["--blow-rate", "5"])),
        &["--blow-rate"],
    );
    one_line_error(
        &run(args(&report, &bar, &["--blow-rate", "NaN"])),
        &["--blow-rate"],
    );
}
