//! The exact truth of a simulated clip: the model integrated at every frame and blur
//! instant, and the per-frame angles and per-blow quantities derived with the definitions of
//! the `report.json` section of the interface.

use rand::SeedableRng;
use rand::rngs::ChaCha8Rng;
use serde::{Deserialize, Serialize};

use super::scene::Pose;
use super::{Scenario, TRUTH_VERSION, gauss, is_zero};
use crate::mechanics::model;

/// Per-frame angles, as in `report.json`'s `trace`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct TraceTruth {
    /// Frame time, s (frame index / fps).
    pub t_s: Vec<f64>,
    /// Drive-end angle, degrees, relative to frame 0, tightening positive.
    pub drive_deg: Vec<f64>,
    /// Nut-end angle, degrees, relative to frame 0, tightening positive.
    pub nut_deg: Vec<f64>,
    /// drive − nut, degrees.
    pub twist_deg: Vec<f64>,
}

/// One blow, as in `report.json`'s `blows`, plus the model's continuous-time values.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct BlowTruth {
    /// 1-based blow number.
    pub index: usize,
    /// First frame of the drive end's advance: the first frame instant after the blow starts.
    pub frame: u64,
    /// `frame / fps`, s.
    pub t_s: f64,
    /// Drive angle change from the frame before `frame` to the frame before the next blow's
    /// `frame` (or the last frame), degrees.
    pub drive_advance_deg: f64,
    /// Nut angle change over the same frames, degrees.
    pub nut_advance_deg: f64,
    /// Largest frame twist from `frame` to the frame before the next blow, degrees.
    pub peak_twist_deg: f64,
    /// Bar stiffness × `peak_twist_deg`, N·m.
    pub peak_torque_nm: f64,
    /// Twist at the frame before the next blow (or the last frame), degrees.
    pub residual_twist_deg: f64,
    /// (Nut onset frame − `frame`) / fps in ms, where the nut onset frame is the first frame
    /// instant after the nut breaks away in this blow; null when the nut did not move.
    pub nut_lag_ms: Option<f64>,
    /// Model: time the blow's torque pulse starts, s.
    pub impact_t_s: f64,
    /// Model: how far into a frame interval `frame` lies after the impact, 0..1 (near 0 the
    /// onset frame shows almost no motion yet; allow one frame either way when matching).
    pub onset_margin_frames: f64,
    /// Model: largest continuous-time spring torque k·twist over the blow, N·m.
    pub model_peak_torque_nm: f64,
    /// Model: time the nut broke away in this blow, s (null when it did not).
    pub model_nut_breakaway_t_s: Option<f64>,
}

/// Clip totals, as in `report.json`'s `summary`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SummaryTruth {
    /// Number of blows in the clip.
    pub blow_count: usize,
    /// 60 / median interval between blow starts, blows per minute (null with one blow).
    pub blow_rate_per_min: Option<f64>,
    /// Drive angle at the last frame, degrees.
    pub drive_total_deg: f64,
    /// Nut angle at the last frame, degrees.
    pub nut_total_deg: f64,
    /// Bar stiffness, N·m/deg.
    pub bar_stiffness_nm_per_deg: f64,
    /// Highest `peak_torque_nm` over the blows, N·m (null without blows).
    pub peak_torque_nm: Option<f64>,
}

/// Model facts that are not in a report but help read one.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ModelTruth {
    /// Bar stiffness, N·m/rad.
    pub stiffness_nm_per_rad: f64,
    /// The bar's rated torque, N·m (null when the bar has none).
    pub bar_rating_nm: Option<f64>,
    /// Kinetic joint torque at the last frame, N·m.
    pub joint_torque_end_nm: f64,
    /// Screen angle of the drive stripe at frame 0, degrees from +x towards +y (for an oblique
    /// disc, in the disc plane: after stretching the screen by 1/axis_ratio across the major
    /// axis about the pivot).
    pub drive_screen_deg_at_frame0: f64,
    /// Screen angle of the nut stripe at frame 0, degrees.
    pub nut_screen_deg_at_frame0: f64,
    /// Half period of the drive end against a held nut, π·√(I_d/k), s (free torsional vibration of a disc on a shaft).
    pub drive_half_period_s: f64,
    /// Exposure time, s.
    pub exposure_s: f64,
    /// Drive-end angle at frame 0 measured from the bench at rest, degrees (0 when filming
    /// starts at rest; then not written).
    #[serde(default, skip_serializing_if = "is_zero")]
    pub drive_at_frame0_deg: f64,
    /// Nut-end angle at frame 0 measured from the bench at rest, degrees (as above).
    #[serde(default, skip_serializing_if = "is_zero")]
    pub nut_at_frame0_deg: f64,
}

impl Truth {
    /// The twist already in the bar at frame 0, degrees: drive − nut measured from rest (the
    /// report's `summary.twist_zero.offset_deg` when the zero is right). The truth's
    /// `twist_deg` is `drive_deg − nut_deg` plus this.
    pub fn twist_offset_deg(&self) -> f64 {
        self.model.drive_at_frame0_deg - self.model.nut_at_frame0_deg
    }
}

/// The exact truth of a simulated clip.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Truth {
    /// Layout version ([`TRUTH_VERSION`]).
    pub truth_version: u32,
    /// The scenario's name.
    pub scenario: String,
    /// What this file is.
    pub note: String,
    /// Capture rate, frames per second.
    pub fps: f64,
    /// Number of frames.
    pub frames: u64,
    /// Per-frame angles.
    pub trace: TraceTruth,
    /// Per-blow quantities.
    pub blows: Vec<BlowTruth>,
    /// Clip totals.
    pub summary: SummaryTruth,
    /// Model facts.
    pub model: ModelTruth,
    /// Camera shake per frame, px (empty when there is none).
    pub shake_px: Vec<[f64; 2]>,
    /// Camera roll per frame about the frame centre, degrees, clockwise on screen positive
    /// (empty when there is none).
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub shake_roll_deg: Vec<f64>,
    /// Sub-frame poses (frames × blur samples) for rendering; not serialised and ignored by
    /// `==`, so a truth read back from JSON equals the simulated one.
    #[serde(skip)]
    pub(super) poses: SubPoses,
}

/// The renderer's sub-frame poses, kept out of comparisons and debug output.
#[derive(Clone, Default)]
pub(super) struct SubPoses(pub(super) Vec<Pose>);

impl PartialEq for SubPoses {
    fn eq(&self, _: &Self) -> bool {
        true
    }
}

impl std::fmt::Debug for SubPoses {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "SubPoses({} poses)", self.0.len())
    }
}

/// Integrates the scenario's model and derives the truth.
///
/// # Panics
/// When the scenario is unusable: no blows, a non-positive rate, step or inertia, or a first
/// blow not after frame 0. Scenarios are written by the project, not by users.
pub fn simulate(sc: &Scenario) -> Truth {
    assert!(sc.tool.clip_blows >= 1, "at least one blow");
    assert!(sc.camera.fps_hz > 0.0 && sc.step_s > 0.0);
    assert!(sc.tool.first_blow_s > 0.0, "first blow after frame 0");
    assert!(sc.camera.exposure_s <= 1.0 / sc.camera.fps_hz + 1e-12);
    let fps = sc.camera.fps_hz;
    let (model, end_s) = sc.model();
    // Model time of frame 0 (0 for a take filmed from rest; adding 0.0 changes no value).
    let t0 = sc.camera.start_s.unwrap_or(0.0);
    assert!(
        t0.is_finite() && t0 >= 0.0 && t0 < end_s,
        "filming starts inside the take"
    );
    let end_s = end_s - t0;
    let frames = {
        // Frame instants strictly before the following blow.
        let mut n = (end_s * fps).ceil() as u64;
        while n > 0 && (n - 1) as f64 / fps >= end_s {
            n -= 1;
        }
        n.max(1)
            .min(sc.camera.max_frames.unwrap_or(u64::MAX).max(1))
    };
    let ns = sc.blur_samples();
    let exposure = if ns > 1 { sc.camera.exposure_s } else { 0.0 };
    // Every time the model must be sampled: frame instants, then the sub-frame instants.
    let mut times: Vec<(f64, usize)> = Vec::with_capacity(frames as usize * (ns + 1));
    for f in 0..frames as usize {
        let tf = f as f64 / fps;
        times.push((t0 + tf, f));
        if ns > 1 {
            for j in 0..ns {
                let tj = tf + exposure * ((j as f64 + 0.5) / ns as f64 - 0.5);
                times.push((t0 + tj, frames as usize + f * ns + j));
            }
        }
    }
    times.sort_by(|a, b| a.0.total_cmp(&b.0));
    let (states, events) = model.run(&times.iter().map(|t| t.0).collect::<Vec<_>>());
    let mut slot = vec![model::State::default(); frames as usize * (ns + 1)];
    for ((_, i), s) in times.iter().zip(states) {
        slot[*i] = s;
    }
    let k = sc.stiffness();
    let d0 = slot[0].theta_d;
    let n0 = slot[0].theta_n;
    let deg = |r: f64| r.to_degrees();
    let t_s: Vec<f64> = (0..frames).map(|f| f as f64 / fps).collect();
    let drive_deg: Vec<f64> = slot[..frames as usize]
        .iter()
        .map(|s| deg(s.theta_d - d0))
        .collect();
    let nut_deg: Vec<f64> = slot[..frames as usize]
        .iter()
        .map(|s| deg(s.theta_n - n0))
        .collect();
    // Absolute wind-up: measured from the bench at rest (d0 = n0 = 0 for a take from rest).
    let twist_offset = deg(d0) - deg(n0);
    let twist_deg: Vec<f64> = drive_deg
        .iter()
        .zip(&nut_deg)
        .map(|(d, n)| d - n + twist_offset)
        .collect();

    // Seeded shake per frame and flicker per sample.
    let mut rng = ChaCha8Rng::seed_from_u64(sc.seed);
    rng.set_stream(2);
    let shake_px: Vec<[f64; 2]> = if sc.effects.shake_sigma_px > 0.0 {
        (0..frames)
            .map(|_| {
                let a = sc.effects.shake_sigma_px;
                [a * gauss(&mut rng), a * gauss(&mut rng)]
            })
            .collect()
    } else {
        Vec::new()
    };
    let shake_roll_deg: Vec<f64> = if sc.effects.shake_roll_sigma_deg > 0.0 {
        let mut rng = ChaCha8Rng::seed_from_u64(sc.seed);
        rng.set_stream(3);
        (0..frames)
            .map(|_| sc.effects.shake_roll_sigma_deg * gauss(&mut rng))
            .collect()
    } else {
        Vec::new()
    };
    let gain = |t: f64| -> f32 {
        match sc.effects.flicker {
            Some(fl) => {
                (1.0 + fl.depth
                    * (2.0 * std::f64::consts::PI * fl.freq_hz * t + fl.phase_deg.to_radians())
                        .sin()) as f32
            }
            None => 1.0,
        }
    };
    let mut poses = Vec::with_capacity(frames as usize * ns);
    for f in 0..frames as usize {
        let shift = shake_px.get(f).copied().unwrap_or([0.0, 0.0]);
        let roll_rad = shake_roll_deg.get(f).copied().unwrap_or(0.0).to_radians();
        let tf = f as f64 / fps;
        for j in 0..ns {
            let (s, t) = if ns > 1 {
                (
                    slot[frames as usize + f * ns + j],
                    tf + exposure * ((j as f64 + 0.5) / ns as f64 - 0.5),
                )
            } else {
                (slot[f], tf)
            };
            poses.push(Pose {
                drive_rad: s.theta_d,
                nut_rad: s.theta_n,
                shift,
                gain: gain(t),
                roll_rad,
            });
        }
    }

    // Blows, with the report's frame-based definitions.
    let last = frames as usize - 1;
    let onset = |tb: f64| (((tb - t0) * fps).floor() as i64 + 1).max(0) as usize;
    // Blows that started before filming are not the clip's.
    let skipped = model.blow_times.iter().take_while(|&&tb| tb < t0).count();
    let starts: Vec<f64> = model.blow_times[skipped..].to_vec();
    let onsets: Vec<usize> = starts
        .iter()
        .map(|&t| onset(t))
        .take_while(|&o| o <= last)
        .collect();
    let mut blows = Vec::new();
    for (b, (&tb, &o)) in starts.iter().zip(onsets.iter()).enumerate() {
        let end = onsets.get(b + 1).map_or(last, |&n| n - 1).min(last);
        let before = o - 1;
        let peak = twist_deg[o..=end]
            .iter()
            .copied()
            .fold(f64::NEG_INFINITY, f64::max);
        let slip = events.nut_slip[b + skipped];
        let nut_lag_ms = slip.and_then(|ts| {
            let nf = onset(ts);
            (nf <= end).then(|| (nf as f64 - o as f64) * 1000.0 / fps)
        });
        blows.push(BlowTruth {
            index: b + 1,
            frame: o as u64,
            t_s: o as f64 / fps,
            drive_advance_deg: drive_deg[end] - drive_deg[before],
            nut_advance_deg: nut_deg[end] - nut_deg[before],
            peak_twist_deg: peak,
            peak_torque_nm: k * peak.to_radians(),
            residual_twist_deg: twist_deg[end],
            nut_lag_ms,
            impact_t_s: tb - t0,
            onset_margin_frames: o as f64 - (tb - t0) * fps,
            model_peak_torque_nm: events.peak_spring_torque[b + skipped],
            model_nut_breakaway_t_s: slip.map(|t| t - t0),
        });
    }
    let mut intervals: Vec<f64> = starts[..onsets.len()]
        .windows(2)
        .map(|w| w[1] - w[0])
        .collect();
    intervals.sort_by(f64::total_cmp);
    let blow_rate_per_min = (!intervals.is_empty()).then(|| {
        let m = intervals.len();
        let med = if m % 2 == 1 {
            intervals[m / 2]
        } else {
            0.5 * (intervals[m / 2 - 1] + intervals[m / 2])
        };
        60.0 / med
    });
    let summary = SummaryTruth {
        blow_count: blows.len(),
        blow_rate_per_min,
        drive_total_deg: drive_deg[last],
        nut_total_deg: nut_deg[last],
        bar_stiffness_nm_per_deg: k.to_radians(),
        peak_torque_nm: blows.iter().map(|b| b.peak_torque_nm).reduce(f64::max),
    };
    let sign = sc.scene.tighten.sign();
    let joint_end = model.joint.map_or(0.0, |j| j.torque(slot[last].theta_n));
    let model_truth = ModelTruth {
        stiffness_nm_per_rad: k,
        bar_rating_nm: sc.bar.rating_nm,
        joint_torque_end_nm: joint_end,
        drive_screen_deg_at_frame0: sc.scene.drive.stripe.start_deg + sign * deg(d0),
        nut_screen_deg_at_frame0: sc.scene.nut.stripe.start_deg + sign * deg(n0),
        drive_half_period_s: std::f64::consts::PI * (sc.tool.drive_inertia_kgm2 / k).sqrt(),
        exposure_s: exposure,
        drive_at_frame0_deg: deg(d0),
        nut_at_frame0_deg: deg(n0),
    };
    Truth {
        truth_version: TRUTH_VERSION,
        scenario: sc.name.clone(),
        note: "Synthetic clip of twistmark's invented test bench with exact known truth. Torque is the model's stiffness x twist, not a calibrated measurement.".into(),
        fps,
        frames,
        trace: TraceTruth {
            t_s,
            drive_deg,
            nut_deg,
            twist_deg,
        },
        blows,
        summary,
        model: model_truth,
        shake_px,
        shake_roll_deg,
        poses: SubPoses(poses),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::{Just, prop_assert, prop_assert_eq, prop_oneof};

    #[test]
    fn truth_follows_the_report_definitions() {
        // Cross-check the per-blow fields against the trace by their interface definitions.
        let sc = Scenario::preset("fast-tool").unwrap();
        let t = simulate(&sc);
        assert_eq!(t.trace.drive_deg[0], 0.0);
        assert_eq!(t.blows.len(), sc.tool.clip_blows as usize);
        let k = t.summary.bar_stiffness_nm_per_deg;
        for (i, b) in t.blows.iter().enumerate() {
            let o = b.frame as usize;
            assert!(b.impact_t_s < b.t_s && b.t_s - b.impact_t_s <= 1.0 / t.fps);
            let end = t
                .blows
                .get(i + 1)
                .map_or(t.frames as usize - 1, |n| n.frame as usize - 1);
            let tw = &t.trace.twist_deg;
            assert_eq!(b.residual_twist_deg, tw[end]);
            assert_eq!(
                b.drive_advance_deg,
                t.trace.drive_deg[end] - t.trace.drive_deg[o - 1]
            );
            assert!((b.peak_torque_nm - k * b.peak_twist_deg).abs() < 1e-9);
            assert!(tw[o..=end].iter().all(|&w| w <= b.peak_twist_deg));
            // Frame sampling can only miss the continuous peak, never exceed it.
            assert!(b.peak_torque_nm <= b.model_peak_torque_nm + 1e-9);
        }
        // The drive end is still before the first blow.
        assert!(
            t.trace.drive_deg[..t.blows[0].frame as usize]
                .iter()
                .all(|&d| d == 0.0)
        );
    }

    #[test]
    fn presets_show_the_physics() {
        // The two named scenarios must show what they are for: the slow tool's bar springs
        // back (small residual) and its torque stays within 10 % of the rating; the fast
        // tool's bar stays wound up (residual over a third of the peak twist) and its torque
        // climbs past the rating by more than 10 %.
        let slow_sc = Scenario::preset("slow-tool").unwrap();
        let fast_sc = Scenario::preset("fast-tool").unwrap();
        let rating = slow_sc.bar.rating_nm.unwrap();
        let slow = simulate(&slow_sc);
        let fast = simulate(&fast_sc);
        let last_blow = |t: &Truth| t.blows.last().unwrap().clone();
        let (s, f) = (last_blow(&slow), last_blow(&fast));
        let slow_peak = slow.summary.peak_torque_nm.unwrap();
        let fast_peak = fast.summary.peak_torque_nm.unwrap();
        assert!(
            (slow_peak / rating - 1.0).abs() < 0.1,
            "slow peak {slow_peak}"
        );
        assert!(fast_peak > 1.1 * rating, "fast peak {fast_peak}");
        assert!(s.residual_twist_deg < 0.25 * s.peak_twist_deg, "{s:?}");
        assert!(f.residual_twist_deg > 0.33 * f.peak_twist_deg, "{f:?}");
        // The nut advances a lot on the first blows and little or nothing on the last.
        for t in [&slow, &fast] {
            assert!(t.blows[0].nut_advance_deg > 5.0);
            assert!(last_blow(t).nut_advance_deg < 0.5 * t.blows[0].nut_advance_deg);
        }
    }

    proptest::proptest! {
        #![proptest_config(proptest::prelude::ProptestConfig::with_cases(16))]
        #[test]
        fn truth_invariants_hold_for_any_tool(
            rate in 600.0f64..4500.0,
            momentum in 0.05f64..0.4,
            back in 2.0f64..40.0,
            fps in prop_oneof![Just(1000.0), Just(2500.0), Just(4000.0)],
            jitter in 0.0f64..0.05,
            seed in 0u64..1000,
        ) {
            // Invariants of the model and of the truth's definitions: the nut never turns
            // back, twist = drive − nut, blows are in order and inside the clip, frame peaks
            // never exceed the continuous peak, and torque = stiffness × twist.
            let mut sc = Scenario::preset("slow-tool").unwrap();
            sc.seed = seed;
            sc.camera.fps_hz = fps;
            sc.tool.blow_rate_per_min = rate;
            sc.tool.blow_momentum_nms = momentum;
            sc.tool.back_damping_nms_per_rad = back;
            sc.tool.jitter = jitter;
            sc.tool.clip_blows = 3;
            let t = simulate(&sc);
            let tr = &t.trace;
            prop_assert_eq!(tr.drive_deg.len() as u64, t.frames);
            for w in tr.nut_deg.windows(2) {
                prop_assert!(w[1] >= w[0]);
            }
            for i in 0..tr.twist_deg.len() {
                prop_assert!((tr.twist_deg[i] - (tr.drive_deg[i] - tr.nut_deg[i])).abs() < 1e-12);
            }
            let k = t.summary.bar_stiffness_nm_per_deg;
            let mut last = 0;
            for b in &t.blows {
                prop_assert!(b.frame as usize > last || last == 0);
                prop_assert!(b.frame < t.frames);
                last = b.frame as usize;
                prop_assert!(b.peak_torque_nm <= b.model_peak_torque_nm + 1e-9);
                prop_assert!((b.peak_torque_nm - k * b.peak_twist_deg).abs() < 1e-9);
                prop_assert!(b.nut_advance_deg >= 0.0);
                prop_assert!(b.onset_margin_frames > 0.0 && b.onset_margin_frames <= 1.0);
            }
        }
    }
}
