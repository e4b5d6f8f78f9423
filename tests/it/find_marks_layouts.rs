//! `find-marks` on random bench layouts it was not tuned on: frame shapes (portrait, 800×600),
//! the nut on either side, small parts off centre, all on a brushed-steel bench whose streaks
//! look like short stripes (tools/scenes/src/synth/layout.rs). These are rendered scenes of the project's
//! invented bench with exact known truth, not real footage.
//!
//! Done means: on every held-out layout the drive and nut pivots are drafted within
//! 3 px with the right roles, and the angle RMS with the drafted rig is within 1.5 × the true
//! rig's RMS + 0.02°.
//!
//! - `find_marks_holds_on_three_held_out_layouts_small` runs the first three held-out seeds
//!   scaled to at most 320 px, in CI (held-out layout 179604061 failed it until the drive
//!   and nut were chosen as the parts that move together at the blows).
//! - `held_out_layouts_table` (ignored) runs all of them at full size and prints the table in
//!   docs/accuracy.md (`HELD_OUT_LAYOUTS=second` runs the second list instead):
//!   `cargo test --release --test it find_marks_layouts:: -- --ignored --nocapture`
//! - With `TUNE_HYBRID=1`, each layout is also measured with the drafted rig given the true
//!   pivots and with the true rig given the drafted annuli, which tells a pivot error from an
//!   annulus difference, and the tracker's own warnings are printed.

use std::path::Path;

use twistmark::decode::Frame;
use twistmark::find_marks::{FindMarksOptions, find_marks_frames};
use twistmark::rig::{Mark, Rig};
use twistmark::track::Tracker;
use twistmark::units::TimeBase;
use twistmark_scenes::synth::layout::{
    HELDOUT_LAYOUT_SEEDS, HELDOUT_LAYOUT_SEEDS_SECOND, layout_scenario,
};
use twistmark_scenes::synth::{render_clip, simulate};

/// What one layout gave.
struct Outcome {
    seed: u64,
    shape: (u32, u32),
    /// Drive and nut pivot errors, px (infinite when find-marks failed).
    pivot_err_px: [f64; 2],
    /// True when both roles were right (each drafted pivot nearest its own true pivot).
    roles_right: bool,
    /// Angle RMS with the true rig and the drafted rig, per mark, degrees.
    rms_true_deg: [f64; 2],
    rms_drafted_deg: [f64; 2],
    /// Frames lost with the drafted rig.
    lost: usize,
    warnings: Vec<String>,
}

impl Outcome {
    fn passes(&self) -> bool {
        self.roles_right
            && self.pivot_err_px.iter().all(|e| *e <= 3.0)
            && self.lost == 0
            && (0..2).all(|k| self.rms_drafted_deg[k] <= 1.5 * self.rms_true_deg[k] + 0.02)
    }
}

fn pivot(m: &Mark) -> [f64; 2] {
    match m {
        Mark::Radial(r) => r.pivot,
        _ => [f64::NAN, f64::NAN],
    }
}

/// Angle RMS per mark against the truth, and frames lost.
fn rms(rig: &Rig, frames: &[Frame], truth: [&[f64]; 2], fps: f64) -> ([f64; 2], usize) {
    let (w, h) = (frames[0].width, frames[0].height);
    let Ok(mut t) = Tracker::new(rig, Path::new("rig.json"), w, h) else {
        return ([f64::INFINITY; 2], frames.len());
    };
    for f in frames {
        if let Err(e) = t.push(f) {
            println!("    tracking failed: {e}");
            return ([f64::INFINITY; 2], frames.len());
        }
    }
    let (tr, tw) = t.finish(TimeBase::from_fps(fps, "test").unwrap());
    if std::env::var_os("TUNE_HYBRID").is_some() {
        for w in &tw {
            println!("    track: {w}");
        }
    }
    let mut out = [0.0; 2];
    let mut lost = 0;
    for (k, series) in [&tr.drive, &tr.nut].into_iter().enumerate() {
        let (mut s2, mut n) = (0.0, 0usize);
        for (g, w) in series.iter().zip(truth[k]) {
            match g {
                Some(g) => {
                    s2 += (g.deg() - w).powi(2);
                    n += 1;
                }
                None => lost += 1,
            }
        }
        out[k] = (s2 / n.max(1) as f64).sqrt();
    }
    (out, lost)
}

fn run(seed: u64, max_side_px: u32) -> Outcome {
    let sc = layout_scenario(seed, max_side_px);
    let truth = simulate(&sc);
    let frames = render_clip(&sc, &truth);
    let fps = sc.camera.fps_hz;
    let true_rig = sc.rig();
    let tp = [pivot(&true_rig.marks.drive), pivot(&true_rig.marks.nut)];
    let series = [
        truth.trace.drive_deg.as_slice(),
        truth.trace.nut_deg.as_slice(),
    ];
    let (rms_true_deg, _) = rms(&true_rig, &frames, series, fps);
    let shape = (sc.scene.width, sc.scene.height);
    let opts = FindMarksOptions { fps_hz: Some(fps) };
    let found = match find_marks_frames(Path::new("layout"), &frames, &opts) {
        Ok(f) => f,
        Err(e) => {
            return Outcome {
                seed,
                shape,
                pivot_err_px: [f64::INFINITY; 2],
                roles_right: false,
                rms_true_deg,
                rms_drafted_deg: [f64::INFINITY; 2],
                lost: frames.len(),
                warnings: vec![e.to_string()],
            };
        }
    };
    let gp = [pivot(&found.rig.marks.drive), pivot(&found.rig.marks.nut)];
    if std::env::var_os("TUNE_VERBOSE").is_some() {
        println!("true  {:?}\ndraft {:?}", true_rig.marks, found.rig.marks);
    }
    let d = |a: [f64; 2], b: [f64; 2]| (a[0] - b[0]).hypot(a[1] - b[1]);
    let pivot_err_px = [d(gp[0], tp[0]), d(gp[1], tp[1])];
    let roles_right = d(gp[0], tp[0]) < d(gp[0], tp[1]) && d(gp[1], tp[1]) < d(gp[1], tp[0]);
    let (rms_drafted_deg, lost) = rms(&found.rig, &frames, series, fps);
    if std::env::var_os("TUNE_HYBRID").is_some() {
        // Drafted rig with the true pivots; true rig with the drafted annuli.
        let mut a = found.rig.clone();
        let mut b = true_rig.clone();
        for (ma, mt) in [
            (&mut a.marks.drive, &true_rig.marks.drive),
            (&mut a.marks.nut, &true_rig.marks.nut),
        ] {
            if let (Mark::Radial(x), Mark::Radial(t)) = (ma, mt) {
                x.pivot = t.pivot;
            }
        }
        for (mb, md) in [
            (&mut b.marks.drive, &found.rig.marks.drive),
            (&mut b.marks.nut, &found.rig.marks.nut),
        ] {
            if let (Mark::Radial(x), Mark::Radial(d)) = (mb, md) {
                x.radius = d.radius;
            }
        }
        let (ra, _) = rms(&a, &frames, series, fps);
        let (rb, _) = rms(&b, &frames, series, fps);
        let radii = |r: &Rig| match (&r.marks.drive, &r.marks.nut) {
            (Mark::Radial(d), Mark::Radial(n)) => (d.radius, n.radius, d.tighten, n.tighten),
            _ => unreachable!(),
        };
        println!(
            "  hybrid {seed}: drafted+true pivots {:.3}/{:.3}; true+drafted annuli {:.3}/{:.3}; radii true {:?} drafted {:?}",
            ra[0],
            ra[1],
            rb[0],
            rb[1],
            radii(&true_rig),
            radii(&found.rig)
        );
    }
    Outcome {
        seed,
        shape,
        pivot_err_px,
        roles_right,
        rms_true_deg,
        rms_drafted_deg,
        lost,
        warnings: found.warnings.iter().map(|w| w.to_string()).collect(),
    }
}

fn print(o: &Outcome) {
    println!(
        "| {} | {}×{} | {:.2} | {:.2} | {} | {:.3} / {:.3} | {:.3} / {:.3} | {} | {} |",
        o.seed,
        o.shape.0,
        o.shape.1,
        o.pivot_err_px[0],
        o.pivot_err_px[1],
        if o.roles_right { "yes" } else { "NO" },
        o.rms_true_deg[0],
        o.rms_drafted_deg[0],
        o.rms_true_deg[1],
        o.rms_drafted_deg[1],
        o.lost,
        if o.passes() { "pass" } else { "FAIL" },
    );
    for w in &o.warnings {
        println!("    {w}");
    }
}

const HEADER: &str = "| seed | frame | drive pivot off, px | nut pivot off, px | roles right | drive RMS true / drafted, ° | nut RMS true / drafted, ° | lost frames | done |\n|---|---|---|---|---|---|---|---|---|";

#[test]
fn find_marks_holds_on_three_held_out_layouts_small() {
    println!("{HEADER}");
    let outs: Vec<Outcome> = HELDOUT_LAYOUT_SEEDS[..3]
        .iter()
        .map(|&s| run(s, 320))
        .collect();
    for o in &outs {
        print(o);
    }
    for o in &outs {
        assert!(
            o.passes(),
            "held-out layout {} failed (table above)",
            o.seed
        );
    }
}

/// Tuning layouts 14 and 23 (both 240×320) carry 20–30 px nut stripes whose lines meet
/// 0.11 and 0.21 px from the true pivot, enough to make the nut's angle RMS about 2 and 4 times the true
/// rig's. The pivot refined by registering the nut between its rests
/// (`src/find_marks/register.rs`) lands within 0.03 px on both. These are rendered scenes with
/// exact truth.
#[test]
fn a_short_nut_stripe_s_pivot_is_refined_by_the_nut_s_turn() {
    println!("{HEADER}");
    for seed in [14, 23] {
        let o = run(seed, 320);
        print(&o);
        assert!(
            o.pivot_err_px[1] <= 0.06,
            "layout {seed}: nut pivot {:.2} px off",
            o.pivot_err_px[1]
        );
        assert!(o.passes(), "layout {seed} failed (table above)");
    }
}

fn median(mut v: Vec<f64>) -> f64 {
    v.sort_by(f64::total_cmp);
    v[v.len() / 2]
}

#[test]
#[ignore = "renders 16 layouts at full size; run in release (docs/accuracy.md)"]
fn held_out_layouts_table() {
    let list: &[u64] = match std::env::var("HELD_OUT_LAYOUTS").as_deref() {
        Ok("second") => &HELDOUT_LAYOUT_SEEDS_SECOND,
        Ok("first") | Err(_) => &HELDOUT_LAYOUT_SEEDS,
        Ok(other) => panic!("HELD_OUT_LAYOUTS={other}: use first or second"),
    };
    println!("{HEADER}");
    let outs: Vec<Outcome> = list
        .iter()
        .map(|&s| {
            let o = run(s, 800);
            print(&o);
            o
        })
        .collect();
    let pe: Vec<f64> = outs
        .iter()
        .map(|o| o.pivot_err_px[0].max(o.pivot_err_px[1]))
        .collect();
    let ratio: Vec<f64> = outs
        .iter()
        .map(|o| {
            (0..2)
                .map(|k| o.rms_drafted_deg[k] - (1.5 * o.rms_true_deg[k] + 0.02))
                .fold(f64::NEG_INFINITY, f64::max)
        })
        .collect();
    let passed = outs.iter().filter(|o| o.passes()).count();
    println!(
        "\n{passed} of {} layouts pass; worse pivot per layout: median {:.2} px, worst {:.2} px; drafted RMS minus its limit: median {:+.3}°, worst {:+.3}°; roles right on {}",
        outs.len(),
        median(pe.clone()),
        pe.iter().copied().fold(0.0, f64::max),
        median(ratio.clone()),
        ratio.iter().copied().fold(f64::NEG_INFINITY, f64::max),
        outs.iter().filter(|o| o.roles_right).count()
    );
    assert_eq!(passed, outs.len(), "not every held-out layout passes");
}

#[test]
#[ignore = "for tuning: layouts 1..=8 (never the held-out ones), or the seeds in TUNE_SEEDS"]
fn tuning_layouts_table() {
    let seeds: Vec<u64> = std::env::var("TUNE_SEEDS")
        .map(|s| s.split(',').filter_map(|x| x.trim().parse().ok()).collect())
        .unwrap_or_else(|_| (1..=8).collect());
    let max_side = std::env::var("TUNE_MAX_SIDE")
        .ok()
        .and_then(|s| s.parse().ok())
        .unwrap_or(800);
    println!("{HEADER}");
    for s in seeds {
        assert!(
            !HELDOUT_LAYOUT_SEEDS.contains(&s) && !HELDOUT_LAYOUT_SEEDS_SECOND.contains(&s),
            "seed {s} is held out"
        );
        print(&run(s, max_side));
    }
}
