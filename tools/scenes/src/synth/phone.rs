//! Phone-like clips with known truth: a scene filmed at a phone's capture rate, then made
//! into what a slow-motion mode writes. Frames up-converted by blending or by a simple
//! motion-compensated interpolation, repeated frames, and presentation timestamps with
//! jitter, rounded to the container's tick. The captured frames are exactly the renderer's
//! frames of the scenario, so its [`Truth`] holds for them (its per-blow peaks are the peaks
//! over captured frames).

use rand::SeedableRng;
use rand::rngs::ChaCha8Rng;

use super::scene::{Pose, Prepared};
use super::{Scenario, Truth, gauss, render_frame};
use crate::decode::{Frame, Luma};

/// How a slow-motion mode makes the frames it did not capture.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Upconvert {
    /// Each made frame is a weighted mean of the two captured frames around it.
    Blend,
    /// Each made frame shows the scene at the intermediate pose (the marks moved, not faded),
    /// with the two captured frames' noise averaged where nothing moves, as a warping
    /// interpolator gives.
    MotionCompensated,
}

/// What to make of a captured clip.
#[derive(Debug, Clone, PartialEq)]
pub struct PhoneSpec {
    /// Frames written per captured frame (4: 240 fps written as 960); 1 writes only the
    /// captured frames.
    pub upsample: u32,
    /// How the made frames are made.
    pub upconvert: Upconvert,
    /// Repeat every this many'th captured frame once (an encoder repeating a frame); None:
    /// no repeats.
    pub repeat_every: Option<u32>,
    /// Standard deviation of the timestamp jitter, as a fraction of the written interval.
    pub jitter: f64,
    /// The container's timestamp tick, s (1/90,000 in MPEG-4 files from phones).
    pub tick_s: f64,
    /// Seed for the jitter.
    pub seed: u64,
}

impl Default for PhoneSpec {
    fn default() -> Self {
        PhoneSpec {
            upsample: 4,
            upconvert: Upconvert::Blend,
            repeat_every: None,
            jitter: 0.03,
            tick_s: 1.0 / 90_000.0,
            seed: 7,
        }
    }
}

/// A phone-like clip and its truth.
#[derive(Debug, Clone)]
pub struct PhoneClip {
    /// The frames written, indexed 0.. in order.
    pub frames: Vec<Frame>,
    /// Each frame's presentation time, s, on the container's tick.
    pub times_s: Vec<f64>,
    /// True for the frames that were made, not captured.
    pub synthetic: Vec<bool>,
    /// For a captured frame, its index in the scenario's clip.
    pub captured: Vec<Option<u64>>,
    /// The rate the container states (capture rate × upsample).
    pub container_fps_hz: f64,
}

/// Makes the phone-like clip of a simulated scenario (8-bit luma scenes only).
///
/// # Panics
/// When `upsample` is 0 or the scene renders in colour or deeper than 8 bits.
pub fn phone_clip(sc: &Scenario, truth: &Truth, spec: &PhoneSpec) -> PhoneClip {
    assert!(spec.upsample >= 1);
    assert!(sc.scene.look.is_none() && sc.camera.bit_depth == 8);
    let fps = sc.camera.fps_hz;
    let up = spec.upsample;
    let out_dt = 1.0 / (fps * f64::from(up));
    let captured: Vec<Frame> = (0..truth.frames)
        .map(|i| render_frame(sc, truth, i))
        .collect();
    let prepared = Prepared::new(&sc.scene);
    let mut out = PhoneClip {
        frames: Vec::new(),
        times_s: Vec::new(),
        synthetic: Vec::new(),
        captured: Vec::new(),
        container_fps_hz: fps * f64::from(up),
    };
    // Nominal times; jitter and rounding are applied at the end.
    let mut nominal: Vec<f64> = Vec::new();
    for (k, f) in captured.iter().enumerate() {
        let t = k as f64 / fps;
        out.frames.push(f.clone());
        out.synthetic.push(false);
        out.captured.push(Some(k as u64));
        nominal.push(t);
        if spec
            .repeat_every
            .is_some_and(|n| n > 0 && k % n as usize == n as usize - 1)
        {
            out.frames.push(f.clone());
            out.synthetic.push(true);
            out.captured.push(None);
            nominal.push(t + 0.5 * out_dt);
        }
        let Some(next) = captured.get(k + 1) else {
            continue;
        };
        for j in 1..up {
            let w = f64::from(j) / f64::from(up);
            let made = match spec.upconvert {
                Upconvert::Blend => mix(f, next, w, None),
                Upconvert::MotionCompensated => {
                    let (a, b) = (pose(truth, k), pose(truth, k + 1));
                    let clean = |p: &Pose| prepared.render(std::slice::from_ref(p));
                    let (ca, cb) = (clean(&a), clean(&b));
                    let mid = clean(&lerp(&a, &b, w));
                    // Moving content at the intermediate pose; elsewhere the two frames'
                    // pixels averaged, their noise with them.
                    let moved: Vec<f32> = mid
                        .iter()
                        .zip(ca.iter().zip(&cb))
                        .map(|(m, (x, y))| m - ((1.0 - w as f32) * x + w as f32 * y))
                        .collect();
                    mix(f, next, w, Some(&moved))
                }
            };
            out.frames.push(made);
            out.synthetic.push(true);
            out.captured.push(None);
            nominal.push(t + f64::from(j) * out_dt);
        }
    }
    let mut rng = ChaCha8Rng::seed_from_u64(spec.seed);
    rng.set_stream(31);
    let mut last = f64::NEG_INFINITY;
    for (i, t) in nominal.iter().enumerate() {
        let jit = spec.jitter * out_dt * gauss(&mut rng);
        let mut ticks = ((t + jit) / spec.tick_s).round();
        // Presentation times only increase.
        if ticks * spec.tick_s <= last {
            ticks = (last / spec.tick_s).round() + 1.0;
        }
        last = ticks * spec.tick_s;
        out.times_s.push(last);
        out.frames[i].index = i as u64;
    }
    let t0 = out.times_s[0];
    out.times_s.iter_mut().for_each(|t| *t -= t0);
    out
}

/// The pose the renderer used for captured frame `k`.
fn pose(truth: &Truth, k: usize) -> Pose {
    let ns = (truth.poses.0.len() / truth.frames.max(1) as usize).max(1);
    truth.poses.0[k * ns + ns / 2]
}

fn lerp(a: &Pose, b: &Pose, w: f64) -> Pose {
    let l = |x: f64, y: f64| x + w * (y - x);
    Pose {
        drive_rad: l(a.drive_rad, b.drive_rad),
        nut_rad: l(a.nut_rad, b.nut_rad),
        shift: [l(a.shift[0], b.shift[0]), l(a.shift[1], b.shift[1])],
        gain: l(f64::from(a.gain), f64::from(b.gain)) as f32,
        roll_rad: l(a.roll_rad, b.roll_rad),
    }
}

/// (1 − w)·a + w·b (+ `add`, in 0..1 units), quantised to 8 bits.
fn mix(a: &Frame, b: &Frame, w: f64, add: Option<&[f32]>) -> Frame {
    let (Luma::U8(x), Luma::U8(y)) = (&a.luma, &b.luma) else {
        panic!("8-bit frames");
    };
    let w = w as f32;
    let data = x
        .iter()
        .zip(y)
        .enumerate()
        .map(|(i, (&p, &q))| {
            let v = (1.0 - w) * f32::from(p) + w * f32::from(q) + add.map_or(0.0, |d| 255.0 * d[i]);
            v.round().clamp(0.0, 255.0) as u8
        })
        .collect();
    Frame::from_u8(0, a.width, a.height, data)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::analyze::{AnalyzeOptions, analyze_source};
    use crate::decode::MemorySource;
    use crate::synth::simulate;
    use crate::timing::TimingSource;

    /// The slow tool filmed by a phone at 240 fps with sensor noise of 3 sample steps.
    fn phone_scene() -> Scenario {
        let mut sc = Scenario::preset("slow-tool").unwrap();
        sc.camera.fps_hz = 240.0;
        sc.effects.noise_sigma = 0.012;
        sc.seed = 11;
        sc
    }

    /// Analyses a phone clip as the CLI would with no capture rate given: timed by its
    /// timestamps. Returns the analysis.
    fn analyse(sc: &Scenario, clip: &PhoneClip) -> crate::Analysis {
        let mut rig = sc.rig();
        rig.capture_fps_hz = None;
        let src = MemorySource::with_times(
            clip.frames.clone(),
            Some(clip.container_fps_hz),
            clip.times_s.clone(),
            1.0 / 90_000.0,
        );
        analyze_source(
            Box::new(src),
            &rig,
            std::path::Path::new("rig.json"),
            &AnalyzeOptions::default(),
            &|_, _| {},
        )
        .unwrap()
    }

    /// Rendered clips with known truth (a check against the renderer, not the world): every
    /// blow found, peak torque within 5 % of the peak over captured frames, ≥ 95 % of the
    /// made frames flagged and no captured frame flagged.
    fn check(spec: &PhoneSpec) {
        let sc = phone_scene();
        let truth = simulate(&sc);
        let clip = phone_clip(&sc, &truth, spec);
        let a = analyse(&sc, &clip);
        assert_eq!(a.timing.source, TimingSource::Timestamps);
        let made = clip.synthetic.iter().filter(|&&s| s).count();
        let hit = (0..clip.frames.len())
            .filter(|&i| clip.synthetic[i] && a.trace.is_synthetic(i))
            .count();
        let false_flags = (0..clip.frames.len())
            .filter(|&i| !clip.synthetic[i] && a.trace.is_synthetic(i))
            .count();
        assert!(
            hit as f64 >= 0.95 * made as f64,
            "{spec:?}: flagged {hit} of {made}"
        );
        assert_eq!(false_flags, 0, "{spec:?}");
        assert_eq!(
            a.blows.len(),
            truth.blows.len(),
            "{spec:?}: {:?}",
            a.warnings
        );
        for (b, t) in a.blows.iter().zip(&truth.blows) {
            // The onset is a captured frame within one of the truth's.
            let cap = clip.captured[b.frame as usize].expect("onset on a captured frame");
            assert!(cap.abs_diff(t.frame) <= 1, "{spec:?}: blow {}", b.index);
            let q = b.peak_torque.unwrap().nm();
            assert!(
                (q - t.peak_torque_nm).abs() <= 0.05 * t.peak_torque_nm,
                "{spec:?}: blow {} peak {q:.1} N·m, truth {:.1}",
                b.index,
                t.peak_torque_nm
            );
        }
        // At 240 fps a blow's rise spans a frame or two: the under-sampling warning names the
        // rate really captured, not the file's.
        assert!(
            a.warnings.iter().any(|w| {
                let t = w.to_string();
                t.contains("fps a blow's twist rises")
                    && (t.contains("at 23") || t.contains("at 24"))
            }),
            "{spec:?}: {:?}",
            a.warnings
        );
        let rate = a.segmentation.rate_per_min.unwrap();
        let want = truth.summary.blow_rate_per_min.unwrap();
        assert!((rate - want).abs() < 0.03 * want, "{rate} vs {want}");
    }

    #[test]
    fn blended_960_from_240_with_jitter() {
        check(&PhoneSpec::default());
    }

    #[test]
    fn motion_compensated_960_from_240() {
        check(&PhoneSpec {
            upconvert: Upconvert::MotionCompensated,
            ..PhoneSpec::default()
        });
    }

    #[test]
    fn repeated_frames_at_the_capture_rate() {
        check(&PhoneSpec {
            upsample: 1,
            repeat_every: Some(7),
            ..PhoneSpec::default()
        });
    }
}
