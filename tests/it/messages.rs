//! Error messages that say what to do, and inputs that used to be refused but are common,
//! through the real binary. Each bad input ends in exit 1 with one stderr line naming the
//! file, field or flag and what to change; each accepted form gives the same numbers as the
//! usual one. Clips are the project's own rendered fixtures (`fixtures/`, invented scenes with
//! known truth).
//!
//! | input | test |
//! |---|---|
//! | a missing `--rig` file | [`a_missing_rig_file_says_to_check_the_path_or_draft_one`] |
//! | a truncated rig | [`a_truncated_rig_says_it_is_cut_short`] |
//! | `bar` on a bar-only rig | [`bar_reads_a_bar_only_rig`] |
//! | `calibrate` on a bar-only rig, and a missing `--csv` | [`calibrate_updates_a_bar_only_file_in_its_own_shape`] |
//! | semicolon-separated and decimal-comma CSV | [`semicolon_and_decimal_comma_csv_give_the_same_fit`] |
//! | the set-up command's `--out` into a missing folder | [`set_up_out_into_a_missing_folder_names_it`] |
//! | `--overlay-every` without `--overlay` | [`overlay_every_turns_overlays_on`] |
//! | a bad `--units` | [`a_bad_units_value_names_the_flag`] |
//! | a manifest naming a clip that is not there | [`a_manifest_line_naming_a_missing_clip_is_named`] |
//! | a batch clip with no rig anywhere | [`a_batch_clip_without_any_rig_says_where_to_put_one`] |

use std::path::Path;

use crate::common::fixture;

/// Runs the binary (through `common::run`: a time limit, no panic); returns (exit code,
/// stdout, stderr).
fn run(args: &[&std::ffi::OsStr]) -> (i32, String, String) {
    let o = crate::common::run(args);
    (o.code, o.stdout, o.stderr)
}

fn os<S: AsRef<std::ffi::OsStr> + ?Sized>(s: &S) -> &std::ffi::OsStr {
    s.as_ref()
}

/// One line on stderr, no panic.
fn assert_one_line(stderr: &str) {
    let lines: Vec<&str> = stderr.lines().filter(|l| l.starts_with("error")).collect();
    assert_eq!(lines.len(), 1, "{stderr}");
    assert!(!stderr.contains("panicked"), "{stderr}");
}

#[test]
fn a_missing_rig_file_says_to_check_the_path_or_draft_one() {
    let d = tempfile::tempdir().unwrap();
    let rig = d.path().join("no-such-rig.json");
    let (code, _, err) = run(&[
        os("analyze"),
        fixture("fast-tool/frames").as_os_str(),
        os("--rig"),
        rig.as_os_str(),
        os("--out"),
        d.path().join("o").as_os_str(),
    ]);
    assert_eq!(code, 1, "{err}");
    assert_one_line(&err);
    assert!(
        err.contains("no-such-rig.json") && err.contains("--rig") && err.contains("find-marks"),
        "{err}"
    );
    assert!(!err.contains("os error"), "{err}");
}

#[test]
fn a_truncated_rig_says_it_is_cut_short() {
    let d = tempfile::tempdir().unwrap();
    let text = std::fs::read_to_string(fixture("fast-tool/rig.json")).unwrap();
    let rig = d.path().join("cut.json");
    std::fs::write(&rig, &text[..text.len() / 2]).unwrap();
    let (code, _, err) = run(&[
        os("analyze"),
        fixture("fast-tool/frames").as_os_str(),
        os("--rig"),
        rig.as_os_str(),
        os("--out"),
        d.path().join("o").as_os_str(),
    ]);
    assert_eq!(code, 1, "{err}");
    assert_one_line(&err);
    assert!(
        err.contains("cut.json") && err.contains("cut short") && err.contains("line"),
        "{err}"
    );
    assert!(!err.contains("EOF while parsing"), "{err}");
}

#[test]
fn bar_reads_a_bar_only_rig() {
    // The fast-tool rig's bar, alone: once under "bar" without marks, once as the bar itself.
    let full: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(fixture("fast-tool/rig.json")).unwrap())
            .unwrap();
    let bar = full["bar"].clone();
    let d = tempfile::tempdir().unwrap();
    let (_, want, _) = run(&[
        os("bar"),
        os("--rig"),
        fixture("fast-tool/rig.json").as_os_str(),
        os("--json"),
    ]);
    let want: serde_json::Value = serde_json::from_str(&want).unwrap();
    for (name, doc) in [
        (
            "wrapped.json",
            serde_json::json!({"rig_version": 1, "bar": bar}),
        ),
        ("bare.json", bar.clone()),
    ] {
        let p = d.path().join(name);
        std::fs::write(&p, doc.to_string()).unwrap();
        let (code, out, err) = run(&[os("bar"), os("--rig"), p.as_os_str(), os("--json")]);
        assert_eq!(code, 0, "{name}: {err}");
        let got: serde_json::Value = serde_json::from_str(&out).unwrap();
        assert_eq!(
            got["stiffness_nm_per_deg"], want["stiffness_nm_per_deg"],
            "{name}"
        );
    }
    // A bar-only file with a mistake still names the field under "bar".
    let mut broken = bar.clone();
    broken["rating_nm"] = serde_json::json!("lots");
    let p = d.path().join("broken.json");
    std::fs::write(&p, serde_json::json!({"bar": broken}).to_string()).unwrap();
    let (code, _, err) = run(&[os("bar"), os("--rig"), p.as_os_str()]);
    assert_eq!(code, 1);
    assert_one_line(&err);
    assert!(
        err.contains("broken.json") && err.contains("bar.rating_nm"),
        "{err}"
    );
}

#[test]
fn semicolon_and_decimal_comma_csv_give_the_same_fit() {
    let d = tempfile::tempdir().unwrap();
    let plain = d.path().join("plain.csv");
    let euro = d.path().join("euro.csv");
    std::fs::write(&plain, "torque_nm,twist_deg\n40,0.93\n80,1.9\n120,2.81\n").unwrap();
    std::fs::write(&euro, "torque_nm;twist_deg\n40;0,93\n80;1,9\n120;2,81\n").unwrap();
    let fit = |csv: &Path| {
        let (code, out, err) = run(&[
            os("calibrate"),
            os("--rig"),
            fixture("fast-tool/rig.json").as_os_str(),
            os("--csv"),
            csv.as_os_str(),
            os("--json"),
        ]);
        assert_eq!(code, 0, "{}: {err}", csv.display());
        let v: serde_json::Value = serde_json::from_str(&out).unwrap();
        v
    };
    let (a, b) = (fit(&plain), fit(&euro));
    assert_eq!(a, b);
    // A cell that is still not a number names the file, line and column.
    std::fs::write(&euro, "torque_nm;twist_deg\n40;0,9,3\n").unwrap();
    let (code, _, err) = run(&[
        os("calibrate"),
        os("--rig"),
        fixture("fast-tool/rig.json").as_os_str(),
        os("--csv"),
        euro.as_os_str(),
    ]);
    assert_eq!(code, 1);
    assert!(
        err.contains("euro.csv") && err.contains("line 2") && err.contains("twist_deg"),
        "{err}"
    );
}

#[test]
fn set_up_out_into_a_missing_folder_names_it() {
    let d = tempfile::tempdir().unwrap();
    let out = d.path().join("not-made-yet/rig.json");
    let try_cmd = |cmd: &str| {
        run(&[
            os(cmd),
            fixture("fast-tool/frames").as_os_str(),
            os("--out"),
            out.as_os_str(),
        ])
    };
    let (code, _o, err) = try_cmd("find-marks");
    assert_eq!(code, 1, "{err}");
    assert_one_line(&err);
    assert!(
        err.contains("--out") && err.contains("not-made-yet") && err.contains("does not exist"),
        "{err}"
    );
    assert!(!out.exists());
}

#[test]
fn overlay_every_turns_overlays_on() {
    let d = tempfile::tempdir().unwrap();
    let out = d.path().join("o");
    let (code, _, err) = run(&[
        os("analyze"),
        fixture("fast-tool/frames").as_os_str(),
        os("--rig"),
        fixture("fast-tool/rig.json").as_os_str(),
        os("--overlay-every"),
        os("5"),
        os("--out"),
        out.as_os_str(),
    ]);
    assert_eq!(code, 0, "{err}");
    let n = std::fs::read_dir(out.join("overlays")).unwrap().count();
    // The first frame and the peaks of blows 1 and 6 (fast-tool has 10 blows), at least.
    assert!(n >= 3, "{n} overlay frames");
}

#[test]
fn a_bad_units_value_names_the_flag() {
    let d = tempfile::tempdir().unwrap();
    let (code, _, err) = run(&[
        os("analyze"),
        fixture("fast-tool/frames").as_os_str(),
        os("--rig"),
        fixture("fast-tool/rig.json").as_os_str(),
        os("--units"),
        os("kgf-m"),
        os("--out"),
        d.path().join("o").as_os_str(),
    ]);
    assert_eq!(code, 1, "{err}");
    assert_one_line(&err);
    assert!(err.contains("--units") && err.contains("lbf-ft"), "{err}");
}

/// A batch folder with one stills clip in a test folder of its own, with its rig inside.
fn batch_folder(with_rig: bool) -> tempfile::TempDir {
    let d = tempfile::tempdir().unwrap();
    let test = d.path().join("in/run-a");
    std::fs::create_dir_all(test.join("frames")).unwrap();
    for e in std::fs::read_dir(fixture("fast-tool/frames")).unwrap() {
        let p = e.unwrap().path();
        std::fs::copy(&p, test.join("frames").join(p.file_name().unwrap())).unwrap();
    }
    if with_rig {
        std::fs::copy(fixture("fast-tool/rig.json"), test.join("rig.json")).unwrap();
    }
    d
}

#[test]
fn a_manifest_line_naming_a_missing_clip_is_named() {
    let d = batch_folder(true);
    let manifest = d.path().join("in/manifest.csv");
    std::fs::write(&manifest, "clip,tool\nrun-a/frames,T1\nrun-b/frames,T2\n").unwrap();
    let (code, _, err) = run(&[
        os("batch"),
        d.path().join("in").as_os_str(),
        os("--manifest"),
        manifest.as_os_str(),
        os("--out"),
        d.path().join("out").as_os_str(),
    ]);
    assert_eq!(code, 1, "{err}");
    assert_one_line(&err);
    assert!(
        err.contains("manifest.csv") && err.contains("line 3") && err.contains("run-b"),
        "{err}"
    );
}

#[test]
fn a_batch_clip_without_any_rig_says_where_to_put_one() {
    let d = batch_folder(false);
    let (code, out, err) = run(&[
        os("batch"),
        d.path().join("in").as_os_str(),
        os("--out"),
        d.path().join("out").as_os_str(),
    ]);
    assert_eq!(code, 1, "{out}{err}");
    let summary = std::fs::read_to_string(d.path().join("out/summary.csv")).unwrap();
    assert!(
        summary.contains("run-a/frames") && summary.contains("rig.json in its folder"),
        "{summary}"
    );
}

#[test]
fn calibrate_updates_a_bar_only_file_in_its_own_shape() {
    // The fast-tool rig's bar alone, as the bar object itself: calibrate writes it back as a
    // bar object with the calibrated stiffness, which `bar` then reads.
    let full: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(fixture("fast-tool/rig.json")).unwrap())
            .unwrap();
    let d = tempfile::tempdir().unwrap();
    let bare = d.path().join("bare.json");
    std::fs::write(&bare, full["bar"].to_string()).unwrap();
    // Twist 4° per 100 N·m: 25 N·m/deg.
    let (code, _, err) = run(&[
        os("calibrate"),
        os("--rig"),
        bare.as_os_str(),
        os("--pair"),
        os("100:4"),
        os("--pair"),
        os("200:8"),
        os("--pair"),
        os("300:12"),
        os("--out"),
        bare.as_os_str(),
    ]);
    assert_eq!(code, 0, "{err}");
    let written: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(&bare).unwrap()).unwrap();
    assert!(written.get("marks").is_none() && written.get("bar").is_none());
    let k = written["calibrated_stiffness_nm_per_deg"].as_f64().unwrap();
    assert!((k - 25.0).abs() < 1e-9, "{k}");
    let (code, out, err) = run(&[os("bar"), os("--rig"), bare.as_os_str(), os("--json")]);
    assert_eq!(code, 0, "{err}");
    let got: serde_json::Value = serde_json::from_str(&out).unwrap();
    assert!(
        (got["stiffness_nm_per_deg"].as_f64().unwrap() - 25.0).abs() < 1e-9,
        "{got}"
    );
    // Photos need the marks: a bar-only file is refused for --stills, saying why.
    let table = d.path().join("photos.csv");
    std::fs::write(&table, "torque_nm,image\n0,a.png\n").unwrap();
    let (code, _, err) = run(&[
        os("calibrate"),
        os("--rig"),
        bare.as_os_str(),
        os("--stills"),
        table.as_os_str(),
    ]);
    assert_eq!(code, 1, "{err}");
    assert_one_line(&err);
    assert!(
        err.contains("holds only a bar") && err.contains("marks"),
        "{err}"
    );
    // A missing --csv names the file and says to check the path, not "os error 2".
    let (code, _, err) = run(&[
        os("calibrate"),
        os("--rig"),
        bare.as_os_str(),
        os("--csv"),
        d.path().join("nope.csv").as_os_str(),
    ]);
    assert_eq!(code, 1, "{err}");
    assert_one_line(&err);
    assert!(
        err.contains("nope.csv") && err.contains("no such CSV file") && !err.contains("os error"),
        "{err}"
    );
}
