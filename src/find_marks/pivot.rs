//! Where a stripe's lines meet across frames, robust to outliers.
//!
//! A radial stripe's centre line passes through its pivot in every frame, so the pivot is the
//! point nearest all the lines: minimise Σ (nₜ·p − dₜ)² (nₜ the unit normal of frame t's line,
//! dₜ = nₜ·cₜ with cₜ its centroid). A few frames where the follower caught something else
//! (a background streak, a blurred stripe) would drag a plain least-squares point away, so the
//! point is first chosen by random sample consensus over pairs of lines (Fischler & Bolles,
//! "Random sample consensus: a paradigm for model fitting with applications to image analysis
//! and automated cartography", Comm. ACM 24(6), 1981, from memory), then refined by least
//! squares on the lines that agree with it, twice, with the agreement band set from the
//! inliers' median absolute distance (a trimmed least squares). The pairs are drawn from a
//! fixed seed, so a clip always gives the same pivot.
//!
//! Part of the `find-marks` command (built on decode and track, writing through report): it
//! must never import segment, mechanics, `analyze`, `batch` or the CLI.

/// A line on screen: `n·p = d` with `n` a unit normal.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(super) struct Line {
    pub(super) n: [f64; 2],
    pub(super) d: f64,
}

impl Line {
    /// The line through `c` at orientation `theta` (radians from +x towards +y).
    pub(super) fn through(c: [f64; 2], theta: f64) -> Line {
        let n = [-theta.sin(), theta.cos()];
        Line {
            n,
            d: n[0] * c[0] + n[1] * c[1],
        }
    }
    /// Distance of `p` from the line, px.
    pub(super) fn dist(&self, p: [f64; 2]) -> f64 {
        (self.n[0] * p[0] + self.n[1] * p[1] - self.d).abs()
    }
}

/// The meeting point of a set of lines.
#[derive(Debug, Clone, PartialEq)]
pub(super) struct Meeting {
    /// The point, px.
    pub(super) p: [f64; 2],
    /// RMS distance of the agreeing lines from it, px.
    pub(super) rms_px: f64,
    /// Fraction of all lines that agree with it.
    pub(super) inlier_fraction: f64,
    /// Per line: whether it agrees.
    pub(super) inliers: Vec<bool>,
}

/// Lines agree with a candidate point when they pass within this distance, px (at least).
const BAND_PX: f64 = 1.0;
/// Pairs of lines closer in direction than this do not define a point, radians (sin).
const MIN_SIN: f64 = 0.035;
/// Random pairs tried.
const PAIRS: usize = 300;

/// Least-squares point nearest the lines where `keep` is true; None when they are (nearly)
/// parallel.
fn least_squares(lines: &[Line], keep: &[bool]) -> Option<[f64; 2]> {
    let (mut a11, mut a12, mut a22, mut b1, mut b2) = (0.0, 0.0, 0.0, 0.0, 0.0);
    let mut n = 0usize;
    for (l, _) in lines.iter().zip(keep).filter(|(_, k)| **k) {
        a11 += l.n[0] * l.n[0];
        a12 += l.n[0] * l.n[1];
        a22 += l.n[1] * l.n[1];
        b1 += l.n[0] * l.d;
        b2 += l.n[1] * l.d;
        n += 1;
    }
    let det = a11 * a22 - a12 * a12;
    // det / n² is the mean squared sine between the lines' directions, roughly.
    if n < 2 || det <= (MIN_SIN * n as f64).powi(2) * 0.25 {
        return None;
    }
    Some([(a22 * b1 - a12 * b2) / det, (a11 * b2 - a12 * b1) / det])
}

/// The robust meeting point of `lines` (see the module doc); None when fewer than two lines
/// differ enough in direction to meet.
pub(super) fn meet(lines: &[Line]) -> Option<Meeting> {
    if lines.len() < 2 {
        return None;
    }
    let mut rng = fastrand::Rng::with_seed(0x0070_6976_6f74);
    let mut best: Option<([f64; 2], usize)> = None;
    for _ in 0..PAIRS {
        let i = rng.usize(0..lines.len());
        let j = rng.usize(0..lines.len());
        let (a, b) = (lines[i], lines[j]);
        let det = a.n[0] * b.n[1] - a.n[1] * b.n[0];
        if det.abs() < MIN_SIN {
            continue;
        }
        let p = [
            (a.d * b.n[1] - b.d * a.n[1]) / det,
            (a.n[0] * b.d - b.n[0] * a.d) / det,
        ];
        let count = lines.iter().filter(|l| l.dist(p) <= BAND_PX).count();
        if best.is_none_or(|(_, c)| count > c) {
            best = Some((p, count));
        }
    }
    let (mut p, _) = best?;
    let mut keep: Vec<bool> = lines.iter().map(|l| l.dist(p) <= BAND_PX).collect();
    for _ in 0..2 {
        p = least_squares(lines, &keep)?;
        let mut d: Vec<f64> = lines
            .iter()
            .zip(&keep)
            .filter(|(_, k)| **k)
            .map(|(l, _)| l.dist(p))
            .collect();
        d.sort_by(f64::total_cmp);
        let mad = d.get(d.len() / 2).copied().unwrap_or(0.0);
        let band = (3.0 * 1.4826 * mad).max(BAND_PX);
        keep = lines.iter().map(|l| l.dist(p) <= band).collect();
    }
    p = least_squares(lines, &keep)?;
    let inl: Vec<f64> = lines
        .iter()
        .zip(&keep)
        .filter(|(_, k)| **k)
        .map(|(l, _)| l.dist(p))
        .collect();
    let rms_px = (inl.iter().map(|d| d * d).sum::<f64>() / inl.len().max(1) as f64).sqrt();
    Some(Meeting {
        p,
        rms_px,
        inlier_fraction: inl.len() as f64 / lines.len() as f64,
        inliers: keep,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn lines_about_a_point_meet_there_despite_a_fifth_of_stray_lines() {
        let p = [120.4, 77.9];
        let mut lines: Vec<Line> = (0..40)
            .map(|k| {
                let a = (5.0 + 0.6 * k as f64).to_radians();
                Line::through([p[0] + 40.0 * a.cos(), p[1] + 40.0 * a.sin()], a)
            })
            .collect();
        // Every fifth line is a stray: a streak elsewhere, at another angle.
        for k in (0..40).step_by(5) {
            lines[k] = Line::through([30.0 + k as f64, 200.0], (70.0 + k as f64).to_radians());
        }
        let m = meet(&lines).unwrap();
        assert!((m.p[0] - p[0]).hypot(m.p[1] - p[1]) < 1e-6, "{m:?}");
        assert!((m.inlier_fraction - 0.8).abs() < 1e-9, "{m:?}");
        assert!(m.rms_px < 1e-6);
        // A plain least-squares point over all lines is far off.
        let all = least_squares(&lines, &[true; 40]).unwrap();
        assert!((all[0] - p[0]).hypot(all[1] - p[1]) > 3.0, "{all:?}");
    }

    #[test]
    fn parallel_lines_do_not_meet() {
        let lines: Vec<Line> = (0..10)
            .map(|k| Line::through([10.0, 10.0 + k as f64], 0.3))
            .collect();
        assert_eq!(meet(&lines), None);
    }
}
