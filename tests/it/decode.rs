//! Round trips through the project's own clip writer and readers: frames rendered here with
//! known values (synthetic clips with known truth) are encoded in several codecs and
//! containers, decoded back, and compared by count, size and luma (exact checksums for FFV1
//! and stills, a bounded mean absolute error for the lossy codecs). The real binary's
//! `info --json` is checked on the same clips.
#![cfg(feature = "ffmpeg")]

use std::path::{Path, PathBuf};

use assert_cmd::Command;
use twistmark::decode::{self, Frame, Luma};
use twistmark_scenes::encode::{ClipWriter, Codec};

const W: u32 = 96;
const H: u32 = 64;

/// A smooth moving pattern plus a sharp-edged square: enough structure for lossy codecs to
/// work on, and frame-to-frame change large enough that swapped frames would be noticed.
fn sample(i: u64, x: u32, y: u32, max: f64) -> f64 {
    let (xf, yf, t) = (f64::from(x), f64::from(y), i as f64);
    let wave = 0.5 + 0.3 * (0.21 * xf + 0.55 * t).sin() * (0.17 * yf - 0.3 * t).cos();
    let sq_x = (10 + 3 * i as u32) % W;
    let inside = x >= sq_x && x < sq_x + 12 && (20..36).contains(&y);
    let v = if inside { 0.92 } else { wave };
    (v * max).round()
}

fn frame8(i: u64) -> Frame {
    let data = (0..W * H)
        .map(|p| sample(i, p % W, p / W, 255.0) as u8)
        .collect();
    Frame::from_u8(i, W, H, data)
}

fn frame_deep(i: u64, depth: u8) -> Frame {
    let max = f64::from((1u32 << depth) - 1);
    let data = (0..W * H)
        .map(|p| sample(i, p % W, p / W, max) as u16)
        .collect();
    Frame {
        index: i,
        width: W,
        height: H,
        bit_depth: depth,
        luma: Luma::U16(data),
        chroma: None,
        damaged: false,
    }
}

fn write_clip(path: &Path, codec: Codec, frames: &[Frame], fps: f64) {
    let depth = frames[0].bit_depth;
    let mut w = ClipWriter::create_with_depth(path, codec, W, H, fps, depth).unwrap();
    for f in frames {
        w.write(f).unwrap();
    }
    assert_eq!(w.finish().unwrap(), frames.len() as u64);
}

fn decode_all(path: &Path) -> (decode::ClipInfo, Vec<Frame>) {
    let mut src = decode::open(path).unwrap();
    let info = src.info().clone();
    let mut f = Frame::empty();
    let mut out = Vec::new();
    while src.read_into(&mut f).unwrap() {
        out.push(f.clone());
    }
    (info, out)
}

fn samples(f: &Frame) -> Vec<f64> {
    match &f.luma {
        Luma::U8(d) => d.iter().map(|&v| f64::from(v)).collect(),
        Luma::U16(d) => d.iter().map(|&v| f64::from(v)).collect(),
    }
}

fn mae(a: &Frame, b: &Frame) -> f64 {
    let (x, y) = (samples(a), samples(b));
    assert_eq!(x.len(), y.len());
    x.iter().zip(&y).map(|(p, q)| (p - q).abs()).sum::<f64>() / x.len() as f64
}

/// Checks count, size, depth and order, then exactness or a mean-absolute-error bound.
fn check_round_trip(path: &Path, input: &[Frame], exact: bool, mae_bound: f64, codec: &str) {
    let (info, out) = decode_all(path);
    let name = path.display();
    assert_eq!(info.frames, input.len() as u64, "{name}: info.frames");
    assert_eq!(out.len(), input.len(), "{name}: decoded frame count");
    assert_eq!((info.width, info.height), (W, H), "{name}: size");
    assert_eq!(info.bit_depth, input[0].bit_depth, "{name}: bit depth");
    assert_eq!(info.codec, codec, "{name}: codec");
    for (i, (a, b)) in input.iter().zip(&out).enumerate() {
        assert_eq!(b.index, i as u64, "{name}: frame index");
        assert_eq!(b.bit_depth, a.bit_depth, "{name}: frame {i} depth");
        if exact {
            assert_eq!(b.checksum(), a.checksum(), "{name}: frame {i} checksum");
        } else {
            let e = mae(a, b);
            assert!(e <= mae_bound, "{name}: frame {i} MAE {e:.3} > {mae_bound}");
            // Order: frame i must be far closer to input i than to its neighbours.
            for j in [i.wrapping_sub(1), i + 1] {
                if let Some(n) = input.get(j) {
                    let en = mae(n, b);
                    assert!(en > 2.0 * e + 0.5, "{name}: frame {i} looks like input {j}");
                }
            }
        }
    }
}

#[test]
fn ffv1_is_exact_in_every_container() {
    let dir = tempfile::tempdir().unwrap();
    let input: Vec<Frame> = (0..24).map(frame8).collect();
    for ext in ["mkv", "mov", "avi"] {
        let p = dir.path().join(format!("c.{ext}"));
        write_clip(&p, Codec::Ffv1, &input, 30.0);
        check_round_trip(&p, &input, true, 0.0, "ffv1");
    }
}

#[test]
fn lossy_codecs_stay_close_in_every_container() {
    let dir = tempfile::tempdir().unwrap();
    let input: Vec<Frame> = (0..24).map(frame8).collect();
    // Bounds in 8-bit grey levels, set at about 1.5 × the worst frame measured on this
    // pattern with Debian's FFmpeg 5.1 (H.264 crf 18: 1.99, MJPEG q 3: 0.83, MPEG-4 q 3: 0.89;
    // mean signed error under 0.5, so no range shift).
    let cases = [
        (Codec::H264 { crf: 18 }, "h264", 3.0),
        (Codec::Mjpeg { quality: 3 }, "mjpeg", 1.3),
        (Codec::Mpeg4 { quality: 3 }, "mpeg4", 1.3),
    ];
    for (codec, name, bound) in cases {
        for ext in ["mkv", "mp4", "mov", "avi"] {
            let p = dir.path().join(format!("{name}.{ext}"));
            write_clip(&p, codec, &input, 30.0);
            check_round_trip(&p, &input, false, bound, name);
        }
    }
}

#[test]
fn lossless_h264_and_fractional_rates() {
    // x264 at crf 0 is lossless for 8-bit input (x264's documented --qp 0 / --crf 0
    // behaviour), so luma must come back exactly.
    let dir = tempfile::tempdir().unwrap();
    let input: Vec<Frame> = (0..10).map(frame8).collect();
    let p = dir.path().join("lossless.mkv");
    write_clip(&p, Codec::H264 { crf: 0 }, &input, 30.0);
    check_round_trip(&p, &input, true, 0.0, "h264");
    // An NTSC-style playback rate survives as a fraction (30000/1001 = 29.97002997...).
    for ext in ["mov", "mp4", "avi", "mkv"] {
        let p = dir.path().join(format!("ntsc.{ext}"));
        write_clip(&p, Codec::Mpeg4 { quality: 4 }, &input, 30000.0 / 1001.0);
        let (info, out) = decode_all(&p);
        assert_eq!(out.len(), 10);
        let fps = info.container_fps_hz.unwrap();
        assert!((fps - 30000.0 / 1001.0).abs() < 1e-3, ".{ext}: {fps}");
    }
}

#[test]
fn deep_frames_keep_their_bit_depth() {
    let dir = tempfile::tempdir().unwrap();
    for depth in [10u8, 12, 16] {
        let input: Vec<Frame> = (0..8).map(|i| frame_deep(i, depth)).collect();
        let p = dir.path().join(format!("deep{depth}.mkv"));
        write_clip(&p, Codec::Ffv1, &input, 30.0);
        check_round_trip(&p, &input, true, 0.0, "ffv1");
    }
    // 10-bit H.264 (yuv420p10le): bound in 10-bit levels, 1.5 × the worst frame measured
    // (7.6 levels, i.e. 1.9 in 8-bit terms).
    let input: Vec<Frame> = (0..12).map(|i| frame_deep(i, 10)).collect();
    let p = dir.path().join("deep10.mp4");
    write_clip(&p, Codec::H264 { crf: 18 }, &input, 30.0);
    check_round_trip(&p, &input, false, 11.5, "h264");
}

#[test]
fn long_h264_with_b_frames_counts_exactly() {
    // x264's veryfast preset uses B-frames, so frames leave the decoder reordered and late;
    // the count from demuxing must still equal the decoded count in every container.
    let dir = tempfile::tempdir().unwrap();
    let input: Vec<Frame> = (0..150).map(frame8).collect();
    for ext in ["mkv", "mp4", "mov", "avi"] {
        let p = dir.path().join(format!("long.{ext}"));
        write_clip(&p, Codec::H264 { crf: 23 }, &input, 30.0);
        let (info, out) = decode_all(&p);
        assert_eq!(info.frames, 150, ".{ext}");
        assert_eq!(out.len(), 150, ".{ext}");
    }
}

#[test]
fn high_speed_container_rates_are_reported_without_vfr_warnings() {
    // Matroska stores times in 1 ms steps, so 240 and 2000 fps give uneven stamps; that
    // rounding must not be mistaken for a variable frame rate. Above 1000 fps Matroska cannot
    // store the rate at all (its frame duration field is only written when longer than one
    // tick), so FFmpeg reads 1000 back: the reason the capture rate never comes from there.
    let dir = tempfile::tempdir().unwrap();
    let input: Vec<Frame> = (0..30).map(frame8).collect();
    for fps in [240.0, 2000.0] {
        for ext in ["mkv", "mov"] {
            let p = dir.path().join(format!("fast{fps}.{ext}"));
            write_clip(&p, Codec::Ffv1, &input, fps);
            let (info, out) = decode_all(&p);
            assert_eq!(out.len(), 30);
            let got = info.container_fps_hz.unwrap();
            let stored = if ext == "mkv" { fps.min(1000.0) } else { fps };
            assert!(
                (got - stored).abs() < 1e-6 * fps,
                ".{ext}: {got} vs {stored}"
            );
            assert!(
                info.warnings.is_empty(),
                ".{ext} {fps}: {:?}",
                info.warnings
            );
            let d = info.duration_s.unwrap();
            assert!((d - 30.0 / stored).abs() < 1e-9, "duration {d}");
        }
    }
}

fn save_stills(dir: &Path, frames: &[Frame], ext: &str) {
    for f in frames {
        let p = dir.join(format!("shot_{:05}.{ext}", f.index + 1));
        match &f.luma {
            Luma::U8(d) => image::GrayImage::from_raw(W, H, d.clone())
                .unwrap()
                .save(&p)
                .unwrap(),
            Luma::U16(d) => image::ImageBuffer::<image::Luma<u16>, _>::from_raw(W, H, d.clone())
                .unwrap()
                .save(&p)
                .unwrap(),
        }
    }
}

#[test]
fn stills_round_trip_exactly() {
    let dir = tempfile::tempdir().unwrap();
    let input: Vec<Frame> = (0..12).map(frame8).collect();
    save_stills(dir.path(), &input, "png");
    let (info, out) = decode_all(dir.path());
    assert_eq!(info.frames, 12);
    assert_eq!(info.codec, "png");
    assert_eq!(info.container_fps_hz, None);
    assert_eq!(out.len(), 12);
    for (a, b) in input.iter().zip(&out) {
        assert_eq!(a.checksum(), b.checksum(), "frame {}", a.index);
    }
    let d16 = tempfile::tempdir().unwrap();
    let input: Vec<Frame> = (0..5).map(|i| frame_deep(i, 16)).collect();
    save_stills(d16.path(), &input, "tif");
    let (info, out) = decode_all(d16.path());
    assert_eq!((info.frames, info.bit_depth), (5, 16));
    for (a, b) in input.iter().zip(&out) {
        assert_eq!(a.checksum(), b.checksum(), "16-bit frame {}", a.index);
    }
}

fn info_json(path: &Path) -> serde_json::Value {
    let out = Command::cargo_bin("twistmark")
        .unwrap()
        .args(["info", "--json"])
        .arg(path)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    serde_json::from_slice(&out.stdout).unwrap()
}

#[test]
fn info_json_reports_exact_counts() {
    let dir = tempfile::tempdir().unwrap();
    let input: Vec<Frame> = (0..37).map(frame8).collect();
    let mut clips: Vec<(PathBuf, &str, f64)> = Vec::new();
    for (codec, name, ext) in [
        (Codec::Ffv1, "ffv1", "mkv"),
        (Codec::H264 { crf: 20 }, "h264", "mp4"),
        (Codec::H264 { crf: 20 }, "h264", "mkv"),
        (Codec::Mjpeg { quality: 4 }, "mjpeg", "avi"),
        (Codec::Mpeg4 { quality: 4 }, "mpeg4", "mov"),
    ] {
        let p = dir.path().join(format!("{name}.{ext}"));
        write_clip(&p, codec, &input, 25.0);
        clips.push((p, name, 25.0));
    }
    for (p, codec, fps) in &clips {
        let v = info_json(p);
        assert_eq!(v["frames"], 37, "{}", p.display());
        assert_eq!(v["width"], W);
        assert_eq!(v["height"], H);
        assert_eq!(v["codec"], *codec);
        assert_eq!(v["bit_depth"], 8);
        assert_eq!(v["container_fps"].as_f64().unwrap(), *fps);
        let d = v["duration_s"].as_f64().unwrap();
        assert!((d - 37.0 / fps).abs() < 1e-9);
    }
    let stills = dir.path().join("stills");
    std::fs::create_dir(&stills).unwrap();
    save_stills(&stills, &input[..7], "png");
    let v = info_json(&stills);
    assert_eq!(v["frames"], 7);
    assert_eq!(v["width"], W);
    assert!(v["container_fps"].is_null());
}
