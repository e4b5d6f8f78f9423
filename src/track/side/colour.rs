//! Colour paint on a side view: where a clip has colour and the paint differs from the steel
//! more in colour than in brightness, the profile is read on the projection of (Y′, Cb, Cr)
//! that best separates them, learnt from the first frame: Fisher's linear discriminant,
//! w = S_w⁻¹ (μ_paint − μ_steel) with S_w the pooled within-class scatter (R. A. Fisher, "The
//! use of multiple measurements in taxonomic problems", Annals of Eugenics 7 (1936) 179–188;
//! Duda, Hart & Stork, Pattern Classification, 2nd ed., §3.8.2), as the radial marks do
//! (`track/colour.rs`).
//!
//! Labels come from the first frame without knowing the paint's colour, from chroma alone: the
//! profile bins' mean colours are compared with their median, per channel in robust z (MAD
//! scale), and the paint is the run of bins around the one farthest from it in Cb and Cr. A
//! lamp's reflection along the bar is white (far in Y′, not in chroma), so it lands in the
//! steel class with the shading, and its scatter gives brightness little weight.
//!
//! Part of the track stage: it must never import segment, mechanics, report, `analyze`,
//! `batch`, `find_marks`, `calibrate` or the CLI.

use crate::decode::{FrameRef, LumaRef};
use crate::stats::median_in_place;
use crate::track::colour::moments;

/// Colour must multiply the luma-only separation by this much to be used.
const MIN_GAIN_OVER_LUMA: f64 = 2.0;
/// Sample noise floor added to the scatter's diagonal: 8-bit quantisation, (1/255)²/12 per
/// channel, times four for sensor noise (common practice).
const RIDGE: f64 = 4.0 * (1.0 / 255.0) * (1.0 / 255.0) / 12.0;

/// A learnt projection of (Y′, Cb, Cr): steel maps to 0.25, paint to 0.75.
#[derive(Debug, Clone)]
pub(super) struct Projection {
    w: [f32; 3],
    offset: f32,
    /// Fisher's separation with colour and with luma alone.
    pub separation: (f64, f64),
}

/// Solves the symmetric 3×3 system `m x = b`; None when singular ([`crate::stats::solve3`]).
fn solve3(m: [[f64; 3]; 3], b: [f64; 3]) -> Option<[f64; 3]> {
    crate::stats::solve3(m, b, 1e-300)
}

/// (Y′, Cb, Cr) at pixel (x, y) of a colour frame with 8-bit luma.
fn ycc(frame: FrameRef<'_>, x: u32, y: u32) -> Option<[f32; 3]> {
    let c = frame.chroma?;
    let LumaRef::U8(l) = frame.luma else {
        return None;
    };
    let (cb, cr) = c.at(x, y, frame.width, frame.height);
    Some([
        f32::from(l[y as usize * frame.width as usize + x as usize]) / 255.0,
        cb,
        cr,
    ])
}

impl Projection {
    /// Learns the projection from the first frame: `bins` holds, per profile bin, its bar angle
    /// (rad) and its screen sample points. None when the frame has no colour, no bin stands out
    /// in chroma, or colour adds too little over luma.
    pub fn learn(
        frame: FrameRef<'_>,
        bins: &[(f64, &[[f64; 2]])],
        shift: [f64; 2],
    ) -> Option<Projection> {
        frame.chroma?;
        let (w, h) = (frame.width, frame.height);
        let mut per_bin: Vec<Vec<[f32; 3]>> = Vec::with_capacity(bins.len());
        for (_, pts) in bins {
            let mut v = Vec::with_capacity(pts.len());
            for q in pts.iter() {
                let x = (q[0] + shift[0]).round();
                let y = (q[1] + shift[1]).round();
                if x < 0.0 || y < 0.0 || x >= f64::from(w) || y >= f64::from(h) {
                    continue;
                }
                v.push(ycc(frame, x as u32, y as u32)?);
            }
            per_bin.push(v);
        }
        let means: Vec<Option<[f64; 3]>> = per_bin
            .iter()
            .map(|v| {
                (v.len() >= 2).then(|| {
                    let (m, _) = moments(v);
                    m
                })
            })
            .collect();
        let filled: Vec<[f64; 3]> = means.iter().flatten().copied().collect();
        if filled.len() < bins.len() / 2 {
            return None;
        }
        let mut centre = [0.0; 3];
        let mut spread = [0.0; 3];
        for k in 1..3 {
            let mut v: Vec<f64> = filled.iter().map(|m| m[k]).collect();
            centre[k] = median_in_place(&mut v).unwrap_or(0.0);
            let mut dev: Vec<f64> = filled.iter().map(|m| (m[k] - centre[k]).abs()).collect();
            spread[k] = (1.4826 * median_in_place(&mut dev).unwrap_or(0.0)).max(1.0 / 255.0);
        }
        let score: Vec<f64> = means
            .iter()
            .map(|m| {
                m.map_or(0.0, |m| {
                    (1..3)
                        .map(|k| ((m[k] - centre[k]) / spread[k]).powi(2))
                        .sum()
                })
            })
            .collect();
        let (peak, &best) = score.iter().enumerate().max_by(|a, b| a.1.total_cmp(b.1))?;
        let chroma_dist = means[peak].map_or(0.0, |m| (m[1] - centre[1]).hypot(m[2] - centre[2]));
        if best < 25.0 || chroma_dist < 0.02 {
            return None;
        }
        // Paint: the run of bins around the peak scoring at least half of it; steel: bins
        // scoring under a tenth of it (other stripes and their edges belong to neither).
        let mut paint = Vec::new();
        let mut steel = Vec::new();
        for (k, s) in score.iter().enumerate() {
            if *s < 0.1 * best {
                steel.extend_from_slice(&per_bin[k]);
            }
        }
        for dir in [1isize, -1] {
            let mut k = peak as isize + if dir > 0 { 0 } else { -1 };
            while k >= 0 && (k as usize) < score.len() && score[k as usize] >= 0.5 * best {
                paint.extend_from_slice(&per_bin[k as usize]);
                k += dir;
            }
        }
        if paint.len() < 8 || steel.len() < 50 {
            return None;
        }
        let (mp, sp) = moments(&paint);
        let (mm, sm) = moments(&steel);
        let mut sw = [[0.0; 3]; 3];
        for a in 0..3 {
            for b in 0..3 {
                sw[a][b] = sm[a][b] + sp[a][b] + if a == b { RIDGE } else { 0.0 };
            }
        }
        let delta = [0, 1, 2].map(|k| mp[k] - mm[k]);
        let wv = solve3(sw, delta)?;
        let j_colour: f64 = (0..3).map(|k| wv[k] * delta[k]).sum();
        let j_luma = delta[0] * delta[0] / sw[0][0];
        if !(j_colour.is_finite() && j_colour > MIN_GAIN_OVER_LUMA * j_luma) {
            return None;
        }
        let pm: f64 = (0..3).map(|k| wv[k] * mm[k]).sum();
        let g = 0.5 / j_colour;
        Some(Projection {
            w: wv.map(|v| (v * g) as f32),
            offset: (0.25 - pm * g) as f32,
            separation: (j_colour, j_luma),
        })
    }

    /// The projection at pixel (x, y); the luma alone where the frame has no colour.
    #[inline]
    pub fn at(&self, frame: FrameRef<'_>, x: u32, y: u32) -> f32 {
        let c = ycc(frame, x, y).unwrap_or([frame.value(x, y), 0.0, 0.0]);
        self.offset + self.w[0] * c[0] + self.w[1] * c[1] + self.w[2] * c[2]
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn solves_a_symmetric_system() {
        let m = [[4.0, 1.0, 0.5], [1.0, 3.0, 0.2], [0.5, 0.2, 2.0]];
        let x = solve3(m, [1.0, 2.0, 3.0]).unwrap();
        for (r, want) in m.iter().zip([1.0, 2.0, 3.0]) {
            let got: f64 = r.iter().zip(&x).map(|(a, b)| a * b).sum();
            assert!((got - want).abs() < 1e-12);
        }
    }
}
