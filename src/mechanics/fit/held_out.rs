//! The blow model's prediction on held-out scenes: tools, joints and bars drawn from wide
//! ranges by seeds fixed before the fit was run on any of them (tests/held_out_predict_seeds.txt),
//! each with a softer bar, a stiffer bar and another blow rate. The truth is the renderer's
//! physics (tools/scenes/src/synth): a check of the method on our invented bench, not of the
//! world. The draw also varies what the fit holds fixed (the bar's damping, the blow's pulse
//! length, the tool's forward damping), so the model the fit assumes is never exactly the one
//! that made the clip.
//!
//! Part of the mechanics stage: it must never import report, `analyze`, `batch`, `find_marks`,
//! `calibrate` or the CLI.

use rand::rngs::ChaCha8Rng;
use rand::{RngExt, SeedableRng};

use super::tests::{PairErrors, errors, with_round};
use crate::synth::Scenario;

/// The committed held-out seeds, in order.
pub(crate) fn seeds() -> Vec<u64> {
    include_str!("../../../tests/held_out_predict_seeds.txt")
        .lines()
        .map(str::trim)
        .filter(|l| !l.is_empty() && !l.starts_with('#'))
        .map(|l| l.parse().expect("a seed per line"))
        .collect()
}

/// Seeds the CI run checks (the first of the list).
pub(crate) const CI_SEEDS: usize = 3;

/// Draws held-out scene `seed`: the filmed scene A and its three pairs (a softer bar, a
/// stiffer bar, another blow rate).
pub(crate) fn draw(seed: u64) -> (Scenario, Vec<(&'static str, Scenario)>) {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    rng.set_stream(91);
    let mut a = Scenario::preset("slow-tool").expect("preset");
    a.name = format!("predict-{seed}");
    a.seed = seed;
    let t = &mut a.tool;
    t.blow_rate_per_min = rng.random_range(900.0..3600.0);
    t.jitter = rng.random_range(0.0..0.03);
    t.blow_momentum_nms = rng.random_range(0.15..0.35);
    t.pulse_s = rng.random_range(1.0e-4..4.0e-4);
    t.drive_inertia_kgm2 = rng.random_range(1.0e-3..3.5e-3);
    t.forward_damping_nms_per_rad = rng.random_range(0.0..0.2);
    t.back_damping_nms_per_rad = rng.random_range(10.0..30.0);
    t.first_blow_s = rng.random_range(0.004..0.012);
    t.clip_blows = rng.random_range(5..=8);
    a.bar_damping_ratio = rng.random_range(0.01..0.05);
    let j = &mut a.joint;
    j.nut_inertia_kgm2 = a.tool.drive_inertia_kgm2 * rng.random_range(0.06..0.25);
    j.snug_torque_nm = rng.random_range(25.0..50.0);
    j.rate_nm_per_deg = rng.random_range(1.5..4.0);
    j.breakaway_ratio = rng.random_range(1.05..1.3);
    // A rate that gives 25 to 140 frames per blow.
    let per_blow = |fps: f64| fps * 60.0 / a.tool.blow_rate_per_min;
    let rates: Vec<f64> = [1000.0, 2000.0, 4000.0]
        .into_iter()
        .filter(|&f| (25.0..=140.0).contains(&per_blow(f)))
        .collect();
    a.camera.fps_hz = if rates.is_empty() {
        2000.0
    } else {
        rates[rng.random_range(0..rates.len())]
    };
    let d = 12.0 * rng.random_range(0.9..1.1);
    let a = with_round(a, d);
    let softer = with_round(a.clone(), d * rng.random_range(0.8..0.92));
    let stiffer = with_round(a.clone(), d * rng.random_range(1.08..1.2));
    let mut rate = a.clone();
    rate.tool.blow_rate_per_min *= if a.tool.blow_rate_per_min > 1800.0 {
        rng.random_range(0.6..0.8)
    } else {
        rng.random_range(1.25..1.6)
    };
    (
        a,
        vec![("softer", softer), ("stiffer", stiffer), ("rate", rate)],
    )
}

/// Every pair's errors on the held-out scenes `seeds`, each printed as it comes.
fn results(seeds: &[u64]) -> Vec<PairErrors> {
    let mut out = Vec::new();
    for &seed in seeds {
        let (a, set) = draw(seed);
        for e in errors(&a, seed ^ 0x5eed, set) {
            eprintln!("{seed} {}", e.line());
            out.push(e);
        }
    }
    out
}

/// The first [`CI_SEEDS`] scenes' results, fitted once for all the tests that read them.
fn ci_results() -> &'static [PairErrors] {
    static CI: std::sync::OnceLock<Vec<PairErrors>> = std::sync::OnceLock::new();
    CI.get_or_init(|| results(&seeds()[..CI_SEEDS]))
}

/// |holding error| per pair, |peak error| per blow, pairs, pairs whose intervals all hold.
fn measure(set: &[PairErrors]) -> (Vec<f64>, Vec<f64>, usize, usize) {
    let holding = set.iter().map(|e| e.holding.abs()).collect();
    let peaks = set
        .iter()
        .flat_map(|e| e.peaks.iter().map(|p| p.abs()))
        .collect();
    let covered = set.iter().filter(|e| e.covered).count();
    (holding, peaks, set.len(), covered)
}

fn median_worst(v: &[f64]) -> (f64, f64) {
    let mut s = v.to_vec();
    let m = crate::stats::median_in_place(&mut s).unwrap_or(f64::NAN);
    (m, s.iter().cloned().fold(0.0, f64::max))
}

/// Prints the whole held-out set's errors (a measurement; run with --ignored --nocapture).
#[test]
#[ignore = "prints figures; run with --ignored --nocapture"]
fn print_held_out_prediction_errors() {
    let (h, p, n, c) = measure(&results(&seeds()));
    let ((hm, hw), (pm, pw)) = (median_worst(&h), median_worst(&p));
    eprintln!(
        "held out: {n} pairs, intervals hold on {c}; holding |error| median {:.1} %, worst {:.1} %; \
         peak |error| median {:.1} %, worst {:.1} %",
        100.0 * hm,
        100.0 * hw,
        100.0 * pm,
        100.0 * pw
    );
}

/// A ratchet on the held-out set's first [`CI_SEEDS`] scenes, which CI runs: the worst
/// holding-torque and per-blow peak errors may not grow past what was measured on
/// 5 December 2026 (half a point of margin for rounding), nor may fewer intervals hold.
/// These are regression values, not targets (the 5 % target is not met on held-out scenes:
/// docs/mechanics.md, "Predictions on held-out scenes"); after an improvement, lower them to
/// the figures printed by
/// `cargo test --lib print_held_out_prediction_errors -- --ignored --nocapture`.
#[test]
fn held_out_prediction_errors_do_not_grow() {
    let (h, p, n, c) = measure(ci_results());
    let ((_, hw), (_, pw)) = (median_worst(&h), median_worst(&p));
    assert_eq!(n, 3 * CI_SEEDS);
    // Measured: worst holding 2.1 %, worst peak 19.8 % (the first blow of a softer bar),
    // intervals hold on 9 of 9 pairs (8 of 9 with the Monte Carlo's earlier generator: one
    // edge within the draws' own scatter of its truth, so the floor stays at 8).
    assert!(
        hw <= 0.026,
        "worst holding error {:.1} % (was 2.1 %)",
        100.0 * hw
    );
    assert!(
        pw <= 0.203,
        "worst peak error {:.1} % (was 19.8 %)",
        100.0 * pw
    );
    assert!(c >= 8, "intervals hold on {c} of {n} pairs (was 8)");
}

/// A prediction whose per-blow peaks are more than 10 % off says so: on the first
/// [`CI_SEEDS`] held-out scenes, every pair with a peak error above 10 % carries a `misfit`
/// sentence (its fit misses the filmed clip's own peaks), and at least one such pair exists.
#[test]
fn a_prediction_far_off_on_its_peaks_carries_a_misfit_sentence() {
    let mut far = 0;
    for e in ci_results() {
        let worst = e.peaks.iter().map(|p| p.abs()).fold(0.0, f64::max);
        if worst > 0.10 {
            far += 1;
            assert!(
                e.misfit_said,
                "{}: peaks {:.0} % off without a misfit sentence",
                e.name,
                100.0 * worst
            );
        }
    }
    assert!(far >= 1, "the CI scenes hold a pair more than 10 % off");
}
