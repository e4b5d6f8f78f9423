//! Stripes followed through the clip: each first-frame stripe is looked for in every frame near
//! where it was last seen, and its orientation is unwrapped modulo π.

use super::MAX_LINE_RMS_PX;
use super::luma::Img;
use super::ridge::{Seg, detect, wrap_half};

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
    /// Looks for the stripe in a new frame, near where it was last seen.
    pub(super) fn follow(&mut self, img: &Img) {
        let [a, b] = self.last.ends();
        let m = self.last.length * 0.35 + 8.0;
        let x0 = (a[0].min(b[0]) - m).floor().max(0.0) as usize;
        let x1 = ((a[0].max(b[0]) + m).ceil() as usize + 1).min(img.w);
        let y0 = (a[1].min(b[1]) - m).floor().max(0.0) as usize;
        let y1 = ((a[1].max(b[1]) + m).ceil() as usize + 1).min(img.h);
        let found = detect(img, [x0, x1.max(x0), y0, y1.max(y0)])
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
    /// Least-squares intersection of the stripe's lines over the clip.
    pub(super) fn pivot(&self) -> Option<[f64; 2]> {
        let (mut a11, mut a12, mut a22, mut b1, mut b2) = (0.0, 0.0, 0.0, 0.0, 0.0);
        for (s, _) in self.seen.iter().flatten() {
            let n = [-s.theta.sin(), s.theta.cos()];
            let d = n[0] * s.c[0] + n[1] * s.c[1];
            a11 += n[0] * n[0];
            a12 += n[0] * n[1];
            a22 += n[1] * n[1];
            b1 += n[0] * d;
            b2 += n[1] * d;
        }
        let det = a11 * a22 - a12 * a12;
        if det.abs() < 1e-12 {
            return None;
        }
        Some([(a22 * b1 - a12 * b2) / det, (a11 * b2 - a12 * b1) / det])
    }
    /// RMS distance of the track's lines from `p`, px.
    pub(super) fn line_rms(&self, p: [f64; 2]) -> f64 {
        let mut s2 = 0.0;
        let mut n = 0usize;
        for (s, _) in self.seen.iter().flatten() {
            let nn = [-s.theta.sin(), s.theta.cos()];
            s2 += (nn[0] * (p[0] - s.c[0]) + nn[1] * (p[1] - s.c[1])).powi(2);
            n += 1;
        }
        (s2 / n.max(1) as f64).sqrt()
    }
    /// True when the track looks like a radial stripe: its lines meet at one point, and that
    /// point lies on the stripe's line beyond (or at) one of its ends, not in its middle.
    pub(super) fn is_radial(&self) -> bool {
        let Some(p) = self.pivot() else { return false };
        if self.line_rms(p) > MAX_LINE_RMS_PX {
            return false;
        }
        let s = &self.first;
        let u = s.dir();
        let along = (p[0] - s.c[0]) * u[0] + (p[1] - s.c[1]) * u[1];
        let q = 0.25 * (s.ext[1] - s.ext[0]);
        let outside = along <= s.ext[0] + q || along >= s.ext[1] - q;
        let near = along >= s.ext[0] - 1.5 * s.length && along <= s.ext[1] + 1.5 * s.length;
        outside && near
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
        let q = t.pivot().unwrap();
        assert!((q[0] - p[0]).hypot(q[1] - p[1]) < 1e-6);
        assert!(t.line_rms(q) < 1e-6);
        // The pivot lies 10 px beyond the stripe's inner end: a radial stripe.
        assert!(t.is_radial());
        assert!((t.span_deg() - 19.0).abs() < 1e-9);
    }
}
