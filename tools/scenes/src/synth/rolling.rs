//! Rolling-shutter clips with known truth: every row of a frame rendered at the instant the
//! sensor reads it. Row y (pixel centres at integer y, docs/conventions.md) is read at
//! `t_frame + ((y + 0.5)/height − 0.5) · readout`, so the frame's middle is read at the
//! frame's own time and the truth (the scenario's [`Truth`], sampled at the frames' times)
//! is the scene at mid-readout. The model is run at every row's instant, not interpolated.

use super::scene::{Pose, Prepared};
use super::{Scenario, Truth, finish_frame};
use crate::decode::Frame;

/// Offset of row `y`'s readout from the middle of the frame's readout, as a fraction of the
/// readout time: −0.5 at the top edge of the picture, +0.5 at its bottom edge.
pub fn row_fraction(y: f64, height: u32) -> f64 {
    (y + 0.5) / f64::from(height) - 0.5
}

/// The frames of `sc` (whose truth is `truth`, from [`super::simulate`]) filmed through a
/// rolling shutter reading a frame out in `readout_s`. Luma scenes without motion blur only;
/// shake and flicker follow the scenario (shake per frame, flicker per row's instant).
///
/// # Panics
/// When the scene renders in colour, with motion blur, or `readout_s` is negative.
pub fn rolling_frames(sc: &Scenario, truth: &Truth, readout_s: f64) -> Vec<Frame> {
    assert!(sc.scene.look.is_none(), "luma scenes only");
    assert_eq!(sc.blur_samples(), 1, "no motion blur");
    assert!(readout_s >= 0.0 && readout_s.is_finite());
    let (model, _) = sc.model();
    let fps = sc.camera.fps_hz;
    let t0 = sc.camera.start_s.unwrap_or(0.0);
    let h = sc.scene.height;
    let frames = truth.frames as usize;
    // Every row's instant, in model time (never before the model's start: the bench is at
    // rest there), run through the model in one ascending pass.
    let mut times: Vec<(f64, usize)> = Vec::with_capacity(frames * h as usize);
    for f in 0..frames {
        for y in 0..h {
            let t = t0 + f as f64 / fps + row_fraction(f64::from(y), h) * readout_s;
            times.push((t.max(model.start), f * h as usize + y as usize));
        }
    }
    times.sort_by(|a, b| a.0.total_cmp(&b.0));
    let (states, _) = model.run(&times.iter().map(|t| t.0).collect::<Vec<_>>());
    let mut slot = vec![(0.0, 0.0, 0.0); frames * h as usize];
    for ((t, i), s) in times.iter().zip(states) {
        slot[*i] = (s.theta_d, s.theta_n, *t - t0);
    }
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
    let prepared = Prepared::new(&sc.scene);
    (0..frames)
        .map(|f| {
            let shift = truth.shake_px.get(f).copied().unwrap_or([0.0, 0.0]);
            let roll_rad = truth
                .shake_roll_deg
                .get(f)
                .copied()
                .unwrap_or(0.0)
                .to_radians();
            let rows: Vec<Pose> = slot[f * h as usize..(f + 1) * h as usize]
                .iter()
                .map(|&(d, n, t)| Pose {
                    drive_rad: d,
                    nut_rad: n,
                    shift,
                    gain: gain(t),
                    roll_rad,
                })
                .collect();
            let img = prepared.render_rows(&rows);
            finish_frame(sc, img, f as u64, 1_000 + f as u64)
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::synth::{render_frame, simulate};

    #[test]
    fn without_readout_time_the_frames_are_the_global_shutter_ones() {
        let mut sc = Scenario::preset("slow-tool").unwrap();
        sc.camera.max_frames = Some(3);
        let truth = simulate(&sc);
        let rs = rolling_frames(&sc, &truth, 0.0);
        for (i, f) in rs.iter().enumerate() {
            assert_eq!(f, &render_frame(&sc, &truth, i as u64), "frame {i}");
        }
    }

    #[test]
    fn the_middle_row_is_read_at_the_frame_time() {
        assert!((row_fraction(-0.5, 720) + 0.5).abs() < 1e-12);
        assert!((row_fraction(719.5, 720) - 0.5).abs() < 1e-12);
        assert!(row_fraction(359.5, 720).abs() < 1e-12);
    }
}

/// A randomised rolling-shutter scene and the readout it is filmed with.
#[derive(Debug, Clone)]
pub struct RollingScene {
    /// The scenario (luma, no blur, no fixed mark).
    pub scenario: Scenario,
    /// The readout time, s (within the frame interval).
    pub readout_s: f64,
}

/// Draws the rolling-shutter scene named by `seed` (held-out list:
/// `tests/held_out_rolling_seeds.txt`): the slow-tool bench at a phone's rate (120, 240 or 480
/// fps), a readout of 20–95 % of the frame interval, a frame 320 px wide and 240, 360 or 480
/// rows high with the drive's and the nut's pivots at independent heights (at least 80 px
/// from the top and bottom edges), 900–1,500 blows/min, 4–6 blows, sensor noise σ 0.004–0.016
/// of full scale, and no fixed mark.
pub fn random_rolling_scene(seed: u64) -> RollingScene {
    use rand::rngs::ChaCha8Rng;
    use rand::{RngExt, SeedableRng};
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    rng.set_stream(91);
    let mut sc = Scenario::preset("slow-tool").expect("preset");
    sc.name = format!("rolling-{seed}");
    sc.description = format!("randomised rolling-shutter scene {seed}");
    sc.seed = seed;
    sc.camera.fps_hz = [120.0, 240.0, 480.0][rng.random_range(0..3usize)];
    let readout_s = rng.random_range(0.2..0.95) / sc.camera.fps_hz;
    let height = [240u32, 360, 480][rng.random_range(0..3usize)];
    sc.scene.height = height;
    let y = |rng: &mut ChaCha8Rng| -> f64 {
        if height <= 240 {
            rng.random_range(110.0..130.0)
        } else {
            rng.random_range(80.0..f64::from(height) - 80.0)
        }
    };
    sc.scene.drive.pivot[1] = y(&mut rng);
    sc.scene.nut.pivot[1] = y(&mut rng);
    sc.scene.fixed = None;
    sc.tool.blow_rate_per_min = rng.random_range(900.0..1500.0);
    sc.tool.clip_blows = rng.random_range(4..=6u32);
    sc.effects.noise_sigma = rng.random_range(0.004..0.016);
    RollingScene {
        scenario: sc,
        readout_s,
    }
}
