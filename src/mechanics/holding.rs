//! The holding torque: the torque the joint holds after the last blow that turned the nut,
//! estimated from the slips (docs/mechanics.md, "Holding torque", derives it).
//!
//! In: the absolute twist and the nut angle per sample (degrees), each advancing blow's slip
//! (from the nut's onset to its return to rest), the bar stiffness. Out: a [`HoldingTorque`]
//! with its 95 % interval and a bracket.
//!
//! Method. The nut starts and ends each slip at rest, so over a slip of length τ the nut's
//! angular momentum balance I_n·θ̈_n = T_bar − T_joint integrates to
//! 0 = ∫(T_bar − T_joint) dt: the time-mean bar torque over the slip equals the time-mean
//! joint torque (Newton's second law for rotation; e.g. Meriam & Kraige, *Engineering
//! Mechanics: Dynamics*, angular impulse and momentum). For a joint whose turning torque
//! rises linearly with nut angle (a hard joint past snug; *common practice*, e.g. the
//! torque-angle line of a bolted joint in Bickford, *An Introduction to the Design and
//! Behavior of Bolted Joints*, ch. 5), the time-mean joint torque is the joint torque at the
//! time-mean nut angle. Each slip therefore gives one point (mean nut angle, mean k·twist)
//! on the joint's torque-angle line; a least-squares line through the last slips (at most
//! [`MAX_SLIPS`]) read at the nut's final angle is the holding torque. The bar's own
//! damping adds c_b·Δtwist/τ to the mean; with the small damping of steel it is neglected.
//!
//! The bracket bounds the torque needed to start the nut again (static friction, at or above
//! the turning torque): below by the highest peak of the later blows that did not move the
//! nut; above by the torque at which the nut started to move on the next blow, when a later
//! blow did move it (null otherwise).
//!
//! Every sample is a frame, so a slip of a few frames is sampled coarsely: the trapezoid
//! mean over the frames from the last one at rest before the slip to the first one at rest
//! after it is used, and the frame spacing's share of the error is part of the interval
//! through the scatter of the points about the line.
//!
//! Part of the mechanics stage: it must never import report, `analyze`, `batch`, `find_marks`,
//! `calibrate` or the CLI.

use crate::units::{Stiffness, Torque};

/// Slips used for the line (the last ones): a joint's line is straightest near the end.
pub const MAX_SLIPS: usize = 8;

/// The holding torque and how sure it is.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct HoldingTorque {
    /// The estimate.
    pub torque: Torque,
    /// 95 % interval, low and high.
    pub ci95: (Torque, Torque),
    /// Highest peak of a later blow that did not move the nut (a lower bound on the torque
    /// that would restart it).
    pub bracket_low: Option<Torque>,
    /// Torque at which the nut started to move on a later blow (an upper bound).
    pub bracket_high: Option<Torque>,
    /// Slips the estimate rests on.
    pub slips: usize,
    /// The last blow (1-based) that turned the nut.
    pub after_blow: usize,
    /// The joint's rate fitted over the slips, N·m per degree of nut turn (None from one
    /// slip).
    pub joint_rate_nm_per_deg: Option<f64>,
}

/// One slip of the nut, in sample indices of the trace.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct Slip {
    /// Last sample at rest before the nut moved.
    pub from: usize,
    /// First sample at rest after it moved.
    pub to: usize,
    /// The nut's rest angle before the slip, degrees.
    pub rest_before: f64,
    /// Its rest angle after the slip, degrees.
    pub rest_after: f64,
}

/// The slip's start and end in fractional samples. A nut starting from rest under a nearly
/// steady net torque moves as ½·a·(t − t₀)², so √(distance moved) is linear in time: the
/// line through √δ at the first two moving samples meets zero at the start. The end is found
/// the same way from the distance still to go at the last two moving samples. Where the
/// samples do not show that shape, the boundary is put half a frame from the samples at rest.
fn slip_bounds(nut: &[Option<f64>], s: &Slip) -> (f64, f64) {
    let at = |j: usize| nut.get(j).copied().flatten();
    let cross = |near: usize, far: usize, d: &dyn Fn(f64) -> f64| -> Option<f64> {
        let (u, v) = (d(at(near)?), d(at(far)?));
        (u > 0.0 && v > u).then(|| {
            let (u, v) = (u.sqrt(), v.sqrt());
            u / (v - u)
        })
    };
    let i1 = s.from + 1;
    let start = if i1 < s.to {
        cross(i1, i1 + 1, &|x| x - s.rest_before)
            .map_or(s.from as f64 + 0.5, |f| (i1 as f64 - f).max(s.from as f64))
    } else {
        s.from as f64 + 0.5
    };
    let j1 = s.to - 1;
    let end = if j1 > i1 {
        cross(j1, j1 - 1, &|x| s.rest_after - x)
            .map_or(s.to as f64 - 0.5, |f| (j1 as f64 + f).min(s.to as f64))
    } else {
        s.to as f64 - 0.5
    };
    if end > start {
        (start, end)
    } else {
        (s.from as f64 + 0.5, s.to as f64 - 0.5)
    }
}

/// Mean over `[a, b]` (fractional samples) of the straight-line interpolation of `v`.
fn interpolated_mean(v: &[Option<f64>], a: f64, b: f64) -> Option<f64> {
    let val = |x: f64| -> Option<f64> {
        let j = (x.floor() as usize).min(v.len().checked_sub(2)?);
        let (p, q) = (
            v.get(j).copied().flatten()?,
            v.get(j + 1).copied().flatten()?,
        );
        Some(p + (q - p) * (x - j as f64))
    };
    let mut sum = 0.0;
    let mut x = a;
    while x < b {
        let next = (x.floor() + 1.0).min(b);
        sum += (next - x) * 0.5 * (val(x)? + val(next)?);
        x = next;
    }
    (b > a).then(|| sum / (b - a))
}

/// Finds the slip of a blow: from the sample before the nut's onset `onset` to the first
/// sample at which the nut has come to within `tol_deg` (or 3 % of the advance) of its rest
/// level `rest_deg` after the blow and stays there for two more samples (or the blow's last sample `last`).
pub(crate) fn find_slip(
    nut: &[Option<f64>],
    onset: usize,
    last: usize,
    (before_deg, rest_deg): (f64, f64),
    tol_deg: f64,
) -> Option<Slip> {
    let from = onset.checked_sub(1)?;
    // Within 3 % of the advance counts as arrived: a compressed clip's nut can creep the
    // last hundredths of a degree over many frames, and the sub-frame end
    // ([`slip_bounds`]) places the stop from the samples before anyway.
    let tol_deg = tol_deg.max(0.03 * (rest_deg - before_deg).abs());
    let near = |j: usize| {
        nut.get(j)
            .copied()
            .flatten()
            .map(|v| (v - rest_deg).abs() <= tol_deg)
    };
    let to = (onset..=last).find(|&j| {
        (j..=(j + 2).min(last)).all(|k| near(k) != Some(false)) && near(j) == Some(true)
    })?;
    (to > from).then_some(Slip {
        from,
        to,
        rest_before: before_deg,
        rest_after: rest_deg,
    })
}

/// Two-sided 95 % quantile of Student's t with `dof` degrees of freedom (table values, e.g.
/// Montgomery & Runger, *Applied Statistics and Probability for Engineers*, Table V).
pub(crate) fn t95(dof: usize) -> f64 {
    const T: [f64; 10] = [
        12.706, 4.303, 3.182, 2.776, 2.571, 2.447, 2.365, 2.306, 2.262, 2.228,
    ];
    match dof {
        0 => f64::INFINITY,
        d if d <= 10 => T[d - 1],
        d if d <= 30 => 2.042 + (2.228 - 2.042) * (30 - d) as f64 / 20.0,
        _ => 1.96,
    }
}

/// Inputs of [`holding_torque`] beyond the series.
pub(crate) struct HoldingInputs<'a> {
    /// Slip of each advancing blow, with the blow's 1-based index, in order.
    pub slips: &'a [(usize, Slip)],
    /// The nut's final rest angle, degrees (same reference as `nut`).
    pub nut_final_deg: f64,
    /// Bar stiffness.
    pub stiffness: Stiffness,
    /// One frame's twist noise (σ), degrees.
    pub twist_sigma_deg: f64,
    /// Standard uncertainty common to every twist reading, degrees: the twist zero's and the
    /// tracker's validated term (`track::validation`), which no average over samples shrinks.
    pub systematic_sigma_deg: f64,
    /// Relative standard uncertainty of the stiffness.
    pub stiffness_rel_sigma: f64,
    /// Peak torques of the blows after the last advancing one that did not move the nut.
    pub later_still_peaks: &'a [Torque],
    /// Breakaway torque of a later blow that moved the nut, if any.
    pub later_breakaway: Option<Torque>,
}

/// Estimates the holding torque from the slips (see the module documentation). None without
/// a slip whose samples are all measured.
pub(crate) fn holding_torque(
    twist_deg: &[Option<f64>],
    nut_deg: &[Option<f64>],
    inp: &HoldingInputs<'_>,
) -> Option<HoldingTorque> {
    let k = inp.stiffness.nm_per_deg();
    let used = &inp.slips[inp.slips.len().saturating_sub(MAX_SLIPS)..];
    // (mean nut angle, mean bar torque, samples) per slip.
    let pts: Vec<(f64, f64, usize)> = used
        .iter()
        .filter_map(|(_, s)| {
            let (a, b) = slip_bounds(nut_deg, s);
            Some((
                interpolated_mean(nut_deg, a, b)?,
                k * interpolated_mean(twist_deg, a, b)?,
                s.to - s.from + 1,
            ))
        })
        .collect();
    let after_blow = used.last()?.0;
    let x = inp.nut_final_deg;
    // Tracking noise of one slip's mean torque: σ·k/√m.
    let noise = |m: usize| k * inp.twist_sigma_deg / (m as f64).sqrt();
    let (value, se, dof, rate) = if pts.len() >= 2 {
        // Weighted least squares, each slip weighted by its samples m (a longer slip's mean
        // is sampled more finely: its frame-boundary error and its noise both shrink).
        let w = |p: &(f64, f64, usize)| p.2 as f64;
        let sw: f64 = pts.iter().map(w).sum();
        let xm = pts.iter().map(|p| w(p) * p.0).sum::<f64>() / sw;
        let ym = pts.iter().map(|p| w(p) * p.1).sum::<f64>() / sw;
        let sxx: f64 = pts.iter().map(|p| w(p) * (p.0 - xm).powi(2)).sum();
        if sxx <= 0.0 {
            return None;
        }
        let b = pts
            .iter()
            .map(|p| w(p) * (p.0 - xm) * (p.1 - ym))
            .sum::<f64>()
            / sxx;
        let fit = |x: f64| ym + b * (x - xm);
        let lever = (1.0 / sw + (x - xm).powi(2) / sxx).sqrt();
        let dof = pts.len() - 2;
        // Scatter per unit weight; never below the tracking noise of one sample (σ·k).
        let resid_s = if dof > 0 {
            (pts.iter()
                .map(|p| w(p) * (p.1 - fit(p.0)).powi(2))
                .sum::<f64>()
                / dof as f64)
                .sqrt()
        } else {
            0.0
        };
        let unit_noise = noise(1);
        let s = resid_s.max(unit_noise);
        let quantile_dof = if resid_s > unit_noise {
            dof
        } else {
            usize::MAX
        };
        (fit(x), s * lever, quantile_dof, Some(b))
    } else {
        // One slip gives one point of the joint's line and not its slope: the nut's final
        // angle lies half a slip beyond that point, so the estimate is not made.
        return None;
    };
    if !value.is_finite() {
        return None;
    }
    // The zero's and the tracking's systematic uncertainty move every point alike; the
    // stiffness scales the result.
    let zero = k * inp.systematic_sigma_deg;
    let stiff = value.abs() * inp.stiffness_rel_sigma;
    let half = t95(dof) * se + 1.96 * zero.hypot(stiff);
    let half = if half.is_finite() { half } else { value.abs() };
    let bracket_low = inp
        .later_still_peaks
        .iter()
        .copied()
        .max_by(|a, b| a.nm().total_cmp(&b.nm()));
    Some(HoldingTorque {
        torque: Torque::from_nm(value),
        ci95: (Torque::from_nm(value - half), Torque::from_nm(value + half)),
        bracket_low,
        bracket_high: inp.later_breakaway,
        slips: pts.len(),
        after_blow,
        joint_rate_nm_per_deg: rate,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_slip_against_a_linear_joint_reads_the_joint_line() {
        // Hand-made slips on a joint T = 100 + 2·θ (N·m, θ in degrees), bar 10 N·m/deg:
        // each slip's mean twist is the joint torque at the slip's mean nut angle / k. Three
        // slips at mean angles 10, 20, 28 degrees; the nut ends at 30°: holding 160 N·m.
        let k = Stiffness::from_nm_per_deg(10.0);
        let mut twist = Vec::new();
        let mut nut = Vec::new();
        let mut slips = Vec::new();
        for (i, (a, b)) in [(5.0, 15.0), (15.0, 25.0), (26.0, 30.0)].iter().enumerate() {
            let from = nut.len();
            // Nut moves linearly a → b over 4 intervals; twist = joint torque / k.
            for j in 0..=4 {
                let th = a + (b - a) * j as f64 / 4.0;
                nut.push(Some(th));
                twist.push(Some((100.0 + 2.0 * th) / 10.0));
            }
            slips.push((
                i + 1,
                Slip {
                    from,
                    to: from + 4,
                    rest_before: *a,
                    rest_after: *b,
                },
            ));
        }
        let inp = HoldingInputs {
            slips: &slips,
            nut_final_deg: 30.0,
            stiffness: k,
            twist_sigma_deg: 0.01,
            systematic_sigma_deg: 0.0,
            stiffness_rel_sigma: 0.0,
            later_still_peaks: &[Torque::from_nm(150.0)],
            later_breakaway: None,
        };
        let h = holding_torque(&twist, &nut, &inp).unwrap();
        assert!((h.torque.nm() - 160.0).abs() < 1e-9, "{h:?}");
        assert!((h.joint_rate_nm_per_deg.unwrap() - 2.0).abs() < 1e-9);
        assert!(h.ci95.0.nm() < 160.0 && h.ci95.1.nm() > 160.0);
        assert_eq!(h.after_blow, 3);
        assert_eq!(h.bracket_low, Some(Torque::from_nm(150.0)));
    }

    #[test]
    fn slips_end_where_the_nut_is_back_at_rest() {
        let nut: Vec<Option<f64>> = [0.0, 0.0, 0.5, 1.5, 1.95, 2.0, 2.0, 2.0, 2.0]
            .iter()
            .map(|&v| Some(v))
            .collect();
        let s = find_slip(&nut, 2, 8, (0.0, 2.0), 0.06).unwrap();
        assert_eq!((s.from, s.to), (1, 4));
        assert!(find_slip(&nut, 0, 8, (0.0, 2.0), 0.06).is_none());
    }

    #[test]
    fn student_t_quantiles() {
        assert_eq!(t95(1), 12.706);
        assert_eq!(t95(10), 2.228);
        assert_eq!(t95(1000), 1.96);
        assert!(t95(0).is_infinite());
    }
}
