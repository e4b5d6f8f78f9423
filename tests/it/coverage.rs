//! Interval coverage: do the 95 % intervals on each blow's peak torque contain the truth 95 %
//! of the time? A Monte Carlo over rendered takes of the invented bench with known truth
//! (`twistmark_scenes::synth`; synthetic clips, a check of the method, not of the world): each take
//! renders a preset with its own noise seed and blow phase, and the rig handed to the analysis
//! has its shear modulus and section sizes drawn from the uncertainty the intervals claim
//! (`SHEAR_MODULUS_REL_SIGMA` as a uniform ±2.5 %, `DIMENSION_SIGMA_MM` as a normal spread;
//! `src/mechanics/uncertainty.rs`), as a user's calipers and a handbook G would. The truth is
//! the model's continuous peak torque (`model_peak_torque_nm`), so the under-read of a sampled
//! peak is part of what the interval must cover.
//!
//! Targets: across at least 200 blows the intervals contain the truth 93–97 % of the time
//! (a binomial 95 % proportion over 200 blows has a standard error of 1.5 %), and the median
//! half-width is at most 6 % of the peak on these clean clips. The full run is ignored in CI
//! (it renders thousands of frames); regenerate the figures in docs/accuracy.md with
//!
//! ```text
//! cargo test --test it coverage:: -- --ignored --nocapture
//! ```
//!
//! CI runs a small version (two takes) that checks the pipeline and a loose bound.

use std::path::Path;

use rand::rngs::ChaCha8Rng;
use rand::{RngExt, SeedableRng};
use twistmark::analyze::{AnalyzeOptions, analyze_source};
use twistmark::decode::MemorySource;
use twistmark::mechanics::{DIMENSION_SIGMA_MM, SHEAR_MODULUS_REL_SIGMA, SectionSpec};
use twistmark_scenes::synth::{Scenario, render_clip, simulate};

/// One take's blows: (truth peak torque, interval low, interval high) for every matched blow.
fn take(preset: &str, seed: u64, blows: u32) -> Vec<(f64, f64, f64)> {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let mut sc = Scenario::preset(preset).unwrap();
    sc.seed = seed;
    sc.tool.clip_blows = blows;
    let fps = sc.camera.fps_hz;
    sc.tool.first_blow_s += rng.random::<f64>() / fps;
    let truth = simulate(&sc);
    let frames = render_clip(&sc, &truth);
    let mut rig = sc.rig();
    let bar = rig.bar.as_mut().unwrap();
    let g = bar.shear_modulus_gpa.unwrap_or(79.3);
    // Uniform on ±a has σ = a/√3.
    let a = SHEAR_MODULUS_REL_SIGMA * 3f64.sqrt();
    bar.shear_modulus_gpa = Some(g * (1.0 + a * (2.0 * rng.random::<f64>() - 1.0)));
    let mut normal = || {
        // Box–Muller.
        let (u1, u2): (f64, f64) = (rng.random::<f64>().max(1e-12), rng.random());
        (-2.0 * u1.ln()).sqrt() * (2.0 * std::f64::consts::PI * u2).cos()
    };
    for s in &mut bar.sections {
        match s {
            SectionSpec::Round { d_mm, .. } => *d_mm += DIMENSION_SIGMA_MM * normal(),
            SectionSpec::Tube { d_mm, bore_mm, .. } => {
                *d_mm += DIMENSION_SIGMA_MM * normal();
                *bore_mm += DIMENSION_SIGMA_MM * normal();
            }
            SectionSpec::Hex {
                across_flats_mm, ..
            } => *across_flats_mm += DIMENSION_SIGMA_MM * normal(),
            SectionSpec::Square { side_mm, .. } => *side_mm += DIMENSION_SIGMA_MM * normal(),
        }
    }
    let opts = AnalyzeOptions {
        fps_hz: Some(fps),
        ..AnalyzeOptions::default()
    };
    let a = analyze_source(
        Box::new(MemorySource::new(frames, None)),
        &rig,
        Path::new("rig.json"),
        &opts,
        &|_, _| {},
    )
    .unwrap();
    truth
        .blows
        .iter()
        .filter_map(|t| {
            let b = a.blows.iter().find(|b| b.frame.abs_diff(t.frame) <= 2)?;
            let (lo, hi) = b.peak_torque_ci95?;
            Some((t.model_peak_torque_nm, lo.nm(), hi.nm()))
        })
        .collect()
}

/// (blows, share covered, median half-width over the truth).
fn coverage(takes: &[(&str, u64)], blows: u32) -> (usize, f64, f64) {
    let mut all = Vec::new();
    for &(p, s) in takes {
        let got = take(p, s, blows);
        let cov = got.iter().filter(|(t, l, h)| l <= t && t <= h).count();
        let mut hw: Vec<f64> = got.iter().map(|(t, l, h)| 50.0 * (h - l) / t).collect();
        hw.sort_by(f64::total_cmp);
        println!(
            "{p} seed {s}: {cov}/{} covered, half-widths {:.2}–{:.2} % of the peak",
            got.len(),
            hw.first().copied().unwrap_or(f64::NAN),
            hw.last().copied().unwrap_or(f64::NAN)
        );
        all.extend(got);
    }
    let n = all.len();
    let covered = all.iter().filter(|(t, l, h)| l <= t && t <= h).count();
    let mut hw: Vec<f64> = all.iter().map(|(t, l, h)| 0.5 * (h - l) / t).collect();
    hw.sort_by(f64::total_cmp);
    let median = if n == 0 { f64::NAN } else { hw[n / 2] };
    (n, covered as f64 / n.max(1) as f64, median)
}

/// Small CI version: two takes of six blows. With 12 blows a 95 % interval misses more than
/// two with probability about 2 % (binomial), so fewer than 10 covered fails. The half-width
/// target is checked by the full run (docs/accuracy.md records whether it is met); here the
/// half-width must stay under 8 % so that a widening of the intervals is caught.
#[test]
fn intervals_cover_the_truth_on_two_takes() {
    let (n, share, hw) = coverage(&[("slow-tool", 7101), ("fast-tool", 7102)], 6);
    assert!(n >= 10, "only {n} blows matched");
    assert!(
        share * n as f64 >= n as f64 - 2.0 - 1e-9,
        "covered {share:.3} of {n}"
    );
    println!("median half-width {:.2} % of the peak", 100.0 * hw);
    assert!(
        hw <= 0.08,
        "median half-width {:.2} % of the peak",
        100.0 * hw
    );
}

/// The full Monte Carlo: 24 takes of ten blows (240 blows), half slow tool, half fast tool.
#[test]
#[ignore = "renders about 7,000 frames; run by hand to regenerate docs/accuracy.md"]
fn intervals_cover_the_truth_95_percent_of_the_time() {
    let takes: Vec<(&str, u64)> = (0..24u64)
        .map(|i| (if i % 2 == 0 { "slow-tool" } else { "fast-tool" }, 7200 + i))
        .collect();
    let (n, share, hw) = coverage(&takes, 10);
    println!(
        "coverage: {n} blows, {:.1} % covered, median half-width {:.2} % of the peak",
        100.0 * share,
        100.0 * hw
    );
    assert!(n >= 200, "only {n} blows matched");
    assert!(
        (0.93..=0.97).contains(&share),
        "covered {:.1} %",
        100.0 * share
    );
    assert!(
        hw <= 0.06,
        "median half-width {:.1} % of the peak",
        100.0 * hw
    );
}
