//! End-to-end speed and memory benchmark (targets: docs/performance.md): on the same rendered 1280×720 clip, in one
//! run, it measures decoding alone through twistmark's own reader, with no copy of the
//! pictures (and `ffmpeg -f null` as an outside reference when the ffmpeg command is
//! installed), the full `twistmark analyze` (release binary), and the peak RSS of `analyze` on a short clip and one ten times longer.
//! It prints the ratios against the targets, and the tracker's own cost per frame (frames
//! decoded into memory first); it never fails on a timing.
//!
//! ```text
//! cargo bench --bench pipeline -- --short     # CI: 150 / 1,500 frames
//! cargo bench --bench pipeline -- --full      # 2,000 / 20,000 frames (long: renders and encodes)
//! cargo bench --bench pipeline -- --frames N  # N / 10 N frames
//! cargo bench --bench pipeline -- --full --codecs h264   # only these clips (h264, h264c, ffv1)
//! ```
//! `tools/bench.sh` wraps these. The scene is the project's invented bench (the `fast-tool`
//! preset: 2,000 fps capture, about 3,300 blows/min) scaled by 3 to 960×720 and centred in a
//! 1280×720 frame, with light seeded sensor noise. `h264` and `ffv1` are monochrome (luma
//! only, as most high-speed cameras record); `h264c` is the same take in colour (orange paint
//! on zinc-plated faces, 4:2:0 chroma; its luma about 0.9 of the metal's), which the tracker reads through its colour projection
//! (the speed target holds on colour footage too). Clips are cached under
//! `target/bench-clips/` so a second run skips rendering and encoding.

use std::path::{Path, PathBuf};
use std::process::Command;
use std::time::Instant;

use twistmark::decode::{self, Frame, Slot};
use twistmark_scenes::encode::{ClipWriter, Codec};
use twistmark_scenes::synth::{Finish, Look, Scenario, render_frame, simulate};

/// Peak RSS target for a 20,000-frame 720p clip, MB (docs/performance.md).
const RSS_TARGET_MB: f64 = 150.0;
/// analyze / decode wall-time target (docs/performance.md).
const TIME_TARGET: f64 = 1.15;
/// Long / short peak RSS target (docs/performance.md): within 10 %.
const RSS_GROWTH_TARGET: f64 = 1.10;

fn main() {
    let args: Vec<String> = std::env::args().skip(1).collect();
    // `cargo test --benches` runs this binary without `--bench`: do nothing there.
    if !args.iter().any(|a| a == "--bench") {
        println!("pipeline benchmark: skipped (run with `cargo bench --bench pipeline`)");
        return;
    }
    let mut short_frames = 150u64;
    let mut mode = "short";
    let mut runs = 3usize;
    let mut only: Option<Vec<String>> = None;
    let mut it = args.iter();
    while let Some(a) = it.next() {
        match a.as_str() {
            "--short" => (short_frames, mode) = (150, "short"),
            "--full" => (short_frames, mode) = (2000, "full"),
            "--frames" => {
                short_frames = it.next().and_then(|v| v.parse().ok()).unwrap_or(150);
                mode = "custom";
            }
            "--runs" => runs = it.next().and_then(|v| v.parse().ok()).unwrap_or(3).max(1),
            "--codecs" => {
                only = it
                    .next()
                    .map(|v| v.split(',').map(|c| c.trim().to_lowercase()).collect());
            }
            _ => {}
        }
    }
    let long_frames = short_frames * 10;
    let bin = PathBuf::from(env!("CARGO_BIN_EXE_twistmark"));
    let root = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("target/bench-clips");
    std::fs::create_dir_all(&root).expect("create target/bench-clips");

    println!(
        "twistmark pipeline benchmark, {mode} mode: {short_frames} and {long_frames} frames at 1280x720"
    );
    println!("machine: {}", machine());
    println!("load before: {}", load());

    let sc = scenario(long_frames);
    let rig_path = root.join("rig-720p.json");
    std::fs::write(&rig_path, sc.rig().to_json_pretty()).expect("write rig");

    // (name, codec, extension, colour)
    let codecs = [
        ("h264", Codec::H264 { crf: 18 }, "mp4", false),
        ("h264c", Codec::H264 { crf: 18 }, "mp4", true),
        ("ffv1", Codec::Ffv1, "mkv", false),
    ];
    let mut clips = Vec::new();
    let (mut wanted_mono, mut wanted_colour) = (Vec::new(), Vec::new());
    for (name, codec, ext, colour) in codecs {
        if only.as_ref().is_some_and(|o| !o.iter().any(|c| c == name)) {
            continue;
        }
        let long = root.join(format!("fast-720p-{long_frames}-{name}.{ext}"));
        let short = root.join(format!("fast-720p-{short_frames}-{name}.{ext}"));
        let wanted = if colour {
            &mut wanted_colour
        } else {
            &mut wanted_mono
        };
        wanted.push((short.clone(), short_frames, codec));
        wanted.push((long.clone(), long_frames, codec));
        clips.push((name, short, long));
    }
    ensure_clips(&sc, &wanted_mono, false);
    ensure_clips(&coloured(sc.clone()), &wanted_colour, true);

    let ffmpeg = Command::new("ffmpeg").arg("-version").output().is_ok();
    let mut rows = Vec::new();
    for (name, short, long) in &clips {
        let out_dir = root.join(format!("out-{name}"));
        // Alternate the measurements so that a change in machine load hits both alike; keep
        // the fastest run of each (the least disturbed).
        let (mut dec, mut ana, mut ff) = (f64::MAX, f64::MAX, f64::MAX);
        let (mut rss_short, mut rss_long) = (0u64, 0u64);
        let mut decoded = 0;
        let mut pairs = Vec::with_capacity(runs);
        for run in 0..runs {
            // Decode first in even runs and analyze first in odd ones, so a machine that
            // speeds up or slows down steadily does not favour either side of the pairs.
            let ((t, n), (ta, rss)) = if run % 2 == 0 {
                let d = decode_only(long);
                (d, analyze(&bin, long, &rig_path, &out_dir))
            } else {
                let a = analyze(&bin, long, &rig_path, &out_dir);
                (decode_only(long), a)
            };
            decoded = n;
            dec = dec.min(t);
            ana = ana.min(ta);
            pairs.push(ta / t);
            rss_long = rss_long.max(rss);
            if ffmpeg {
                ff = ff.min(ffmpeg_null(long));
            }
        }
        let (_, rss) = analyze(&bin, short, &rig_path, &out_dir);
        rss_short = rss_short.max(rss);
        pairs.sort_by(f64::total_cmp);
        rows.push(Row {
            name,
            pairs,
            frames: decoded,
            decode_s: dec,
            analyze_s: ana,
            ffmpeg_s: ffmpeg.then_some(ff),
            rss_short_kb: rss_short,
            rss_long_kb: rss_long,
        });
    }
    for (_, _, long) in &clips {
        let us = tracker_alone(long, &rig_path, 300);
        println!(
            "tracker alone ({}, first 300 frames decoded into memory, fastest of 5): {us:.0} us/frame",
            long.file_name()
                .map_or_else(String::new, |n| n.to_string_lossy().into_owned())
        );
    }
    println!("load after: {}", load());
    println!();
    println!(
        "{:<6} {:>7} {:>10} {:>10} {:>10} {:>8} {:>10} {:>10} {:>9} {:>11}",
        "clip",
        "frames",
        "decode s",
        "analyze s",
        "ffmpeg s",
        "an/dec",
        "RSS short",
        "RSS long",
        "long/sh",
        "RSS@20k MB"
    );
    // The speed verdict uses the median of the back-to-back pairs: each pair is measured
    // under the same machine conditions (decode and analyze one after the other, in
    // alternating order), while the fastest decode and the fastest analyze may come from
    // minutes apart on a machine whose speed drifts, which biases their ratio either way.
    let mut all_ok = true;
    let mut fastest_ok = true;
    for r in &rows {
        let ratio = r.analyze_s / r.decode_s;
        let growth = r.rss_long_kb as f64 / r.rss_short_kb.max(1) as f64;
        let at_20k = r.rss_at(short_frames, long_frames, 20_000);
        all_ok &=
            r.median_pair() <= TIME_TARGET && growth <= RSS_GROWTH_TARGET && at_20k < RSS_TARGET_MB;
        fastest_ok &= ratio <= TIME_TARGET;
        println!(
            "{:<6} {:>7} {:>10.3} {:>10.3} {:>10} {:>8.3} {:>7.1} MB {:>7.1} MB {:>9.3} {:>11.1}",
            r.name,
            r.frames,
            r.decode_s,
            r.analyze_s,
            r.ffmpeg_s.map_or("-".to_string(), |t| format!("{t:.3}")),
            ratio,
            r.rss_short_kb as f64 / 1024.0,
            r.rss_long_kb as f64 / 1024.0,
            growth,
            at_20k
        );
        println!(
            "       analyze/decode of each run's back-to-back pair: {} (median {:.3})",
            r.pairs
                .iter()
                .map(|p| format!("{p:.3}"))
                .collect::<Vec<_>>()
                .join(" "),
            r.median_pair()
        );
        println!(
            "       decode {:.0} frames/s, analyze {:.0} frames/s{}",
            r.frames as f64 / r.decode_s,
            r.frames as f64 / r.analyze_s,
            r.ffmpeg_s.map_or(String::new(), |t| format!(
                ", ffmpeg -f null {:.0} frames/s",
                r.frames as f64 / t
            ))
        );
    }
    println!();
    println!(
        "targets: analyze/decode <= {TIME_TARGET}; long/short peak RSS <= {RSS_GROWTH_TARGET}; RSS for 20,000 frames < {RSS_TARGET_MB} MB"
    );
    if long_frames >= 20_000 {
        println!("RSS@20k is measured (the long clip has {long_frames} frames).");
    } else {
        println!(
            "RSS@20k is extrapolated linearly from the short and long clips ({short_frames} and {long_frames} frames); run --full to measure it."
        );
    }
    println!(
        "verdict (speed: median back-to-back pair; memory as above): {}",
        if all_ok {
            "within target"
        } else {
            "NOT within target"
        }
    );
    println!(
        "for comparison, speed by the fastest decode against the fastest analyze (an/dec column): {}",
        if fastest_ok {
            "within target"
        } else {
            "NOT within target"
        }
    );
}

struct Row<'a> {
    name: &'a str,
    /// analyze / decode of each run's back-to-back pair, sorted.
    pairs: Vec<f64>,
    frames: u64,
    decode_s: f64,
    analyze_s: f64,
    ffmpeg_s: Option<f64>,
    rss_short_kb: u64,
    rss_long_kb: u64,
}

impl Row<'_> {
    /// The median of the back-to-back pair ratios (`pairs` is sorted and never empty).
    fn median_pair(&self) -> f64 {
        let n = self.pairs.len();
        if n % 2 == 1 {
            self.pairs[n / 2]
        } else {
            0.5 * (self.pairs[n / 2 - 1] + self.pairs[n / 2])
        }
    }

    /// Peak RSS in MB at `n` frames: measured when `n` is the long clip, else a straight line
    /// through the short and long measurements (never below the long one).
    fn rss_at(&self, short: u64, long: u64, n: u64) -> f64 {
        let (s, l) = (self.rss_short_kb as f64, self.rss_long_kb as f64);
        let slope = ((l - s) / (long - short) as f64).max(0.0);
        (l + slope * n.saturating_sub(long) as f64) / 1024.0
    }
}

/// The 720p bench scene: the fast-tool preset scaled by 3 and centred in 1280×720, cut at
/// `frames` frames, with light seeded sensor noise (about one 8-bit step).
fn scenario(frames: u64) -> Scenario {
    let mut sc = Scenario::preset("fast-tool").expect("preset");
    let k = 3.0;
    let dx = (1280.0 - 320.0 * k) / 2.0;
    let at = |p: [f64; 2]| [p[0] * k + dx, p[1] * k];
    let s = &mut sc.scene;
    s.width = 1280;
    s.height = 720;
    s.drive.pivot = at(s.drive.pivot);
    s.drive.radius_px *= k;
    for st in [&mut s.drive.stripe, &mut s.nut.stripe] {
        st.r_inner_px *= k;
        st.r_outer_px *= k;
        st.width_px *= k;
    }
    s.nut.pivot = at(s.nut.pivot);
    s.nut.across_flats_px *= k;
    s.nut.stud_radius_px *= k;
    if let Some(f) = s.fixed.as_mut() {
        f.pivot = at(f.pivot);
        f.stripe.r_outer_px *= k;
        f.stripe.width_px *= k;
        f.plate_half_px = [f.plate_half_px[0] * k, f.plate_half_px[1] * k];
    }
    // Edges are 3× longer; 4×4 subsamples at edges keep rendering affordable and the edges
    // smooth enough for the tracker.
    s.supersample = 4;
    sc.name = "fast-tool-720p".into();
    sc.effects.noise_sigma = 0.004;
    // Enough blows to fill the clip, then cut it.
    let blow_frames = sc.camera.fps_hz * 60.0 / sc.tool.blow_rate_per_min;
    sc.tool.clip_blows = (frames as f64 / blow_frames).ceil() as u32 + 2;
    sc.camera.max_frames = Some(frames);
    sc
}

/// The bench scene in colour: orange paint on zinc-plated drive and nut faces (the paint's
/// contrast is mostly in colour: its luma is about 0.9 of the zinc's), a lamp from the upper
/// left and a little vignetting. The geometry, motion and rig are the monochrome scene's.
fn coloured(mut sc: Scenario) -> Scenario {
    sc.scene.look = Some(Look {
        texture_seed: 720,
        paint_rgb: [0.95, 0.45, 0.05],
        wear: 0.0,
        paint_strength: 1.0,
        drive_finish: Finish::Zinc,
        nut_finish: Finish::Zinc,
        recess_half_px: 0.0,
        pits: Vec::new(),
        rim_px: 0.0,
        light_deg: 135.0,
        nut_glint: None,
        washer: None,
        wheel: None,
        bracket_finish: Finish::Zinc,
        vignette: 0.1,
        gradient: [0.0, 0.0],
    });
    sc.name = "fast-tool-720p-colour".into();
    sc
}

/// Renders once and encodes every clip that is not cached yet (with 4:2:0 chroma when
/// `colour`). Every clip is a prefix of the same simulated take, so the short clip is the
/// first part of the long one.
fn ensure_clips(sc: &Scenario, clips: &[(PathBuf, u64, Codec)], colour: bool) {
    let missing: Vec<_> = clips.iter().filter(|(p, _, _)| !p.exists()).collect();
    if missing.is_empty() {
        return;
    }
    let t = Instant::now();
    let truth = simulate(sc);
    let mut writers: Vec<(ClipWriter, u64, PathBuf)> = missing
        .iter()
        .map(|(p, n, codec)| {
            let ext = p.extension().map_or("mkv".into(), |e| e.to_string_lossy());
            let tmp = p.with_extension(format!("partial.{ext}"));
            let w = if colour {
                ClipWriter::create_colour(&tmp, *codec, 1280, 720, 30.0)
            } else {
                ClipWriter::create(&tmp, *codec, 1280, 720, 30.0)
            }
            .expect("create clip");
            (w, *n, tmp)
        })
        .collect();
    let max = writers
        .iter()
        .map(|w| w.1)
        .max()
        .unwrap_or(0)
        .min(truth.frames);
    eprintln!(
        "rendering {max} frames at 1280x720 and encoding {} clip(s) (cached afterwards) ...",
        writers.len()
    );
    // Render in parallel batches, write in order.
    let batch = 64u64;
    let mut i = 0;
    while i < max {
        let end = (i + batch).min(max);
        let frames: Vec<Frame> = {
            use rayon::prelude::*;
            (i..end)
                .into_par_iter()
                .map(|f| render_frame(sc, &truth, f))
                .collect()
        };
        for f in &frames {
            for (w, n, _) in writers.iter_mut() {
                if f.index < *n {
                    w.write(f).expect("encode frame");
                }
            }
        }
        i = end;
    }
    for ((w, _, tmp), (p, _, _)) in writers.into_iter().zip(missing) {
        w.finish().expect("finish clip");
        std::fs::rename(tmp, p).expect("rename clip");
    }
    eprintln!("  done in {:.1} s", t.elapsed().as_secs_f64());
}

/// The tracker's own cost, µs per frame: `frames` frames of `clip` decoded into memory first,
/// then pushed through a fresh `Tracker` (the first frame, which learns the stripes, is not
/// timed); the fastest of five passes.
fn tracker_alone(clip: &Path, rig_path: &Path, frames: usize) -> f64 {
    let rig = twistmark::Rig::from_path(rig_path).expect("read rig");
    let mut src = decode::open(clip).expect("open clip");
    let mut decoded = Vec::new();
    while decoded.len() < frames {
        let mut f = Frame::empty();
        if !src.read_into(&mut f).expect("decode") {
            break;
        }
        decoded.push(f);
    }
    let Some((first, rest)) = decoded.split_first() else {
        return f64::NAN;
    };
    let mut best = f64::INFINITY;
    for _ in 0..5 {
        let mut t = twistmark::track::Tracker::new(&rig, rig_path, first.width, first.height)
            .expect("tracker");
        t.push(first).expect("first frame");
        let start = Instant::now();
        for f in rest {
            t.push(f).expect("track");
        }
        best = best.min(start.elapsed().as_secs_f64() / rest.len().max(1) as f64);
    }
    best * 1e6
}

/// Decodes every frame with twistmark's own reader and does nothing with it: `read_slot`
/// holds each decoded picture in place (packed 8-bit rows, as in these clips) and gives it
/// back on the next call, so nothing is copied and this is the FFmpeg decoder alone.
/// Returns (seconds, frames).
fn decode_only(clip: &Path) -> (f64, u64) {
    let t = Instant::now();
    let mut src = decode::open(clip).expect("open clip");
    let mut slot = Slot::new();
    let mut n = 0;
    while src.read_slot(&mut slot).expect("decode") {
        assert!(
            slot.holds_picture(),
            "the bench clip's pictures were copied, not read in place"
        );
        n += 1;
    }
    (t.elapsed().as_secs_f64(), n)
}

/// Runs the release binary's `analyze` under `/usr/bin/time`; returns (wall s, peak RSS kB).
fn analyze(bin: &Path, clip: &Path, rig: &Path, out: &Path) -> (f64, u64) {
    let _ = std::fs::remove_dir_all(out);
    let t = Instant::now();
    let o = Command::new("/usr/bin/time")
        .args(["-f", "maxrss_kb=%M"])
        .arg(bin)
        .arg("analyze")
        .arg(clip)
        .arg("--rig")
        .arg(rig)
        .arg("--out")
        .arg(out)
        .output()
        .expect("run /usr/bin/time twistmark analyze (install the 'time' package)");
    let wall = t.elapsed().as_secs_f64();
    let stderr = String::from_utf8_lossy(&o.stderr);
    assert!(
        o.status.success(),
        "analyze failed on {}: {stderr}",
        clip.display()
    );
    let rss = stderr
        .lines()
        .rev()
        .find_map(|l| l.strip_prefix("maxrss_kb="))
        .and_then(|v| v.trim().parse().ok())
        .expect("maxrss from /usr/bin/time");
    (wall, rss)
}

/// Wall time of `ffmpeg -i CLIP -f null -` (FFmpeg's own threads, no output).
fn ffmpeg_null(clip: &Path) -> f64 {
    let t = Instant::now();
    let o = Command::new("ffmpeg")
        .args(["-nostdin", "-v", "error", "-i"])
        .arg(clip)
        .args(["-f", "null", "-"])
        .output()
        .expect("ffmpeg");
    assert!(o.status.success(), "ffmpeg failed on {}", clip.display());
    t.elapsed().as_secs_f64()
}

fn machine() -> String {
    let cpu = std::fs::read_to_string("/proc/cpuinfo")
        .ok()
        .and_then(|s| {
            s.lines()
                .find(|l| l.starts_with("model name"))
                .and_then(|l| l.split(':').nth(1))
                .map(|s| s.trim().to_string())
        })
        .unwrap_or_else(|| "unknown CPU".into());
    let cores = std::thread::available_parallelism().map_or(0, |n| n.get());
    format!("{cpu}, {cores} cores")
}

fn load() -> String {
    std::fs::read_to_string("/proc/loadavg")
        .map(|s| s.split_whitespace().take(3).collect::<Vec<_>>().join(" "))
        .unwrap_or_else(|_| "unknown".into())
}
