//! Colour and surface detail for scenes drawn by the randomiser (`random.rs`): paint and metal
//! colours, finishes with a texture that turns with the part (mottled zinc plating, brushed
//! steel, black oxide, rust), worn paint, a square drive recess, pits, a bevelled rim, glints,
//! a washer under the nut, a wheel face with bolt holes, vignetting and a lighting gradient.
//! Scenes without a [`Look`] (the named presets) render exactly as before, in luma only.
//!
//! Colours are given as R′G′B′ in 0..1 and carried as Y′CbCr with the ITU-R BT.601-7 luma
//! weights (Y′ = 0.299 R′ + 0.587 G′ + 0.114 B′, Cb = 0.564 (B′ − Y′), Cr = 0.713 (R′ − Y′);
//! BT.601-7 §2.5.1–2.5.2), full range. The renderer is not the world: these colours and
//! textures are invented to be hard in the ways real parts are (paint whose brightness equals
//! the metal's, texture that turns with the part, static reflections), not measured.

use serde::{Deserialize, Serialize};

/// A colour as Y′CbCr: Y′ in 0..1, Cb and Cr in −0.5..0.5.
pub(crate) type Ycc = [f32; 3];

/// R′G′B′ (0..1 each) to Y′CbCr (ITU-R BT.601-7 §2.5.1–2.5.2).
pub(crate) fn rgb_to_ycc(rgb: [f32; 3]) -> Ycc {
    let y = 0.299 * rgb[0] + 0.587 * rgb[1] + 0.114 * rgb[2];
    [y, 0.564 * (rgb[2] - y), 0.713 * (rgb[0] - y)]
}

/// Y′CbCr back to R′G′B′ (the inverse of [`rgb_to_ycc`]'s matrix; BT.601-7 §2.5.2 solved for
/// R′, G′, B′), not clamped.
pub(crate) fn ycc_to_rgb(c: Ycc) -> [f32; 3] {
    let r = c[0] + c[2] / 0.713;
    let b = c[0] + c[1] / 0.564;
    let g = (c[0] - 0.299 * r - 0.114 * b) / 0.587;
    [r, g, b]
}

/// A metal finish: its base colour and the texture that turns with the part.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum Finish {
    /// Black oxide: dark, faintly mottled.
    BlackOxide,
    /// Zinc-plated, light grey with a bluish cast, mottled at two scales.
    Zinc,
    /// Bare steel brushed along one direction: fine streaks.
    Brushed,
    /// Rust: red-brown, strongly mottled.
    Rust,
}

impl Finish {
    /// Base R′G′B′ colour.
    pub fn rgb(self) -> [f32; 3] {
        match self {
            Finish::BlackOxide => [0.15, 0.15, 0.16],
            Finish::Zinc => [0.60, 0.61, 0.64],
            Finish::Brushed => [0.52, 0.52, 0.53],
            Finish::Rust => [0.46, 0.26, 0.14],
        }
    }

    /// Relative brightness variation at part point (u, w), px in the part's own frame.
    fn texture(self, seed: u64, u: f64, w: f64) -> f32 {
        match self {
            Finish::BlackOxide => 0.12 * value_noise(seed, u / 6.0, w / 6.0),
            Finish::Zinc => {
                0.08 * value_noise(seed, u / 2.5, w / 2.5)
                    + 0.10 * value_noise(seed ^ 0x51, u / 11.0, w / 11.0)
            }
            // Streaks along u: fine across (w), long along.
            Finish::Brushed => 0.10 * value_noise(seed, u / 25.0, w / 0.8),
            Finish::Rust => {
                0.18 * value_noise(seed, u / 3.5, w / 3.5)
                    + 0.12 * value_noise(seed ^ 0x77, u / 9.0, w / 9.0)
            }
        }
    }

    /// The finish's colour at part point (u, w).
    pub(crate) fn at(self, seed: u64, u: f64, w: f64) -> Ycc {
        scale(rgb_to_ycc(self.rgb()), 1.0 + self.texture(seed, u, w))
    }
}

/// A washer under the nut: a pale ring that does not turn.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Washer {
    /// Outer radius, px.
    pub r_outer_px: f64,
    /// R′G′B′ colour.
    pub rgb: [f32; 3],
}

/// A wheel face behind the nut (or elsewhere), with bolt holes on a circle. The scene's fixed
/// mark is painted on it when the scene has one.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Wheel {
    /// Centre on screen, px.
    pub centre: [f64; 2],
    /// Radius, px.
    pub radius_px: f64,
    /// The wheel's finish.
    pub finish: Finish,
    /// Number of bolt holes.
    pub holes: u32,
    /// Radius of the circle the holes sit on, px.
    pub hole_circle_px: f64,
    /// Radius of each hole, px.
    pub hole_radius_px: f64,
    /// Screen angle of the first hole, degrees.
    pub hole_phase_deg: f64,
}

/// Colour and surface detail of a randomised scene (see the module notes).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Look {
    /// Seed of the textures, wear and pits.
    pub texture_seed: u64,
    /// Paint R′G′B′.
    pub paint_rgb: [f32; 3],
    /// Share of the stripe worn through to the metal, 0..0.6.
    pub wear: f32,
    /// How much of the paint's colour is left where it is not worn, 0..1 (1 = fresh).
    pub paint_strength: f32,
    /// The drive disc's finish (replaces the scene's `Steel`).
    pub drive_finish: Finish,
    /// The nut face's finish.
    pub nut_finish: Finish,
    /// Half side of a dark square drive recess at the drive pivot, px (0 = none).
    pub recess_half_px: f64,
    /// Pits on the drive disc: (u, w, radius) px in the disc's frame at the start pose.
    pub pits: Vec<[f64; 3]>,
    /// Width of the drive disc's bevelled rim, px (0 = none); lit from `light_deg`.
    pub rim_px: f64,
    /// Screen direction the lamp lights from, degrees.
    pub light_deg: f64,
    /// A static glint on the nut face, if any.
    pub nut_glint: Option<super::Highlight>,
    /// A washer under the nut, if any.
    pub washer: Option<Washer>,
    /// A wheel face behind the nut, if any.
    pub wheel: Option<Wheel>,
    /// The fixed mark's bracket finish (when it is on a bracket, not a wheel).
    pub bracket_finish: Finish,
    /// Brightness lost at the frame corners relative to the centre, 0..1 (vignetting).
    pub vignette: f32,
    /// Lighting gradient: relative brightness change across the frame in x and y.
    pub gradient: [f32; 2],
}

/// `c` with its brightness scaled by `k` (every channel: Y′CbCr is linear in R′G′B′).
#[inline]
pub(crate) fn scale(c: Ycc, k: f32) -> Ycc {
    [c[0] * k, c[1] * k, c[2] * k]
}

/// `a + t·(b − a)` per channel.
#[inline]
pub(crate) fn mix(a: Ycc, b: Ycc, t: f32) -> Ycc {
    [
        a[0] + t * (b[0] - a[0]),
        a[1] + t * (b[1] - a[1]),
        a[2] + t * (b[2] - a[2]),
    ]
}

/// Hash of a lattice point to −1..1 (SplitMix64 finaliser, as the sample placement).
fn lattice(seed: u64, i: i64, j: i64) -> f32 {
    let h = super::scene::splitmix64(
        seed ^ (i as u64).wrapping_mul(0x9e37_79b9_7f4a_7c15)
            ^ (j as u64).wrapping_mul(0xc2b2_ae3d_27d4_eb4f),
    );
    ((h >> 40) as f32 / (1u64 << 24) as f32) * 2.0 - 1.0
}

/// Smooth value noise in −1..1 at (x, y) in lattice units: hashed lattice values blended with
/// the smoothstep weight 3t² − 2t³ (Perlin, "An image synthesizer", SIGGRAPH 1985, from memory).
pub(crate) fn value_noise(seed: u64, x: f64, y: f64) -> f32 {
    let (fx, fy) = (x.floor(), y.floor());
    let (i, j) = (fx as i64, fy as i64);
    let s = |t: f64| (t * t * (3.0 - 2.0 * t)) as f32;
    let (tx, ty) = (s(x - fx), s(y - fy));
    let a = lattice(seed, i, j);
    let b = lattice(seed, i + 1, j);
    let c = lattice(seed, i, j + 1);
    let d = lattice(seed, i + 1, j + 1);
    let top = a + tx * (b - a);
    let bot = c + tx * (d - c);
    top + ty * (bot - top)
}

impl Look {
    /// Paint coverage at stripe point (u, w) of a stripe on a part, 0..1, after wear.
    pub(crate) fn coverage(&self, salt: u64, u: f64, w: f64) -> f32 {
        if self.wear <= 0.0 {
            return self.paint_strength;
        }
        let n = 0.5 + 0.5 * value_noise(self.texture_seed ^ salt, u / 2.2, w / 2.2);
        let t = ((n - self.wear) / 0.12 + 0.5).clamp(0.0, 1.0);
        t * t * (3.0 - 2.0 * t) * self.paint_strength
    }

    /// Static lighting gain at screen pixel (x, y) of a `w × h` frame: vignetting (a cos⁴-like
    /// fall-off approximated by 1 − v·r², r = 1 at the corners) times a linear gradient.
    pub(crate) fn light(&self, x: f64, y: f64, w: f64, h: f64) -> f32 {
        let nx = x / w.max(1.0) - 0.5;
        let ny = y / h.max(1.0) - 0.5;
        let r2 = ((nx * nx + ny * ny) / 0.5) as f32;
        (1.0 - self.vignette * r2)
            * (1.0 + self.gradient[0] * nx as f32 + self.gradient[1] * ny as f32)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ycc_round_trips_and_grey_has_no_chroma() {
        // BT.601-7 §2.5: a grey (R′ = G′ = B′) has Cb = Cr = 0 and Y′ equal to its level.
        let g = rgb_to_ycc([0.4, 0.4, 0.4]);
        assert!((g[0] - 0.4).abs() < 1e-6 && g[1].abs() < 1e-6 && g[2].abs() < 1e-6);
        for rgb in [[1.0, 0.48, 0.05], [0.12, 0.3, 0.85], [0.6, 0.61, 0.64]] {
            let back = ycc_to_rgb(rgb_to_ycc(rgb));
            for k in 0..3 {
                assert!((back[k] - rgb[k]).abs() < 1e-5, "{rgb:?} -> {back:?}");
            }
        }
    }

    #[test]
    fn value_noise_is_smooth_bounded_and_seeded() {
        let mut worst_step = 0.0f32;
        for i in 0..400 {
            let x = i as f64 * 0.01;
            let a = value_noise(7, x, 0.3);
            let b = value_noise(7, x + 0.01, 0.3);
            assert!((-1.0..=1.0).contains(&a));
            worst_step = worst_step.max((a - b).abs());
        }
        // The blend's slope is at most 1.5 × the largest lattice difference (2): 0.03 per 0.01.
        assert!(worst_step <= 0.03 + 1e-6, "{worst_step}");
        assert_ne!(value_noise(7, 0.5, 0.5), value_noise(8, 0.5, 0.5));
    }
}
