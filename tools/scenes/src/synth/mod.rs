//! Synthetic scenes with exact known truth: a small torsional model of impact blows and a
//! renderer of marked discs, for tests, benchmarks, fixtures and the demo. These are scenes of
//! the project's own invented test bench, not real footage.
//!
//! A [`Scenario`] holds every knob (tool, bar, joint, camera, scene, realism effects) and a
//! seed. [`simulate`] integrates the model and returns the [`Truth`]: per-frame angles and the
//! per-blow quantities computed with exactly the definitions of the `report.json` section of
//! the interface, so tests can compare field by field. [`render_frame`] draws any frame.
//!
//! ```
//! use twistmark_scenes::synth::{Scenario, render_frame, simulate};
//! let sc = Scenario::preset("fast-tool").unwrap();
//! let truth = simulate(&sc);
//! let frame = render_frame(&sc, &truth, 10);
//! assert_eq!((frame.width, frame.height), (320, 240));
//! assert!(truth.summary.peak_torque_nm.unwrap() > sc.bar.rating_nm.unwrap());
//! ```
//!
//! Conventions: angles in the truth are degrees, relative to frame 0, positive in the
//! tightening direction; `twist = drive − nut`. Frame `f` is the instant `t = f / fps` (the
//! middle of its exposure). A torque here is the model's bar stiffness × twist on an invented
//! bench, not a measurement.

#[doc(hidden)]
pub mod fixtures;
pub mod layout;
mod look;
pub mod phone;
pub mod random;
pub mod rolling;
mod scene;
pub mod side;
pub mod side_random;
mod texture;
mod write;

use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use serde::{Deserialize, Serialize};

use crate::decode::{Frame, Luma};
use crate::mechanics::{BarSpec, SectionSpec};
use crate::rig::{Mark, Marks, RIG_VERSION, RadialMark, Rig, Spin};

pub use look::{Finish, Look, Washer, Wheel};
pub use scene::{DriveDisc, FixedMark, Highlight, NutFace, Paint, Scene, Steel, Stripe};
pub use texture::BrushedSteel;
#[cfg(feature = "ffmpeg")]
pub use write::write_video;
pub use write::{StillFormat, write_rest_still, write_sidecars, write_stills};

use crate::mechanics::model::{self, Joint, Model};
use scene::{Pose, Prepared};

/// Version of the truth.json layout written by this build.
pub const TRUTH_VERSION: u32 = 1;

/// The camera: capture rate, exposure and sample depth.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Camera {
    /// Capture rate, frames per second.
    pub fps_hz: f64,
    /// Exposure time, s (0 = instantaneous). Must not exceed 1/fps.
    pub exposure_s: f64,
    /// Sub-frame renders averaged over the exposure for motion blur (1 = none).
    pub blur_samples: u32,
    /// Bits per luma sample: 8 or 16.
    pub bit_depth: u8,
    /// Cut the clip after this many frames (None: end at the last frame before the blow that
    /// follows the tool's `clip_blows`). Blows whose onset falls after the cut are dropped.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub max_frames: Option<u64>,
    /// Start filming this long after the bench left rest, s (None: at rest, time 0). A take
    /// that starts after the first blows starts with the bar wound up; blows that start
    /// before the first frame are not the clip's. Frame `f` is then the instant
    /// `start_s + f / fps` of the model, and its time in the truth is still `f / fps`.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub start_s: Option<f64>,
}

/// The impact tool: blow rate, blow strength and the drive end it hits.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Tool {
    /// Nominal blow rate, blows per minute.
    pub blow_rate_per_min: f64,
    /// Standard deviation of each blow interval as a fraction of the nominal interval
    /// (seeded; 0 = perfectly regular).
    pub jitter: f64,
    /// Angular momentum each blow hands to the drive end, N·m·s.
    pub blow_momentum_nms: f64,
    /// Length of each half-sine torque pulse, s.
    pub pulse_s: f64,
    /// Time of the first blow after frame 0, s (> 0).
    pub first_blow_s: f64,
    /// Blows in the clip. The clip ends at the last frame before the following blow.
    pub clip_blows: u32,
    /// Drive-end inertia (anvil, flag disc and the bar's drive end), kg·m².
    pub drive_inertia_kgm2: f64,
    /// Tool damping on the drive end while it turns forward, N·m·s/rad.
    pub forward_damping_nms_per_rad: f64,
    /// Tool damping on the drive end while it turns back (the mechanism resisting back-drive;
    /// sets the spring-back time constant ≈ c/k), N·m·s/rad.
    pub back_damping_nms_per_rad: f64,
}

/// The nut end and its joint.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct JointSpec {
    /// Nut-end inertia (socket and nut), kg·m².
    pub nut_inertia_kgm2: f64,
    /// Torque that keeps the nut turning at the snug point (frame 0), N·m.
    pub snug_torque_nm: f64,
    /// Joint rate after snug, N·m/deg (a hard joint is a few N·m/deg).
    pub rate_nm_per_deg: f64,
    /// Static breakaway over kinetic joint torque (≥ 1).
    pub breakaway_ratio: f64,
}

/// Mains lighting flicker.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Flicker {
    /// Flicker frequency, Hz (twice the mains frequency: 100 or 120).
    pub freq_hz: f64,
    /// Relative brightness modulation amplitude, 0..1.
    pub depth: f64,
    /// Phase at t = 0, degrees.
    pub phase_deg: f64,
}

/// Realism effects layered on the clean render.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, Default)]
#[serde(deny_unknown_fields)]
pub struct Effects {
    /// Gaussian sensor noise, standard deviation as a fraction of full scale (seeded).
    pub noise_sigma: f64,
    /// Lighting flicker, if any.
    #[serde(default)]
    pub flicker: Option<Flicker>,
    /// Camera shake: standard deviation of the whole-scene translation per frame, px (seeded).
    pub shake_sigma_px: f64,
    /// Camera roll: standard deviation of the whole-scene rotation about the frame centre per
    /// frame, degrees (seeded; 0 = none).
    #[serde(default, skip_serializing_if = "is_zero")]
    pub shake_roll_sigma_deg: f64,
}

fn is_zero(v: &f64) -> bool {
    *v == 0.0
}

/// Everything needed to simulate and render one clip of the invented test bench.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Scenario {
    /// Short name (`slow-tool`, `fast-tool`, ...).
    pub name: String,
    /// One-line description.
    pub description: String,
    /// Seed for every random choice (jitter, noise, shake).
    pub seed: u64,
    /// The camera.
    pub camera: Camera,
    /// The impact tool.
    pub tool: Tool,
    /// The torsion bar (its stiffness is `bar.stiffness()`).
    pub bar: BarSpec,
    /// Damping ratio of the bar's own twisting mode, ζ (c_b = 2ζ·√(k·I_red)).
    pub bar_damping_ratio: f64,
    /// The nut end and joint.
    pub joint: JointSpec,
    /// What the camera sees.
    pub scene: Scene,
    /// Noise, flicker, shake.
    pub effects: Effects,
    /// Integration step, s.
    pub step_s: f64,
}

/// Names accepted by [`Scenario::preset`].
pub const PRESETS: [&str; 2] = ["slow-tool", "fast-tool"];

/// The bench's torsion bar: a 12 mm spring-steel round between two 19 mm hex ends, rated
/// 136 N·m (100 lbf·ft). Invented; k ≈ 13.3 N·m/deg.
fn bench_bar() -> BarSpec {
    BarSpec {
        shear_modulus_gpa: Some(79.3),
        rating_nm: Some(136.0),
        ..BarSpec::new(vec![
            SectionSpec::hex(25.0, 19.0),
            SectionSpec::round(220.0, 12.0),
            SectionSpec::hex(30.0, 19.0),
        ])
    }
}

fn bench_scene() -> Scene {
    Scene {
        width: 320,
        height: 240,
        background_top: 0.10,
        background_bottom: 0.22,
        paint: Paint::Yellow,
        tighten: Spin::Cw,
        drive: DriveDisc {
            pivot: [82.0, 128.0],
            radius_px: 74.0,
            steel: Steel::Dark,
            stripe: Stripe {
                r_inner_px: 6.0,
                r_outer_px: 70.0,
                width_px: 6.0,
                start_deg: -72.0,
            },
            ellipse: None,
            highlight: None,
        },
        nut: NutFace {
            pivot: [238.0, 128.0],
            across_flats_px: 132.0,
            steel: Steel::Bare,
            stud_radius_px: 10.0,
            corner_start_deg: 8.0,
            stripe: Stripe {
                r_inner_px: 13.0,
                r_outer_px: 64.0,
                width_px: 6.0,
                start_deg: -100.0,
            },
        },
        fixed: Some(FixedMark {
            pivot: [160.0, 30.0],
            stripe: Stripe {
                r_inner_px: 0.0,
                r_outer_px: 24.0,
                width_px: 5.0,
                start_deg: 0.0,
            },
            plate_half_px: [18.0, 6.0],
        }),
        supersample: 16,
        background_texture: None,
        look: None,
    }
}

impl Scenario {
    /// A named scenario: `slow-tool` (an air tool at about 1,200 blows/min whose bar springs
    /// back between blows, so the torque stays near the bar's rating) or `fast-tool` (about
    /// 3,300 blows/min: the bar cannot finish springing back, stays wound up, and the torque
    /// climbs past the rating). Returns None for other names; see [`PRESETS`].
    pub fn preset(name: &str) -> Option<Scenario> {
        let slow = Scenario {
            name: "slow-tool".into(),
            description: "slow air tool, 1,200 blows/min: the bar springs back between blows and the torque stays near the rating".into(),
            seed: 1,
            camera: Camera {
                fps_hz: 1000.0,
                exposure_s: 0.0,
                blur_samples: 1,
                bit_depth: 8,
                max_frames: None,
                start_s: None,
            },
            tool: Tool {
                blow_rate_per_min: 1200.0,
                jitter: 0.0,
                blow_momentum_nms: 0.25,
                pulse_s: 2.0e-4,
                first_blow_s: 0.0104,
                clip_blows: 6,
                drive_inertia_kgm2: 2.0e-3,
                forward_damping_nms_per_rad: 0.08,
                back_damping_nms_per_rad: 22.0,
            },
            bar: bench_bar(),
            bar_damping_ratio: 0.03,
            joint: JointSpec {
                nut_inertia_kgm2: 2.5e-4,
                snug_torque_nm: 40.0,
                rate_nm_per_deg: 3.0,
                breakaway_ratio: 1.15,
            },
            scene: bench_scene(),
            effects: Effects::default(),
            step_s: 1.0e-6,
        };
        match name {
            "slow-tool" => Some(slow),
            "fast-tool" => {
                let mut s = slow;
                s.name = "fast-tool".into();
                s.description = "fast tool, 3,300 blows/min: the bar stays wound up between blows and the torque climbs past the rating".into();
                s.camera.fps_hz = 2000.0;
                s.tool.blow_rate_per_min = 3300.0;
                s.tool.clip_blows = 10;
                s.tool.first_blow_s = 0.00513;
                Some(s)
            }
            _ => None,
        }
    }

    /// The exact rig for this scene: pivots, annuli (the stripe's span, trimmed by 4 px at the
    /// inner end and 2 px at the outer end), tightening direction, capture rate and bar.
    pub fn rig(&self) -> Rig {
        let s = &self.scene;
        let annulus = |st: &Stripe| [st.r_inner_px.max(0.0) + 4.0, st.r_outer_px - 2.0];
        Rig {
            rig_version: RIG_VERSION,
            capture_fps_hz: Some(self.camera.fps_hz),
            marks: Marks {
                drive: Mark::Radial(RadialMark {
                    pivot: s.drive.pivot,
                    radius: annulus(&s.drive.stripe),
                    tighten: Some(s.tighten),
                    ellipse: s.drive.ellipse,
                }),
                nut: Mark::Radial(RadialMark {
                    pivot: s.nut.pivot,
                    radius: annulus(&s.nut.stripe),
                    tighten: Some(s.tighten),
                    ellipse: None,
                }),
                fixed: s.fixed.map(|f| {
                    Mark::Radial(RadialMark {
                        pivot: f.pivot,
                        radius: annulus(&f.stripe),
                        tighten: None,
                        ellipse: None,
                    })
                }),
            },
            // The drive-end inertia and back-drive damping let `analyze` state whether the bar
            // can spring back between blows (the mechanics' spring-back verdict).
            bar: Some(BarSpec {
                drive_inertia_kg_m2: Some(self.tool.drive_inertia_kgm2),
                drive_back_damping_nms_per_rad: Some(self.tool.back_damping_nms_per_rad),
                ..self.bar.clone()
            }),
            camera: None,
        }
    }

    /// The bar stiffness used by the model and the truth, N·m/rad.
    fn stiffness(&self) -> f64 {
        self.bar.stiffness().nm_per_rad()
    }

    fn blur_samples(&self) -> usize {
        if self.camera.exposure_s > 0.0 {
            self.camera.blur_samples.max(1) as usize
        } else {
            1
        }
    }

    /// The model's constants and blow times (seeded jitter).
    fn model(&self) -> (Model, f64) {
        let t = &self.tool;
        let k = self.stiffness();
        let j = &self.joint;
        let interval = 60.0 / t.blow_rate_per_min;
        let mut rng = ChaCha8Rng::seed_from_u64(self.seed);
        rng.set_stream(1);
        let mut times = Vec::new();
        let mut tb = t.first_blow_s;
        for _ in 0..=t.clip_blows {
            times.push(tb);
            let jit = if t.jitter > 0.0 {
                t.jitter * gauss(&mut rng)
            } else {
                0.0
            };
            tb += interval * (1.0 + jit).max(0.2);
        }
        // The clip ends at the last frame instant before the blow after the last counted one.
        let end = times.pop().unwrap_or(t.first_blow_s);
        let i_red =
            t.drive_inertia_kgm2 * j.nut_inertia_kgm2 / (t.drive_inertia_kgm2 + j.nut_inertia_kgm2);
        let m = Model {
            drive_inertia: t.drive_inertia_kgm2,
            nut_inertia: j.nut_inertia_kgm2,
            stiffness: k,
            bar_damping: 2.0 * self.bar_damping_ratio * (k * i_red).sqrt(),
            forward_damping: t.forward_damping_nms_per_rad,
            back_damping: t.back_damping_nms_per_rad,
            joint: Some(Joint {
                snug_nm: j.snug_torque_nm,
                rate_nm_per_rad: j.rate_nm_per_deg.to_degrees(),
                breakaway: j.breakaway_ratio.max(1.0),
            }),
            blow_times: times,
            blow_momentum: t.blow_momentum_nms,
            pulse: t.pulse_s,
            step: self.step_s,
            start: -0.5 * self.camera.exposure_s - self.step_s,
        };
        (m, end)
    }
}

/// One standard normal deviate (Box–Muller).
fn gauss(rng: &mut ChaCha8Rng) -> f64 {
    let u1: f64 = 1.0 - rng.random::<f64>();
    let u2: f64 = rng.random::<f64>();
    (-2.0 * u1.ln()).sqrt() * (2.0 * std::f64::consts::PI * u2).cos()
}

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
    poses: SubPoses,
}

/// The renderer's sub-frame poses, kept out of comparisons and debug output.
#[derive(Clone, Default)]
struct SubPoses(Vec<Pose>);

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

/// Renders frame `index` of a simulated clip: the clean scene averaged over the exposure, the
/// light flicker, the camera shake, then seeded sensor noise, quantised to the camera's depth.
///
/// A `Truth` read back from JSON has no sub-frame poses; it renders from the per-frame angles
/// (no motion blur), which is exact when the clip was made without blur.
///
/// # Panics
/// When `index` is not below `truth.frames`.
pub fn render_frame(sc: &Scenario, truth: &Truth, index: u64) -> Frame {
    assert!(index < truth.frames, "frame index in range");
    let f = index as usize;
    let ns = sc.blur_samples();
    let fallback;
    let poses: &[Pose] = if truth.poses.0.len() == truth.frames as usize * ns {
        &truth.poses.0[f * ns..(f + 1) * ns]
    } else {
        // Rebuild from the serialised angles (relative to frame 0; frame 0's pose is the
        // start pose here, which holds for every scenario since the bench starts at rest).
        let gain = match sc.effects.flicker {
            Some(fl) => {
                (1.0 + fl.depth
                    * (2.0 * std::f64::consts::PI * fl.freq_hz * truth.trace.t_s[f]
                        + fl.phase_deg.to_radians())
                    .sin()) as f32
            }
            None => 1.0,
        };
        fallback = [Pose {
            drive_rad: (truth.trace.drive_deg[f] + truth.model.drive_at_frame0_deg).to_radians(),
            nut_rad: (truth.trace.nut_deg[f] + truth.model.nut_at_frame0_deg).to_radians(),
            shift: truth.shake_px.get(f).copied().unwrap_or([0.0, 0.0]),
            gain,
            roll_rad: truth
                .shake_roll_deg
                .get(f)
                .copied()
                .unwrap_or(0.0)
                .to_radians(),
        }];
        &fallback
    };
    if sc.scene.look.is_some() {
        return colour_frame(sc, index, poses);
    }
    let img = Prepared::new(&sc.scene).render(poses);
    finish_frame(sc, img, index, 1_000 + index)
}

/// Renders the bench at rest, unloaded, as a camera in the same place would see it before
/// the take: both ends at the angles they had when the bench left rest (so the twist is
/// zero), no shake, steady light, with sensor noise of its own (seeded). This is the still
/// that `analyze --zero-still` takes. Its frame index is 0. A scene with a colour
/// [`Look`] is rendered here in luma only.
pub fn render_rest_frame(sc: &Scenario) -> Frame {
    let pose = [Pose {
        drive_rad: 0.0,
        nut_rad: 0.0,
        shift: [0.0, 0.0],
        gain: 1.0,
        roll_rad: 0.0,
    }];
    let img = Prepared::new(&sc.scene).render(&pose);
    // Stream 999: apart from the jitter (1), shake (2) and frame noise (1,000 + index).
    finish_frame(sc, img, 0, 999)
}

/// Adds seeded sensor noise (random stream `stream`) to a rendered image and quantises it
/// to the camera's depth.
fn finish_frame(sc: &Scenario, mut img: Vec<f32>, index: u64, stream: u64) -> Frame {
    if sc.effects.noise_sigma > 0.0 {
        let mut rng = ChaCha8Rng::seed_from_u64(sc.seed);
        rng.set_stream(stream);
        let sigma = sc.effects.noise_sigma as f32;
        for v in img.iter_mut() {
            *v += sigma * gauss(&mut rng) as f32;
        }
    }
    let (w, h) = (sc.scene.width, sc.scene.height);
    if sc.camera.bit_depth > 8 {
        let data = img
            .iter()
            .map(|&v| (v.clamp(0.0, 1.0) * 65535.0).round() as u16)
            .collect();
        Frame {
            index,
            width: w,
            height: h,
            bit_depth: 16,
            luma: Luma::U16(data),
            chroma: None,
            damaged: false,
        }
    } else {
        let data = img
            .iter()
            .map(|&v| (v.clamp(0.0, 1.0) * 255.0).round() as u8)
            .collect();
        Frame::from_u8(index, w, h, data)
    }
}

/// A frame of a scene with a [`Look`]: Y′ as [`render_frame`] quantises it (noise, depth),
/// and, for 8-bit cameras, full-size Cb and Cr planes (sensor noise on them too, at half the
/// luma's deviation, from its own seeded stream).
fn colour_frame(sc: &Scenario, index: u64, poses: &[Pose]) -> Frame {
    let mut img = Prepared::new(&sc.scene).render_colour(poses);
    if sc.effects.noise_sigma > 0.0 {
        let mut rng = ChaCha8Rng::seed_from_u64(sc.seed);
        rng.set_stream(1_000 + index);
        let mut crng = ChaCha8Rng::seed_from_u64(sc.seed ^ 0xC0_10_0E);
        crng.set_stream(1_000 + index);
        let sigma = sc.effects.noise_sigma as f32;
        for v in img.iter_mut() {
            v[0] += sigma * gauss(&mut rng) as f32;
            v[1] += 0.5 * sigma * gauss(&mut crng) as f32;
            v[2] += 0.5 * sigma * gauss(&mut crng) as f32;
        }
    }
    let (w, h) = (sc.scene.width, sc.scene.height);
    if sc.camera.bit_depth > 8 {
        let data = img
            .iter()
            .map(|v| (v[0].clamp(0.0, 1.0) * 65535.0).round() as u16)
            .collect();
        return Frame {
            index,
            width: w,
            height: h,
            bit_depth: 16,
            luma: Luma::U16(data),
            chroma: None,
            damaged: false,
        };
    }
    let q = |v: f32| (v.clamp(0.0, 1.0) * 255.0).round() as u8;
    let qc = |v: f32| (128.0 + v * 255.0).round().clamp(0.0, 255.0) as u8;
    let mut f = Frame::from_u8(index, w, h, img.iter().map(|v| q(v[0])).collect());
    f.chroma = Some(crate::decode::Chroma {
        width: w,
        height: h,
        cb: img.iter().map(|v| qc(v[1])).collect(),
        cr: img.iter().map(|v| qc(v[2])).collect(),
        siting: crate::decode::ChromaSiting::Centre,
    });
    f
}

/// Renders every frame of a simulated clip, in order (for in-memory pipelines:
/// `decode::MemorySource::new(render_clip(&sc, &truth), None)`).
pub fn render_clip(sc: &Scenario, truth: &Truth) -> Vec<Frame> {
    (0..truth.frames)
        .map(|i| render_frame(sc, truth, i))
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::{Just, prop_assert, prop_assert_eq, prop_oneof};
    use std::path::Path;

    #[test]
    fn preset_rigs_are_valid_and_fit_the_frame() {
        for name in PRESETS {
            let sc = Scenario::preset(name).unwrap();
            let rig = sc.rig();
            let back = Rig::from_json_str(&rig.to_json_pretty(), Path::new("rig.json")).unwrap();
            assert_eq!(back, rig);
            rig.check_frame(Path::new("rig.json"), sc.scene.width, sc.scene.height)
                .unwrap();
        }
    }

    #[test]
    fn truth_read_back_from_json_renders_the_same_frames() {
        // Without blur, a truth read back from truth.json renders the same frames (with noise,
        // flicker and shake), to within one count where a last-ulp difference in an angle
        // from the JSON round trip tips a rounding.
        let mut sc = Scenario::preset("slow-tool").unwrap();
        sc.tool.clip_blows = 1;
        sc.effects = Effects {
            noise_sigma: 0.01,
            flicker: Some(Flicker {
                freq_hz: 120.0,
                depth: 0.05,
                phase_deg: 10.0,
            }),
            shake_sigma_px: 0.5,
            shake_roll_sigma_deg: 0.0,
        };
        let t = simulate(&sc);
        let back: Truth = serde_json::from_str(&serde_json::to_string(&t).unwrap()).unwrap();
        assert!(back.poses.0.is_empty());
        // serde_json's default float parser may be 1 ulp off, so compare within 1e-12.
        for (a, b) in back.trace.drive_deg.iter().zip(&t.trace.drive_deg) {
            assert!((a - b).abs() < 1e-12);
        }
        for i in [0, 13, 30] {
            let (a, b) = (render_frame(&sc, &back, i), render_frame(&sc, &t, i));
            let (Luma::U8(a), Luma::U8(b)) = (&a.luma, &b.luma) else {
                panic!("8-bit")
            };
            let worst = a.iter().zip(b).map(|(x, y)| x.abs_diff(*y)).max().unwrap();
            assert!(worst <= 1, "frame {i}: {worst}");
        }
    }

    #[test]
    fn same_seed_renders_the_same_frames() {
        // Determinism: the same scenario (with noise, flicker, shake and blur) gives the same
        // frame checksums; another seed changes them.
        let mut sc = Scenario::preset("fast-tool").unwrap();
        sc.tool.clip_blows = 1;
        sc.effects = Effects {
            noise_sigma: 0.02,
            flicker: Some(Flicker {
                freq_hz: 100.0,
                depth: 0.1,
                phase_deg: 0.0,
            }),
            shake_sigma_px: 0.3,
            shake_roll_sigma_deg: 0.0,
        };
        sc.camera.exposure_s = 2.0e-4;
        sc.camera.blur_samples = 4;
        let sums = |sc: &Scenario| -> Vec<u64> {
            let t = simulate(sc);
            (0..t.frames)
                .step_by(7)
                .map(|i| render_frame(sc, &t, i).checksum())
                .collect()
        };
        let a = sums(&sc);
        assert_eq!(a, sums(&sc));
        sc.seed += 1;
        assert_ne!(a, sums(&sc));
    }

    /// Screen angle of the stripe inside a radial mark's annulus by second central moments
    /// (Hu, IRE Trans. Information Theory, 1962), weighting each pixel by how much brighter than `floor` it is.
    fn annulus_angle_deg(frame: &Frame, mark: &Mark, floor: f32) -> f64 {
        let Mark::Radial(m) = mark else {
            panic!("radial")
        };
        // Into the disc plane: stretch by 1/axis_ratio across the major axis.
        let to_plane = |dx: f64, dy: f64| -> (f64, f64) {
            match m.ellipse {
                None => (dx, dy),
                Some(e) => {
                    let (c, s) = (
                        e.major_deg.to_radians().cos(),
                        e.major_deg.to_radians().sin(),
                    );
                    let a = dx * c + dy * s;
                    let b = (-dx * s + dy * c) / e.axis_ratio;
                    (a * c - b * s, a * s + b * c)
                }
            }
        };
        let (mut m00, mut m10, mut m01) = (0.0f64, 0.0f64, 0.0f64);
        let mut px = Vec::new();
        for y in 0..frame.height {
            for x in 0..frame.width {
                let (dx, dy) = to_plane(f64::from(x) - m.pivot[0], f64::from(y) - m.pivot[1]);
                let r = (dx * dx + dy * dy).sqrt();
                if r < m.radius[0] || r > m.radius[1] {
                    continue;
                }
                let a = f64::from((frame.value(x, y) - floor).max(0.0));
                m00 += a;
                m10 += a * dx;
                m01 += a * dy;
                px.push((dx, dy, a));
            }
        }
        let (cx, cy) = (m10 / m00, m01 / m00);
        let (mut u20, mut u02, mut u11) = (0.0f64, 0.0f64, 0.0f64);
        for (dx, dy, a) in px {
            u20 += a * (dx - cx) * (dx - cx);
            u02 += a * (dy - cy) * (dy - cy);
            u11 += a * (dx - cx) * (dy - cy);
        }
        // Axial angle, then pick the direction pointing away from the pivot.
        let th = 0.5 * (2.0 * u11).atan2(u20 - u02);
        let (c, s) = (th.cos(), th.sin());
        if c * cx + s * cy < 0.0 {
            (th + std::f64::consts::PI).to_degrees()
        } else {
            th.to_degrees()
        }
    }

    #[test]
    fn rendered_frames_carry_the_truth_angles() {
        // Synthetic check (this renderer against its own truth, through an independent
        // measurement): in 16-bit preset frames (16×16 jittered samples at edges), the
        // second-moment angle of each whole stripe (a disc around the pivot that holds all of
        // the stripe and nothing brighter than the surface) equals the truth's screen angle,
        // frame-0 angle + sign × truth angle, within 0.01° for cw, ccw and an oblique drive disc
        // measured in its disc plane. Measured worst case 0.006°. With 8×8 samples the 51 px
        // nut stripe is off by up to 0.015°, and 8-bit quantisation of its low contrast adds up
        // to about 0.03°. (Cutting a stripe with the rig's narrower annulus on pixel centres
        // costs up to about 0.1° with this simple estimator; that is the tracker's problem,
        // not the truth's.)
        for (spin, oblique) in [(Spin::Cw, false), (Spin::Ccw, false), (Spin::Cw, true)] {
            let mut sc = Scenario::preset("fast-tool").unwrap();
            sc.tool.clip_blows = 2;
            sc.camera.bit_depth = 16;
            sc.scene.tighten = spin;
            if oblique {
                sc.scene.drive.ellipse = Some(crate::rig::Ellipse {
                    axis_ratio: 0.8,
                    major_deg: 20.0,
                });
            }
            let t = simulate(&sc);
            let mut rig = sc.rig();
            if let (Mark::Radial(d), Mark::Radial(n)) = (&mut rig.marks.drive, &mut rig.marks.nut) {
                d.radius = [0.0, sc.scene.drive.radius_px - 2.0];
                n.radius = [0.0, 0.5 * sc.scene.nut.across_flats_px - 0.5];
            }
            // The surfaces' own 16-bit values, so that weights are exactly linear in coverage.
            let q16 = |v: f32| (v * 65535.0).round() / 65535.0;
            let drive_floor = q16(sc.scene.drive.steel.luma());
            let nut_floor = q16(sc.scene.nut.steel.luma() * 0.9 + 0.08);
            let wrap = |a: f64| (a + 180.0).rem_euclid(360.0) - 180.0;
            let sign = spin.sign();
            let mut worst: f64 = 0.0;
            for i in [0u64, 12, 14, 17, 25, 40, 60] {
                let f = render_frame(&sc, &t, i);
                let d = annulus_angle_deg(&f, &rig.marks.drive, drive_floor);
                let n = annulus_angle_deg(&f, &rig.marks.nut, nut_floor);
                let (td, tn) = (t.trace.drive_deg[i as usize], t.trace.nut_deg[i as usize]);
                let ed = wrap(d - (t.model.drive_screen_deg_at_frame0 + sign * td));
                let en = wrap(n - (t.model.nut_screen_deg_at_frame0 + sign * tn));
                worst = worst.max(ed.abs()).max(en.abs());
                assert!(ed.abs() < 0.01, "{spin:?} frame {i}: drive off by {ed}");
                assert!(en.abs() < 0.01, "{spin:?} frame {i}: nut off by {en}");
            }
        }
    }

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
