//! The nut's onset within one blow, when the nut moved (step 7 of the segment module's doc).
//! Part of the segment stage: it must never import mechanics, report, `analyze`, `batch` or
//! the CLI.

use crate::stats::rest_level;

use super::NUT_MIN_MOVE_DEG;
use super::drive::{argmax, leave_level};

/// The nut's onset within the blow `[onset, end)`, if it moved (step 7 of the segment
/// module's doc). `prev` is the previous blow's onset (0 for the first blow).
pub(super) fn nut_onset(
    raw: &[Option<f64>],
    y: &[f64],
    sigma: f64,
    onset: usize,
    end: usize,
    prev: usize,
) -> Option<usize> {
    if onset >= end || end > y.len() {
        return None;
    }
    let from = onset.saturating_sub(1);
    let (base, q0) = rest_level(raw, from, prev.min(from), sigma).unwrap_or((y[from], 1));
    let (after, q1) = rest_level(raw, end - 1, onset, sigma).unwrap_or((y[end - 1], 1));
    let peak = argmax(y, onset, end - 1);
    let settled = after - base;
    let settled_sigma = sigma * (1.0 / q0 as f64 + 1.0 / q1 as f64).sqrt();
    let moved = settled > NUT_MIN_MOVE_DEG.max(5.0 * settled_sigma)
        || y[peak] - base > NUT_MIN_MOVE_DEG.max(5.0 * sigma);
    if !moved {
        return None;
    }
    // A small advance in noisy angles: find the onset on a trailing mean of w samples, wide
    // enough that the advance stands 6 noise widths clear (a trailing mean only starts to
    // rise at the step itself, so it does not move the onset earlier).
    let rise = settled.max(y[peak] - base).max(f64::MIN_POSITIVE);
    let span = end - from;
    let w = ((6.0 * sigma / rise).powi(2).ceil() as usize).clamp(1, (span / 4).max(1));
    if w == 1 {
        return Some(leave_level(y, from, base, peak, sigma).max(onset));
    }
    // Prefix sums keep this linear in the blow's length whatever w is.
    let lo = (from + 1).saturating_sub(w);
    let mut prefix = Vec::with_capacity(end - lo + 1);
    prefix.push(0.0);
    for v in &y[lo..end] {
        let last = prefix.last().copied().unwrap_or(0.0);
        prefix.push(last + v);
    }
    let ma: Vec<f64> = (from..end)
        .map(|i| {
            let a = (i + 1).saturating_sub(w);
            (prefix[i + 1 - lo] - prefix[a - lo]) / (i + 1 - a) as f64
        })
        .collect();
    let top = argmax(&ma, 0, ma.len() - 1);
    let k = leave_level(&ma, 0, base, top, sigma / (w as f64).sqrt());
    Some((from + k).max(onset))
}
