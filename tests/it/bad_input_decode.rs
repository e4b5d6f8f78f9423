//! Bad inputs to the decode stage, through the real binary: each must exit 1 with one line on
//! stderr that names the file, folder or flag, and nothing may ever panic. Tests that need
//! video files are compiled only with the `ffmpeg` feature; the stills and flag cases run in
//! every build.

use std::path::Path;

use assert_cmd::Command;

/// Runs the binary; returns (exit code, stdout, stderr).
fn run(args: &[&std::ffi::OsStr]) -> (i32, String, String) {
    let out = Command::cargo_bin("twistmark")
        .unwrap()
        .args(args)
        .output()
        .unwrap();
    let stdout = String::from_utf8_lossy(&out.stdout).into_owned();
    let stderr = String::from_utf8_lossy(&out.stderr).into_owned();
    assert!(
        !stdout.contains("panicked") && !stderr.contains("panicked"),
        "panic: {stderr}"
    );
    (out.status.code().unwrap_or(-1), stdout, stderr)
}

fn info(path: &Path) -> (i32, String, String) {
    run(&["info".as_ref(), path.as_os_str()])
}

/// Exit 1 and exactly one stderr line that contains every `needle`.
fn assert_one_line_error((code, _, stderr): &(i32, String, String), needles: &[&str]) {
    assert_eq!(*code, 1, "exit code; stderr: {stderr}");
    let lines: Vec<&str> = stderr.lines().filter(|l| !l.trim().is_empty()).collect();
    assert_eq!(lines.len(), 1, "one line expected, got: {stderr}");
    for n in needles {
        assert!(lines[0].contains(n), "'{n}' missing from: {}", lines[0]);
    }
}

fn gray_png(path: &Path, w: u32, h: u32) {
    image::GrayImage::from_pixel(w, h, image::Luma([90]))
        .save(path)
        .unwrap();
}

#[test]
fn missing_path_is_named() {
    let dir = tempfile::tempdir().unwrap();
    let p = dir.path().join("nowhere.mp4");
    assert_one_line_error(&info(&p), &["nowhere.mp4"]);
}

#[test]
fn zero_byte_file_is_named() {
    let dir = tempfile::tempdir().unwrap();
    let p = dir.path().join("empty_take.mp4");
    std::fs::write(&p, b"").unwrap();
    let r = info(&p);
    assert_one_line_error(&r, &["empty_take.mp4"]);
    if cfg!(feature = "ffmpeg") {
        assert!(r.2.contains("empty"), "{}", r.2);
    }
}

#[test]
fn text_file_is_named() {
    let dir = tempfile::tempdir().unwrap();
    for name in ["notes.txt", "notes.mp4"] {
        let p = dir.path().join(name);
        std::fs::write(&p, "bench log: blow 1 at 12:03, blow 2 at 12:04\n").unwrap();
        assert_one_line_error(&info(&p), &[name]);
    }
}

#[test]
fn png_named_mp4_is_refused_as_a_single_image() {
    let dir = tempfile::tempdir().unwrap();
    let png = dir.path().join("frame.png");
    gray_png(&png, 16, 16);
    let p = dir.path().join("frame.mp4");
    std::fs::rename(&png, &p).unwrap();
    let r = info(&p);
    assert_one_line_error(&r, &["frame.mp4"]);
    if cfg!(feature = "ffmpeg") {
        assert!(r.2.contains("single still image"), "{}", r.2);
    }
}

/// Without the `ffmpeg` feature a video file is refused with one line that names it and says
/// how to get a build that reads it: the one decode behaviour that differs between the builds
/// (CI runs this module with `--no-default-features`).
#[cfg(not(feature = "ffmpeg"))]
#[test]
fn video_without_ffmpeg_says_to_rebuild() {
    let p = Path::new(env!("CARGO_MANIFEST_DIR")).join("fixtures/slow-tool/clip_ffv1.mkv");
    assert_one_line_error(&info(&p), &["clip_ffv1.mkv", "\"ffmpeg\" feature"]);
}

#[test]
fn empty_folder_is_named() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path().join("no_frames_here");
    std::fs::create_dir(&d).unwrap();
    assert_one_line_error(&info(&d), &["no_frames_here", "no numbered still images"]);
    // Files that are not numbered stills do not count.
    std::fs::write(d.join("readme.txt"), "x").unwrap();
    gray_png(&d.join("cover.png"), 8, 8);
    assert_one_line_error(&info(&d), &["no_frames_here"]);
}

#[test]
fn folder_with_mixed_frame_sizes_names_the_odd_file() {
    let dir = tempfile::tempdir().unwrap();
    for i in 1..=5 {
        gray_png(&dir.path().join(format!("f_{i:03}.png")), 32, 24);
    }
    gray_png(&dir.path().join("f_004.png"), 24, 32);
    let r = info(dir.path());
    assert_one_line_error(&r, &["f_004.png", "24x32", "32x24"]);
}

#[test]
fn duplicate_frame_numbers_name_both_files() {
    let dir = tempfile::tempdir().unwrap();
    gray_png(&dir.path().join("f_1.png"), 8, 8);
    gray_png(&dir.path().join("f_2.png"), 8, 8);
    gray_png(&dir.path().join("f_002.bmp"), 8, 8);
    assert_one_line_error(&info(dir.path()), &["f_2.png", "f_002.bmp"]);
}

#[test]
fn damaged_still_is_named() {
    let dir = tempfile::tempdir().unwrap();
    gray_png(&dir.path().join("f_1.png"), 8, 8);
    std::fs::write(dir.path().join("f_2.png"), b"\x89PNG\r\n\x1a\n truncated").unwrap();
    gray_png(&dir.path().join("f_3.png"), 8, 8);
    assert_one_line_error(&info(dir.path()), &["f_2.png"]);
}

#[test]
fn bad_fps_on_analyze_names_the_flag() {
    let dir = tempfile::tempdir().unwrap();
    for i in 1..=3 {
        gray_png(&dir.path().join(format!("f_{i}.png")), 8, 8);
    }
    let rig = dir.path().join("rig.json");
    std::fs::write(&rig, "{}").unwrap();
    for bad in ["fast", "0", "-5", "-inf", "NaN", ""] {
        let r = run(&[
            "analyze".as_ref(),
            dir.path().as_os_str(),
            "--rig".as_ref(),
            rig.as_os_str(),
            "--fps".as_ref(),
            bad.as_ref(),
        ]);
        assert_one_line_error(&r, &["--fps"]);
    }
}

#[cfg(feature = "ffmpeg")]
mod video {
    use super::*;
    use twistmark::decode::{self, Frame};
    use twistmark_scenes::encode::{ClipWriter, Codec};

    fn make_clip(path: &Path, codec: Codec, frames: u64) {
        let (w, h) = (64, 48);
        let mut wr = ClipWriter::create(path, codec, w, h, 30.0).unwrap();
        for i in 0..frames {
            let data = (0..w * h)
                .map(|p| (((p % w) * 3 + (p / w) * 2 + i as u32 * 9) % 256) as u8)
                .collect();
            wr.write(&Frame::from_u8(i, w, h, data)).unwrap();
        }
        wr.finish().unwrap();
    }

    fn cut_in_half(src: &Path, dst: &Path) {
        let bytes = std::fs::read(src).unwrap();
        std::fs::write(dst, &bytes[..bytes.len() / 2]).unwrap();
    }

    #[test]
    fn truncated_mp4_is_named() {
        // An mp4 written in one pass keeps its index at the end, so half a file has none.
        let dir = tempfile::tempdir().unwrap();
        let full = dir.path().join("full.mp4");
        make_clip(&full, Codec::H264 { crf: 20 }, 60);
        let half = dir.path().join("half.mp4");
        cut_in_half(&full, &half);
        let r = info(&half);
        assert_one_line_error(&r, &["half.mp4", "cut short"]);
    }

    #[test]
    fn truncated_streams_end_with_an_error_or_cleanly() {
        // Matroska and AVI keep frames readable up to the cut: reading must end either
        // cleanly with fewer frames or with a decode error naming the frame, never a panic.
        let dir = tempfile::tempdir().unwrap();
        for (codec, ext) in [
            (Codec::H264 { crf: 20 }, "mkv"),
            (Codec::Mpeg4 { quality: 4 }, "avi"),
            (Codec::Ffv1, "mkv"),
            (Codec::Mjpeg { quality: 4 }, "mov"),
        ] {
            let full = dir.path().join(format!("full.{ext}"));
            make_clip(&full, codec, 60);
            let half = dir
                .path()
                .join(format!("half_{codec:?}.{ext}").replace([' ', '{', '}', ':'], ""));
            cut_in_half(&full, &half);
            let r = info(&half);
            assert!(r.0 == 0 || r.0 == 1, "{}: exit {}", half.display(), r.0);
            if r.0 == 1 {
                assert_one_line_error(&r, &[half.file_name().unwrap().to_str().unwrap()]);
                continue;
            }
            let mut src = decode::open(&half).unwrap();
            let mut f = Frame::empty();
            let mut n = 0u64;
            let end = loop {
                match src.read_into(&mut f) {
                    Ok(true) => n += 1,
                    Ok(false) => break None,
                    Err(e) => break Some(e),
                }
            };
            assert!(n < 60, "{}: {n} frames from half a file", half.display());
            eprintln!("{}: {n} frames, then {end:?}", half.display());
            if let Some(e) = end {
                assert!(
                    matches!(e, twistmark::Error::Decode { frame, .. } if frame == n),
                    "{}: {e}",
                    half.display()
                );
                assert!(!e.to_string().contains('\n'));
            }
        }
    }

    #[test]
    fn video_named_txt_is_read_by_content() {
        // FFmpeg identifies containers by their content; a clip renamed to .txt is still the
        // same clip, and refusing it would only make the user rename it back.
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("take.mkv");
        make_clip(&p, Codec::Ffv1, 12);
        let renamed = dir.path().join("take.txt");
        std::fs::rename(&p, &renamed).unwrap();
        let (code, stdout, stderr) =
            run(&["info".as_ref(), "--json".as_ref(), renamed.as_os_str()]);
        assert_eq!(code, 0, "{stderr}");
        let v: serde_json::Value = serde_json::from_str(&stdout).unwrap();
        assert_eq!(v["frames"], 12);
        assert_eq!(v["codec"], "ffv1");
    }

    /// A 0.1 s mono 16-bit PCM WAV file, written by hand (RIFF layout per the WAVE format).
    fn write_wav(path: &Path) {
        let rate: u32 = 8000;
        let samples: Vec<i16> = (0..800)
            .map(|i| ((i as f64 * 0.3).sin() * 8000.0) as i16)
            .collect();
        let data_len = (samples.len() * 2) as u32;
        let mut b = Vec::new();
        b.extend_from_slice(b"RIFF");
        b.extend_from_slice(&(36 + data_len).to_le_bytes());
        b.extend_from_slice(b"WAVEfmt ");
        b.extend_from_slice(&16u32.to_le_bytes());
        b.extend_from_slice(&1u16.to_le_bytes()); // PCM
        b.extend_from_slice(&1u16.to_le_bytes()); // mono
        b.extend_from_slice(&rate.to_le_bytes());
        b.extend_from_slice(&(rate * 2).to_le_bytes());
        b.extend_from_slice(&2u16.to_le_bytes());
        b.extend_from_slice(&16u16.to_le_bytes());
        b.extend_from_slice(b"data");
        b.extend_from_slice(&data_len.to_le_bytes());
        for s in samples {
            b.extend_from_slice(&s.to_le_bytes());
        }
        std::fs::write(path, b).unwrap();
    }

    #[test]
    fn audio_only_files_are_named() {
        let dir = tempfile::tempdir().unwrap();
        for name in ["sound.wav", "sound.mp4"] {
            let p = dir.path().join(name);
            write_wav(&p);
            let r = info(&p);
            assert_one_line_error(&r, &[name, "only audio"]);
        }
    }

    #[test]
    fn analyze_on_a_bad_video_is_one_line() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("zero.mkv");
        std::fs::write(&p, b"").unwrap();
        let rig = dir.path().join("rig.json");
        std::fs::write(
            &rig,
            r#"{"rig_version": 1, "marks": {
                "drive": {"kind": "radial", "pivot": [10, 10], "radius": [2, 8], "tighten": "cw"},
                "nut": {"kind": "radial", "pivot": [40, 10], "radius": [2, 8], "tighten": "cw"}}}"#,
        )
        .unwrap();
        let r = run(&[
            "analyze".as_ref(),
            p.as_os_str(),
            "--rig".as_ref(),
            rig.as_os_str(),
            "--fps".as_ref(),
            "2000".as_ref(),
            "--out".as_ref(),
            dir.path().join("out").as_os_str(),
        ]);
        assert_one_line_error(&r, &["zero.mkv"]);
    }
}
