//! Is it still the same stripe? Frames where a radial mark's tracked "stripe" lies askew of
//! the stripe seen in the clip's first frames are read on something else, and are made null.
//! Part of the track stage: it must never import segment, mechanics, report, `analyze`,
//! `batch`, `find_marks`, `calibrate` or the CLI.
//!
//! Why it holds by construction: a painted stripe is fixed to its part, so the direction of
//! the straight line through its ring crossings turns exactly with the part, and its offset
//! from the measured angle (`refine::direction_offset`) is a property of the paint: constant,
//! up to the slow curve a pivot error adds (a few tenths of a degree) and the line fit's own
//! noise. When the tracker slips onto another feature in the annulus (a scratch, the edge of
//! a recess, a bolt hole, the stripe's own blurred trail), the angle may still move
//! plausibly, but that feature's "line" has a shape of its own and the offset jumps. On tuning
//! seed 202 (H.264, a recess and pits under the drive stripe) the drive slipped 14° at its
//! second blow and was read on another feature for the last 40 % of the clip, with full
//! confidence and no check failing; its offset there was 26–28° from the first frames', and a
//! torque of +118 % was printed.
//!
//! The reference is the median offset of the first [`REFERENCE_FRAMES`] measured frames (the
//! first frame is where the stripe was identified, and every later check is relative to it),
//! so a slip that lasts most of the clip is still found. A frame is askew when its offset
//! differs from the reference by more than [`MIN_SKEW_DEG`], or [`SPREAD_FACTOR`] times the
//! reference frames' robust spread about it when that is larger (a short or noisy stripe's
//! line is less certain). On tuning seeds 101–230 (28,500 frames whose angle was within
//! 0.5° of the truth) the largest such difference was 3.9° (seed 186's drive, a noisy
//! stripe whose first frames' spread, 3.0°, puts its limit at 18°), the nearest to its limit
//! 2.8° against 10° (seed 131's nut); every one of the 94 frames where the tracker had
//! slipped more than 3° was 25.7° or more askew. The limit sits between the two with a
//! factor of 2.5 to spare on each side.

use super::unwrap::wrap_pi;

/// Measured frames from the start of the clip that fix the stripe's own offset.
pub(crate) const REFERENCE_FRAMES: usize = 32;
/// Fewer measured frames than this in the reference window: no check (too little to trust).
const MIN_REFERENCE_FRAMES: usize = 8;
/// The smallest skew (degrees) taken as another feature.
pub(crate) const MIN_SKEW_DEG: f64 = 10.0;
/// The skew limit in robust spreads (1.4826 × the median absolute difference from the
/// reference: the standard deviation for normal scatter; Rousseeuw & Croux, "Alternatives to
/// the median absolute deviation", JASA 88 (1993) 1273–1283) when that is above
/// [`MIN_SKEW_DEG`].
const SPREAD_FACTOR: f64 = 6.0;

/// Runs of frames (first and last index, inclusive, and the largest skew in degrees) whose
/// stripe line lies askew of the first frames' by more than the limit. Frames with no
/// offset (lost, or no line fitted) neither start nor end a run.
pub(crate) fn askew_runs(offsets: &[Option<f64>]) -> Vec<(usize, usize, f64)> {
    let mut first: Vec<f64> = offsets
        .iter()
        .flatten()
        .take(REFERENCE_FRAMES)
        .copied()
        .collect();
    if first.len() < MIN_REFERENCE_FRAMES {
        return Vec::new();
    }
    let Some(reference) = crate::stats::median_in_place(&mut first) else {
        return Vec::new();
    };
    // The spread is the reference window's own: over the whole clip a slip that lasts most
    // of it would be the spread.
    let mut own: Vec<f64> = first.iter().map(|o| wrap_pi(o - reference).abs()).collect();
    let spread = 1.4826 * crate::stats::median_in_place(&mut own).unwrap_or(0.0);
    let skew: Vec<Option<f64>> = offsets
        .iter()
        .map(|o| o.map(|o| wrap_pi(o - reference).abs()))
        .collect();
    let limit = MIN_SKEW_DEG.to_radians().max(SPREAD_FACTOR * spread);
    let mut runs = Vec::new();
    let mut open: Option<(usize, usize, f64)> = None;
    for (i, s) in skew.iter().enumerate() {
        match *s {
            Some(s) if s > limit => {
                let deg = s.to_degrees();
                open = Some(match open {
                    Some((from, _, worst)) => (from, i, worst.max(deg)),
                    None => (i, i, deg),
                });
            }
            Some(_) => runs.extend(open.take()),
            None => {}
        }
    }
    runs.extend(open);
    runs
}

#[cfg(test)]
mod tests {
    use super::*;

    fn deg(v: f64) -> Option<f64> {
        Some(v.to_radians())
    }

    #[test]
    fn a_slip_onto_another_feature_is_found_even_when_it_lasts_most_of_the_clip() {
        // 40 frames of the stripe (offset 0.5° with ±2° of line-fit scatter), then 160 frames
        // on a feature whose line lies 27° askew, with two lost frames inside the slip.
        let mut o: Vec<Option<f64>> = (0..40)
            .map(|i| deg(0.5 + 2.0 * ((i as f64) * 1.7).sin()))
            .collect();
        o.extend((0..160).map(|i| deg(-26.5 + 0.5 * ((i as f64) * 0.9).cos())));
        o[100] = None;
        o[101] = None;
        let runs = askew_runs(&o);
        assert_eq!(runs.len(), 1, "{runs:?}");
        assert_eq!((runs[0].0, runs[0].1), (40, 199));
        assert!((runs[0].2 - 27.0).abs() < 1.5, "{}", runs[0].2);
    }

    #[test]
    fn a_noisy_stripe_that_stays_itself_is_kept() {
        // Line-fit scatter up to ±4° (the noisiest stripe seen on the tuning seeds) and a slow
        // pivot-error curve of half a degree: nothing is askew.
        let o: Vec<Option<f64>> = (0..300)
            .map(|i| {
                let i = i as f64;
                deg(1.0 + 4.0 * (i * 2.3).sin() * (i * 0.37).cos() + 0.5 * (i / 300.0))
            })
            .collect();
        assert!(askew_runs(&o).is_empty());
    }

    #[test]
    fn a_single_frame_far_off_is_its_own_run_and_too_few_frames_are_not_judged() {
        let mut o: Vec<Option<f64>> = (0..50).map(|_| deg(0.2)).collect();
        o[30] = deg(15.0);
        let runs = askew_runs(&o);
        assert_eq!(runs.len(), 1);
        assert_eq!((runs[0].0, runs[0].1), (30, 30));
        let few: Vec<Option<f64>> = [deg(0.0), deg(30.0), None, deg(30.0)].to_vec();
        assert!(askew_runs(&few).is_empty());
    }
}
