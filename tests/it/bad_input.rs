//! The bad-input catalogue, through the real binary. Every case ends in exit 1 with
//! one stderr line that names the file, field or flag, or, where the analysis can go on, in
//! exit 0 with a typed warning; and no output ever contains "panicked". Each case is tested
//! once: the cases already covered elsewhere are listed here with the test that covers them.
//!
//! | case | test |
//! |---|---|
//! | video: zero-byte file | `bad_input_decode.rs::zero_byte_file_is_named`, `…::analyze_on_a_bad_video_is_one_line` |
//! | video: truncated mid-stream | `bad_input_decode.rs::truncated_mp4_is_named`, `…::truncated_streams_end_with_an_error_or_cleanly` |
//! | video: wrong extension | `bad_input_decode.rs::png_named_mp4_is_refused_as_a_single_image`, `…::text_file_is_named`, `…::video_named_txt_is_read_by_content` |
//! | video: container with no video stream | [`container_without_a_video_stream`] |
//! | video: audio-only file | `bad_input_decode.rs::audio_only_files_are_named` |
//! | video: variable frame rate | [`variable_frame_rate_is_a_warning_and_frames_still_count`] (and `src/decode/video.rs::variable_frame_rate_keeps_each_frames_time_and_frames_still_count`) |
//! | stills: 16-bit TIFF (must work) | [`sixteen_bit_tiff_stills_are_analysed`] |
//! | stills: a frame of a different size | `bad_input_decode.rs::folder_with_mixed_frame_sizes_names_the_odd_file` |
//! | stills: a frame of another format mixed in | [`a_frame_of_another_format_is_a_warning`] |
//! | rig: malformed JSON | [`rig_malformed_json`] |
//! | rig: unknown field | [`rig_unknown_field_in_a_mark`]; in the bar: `bar.rs::bad_bars_fail_with_one_line_naming_the_field` |
//! | rig: missing mark | [`rig_missing_mark`] |
//! | rig: NaN value | [`rig_nan_value`] |
//! | rig: negative value | [`rig_negative_radius`]; in the bar: `bar.rs::bad_bars_fail_with_one_line_naming_the_field` |
//! | rig: pivot outside the frame | [`rig_pivot_outside_the_frame`] |
//! | rig: inner radius ≥ outer | [`rig_inner_radius_not_below_outer`] |
//! | --fps 0, negative, NaN: analyze | `bad_input_decode.rs::bad_fps_on_analyze_names_the_flag` |
//! | --fps 0, negative, NaN: batch | [`bad_fps_on_batch_names_the_flag`] |
//! | --fps negative: find-marks | [`negative_fps_on_find_marks_is_a_value_not_a_usage_error`] |
//! | data: a mark never found | [`a_mark_with_no_paint_is_named`] |
//! | data: a clip shorter than one blow | [`a_clip_shorter_than_one_blow_is_a_warning`] |
//! | fuzz finds (`tools/fuzz.sh`) | [`fuzz_rig_field_name_with_a_newline`], [`fuzz_truncated_jpeg_still`], [`fuzz_still_header_claiming_petabytes`] |
//! | hostile rule 1: no output path is an input | `hostile.rs::rule1_no_output_is_an_input` |
//! | hostile rule 2: every per-clip output folder checked first (unique names, lock, --out over the input) | `hostile.rs::rule2_every_output_folder_is_checked_before_writing` |
//! | hostile rule 3: writes atomic and confined (report.json last, leftovers cleared, no `overlays` link) | `hostile.rs::rule3_writes_are_atomic_and_confined` |
//! | hostile rule 4: paths reach FFmpeg as files (colons, `file:`, non-UTF-8) | `hostile.rs::rule4_paths_reach_ffmpeg_as_files` |
//! | hostile rule 5: damaged frames never measured | `hostile.rs::rule5_damaged_frames_are_never_measured` |
//! | hostile rule 6: physics sanity | `hostile.rs::rule6_physics_sanity` |
//! | hostile rule 7: bounded resources | `hostile.rs::rule7_bounded_resources` |
//! | hostile rule 8: strict parsing | `hostile.rs::rule8_strict_parsing` |
//! | hostile rule 9: one-line reasons (negative numbers, raw MJPEG) | `hostile.rs::rule9_one_line_reasons` |
//!
//! The output-safety checks (results never overwritten without `--force`, inputs
//! never written) are at the end of this file. Clips here are the project's own rendered
//! fixtures (`fixtures/`, invented scenes with known truth) or frames made in the test.

use std::path::{Path, PathBuf};

use super::common::{Out, fixture, one_line_error, run};

/// Copies the first `n` stills of a fixture into `dir` (all of them when `n` is None).
fn copy_frames(name: &str, dir: &Path, n: Option<usize>) -> Vec<PathBuf> {
    let mut files: Vec<PathBuf> = std::fs::read_dir(fixture(name).join("frames"))
        .unwrap()
        .map(|e| e.unwrap().path())
        .collect();
    files.sort();
    files.truncate(n.unwrap_or(usize::MAX));
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

/// The fast-tool fixture rig with one text replacement (which must apply).
fn rig_with(dir: &Path, from: &str, to: &str) -> PathBuf {
    let text = std::fs::read_to_string(fixture("fast-tool/rig.json")).unwrap();
    assert!(
        from.is_empty() || text.contains(from),
        "'{from}' not in rig"
    );
    let p = dir.join("bench.rig.json");
    std::fs::write(&p, text.replacen(from, to, 1)).unwrap();
    p
}

/// `analyze` on the first 40 fast-tool stills with a rig.
fn analyze_with_rig(rig: &Path, dir: &Path) -> Out {
    let clip = dir.join("clip");
    copy_frames("fast-tool", &clip, Some(40));
    run([
        "analyze".as_ref(),
        clip.as_os_str(),
        "--rig".as_ref(),
        rig.as_os_str(),
        "--out".as_ref(),
        dir.join("out").as_os_str(),
    ])
}

fn report(dir: &Path) -> serde_json::Value {
    serde_json::from_str(&std::fs::read_to_string(dir.join("report.json")).unwrap()).unwrap()
}

fn warnings(v: &serde_json::Value) -> Vec<String> {
    v["warnings"]
        .as_array()
        .unwrap()
        .iter()
        .map(|w| w.as_str().unwrap_or_default().to_string())
        .collect()
}

// ---- video ----------------------------------------------------------------------------------

#[cfg(feature = "ffmpeg")]
mod video {
    use super::*;

    /// One EBML element with an 8-byte size field (Matroska, RFC 9559 §4 / RFC 8794).
    fn el(id: &[u8], payload: &[u8]) -> Vec<u8> {
        let mut v = id.to_vec();
        v.push(0x01);
        v.extend_from_slice(&(payload.len() as u64).to_be_bytes()[1..]);
        v.extend_from_slice(payload);
        v
    }

    fn uint(id: &[u8], x: u64) -> Vec<u8> {
        el(id, &x.to_be_bytes())
    }

    /// A Matroska file whose only track is a text subtitle with one cue: a well-formed
    /// container with no video stream (written by hand from the element IDs of RFC 9559).
    fn subtitle_only_mkv() -> Vec<u8> {
        let header = el(
            &[0x1A, 0x45, 0xDF, 0xA3],
            &[
                uint(&[0x42, 0x86], 1),
                uint(&[0x42, 0xF7], 1),
                uint(&[0x42, 0xF2], 4),
                uint(&[0x42, 0xF3], 8),
                el(&[0x42, 0x82], b"matroska"),
                uint(&[0x42, 0x87], 4),
                uint(&[0x42, 0x85], 2),
            ]
            .concat(),
        );
        let info = el(
            &[0x15, 0x49, 0xA9, 0x66],
            &[
                uint(&[0x2A, 0xD7, 0xB1], 1_000_000),
                el(&[0x4D, 0x80], b"bench"),
                el(&[0x57, 0x41], b"bench"),
            ]
            .concat(),
        );
        let track = el(
            &[0xAE],
            &[
                uint(&[0xD7], 1),
                uint(&[0x73, 0xC5], 1),
                uint(&[0x83], 0x11),
                el(&[0x86], b"S_TEXT/UTF8"),
            ]
            .concat(),
        );
        let tracks = el(&[0x16, 0x54, 0xAE, 0x6B], &track);
        let mut block = vec![0x81, 0x00, 0x00, 0x80];
        block.extend_from_slice(b"blow 1");
        let cluster = el(
            &[0x1F, 0x43, 0xB6, 0x75],
            &[uint(&[0xE7], 0), el(&[0xA3], &block)].concat(),
        );
        let segment = el(&[0x18, 0x53, 0x80, 0x67], &[info, tracks, cluster].concat());
        [header, segment].concat()
    }

    #[test]
    fn container_without_a_video_stream() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("captions.mkv");
        std::fs::write(&p, subtitle_only_mkv()).unwrap();
        let out = run([
            "analyze".as_ref(),
            p.as_os_str(),
            "--rig".as_ref(),
            fixture("fast-tool/rig.json").as_os_str(),
            "--out".as_ref(),
            dir.path().join("out").as_os_str(),
        ]);
        one_line_error(&out, &["captions.mkv", "no video stream"]);
        assert!(!dir.path().join("out/report.json").exists());
    }

    /// Rewrites the relative timestamp of every SimpleBlock in a Matroska file made by the
    /// clip writer: block k of a cluster gets `k × step(k)` ms, so frames arrive unevenly.
    fn make_vfr(bytes: &mut [u8]) -> usize {
        // EBML variable-length integer at `i`: (value, length); `keep_marker` for IDs.
        fn vint(b: &[u8], i: usize, keep_marker: bool) -> (u64, usize) {
            let first = b[i];
            let len = first.leading_zeros() as usize + 1;
            let mut v = if keep_marker {
                u64::from(first)
            } else {
                u64::from(first) & (0xFF >> len)
            };
            for k in 1..len {
                v = (v << 8) | u64::from(b[i + k]);
            }
            (v, len)
        }
        const SEGMENT: u64 = 0x1853_8067;
        const CLUSTER: u64 = 0x1F43_B675;
        const SIMPLE_BLOCK: u64 = 0xA3;
        let mut patched = 0;
        let mut stack = vec![(0usize, bytes.len())];
        while let Some((mut i, end)) = stack.pop() {
            while i < end {
                let (id, il) = vint(bytes, i, true);
                let (size, sl) = vint(bytes, i + il, false);
                let body = i + il + sl;
                let body_end = (body + size as usize).min(end);
                match id {
                    SEGMENT | CLUSTER => stack.push((body, body_end)),
                    SIMPLE_BLOCK => {
                        let (_, tl) = vint(bytes, body, false);
                        let t = patched as i16 * if patched % 3 == 0 { 20 } else { 45 };
                        bytes[body + tl..body + tl + 2].copy_from_slice(&t.to_be_bytes());
                        patched += 1;
                    }
                    _ => {}
                }
                i = body_end;
            }
        }
        patched
    }

    #[test]
    fn variable_frame_rate_is_a_warning_and_frames_still_count() {
        use twistmark::decode::Frame;
        use twistmark_scenes::encode::{ClipWriter, Codec};
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("uneven.mkv");
        let mut w = ClipWriter::create(&p, Codec::Ffv1, 32, 24, 30.0).unwrap();
        for i in 0..12u64 {
            w.write(&Frame::from_u8(i, 32, 24, vec![(i * 20) as u8; 32 * 24]))
                .unwrap();
        }
        w.finish().unwrap();
        let mut bytes = std::fs::read(&p).unwrap();
        assert_eq!(make_vfr(&mut bytes), 12, "every frame's block rewritten");
        std::fs::write(&p, bytes).unwrap();
        let out = run(["info".as_ref(), "--json".as_ref(), p.as_os_str()]);
        assert_eq!(out.code, 0, "{}", out.stderr);
        let v: serde_json::Value = serde_json::from_str(&out.stdout).unwrap();
        assert_eq!(v["frames"], 12, "frames are counted, not timed");
        let w = v["warnings"].to_string();
        assert!(w.contains("variable frame rate"), "{w}");
    }
}

// ---- stills ---------------------------------------------------------------------------------

#[test]
fn sixteen_bit_tiff_stills_are_analysed() {
    // The tiff16-4000fps fixture: a rendered 16-bit TIFF clip of the invented bench at
    // 4,000 fps with one blow (truth.json, synthetic with known truth).
    let dir = tempfile::tempdir().unwrap();
    let f = fixture("tiff16-4000fps");
    let out = run([
        "analyze".as_ref(),
        f.join("frames").as_os_str(),
        "--rig".as_ref(),
        f.join("rig.json").as_os_str(),
        "--out".as_ref(),
        dir.path().as_os_str(),
    ]);
    assert_eq!(out.code, 0, "{}", out.stderr);
    let v = report(dir.path());
    let truth: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(f.join("truth.json")).unwrap()).unwrap();
    assert_eq!(v["frames"], truth["frames"]);
    assert_eq!(v["summary"]["blow_count"], truth["summary"]["blow_count"]);
    let drive = v["summary"]["drive_total_deg"].as_f64().unwrap();
    let want = truth["summary"]["drive_total_deg"].as_f64().unwrap();
    // Synthetic truth; 0.5° covers the tracker's error on a 320×240 render.
    assert!(
        (drive - want).abs() < 0.5,
        "drive total {drive} vs truth {want}"
    );
}

#[test]
fn a_frame_of_another_format_is_a_warning() {
    let dir = tempfile::tempdir().unwrap();
    let clip = dir.path().join("clip");
    let files = copy_frames("fast-tool", &clip, Some(40));
    // Frame 7 re-saved as BMP: same pixels, another format, same number.
    let odd = &files[7];
    let img = image::open(odd).unwrap();
    img.save(odd.with_extension("bmp")).unwrap();
    std::fs::remove_file(odd).unwrap();
    let out = run([
        "analyze".as_ref(),
        clip.as_os_str(),
        "--rig".as_ref(),
        fixture("fast-tool/rig.json").as_os_str(),
        "--out".as_ref(),
        dir.path().join("out").as_os_str(),
    ]);
    assert_eq!(out.code, 0, "{}", out.stderr);
    let v = report(&dir.path().join("out"));
    assert_eq!(v["frames"], 40);
    let w = warnings(&v).join(" | ");
    assert!(w.contains("mix image formats"), "{w}");
    assert!(out.stderr.contains("mix image formats"), "{}", out.stderr);
}

// ---- rig ------------------------------------------------------------------------------------

#[test]
fn rig_malformed_json() {
    let dir = tempfile::tempdir().unwrap();
    let rig = rig_with(dir.path(), "\"marks\": {", "\"marks\": {{");
    one_line_error(&analyze_with_rig(&rig, dir.path()), &["bench.rig.json"]);
}

#[test]
fn rig_unknown_field_in_a_mark() {
    let dir = tempfile::tempdir().unwrap();
    let rig = rig_with(
        dir.path(),
        "\"tighten\": \"cw\"",
        "\"tighten\": \"cw\", \"colour\": 1",
    );
    one_line_error(
        &analyze_with_rig(&rig, dir.path()),
        &["bench.rig.json", "marks.drive", "colour"],
    );
}

#[test]
fn rig_missing_mark() {
    let dir = tempfile::tempdir().unwrap();
    let rig = rig_with(dir.path(), "\"nut\": {", "\"nut_end\": {");
    one_line_error(
        &analyze_with_rig(&rig, dir.path()),
        &["bench.rig.json", "nut"],
    );
}

#[test]
fn rig_nan_value() {
    // JSON has no NaN; a rig that writes one is refused at that field.
    let dir = tempfile::tempdir().unwrap();
    let rig = rig_with(dir.path(), "82.0", "NaN");
    one_line_error(
        &analyze_with_rig(&rig, dir.path()),
        &["bench.rig.json", "marks.drive.pivot"],
    );
}

#[test]
fn rig_negative_radius() {
    let dir = tempfile::tempdir().unwrap();
    let rig = rig_with(dir.path(), "10.0", "-10.0");
    one_line_error(
        &analyze_with_rig(&rig, dir.path()),
        &["bench.rig.json", "marks.drive.radius", "positive"],
    );
}

#[test]
fn rig_pivot_outside_the_frame() {
    let dir = tempfile::tempdir().unwrap();
    let rig = rig_with(dir.path(), "238.0", "938.0");
    one_line_error(
        &analyze_with_rig(&rig, dir.path()),
        &["bench.rig.json", "marks.nut.pivot", "320x240"],
    );
}

#[test]
fn rig_inner_radius_not_below_outer() {
    // The nut annulus is [17, 62]: make it [62, 62] (empty) and [70, 62] (reversed).
    for inner in ["62.0", "70.0"] {
        let dir = tempfile::tempdir().unwrap();
        let rig = rig_with(dir.path(), "17.0", inner);
        one_line_error(
            &analyze_with_rig(&rig, dir.path()),
            &["bench.rig.json", "marks.nut.radius", "less than"],
        );
    }
}

// ---- --fps ----------------------------------------------------------------------------------

#[test]
fn bad_fps_on_batch_names_the_flag() {
    let dir = tempfile::tempdir().unwrap();
    copy_frames("fast-tool", &dir.path().join("clips/take1"), Some(5));
    for bad in ["0", "-5", "NaN"] {
        let out = run([
            "batch".as_ref(),
            dir.path().join("clips").as_os_str(),
            "--rig".as_ref(),
            fixture("fast-tool/rig.json").as_os_str(),
            "--out".as_ref(),
            dir.path().join("out").as_os_str(),
            "--fps".as_ref(),
            bad.as_ref(),
        ]);
        one_line_error(&out, &["--fps"]);
    }
}

#[test]
fn negative_fps_on_find_marks_is_a_value_not_a_usage_error() {
    let dir = tempfile::tempdir().unwrap();
    copy_frames("fast-tool", &dir.path().join("clip"), Some(3));
    let out = run([
        "find-marks".as_ref(),
        dir.path().join("clip").as_os_str(),
        "--out".as_ref(),
        dir.path().join("draft.rig.json").as_os_str(),
        "--fps".as_ref(),
        "-5".as_ref(),
    ]);
    // `-5` is taken as the value of --fps (not as an unknown flag, exit 2, usage screen).
    assert_eq!(out.code, 1, "{}", out.stderr);
    assert!(!out.stderr.contains("Usage"), "{}", out.stderr);
    assert_eq!(out.stderr.trim_end().lines().count(), 1, "{}", out.stderr);
}

// ---- data -----------------------------------------------------------------------------------

#[test]
fn a_mark_with_no_paint_is_named() {
    // Blank grey frames of the fixture's size: the annuli hold no paint at all.
    let dir = tempfile::tempdir().unwrap();
    let clip = dir.path().join("blank");
    std::fs::create_dir(&clip).unwrap();
    for i in 0..20 {
        image::GrayImage::from_pixel(320, 240, image::Luma([60]))
            .save(clip.join(format!("f_{i:03}.png")))
            .unwrap();
    }
    let out = run([
        "analyze".as_ref(),
        clip.as_os_str(),
        "--rig".as_ref(),
        fixture("fast-tool/rig.json").as_os_str(),
        "--out".as_ref(),
        dir.path().join("out").as_os_str(),
    ]);
    // The first mark measured (the fixed one, when the rig has it) is the one named.
    one_line_error(&out, &["mark '", "frame 0", "no painted stripe"]);
    assert!(!dir.path().join("out/report.json").exists());
}

#[test]
fn a_clip_shorter_than_one_blow_is_a_warning() {
    // The fast-tool fixture's first blow lands at frame 11 (truth.json); frames 0..8 hold
    // none, so the analysis runs and says that no blow was found.
    let dir = tempfile::tempdir().unwrap();
    let clip = dir.path().join("clip");
    copy_frames("fast-tool", &clip, Some(8));
    let out = run([
        "analyze".as_ref(),
        clip.as_os_str(),
        "--rig".as_ref(),
        fixture("fast-tool/rig.json").as_os_str(),
        "--out".as_ref(),
        dir.path().join("out").as_os_str(),
    ]);
    assert_eq!(out.code, 0, "{}", out.stderr);
    let v = report(&dir.path().join("out"));
    assert_eq!(v["frames"], 8);
    assert_eq!(v["summary"]["blow_count"], 0);
    let w = warnings(&v).join(" | ");
    assert!(w.contains("0 blow"), "{w}");
    assert!(out.stderr.contains("warning: "), "{}", out.stderr);
}

// ---- fuzz finds -----------------------------------------------------------------------------

#[test]
fn fuzz_rig_field_name_with_a_newline() {
    // Found by the `rig` fuzz target: an unknown field whose name holds an escaped newline
    // made a two-line library message. The binary must still print one line.
    let dir = tempfile::tempdir().unwrap();
    let rig = dir.path().join("odd.rig.json");
    std::fs::write(&rig, r#"{"drive\nmark": 1}"#).unwrap();
    let out = run(["bar".as_ref(), "--rig".as_ref(), rig.as_os_str()]);
    one_line_error(&out, &["odd.rig.json", "unknown field"]);
}

#[test]
fn fuzz_truncated_jpeg_still() {
    // Found by the `stills` fuzz target: a JPEG cut short gives a decoder message with a
    // newline in it. The binary must print one line naming the frame.
    let dir = tempfile::tempdir().unwrap();
    let clip = dir.path().join("clip");
    std::fs::create_dir(&clip).unwrap();
    let mut jpg = Vec::new();
    image::GrayImage::from_fn(16, 16, |x, y| image::Luma([(x * 13 + y * 7) as u8]))
        .write_to(
            &mut std::io::Cursor::new(&mut jpg),
            image::ImageFormat::Jpeg,
        )
        .unwrap();
    std::fs::write(clip.join("f_0.jpg"), &jpg[..jpg.len() / 2]).unwrap();
    std::fs::write(clip.join("f_1.jpg"), &jpg).unwrap();
    let out = run([
        "analyze".as_ref(),
        clip.as_os_str(),
        "--rig".as_ref(),
        fixture("fast-tool/rig.json").as_os_str(),
        "--out".as_ref(),
        dir.path().join("out").as_os_str(),
    ]);
    one_line_error(&out, &["f_0.jpg"]);
}

/// Writes a `stills` fuzz input as the target does: chunks split at FF 00 FF 00 (at most
/// four), each a numbered still whose extension comes from its first byte.
fn fuzz_stills_folder(input: &[u8], dir: &Path) {
    const EXTS: [&str; 4] = ["png", "bmp", "tif", "jpg"];
    std::fs::create_dir_all(dir).unwrap();
    let mut chunks = Vec::new();
    let mut rest = input;
    while chunks.len() < 3 {
        match rest.windows(4).position(|w| w == [0xFF, 0x00, 0xFF, 0x00]) {
            Some(p) => {
                chunks.push(&rest[..p]);
                rest = &rest[p + 4..];
            }
            None => break,
        }
    }
    chunks.push(rest);
    for (i, c) in chunks.iter().enumerate() {
        let (ext, body) = match c.split_first() {
            Some((b, body)) => (EXTS[usize::from(*b) % EXTS.len()], body),
            None => ("png", *c),
        };
        std::fs::write(dir.join(format!("f_{i}.{ext}")), body).unwrap();
    }
}

#[test]
fn fuzz_still_header_claiming_petabytes() {
    // Found by the `stills` fuzz target: a header claiming a frame of about 12 PB made the
    // reader try to allocate it (an abort, not a message). Inputs kept in
    // fuzz/regressions/stills/.
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("fuzz/regressions/stills");
    for name in [
        "crash-6258d539f3d3e63a4557b9ac9aea04c46cf87093",
        "crash-c5dc4c9c635efde158056015b319a9298632c8eb",
        // Headers claiming 2 to 3 GB: over the fuzzer's memory limit, now refused too.
        "oom-27c8e81440fcdce0dc9fac9bc39c3a128c4818ad",
        "oom-6fa2c01d46e28fcc0f573db2effb76488e1c8f12",
        "oom-7d02426cf3908fa4e1882a44c5b0b9f40d385ec6",
        "oom-049677ce565fd193ec4d640032830e0988d6ac5c",
    ] {
        let dir = tempfile::tempdir().unwrap();
        let clip = dir.path().join("clip");
        fuzz_stills_folder(&std::fs::read(root.join(name)).unwrap(), &clip);
        let out = run([
            "analyze".as_ref(),
            clip.as_os_str(),
            "--rig".as_ref(),
            fixture("fast-tool/rig.json").as_os_str(),
            "--out".as_ref(),
            dir.path().join("out").as_os_str(),
        ]);
        one_line_error(&out, &["f_"]);
    }
}

// ---- no data lost ---------------------------------------------------------------------------

/// Every file under `dir` with its bytes and modification time.
fn snapshot(dir: &Path) -> Vec<(PathBuf, Vec<u8>, std::time::SystemTime)> {
    let mut v = Vec::new();
    let mut todo = vec![dir.to_path_buf()];
    while let Some(d) = todo.pop() {
        for e in std::fs::read_dir(&d).unwrap() {
            let p = e.unwrap().path();
            if p.is_dir() {
                todo.push(p);
            } else {
                let m = std::fs::metadata(&p).unwrap().modified().unwrap();
                v.push((p.clone(), std::fs::read(&p).unwrap(), m));
            }
        }
    }
    v.sort_by(|a, b| a.0.cmp(&b.0));
    v
}

fn analyze_into(clip: &Path, out: &Path, force: bool) -> Out {
    let mut args: Vec<std::ffi::OsString> = vec![
        "analyze".into(),
        clip.into(),
        "--rig".into(),
        fixture("fast-tool/rig.json").into(),
        "--out".into(),
        out.into(),
    ];
    if force {
        args.push("--force".into());
    }
    run(args)
}

#[test]
fn analyze_refuses_to_overwrite_results_without_force() {
    let dir = tempfile::tempdir().unwrap();
    let clip = dir.path().join("clip");
    copy_frames("fast-tool", &clip, Some(30));
    let out = dir.path().join("out");
    // A new folder and an empty one are always fine.
    assert_eq!(analyze_into(&clip, &out, false).code, 0);
    let empty = dir.path().join("empty");
    std::fs::create_dir(&empty).unwrap();
    assert_eq!(analyze_into(&clip, &empty, false).code, 0);
    // A folder with other files only is fine too.
    let other = dir.path().join("notes");
    std::fs::create_dir(&other).unwrap();
    std::fs::write(other.join("bench-log.txt"), "torque check 12:03\n").unwrap();
    assert_eq!(analyze_into(&clip, &other, false).code, 0);
    assert!(other.join("bench-log.txt").exists());

    // Results there: refused, and nothing in the folder changes.
    let before = snapshot(&out);
    let r = analyze_into(&clip, &out, false);
    one_line_error(&r, &["out", "--force", "--out"]);
    assert_eq!(snapshot(&out), before, "the refused run touched the folder");
    // With --force it is overwritten, and no temporary file is left behind.
    let r = analyze_into(&clip, &out, true);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let names: Vec<String> = std::fs::read_dir(&out)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    assert!(names.iter().all(|n| !n.contains("partial")), "{names:?}");
    assert!(names.contains(&"report.json".to_string()));
}

#[test]
fn batch_refuses_to_overwrite_results_without_force() {
    let dir = tempfile::tempdir().unwrap();
    copy_frames("fast-tool", &dir.path().join("clips/take1"), Some(30));
    let out = dir.path().join("out");
    let batch = |force: bool| {
        let mut args: Vec<std::ffi::OsString> = vec![
            "batch".into(),
            dir.path().join("clips").into_os_string(),
            "--rig".into(),
            fixture("fast-tool/rig.json").into_os_string(),
            "--out".into(),
            out.clone().into_os_string(),
        ];
        if force {
            args.push(std::ffi::OsString::from("--force"));
        }
        run(args)
    };
    let r = batch(false);
    assert_eq!(r.code, 0, "{}", r.stderr);
    assert!(out.join("summary.json").exists());
    let before = snapshot(&out);
    one_line_error(&batch(false), &["out", "summary.json", "--force"]);
    assert_eq!(
        snapshot(&out),
        before,
        "the refused batch touched the folder"
    );
    let r = batch(true);
    assert_eq!(r.code, 0, "{}", r.stderr);
}

#[test]
fn inputs_are_never_written() {
    let dir = tempfile::tempdir().unwrap();
    let clip = dir.path().join("clip");
    copy_frames("fast-tool", &clip, Some(30));
    let rig = dir.path().join("rig.json");
    std::fs::copy(fixture("fast-tool/rig.json"), &rig).unwrap();
    let before = snapshot(dir.path());
    // An --out that is the clip folder's first still (a file) is refused, not overwritten.
    let first = before
        .iter()
        .find(|(p, _, _)| p.extension().is_some_and(|e| e == "png"))
        .unwrap()
        .0
        .clone();
    let r = run([
        "analyze".as_ref(),
        clip.as_os_str(),
        "--rig".as_ref(),
        rig.as_os_str(),
        "--out".as_ref(),
        first.as_os_str(),
        "--force".as_ref(),
    ]);
    one_line_error(&r, &["is a file"]);
    // A normal run with overlays reads the clip twice and writes only under --out.
    let out = tempfile::tempdir().unwrap();
    let r = run([
        "analyze".as_ref(),
        clip.as_os_str(),
        "--rig".as_ref(),
        rig.as_os_str(),
        "--out".as_ref(),
        out.path().as_os_str(),
        "--overlay".as_ref(),
    ]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    assert_eq!(snapshot(dir.path()), before, "an input file changed");
}
