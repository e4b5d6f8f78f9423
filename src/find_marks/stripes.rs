//! Stripes followed through the clip: each first-frame stripe is looked for in every frame near
//! where it was last seen, and its orientation is unwrapped modulo π.
//!
//! Part of the `find-marks` command (built on decode and track, writing through report): it
//! must never import segment, mechanics, `analyze`, `batch` or the CLI.

use super::ellipse::solve3;
use super::luma::Img;
use super::pivot::{Line, Meeting, meet};
use super::ridge::{Seg, detect, wrap_half};
use crate::rig::Ellipse;

/// One stripe followed through the clip.
pub(super) struct Track {
    pub(super) first: Seg,
    pub(super) last: Seg,
    /// Per frame: the stripe seen (None where it was not found), with its unwrapped orientation.
    pub(super) seen: Vec<Option<(Seg, f64)>>,
    /// Unwrapped orientation of the last sighting.
    pub(super) theta: f64,
}

impl Track {
    /// A new track from a first-frame stripe.
    pub(super) fn start(s: Seg) -> Track {
        Track {
            first: s,
            last: s,
            seen: vec![Some((s, s.theta))],
            theta: s.theta,
        }
    }
    /// The window `[x0, x1, y0, y1]` the stripe is looked for in, in a `w` × `h` frame.
    pub(super) fn window(&self, w: usize, h: usize) -> [usize; 4] {
        let [a, b] = self.last.ends();
        let m = self.last.length * 0.35 + 8.0;
        let x0 = (a[0].min(b[0]) - m).floor().max(0.0) as usize;
        let x1 = ((a[0].max(b[0]) + m).ceil() as usize + 1).min(w);
        let y0 = (a[1].min(b[1]) - m).floor().max(0.0) as usize;
        let y1 = ((a[1].max(b[1]) + m).ceil() as usize + 1).min(h);
        [x0.min(w), x1.max(x0.min(w)), y0.min(h), y1.max(y0.min(h))]
    }
    /// The stripe's window did not change since the first frame: it is where it was then.
    pub(super) fn stay(&mut self) {
        let th = self.first.theta;
        self.theta = th;
        self.last = self.first;
        self.seen.push(Some((self.first, th)));
    }
    /// Looks for the stripe in a new frame, near where it was last seen.
    pub(super) fn follow(&mut self, img: &Img) {
        let found = detect(img, self.window(img.w, img.h))
            .into_iter()
            .filter(|s| s.dark == self.last.dark && s.length > 0.5 * self.first.length)
            .map(|s| {
                let dth = wrap_half(s.theta - self.last.theta).abs();
                let dc =
                    ((s.c[0] - self.last.c[0]).powi(2) + (s.c[1] - self.last.c[1]).powi(2)).sqrt();
                (s, dc + dth.to_degrees() * 0.5, dth, dc)
            })
            .filter(|(_, _, dth, dc)| *dth < 35f64.to_radians() && *dc < 0.6 * self.last.length)
            .min_by(|x, y| x.1.total_cmp(&y.1));
        match found {
            Some((s, _, _, _)) => {
                let th = self.theta + wrap_half(s.theta - self.last.theta);
                self.theta = th;
                self.last = s;
                self.seen.push(Some((s, th)));
            }
            None => self.seen.push(None),
        }
    }

    pub(super) fn angles(&self) -> Vec<f64> {
        self.seen.iter().flatten().map(|s| s.1).collect()
    }
    /// Back-swing: total variation of the orientation smoothed over five frames (so that
    /// noise does not count) minus the net turn, degrees. The drive end swings back after
    /// every blow; the nut end only advances.
    pub(super) fn back_swing(&self) -> f64 {
        let a = self.angles();
        if a.len() < 6 {
            return 0.0;
        }
        let sm: Vec<f64> = a.windows(5).map(|w| w.iter().sum::<f64>() / 5.0).collect();
        let tv: f64 = sm.windows(2).map(|w| (w[1] - w[0]).abs()).sum();
        let net = (sm[sm.len() - 1] - sm[0]).abs();
        (tv - net).max(0.0).to_degrees()
    }
    /// Total back-and-forth travel of the orientation smoothed over five frames (so that
    /// tracking noise on a short stripe does not count as travel), degrees.
    pub(super) fn travel_deg(&self) -> f64 {
        let a = self.angles();
        if a.len() < 6 {
            return 0.0;
        }
        let sm: Vec<f64> = a.windows(5).map(|w| w.iter().sum::<f64>() / 5.0).collect();
        sm.windows(2)
            .map(|w| (w[1] - w[0]).abs())
            .sum::<f64>()
            .to_degrees()
    }
    /// Net turn and total variation, degrees.
    pub(super) fn motion(&self) -> (f64, f64) {
        let a = self.angles();
        let net = a.last().copied().unwrap_or(0.0) - a.first().copied().unwrap_or(0.0);
        let tv: f64 = a.windows(2).map(|w| (w[1] - w[0]).abs()).sum();
        (net.to_degrees(), tv.to_degrees())
    }
    pub(super) fn span_deg(&self) -> f64 {
        let a = self.angles();
        let lo = a.iter().copied().fold(f64::INFINITY, f64::min);
        let hi = a.iter().copied().fold(f64::NEG_INFINITY, f64::max);
        (hi - lo).max(0.0).to_degrees()
    }
    /// The stripe's centre line in every frame it was seen.
    pub(super) fn lines(&self) -> Vec<Line> {
        self.seen
            .iter()
            .flatten()
            .map(|(s, th)| Line::through(s.c, *th))
            .collect()
    }
    /// Where the stripe's lines meet over the clip (robust; see `pivot.rs`).
    pub(super) fn meeting(&self) -> Option<Meeting> {
        meet(&self.lines())
    }
    /// True when `p` lies on the first-frame stripe's line beyond (or at) one of its ends,
    /// not in its middle, and not far beyond it: where a radial stripe's pivot can be.
    pub(super) fn is_radial_about(&self, p: [f64; 2]) -> bool {
        let s = &self.first;
        let u = s.dir();
        let along = (p[0] - s.c[0]) * u[0] + (p[1] - s.c[1]) * u[1];
        let q = 0.25 * (s.ext[1] - s.ext[0]);
        let outside = along <= s.ext[0] + q || along >= s.ext[1] - q;
        let near = along >= s.ext[0] - 1.5 * s.length && along <= s.ext[1] + 1.5 * s.length;
        outside && near
    }
    /// Spread of the stripe's centroid distance from `p` about a centred ellipse fitted to
    /// the centroids (90th minus 10th percentile of the radial residual), px. A stripe painted
    /// on a part turning about `p` keeps its distance in the part's plane, so its centroid
    /// runs on a centred ellipse on screen (a circle when the part is seen square on; the
    /// conic `A x² + B xy + C y² = 1` by linear least squares); a follower hopping between
    /// background streaks does not. With too little turn to fit the conic, the plain spread
    /// of the distance is used.
    pub(super) fn radius_spread(&self, p: [f64; 2]) -> f64 {
        let pts: Vec<[f64; 2]> = self
            .seen
            .iter()
            .flatten()
            .map(|(s, _)| [s.c[0] - p[0], s.c[1] - p[1]])
            .collect();
        if pts.len() < 2 {
            return 0.0;
        }
        let (mut m, mut v) = ([[0.0f64; 3]; 3], [0.0f64; 3]);
        for q in &pts {
            let f = [q[0] * q[0], q[0] * q[1], q[1] * q[1]];
            for i in 0..3 {
                for j in 0..3 {
                    m[i][j] += f[i] * f[j];
                }
                v[i] += f[i];
            }
        }
        let fit = solve3(m, v);
        let mut r: Vec<f64> = pts
            .iter()
            .map(|q| {
                let r = q[0].hypot(q[1]);
                match fit {
                    Some(sol) if r > 0.0 => {
                        let (c, s) = (q[0] / r, q[1] / r);
                        let qv = sol[0] * c * c + sol[1] * c * s + sol[2] * s * s;
                        if qv > 0.0 { r - 1.0 / qv.sqrt() } else { r }
                    }
                    _ => r,
                }
            })
            .collect();
        r.sort_by(f64::total_cmp);
        r[r.len() * 9 / 10] - r[r.len() / 10]
    }
    /// Fraction of the frames in which the stripe was seen.
    pub(super) fn seen_fraction(&self) -> f64 {
        self.seen.iter().flatten().count() as f64 / self.seen.len().max(1) as f64
    }
    /// The unwrapped orientation in every frame, radians (None where not seen).
    pub(super) fn series(&self) -> Vec<Option<f64>> {
        self.seen.iter().map(|s| s.map(|s| s.1)).collect()
    }
    /// The stripe's screen length at the 90th over the 10th percentile over the clip (a
    /// disc seen at an angle foreshortens the stripe as it turns).
    pub(super) fn length_ratio(&self) -> f64 {
        let mut l: Vec<f64> = self.seen.iter().flatten().map(|s| s.0.length).collect();
        if l.len() < 10 {
            return 1.0;
        }
        l.sort_by(f64::total_cmp);
        let lo = l[l.len() / 10];
        let hi = l[l.len() * 9 / 10];
        if lo > 0.0 { hi / lo } else { 1.0 }
    }
    /// True unless the stripe's length on screen contradicts the ellipse `e` over the turn it
    /// made: a stripe on a disc seen at b/a foreshortens by the factor
    /// `1 / sqrt(cos²α + sin²α / (b/a)²)` (α its screen angle from the major axis), so an
    /// outline fitted to other edges (a textured bench, a hexagon's flats) predicts a change of
    /// length that the stripe does not show. The predicted and measured spreads (90th over
    /// 10th percentile) are compared; a real tilt also changes the measured length.
    pub(super) fn length_agrees_with(&self, e: &Ellipse) -> bool {
        let phi = e.major_deg.to_radians();
        let mut f: Vec<f64> = self
            .seen
            .iter()
            .flatten()
            .map(|(s, _)| {
                let a = s.theta - phi;
                1.0 / (a.cos().powi(2) + (a.sin() / e.axis_ratio).powi(2)).sqrt()
            })
            .collect();
        if f.len() < 10 {
            return true;
        }
        f.sort_by(f64::total_cmp);
        let predicted = f[f.len() * 9 / 10] / f[f.len() / 10];
        predicted - 1.0 <= 1.5 * (self.length_ratio() - 1.0) + 0.04
    }
    /// Σ Δθ·|Δθ|² over the frame steps: its sign is the direction of the fastest steps.
    pub(super) fn sign_steps(&self) -> f64 {
        let a = self.angles();
        a.windows(2)
            .map(|w| {
                let d = w[1] - w[0];
                d * d.abs() * d.abs()
            })
            .sum()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn lines_turning_about_a_point_meet_there() {
        let p = [50.3, 40.7];
        let seen = (0..20)
            .map(|k| {
                let a = (10.0 + k as f64).to_radians();
                let c = [p[0] + 30.0 * a.cos(), p[1] + 30.0 * a.sin()];
                let s = Seg {
                    c,
                    theta: wrap_half(a),
                    ext: [-20.0, 20.0],
                    length: 40.0,
                    dark: false,
                    contrast: 0.3,
                };
                Some((s, a))
            })
            .collect::<Vec<_>>();
        let first = seen[0].unwrap().0;
        let t = Track {
            first,
            last: first,
            seen,
            theta: 0.0,
        };
        let m = t.meeting().unwrap();
        let q = m.p;
        assert!((q[0] - p[0]).hypot(q[1] - p[1]) < 1e-6);
        assert!(m.rms_px < 1e-6 && m.inlier_fraction == 1.0);
        // The pivot lies 10 px beyond the stripe's inner end: a radial stripe, whose centroid
        // keeps its distance from it.
        assert!(t.is_radial_about(q));
        assert!(t.radius_spread(q) < 1e-6);
        assert!((t.span_deg() - 19.0).abs() < 1e-9);
    }

    #[test]
    fn an_ellipse_must_agree_with_the_stripe_s_length() {
        // A stripe turning 60° about a point; seen square on, its length stays 40 px.
        let e = Ellipse {
            axis_ratio: 0.6,
            major_deg: 0.0,
        };
        let track = |len: &dyn Fn(f64) -> f64| {
            let seen: Vec<_> = (0..30)
                .map(|k| {
                    let a = (2.0 * k as f64).to_radians();
                    let s = Seg {
                        c: [100.0 + 30.0 * a.cos(), 100.0 + 30.0 * a.sin()],
                        theta: wrap_half(a),
                        ext: [-20.0, 20.0],
                        length: len(a),
                        dark: false,
                        contrast: 0.3,
                    };
                    Some((s, a))
                })
                .collect();
            let first = seen[0].unwrap().0;
            Track {
                first,
                last: first,
                seen,
                theta: 0.0,
            }
        };
        let flat = track(&|_| 40.0);
        assert!(!flat.length_agrees_with(&e));
        let tilted = track(&|a: f64| 40.0 / (a.cos().powi(2) + (a.sin() / 0.6).powi(2)).sqrt());
        assert!(tilted.length_agrees_with(&e));
    }
}
