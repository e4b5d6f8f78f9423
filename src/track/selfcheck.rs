//! Self-checks on a finished trace: frames whose angles break the physics of the rig are made
//! null with a typed warning, and a clip whose marks were lost in most frames is refused.
//!
//! The checks (all on the relative angles, tightening positive):
//! - **A nut that turns loose.** A seated nut driven by a tightening tool does not turn back:
//!   a nut angle more than [`NUT_BACK_DEG`] below the highest it has reached (a median of
//!   three, so one noisy frame cannot raise that mark) is a measurement of something else.
//! - **A drive end that runs back beyond ring-back, or a nut ahead of the drive.** A torsion
//!   bar released from a twist θ swings back at most to −θ (energy conservation: an undamped
//!   spring released from rest at θ oscillates within ±θ; damping only narrows it), so the
//!   twist, drive − nut, never falls below −(the highest twist seen so far) − [`TWIST_BACK_DEG`].
//!   A lower twist is an angle jump no blow explains.
//!
//! Both model a tightening run, so they apply only when one of the marks spends clearly more
//! frames ahead of where it started than behind it ([`tightening_run`]). A swing back and
//! forth, a loosening run or a rig whose tightening direction is set the wrong way is left to
//! the direction check that follows segmentation (`sanity`), which names the cause; so are
//! two advancing marks where the "nut" leads (the rig's roles swapped).
//!
//! The margins are measurement tolerance (a few times the worst per-frame noise the
//! accuracy targets allow, 0.2°), not physics; they were set without looking at held-out
//! scenes.
//!
//! Part of the track stage: it must never import segment, mechanics, report, `analyze`,
//! `batch`, `find_marks`, `calibrate` or the CLI.

use super::Trace;
use crate::error::{Error, Result};
use crate::units::Angle;
use crate::warning::Warning;

/// How far (degrees) a nut may read below its highest angle before the frame is refused.
pub(crate) const NUT_BACK_DEG: f64 = 2.0;
/// How far (degrees) the twist may fall below minus its highest value so far.
pub(crate) const TWIST_BACK_DEG: f64 = 2.0;
/// A mark lost in more than this share of the frames cannot be measured: the clip is refused.
pub(crate) const MAX_LOST_SHARE: f64 = 0.5;

/// Makes null the frames of `drive` and `nut` that break the rig's physics; one warning per
/// run of such frames and check.
pub(crate) fn physics(
    drive: &mut [Option<Angle>],
    nut: &mut [Option<Angle>],
    frames: &[u64],
) -> Vec<Warning> {
    let n = drive.len().min(nut.len()).min(frames.len());
    let (drive_on, nut_on) = (tightening_run(&drive[..n]), tightening_run(&nut[..n]));
    if !drive_on && !nut_on {
        return Vec::new();
    }
    // Both ends advance but the "nut" leads: the marks' roles are swapped in the rig, which
    // the direction check after segmentation names; the angles themselves are sound.
    let lead: Vec<Option<Angle>> = drive[..n]
        .iter()
        .zip(&nut[..n])
        .map(|(d, u)| Some(Angle::from_deg(u.as_ref()?.deg() - d.as_ref()?.deg())))
        .collect();
    if drive_on && nut_on && tightening_run(&lead) {
        return Vec::new();
    }
    let mut bad_nut = vec![false; n];
    let mut bad_twist = vec![false; n];
    // Highest nut angle so far, as the median of three consecutive measured values.
    let mut nut_top = f64::NEG_INFINITY;
    let mut recent: Vec<f64> = Vec::with_capacity(3);
    for i in 0..n {
        let Some(a) = nut[i].map(Angle::deg) else {
            continue;
        };
        if a < nut_top - NUT_BACK_DEG {
            bad_nut[i] = true;
            continue;
        }
        recent.push(a);
        if recent.len() > 3 {
            recent.remove(0);
        }
        if recent.len() == 3 {
            nut_top = nut_top.max(crate::stats::median3([recent[0], recent[1], recent[2]]));
        }
    }
    let mut twist_top = 0.0f64;
    for i in 0..n {
        let (Some(d), Some(u)) = (drive[i], nut[i]) else {
            continue;
        };
        if bad_nut[i] {
            continue;
        }
        let tw = d.deg() - u.deg();
        if tw < -twist_top - TWIST_BACK_DEG {
            bad_twist[i] = true;
            continue;
        }
        // The plain maximum: a noisy high reading only widens the allowance (the safe side),
        // and a blow's peak may last a single frame.
        twist_top = twist_top.max(tw);
    }
    let mut warnings = Vec::new();
    for (bad, check) in [
        (
            &bad_nut,
            "the nut turned back (loosened), which a nut under a tightening tool does not",
        ),
        (
            &bad_twist,
            "the twist fell below the bar's ring-back (the drive end ran back past the nut, or the nut jumped ahead of the drive), an angle jump no blow explains",
        ),
    ] {
        let mut i = 0;
        while i < n {
            if !bad[i] {
                i += 1;
                continue;
            }
            let start = i;
            while i < n && bad[i] {
                i += 1;
            }
            warnings.push(Warning::SelfCheck {
                first_frame: frames[start],
                last_frame: frames[i - 1],
                check: check.into(),
            });
        }
    }
    for i in 0..n {
        if bad_nut[i] || bad_twist[i] {
            drive[i] = None;
            nut[i] = None;
        }
    }
    warnings
}

/// True when the measured angles of one mark spend at least 5 % of the frames more than
/// [`NUT_BACK_DEG`] ahead of the start (tightening) and at least four times as many frames there as
/// that far behind it: the signature of a tightening run, which a swing (about as long on
/// each side) or a loosening run (behind) does not have.
fn tightening_run(v: &[Option<Angle>]) -> bool {
    let (mut ahead, mut behind, mut n) = (0usize, 0usize, 0usize);
    for a in v.iter().flatten() {
        n += 1;
        if a.deg() > NUT_BACK_DEG {
            ahead += 1;
        } else if a.deg() < -NUT_BACK_DEG {
            behind += 1;
        }
    }
    n > 0 && ahead as f64 >= 0.05 * n as f64 && ahead >= 4 * behind
}

/// Refuses a clip whose drive or nut mark was lost in more than half (`MAX_LOST_SHARE`) of its
/// frames: what is left is too little to be trusted, so no torque is written.
///
/// `warnings` are the track stage's: a mark whose colour was found behind its own part's
/// texture (`Warning::ColourLagsTexture`) is refused with that reason.
///
/// # Errors
/// [`Error::Mark`] naming the mark and the share lost.
pub fn check_measured(trace: &Trace, warnings: &[Warning]) -> Result<()> {
    for (mark, v) in [("drive", &trace.drive), ("nut", &trace.nut)] {
        let share = lost_share(v);
        if share > MAX_LOST_SHARE {
            let lag = warnings
                .iter()
                .find(|w| matches!(w, Warning::ColourLagsTexture { mark: m, .. } if m == mark));
            let reason = match lag {
                Some(w) => format!(
                    "not measured in {:.0} % of the frames, so no torque is written: {w}",
                    100.0 * share
                ),
                None => format!(
                    "lost in {:.0} % of the frames (the stripe faded into the metal, or its angles broke the rig's physics), so its angles and any torque from them cannot be trusted and none is written; check the lighting, focus and the paint's contrast against the metal",
                    100.0 * share
                ),
            };
            return Err(Error::Mark {
                mark: mark.into(),
                reason,
            });
        }
    }
    Ok(())
}

/// The share of frames where `v` is null (0 for an empty series).
pub fn lost_share(v: &[Option<Angle>]) -> f64 {
    if v.is_empty() {
        return 0.0;
    }
    v.iter().filter(|a| a.is_none()).count() as f64 / v.len() as f64
}

/// A mark's confidence over the clip, 0..=1: the mean of its per-frame confidences, with 0 for
/// every lost frame (so it falls with both the share lost and the doubt in what was measured).
pub fn clip_confidence(angles: &[Option<Angle>], confidence: &[f32]) -> f64 {
    if angles.is_empty() {
        return 0.0;
    }
    angles
        .iter()
        .zip(confidence)
        .map(|(a, &c)| if a.is_some() { f64::from(c) } else { 0.0 })
        .sum::<f64>()
        / angles.len() as f64
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    fn deg(v: &[f64]) -> Vec<Option<Angle>> {
        v.iter().map(|&x| Some(Angle::from_deg(x))).collect()
    }

    #[test]
    fn a_nut_that_turns_back_is_nulled_with_a_warning() {
        let mut d = deg(&[0.0, 5.0, 10.0, 12.0, 12.0, 12.0, 12.0, 12.0]);
        let mut u = deg(&[0.0, 0.0, 4.0, 8.0, 8.0, 8.0, 3.0, 8.0]);
        let frames: Vec<u64> = (0..8).collect();
        let w = physics(&mut d, &mut u, &frames);
        assert_eq!(u[6], None);
        assert_eq!(d[6], None);
        assert!(u[7].is_some() && u[5].is_some());
        assert_eq!(w.len(), 1, "{w:?}");
        assert!(matches!(
            w[0],
            Warning::SelfCheck {
                first_frame: 6,
                last_frame: 6,
                ..
            }
        ));
    }

    #[test]
    fn ring_back_within_the_twist_is_kept_and_beyond_it_is_nulled() {
        // Twist rises to 6° and holds, rings back to −5° (kept: within −6° − margin), then a frame
        // reads −15° (no blow explains it).
        let mut d = deg(&[
            0.0, 6.0, 6.0, 6.0, 6.0, 6.0, 6.0, 6.0, 6.0, 6.0, -5.0, 0.0, -15.0, 0.0,
        ]);
        let mut u = deg(&[0.0; 14]);
        let frames: Vec<u64> = (100..114).collect();
        let w = physics(&mut d, &mut u, &frames);
        assert!(d[10].is_some());
        assert_eq!(d[12], None);
        assert_eq!(w.len(), 1, "{w:?}");
    }

    #[test]
    fn a_swing_or_a_loosening_run_is_not_checked_as_a_tightening_one() {
        let frames: Vec<u64> = (0..8).collect();
        // A swing across the start: as many frames behind as ahead.
        let swing = [0.0, 20.0, 40.0, 20.0, 0.0, -20.0, -40.0, -20.0];
        let (mut d, mut u) = (deg(&swing), deg(&swing));
        assert!(physics(&mut d, &mut u, &frames).is_empty());
        assert!(u.iter().all(Option::is_some));
        // A loosening run (the nut turns back all the way) is left to the direction check.
        let loosen = [0.0, -5.0, -10.0, -15.0, -20.0, -25.0, -30.0, -35.0];
        let (mut d, mut u) = (deg(&loosen), deg(&loosen));
        assert!(physics(&mut d, &mut u, &frames).is_empty());
        assert!(d.iter().chain(&u).all(Option::is_some));
        // Roles swapped: both advance, the "nut" leads and the "drive" (the real nut) lags.
        let lead = [0.0, 8.0, 6.0, 10.0, 12.0, 11.0, 14.0, 16.0];
        let lag = [0.0, 0.0, 4.0, 4.0, 8.0, 8.0, 8.0, 12.0];
        let (mut d, mut u) = (deg(&lag), deg(&lead));
        assert!(physics(&mut d, &mut u, &frames).is_empty());
    }

    #[test]
    fn a_clip_lost_in_most_frames_is_refused() {
        let tr = Trace {
            time_base: crate::units::TimeBase::from_fps(1000.0, "t").unwrap(),
            times_s: Vec::new(),
            synthetic: Vec::new(),
            frames: (0..4).collect(),
            drive: deg(&[0.0, 1.0, 2.0, 3.0]),
            nut: vec![Some(Angle::from_deg(0.0)), None, None, None],
            drive_confidence: vec![1.0; 4],
            nut_confidence: vec![1.0, 0.0, 0.0, 0.0],
            drive_zero_screen: None,
            nut_zero_screen: None,
        };
        match check_measured(&tr, &[]) {
            Err(Error::Mark { mark, reason }) => {
                assert_eq!(mark, "nut");
                assert!(reason.contains("75 %"), "{reason}");
            }
            other => panic!("{other:?}"),
        }
        assert!((clip_confidence(&tr.nut, &tr.nut_confidence) - 0.25).abs() < 1e-12);
    }

    /// Tuning aid (seeds 1..=16 of the randomiser, none of them held out): per scene, in
    /// colour and with the chroma dropped (monochrome), each mark's first-frame significance,
    /// the lowest later ratio to it, and the RMS error against the renderer's truth.
    #[test]
    #[ignore = "tuning aid: prints, asserts nothing"]
    fn print_significance_on_tuning_seeds() {
        use crate::synth::random::random_scene;
        use crate::synth::{render_frame, simulate};
        let seeds: Vec<u64> = std::env::var("TUNE_SEEDS")
            .ok()
            .map(|v| v.split(',').filter_map(|s| s.trim().parse().ok()).collect())
            .unwrap_or_else(|| (1..=16).collect());
        for seed in seeds {
            let mut r = random_scene(seed);
            r.scenario.tool.clip_blows = 2;
            let sc = &r.scenario;
            let truth = simulate(sc);
            for mono in [false, true] {
                let rig = sc.rig();
                let mut t = crate::track::Tracker::new(
                    &rig,
                    std::path::Path::new("r"),
                    sc.scene.width,
                    sc.scene.height,
                )
                .unwrap();
                for m in [Some(&mut t.drive), Some(&mut t.nut), t.fixed.as_mut()]
                    .into_iter()
                    .flatten()
                {
                    if let crate::track::Reader::Radial(r) = &mut m.reader {
                        r.set_init_min_sig(0.0);
                    }
                }
                let mut sig = [(f64::INFINITY, 0.0f64); 2];
                let mut err = None;
                for i in 0..truth.frames {
                    let mut f = render_frame(sc, &truth, i);
                    if mono {
                        f.chroma = None;
                    }
                    if let Err(e) = t.push(&f) {
                        err = Some(e.to_string());
                        break;
                    }
                    for (k, m) in [&t.drive, &t.nut].into_iter().enumerate() {
                        let crate::track::Reader::Radial(r) = &m.reader else {
                            continue;
                        };
                        let (last, rf) = r.significance();
                        sig[k].1 = rf;
                        if i > 0 && m.angle.last().copied().flatten().is_some() {
                            sig[k].0 = sig[k].0.min(last / rf);
                        }
                    }
                }
                if let Some(e) = err {
                    println!("seed {seed} mono {mono} tags {:?}: REFUSED {e}", r.tags);
                    continue;
                }
                let (tr, w) = t.finish(crate::units::TimeBase::from_fps(1000.0, "t").unwrap());
                let rms = |v: &[Option<Angle>], truth: &[f64]| {
                    let e: Vec<f64> = v
                        .iter()
                        .zip(truth)
                        .filter_map(|(a, t)| Some(a.as_ref()?.deg() - t))
                        .collect();
                    (e.iter().map(|x| x * x).sum::<f64>() / e.len().max(1) as f64).sqrt()
                };
                println!(
                    "seed {seed} mono {mono} tags {:?}: drive sig {:.1} min ratio {:.2} rms {:.3} lost {:.2}; nut sig {:.1} min ratio {:.2} rms {:.3} lost {:.2}; selfcheck warnings {}",
                    r.tags,
                    sig[0].1,
                    sig[0].0,
                    rms(&tr.drive, &truth.trace.drive_deg),
                    lost_share(&tr.drive),
                    sig[1].1,
                    sig[1].0,
                    rms(&tr.nut, &truth.trace.nut_deg),
                    lost_share(&tr.nut),
                    w.iter()
                        .filter(|w| matches!(w, Warning::SelfCheck { .. }))
                        .count()
                );
            }
        }
    }

    proptest! {
        /// A physically possible trace (nut never back, twist never below minus its highest
        /// value) keeps every frame, whatever its shape.
        #[test]
        fn physical_traces_keep_every_frame(
            steps in prop::collection::vec((0.0f64..3.0, 0.0f64..1.0), 1..80),
        ) {
            let (mut nut, mut drive) = (Vec::new(), Vec::new());
            let (mut u, mut top) = (0.0, 0.0f64);
            for (k, &(adv, ring)) in steps.iter().enumerate() {
                u += if k % 4 == 0 { adv } else { 0.0 };
                let tw = if k % 4 == 1 { adv } else { -ring * top };
                top = top.max(tw);
                nut.push(Some(Angle::from_deg(u)));
                drive.push(Some(Angle::from_deg(u + tw)));
            }
            let frames: Vec<u64> = (0..steps.len() as u64).collect();
            let w = physics(&mut drive, &mut nut, &frames);
            prop_assert!(w.is_empty(), "{:?}", w);
            prop_assert!(drive.iter().chain(&nut).all(Option::is_some));
        }

        /// Whatever the input, the output nulls only, never changes a value, and nulls both
        /// marks together.
        #[test]
        fn physics_only_nulls(
            v in prop::collection::vec((-20.0f64..20.0, -20.0f64..20.0), 0..60),
        ) {
            let d0: Vec<_> = v.iter().map(|p| Some(Angle::from_deg(p.0))).collect();
            let u0: Vec<_> = v.iter().map(|p| Some(Angle::from_deg(p.1))).collect();
            let (mut d, mut u) = (d0.clone(), u0.clone());
            let frames: Vec<u64> = (0..v.len() as u64).collect();
            let _ = physics(&mut d, &mut u, &frames);
            for i in 0..v.len() {
                prop_assert_eq!(d[i].is_none(), u[i].is_none());
                if d[i].is_some() {
                    prop_assert_eq!(d[i], d0[i]);
                    prop_assert_eq!(u[i], u0[i]);
                }
            }
        }
    }
}
