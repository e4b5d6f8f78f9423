//! The hostile-user rules (docs/conventions.md, "Plausible ranges and limits" and "Output safety"),
//! through the real binary: one test per rule, each with the cases a hostile pass found for that
//! rule. Clips are the project's own rendered fixtures (`fixtures/`, invented scenes) or files made
//! in the test.
//!
//! | rule | test |
//! |---|---|
//! | 1. no output path is an input | [`rule1_no_output_is_an_input`] |
//! | 2. every per-clip output folder is checked first | [`rule2_every_output_folder_is_checked_before_writing`] |
//! | 3. writes are atomic and confined | [`rule3_writes_are_atomic_and_confined`]; a link planted at a temporary name: `src/report/write.rs::a_link_planted_at_a_temporary_name_is_never_followed` |
//! | 4. paths reach FFmpeg as files | [`rule4_paths_reach_ffmpeg_as_files`] |
//! | 5. damaged frames are never measured | [`rule5_damaged_frames_are_never_measured`] |
//! | 6. physics sanity checks | [`rule6_physics_sanity`] |
//! | 7. bounded resources | [`rule7_bounded_resources`] |
//! | 8. strict parsing | [`rule8_strict_parsing`] |
//! | 9. one-line reasons | [`rule9_one_line_reasons`] |
//!
//! Rule 5: a frame the decoder flags as damaged (or cannot decode at all, in a stream of
//! independent frames) is null in the trace with a warning naming it; a damaged first frame
//! refuses the clip with a reason saying to start after it.

use std::ffi::OsString;
use std::path::{Path, PathBuf};

use super::common::{fixture, one_line_error, run};

fn rig() -> PathBuf {
    fixture("fast-tool/rig.json")
}

/// Copies the first `n` stills of a fixture into `dir`.
fn copy_frames(name: &str, dir: &Path, n: usize) -> Vec<PathBuf> {
    let mut files: Vec<PathBuf> = std::fs::read_dir(fixture(name).join("frames"))
        .unwrap()
        .map(|e| e.unwrap().path())
        .collect();
    files.sort();
    files.truncate(n);
    std::fs::create_dir_all(dir).unwrap();
    files
        .iter()
        .map(|f| {
            let to = dir.join(f.file_name().unwrap());
            std::fs::copy(f, &to).unwrap();
            to
        })
        .collect()
}

/// The fast-tool rig with text replacements (each must apply), written into `dir`.
fn rig_with(dir: &Path, name: &str, edits: &[(&str, &str)]) -> PathBuf {
    let mut text = std::fs::read_to_string(rig()).unwrap();
    for (from, to) in edits {
        assert!(text.contains(from), "'{from}' not in rig");
        text = text.replacen(from, to, 1);
    }
    let p = dir.join(name);
    std::fs::write(&p, text).unwrap();
    p
}

/// Every file under `dir` with its bytes.
fn snapshot(dir: &Path) -> Vec<(PathBuf, Vec<u8>)> {
    let mut v = Vec::new();
    let mut todo = vec![dir.to_path_buf()];
    while let Some(d) = todo.pop() {
        for e in std::fs::read_dir(&d).unwrap() {
            let p = e.unwrap().path();
            if p.is_dir() {
                todo.push(p);
            } else {
                v.push((p.clone(), std::fs::read(&p).unwrap()));
            }
        }
    }
    v.sort();
    v
}

fn args(list: &[&dyn AsRef<std::ffi::OsStr>]) -> Vec<OsString> {
    list.iter().map(|a| a.as_ref().to_os_string()).collect()
}

fn json(path: &Path) -> serde_json::Value {
    serde_json::from_str(&std::fs::read_to_string(path).unwrap()).unwrap()
}

#[test]
fn rule1_no_output_is_an_input() {
    let dir = tempfile::tempdir().unwrap();
    let clip = dir.path().join("clip");
    let frames = copy_frames("fast-tool", &clip, 40);
    let rig = rig_with(dir.path(), "rig.json", &[]);
    let csv = dir.path().join("checks.csv");
    std::fs::write(&csv, "torque_nm,twist_deg\n50,1.0\n100,2.1\n150,3.0\n").unwrap();
    let before = snapshot(dir.path());

    // find-marks --out pointed at a still of the clip.
    let r = run(args(&[&"find-marks", &clip, &"--out", &frames[0]]));
    one_line_error(&r, &["--out", "f_00000.png"]);
    // --preview pointed at the clip's first frame.
    let new_rig = dir.path().join("draft.json");
    let r = run(args(&[
        &"find-marks",
        &clip,
        &"--out",
        &new_rig,
        &"--preview",
        &frames[0],
    ]));
    one_line_error(&r, &["--preview"]);
    assert!(!new_rig.exists());
    // calibrate --out pointed at its own CSV.
    let r = run(args(&[
        &"calibrate",
        &"--rig",
        &rig,
        &"--csv",
        &csv,
        &"--out",
        &csv,
    ]));
    one_line_error(&r, &["--out", "checks.csv"]);
    // analyze --out pointed at the clip folder itself.
    let r = run(args(&[
        &"analyze", &clip, &"--rig", &rig, &"--out", &clip, &"--force",
    ]));
    one_line_error(&r, &["--out", "input"]);
    assert_eq!(snapshot(dir.path()), before, "an input changed");

    // The one allowed case: calibrate --out updates the rig it read.
    let r = run(args(&[
        &"calibrate",
        &"--rig",
        &rig,
        &"--csv",
        &csv,
        &"--out",
        &rig,
    ]));
    assert_eq!(r.code, 0, "{}", r.stderr);
    assert!(
        std::fs::read_to_string(&rig)
            .unwrap()
            .contains("calibrated_stiffness_nm_per_deg")
    );
}

#[test]
fn rule2_every_output_folder_is_checked_before_writing() {
    let dir = tempfile::tempdir().unwrap();
    let clips = dir.path().join("clips");
    copy_frames("fast-tool", &clips.join("take1"), 30);
    let out = dir.path().join("out");
    let batch = |folder: &Path, out: &Path, extra: &[&str]| {
        let mut a = args(&[&"batch", &folder, &"--rig", &rig(), &"--out", &out]);
        a.extend(extra.iter().map(OsString::from));
        run(a)
    };

    // An earlier analyze result in a clip's folder is not replaced without --force.
    let r = run(args(&[
        &"analyze",
        &clips.join("take1"),
        &"--rig",
        &rig(),
        &"--out",
        &out.join("take1"),
    ]));
    assert_eq!(r.code, 0, "{}", r.stderr);
    let before = snapshot(&out);
    one_line_error(&batch(&clips, &out, &[]), &["take1", "--force"]);
    assert_eq!(snapshot(&out), before, "the earlier report was touched");
    assert_eq!(batch(&clips, &out, &["--force"]).code, 0);

    // A second run into a folder held by another is refused.
    let held = dir.path().join("held");
    std::fs::create_dir(&held).unwrap();
    let lock = std::fs::OpenOptions::new()
        .create(true)
        .truncate(false)
        .write(true)
        .open(held.join(".twistmark.lock"))
        .unwrap();
    lock.try_lock().unwrap();
    one_line_error(&batch(&clips, &held, &[]), &["another twistmark run"]);
    assert!(!held.join("summary.json").exists());
    drop(lock);

    // Clips whose folder names would collide get unique folders.
    #[cfg(feature = "ffmpeg")]
    {
        let vids = dir.path().join("vids");
        std::fs::create_dir(&vids).unwrap();
        for n in ["x.mp4", "x.mov", "x.mp4.mkv"] {
            std::fs::copy(fixture("fast-tool/clip_ffv1.mkv"), vids.join(n)).unwrap();
        }
        let vout = dir.path().join("vout");
        let r = batch(&vids, &vout, &[]);
        assert_eq!(r.code, 0, "{}", r.stderr);
        let s = json(&vout.join("summary.json"));
        let mut names: Vec<String> = s["clips"]
            .as_array()
            .unwrap()
            .iter()
            .map(|c| c["clip"].as_str().unwrap().to_string())
            .collect();
        names.sort();
        names.dedup();
        assert_eq!(names.len(), 3, "{names:?}");
        for n in &names {
            assert!(vout.join(n).join("report.json").exists(), "{n}");
        }
    }

    // --out the parent of the input folder, where a clip's folder would be the input folder.
    let nest = dir.path().join("nest");
    let input = nest.join("clips");
    copy_frames("fast-tool", &input.join("clips"), 30);
    let before = snapshot(&input);
    let r = batch(&input, &nest, &[]);
    one_line_error(&r, &["--out"]);
    assert_eq!(snapshot(&input), before, "the input folder was written");
}

#[test]
fn rule3_writes_are_atomic_and_confined() {
    let dir = tempfile::tempdir().unwrap();
    let clip = dir.path().join("clip");
    copy_frames("fast-tool", &clip, 30);
    let analyze = |out: &Path, extra: &[&str]| {
        let mut a = args(&[&"analyze", &clip, &"--rig", &rig(), &"--out", &out]);
        a.extend(extra.iter().map(OsString::from));
        run(a)
    };

    // An `overlays` link out of the folder is not followed.
    let out = dir.path().join("out");
    let elsewhere = dir.path().join("elsewhere");
    std::fs::create_dir_all(&out).unwrap();
    std::fs::create_dir_all(&elsewhere).unwrap();
    #[cfg(unix)]
    {
        std::os::unix::fs::symlink(&elsewhere, out.join("overlays")).unwrap();
        let r = analyze(&out, &["--overlay"]);
        assert_eq!(r.code, 1, "{}", r.stderr);
        let last = r.stderr.lines().last().unwrap_or("");
        assert!(
            last.contains("overlays") && last.contains("symbolic link"),
            "{}",
            r.stderr
        );
        assert_eq!(std::fs::read_dir(&elsewhere).unwrap().count(), 0);
        std::fs::remove_file(out.join("overlays")).unwrap();
    }

    // A --force rerun clears what a killed run left: .partial files and stale overlays.
    assert_eq!(analyze(&out, &["--overlay"]).code, 0);
    std::fs::write(out.join(".trace.csv.4242.partial"), "half").unwrap();
    std::fs::write(out.join("overlays/frame_999999.png"), "stale").unwrap();
    let r = analyze(&out, &["--force"]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let names: Vec<String> = std::fs::read_dir(&out)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    assert!(names.iter().all(|n| !n.ends_with(".partial")), "{names:?}");
    assert!(!out.join("overlays/frame_999999.png").exists());

    // A --force rerun that fails midway leaves no report.json beside a mix of files: the old
    // report goes first. (trace.csv made a folder, so writing it fails.)
    std::fs::remove_file(out.join("trace.csv")).unwrap();
    std::fs::create_dir(out.join("trace.csv")).unwrap();
    let r = analyze(&out, &["--force"]);
    assert_eq!(r.code, 1, "{}", r.stderr);
    assert!(
        !out.join("report.json").exists(),
        "an old report.json was left beside new files"
    );
    assert!(std::fs::read_dir(&out).unwrap().all(|e| {
        !e.unwrap()
            .file_name()
            .to_string_lossy()
            .ends_with(".partial")
    }));
}

#[cfg(feature = "ffmpeg")]
#[test]
fn rule4_paths_reach_ffmpeg_as_files() {
    let dir = tempfile::tempdir().unwrap();
    let video = fixture("fast-tool/clip_ffv1.mkv");
    let info = |p: &Path| {
        let r = run(args(&[&"info", &p, &"--json"]));
        assert_eq!(r.code, 0, "{}: {}", p.display(), r.stderr);
        serde_json::from_str::<serde_json::Value>(&r.stdout).unwrap()["frames"].clone()
    };
    let frames = info(&video);
    let mut names: Vec<OsString> = vec!["12:03:44.mkv".into(), "file:take.mkv".into()];
    #[cfg(unix)]
    {
        use std::os::unix::ffi::OsStringExt;
        names.push(OsString::from_vec(b"take\xff\xfe.mkv".to_vec()));
    }
    for n in &names {
        let p = dir.path().join(n);
        std::fs::copy(&video, &p).unwrap();
        assert_eq!(info(&p), frames, "{}", p.display());
    }
    // Relative, with a colon: still the file of that name.
    let r = assert_cmd::Command::cargo_bin("twistmark")
        .unwrap()
        .current_dir(dir.path())
        .args(["info", "12:03:44.mkv", "--json"])
        .timeout(std::time::Duration::from_secs(60))
        .output()
        .unwrap();
    assert!(r.status.success(), "{}", String::from_utf8_lossy(&r.stderr));
    // `file:take.mkv` names that file, not `take.mkv` (which does not exist).
    assert!(!dir.path().join("take.mkv").exists());
}

#[test]
fn rule6_physics_sanity() {
    let dir = tempfile::tempdir().unwrap();
    let clip = dir.path().join("clip");
    copy_frames("fast-tool", &clip, 374);
    let analyze = |rig: &Path, out: &str| {
        run(args(&[
            &"analyze",
            &clip,
            &"--rig",
            &rig,
            &"--out",
            &dir.path().join(out),
        ]))
    };
    // Reversed tighten: refused, not a torque far beyond the rating.
    let reversed = rig_with(
        dir.path(),
        "reversed.json",
        &[
            ("\"tighten\": \"cw\"", "\"tighten\": \"ccw\""),
            ("\"tighten\": \"cw\"", "\"tighten\": \"ccw\""),
        ],
    );
    one_line_error(&analyze(&reversed, "rev"), &["tighten"]);
    // Identical marks: angles only, with a warning; no torque of zero printed as measured.
    let same = rig_with(
        dir.path(),
        "same.json",
        &[("238.0", "82.0"), ("17.0", "10.0"), ("62.0", "68.0")],
    );
    let r = analyze(&same, "same");
    assert_eq!(r.code, 0, "{}", r.stderr);
    assert!(r.stderr.contains("same mark"), "{}", r.stderr);
    let v = json(&dir.path().join("same/report.json"));
    assert!(v["summary"]["peak_torque_nm"].is_null(), "{}", v["summary"]);
    // No blow model is fitted to angles whose torque was withheld: analyze stores none (it
    // fits only with --fit-model) and predict refuses to fit one.
    assert!(v["model"].is_null(), "{}", v["model"]);
    let p = run(args(&[
        &"predict",
        &"--report",
        &dir.path().join("same/report.json"),
        &"--rig",
        &same,
    ]));
    one_line_error(&p, &["no peak torque"]);
    for b in v["blows"].as_array().unwrap() {
        assert!(b["peak_torque_nm"].is_null(), "{b}");
    }
    // Swapped drive and nut: no negative torque printed, a warning instead.
    let swapped = rig_with(
        dir.path(),
        "swapped.json",
        &[
            ("82.0", "@a"),
            ("10.0", "@b"),
            ("68.0", "@c"),
            ("238.0", "82.0"),
            ("17.0", "10.0"),
            ("62.0", "68.0"),
            ("@a", "238.0"),
            ("@b", "17.0"),
            ("@c", "62.0"),
        ],
    );
    let r = analyze(&swapped, "swap");
    assert_eq!(r.code, 0, "{}", r.stderr);
    let v = json(&dir.path().join("swap/report.json"));
    for b in v["blows"].as_array().unwrap() {
        assert!(
            b["peak_torque_nm"].is_null() || b["peak_torque_nm"].as_f64().unwrap() >= 0.0,
            "{b}"
        );
    }
    assert!(r.stderr.contains("swapped"), "{}", r.stderr);
    // Absurd bars and rates: one line naming the field or flag.
    let tiny = rig_with(
        dir.path(),
        "tiny.json",
        &[("\"d_mm\": 12.0", "\"d_mm\": 1e-300")],
    );
    one_line_error(
        &run(args(&[&"bar", &"--rig", &tiny])),
        &["d_mm", "plausible"],
    );
    let stiff = rig_with(
        dir.path(),
        "stiff.json",
        &[(
            "\"rating_nm\"",
            "\"calibrated_stiffness_nm_per_deg\": 1e308, \"rating_nm\"",
        )],
    );
    one_line_error(
        &run(args(&[&"bar", &"--rig", &stiff])),
        &["calibrated_stiffness_nm_per_deg"],
    );
    let r = run(args(&[
        &"analyze",
        &clip,
        &"--rig",
        &rig(),
        &"--fps",
        &"1e-308",
        &"--out",
        &dir.path().join("slow"),
    ]));
    one_line_error(&r, &["--fps", "plausible"]);
}

/// The JPEG encoding of a fixture still.
#[cfg(feature = "ffmpeg")]
fn jpeg_of(png: &Path) -> Vec<u8> {
    let img = image::open(png).unwrap().to_rgb8();
    let mut jpg = Vec::new();
    img.write_to(
        &mut std::io::Cursor::new(&mut jpg),
        image::ImageFormat::Jpeg,
    )
    .unwrap();
    jpg
}

#[cfg(feature = "ffmpeg")]
#[test]
fn rule5_damaged_frames_are_never_measured() {
    use rand::{RngExt, SeedableRng};
    let dir = tempfile::tempdir().unwrap();
    let frames = copy_frames("fast-tool", &dir.path().join("png"), 40);
    let mut stream = Vec::new();
    let mut rng = rand::rngs::ChaCha8Rng::seed_from_u64(18);
    for (i, f) in frames.iter().enumerate() {
        let mut jpg = jpeg_of(f);
        if i == 20 {
            // Scramble the middle half of the entropy-coded data (never 0xFF, so no marker
            // is made or broken): the frame's container structure stays whole.
            let sos = jpg.windows(2).position(|w| w == [0xFF, 0xDA]).unwrap();
            let start = sos + 2 + usize::from(u16::from_be_bytes([jpg[sos + 2], jpg[sos + 3]]));
            let n = jpg.len() - 2 - start;
            for b in &mut jpg[start + n / 4..start + 3 * n / 4] {
                *b = rng.random_range(0..0xFFu8);
            }
        }
        stream.extend(jpg);
    }
    let clip = dir.path().join("take.mjpeg");
    std::fs::write(&clip, stream).unwrap();
    let whole = dir.path().join("whole.mjpeg");
    std::fs::write(
        &whole,
        frames.iter().flat_map(|f| jpeg_of(f)).collect::<Vec<u8>>(),
    )
    .unwrap();
    let analyse = |clip: &Path, out: &Path| {
        let r = run(args(&[&"analyze", &clip, &"--rig", &rig(), &"--out", &out]));
        assert_eq!(r.code, 0, "{}{}", r.stdout, r.stderr);
        let report: serde_json::Value =
            serde_json::from_str(&std::fs::read_to_string(out.join("report.json")).unwrap())
                .unwrap();
        let trace = std::fs::read_to_string(out.join("trace.csv")).unwrap();
        (report, trace)
    };
    let (report, trace) = analyse(&clip, &dir.path().join("o"));
    let (whole_report, whole_trace) = analyse(&whole, &dir.path().join("w"));
    // The damaged frame is null in the trace, its neighbours are measured as in the whole clip.
    let row = |t: &str, i: usize| -> Vec<String> {
        let line = t.lines().nth(i + 1).unwrap();
        line.split(',').map(str::to_string).collect()
    };
    let r20 = row(&trace, 20);
    assert_eq!(r20[1], "20");
    assert!(
        r20[2].is_empty() && r20[3].is_empty(),
        "frame 20 measured: {r20:?}"
    );
    for i in [19, 21] {
        assert_eq!(row(&trace, i), row(&whole_trace, i), "frame {i}");
    }
    // Named in a warning, and no blow invented.
    let warnings = report["warnings"].to_string();
    assert!(warnings.contains("frame 20 is damaged"), "{warnings}");
    assert_eq!(
        report["blows"].as_array().unwrap().len(),
        whole_report["blows"].as_array().unwrap().len()
    );
}

/// A CRC-32 (IEEE) for patching PNG chunks.
fn crc32(bytes: &[u8]) -> u32 {
    let mut c = 0xffff_ffffu32;
    for &b in bytes {
        c ^= u32::from(b);
        for _ in 0..8 {
            c = if c & 1 != 0 {
                0xedb8_8320 ^ (c >> 1)
            } else {
                c >> 1
            };
        }
    }
    !c
}

/// A small valid PNG whose header then claims `w`×`h` pixels.
fn png_claiming(path: &Path, w: u32, h: u32) {
    let img = image::GrayImage::from_pixel(4, 4, image::Luma([9]));
    img.save(path).unwrap();
    let mut b = std::fs::read(path).unwrap();
    // Signature (8), length (4), "IHDR" (4), then width and height; CRC after 13 data bytes.
    b[16..20].copy_from_slice(&w.to_be_bytes());
    b[20..24].copy_from_slice(&h.to_be_bytes());
    let crc = crc32(&b[12..29]);
    b[29..33].copy_from_slice(&crc.to_be_bytes());
    std::fs::write(path, b).unwrap();
}

#[test]
fn rule7_bounded_resources() {
    let dir = tempfile::tempdir().unwrap();
    // Calibration stills whose header claims 65535² pixels.
    png_claiming(&dir.path().join("rest.png"), 65535, 65535);
    png_claiming(&dir.path().join("t1.png"), 65535, 65535);
    png_claiming(&dir.path().join("t2.png"), 65535, 65535);
    let table = dir.path().join("stills.csv");
    std::fs::write(
        &table,
        "torque_nm,image\n0,rest.png\n40,t1.png\n80,t2.png\n",
    )
    .unwrap();
    let r = run(args(&[&"calibrate", &"--rig", &rig(), &"--stills", &table]));
    one_line_error(&r, &["rest.png"]);
    // Clip stills claiming 32768² pixels.
    let clip = dir.path().join("clip");
    std::fs::create_dir(&clip).unwrap();
    for i in 0..3 {
        png_claiming(&clip.join(format!("f_{i}.png")), 32768, 32768);
    }
    let r = run(args(&[
        &"analyze",
        &clip,
        &"--rig",
        &rig(),
        &"--out",
        &dir.path().join("o"),
    ]));
    one_line_error(&r, &["f_0.png", "32768"]);
    // A text input far larger than any rig.
    let huge = dir.path().join("huge.json");
    std::fs::write(&huge, vec![b' '; 17 << 20]).unwrap();
    one_line_error(
        &run(args(&[&"bar", &"--rig", &huge])),
        &["huge.json", "MiB"],
    );
    #[cfg(target_os = "linux")]
    one_line_error(&run(["bar", "--rig", "/dev/zero"]), &["/dev/zero", "MiB"]);
    // A named pipe with no writer is refused at once instead of waiting for ever: as the rig,
    // as a zero still, as the clip.
    #[cfg(unix)]
    {
        let fifo = dir.path().join("pipe.json");
        let made = std::process::Command::new("mkfifo")
            .arg(&fifo)
            .status()
            .unwrap();
        assert!(made.success());
        let out = dir.path().join("p");
        let good = dir.path().join("good");
        copy_frames("fast-tool", &good, 20);
        one_line_error(
            &run(args(&[&"bar", &"--rig", &fifo])),
            &["pipe.json", "pipe"],
        );
        one_line_error(
            &run(args(&[
                &"analyze",
                &good,
                &"--rig",
                &rig(),
                &"--zero-still",
                &fifo,
                &"--out",
                &out,
            ])),
            &["pipe.json", "pipe"],
        );
        one_line_error(
            &run(args(&[&"analyze", &fifo, &"--rig", &rig(), &"--out", &out])),
            &["pipe.json", "pipe"],
        );
    }
    // A loop count from the rig (side-mark stripes searched every frame) is bounded.
    let side = dir.path().join("side.json");
    std::fs::write(
        &side,
        r#"{"rig_version": 1, "marks": {
            "drive": {"kind": "side", "axis": [[300, 200], [400, 200]], "radius_px": 20, "tighten": "up", "stripes": 4000000000},
            "nut": {"kind": "side", "axis": [[300, 300], [400, 300]], "radius_px": 20, "tighten": "up"}}}"#,
    )
    .unwrap();
    one_line_error(
        &run(args(&[
            &"analyze",
            &clip,
            &"--rig",
            &side,
            &"--out",
            &dir.path().join("s"),
        ])),
        &["marks.drive.stripes"],
    );
    // --jobs far beyond the cores is clamped, with a warning.
    let clips = dir.path().join("clips");
    copy_frames("fast-tool", &clips.join("a"), 20);
    let r = run(args(&[
        &"batch",
        &clips,
        &"--rig",
        &rig(),
        &"--out",
        &dir.path().join("b"),
        &"--jobs",
        &"10000",
    ]));
    assert_eq!(r.code, 0, "{}", r.stderr);
    assert!(
        r.stderr.contains("--jobs 10000") && r.stderr.contains("using"),
        "{}",
        r.stderr
    );
}

#[test]
fn rule8_strict_parsing() {
    let dir = tempfile::tempdir().unwrap();
    let text = std::fs::read_to_string(rig()).unwrap();
    // Trailing text after the rig, and two rigs in one file.
    for (name, extra) in [
        ("trail.json", "\nnotes: checked 3 Dec\n"),
        ("two.json", text.as_str()),
    ] {
        let p = dir.path().join(name);
        std::fs::write(&p, format!("{text}{extra}")).unwrap();
        one_line_error(&run(args(&[&"bar", &"--rig", &p])), &[name, "follows"]);
    }
    // Two torque columns.
    let csv = dir.path().join("two.csv");
    std::fs::write(
        &csv,
        "torque_nm,torque_lbf_ft,twist_deg\n50,37,1.0\n100,74,2.1\n",
    )
    .unwrap();
    one_line_error(
        &run(args(&[&"calibrate", &"--rig", &rig(), &"--csv", &csv])),
        &["two.csv", "torque_nm", "torque_lbf_ft"],
    );
    // Identical pairs: the uncertainty cannot be estimated; it is not zero.
    let r = run([
        "calibrate",
        "--rig",
        rig().to_str().unwrap(),
        "--pair",
        "100:2.3",
        "--pair",
        "100:2.3",
    ]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    assert!(r.stdout.contains("cannot be estimated"), "{}", r.stdout);
    assert!(!r.stdout.contains("± 0.000"), "{}", r.stdout);
    // A sidecar rig that is a folder or a dangling link fails its clip with the reason.
    let clips = dir.path().join("clips");
    copy_frames("fast-tool", &clips.join("take1"), 20);
    std::fs::create_dir(clips.join("take1.rig.json")).unwrap();
    let out = dir.path().join("out");
    let r = run(args(&[&"batch", &clips, &"--rig", &rig(), &"--out", &out]));
    assert_eq!(r.code, 1, "{}", r.stderr);
    let s = json(&out.join("summary.json"));
    let row = &s["clips"][0];
    assert_eq!(row["status"], "failed", "{row}");
    assert!(
        row["error"].as_str().unwrap().contains("take1.rig.json"),
        "{row}"
    );
}

#[test]
fn rule9_one_line_reasons() {
    let dir = tempfile::tempdir().unwrap();
    let clip = dir.path().join("clip");
    copy_frames("fast-tool", &clip, 20);
    let out = dir.path().join("o");
    for (flag, value) in [
        ("--start-s", "-1"),
        ("--end-s", "-0.5"),
        ("--overlay-every", "-1"),
    ] {
        let mut a = args(&[
            &"analyze",
            &clip,
            &"--rig",
            &rig(),
            &"--out",
            &out,
            &flag,
            &value,
        ]);
        if flag == "--overlay-every" {
            a.push("--overlay".into());
        }
        one_line_error(&run(a), &[flag]);
    }
    let r = run(args(&[
        &"batch",
        &dir.path(),
        &"--rig",
        &rig(),
        &"--out",
        &dir.path().join("b"),
        &"--jobs",
        &"-1",
    ]));
    one_line_error(&r, &["--jobs"]);
    // A raw MJPEG stream (JPEG frames back to back) is read as a video, not refused as a
    // single still image.
    #[cfg(feature = "ffmpeg")]
    {
        let mut stream = Vec::new();
        for f in copy_frames("fast-tool", &dir.path().join("png"), 5) {
            stream.extend(jpeg_of(&f));
        }
        let mjpeg = dir.path().join("take.mjpeg");
        std::fs::write(&mjpeg, stream).unwrap();
        let r = run(args(&[&"info", &mjpeg, &"--json"]));
        assert_eq!(r.code, 0, "{}", r.stderr);
        let v: serde_json::Value = serde_json::from_str(&r.stdout).unwrap();
        assert_eq!(v["frames"], 5, "{v}");
    }
}
