//! Every bundled fixture decodes to exactly what the renderer wrote: `twistmark info --json`
//! reports the exact frame count and size for every container and for stills, and lossless
//! media (PNG/TIFF stills, FFV1) reproduce each rendered frame's luma checksum exactly. Lossy
//! media (H.264, MJPEG) are checked for count and size only; their accuracy is checked where it
//! matters, in tests/it/analyze_fixtures.rs.
#![cfg(feature = "ffmpeg")]

use std::path::{Path, PathBuf};

use assert_cmd::Command;
use serde_json::Value;
use twistmark::decode::{self, Frame};

fn fixtures() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("fixtures")
}

fn read_json(p: &Path) -> Value {
    serde_json::from_str(&std::fs::read_to_string(p).unwrap()).unwrap()
}

/// Every clip in a fixture folder: the stills folder and each video file.
fn clips(dir: &Path) -> Vec<PathBuf> {
    let mut v: Vec<PathBuf> = std::fs::read_dir(dir)
        .unwrap()
        .map(|e| e.unwrap().path())
        .filter(|p| {
            p.is_dir()
                || matches!(
                    p.extension().and_then(|e| e.to_str()),
                    Some("mkv" | "mp4" | "avi" | "mov")
                )
        })
        .collect();
    v.sort();
    v
}

fn lossless(clip: &Path) -> bool {
    clip.is_dir() || clip.extension().is_some_and(|e| e == "mkv")
}

#[test]
fn every_fixture_decodes_to_the_rendered_frames() {
    let mut checked = 0;
    for entry in std::fs::read_dir(fixtures()).unwrap() {
        let dir = entry.unwrap().path();
        if !dir.is_dir() {
            continue;
        }
        let scenario = read_json(&dir.join("scenario.json"));
        let (w, h) = (
            scenario["scene"]["width"].as_u64().unwrap(),
            scenario["scene"]["height"].as_u64().unwrap(),
        );
        let sums: Vec<u64> = read_json(&dir.join("checksums.json"))["frame_fnv1a"]
            .as_array()
            .unwrap()
            .iter()
            .map(|v| v.as_u64().unwrap())
            .collect();
        let truth_frames = read_json(&dir.join("truth.json"))["frames"]
            .as_u64()
            .unwrap();
        assert_eq!(sums.len() as u64, truth_frames, "{}", dir.display());
        for clip in clips(&dir) {
            let what = clip.display().to_string();
            // The binary: exact count and size.
            let out = Command::cargo_bin("twistmark")
                .unwrap()
                .args(["info", "--json"])
                .arg(&clip)
                .output()
                .unwrap();
            assert!(out.status.success(), "{what}: info failed");
            let info: Value = serde_json::from_slice(&out.stdout).unwrap();
            assert_eq!(
                info["frames"].as_u64(),
                Some(truth_frames),
                "{what}: frames"
            );
            assert_eq!(info["width"].as_u64(), Some(w), "{what}: width");
            assert_eq!(info["height"].as_u64(), Some(h), "{what}: height");
            assert!(info["codec"].is_string(), "{what}: codec");
            // The library: every frame, in order, with its checksum when lossless.
            let mut src = decode::open(&clip).unwrap();
            let mut frame = Frame::empty();
            let mut n = 0usize;
            while src.read_into(&mut frame).unwrap() {
                assert_eq!(frame.index as usize, n, "{what}: frame order");
                assert_eq!((frame.width as u64, frame.height as u64), (w, h));
                if lossless(&clip) {
                    assert_eq!(frame.checksum(), sums[n], "{what}: frame {n} luma differs");
                }
                n += 1;
            }
            assert_eq!(n as u64, truth_frames, "{what}: decoded count");
            checked += 1;
        }
    }
    assert!(checked >= 10, "only {checked} fixture clips found");
}
