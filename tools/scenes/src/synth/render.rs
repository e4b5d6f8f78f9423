//! Frames of a simulated clip: the clean scene at the truth's poses, then flicker, shake,
//! seeded sensor noise and quantisation to the camera's depth (luma, or Y′CbCr for a scene
//! with a colour look), and the bench at rest for the zero still.

use rand::SeedableRng;
use rand::rngs::ChaCha8Rng;

use super::scene::{Pose, Prepared};
use super::{Scenario, Truth, gauss};
use crate::decode::{Frame, Luma};

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
/// [`Look`](super::Look) is rendered here in luma only.
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
pub(super) fn finish_frame(sc: &Scenario, mut img: Vec<f32>, index: u64, stream: u64) -> Frame {
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

/// A frame of a scene with a [`Look`](super::Look): Y′ as [`render_frame`] quantises it (noise, depth),
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
    use crate::rig::{Mark, Spin};
    use crate::synth::{Effects, Flicker, simulate};

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
}
