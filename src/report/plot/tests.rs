//! Tests of the plots, and the sample analysis other modules' tests draw from.
//!
//! Tests of part of the report stage: it reads results through `crate::Analysis` and must never
//! import `batch`, `find_marks`, `calibrate` or the CLI.

use super::*;
use crate::analyze::FpsSource;
use crate::mechanics::{BlowMetrics, Summary};
use crate::segment::{Blow, Segmentation};
use crate::track::Trace;
use crate::units::{Angle, TimeBase, Torque};

/// A rig with a 44.525 N·m/deg round bar (check value C1, θ = T·L/(G·J), Beer & Johnston ch. 3: d = 16 mm, L = 200 mm,
/// G = 79.3 GPa) rated 136 N·m.
pub(crate) const RIG_JSON: &str = r#"{
  "rig_version": 1, "capture_fps_hz": 2000,
  "marks": {
    "drive": {"kind": "radial", "pivot": [60, 60], "radius": [15, 40], "tighten": "cw"},
    "nut":   {"kind": "radial", "pivot": [180, 60], "radius": [15, 40], "tighten": "ccw"}
  },
  "bar": {"sections": [{"shape": "round", "length_mm": 200, "d_mm": 16}], "rating_nm": 136}
}"#;

/// An invented analysis: 5 blows at 2000 fps, 100 samples apart, drive stepping 12° and
/// the nut 9° per blow, twist springing back between blows; frames 130..=134 lose the nut.
// `..Default::default()` keeps this building when the stages add fields.
#[allow(clippy::needless_update)]
pub(crate) fn sample_analysis(path: &Path) -> Analysis {
    let rig = crate::Rig::from_json_str(RIG_JSON, Path::new("rig.json")).unwrap();
    let tb = TimeBase::from_fps(2000.0, "test").unwrap();
    let n = 520usize;
    let mut drive = Vec::with_capacity(n);
    let mut nut = Vec::with_capacity(n);
    for i in 0..n {
        let blow = (i / 100) as f64;
        let phase = (i % 100) as f64;
        let rise = (phase / 10.0).min(1.0);
        let d = 12.0 * (blow + rise);
        let settle = ((phase - 5.0) / 30.0).clamp(0.0, 1.0);
        let nt = 9.0 * (blow + settle) - 1.5 * (1.0 - settle) * rise;
        drive.push(Some(Angle::from_deg(d)));
        nut.push(if (130..=134).contains(&i) {
            None
        } else {
            Some(Angle::from_deg(nt))
        });
    }
    let trace = Trace {
        time_base: tb,
        times_s: Vec::new(),
        synthetic: Vec::new(),
        frames: (0..n as u64).collect(),
        drive,
        nut,
        drive_confidence: vec![1.0; n],
        nut_confidence: vec![1.0; n],
        drive_zero_screen: Some(Angle::from_deg(-90.0)),
        nut_zero_screen: Some(Angle::from_deg(30.0)),
    };
    let blows: Vec<Blow> = (0..5)
        .map(|b| Blow {
            onset: b * 100,
            end: ((b + 1) * 100).min(n),
            nut_onset: Some(b * 100 + 5),
        })
        .collect();
    let k = rig.bar.as_ref().unwrap().stiffness();
    let metrics: Vec<BlowMetrics> = blows
        .iter()
        .enumerate()
        .map(|(i, b)| {
            let peak = (b.onset..b.end)
                .filter_map(|s| trace.twist(s))
                .fold(Angle::ZERO, |m, a| if a > m { a } else { m });
            BlowMetrics {
                index: i + 1,
                frame: b.onset as u64,
                t_s: tb.seconds(b.onset as f64),
                drive_advance: Some(Angle::from_deg(12.0)),
                nut_advance: Some(Angle::from_deg(9.0 - i as f64)),
                peak_twist: Some(peak),
                peak_torque: Some(k * peak),
                residual_twist: Some(Angle::from_deg(3.0)),
                nut_lag_s: Some(0.0025),
                nut_advanced: i != 3,
                ..Default::default()
            }
        })
        .collect();
    Analysis {
        clip: crate::report::tests::memory_clip(path.to_path_buf(), n, 240, 120),
        rig,
        time_base: tb,
        fps_source: FpsSource::Rig,
        timing: crate::report::tests::capture_rate_timing(),
        trace,
        signals: Default::default(),
        camera_motion: None,
        segmentation: Segmentation {
            blows,
            rate_per_min: Some(1200.0),
            rate_spread_per_min: Some(0.0),
            warnings: Vec::new(),
            ..Default::default()
        },
        blows: metrics,
        summary: Summary {
            blow_count: 5,
            blow_rate_per_min: Some(1200.0),
            drive_total: Some(Angle::from_deg(60.0)),
            nut_total: Some(Angle::from_deg(45.0)),
            stiffness: Some(k),
            peak_torque: Some(Torque::from_nm(150.0)),
            ..Default::default()
        },
        warnings: Vec::new(),
        bar: None,
        springback: None,
        model: None,
    }
}

fn check_png(path: &Path, size: (u32, u32)) {
    let img = image::open(path).unwrap();
    assert_eq!((img.width(), img.height()), size, "{}", path.display());
    // Not a blank page: some dark pixels (text, axes) and some coloured ones (data).
    let rgb = img.to_rgb8();
    let dark = rgb.pixels().filter(|p| p.0.iter().all(|&c| c < 80)).count();
    let coloured = rgb
        .pixels()
        .filter(|p| {
            let (mx, mn) = (*p.0.iter().max().unwrap(), *p.0.iter().min().unwrap());
            mx - mn > 80
        })
        .count();
    assert!(dark > 500, "{}: {dark} dark pixels", path.display());
    assert!(
        coloured > 500,
        "{}: {coloured} coloured pixels",
        path.display()
    );
}

#[test]
fn clip_plots_are_written_with_units_on_the_axes() {
    let dir = tempfile::tempdir().unwrap();
    let a = sample_analysis(Path::new("bench/air_tool.mkv"));
    let files = write_plots(&a, dir.path()).unwrap();
    let names: Vec<String> = files
        .iter()
        .map(|p| p.file_name().unwrap().to_string_lossy().into_owned())
        .collect();
    assert_eq!(
        names,
        [
            "angles.svg",
            "angles.png",
            "twist_torque.svg",
            "twist_torque.png",
            "nut_advance.svg",
            "nut_advance.png",
            "blows_aligned.svg",
            "blows_aligned.png"
        ]
    );
    let svg = |n: &str| std::fs::read_to_string(dir.path().join(n)).unwrap();
    let angles = svg("angles.svg");
    // 520 samples at 2000 fps is 0.26 s, so the time axis is in ms.
    assert!(angles.contains("time (ms, capture clock)"), "time axis");
    assert!(angles.contains("angle (°, tightening +)"));
    assert!(angles.contains("air_tool.mkv"));
    assert!(angles.contains("blow onset"));
    let tt = svg("twist_torque.svg");
    assert!(tt.contains("twist = drive − nut (°)"));
    assert!(tt.contains("torque (N·m, model)"));
    assert!(tt.contains("rating 136 N·m"));
    assert!(tt.contains("not a calibrated measurement"));
    let adv = svg("nut_advance.svg");
    assert!(adv.contains("nut advance (°)") && adv.contains("blow number"));
    // Five bars: four in the nut colour, and blow 4 (the nut did not advance) in grey
    // with a legend entry.
    assert_eq!(adv.matches("fill=\"#E66E00\"").count(), 4, "{adv}");
    assert_eq!(adv.matches("fill=\"#B9B9B9\"").count(), 1, "{adv}");
    assert!(adv.contains("nut did not advance"));
    // Blow numbers on the onset lines; the stalled blow's in red.
    assert!(
        angles.contains("fill=\"#5A5A5A\">\n5\n</text>")
            && angles.contains("fill=\"#C81E1E\">\n4\n</text>"),
        "onset numbers"
    );
    // Tick labels without a spurious ".0".
    assert!(!angles.contains(".0\n</text>"), "tick labels");
    let aligned = svg("blows_aligned.svg");
    assert!(aligned.contains("time since blow onset (ms)"));
    assert!(aligned.contains("torque (N·m, model)"));
    for n in [
        "angles.png",
        "twist_torque.png",
        "nut_advance.png",
        "blows_aligned.png",
    ] {
        check_png(&dir.path().join(n), CLIP_SIZE);
    }
}

#[test]
fn lost_samples_break_the_line() {
    let t = [0.0, 1.0, 2.0, 3.0, 4.0];
    let v = [Some(1.0), None, Some(2.0), Some(3.0), None];
    assert_eq!(
        runs(&t, &v),
        vec![vec![(0.0, 1.0)], vec![(2.0, 2.0), (3.0, 3.0)]]
    );
    assert_eq!(span([5.0, 5.0], false), (4.5, 5.5));
    assert_eq!(span(std::iter::empty(), false), (0.0, 1.0));
}

#[test]
fn empty_analysis_still_plots() {
    let dir = tempfile::tempdir().unwrap();
    let mut a = sample_analysis(Path::new("empty.mp4"));
    a.trace.frames.clear();
    a.trace.drive.clear();
    a.trace.nut.clear();
    a.blows.clear();
    a.segmentation.blows.clear();
    a.rig.bar = None;
    a.summary = Summary::default();
    let files = write_plots(&a, dir.path()).unwrap();
    assert_eq!(files.len(), 8);
    let tt = std::fs::read_to_string(dir.path().join("twist_torque.svg")).unwrap();
    assert!(tt.contains("no bar in the rig"));
    assert!(!tt.contains("N·m"));
    let img = image::open(dir.path().join("angles.png")).unwrap();
    assert_eq!((img.width(), img.height()), CLIP_SIZE);
}

#[test]
fn comparison_plot_shows_every_clip() {
    let dir = tempfile::tempdir().unwrap();
    let clips = vec![
        ComparisonClip {
            name: "air_tool".into(),
            peak_torque_nm: Some(131.0),
            last_advancing_torque_nm: Some(122.0),
            rating_nm: Some(136.0),
            nut_advance_deg: vec![Some(30.0), Some(12.0), Some(4.0), Some(1.0)],
            blow_rate_per_min: Some(1400.0),
            ..Default::default()
        },
        ComparisonClip {
            name: "fast_electric_tool".into(),
            peak_torque_nm: Some(160.0),
            last_advancing_torque_nm: Some(141.0),
            rating_nm: Some(136.0),
            nut_advance_deg: vec![Some(40.0), None, Some(8.0), Some(3.0), Some(2.0), Some(1.5)],
            blow_rate_per_min: Some(3100.0),
            holding_torque_nm: Some(120.0),
            group: Some("electric".into()),
        },
    ];
    let files = write_comparison(&clips, dir.path()).unwrap();
    assert_eq!(files.len(), 2);
    let svg = std::fs::read_to_string(&files[0]).unwrap();
    for s in [
        "torque (N·m, model)",
        "nut advance (°)",
        "blow number",
        "air_tool",
        "fast_electric_tool",
        "bar rating",
        "torque on the last advancing blow",
        "Peak and holding torque against blow rate",
        "peak torque, electric",
        "holding torque",
    ] {
        assert!(svg.contains(s), "missing {s}");
    }
    check_png(&files[1], COMPARISON_SIZE);
    // No clips at all still gives a readable page.
    let empty = tempfile::tempdir().unwrap();
    let files = write_comparison(&[], empty.path()).unwrap();
    assert!(
        std::fs::read_to_string(&files[0])
            .unwrap()
            .contains("no clip was analysed")
    );
}
