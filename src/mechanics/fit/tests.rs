//! Checks of the blow model's fit and prediction against clips simulated by the renderer's
//! physics (tools/scenes/src/synth) with known truth: a check of the method on our invented bench, not of
//! the world. The fit sees only what a report holds (frame-sampled angles with seeded noise,
//! onset frames, the bar's stiffness); the truth is the renderer's own constants.
//!
//! Tests of part of the mechanics stage: it must never import report, `analyze`, `batch`,
//! `find_marks`, `calibrate` or the CLI.

use rand::SeedableRng;
use rand::rngs::ChaCha8Rng;

use super::*;
use crate::mechanics::subframe::{Start, motion_start};
use crate::mechanics::{PredictInput, SectionSpec, predict};
use crate::synth::{Scenario, Truth, simulate};

/// One-frame angle noise added to the exact truth, degrees (about what the tracker reaches on
/// the bundled fixtures).
const NOISE_DEG: f64 = 0.05;

fn obs_of(truth: &Truth, seed: u64) -> ClipObs {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let mut noisy = |v: f64| {
        use rand::RngExt;
        let u1: f64 = 1.0 - rng.random::<f64>();
        let u2: f64 = rng.random::<f64>();
        v + NOISE_DEG * (-2.0 * u1.ln()).sqrt() * (2.0 * std::f64::consts::PI * u2).cos()
    };
    let tr = &truth.trace;
    let drive_deg: Vec<Option<f64>> = tr.drive_deg.iter().map(|&v| Some(noisy(v))).collect();
    // The drive end's sub-frame start, as analyze measures it (blows/mod.rs): the line through
    // the first two moving samples carried back to the level of the sample before.
    let impact_t_s = truth
        .blows
        .iter()
        .map(|b| {
            let i = b.frame as usize;
            let base = drive_deg[i.checked_sub(1)?]?;
            let sd = NOISE_DEG;
            motion_start(&drive_deg, i, base, sd, Start::Impulsive).map(|(t, _)| t / truth.fps)
        })
        .collect();
    ClipObs {
        fps: truth.fps,
        t_s: tr.t_s.clone(),
        drive_deg,
        nut_deg: tr.nut_deg.iter().map(|&v| Some(noisy(v))).collect(),
        twist_offset_deg: truth.twist_offset_deg(),
        blow_t_s: truth.blows.iter().map(|b| b.t_s).collect(),
        impact_t_s,
        stiffness_nm_per_rad: truth.model.stiffness_nm_per_rad,
        noise_deg: NOISE_DEG * 2f64.sqrt(),
    }
}

/// The slow-tool preset with its round section's diameter set to `d_mm`.
pub(crate) fn with_round(mut sc: Scenario, d_mm: f64) -> Scenario {
    for s in &mut sc.bar.sections {
        if s.shape_name() == "round" {
            *s = SectionSpec::round(s.length_m() * 1e3, d_mm);
        }
    }
    sc
}

fn rel(a: f64, b: f64) -> f64 {
    a / b - 1.0
}

/// The fit reproduces the clip it was fitted to: RMS of twist and nut angle, per-blow peak
/// twist and nut advance, measured on the slow-tool preset (seed 1; tuning, not held out).
#[test]
fn fit_reproduces_its_own_clip() {
    let sc = Scenario::preset("slow-tool").unwrap();
    let f = fit(&obs_of(&simulate(&sc), 7)).unwrap();
    let q = &f.quality;
    eprintln!("{}", serde_json::to_string_pretty(q).unwrap());
    // Measured 0.26 deg RMS twist on peaks of about 12 deg, 0.11 deg RMS nut, peaks within 2 %;
    // bounds with margin.
    assert!(q.rms_twist_deg < 1.5, "{q:?}");
    assert!(q.rms_nut_deg < 1.5, "{q:?}");
    assert!(q.max_peak_twist_rel_error < 0.2, "{q:?}");
    assert!(q.rms_nut_advance_deg < 1.5, "{q:?}");
    // Every stated uncertainty is a finite, non-negative number.
    let v = serde_json::to_value(&f.parameters).unwrap();
    for (name, e) in v.as_object().unwrap() {
        let s = e["sigma"].as_f64().unwrap();
        assert!(s.is_finite() && s >= 0.0, "{name}: {e}");
    }
}

fn recovery() -> Vec<(&'static str, f64, f64, f64)> {
    let sc = Scenario::preset("slow-tool").unwrap();
    let f = fit(&obs_of(&simulate(&sc), 7)).unwrap();
    let p = &f.parameters;
    let (t, j) = (&sc.tool, &sc.joint);
    vec![
        (
            "drive inertia",
            p.drive_inertia_kg_m2.value,
            p.drive_inertia_kg_m2.sigma,
            t.drive_inertia_kgm2,
        ),
        (
            "blow momentum",
            p.blow_momentum_nms.value,
            p.blow_momentum_nms.sigma,
            t.blow_momentum_nms,
        ),
        (
            "back damping",
            p.back_damping_nms_per_rad.value,
            p.back_damping_nms_per_rad.sigma,
            t.back_damping_nms_per_rad,
        ),
        (
            "joint start",
            p.joint_start_torque_nm.value,
            p.joint_start_torque_nm.sigma,
            j.snug_torque_nm,
        ),
        (
            "joint rate",
            p.joint_rate_nm_per_rad.value,
            p.joint_rate_nm_per_rad.sigma,
            j.rate_nm_per_deg.to_degrees(),
        ),
        (
            "breakaway",
            p.breakaway_ratio.value,
            p.breakaway_ratio.sigma,
            j.breakaway_ratio,
        ),
        (
            "nut/drive inertia",
            p.nut_to_drive_inertia_ratio.value,
            p.nut_to_drive_inertia_ratio.sigma,
            j.nut_inertia_kgm2 / t.drive_inertia_kgm2,
        ),
    ]
}

/// Target: each fitted constant within 10 % of the renderer's. Not met: the fit settles in a
/// neighbouring optimum where inertia, momentum and the fixed bar damping trade off.
#[test]
#[ignore = "not met yet: slow-tool seed 1 gives drive inertia +52 %, blow momentum +16 %, back damping +2 %, joint start +3 %, joint rate -5 %, breakaway 0 %, nut/drive inertia +1.5 %"]
fn fit_recovers_the_renderers_constants() {
    let got = recovery();
    for (name, got, sigma, want) in &got {
        eprintln!(
            "{name}: {got:.5} ± {sigma:.5} vs {want:.5} ({:+.1} %)",
            100.0 * rel(*got, *want)
        );
    }
    for (name, got, _, want) in got {
        assert!(rel(got, want).abs() <= 0.10, "{name}");
    }
}

/// The three pairs of the prediction checks: a softer bar, a stiffer bar, another blow rate.
fn pairs() -> Vec<(&'static str, Scenario)> {
    let a = Scenario::preset("slow-tool").unwrap();
    vec![
        ("softer", with_round(a.clone(), 10.5)),
        ("stiffer", with_round(a.clone(), 14.0)),
        ("rate", {
            let mut s = a.clone();
            s.tool.blow_rate_per_min = 1500.0;
            s
        }),
    ]
}

/// The prediction of fit `f` for scenario `sc` (its bar's stiffness, blow rate and blow
/// count), with the renderer's truth for that scenario.
fn predict_scenario(f: &ModelFit, sc: &Scenario) -> (crate::mechanics::Prediction, Truth) {
    let truth = simulate(sc);
    let input = PredictInput {
        stiffness_nm_per_rad: truth.model.stiffness_nm_per_rad,
        stiffness_rel_sigma: 0.0,
        rating_nm: sc.bar.rating_nm,
        blow_rate_per_min: Some(sc.tool.blow_rate_per_min),
        blows: Some(truth.blows.len()),
    };
    (predict(f, &input).unwrap(), truth)
}

/// Fits bar A's clip and predicts each pair; returns (name, prediction, B's truth).
fn predictions() -> Vec<(&'static str, crate::mechanics::Prediction, Truth)> {
    let a = Scenario::preset("slow-tool").unwrap();
    let f = fit(&obs_of(&simulate(&a), 7)).unwrap();
    pairs()
        .into_iter()
        .map(|(name, sc)| {
            let (p, truth) = predict_scenario(&f, &sc);
            (name, p, truth)
        })
        .collect()
}

/// Each prediction's 95 % interval holds the other bar's (or rate's) simulated truth: the
/// holding torque and every blow's peak torque.
#[test]
fn prediction_intervals_hold_the_truth() {
    for (name, p, truth) in predictions() {
        let want = truth.model.joint_torque_end_nm;
        let [lo, hi] = p.holding_torque_ci95_nm;
        eprintln!(
            "{name}: holding {:.2} [{lo:.2}, {hi:.2}] vs {want:.2} ({:+.2} %)",
            p.holding_torque_nm,
            100.0 * rel(p.holding_torque_nm, want)
        );
        assert!(lo <= want && want <= hi, "{name}: holding");
        assert_eq!(p.blows.len(), truth.blows.len());
        for (b, t) in p.blows.iter().zip(&truth.blows) {
            let [lo, hi] = b.peak_torque_ci95_nm;
            let w = t.model_peak_torque_nm;
            eprintln!(
                "  blow {}: peak {:.2} [{lo:.2}, {hi:.2}] vs {w:.2} ({:+.2} %)",
                b.index,
                b.peak_torque_nm,
                100.0 * rel(b.peak_torque_nm, w)
            );
            assert!(lo <= w && w <= hi, "{name}: blow {}", b.index);
        }
        assert!(!p.extrapolation.is_empty(), "{name}: says it extrapolates");
    }
}

/// Asserts the target on one set of errors: holding torque and every peak within 5 % of the
/// truth, and every 95 % interval holding its truth.
fn assert_within_five_percent(set: Vec<PairErrors>) {
    for e in set {
        let name = e.name;
        assert!(e.covered, "{name}: an interval misses its truth");
        let h = e.holding;
        assert!(h.abs() <= 0.05, "{name}: holding {:+.1} %", 100.0 * h);
        for (b, e) in e.peaks.iter().enumerate() {
            assert!(
                e.abs() <= 0.05,
                "{name}: blow {} {:+.1} %",
                b + 1,
                100.0 * e
            );
        }
    }
}

/// Target on the pairs the fit was tuned on (slow-tool, seed 1, noise seed 7): holding torque
/// and every peak within 5 % of the renderer's truth. Measured: holding −2.0 % (softer),
/// −2.9 % (stiffer), −2.8 % (1500 blows/min); peaks +1.6 to −3.3 %.
#[test]
fn predictions_within_five_percent() {
    assert_within_five_percent(errors(&Scenario::preset("slow-tool").unwrap(), 7, pairs()));
}

/// The same target on the check set, fixed before tuning ([`check_scene`]).
#[test]
#[ignore = "not met yet: check softer bar holding -8.9 % (stiffer -2.9 %, rate -1.9 %; peaks -0.5 to -2.5 %, all inside their intervals)"]
fn check_predictions_within_five_percent() {
    assert_within_five_percent(errors(&check_scene(), 23, check_pairs()));
}

/// On the check set, every 95 % interval holds the truth (holding torque and each blow's peak).
#[test]
fn check_prediction_intervals_hold_the_truth() {
    for e in errors(&check_scene(), 23, check_pairs()) {
        assert!(e.covered, "{}", e.name);
    }
}

/// The check set, fixed before any tuning of the fit (2026-12-04): another tool, joint, seed
/// and set of pairs than [`pairs`] (which the fit was tuned on). Seed 21 is a tuning-side seed
/// (not in tests/held_out_seeds.txt); the renderer's physics gives the truth.
pub(crate) fn check_scene() -> Scenario {
    let mut a = Scenario::preset("slow-tool").unwrap();
    a.seed = 21;
    a.tool.jitter = 0.02;
    a.tool.drive_inertia_kgm2 = 1.6e-3;
    a.tool.blow_momentum_nms = 0.22;
    a.tool.back_damping_nms_per_rad = 18.0;
    a.joint.snug_torque_nm = 30.0;
    a.joint.rate_nm_per_deg = 2.5;
    a.joint.breakaway_ratio = 1.2;
    a
}

/// The check set's pairs: a softer bar, a stiffer bar and a slower blow rate.
fn check_pairs() -> Vec<(&'static str, Scenario)> {
    let a = check_scene();
    vec![
        ("check softer", with_round(a.clone(), 11.0)),
        ("check stiffer", with_round(a.clone(), 15.0)),
        ("check rate", {
            let mut s = a.clone();
            s.tool.blow_rate_per_min = 1000.0;
            s
        }),
    ]
}

/// How one prediction of a pair compares with the renderer's truth for it.
pub(crate) struct PairErrors {
    pub(crate) name: &'static str,
    /// Holding torque's relative error.
    pub(crate) holding: f64,
    /// Each blow's peak torque's relative error.
    pub(crate) peaks: Vec<f64>,
    /// Every 95 % interval (holding and each peak) holds its truth.
    pub(crate) covered: bool,
    /// The prediction carries a `misfit` sentence.
    pub(crate) misfit_said: bool,
}

impl PairErrors {
    /// One printed line: holding and peak errors in per cent, and whether the intervals hold.
    pub(crate) fn line(&self) -> String {
        let p: Vec<String> = self
            .peaks
            .iter()
            .map(|e| format!("{:+.1}", 100.0 * e))
            .collect();
        format!(
            "{}: holding {:+.1} %, peaks [{}] %, intervals hold: {}",
            self.name,
            100.0 * self.holding,
            p.join(", "),
            self.covered
        )
    }
}

/// Fits scene `a`'s clip (angle noise seeded by `noise_seed`) and compares each pair's
/// prediction with its truth.
pub(crate) fn errors(
    a: &Scenario,
    noise_seed: u64,
    pairs: Vec<(&'static str, Scenario)>,
) -> Vec<PairErrors> {
    let f = fit(&obs_of(&simulate(a), noise_seed)).unwrap();
    pairs
        .into_iter()
        .map(|(name, sc)| {
            let (p, truth) = predict_scenario(&f, &sc);
            let want = truth.model.joint_torque_end_nm;
            let [lo, hi] = p.holding_torque_ci95_nm;
            let mut covered = lo <= want && want <= hi;
            let peaks = p
                .blows
                .iter()
                .zip(&truth.blows)
                .map(|(b, t)| {
                    let [lo, hi] = b.peak_torque_ci95_nm;
                    let w = t.model_peak_torque_nm;
                    covered &= lo <= w && w <= hi;
                    rel(b.peak_torque_nm, w)
                })
                .collect();
            PairErrors {
                name,
                holding: rel(p.holding_torque_nm, want),
                peaks,
                covered,
                misfit_said: !p.misfit.is_empty(),
            }
        })
        .collect()
}

/// Prints the tuning pairs' and the check pairs' errors (a measurement, not a check).
#[test]
#[ignore = "prints figures; run with --ignored --nocapture"]
fn print_prediction_errors() {
    let tuning = errors(&Scenario::preset("slow-tool").unwrap(), 7, pairs());
    let check = errors(&check_scene(), 23, check_pairs());
    for e in tuning.into_iter().chain(check) {
        eprintln!("{}", e.line());
    }
}

/// Prints the fit's cost at its optimum and at the renderer's own constants (with the fixed
/// assumptions in place of the renderer's values), tuning and check clip: a diagnostic.
#[test]
#[ignore = "prints figures; run with --ignored --nocapture"]
fn print_cost_at_truth() {
    for (sc, seed) in [
        (Scenario::preset("slow-tool").unwrap(), 7),
        (check_scene(), 23),
    ] {
        let obs = obs_of(&simulate(&sc), seed);
        let prep = Prepared::new(&obs).unwrap();
        let f = fit(&obs).unwrap();
        let (t, j) = (&sc.tool, &sc.joint);
        let mut q = vec![
            t.drive_inertia_kgm2.ln(),
            t.blow_momentum_nms.ln(),
            t.forward_damping_nms_per_rad.ln(),
            t.back_damping_nms_per_rad.ln(),
            j.snug_torque_nm.ln(),
            j.rate_nm_per_deg.to_degrees().ln(),
            (j.breakaway_ratio - 1.0).ln(),
            -30.0,
            (sc.joint.nut_inertia_kgm2 / t.drive_inertia_kgm2).ln(),
        ];
        let c = |q: &[f64]| prep.residuals(q).iter().map(|r| r * r).sum::<f64>();
        eprintln!(
            "cost at truth {:.1}, at fit {:.1}, n {}",
            c(&q),
            c(&f.internal),
            prep.residuals(&q).len()
        );
        eprintln!("fit q {:?}", physical(&f.internal));
        q[7] = f.internal[7];
        eprintln!("cost at truth with fitted lead {:.1}", c(&q));
    }
}

/// No trial point can make one simulation unbounded: constants whose vibration would need
/// more than `FIT_MAX_SIM_STEPS` steps (here a drive inertia a million times too small) are
/// rejected as a failed step (infinite residuals), and the guess itself is simulated.
#[test]
fn a_trial_point_needing_too_many_steps_is_rejected() {
    let sc = Scenario::preset("slow-tool").unwrap();
    let prep = Prepared::new(&obs_of(&simulate(&sc), 7)).unwrap();
    let mut q = prep.guess();
    assert!(prep.simulate(&q).is_some());
    q[0] -= (1e6_f64).ln();
    assert!(prep.simulate(&q).is_none());
    assert!(prep.residuals(&q).iter().all(|r| r.is_infinite()));
}

/// The fit's total work is bounded: once its simulations have taken `FIT_MAX_TOTAL_STEPS`
/// steps, no further simulation runs and the minimiser stops, saying why.
#[test]
fn the_fit_stops_when_its_step_budget_is_spent() {
    let sc = Scenario::preset("slow-tool").unwrap();
    let prep = Prepared::new(&obs_of(&simulate(&sc), 7)).unwrap();
    let q = prep.guess();
    assert!(prep.residuals(&q).iter().all(|r| r.is_finite()));
    prep.steps_used.set(FIT_MAX_TOTAL_STEPS);
    assert!(prep.residuals(&q).iter().all(|r| r.is_infinite()));
    let got = minimise(&prep, &q, q[BREAKAWAY]);
    assert_eq!(got.2, 1, "one evaluation, refused");
    assert!(!got.0.is_finite());
}

/// A prediction never states confidently whether the nut turns on a blow and gets it wrong:
/// wherever the central prediction and the renderer's truth disagree on whether the nut
/// turned (more than 0.1°), the blow is listed as undecided. Every pair, tuning and check.
#[test]
fn a_blow_whose_nut_turn_is_mispredicted_is_called_undecided() {
    let sets = [
        (Scenario::preset("slow-tool").unwrap(), 7, pairs()),
        (check_scene(), 23, check_pairs()),
    ];
    let mut disagreements = 0;
    for (a, seed, pairs) in sets {
        let f = fit(&obs_of(&simulate(&a), seed)).unwrap();
        for (name, sc) in pairs {
            let (p, truth) = predict_scenario(&f, &sc);
            for (b, t) in p.blows.iter().zip(&truth.blows) {
                let (got, want) = (b.nut_advance_deg > 0.1, t.nut_advance_deg > 0.1);
                if got != want {
                    disagreements += 1;
                    let said = format!("blow {}:", b.index);
                    assert!(
                        p.undecided.iter().any(|u| u.starts_with(&said)),
                        "{name}: blow {} predicted turning {got}, truth {want}, share {:.2}; undecided {:?}",
                        b.index,
                        b.nut_turns_in_draws_ratio,
                        p.undecided
                    );
                }
            }
        }
    }
    // The check softer bar's blow 5 is such a blow (truth 116.38 N·m breaks the nut loose,
    // the prediction's 116.61 N·m does not; measured 4 December 2026).
    assert!(disagreements >= 1, "the check set holds a knife-edge blow");
}
