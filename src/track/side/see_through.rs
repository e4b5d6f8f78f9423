//! Dark paint read across a lamp's bright line along the bar, once the whole clip's profiles
//! are in.
//!
//! Why: `layers.rs` takes a static line's bump out of every frame and does not measure a
//! stripe on the line's core, since paint of the line's own polarity cannot be told from it.
//! Dark paint can: it interrupts a bright reflection. (Only a reflection, which adds to what
//! the surface returns, fits the model below; a dark static line is never read across.) But the lamp
//! usually sits near the camera, so its line lies near where the paint faces the camera, which
//! is where a clip starts; left out, such a clip had no zero and read nothing at all.
//!
//! The model is the dichromatic reflection model (Shafer, "Using color to separate reflection
//! components", Color Research & Application 10 (1985) 210–218; pages *from memory*): what a
//! surface returns is its body (diffuse) reflection plus an interface (specular) reflection,
//! added. On bare steel the profile is `M(φ) = m(φ) + s(φ)`, with `s` the lamp's line; on
//! paint it is `p(φ) + g·s(φ)`, with g the paint's share of the steel's gloss (0 matte, 1 as
//! glossy). So where paint covers a share `c` of bin φ, `P(φ) = M(φ) − c·W(φ)` with the
//! full-cover depth `W(φ) = (m − p) + (1 − g)·s(φ) = a + b·s(φ)`: deeper on the line than
//! beside it, and a centroid of the raw dip is pulled towards the line's centre. Dividing the
//! dip by W makes it the coverage c alone, whose centroid is the stripe's.
//!
//! The clip gives every piece: `M` is the envelope the dark paint does not reach (the 90 %
//! quantile over time), `s` is the line's bump in it, and `a`, `b`
//! are fitted by least squares to the deepest dip each bin ever showed, over the bins the
//! paint's core passed (twice: the second time on the bins whose deepest dip reached most of
//! the first fit's W, so the ends of the paint's path, never fully covered, drop out). The fit
//! is used only when the paint was seen both beside the line and on it (else a and b cannot
//! be told apart) and when it is physical: a > 0 and 0 ≤ b ≤ 1.2 (a gloss share between 1 and
//! −0.2, for noise). Otherwise the line's core stays unmeasured, as before.
//!
//! Part of the track stage: it must never import segment, mechanics, report, `analyze`,
//! `batch`, `find_marks`, `calibrate` or the CLI.

use super::MAX_FACING_DEG;

/// Least number of fitted bins beside the line (s under a tenth of its peak) and on it (s over
/// half its peak) for `a` and `b` to be told apart.
const MIN_BINS_EACH: usize = 3;

/// The fitted correction for the lines of the other polarity than the paint's.
#[derive(Debug, Clone)]
pub(super) struct SeeThrough {
    /// The paint's polarity: +1 lighter than the steel, −1 darker.
    pol: f32,
    /// The envelope the paint does not reach, per bin.
    envelope: Vec<f32>,
    /// The lines' bumps (magnitude, ≥ 0), per bin (0 away from them).
    s: Vec<f32>,
    /// The full-cover depth beside the line and its growth per unit of `s`.
    pub a: f32,
    pub b: f32,
}

impl SeeThrough {
    /// Fits the correction from the clip's profiles (`frames`, possibly a subsample), the
    /// envelope the paint does not reach, the lines' summed bump magnitudes `s` and the
    /// paint's polarity. None when the fit is not determined or not physical.
    pub(super) fn fit(
        frames: &[Vec<f32>],
        envelope: &[f32],
        s: Vec<f32>,
        pol: f32,
        phi: &[f64],
    ) -> Option<SeeThrough> {
        let nb = envelope.len();
        let s_peak = s.iter().copied().fold(0.0f32, f32::max);
        if s_peak <= 0.0 || nb < 3 {
            return None;
        }
        // The deepest dip each bin showed, on a 3-bin mean (noise of one bin is not depth).
        let mut deepest = vec![f32::NEG_INFINITY; nb];
        for f in frames {
            for k in 1..nb - 1 {
                let d = pol * ((f[k - 1] + f[k] + f[k + 1]) / 3.0 - envelope[k]);
                deepest[k] = deepest[k].max(d);
            }
        }
        let lim = MAX_FACING_DEG.to_radians();
        let in_range = |k: usize| k > 0 && k + 1 < nb && phi[k].abs() <= lim;
        let top = (0..nb)
            .filter(|&k| in_range(k))
            .map(|k| deepest[k])
            .fold(0.0f32, f32::max);
        if top <= 0.0 {
            return None;
        }
        let mut keep: Vec<usize> = (0..nb)
            .filter(|&k| in_range(k) && deepest[k] >= 0.3 * top)
            .collect();
        let mut ab = None;
        for _ in 0..2 {
            let beside = keep.iter().filter(|&&k| s[k] < 0.1 * s_peak).count();
            let on = keep.iter().filter(|&&k| s[k] > 0.5 * s_peak).count();
            if beside < MIN_BINS_EACH || on < MIN_BINS_EACH {
                return None;
            }
            let (a, b) = line_fit(keep.iter().map(|&k| (s[k], deepest[k])))?;
            ab = Some((a, b));
            keep.retain(|&k| deepest[k] >= 0.8 * (a + b * s[k]));
        }
        let (a, b) = ab?;
        if !(a > 0.0 && (0.0..=1.2).contains(&b)) {
            return None;
        }
        Some(SeeThrough {
            pol,
            envelope: envelope.to_vec(),
            s,
            a,
            b,
        })
    }

    /// Takes the lines out of one profile and evens the paint's dip across them: where the
    /// lines lie (s > 0), `P` becomes `M ∓ s ± a·D/W` with D the paint's dip below the
    /// envelope, so paint reads as deep on the line as beside it; elsewhere it is unchanged.
    pub(super) fn apply(&self, prof: &mut [f32]) {
        for (k, v) in prof.iter_mut().enumerate() {
            let s = self.s[k];
            if s <= 0.0 {
                continue;
            }
            let m = self.envelope[k];
            let dip = self.pol * (*v - m);
            let w = self.a + self.b * s;
            *v = m + self.pol * s + self.pol * self.a * dip / w;
        }
    }
}

/// Least-squares straight line y = a + b·x through the points; None when x does not vary.
fn line_fit(pts: impl Iterator<Item = (f32, f32)>) -> Option<(f32, f32)> {
    let (mut n, mut sx, mut sy, mut sxx, mut sxy) = (0.0f64, 0.0, 0.0, 0.0, 0.0);
    for (x, y) in pts {
        let (x, y) = (f64::from(x), f64::from(y));
        n += 1.0;
        sx += x;
        sy += y;
        sxx += x * x;
        sxy += x * y;
    }
    let var = n * sxx - sx * sx;
    if n < 2.0 || var <= 1e-12 {
        return None;
    }
    let b = (n * sxy - sx * sy) / var;
    let a = (sy - b * sx) / n;
    Some((a as f32, b as f32))
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Profiles of 361 bins (−90°..90°, 0.5° apart): steel at 0.5 with a bright line of peak
    /// 0.4 at +5° (σ 3°), dark paint 10° wide (reflecting 0.1 and a share `g` of the line)
    /// whose centre runs from −30° to +30° over the frames.
    fn scene(g: f32) -> (Vec<f64>, Vec<Vec<f32>>, Vec<f32>, Vec<f64>) {
        let phi: Vec<f64> = (0..361)
            .map(|k| (-90.0 + 0.5 * k as f64).to_radians())
            .collect();
        let line = |p: f64| 0.4 * (-0.5 * ((p.to_degrees() - 5.0) / 3.0).powi(2)).exp() as f32;
        let centres: Vec<f64> = (0..61).map(|i| (-30.0 + i as f64).to_radians()).collect();
        let frames = centres
            .iter()
            .map(|&c| {
                phi.iter()
                    .map(|&p| {
                        let on = (p - c).abs() <= 5f64.to_radians();
                        if on { 0.1 + g * line(p) } else { 0.5 + line(p) }
                    })
                    .collect()
            })
            .collect();
        let s = phi.iter().map(|&p| line(p)).collect();
        (phi, frames, s, centres)
    }

    fn envelope(frames: &[Vec<f32>]) -> Vec<f32> {
        (0..frames[0].len())
            .map(|k| frames.iter().map(|f| f[k]).fold(f32::MIN, f32::max))
            .collect()
    }

    #[test]
    fn the_full_cover_depth_is_fitted_and_the_dip_is_even_across_the_line() {
        for g in [0.0f32, 0.3, 0.6] {
            let (phi, frames, s, centres) = scene(g);
            let env = envelope(&frames);
            let st = SeeThrough::fit(&frames, &env, s, -1.0, &phi).expect("determined");
            // W = (0.5 − 0.1) + (1 − g)·s.
            assert!((st.a - 0.4).abs() < 0.02, "g {g}: a {}", st.a);
            assert!((st.b - (1.0 - g)).abs() < 0.05, "g {g}: b {}", st.b);
            // With the paint on the line, the evened dip is centred on the paint.
            let i = centres
                .iter()
                .position(|&c| (c.to_degrees() - 3.0).abs() < 1e-9)
                .unwrap();
            let mut p = frames[i].clone();
            st.apply(&mut p);
            let (mut sw, mut swp) = (0.0f64, 0.0f64);
            for (k, v) in p.iter().enumerate() {
                let dip = f64::from(0.5 - v).max(0.0);
                sw += dip;
                swp += dip * phi[k].to_degrees();
            }
            assert!((swp / sw - 3.0).abs() < 0.3, "g {g}: centroid {}", swp / sw);
        }
    }

    #[test]
    fn paint_never_seen_beside_the_line_is_not_fitted() {
        let (phi, frames, s, _) = scene(0.2);
        // Only the frames whose paint lies within 4° of the line's centre.
        let near: Vec<Vec<f32>> = frames[33..38].to_vec();
        let env = envelope(&frames);
        assert!(SeeThrough::fit(&near, &env, s, -1.0, &phi).is_none());
    }
}
