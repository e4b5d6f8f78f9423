//! Medians used by the combination of rings.
//!
//! Part of the track stage: it must never import segment, mechanics, report, `analyze`,
//! `batch`, `find_marks`, `calibrate` or the CLI.

/// Median of `v` (using `buf` as scratch, no allocation once `buf` has capacity).
pub(super) fn median_of(v: &[f64], buf: &mut Vec<(f64, f64)>) -> f64 {
    buf.clear();
    buf.extend(v.iter().map(|&x| (x, 1.0)));
    if buf.is_empty() {
        return 0.0;
    }
    let mid = buf.len() / 2;
    buf.select_nth_unstable_by(mid, |a, b| a.0.total_cmp(&b.0))
        .1
        .0
}

/// Weighted median of `(value, weight)` pairs (sorts in place).
pub(super) fn weighted_median(v: &mut [(f64, f64)]) -> f64 {
    v.sort_unstable_by(|a, b| a.0.total_cmp(&b.0));
    let total: f64 = v.iter().map(|p| p.1).sum();
    let mut acc = 0.0;
    for p in v.iter() {
        acc += p.1;
        if acc >= 0.5 * total {
            return p.0;
        }
    }
    v.last().map_or(0.0, |p| p.0)
}
