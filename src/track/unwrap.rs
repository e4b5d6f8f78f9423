//! Continuous angles from wrapped ones, and runs of lost frames.
//!
//! Unwrapping adds whole periods so that each angle is the representative nearest to a
//! reference (the previous angle, or a prediction from recent velocity). This is the
//! definition used by NumPy's `numpy.unwrap` (consecutive differences kept within half a
//! period, with the period as a parameter). A painted stripe on one side of the
//! pivot is a directed mark, so the period is 2π and the true turn between two measured frames
//! must stay under 180°.
//!
//! Part of the track stage: it must never import segment, mechanics, report, `analyze`,
//! `batch`, `find_marks`, `calibrate` or the CLI.

use std::f64::consts::PI;

/// `x` wrapped into (−π, π].
pub(crate) fn wrap_pi(x: f64) -> f64 {
    let y = x.rem_euclid(2.0 * PI);
    if y > PI { y - 2.0 * PI } else { y }
}

/// The value `angle + k·period` (k an integer) nearest to `reference`.
pub(crate) fn unwrap_near(reference: f64, angle: f64, period: f64) -> f64 {
    let d = angle - reference;
    angle - period * (d / period).round()
}

/// Unwraps a sequence with gaps: each known value is moved by whole periods to lie within half
/// a period of the last known value before it. Gaps (`None`) stay `None`.
#[cfg(test)]
pub(crate) fn unwrap_seq(seq: &[Option<f64>], period: f64) -> Vec<Option<f64>> {
    let mut last: Option<f64> = None;
    seq.iter()
        .map(|v| {
            let v = (*v)?;
            let u = match last {
                Some(p) => unwrap_near(p, v, period),
                None => v,
            };
            last = Some(u);
            Some(u)
        })
        .collect()
}

/// Runs of consecutive `None` samples, as inclusive ranges of the matching clip frame indices.
pub(crate) fn lost_runs<T>(seq: &[Option<T>], frames: &[u64]) -> Vec<(u64, u64)> {
    let mut runs = Vec::new();
    let mut start: Option<usize> = None;
    for (i, v) in seq.iter().enumerate() {
        match (v.is_none(), start) {
            (true, None) => start = Some(i),
            (false, Some(s)) => {
                runs.push((frames[s], frames[i - 1]));
                start = None;
            }
            _ => {}
        }
    }
    if let Some(s) = start {
        runs.push((frames[s], frames[seq.len() - 1]));
    }
    runs
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    #[test]
    fn wrap_pi_known_values() {
        assert!((wrap_pi(3.0 * PI) - PI).abs() < 1e-12);
        assert!((wrap_pi(-PI) - PI).abs() < 1e-12);
        assert!((wrap_pi(0.5) - 0.5).abs() < 1e-12);
        assert!((wrap_pi(2.0 * PI + 0.25) - 0.25).abs() < 1e-12);
        assert!((wrap_pi(-2.0 * PI - 0.25) + 0.25).abs() < 1e-12);
    }

    #[test]
    fn unwrap_near_picks_nearest_turn() {
        // numpy.unwrap's documented example: [0, π/2, π, 3π/2, 2π] wrapped stays continuous.
        let wrapped = [0.0, PI / 2.0, PI, -PI / 2.0, 0.0];
        let got: Vec<f64> = unwrap_seq(&wrapped.map(Some), 2.0 * PI)
            .into_iter()
            .map(|v| v.unwrap())
            .collect();
        let want = [0.0, PI / 2.0, PI, 1.5 * PI, 2.0 * PI];
        for (g, w) in got.iter().zip(want) {
            assert!((g - w).abs() < 1e-12, "{got:?}");
        }
        assert!((unwrap_near(10.0, 10.0 - 2.0 * PI + 0.1, 2.0 * PI) - 10.1).abs() < 1e-12);
    }

    #[test]
    fn lost_runs_are_inclusive_frame_ranges() {
        let seq = [Some(1), None, None, Some(2), None];
        let frames = [10, 11, 12, 13, 14];
        assert_eq!(lost_runs(&seq, &frames), vec![(11, 12), (14, 14)]);
        assert!(lost_runs(&[Some(1)], &[0]).is_empty());
    }

    proptest! {
        // Invariant (house style §23): unwrapping a wrapped sequence gives back the original,
        // up to one constant whole turn, when every step is under half a period.
        #[test]
        fn unwrap_inverts_wrap(start in -50.0f64..50.0,
                               steps in proptest::collection::vec(-3.1f64..3.1, 1..200)) {
            let mut truth = vec![start];
            for s in &steps {
                let last = *truth.last().unwrap();
                truth.push(last + s);
            }
            let wrapped: Vec<Option<f64>> = truth.iter().map(|t| Some(wrap_pi(*t))).collect();
            let un = unwrap_seq(&wrapped, 2.0 * PI);
            let offset = un[0].unwrap() - truth[0];
            prop_assert!((offset / (2.0 * PI) - (offset / (2.0 * PI)).round()).abs() < 1e-9);
            for (u, t) in un.iter().zip(&truth) {
                prop_assert!((u.unwrap() - t - offset).abs() < 1e-9);
            }
        }
    }
}
