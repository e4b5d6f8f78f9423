//! The project's fixture set: which invented scenes are stored under `fixtures/`, in which
//! formats, and a check that what is committed is what this build renders. Used by the
//! `twistmark-fixtures` binary (a developer tool, not part of the user-facing CLI).
//!
//! Every fixture is a folder with `truth.json`, `rig.json` and `scenario.json`, plus numbered
//! stills in `frames/` and/or video files `clip_<codec>.<ext>`. Videos store a 30 fps playback
//! rate in the container, as high-speed cameras do; the capture rate is in `rig.json`.
//! `fixtures/README.md` is generated from the same list.

use std::fmt::Write as _;
use std::path::{Path, PathBuf};

use rayon::prelude::*;

use super::write::{save_stills, write_sidecars};
use super::{
    Effects, Flicker, Highlight, Paint, Scenario, Steel, StillFormat, Truth, render_frame, simulate,
};
use crate::decode::Frame;
use crate::rig::{Ellipse, Spin};
use crate::{Error, Result};

/// Per-frame checksums of the rendered frames, written as `checksums.json`.
#[derive(Debug, Clone, serde::Serialize)]
struct Checksums {
    note: String,
    frame_fnv1a: Vec<u64>,
}

/// Playback rate written into every video container, Hz.
pub const CONTAINER_FPS_HZ: f64 = 30.0;

/// A video encoding of a fixture.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum VideoKind {
    /// FFV1 in Matroska, lossless.
    Ffv1Mkv,
    /// H.264 in MP4.
    H264Mp4,
    /// Motion JPEG in AVI.
    MjpegAvi,
}

impl VideoKind {
    /// The file name inside the fixture folder.
    pub fn file_name(self) -> &'static str {
        match self {
            VideoKind::Ffv1Mkv => "clip_ffv1.mkv",
            VideoKind::H264Mp4 => "clip_h264.mp4",
            VideoKind::MjpegAvi => "clip_mjpeg.avi",
        }
    }
    fn label(self) -> &'static str {
        match self {
            VideoKind::Ffv1Mkv => "FFV1 .mkv (lossless)",
            VideoKind::H264Mp4 => "H.264 .mp4 (crf 16)",
            VideoKind::MjpegAvi => "MJPEG .avi (q 5)",
        }
    }
    #[cfg(feature = "ffmpeg")]
    fn codec(self) -> crate::encode::Codec {
        use crate::encode::Codec;
        match self {
            VideoKind::Ffv1Mkv => Codec::Ffv1,
            VideoKind::H264Mp4 => Codec::H264 { crf: 16 },
            VideoKind::MjpegAvi => Codec::Mjpeg { quality: 5 },
        }
    }
}

/// One fixture: a scenario and the formats it is stored in.
#[derive(Debug, Clone)]
pub struct Fixture {
    /// Folder name under `fixtures/` (may contain `/`).
    pub dir: &'static str,
    /// What the fixture is for.
    pub purpose: &'static str,
    /// The scene.
    pub scenario: Scenario,
    /// Stills format, if stored as stills.
    pub stills: Option<StillFormat>,
    /// Video encodings.
    pub videos: Vec<VideoKind>,
}

/// Scales every pixel dimension of a scenario's scene by `f` (for small-format fixtures),
/// rounded to 1/16 px so that every value is exact in binary and survives a JSON round trip.
fn scale_scene(sc: &mut Scenario, f: f64) {
    let q = |v: f64| (v * 16.0).round() / 16.0;
    let s = &mut sc.scene;
    s.width = (f64::from(s.width) * f).round() as u32;
    s.height = (f64::from(s.height) * f).round() as u32;
    let p = |v: &mut [f64; 2]| {
        v[0] = q((v[0] + 0.5) * f - 0.5);
        v[1] = q((v[1] + 0.5) * f - 0.5);
    };
    let st = |x: &mut super::Stripe| {
        x.r_inner_px = q(x.r_inner_px * f);
        x.r_outer_px = q(x.r_outer_px * f);
        x.width_px = q(x.width_px * f);
    };
    p(&mut s.drive.pivot);
    s.drive.radius_px = q(s.drive.radius_px * f);
    st(&mut s.drive.stripe);
    p(&mut s.nut.pivot);
    s.nut.across_flats_px = q(s.nut.across_flats_px * f);
    s.nut.stud_radius_px = q(s.nut.stud_radius_px * f);
    st(&mut s.nut.stripe);
    if let Some(fx) = &mut s.fixed {
        p(&mut fx.pivot);
        st(&mut fx.stripe);
        fx.plate_half_px[0] = q(fx.plate_half_px[0] * f);
        fx.plate_half_px[1] = q(fx.plate_half_px[1] * f);
    }
}

fn preset(name: &str) -> Scenario {
    Scenario::preset(name).unwrap_or_else(|| unreachable!("preset {name} exists"))
}

/// The fixture set, in the order they are written.
pub fn fixture_set() -> Vec<Fixture> {
    use VideoKind::*;
    let all = vec![Ffv1Mkv, H264Mp4, MjpegAvi];
    let mut v = Vec::new();

    v.push(Fixture {
        dir: "slow-tool",
        purpose: "slow air tool at 1,000 fps: the bar springs back between blows, torque near the rating",
        scenario: preset("slow-tool"),
        stills: Some(StillFormat::Png),
        videos: all.clone(),
    });

    v.push(Fixture {
        dir: "fast-tool",
        purpose: "fast tool at 2,000 fps: the bar stays wound up, torque climbs past the rating",
        scenario: preset("fast-tool"),
        stills: Some(StillFormat::Png),
        videos: all.clone(),
    });

    let mut noisy = preset("fast-tool");
    noisy.name = "fast-tool-noisy".into();
    noisy.description =
        "fast tool at 3,000 fps with sensor noise, 100 Hz flicker, camera shake, motion blur, a specular highlight and blow-rate jitter".into();
    noisy.seed = 7;
    noisy.camera.fps_hz = 3000.0;
    noisy.camera.exposure_s = 1.0 / 6000.0;
    noisy.camera.blur_samples = 6;
    noisy.tool.clip_blows = 3;
    noisy.tool.jitter = 0.03;
    noisy.scene.paint = Paint::White;
    // Blur samples multiply the cost; 8×8 per sample is plenty under noise.
    noisy.scene.supersample = 8;
    noisy.scene.drive.highlight = Some(Highlight {
        offset_px: [-30.0, -28.0],
        sigma_px: 9.0,
        peak: 0.45,
    });
    noisy.effects = Effects {
        noise_sigma: 0.012,
        flicker: Some(Flicker {
            freq_hz: 100.0,
            depth: 0.06,
            phase_deg: 30.0,
        }),
        shake_sigma_px: 0.35,
        shake_roll_sigma_deg: 0.0,
    };
    v.push(Fixture {
        dir: "fast-tool-noisy",
        purpose: "realism: noise + flicker + shake + blur + highlight; use the fixed mark to cancel shake",
        scenario: noisy,
        stills: None,
        videos: vec![H264Mp4],
    });

    let mut ccw = preset("slow-tool");
    ccw.name = "ccw-red-bare".into();
    ccw.description =
        "mid-rate tool, 1,800 blows/min at 1,500 fps, tightening counter-clockwise on screen, red paint on bare steel".into();
    ccw.seed = 3;
    ccw.camera.fps_hz = 1500.0;
    ccw.tool.blow_rate_per_min = 1800.0;
    ccw.tool.first_blow_s = 0.0071;
    ccw.tool.clip_blows = 4;
    ccw.scene.tighten = Spin::Ccw;
    ccw.scene.paint = Paint::Red;
    ccw.scene.drive.steel = Steel::Bare;
    ccw.scene.drive.stripe.start_deg = -110.0;
    ccw.scene.nut.stripe.start_deg = -60.0;
    v.push(Fixture {
        dir: "ccw-red-bare",
        purpose: "counter-clockwise tightening and a low-contrast paint (red on bare steel)",
        scenario: ccw,
        stills: Some(StillFormat::Png),
        videos: vec![],
    });

    let mut deep = preset("fast-tool");
    deep.name = "tiff16-4000fps".into();
    deep.description =
        "first blow of the fast tool at 4,000 fps, 16-bit TIFF stills, orange paint, small frame"
            .into();
    deep.camera.fps_hz = 4000.0;
    deep.camera.bit_depth = 16;
    deep.camera.max_frames = Some(32);
    deep.tool.first_blow_s = 0.00130;
    deep.scene.paint = Paint::Orange;
    scale_scene(&mut deep, 0.6);
    v.push(Fixture {
        dir: "tiff16-4000fps",
        purpose: "16-bit stills and the highest frame rate; the clip is cut after 32 frames (one blow)",
        scenario: deep,
        stills: Some(StillFormat::Tiff16),
        videos: vec![],
    });

    let mut oblique = preset("slow-tool");
    oblique.name = "oblique-drive".into();
    oblique.description =
        "slow tool at 1,000 fps with the drive disc seen obliquely (ellipse 0.8, major axis at 20 deg)".into();
    oblique.tool.clip_blows = 3;
    oblique.scene.drive.ellipse = Some(Ellipse {
        axis_ratio: 0.8,
        major_deg: 20.0,
    });
    v.push(Fixture {
        dir: "oblique-drive",
        purpose: "an oblique drive disc (for the ellipse option)",
        scenario: oblique,
        stills: None,
        videos: vec![Ffv1Mkv],
    });

    let mut demo = preset("fast-tool");
    demo.name = "demo".into();
    demo.description =
        "demo: fast tool at 2,000 fps, ten blows, light noise, a specular highlight and slight blow-rate jitter".into();
    demo.seed = 11;
    demo.tool.jitter = 0.02;
    demo.camera.exposure_s = 1.0 / 4000.0;
    demo.camera.blur_samples = 4;
    demo.scene.drive.highlight = Some(Highlight {
        offset_px: [-30.0, -28.0],
        sigma_px: 9.0,
        peak: 0.35,
    });
    demo.effects.noise_sigma = 0.004;
    demo.scene.supersample = 8;
    v.push(Fixture {
        dir: "demo",
        purpose: "the README's bundled demo clip",
        scenario: demo,
        stills: None,
        videos: vec![H264Mp4],
    });
    v
}

/// Writes every fixture and `README.md` into `root`, replacing what is there. Returns the
/// files written (relative to `root`).
///
/// # Errors
/// [`Error::Io`] / [`Error::Output`] naming the file that could not be written, or
/// [`Error::Option`] when this build has no video encoder.
pub fn write_fixtures(root: &Path) -> Result<Vec<PathBuf>> {
    write_fixture_files(root, true, &mut Vec::new())
}

/// Writes every fixture into `root`; with `media` false, only the text files (sidecars,
/// `checksums.json`, README.md), skipping the stills and the video encoding, and pushes the
/// stills' and videos' paths (relative to `root`) onto `skipped`.
fn write_fixture_files(
    root: &Path,
    media: bool,
    skipped: &mut Vec<PathBuf>,
) -> Result<Vec<PathBuf>> {
    let set = fixture_set();
    let mut readme = readme_head();
    for fx in &set {
        let dir = root.join(fx.dir);
        if dir.exists() {
            std::fs::remove_dir_all(&dir).map_err(|e| Error::io(&dir, e))?;
        }
        let truth = simulate(&fx.scenario);
        // Each frame seeds its own noise stream from its index, so frames render independently
        // and in parallel to exactly what `render_clip` gives (the drift check compares them).
        let frames: Vec<Frame> = (0..truth.frames)
            .into_par_iter()
            .map(|i| render_frame(&fx.scenario, &truth, i))
            .collect();
        write_sidecars(&fx.scenario, &truth, &dir)?;
        let sums = Checksums {
            note: "FNV-1a checksum of each rendered frame's luma samples (Frame::checksum), before any encoding; a lossless decode must reproduce them exactly".into(),
            frame_fnv1a: frames.iter().map(Frame::checksum).collect(),
        };
        super::write::write_json(&dir.join("checksums.json"), &sums)?;
        if media {
            if let Some(fmt) = fx.stills {
                save_stills(&frames, &dir.join("frames"), fmt)?;
            }
            for v in &fx.videos {
                write_one_video(&frames, &dir.join(v.file_name()), *v)?;
            }
        } else {
            let rel = PathBuf::from(fx.dir);
            if let Some(fmt) = fx.stills {
                for f in &frames {
                    let name = format!("f_{:05}.{}", f.index, fmt.extension());
                    skipped.push(rel.join("frames").join(name));
                }
            }
            for v in &fx.videos {
                skipped.push(rel.join(v.file_name()));
            }
        }
        readme_entry(&mut readme, fx, &truth);
    }
    let readme_path = root.join("README.md");
    std::fs::write(&readme_path, readme).map_err(|e| Error::io(&readme_path, e))?;
    let mut files = Vec::new();
    list_files(root, root, &mut files)?;
    Ok(files)
}

#[cfg(feature = "ffmpeg")]
fn write_one_video(frames: &[Frame], path: &Path, kind: VideoKind) -> Result<()> {
    super::write::save_video(frames, path, kind.codec(), CONTAINER_FPS_HZ)
}

#[cfg(not(feature = "ffmpeg"))]
fn write_one_video(_frames: &[Frame], path: &Path, _kind: VideoKind) -> Result<()> {
    Err(Error::Option {
        flag: "ffmpeg".into(),
        reason: format!(
            "cannot write {}: this build has no video encoder; rebuild with the default \"ffmpeg\" feature",
            path.display()
        ),
    })
}

/// Every file under `dir`, relative to `root`, sorted.
fn list_files(root: &Path, dir: &Path, out: &mut Vec<PathBuf>) -> Result<()> {
    let mut entries: Vec<PathBuf> = std::fs::read_dir(dir)
        .map_err(|e| Error::io(dir, e))?
        .filter_map(|e| e.ok().map(|e| e.path()))
        .collect();
    entries.sort();
    for p in entries {
        if p.is_dir() {
            list_files(root, &p, out)?;
        } else if let Ok(rel) = p.strip_prefix(root) {
            out.push(rel.to_path_buf());
        }
    }
    Ok(())
}

/// The quick drift check (`make-fixtures --check`): re-renders every fixture's frames in
/// memory and compares, byte for byte, the files that describe them: `checksums.json` (the
/// FNV-1a checksum of every rendered frame), `truth.json`, `rig.json`, `scenario.json` and
/// README.md; and that exactly the expected files are committed (one still per frame, each
/// declared video, nothing extra). It does not encode: that the committed stills and videos
/// hold those frames is checked by decoding them (`tests/it/fixtures_decode.rs`: exact
/// checksums for PNG, TIFF and FFV1; count and size for H.264 and MJPEG). A change to the
/// renderer or the scenes is caught here; a change to the encoders' settings only by
/// [`check_fixtures`] (`--check --full`). Returns one line per difference; empty when they
/// match.
///
/// # Errors
/// As [`write_fixtures`], for the scratch folder.
pub fn check_fixture_sums(root: &Path, scratch: &Path) -> Result<Vec<String>> {
    let mut media = Vec::new();
    let mut fresh = write_fixture_files(scratch, false, &mut media)?;
    let committed = committed_files(root)?;
    let mut diffs = compare_files(root, scratch, &fresh, &committed, |_| false)?;
    for f in &media {
        if !committed.contains(f) {
            diffs.push(format!("missing: {}", f.display()));
        }
    }
    fresh.extend(media);
    for f in &committed {
        if !fresh.contains(f) {
            diffs.push(format!("extra: {}", f.display()));
        }
    }
    Ok(diffs)
}

/// The files of the fixture set committed under `root` (relative to it), sorted.
fn committed_files(root: &Path) -> Result<Vec<PathBuf>> {
    let mut committed = Vec::new();
    for fx in fixture_set() {
        let d = root.join(fx.dir);
        if d.is_dir() {
            list_files(root, &d, &mut committed)?;
        }
    }
    if root.join("README.md").is_file() {
        committed.push(PathBuf::from("README.md"));
    }
    committed.sort();
    Ok(committed)
}

/// One line for each file of `fresh` that is missing from `committed` or whose bytes differ
/// (a file that `near_enough` accepts may differ when the sizes are within 10 %).
fn compare_files(
    root: &Path,
    scratch: &Path,
    fresh: &[PathBuf],
    committed: &[PathBuf],
    near_enough: impl Fn(&Path) -> bool,
) -> Result<Vec<String>> {
    let mut diffs = Vec::new();
    for f in fresh {
        if !committed.contains(f) {
            diffs.push(format!("missing: {}", f.display()));
            continue;
        }
        let a = std::fs::read(root.join(f)).map_err(|e| Error::io(root.join(f), e))?;
        let b = std::fs::read(scratch.join(f)).map_err(|e| Error::io(scratch.join(f), e))?;
        if a != b && !(near_enough(f) && similar_size(a.len(), b.len())) {
            diffs.push(format!(
                "changed: {} ({} bytes committed, {} bytes rendered)",
                f.display(),
                a.len(),
                b.len()
            ));
        }
    }
    Ok(diffs)
}

/// The full drift check (`make-fixtures --check --full`): re-renders and re-encodes the
/// fixture set into `scratch` and compares it byte for byte with `root` (H.264 by size, see
/// `is_lossy`). Returns one line per difference (missing, extra or changed file); empty when
/// they match. Only the fixtures' own folders and README.md are compared.
///
/// # Errors
/// As [`write_fixtures`], for the scratch folder.
pub fn check_fixtures(root: &Path, scratch: &Path) -> Result<Vec<String>> {
    let fresh = write_fixtures(scratch)?;
    let committed = committed_files(root)?;
    let mut diffs = compare_files(root, scratch, &fresh, &committed, is_lossy)?;
    for f in &committed {
        if !fresh.contains(f) {
            diffs.push(format!("extra: {}", f.display()));
        }
    }
    Ok(diffs)
}

/// H.264 files: their source frames are checked exactly through `checksums.json`; the
/// encoded bytes are not compared, because this FFmpeg build's H.264 output through the
/// library was seen to vary between runs on noisy input (the ffmpeg command line does not).
fn is_lossy(f: &Path) -> bool {
    f.extension().and_then(|e| e.to_str()) == Some("mp4")
}

/// Sizes within 10 % of each other.
fn similar_size(a: usize, b: usize) -> bool {
    let (a, b) = (a as f64, b as f64);
    (a - b).abs() <= 0.1 * a.max(b)
}

fn readme_head() -> String {
    "# Fixtures\n\n\
Synthetic clips of twistmark's own invented test bench, rendered by `tools/scenes/src/synth` with exact known\n\
truth. No real footage and no one else's data. Regenerate with `tools/make-fixtures`; check that\n\
the committed files match this build with `tools/make-fixtures --check` (exit 1 on drift).\n\
This file is generated; edit `tools/scenes/src/synth/fixtures.rs` instead.\n\n\
Each folder holds `truth.json` (per-frame angles and per-blow values with the report.json\n\
definitions), `rig.json` (the exact rig), `scenario.json` (every knob), and numbered stills in\n\
`frames/` and/or video files, and `checksums.json` (the FNV-1a checksum of every rendered frame\n\
before encoding: a lossless decode must reproduce them). Video containers store a 30 fps playback rate; the capture rate is\n\
`capture_fps_hz` in `rig.json`. Torques are the model's stiffness x twist on an invented bench,\n\
not measurements. Angles in degrees, relative to frame 0, tightening positive; frame `f` is the\n\
instant `f / fps`. See docs/scenes.md for the model and every knob.\n\n\
`--check` re-renders every frame in memory and compares `checksums.json`, the JSON sidecars and\n\
this file byte for byte, and the list of files; the stills and videos are tied to\n\
`checksums.json` by decoding them (`tests/it/fixtures_decode.rs`). `--check --full` also re-encodes\n\
and compares PNG, TIFF, FFV1, MJPEG and JSON files byte for byte, and H.264 (.mp4) files by a\n\
size within 10 %, because the library's H.264 output was seen to vary between runs on noisy\n\
frames.\n\n"
        .to_string()
}

fn readme_entry(out: &mut String, fx: &Fixture, t: &Truth) {
    let sc = &fx.scenario;
    let mut formats: Vec<String> = Vec::new();
    if let Some(f) = fx.stills {
        formats.push(match f {
            StillFormat::Png => format!("{}-bit PNG stills in `frames/`", sc.camera.bit_depth),
            StillFormat::Tiff16 => "16-bit TIFF stills in `frames/`".into(),
        });
    }
    for v in &fx.videos {
        formats.push(format!("`{}` {}", v.file_name(), v.label()));
    }
    let e = &sc.effects;
    let mut knobs = vec![
        format!("{}x{} px", sc.scene.width, sc.scene.height),
        format!("{} fps", sc.camera.fps_hz),
        format!("{} blows/min", sc.tool.blow_rate_per_min),
        format!("tighten {:?}", sc.scene.tighten).to_lowercase(),
        format!("paint {:?}", sc.scene.paint).to_lowercase(),
        format!("drive disc {:?} steel", sc.scene.drive.steel).to_lowercase(),
        format!("seed {}", sc.seed),
    ];
    if sc.tool.jitter > 0.0 {
        knobs.push(format!("jitter {}", sc.tool.jitter));
    }
    if sc.camera.exposure_s > 0.0 && sc.camera.blur_samples > 1 {
        knobs.push(format!(
            "exposure {:.0} µs ({} blur samples)",
            sc.camera.exposure_s * 1e6,
            sc.camera.blur_samples
        ));
    }
    if e.noise_sigma > 0.0 {
        knobs.push(format!("noise σ {}", e.noise_sigma));
    }
    if let Some(f) = e.flicker {
        knobs.push(format!("flicker {} Hz ±{}", f.freq_hz, f.depth));
    }
    if e.shake_sigma_px > 0.0 {
        knobs.push(format!("shake σ {} px", e.shake_sigma_px));
    }
    if sc.scene.drive.highlight.is_some() {
        knobs.push("specular highlight".into());
    }
    if let Some(el) = sc.scene.drive.ellipse {
        knobs.push(format!(
            "oblique drive disc {} at {} deg",
            el.axis_ratio, el.major_deg
        ));
    }
    let s = &t.summary;
    let _ = writeln!(out, "## `{}/`\n", fx.dir);
    let _ = writeln!(
        out,
        "{}. Purpose: {}.\n",
        capitalise(&sc.description),
        fx.purpose
    );
    let _ = writeln!(out, "- Files: {}.", formats.join("; "));
    let _ = writeln!(out, "- Knobs: {}.", knobs.join(", "));
    let _ = writeln!(
        out,
        "- Truth: {} frames, {} blow(s), blow rate {}, drive total {:.3} deg, nut total {:.3} deg, bar {:.4} N·m/deg, peak torque {} (model's continuous peak {:.1} N·m; bar rating {}).\n",
        t.frames,
        s.blow_count,
        s.blow_rate_per_min
            .map_or("n/a".into(), |r| format!("{r:.1}/min")),
        s.drive_total_deg,
        s.nut_total_deg,
        s.bar_stiffness_nm_per_deg,
        s.peak_torque_nm
            .map_or("n/a".into(), |q| format!("{q:.1} N·m")),
        t.blows
            .iter()
            .map(|b| b.model_peak_torque_nm)
            .fold(0.0, f64::max),
        sc.bar
            .rating_nm
            .map_or("none".into(), |r| format!("{r} N·m")),
    );
}

fn capitalise(s: &str) -> String {
    let mut c = s.chars();
    match c.next() {
        Some(f) => f.to_uppercase().chain(c).collect(),
        None => String::new(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn fixture_rigs_are_valid_and_fit() {
        for fx in fixture_set() {
            let rig = fx.scenario.rig();
            let p = Path::new("rig.json");
            let back = crate::rig::Rig::from_json_str(&rig.to_json_pretty(), p).unwrap();
            assert_eq!(back, rig, "{}", fx.dir);
            rig.check_frame(p, fx.scenario.scene.width, fx.scenario.scene.height)
                .unwrap_or_else(|e| panic!("{}: {e}", fx.dir));
        }
    }

    #[test]
    fn committed_scenarios_reproduce_their_truth() {
        // scenario.json is enough to regenerate a fixture: parsing it and simulating gives
        // the committed truth.json byte for byte.
        let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("fixtures");
        for fx in fixture_set() {
            let dir = root.join(fx.dir);
            let read = |f: &str| {
                std::fs::read_to_string(dir.join(f))
                    .unwrap_or_else(|e| panic!("{}/{f}: {e}; run tools/make-fixtures", fx.dir))
            };
            let (sc_text, truth_text) = (read("scenario.json"), read("truth.json"));
            let sc: Scenario = serde_json::from_str(&sc_text).unwrap();
            assert_eq!(sc, fx.scenario, "{}", fx.dir);
            let t = simulate(&sc);
            let mut text = serde_json::to_string_pretty(&t).unwrap();
            text.push('\n');
            assert!(text == truth_text, "{}: truth.json differs", fx.dir);
        }
    }

    #[test]
    fn fixture_set_covers_the_brief() {
        // Frame rates from 1,000 to 4,000 fps, both tightening directions, more than one
        // paint colour, 16-bit stills, and a demo folder.
        let set = fixture_set();
        let fps: Vec<f64> = set.iter().map(|f| f.scenario.camera.fps_hz).collect();
        assert!(fps.contains(&1000.0) && fps.contains(&4000.0));
        assert!(set.iter().any(|f| f.scenario.scene.tighten == Spin::Ccw));
        assert!(set.iter().any(|f| f.scenario.scene.paint != Paint::Yellow));
        assert!(set.iter().any(|f| f.stills == Some(StillFormat::Tiff16)
            && f.scenario.camera.bit_depth == 16));
        assert!(set.iter().any(|f| f.dir == "demo"));
    }
}
