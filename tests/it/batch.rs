//! `twistmark batch` run as a binary: bad folders, output placement, failing clips among
//! others, sidecar rigs, and the summary files, and a folder of rendered clips of the invented
//! bench whose results must equal single `analyze` runs.

use std::path::{Path, PathBuf};

use assert_cmd::Command;
use predicates::prelude::*;

const RIG: &str = r#"{
  "rig_version": 1, "capture_fps_hz": 2000,
  "marks": {
    "drive": {"kind": "radial", "pivot": [60, 60], "radius": [15, 40], "tighten": "cw"},
    "nut":   {"kind": "radial", "pivot": [180, 60], "radius": [15, 40], "tighten": "cw"}
  },
  "bar": {"sections": [{"shape": "round", "length_mm": 200, "d_mm": 16}], "rating_nm": 136}
}"#;

fn twistmark() -> Command {
    Command::cargo_bin("twistmark").unwrap()
}

/// A temp dir with `rig.json` and an empty `in/` folder.
fn setup() -> (tempfile::TempDir, PathBuf, PathBuf) {
    let d = tempfile::tempdir().unwrap();
    let rig = d.path().join("rig.json");
    std::fs::write(&rig, RIG).unwrap();
    let inp = d.path().join("in");
    std::fs::create_dir(&inp).unwrap();
    (d, rig, inp)
}

/// Every path under `dir` with its size, sorted, to check that nothing was written.
fn listing(dir: &Path) -> Vec<(PathBuf, u64)> {
    let mut out = Vec::new();
    let mut stack = vec![dir.to_path_buf()];
    while let Some(d) = stack.pop() {
        for e in std::fs::read_dir(&d).unwrap() {
            let p = e.unwrap().path();
            if p.is_dir() {
                stack.push(p.clone());
                out.push((p, 0));
            } else {
                let n = std::fs::metadata(&p).unwrap().len();
                out.push((p, n));
            }
        }
    }
    out.sort();
    out
}

fn one_line_error(stderr: &[u8]) -> String {
    let s = String::from_utf8_lossy(stderr).trim().to_string();
    assert_eq!(
        s.lines().count(),
        1,
        "expected one line on stderr, got:\n{s}"
    );
    assert!(s.starts_with("error: "), "{s}");
    s
}

#[test]
fn empty_folder_is_one_line_and_exit_1() {
    let (d, rig, inp) = setup();
    let out = twistmark()
        .args(["batch"])
        .arg(&inp)
        .arg("--rig")
        .arg(&rig)
        .arg("--out")
        .arg(d.path().join("out"))
        .assert()
        .code(1);
    let e = one_line_error(&out.get_output().stderr);
    assert!(e.contains("empty"), "{e}");
    assert!(e.contains("in"), "names the folder: {e}");
}

#[test]
fn folder_without_clips_says_what_a_clip_is() {
    let (d, rig, inp) = setup();
    std::fs::write(inp.join("notes.txt"), "bench notes").unwrap();
    std::fs::create_dir(inp.join("photos_without_numbers")).unwrap();
    std::fs::write(inp.join("photos_without_numbers/setup.png"), "x").unwrap();
    let out = twistmark()
        .arg("batch")
        .arg(&inp)
        .arg("--rig")
        .arg(&rig)
        .arg("--out")
        .arg(d.path().join("out"))
        .assert()
        .code(1);
    let e = one_line_error(&out.get_output().stderr);
    assert!(e.contains("no clips") && e.contains("mp4"), "{e}");
}

#[test]
fn missing_folder_is_one_line() {
    let (d, rig, _) = setup();
    let out = twistmark()
        .arg("batch")
        .arg(d.path().join("nowhere"))
        .arg("--rig")
        .arg(&rig)
        .arg("--out")
        .arg(d.path().join("out"))
        .assert()
        .code(1);
    let e = one_line_error(&out.get_output().stderr);
    assert!(e.contains("nowhere") && e.contains("no such folder"), "{e}");
}

#[test]
fn output_inside_input_is_refused_and_input_untouched() {
    let (_d, rig, inp) = setup();
    std::fs::write(inp.join("a.mp4"), b"not really a video").unwrap();
    let before = listing(&inp);
    for out_dir in [inp.join("results"), inp.clone(), inp.join("x/../results")] {
        let out = twistmark()
            .arg("batch")
            .arg(&inp)
            .arg("--rig")
            .arg(&rig)
            .arg("--out")
            .arg(&out_dir)
            .assert()
            .code(1);
        let e = one_line_error(&out.get_output().stderr);
        assert!(e.contains("inside the input folder"), "{e}");
        assert_eq!(listing(&inp), before, "input folder was modified");
    }
}

#[test]
fn jobs_zero_is_refused() {
    let (d, rig, inp) = setup();
    std::fs::write(inp.join("a.mp4"), b"x").unwrap();
    let out = twistmark()
        .arg("batch")
        .arg(&inp)
        .arg("--rig")
        .arg(&rig)
        .arg("--out")
        .arg(d.path().join("out"))
        .args(["--jobs", "0"])
        .assert()
        .code(1);
    let e = one_line_error(&out.get_output().stderr);
    assert!(e.contains("--jobs"), "{e}");
}

#[derive(Debug, serde::Deserialize)]
struct CsvRow {
    clip: String,
    status: String,
    error: Option<String>,
    rig: String,
    blow_rate_per_min: Option<f64>,
    nut_total_deg: Option<f64>,
    peak_torque_nm: Option<f64>,
    last_advancing_torque_nm: Option<f64>,
    residual_twist_deg: Option<f64>,
    rating_nm: Option<f64>,
    stress_margin_pct: Option<f64>,
}

#[test]
fn corrupt_clip_and_bad_sidecar_fail_alone_with_reasons() {
    let (d, rig, inp) = setup();
    // Random bytes with a video extension.
    let noise: Vec<u8> = (0..4096u32)
        .map(|i| (i.wrapping_mul(2_654_435_761) >> 13) as u8)
        .collect();
    std::fs::write(inp.join("corrupt.mp4"), &noise).unwrap();
    // A clip whose sidecar rig has a typo in a field name.
    std::fs::write(inp.join("clip10.mkv"), &noise).unwrap();
    std::fs::write(
        inp.join("clip10.rig.json"),
        RIG.replace("\"tighten\": \"cw\"", "\"tigthen\": \"cw\""),
    )
    .unwrap();
    // A stills folder with a truncated PNG.
    std::fs::create_dir(inp.join("clip2")).unwrap();
    std::fs::write(inp.join("clip2/f_1.png"), &noise[..100]).unwrap();
    std::fs::write(inp.join("readme.txt"), "not a clip").unwrap();
    let before = listing(&inp);
    let out_dir = d.path().join("out");

    let run = || {
        twistmark()
            .arg("batch")
            .arg(&inp)
            .arg("--rig")
            .arg(&rig)
            .arg("--out")
            .arg(&out_dir)
            .args(["--jobs", "2"])
            // The second run overwrites the first one's results, which needs --force.
            .arg("--force")
            .assert()
            .code(1)
            .stdout(predicate::str::contains("corrupt"))
    };
    let first = run();
    assert_eq!(listing(&inp), before, "input folder was modified");

    // Terminal summary: failed clips last, each with its reason on its own line.
    let stdout = String::from_utf8_lossy(&first.get_output().stdout).to_string();
    let failed_lines: Vec<&str> = stdout.lines().filter(|l| l.contains("failed:")).collect();
    assert_eq!(failed_lines.len(), 3, "{stdout}");
    assert!(stdout.contains("3 clip(s): 0 ok, 3 failed"), "{stdout}");

    // summary.csv: one row per clip, in folder order (clip2 before clip10), parseable.
    let mut rdr = csv::Reader::from_path(out_dir.join("summary.csv")).unwrap();
    let headers = rdr.headers().unwrap().clone();
    for key in [
        "clip",
        "status",
        "error",
        "blow_rate_per_min",
        "nut_total_deg",
        "peak_torque_nm",
        "last_advancing_torque_nm",
        "residual_twist_deg",
        "rating_nm",
        "stress_margin_pct",
    ] {
        assert!(headers.iter().any(|h| h == key), "summary.csv lacks {key}");
    }
    let rows: Vec<CsvRow> = rdr.deserialize().map(|r| r.unwrap()).collect();
    let names: Vec<&str> = rows.iter().map(|r| r.clip.as_str()).collect();
    assert_eq!(names, ["clip2", "clip10", "corrupt"]);
    for r in &rows {
        assert_eq!(r.status, "failed");
        let e = r.error.as_deref().unwrap();
        assert!(!e.contains('\n'));
        assert!(r.peak_torque_nm.is_none() && r.blow_rate_per_min.is_none());
        assert!(r.nut_total_deg.is_none() && r.rating_nm.is_none());
        assert!(r.last_advancing_torque_nm.is_none() && r.residual_twist_deg.is_none());
        assert!(r.stress_margin_pct.is_none());
    }
    assert!(rows[2].error.as_deref().unwrap().contains("corrupt.mp4"));
    assert!(rows[0].error.as_deref().unwrap().contains("clip2"));
    // The sidecar's error names the sidecar and the misspelt field.
    let side = rows[1].error.as_deref().unwrap();
    assert!(
        side.contains("clip10.rig.json") && side.contains("tigthen"),
        "{side}"
    );
    assert!(rows[1].rig.ends_with("clip10.rig.json"));
    assert!(rows[0].rig.ends_with("rig.json") && !rows[0].rig.contains("clip"));

    // summary.json: same rows, nulls for unknowns, the torque caution.
    let text = std::fs::read_to_string(out_dir.join("summary.json")).unwrap();
    let v: serde_json::Value = serde_json::from_str(&text).unwrap();
    let clips = v["clips"].as_array().unwrap();
    assert_eq!(clips.len(), 3);
    assert_eq!(clips[2]["clip"], "corrupt");
    assert_eq!(clips[2]["status"], "failed");
    assert!(clips[2]["peak_torque_nm"].is_null());
    assert!(
        v["torque_note"]
            .as_str()
            .unwrap()
            .contains("not a calibrated measurement")
    );
    assert!(out_dir.join("comparison.svg").is_file());
    assert!(out_dir.join("comparison.png").is_file());

    // Running again gives the same files.
    let csv_first = std::fs::read(out_dir.join("summary.csv")).unwrap();
    run();
    assert_eq!(
        std::fs::read(out_dir.join("summary.csv")).unwrap(),
        csv_first
    );
    assert_eq!(
        std::fs::read_to_string(out_dir.join("summary.json")).unwrap(),
        text
    );
}

/// Copies a folder of stills.
#[cfg(feature = "ffmpeg")]
fn copy_dir(from: &Path, to: &Path) {
    std::fs::create_dir_all(to).unwrap();
    for e in std::fs::read_dir(from).unwrap() {
        let p = e.unwrap().path();
        std::fs::copy(&p, to.join(p.file_name().unwrap())).unwrap();
    }
}

/// The done-criterion of the batch work: rendered air-tool and fast-tool scenes of the invented
/// bench (stills and video) plus one corrupt file. Every good clip is `ok` with the same numbers
/// as a single `analyze`, the corrupt one is `failed` with its reason, and the exit code is 1.
#[cfg(feature = "ffmpeg")]
#[test]
fn rendered_clips_match_single_runs_and_corrupt_one_fails() {
    let fx = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("fixtures");
    let d = tempfile::tempdir().unwrap();
    let inp = d.path().join("in");
    std::fs::create_dir(&inp).unwrap();
    // (clip name in the batch folder, fixture, clip inside the fixture)
    let clips = [
        ("air_stills", "slow-tool", "frames"),
        ("air_mjpeg.avi", "slow-tool", "clip_mjpeg.avi"),
        ("fast_ffv1.mkv", "fast-tool", "clip_ffv1.mkv"),
        ("fast_h264.mp4", "fast-tool", "clip_h264.mp4"),
    ];
    for (name, fixture, clip) in clips {
        let src = fx.join(fixture).join(clip);
        let dst = inp.join(name);
        if src.is_dir() {
            copy_dir(&src, &dst);
        } else {
            std::fs::copy(&src, &dst).unwrap();
        }
        // Each scene has its own capture rate and marks: a sidecar rig per clip.
        let stem = Path::new(name)
            .file_stem()
            .unwrap()
            .to_string_lossy()
            .to_string();
        std::fs::copy(
            fx.join(fixture).join("rig.json"),
            inp.join(format!("{stem}.rig.json")),
        )
        .unwrap();
    }
    let mp4 = std::fs::read(fx.join("fast-tool/clip_h264.mp4")).unwrap();
    std::fs::write(inp.join("broken.mp4"), &mp4[..mp4.len() / 3]).unwrap();
    let before = listing(&inp);

    let out = d.path().join("out");
    let run = |out: &Path| {
        twistmark()
            .arg("batch")
            .arg(&inp)
            .arg("--rig")
            .arg(fx.join("slow-tool/rig.json"))
            .arg("--out")
            .arg(out)
            .args(["--jobs", "2"])
            .assert()
            .code(1)
    };
    run(&out);
    assert_eq!(listing(&inp), before, "the input folder was modified");

    let summary: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("summary.json")).unwrap()).unwrap();
    let rows = summary["clips"].as_array().unwrap();
    assert_eq!(rows.len(), 5);
    let broken = rows.iter().find(|r| r["clip"] == "broken").unwrap();
    assert_eq!(broken["status"], "failed");
    assert!(
        broken["error"].as_str().unwrap().contains("broken.mp4"),
        "{broken}"
    );

    for (name, fixture, clip) in clips {
        let stem = Path::new(name)
            .file_stem()
            .unwrap()
            .to_string_lossy()
            .to_string();
        let row = rows.iter().find(|r| r["clip"] == stem.as_str()).unwrap();
        assert_eq!(row["status"], "ok", "{row}");
        // The same clip through a single `analyze`.
        let single = d.path().join(format!("single_{stem}"));
        twistmark()
            .arg("analyze")
            .arg(fx.join(fixture).join(clip))
            .arg("--rig")
            .arg(fx.join(fixture).join("rig.json"))
            .arg("--out")
            .arg(&single)
            .assert()
            .success();
        let a = std::fs::read_to_string(single.join("report.json")).unwrap();
        let a: serde_json::Value = serde_json::from_str(&a).unwrap();
        let b: serde_json::Value = serde_json::from_str(
            &std::fs::read_to_string(out.join(&stem).join("report.json")).unwrap(),
        )
        .unwrap();
        assert_eq!(
            a["blows"], b["blows"],
            "{stem}: blows differ from a single run"
        );
        assert_eq!(
            a["summary"], b["summary"],
            "{stem}: summary differs from a single run"
        );
        assert_eq!(row["blow_count"], a["summary"]["blow_count"]);
        assert_eq!(row["peak_torque_nm"], a["summary"]["peak_torque_nm"]);
        assert_eq!(row["nut_total_deg"], a["summary"]["nut_total_deg"]);
        assert!(row["last_advancing_torque_nm"].is_number(), "{row}");
        assert!(row["residual_twist_deg"].is_number(), "{row}");
    }
    // The fast tool keeps the bar wound up between blows, the air tool lets it spring back.
    let residual = |stem: &str| {
        rows.iter().find(|r| r["clip"] == stem).unwrap()["residual_twist_deg"]
            .as_f64()
            .unwrap()
    };
    assert!(residual("fast_ffv1") > residual("air_stills"));

    // Same inputs, same results.
    let out2 = d.path().join("out2");
    run(&out2);
    assert_eq!(
        std::fs::read_to_string(out.join("summary.csv")).unwrap(),
        std::fs::read_to_string(out2.join("summary.csv")).unwrap()
    );
}
