//! The scene randomiser: draws a whole scenario of the invented bench from wide distributions
//! (tool, camera, paint and metal, surface detail, fixed mark, lighting, shake, recording), so
//! the tracker can be judged on scenes nobody tuned it on. The held-out list of seeds
//! (`tests/held_out_seeds.txt`) was fixed before any tuning against these scenes and is never
//! changed; see docs/accuracy.md.
//!
//! Every draw comes from one seeded ChaCha8 stream, so a seed names one scene for good. Changing
//! this file's distributions changes what a seed means: add new draws at the end of
//! [`random_scene`], never in the middle, and say so in docs/accuracy.md.

use rand::rngs::ChaCha8Rng;
use rand::{RngExt, SeedableRng};
use serde::{Deserialize, Serialize};

use super::look::{Finish, Look, Washer, Wheel};
use super::{
    Camera, Effects, FixedMark, Flicker, Highlight, Paint, Scenario, Stripe, bench_bar, bench_scene,
};
use crate::rig::Spin;

/// How a randomised scene is recorded.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case", tag = "kind")]
pub enum Recording {
    /// FFV1 lossless video, 4:2:0 colour.
    Ffv1Colour,
    /// FFV1 lossless video, monochrome.
    Ffv1Mono,
    /// H.264, 4:2:0 colour, at this constant rate factor.
    H264Colour {
        /// Constant rate factor.
        crf: u8,
    },
    /// H.264 of a monochrome camera (neutral chroma).
    H264Mono {
        /// Constant rate factor.
        crf: u8,
    },
    /// Motion JPEG, 4:2:0 colour, at this quantiser scale.
    MjpegColour {
        /// Quantiser scale.
        quality: u8,
    },
    /// A folder of 8-bit RGB PNG stills.
    PngColour,
    /// A folder of 8-bit grey PNG stills.
    PngMono,
    /// A folder of 16-bit grey TIFF stills.
    Tiff16Mono,
}

impl Recording {
    /// True for recordings that keep colour.
    pub fn colour(self) -> bool {
        matches!(
            self,
            Recording::Ffv1Colour
                | Recording::H264Colour { .. }
                | Recording::MjpegColour { .. }
                | Recording::PngColour
        )
    }

    /// True for lossless recordings (the ≤ 0.10° RMS target applies when the scene is also
    /// free of noise, flicker, shake and blur).
    pub fn lossless(self) -> bool {
        matches!(
            self,
            Recording::Ffv1Colour
                | Recording::Ffv1Mono
                | Recording::PngColour
                | Recording::PngMono
                | Recording::Tiff16Mono
        )
    }

    /// A short name.
    pub fn name(self) -> String {
        match self {
            Recording::Ffv1Colour => "ffv1-colour".into(),
            Recording::Ffv1Mono => "ffv1-mono".into(),
            Recording::H264Colour { crf } => format!("h264-colour-crf{crf}"),
            Recording::H264Mono { crf } => format!("h264-mono-crf{crf}"),
            Recording::MjpegColour { quality } => format!("mjpeg-colour-q{quality}"),
            Recording::PngColour => "png-colour".into(),
            Recording::PngMono => "png-mono".into(),
            Recording::Tiff16Mono => "tiff16-mono".into(),
        }
    }
}

/// One randomised scene: the scenario, how it is recorded, and tags saying which hard cases
/// it holds.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct RandomScene {
    /// The scenario (its scene has a [`Look`]).
    pub scenario: Scenario,
    /// The recording.
    pub recording: Recording,
    /// Hard cases drawn: `low-luma-contrast`, `hex-annulus`, `washer`, `wheel-concentric`,
    /// `wheel-hub`, `bracket`, `recess`, `pits`, `rim`, `glint`, `wear`, `flicker`, `shake`,
    /// `roll`, `blur`, `noise`, `vignette`.
    pub tags: Vec<String>,
}

impl RandomScene {
    /// True when the stricter target (≤ 0.10° RMS) applies: a lossless recording of a scene
    /// without noise, flicker, shake or motion blur.
    pub fn clean(&self) -> bool {
        self.recording.lossless()
            && !self
                .tags
                .iter()
                .any(|t| matches!(t.as_str(), "flicker" | "shake" | "roll" | "blur" | "noise"))
    }
}

fn pick<T: Copy>(rng: &mut ChaCha8Rng, items: &[T]) -> T {
    items[rng.random_range(0..items.len())]
}

const FINISHES: [Finish; 4] = [
    Finish::BlackOxide,
    Finish::Zinc,
    Finish::Brushed,
    Finish::Rust,
];

/// Luma of an R′G′B′ colour (ITU-R BT.601-7 §2.5.1 weights).
fn luma(rgb: [f32; 3]) -> f32 {
    0.299 * rgb[0] + 0.587 * rgb[1] + 0.114 * rgb[2]
}

/// Frame size of randomised scenes, px.
const WIDTH: u32 = 384;
const HEIGHT: u32 = 256;

/// Draws the scene named by `seed`. Frames are 384×256: the bench of the named presets with
/// room for a wheel around the nut.
pub fn random_scene(seed: u64) -> RandomScene {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    rng.set_stream(77);
    let mut tags: Vec<String> = Vec::new();
    let mut tag = |t: &str| tags.push(t.to_string());
    let mut sc = Scenario::preset("slow-tool").expect("preset");
    sc.name = format!("random-{seed}");
    sc.description = format!("randomised scene {seed} (held-out evaluation)");
    sc.seed = seed;
    sc.bar = bench_bar();

    // Tool and joint.
    let t = &mut sc.tool;
    t.blow_rate_per_min = rng.random_range(900.0..3600.0);
    t.jitter = rng.random_range(0.0..0.03);
    t.blow_momentum_nms = rng.random_range(0.15..0.3);
    t.back_damping_nms_per_rad = rng.random_range(10.0..30.0);
    t.first_blow_s = rng.random_range(0.004..0.012);
    t.clip_blows = rng.random_range(3..=5);
    sc.joint.snug_torque_nm = rng.random_range(30.0..50.0);
    sc.joint.rate_nm_per_deg = rng.random_range(2.0..4.0);
    sc.joint.breakaway_ratio = rng.random_range(1.05..1.25);

    // Camera: a rate that gives 25 to 140 frames per blow.
    let per_blow = |fps: f64| fps * 60.0 / sc.tool.blow_rate_per_min;
    let rates: Vec<f64> = [1000.0, 2000.0, 4000.0]
        .into_iter()
        .filter(|&f| (25.0..=140.0).contains(&per_blow(f)))
        .collect();
    let fps = if rates.is_empty() {
        2000.0
    } else {
        pick(&mut rng, &rates)
    };
    let blur = rng.random_bool(0.35);
    sc.camera = Camera {
        fps_hz: fps,
        exposure_s: if blur {
            rng.random_range(0.3..1.0) / fps
        } else {
            0.0
        },
        blur_samples: if blur { 4 } else { 1 },
        bit_depth: 8,
        max_frames: None,
        start_s: None,
    };
    if blur {
        tag("blur");
    }

    // Paint and metal.
    let drive_finish = pick(&mut rng, &FINISHES);
    let mut nut_finish = pick(&mut rng, &FINISHES);
    let mut paint = pick(&mut rng, &Paint::ALL);
    let low_contrast = rng.random_bool(0.35);
    let mut paint_rgb = paint
        .rgb()
        .map(|v| (v + rng.random_range(-0.04..0.04)).clamp(0.0, 1.0));
    if low_contrast {
        // A coloured paint whose luma is within 5 % of the metal's: the contrast is in colour.
        if paint == Paint::White {
            paint = Paint::Orange;
            paint_rgb = paint.rgb();
        }
        nut_finish = drive_finish;
        let target = luma(drive_finish.rgb()) * (1.0 + rng.random_range(-0.045..0.045));
        let k = target / luma(paint_rgb);
        paint_rgb = paint_rgb.map(|v| v * k);
        // A brighter target may push a channel past 1: clip it and spread the luma lost over
        // the channels still below 1.
        for _ in 0..4 {
            paint_rgb = paint_rgb.map(|v| v.clamp(0.0, 1.0));
            let lost = target - luma(paint_rgb);
            let free: f32 = [0.299f32, 0.587, 0.114]
                .iter()
                .zip(&paint_rgb)
                .filter(|(_, v)| **v < 1.0)
                .map(|(w, _)| *w)
                .sum();
            if lost.abs() < 1e-4 || free <= 0.0 {
                break;
            }
            paint_rgb = paint_rgb.map(|v| if v < 1.0 { v + lost / free } else { v });
        }
        tag("low-luma-contrast");
    }
    let wear = if rng.random_bool(0.5) {
        tag("wear");
        rng.random_range(0.05..0.35)
    } else {
        0.0
    };
    let paint_strength = rng.random_range(0.65..1.0);

    // Geometry of the bench.
    let mut scene = bench_scene();
    scene.width = WIDTH;
    scene.height = HEIGHT;
    // 4×4 jittered samples at edges (the presets use 16×16): textured scenes cost more per
    // sample, and the held-out set must render in minutes.
    scene.supersample = 4;
    scene.paint = paint;
    scene.tighten = if rng.random_bool(0.5) {
        Spin::Cw
    } else {
        Spin::Ccw
    };
    scene.background_top = rng.random_range(0.05..0.3);
    scene.background_bottom = rng.random_range(0.05..0.3);
    let d = &mut scene.drive;
    d.pivot = [
        82.0 + rng.random_range(-4.0..4.0),
        128.0 + rng.random_range(-6.0..6.0),
    ];
    d.radius_px = rng.random_range(60.0..74.0);
    let recess = if rng.random_bool(0.5) {
        tag("recess");
        rng.random_range(6.0..12.0)
    } else {
        0.0
    };
    let rim = if rng.random_bool(0.5) {
        tag("rim");
        rng.random_range(2.0..5.0)
    } else {
        0.0
    };
    let r_in = (recess * 1.2f64).max(rng.random_range(4.0..14.0));
    d.stripe = Stripe {
        r_inner_px: r_in,
        r_outer_px: d.radius_px - rim - rng.random_range(1.0..8.0),
        width_px: rng.random_range(3.5..9.0),
        start_deg: rng.random_range(-180.0..180.0),
    };
    d.highlight = if rng.random_bool(0.5) {
        tag("glint");
        let a: f64 = rng.random_range(0.0..std::f64::consts::TAU);
        let r = d.radius_px * rng.random_range(0.3..0.8);
        Some(Highlight {
            offset_px: [r * a.cos(), r * a.sin()],
            sigma_px: rng.random_range(2.0..6.0),
            peak: rng.random_range(0.2..0.5),
        })
    } else {
        None
    };
    let n_pits = if rng.random_bool(0.5) {
        tag("pits");
        rng.random_range(1..=8)
    } else {
        0
    };
    let pits: Vec<[f64; 3]> = (0..n_pits)
        .map(|_| {
            let a: f64 = rng.random_range(0.0..std::f64::consts::TAU);
            let r = d.radius_px * rng.random_range(0.15..0.95);
            [r * a.cos(), r * a.sin(), rng.random_range(0.7..2.0)]
        })
        .collect();

    // 0: wheel concentric with the nut, 1: hub elsewhere, 2: bracket, 3: none.
    let fixed_kind = rng.random_range(0..4);
    let n = &mut scene.nut;
    n.pivot = [
        270.0 + rng.random_range(-4.0..4.0),
        128.0 + rng.random_range(-6.0..6.0),
    ];
    // A wheel around the nut needs room for its stripe inside the frame.
    n.across_flats_px = if fixed_kind == 0 {
        rng.random_range(88.0..112.0)
    } else {
        rng.random_range(100.0..132.0)
    };
    n.stud_radius_px = rng.random_range(6.0..12.0);
    n.corner_start_deg = rng.random_range(0.0..60.0);
    let apothem = 0.5 * n.across_flats_px;
    let hex_reach = rng.random_range(0.85..1.12);
    if hex_reach > 1.0 {
        tag("hex-annulus");
    }
    n.stripe = Stripe {
        r_inner_px: n.stud_radius_px + rng.random_range(2.0..6.0),
        r_outer_px: apothem * hex_reach,
        width_px: rng.random_range(3.5..8.0),
        start_deg: rng.random_range(-180.0..180.0),
    };
    let nut_glint = rng.random_bool(0.4).then(|| {
        tag("glint");
        let a: f64 = rng.random_range(0.0..std::f64::consts::TAU);
        let r = apothem * rng.random_range(0.3..0.8);
        Highlight {
            offset_px: [r * a.cos(), r * a.sin()],
            sigma_px: rng.random_range(2.0..5.0),
            peak: rng.random_range(0.15..0.4),
        }
    });
    let corner = apothem / (3f64.sqrt() / 2.0);
    let washer = rng.random_bool(0.5).then(|| {
        tag("washer");
        let k = rng.random_range(0.9..1.05);
        Washer {
            r_outer_px: corner + rng.random_range(3.0..8.0),
            rgb: [0.80 * k, 0.80 * k, 0.77 * k],
        }
    });

    // The fixed mark: on a wheel face concentric with the nut, on a small hub elsewhere, on a
    // bracket, or none.
    let nut_pivot = n.pivot;
    let mut wheel = None;
    let wheel_finish = pick(&mut rng, &FINISHES);
    let bracket_finish = pick(&mut rng, &FINISHES);
    scene.fixed = match fixed_kind {
        0 => {
            tag("wheel-concentric");
            let r0 = washer.map_or(corner, |w| w.r_outer_px) + rng.random_range(4.0..8.0);
            let room = (nut_pivot[1] - 6.0).min(f64::from(WIDTH) - nut_pivot[0] - 6.0);
            let r1 = (r0 + rng.random_range(18.0..26.0)).min(room);
            let up = rng.random_bool(0.5);
            let a = if up { -90.0 } else { 90.0 } + rng.random_range(-25.0..25.0);
            wheel = Some(Wheel {
                centre: nut_pivot,
                radius_px: r1 + rng.random_range(4.0..10.0),
                finish: wheel_finish,
                holes: rng.random_range(4..=6),
                hole_circle_px: 0.5 * (r0 + r1),
                hole_radius_px: rng.random_range(3.0..6.0),
                hole_phase_deg: rng.random_range(0.0..360.0),
            });
            Some(FixedMark {
                pivot: nut_pivot,
                stripe: Stripe {
                    r_inner_px: r0,
                    r_outer_px: r1,
                    width_px: rng.random_range(4.0..8.0),
                    start_deg: a,
                },
                plate_half_px: [0.0, 0.0],
            })
        }
        1 => {
            tag("wheel-hub");
            let c = [
                176.0 + rng.random_range(-10.0..10.0),
                32.0 + rng.random_range(-3.0..3.0),
            ];
            wheel = Some(Wheel {
                centre: c,
                radius_px: 28.0,
                finish: wheel_finish,
                holes: rng.random_range(3..=5),
                hole_circle_px: 15.0,
                hole_radius_px: rng.random_range(2.0..3.5),
                hole_phase_deg: rng.random_range(0.0..360.0),
            });
            Some(FixedMark {
                pivot: c,
                stripe: Stripe {
                    r_inner_px: 5.0,
                    r_outer_px: 25.0,
                    width_px: rng.random_range(4.0..7.0),
                    start_deg: rng.random_range(-180.0..180.0),
                },
                plate_half_px: [0.0, 0.0],
            })
        }
        2 => {
            tag("bracket");
            Some(FixedMark {
                pivot: [
                    160.0 + rng.random_range(-6.0..6.0),
                    30.0 + rng.random_range(-4.0..4.0),
                ],
                stripe: Stripe {
                    r_inner_px: 0.0,
                    r_outer_px: 24.0,
                    width_px: rng.random_range(4.0..7.0),
                    start_deg: rng.random_range(-8.0..8.0),
                },
                plate_half_px: [18.0, 7.0],
            })
        }
        _ => None,
    };
    let has_fixed = scene.fixed.is_some();

    // Lighting and effects.
    let vignette = rng.random_range(0.0..0.3);
    if vignette > 0.15 {
        tag("vignette");
    }
    let gradient = [rng.random_range(-0.2..0.2), rng.random_range(-0.2..0.2)];
    let flicker = rng.random_bool(0.4).then(|| {
        tag("flicker");
        Flicker {
            freq_hz: if rng.random_bool(0.5) { 100.0 } else { 120.0 },
            depth: rng.random_range(0.03..0.15),
            phase_deg: rng.random_range(0.0..360.0),
        }
    });
    let noise = rng.random_range(0.0..0.012);
    if noise > 0.004 {
        tag("noise");
    }
    let shake = if has_fixed && rng.random_bool(0.5) {
        tag("shake");
        rng.random_range(0.2..1.2)
    } else {
        0.0
    };
    let roll = if shake > 0.0 && rng.random_bool(0.3) {
        tag("roll");
        rng.random_range(0.02..0.15)
    } else {
        0.0
    };
    sc.effects = Effects {
        noise_sigma: noise,
        flicker,
        shake_sigma_px: shake,
        shake_roll_sigma_deg: roll,
    };

    scene.look = Some(Look {
        texture_seed: rng.random(),
        paint_rgb: paint_rgb.map(|v| v.clamp(0.0, 1.0)),
        wear,
        paint_strength,
        drive_finish,
        nut_finish,
        recess_half_px: recess,
        pits,
        rim_px: rim,
        light_deg: rng.random_range(-180.0..180.0),
        nut_glint,
        washer,
        wheel,
        bracket_finish,
        vignette,
        gradient,
    });
    sc.scene = scene;

    // Recording: three colour cameras in four.
    let recording = if rng.random_bool(0.75) {
        match rng.random_range(0..4) {
            0 => Recording::Ffv1Colour,
            1 => Recording::PngColour,
            2 => Recording::H264Colour {
                crf: rng.random_range(16..=24),
            },
            _ => Recording::MjpegColour {
                quality: rng.random_range(2..=5),
            },
        }
    } else {
        match rng.random_range(0..4) {
            0 => Recording::Ffv1Mono,
            1 => Recording::PngMono,
            2 => Recording::H264Mono {
                crf: rng.random_range(16..=24),
            },
            _ => Recording::Tiff16Mono,
        }
    };
    if recording == Recording::Tiff16Mono {
        sc.camera.bit_depth = 16;
    }
    tags.sort();
    tags.dedup();
    RandomScene {
        scenario: sc,
        recording,
        tags,
    }
}

/// Parses the held-out seed list: one unsigned integer per line; `#` starts a comment.
///
/// # Errors
/// The first line that is not a seed, with its number.
pub fn parse_seeds(text: &str) -> Result<Vec<u64>, String> {
    let mut out = Vec::new();
    for (i, line) in text.lines().enumerate() {
        let l = line.split('#').next().unwrap_or("").trim();
        if l.is_empty() {
            continue;
        }
        out.push(
            l.parse()
                .map_err(|e| format!("line {}: '{l}' is not a seed: {e}", i + 1))?,
        );
    }
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::synth::{render_frame, simulate};
    use std::path::Path;

    #[test]
    fn the_same_seed_draws_the_same_scene_and_others_differ() {
        assert_eq!(random_scene(11), random_scene(11));
        assert_ne!(random_scene(11).scenario, random_scene(12).scenario);
    }

    #[test]
    fn random_rigs_fit_the_frame_and_scenes_render_in_colour() {
        for seed in 0..24 {
            let r = random_scene(seed);
            let sc = &r.scenario;
            sc.rig()
                .check_frame(Path::new("rig.json"), sc.scene.width, sc.scene.height)
                .unwrap_or_else(|e| panic!("seed {seed}: {e}"));
        }
        let mut sc = random_scene(3).scenario;
        sc.tool.clip_blows = 1;
        sc.camera.bit_depth = 8;
        let t = simulate(&sc);
        let f = render_frame(&sc, &t, 0);
        let c = f.chroma.as_ref().expect("colour");
        assert_eq!((c.width, c.height), (f.width, f.height));
        // The paint's own chroma shows somewhere on the drive stripe.
        assert!(
            c.cb.iter()
                .zip(&c.cr)
                .any(|(&b, &r)| b.abs_diff(128) + r.abs_diff(128) > 20)
        );
    }

    #[test]
    fn low_luma_contrast_pairs_are_within_five_per_cent() {
        let mut seen = 0;
        for seed in 0..60 {
            let r = random_scene(seed);
            if !r.tags.iter().any(|t| t == "low-luma-contrast") {
                continue;
            }
            seen += 1;
            let lk = r.scenario.scene.look.as_ref().unwrap();
            let (p, m) = (luma(lk.paint_rgb), luma(lk.drive_finish.rgb()));
            assert!((p / m - 1.0).abs() < 0.05, "seed {seed}: {p} vs {m}");
        }
        assert!(seen >= 10, "{seen}");
    }

    #[test]
    fn seed_lists_parse_and_bad_lines_are_named() {
        assert_eq!(parse_seeds("# c\n5\n 7 # x\n\n"), Ok(vec![5, 7]));
        assert!(parse_seeds("5\nx\n").unwrap_err().contains("line 2"));
    }
}
