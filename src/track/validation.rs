//! The tracker's validated uncertainty: how far its twist readings were from the truth on
//! rendered scenes with known truth, beyond what the clip's own frame-to-frame noise shows.
//! Part of the track stage: it must never import segment, mechanics, report, `analyze`,
//! `batch` or the CLI.
//!
//! Why a clip cannot show it: the noise estimate (`segment::noise_sigma`, from second
//! differences) sees only what changes from frame to frame. An error that follows the motion
//! does not: a lossy codec that leaves a slowly receding part where it was for a run of frames
//! (a skipped block repeats it exactly, so those frames even read as noise-free), colour coded
//! coarser and later than brightness, a stripe smeared by the codec in the frames where it
//! moves fastest. On the project's tuning scenes a peak twist read off H.264 was up to 1.4°
//! from the truth while its clip's noise was 0.005°, and one printed peak torque in nine had
//! an interval that missed the truth.
//!
//! So every twist interval carries one more standard uncertainty, evaluated from validation
//! data (a Type B evaluation, JCGM 100:2008, §4.3; the use of a method's validation
//! performance in its uncertainty is ISO 21748:2017's approach). Two sources are told apart,
//! each measurable on the clip itself, and added in quadrature as independent: the recording
//! (lossy or lossless, from the codec) and the camera's motion (the fixed mark's registered
//! shift; the shake correction removes most of a moving camera's effect, not all). For each,
//! the figure is the smallest σ that, added in quadrature to every other term of the
//! peak-twist interval, lets 95 % of the blows' intervals hold their true peak twist, on the
//! scenes where that source acts alone. Measured on the tuning seeds 101–230 of the randomised
//! scenes (`twistmark_scenes::synth::random`, two blows each; 195 blows measured and matched to
//! the truth), 5 December 2026:
//!
//! | blows of | blows | scenes | covered with no term | σ that covers 95 % |
//! |---|---|---|---|---|
//! | lossless, still camera | 74 | 37 | 66 | 0.02° |
//! | lossless, camera moved | 36 | 18 | 24 | 0.22° (the motion's share: √(0.215² − 0.02²)) |
//! | lossy, still camera | 62 | 33 | 28 | 0.36° |
//! | lossy, camera moved | 23 | 12 | 17 | 0.33° (the two terms together give 0.42°) |
//!
//! The camera counts as moved when the fixed mark's shift from the first frame has a root mean
//! square of at least [`CAMERA_MOVED_PX`]: on those scenes every still camera measured at most
//! 0.08 px and every shaken one at least 0.43 px. Without a fixed mark the motion is unknown
//! and only the recording's term is used. Whether the mark was tracked on colour or on luma
//! did not split the lossy blows usefully (most were on colour; the 16 on luma alone were too
//! few to set a figure of their own), so the lossy figure holds for both. With these terms
//! 188 of the 195 blows' intervals hold the truth (96 %), and 95 of the 100 scenes' printed
//! peak torques (11 missed before; docs/accuracy.md, "Interval coverage").
//!
//! Regenerate the blows with `HELD_OUT_BLOW_CSV=blows.csv HELD_OUT_BLOWS=2
//! TUNE_SEEDS=$(seq -s, 101 230) cargo test --release --test it
//! held_out::regenerate_held_out_table -- --ignored --nocapture`. These are rendered scenes of
//! the project's own bench, not real footage; the held-out seeds check whether the figures
//! carry over.

/// Standard uncertainty of a twist reading from tracking errors the noise does not show, on a
/// recording that stores every sample exactly, degrees.
pub const LOSSLESS_TWIST_SIGMA_DEG: f64 = 0.02;
/// As [`LOSSLESS_TWIST_SIGMA_DEG`], on a lossy recording (H.264, MJPEG and any codec not known
/// to be lossless), degrees.
pub const LOSSY_TWIST_SIGMA_DEG: f64 = 0.36;
/// Added in quadrature when the camera moved (after the shake correction), degrees.
pub const MOVED_CAMERA_TWIST_SIGMA_DEG: f64 = 0.22;
/// The fixed mark's RMS shift from the first frame at and above which the camera moved, px.
pub const CAMERA_MOVED_PX: f64 = 0.25;

/// The validated standard uncertainty of a twist reading, degrees, for a clip recorded
/// lossily (`lossy`) or not, whose camera moved by `camera_shift_rms_px` (the fixed mark's RMS
/// shift from the first frame; None when the clip has no fixed mark to measure it).
pub fn twist_sigma_deg(lossy: bool, camera_shift_rms_px: Option<f64>) -> f64 {
    let recording = if lossy {
        LOSSY_TWIST_SIGMA_DEG
    } else {
        LOSSLESS_TWIST_SIGMA_DEG
    };
    let moved = camera_shift_rms_px.is_some_and(|s| s >= CAMERA_MOVED_PX);
    recording.hypot(if moved {
        MOVED_CAMERA_TWIST_SIGMA_DEG
    } else {
        0.0
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_recording_and_the_camera_add_in_quadrature() {
        assert_eq!(twist_sigma_deg(false, None), LOSSLESS_TWIST_SIGMA_DEG);
        assert_eq!(twist_sigma_deg(true, Some(0.08)), LOSSY_TWIST_SIGMA_DEG);
        let both = twist_sigma_deg(true, Some(1.0));
        assert!((both - 0.36f64.hypot(0.22)).abs() < 1e-12, "{both}");
        assert!(twist_sigma_deg(false, Some(0.25)) > 0.2);
    }
}
