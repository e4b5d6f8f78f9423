//! Small robust statistics shared by the stages: medians (of a slice, in place, of three) and
//! quantiles of finite values, a
//! self-weighted median, the median absolute deviation, the level of a trace at a sample (a
//! least-squares line, or the mean of a quiet run), and the 3×3 linear solve of the small
//! least-squares fits. Plain functions of slices; this module imports nothing from the
//! pipeline (no decode, track, segment, mechanics or report), so every stage may use it.
//!
//! A shared leaf: it must never import any other module of the crate.

/// Solves the 3×3 system `a·x = b` by Cramer's rule; None when the determinant is not finite
/// or its magnitude is below `min_det` (singular for the caller's scale).
pub(crate) fn solve3(a: [[f64; 3]; 3], b: [f64; 3], min_det: f64) -> Option<[f64; 3]> {
    let det = |m: &[[f64; 3]; 3]| {
        m[0][0] * (m[1][1] * m[2][2] - m[1][2] * m[2][1])
            - m[0][1] * (m[1][0] * m[2][2] - m[1][2] * m[2][0])
            + m[0][2] * (m[1][0] * m[2][1] - m[1][1] * m[2][0])
    };
    let d = det(&a);
    if !d.is_finite() || d.abs() < min_det {
        return None;
    }
    let mut x = [0.0; 3];
    for (c, xc) in x.iter_mut().enumerate() {
        let mut m = a;
        for r in 0..3 {
            m[r][c] = b[r];
        }
        *xc = det(&m) / d;
    }
    Some(x)
}

/// Median of the finite values (None when there are none): the middle value, or the mean of
/// the two middle ones.
pub(crate) fn median(v: &[f64]) -> Option<f64> {
    let mut s: Vec<f64> = v.iter().copied().filter(|x| x.is_finite()).collect();
    median_in_place(&mut s)
}

/// Median of `v`, sorting it in place (no allocation, for per-frame work): the middle value,
/// or the mean of the two middle ones; None when empty. The caller passes finite values.
pub(crate) fn median_in_place(v: &mut [f64]) -> Option<f64> {
    v.sort_by(f64::total_cmp);
    let n = v.len();
    match n {
        0 => None,
        _ if n % 2 == 1 => Some(v[n / 2]),
        _ => Some(0.5 * (v[n / 2 - 1] + v[n / 2])),
    }
}

/// The upper median of `v` (the value at index len/2 once ordered; reorders `v`, no
/// allocation, linear time); None when empty.
pub(crate) fn upper_median_f32(v: &mut [f32]) -> Option<f32> {
    if v.is_empty() {
        return None;
    }
    let m = v.len() / 2;
    let (_, x, _) = v.select_nth_unstable_by(m, f32::total_cmp);
    Some(*x)
}

/// The middle one of three values.
pub(crate) fn median3([a, b, c]: [f64; 3]) -> f64 {
    a.max(b).min(a.min(b).max(c))
}

/// Linear-interpolated quantile q ∈ [0, 1] of the finite values (None when there are none).
pub(crate) fn quantile(v: &[f64], q: f64) -> Option<f64> {
    let mut s: Vec<f64> = v.iter().copied().filter(|x| x.is_finite()).collect();
    if s.is_empty() {
        return None;
    }
    s.sort_by(f64::total_cmp);
    let pos = q.clamp(0.0, 1.0) * (s.len() - 1) as f64;
    let lo = pos.floor() as usize;
    let hi = pos.ceil() as usize;
    Some(s[lo] + (pos - lo as f64) * (s[hi] - s[lo]))
}

/// Median absolute deviation of the finite values about their median (not scaled; × 1.4826
/// matches a Gaussian σ: Rousseeuw & Croux, "Alternatives to the median absolute deviation",
/// J. Amer. Statist. Assoc. 88 (1993) 1273–1283). None when there are none.
pub(crate) fn mad(v: &[f64]) -> Option<f64> {
    let med = median(v)?;
    let dev: Vec<f64> = v.iter().map(|d| (d - med).abs()).collect();
    median(&dev)
}

/// The self-weighted median of positive values: the value below which half of the total
/// lies (each value weighted by itself; non-finite and non-positive values are left out).
/// Many small values carry little of the total, so this stays at the size of the large ones
/// even when small ones outnumber them. None when no value is left.
pub(crate) fn weighted_median(amps: &[f64]) -> Option<f64> {
    let mut a: Vec<f64> = amps
        .iter()
        .copied()
        .filter(|x| x.is_finite() && *x > 0.0)
        .collect();
    a.sort_by(f64::total_cmp);
    let total: f64 = a.iter().sum();
    let mut acc = 0.0;
    for &x in &a {
        acc += x;
        if acc >= 0.5 * total {
            return Some(x);
        }
    }
    a.last().copied()
}

/// The level at sample `k`, from a least-squares straight line through the measured samples
/// among the `m` samples ending at `k` (a line, so that a slow spring-back or creep does not
/// bias it). Falls back to the nearest measured sample at or before `k`; None when there is
/// none.
pub(crate) fn level_at(v: &[Option<f64>], k: usize, m: usize) -> Option<f64> {
    if k >= v.len() {
        return None;
    }
    let a = (k + 1).saturating_sub(m.max(1));
    let pts: Vec<(f64, f64)> = (a..=k)
        .filter_map(|i| v[i].map(|y| (i as f64, y)))
        .collect();
    match pts.len() {
        0 => (0..a).rev().find_map(|i| v[i]),
        1 => Some(pts[0].1),
        len => {
            let nf = len as f64;
            let mx = pts.iter().map(|p| p.0).sum::<f64>() / nf;
            let my = pts.iter().map(|p| p.1).sum::<f64>() / nf;
            let sxx: f64 = pts.iter().map(|p| (p.0 - mx).powi(2)).sum();
            let sxy: f64 = pts.iter().map(|p| (p.0 - mx) * (p.1 - my)).sum();
            let slope = if sxx > 0.0 { sxy / sxx } else { 0.0 };
            Some(my + slope * (k as f64 - mx))
        }
    }
}

/// The rest level of a trace `v` (degrees; None where lost) at sample `k`: the mean of the longest run of measured samples
/// ending at `k` (and not before `lo`) that agree with their running mean within
/// 3σ·√(1 + 1/count) (σ = `sigma_deg`), starting from the median of the last three samples; one stray sample
/// is skipped, two in a row end the run. A mark at rest between blows is averaged over its
/// whole quiet spell; its motion within the blow ends the run, so the motion never enters
/// the mean. None when `[lo, k]` holds no measured sample; else the level and the number of
/// samples averaged.
pub(crate) fn rest_level(
    v: &[Option<f64>],
    k: usize,
    lo: usize,
    sigma_deg: f64,
) -> Option<(f64, usize)> {
    if k >= v.len() || lo > k {
        return None;
    }
    let mut samples = (lo..=k).rev().filter_map(|i| v[i]);
    let first: Vec<f64> = samples.by_ref().take(3).collect();
    // Start from the median of the last three samples, so one noisy sample at `k` does not
    // set the level.
    let mut start = first.clone();
    start.sort_by(f64::total_cmp);
    let center0 = *start.get(start.len() / 2)?;
    let (mut sum, mut count, mut misses) = (0.0, 0usize, 0usize);
    for y in first.into_iter().chain(samples) {
        let center = if count == 0 {
            center0
        } else {
            sum / count as f64
        };
        let tol = 3.0 * sigma_deg * (1.0 + 1.0 / count.max(1) as f64).sqrt();
        if (y - center).abs() <= tol {
            sum += y;
            count += 1;
            misses = 0;
        } else {
            // One stray sample is skipped; two in a row end the quiet spell.
            misses += 1;
            if misses == 2 {
                break;
            }
        }
    }
    (count > 0).then(|| (sum / count as f64, count))
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    #[test]
    fn medians_and_quantiles_of_small_sets() {
        assert_eq!(median(&[3.0, 1.0, 2.0]), Some(2.0));
        assert_eq!(median(&[4.0, 1.0, 2.0, 3.0]), Some(2.5));
        assert_eq!(median(&[f64::NAN, 5.0, f64::INFINITY]), Some(5.0));
        assert_eq!(median(&[]), None);
        assert_eq!(quantile(&[0.0, 10.0], 0.25), Some(2.5));
        assert_eq!(quantile(&[0.0, 10.0], 7.0), Some(10.0));
        assert_eq!(mad(&[1.0, 2.0, 3.0, 4.0, 100.0]), Some(1.0));
        // Half of the total 1 + 1 + 1 + 1 + 8 = 12 lies at or below 8, not at 1.
        assert_eq!(weighted_median(&[1.0, 1.0, 1.0, 1.0, 8.0]), Some(8.0));
        assert_eq!(weighted_median(&[-1.0, 0.0]), None);
    }

    #[test]
    fn level_at_fits_a_line() {
        let v: Vec<Option<f64>> = (0..10).map(|i| Some(2.0 * i as f64 + 1.0)).collect();
        assert!((level_at(&v, 9, 5).unwrap() - 19.0).abs() < 1e-12);
        let g = vec![None, Some(3.0), None, None];
        assert_eq!(level_at(&g, 3, 2), Some(3.0));
        assert_eq!(level_at(&[None, None], 1, 4), None);
    }

    #[test]
    fn rest_level_averages_the_quiet_run_and_stops_at_motion() {
        // Quiet at 5.0 ± 0.01 for ten samples, after a move from 0: the run stops at the move.
        let mut v: Vec<Option<f64>> = vec![Some(0.0); 5];
        v.extend((0..10).map(|i| Some(5.0 + if i % 2 == 0 { 0.01 } else { -0.01 })));
        let (level, count) = rest_level(&v, v.len() - 1, 0, 0.01).unwrap();
        assert!((level - 5.0).abs() < 1e-12, "{level}");
        assert_eq!(count, 10);
        assert_eq!(rest_level(&[None, None], 1, 0, 0.1), None);
    }

    proptest! {
        #![proptest_config(ProptestConfig {
            rng_seed: proptest::test_runner::RngSeed::Fixed(19),
            ..ProptestConfig::default()
        })]

        #[test]
        fn quantiles_rise_with_q_and_stay_inside_the_values(
            v in prop::collection::vec(-1e6f64..1e6, 1..60),
            a in 0.0f64..=1.0,
            b in 0.0f64..=1.0,
        ) {
            let (lo, hi) = (a.min(b), a.max(b));
            let (qa, qb) = (quantile(&v, lo).unwrap(), quantile(&v, hi).unwrap());
            prop_assert!(qa <= qb);
            let min = v.iter().copied().fold(f64::INFINITY, f64::min);
            let max = v.iter().copied().fold(f64::NEG_INFINITY, f64::max);
            prop_assert!(min <= qa && qb <= max);
        }
    }
}
