//! The scenario: every knob of one clip of the invented bench (camera, tool, bar, joint,
//! scene, realism effects, seed), the named presets, the exact rig for the scene and the
//! model's constants and seeded blow times.

use rand::SeedableRng;
use rand::rngs::ChaCha8Rng;
use serde::{Deserialize, Serialize};

use super::{DriveDisc, FixedMark, NutFace, Paint, Scene, Steel, Stripe, gauss, is_zero};
use crate::mechanics::model::{Joint, Model};
use crate::mechanics::{BarSpec, SectionSpec};
use crate::rig::{Mark, Marks, RIG_VERSION, RadialMark, Rig, Spin};

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
pub(super) fn bench_bar() -> BarSpec {
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

pub(super) fn bench_scene() -> Scene {
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
    pub(super) fn stiffness(&self) -> f64 {
        self.bar.stiffness().nm_per_rad()
    }

    pub(super) fn blur_samples(&self) -> usize {
        if self.camera.exposure_s > 0.0 {
            self.camera.blur_samples.max(1) as usize
        } else {
            1
        }
    }

    /// The model's constants and blow times (seeded jitter).
    pub(super) fn model(&self) -> (Model, f64) {
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

#[cfg(test)]
mod tests {
    use super::*;
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
}
