//! Textured backgrounds: a brushed-steel bench, whose fine straight streaks look like short
//! painted stripes to an eye that judges by looks. The texture is fixed on the bench (it
//! moves only with camera shake) and is drawn only where no part covers the background.

use serde::{Deserialize, Serialize};

/// A brushed-steel bench top behind the parts.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct BrushedSteel {
    /// Direction of the streaks on screen, degrees from +x towards +y.
    pub angle_deg: f64,
    /// Distance between neighbouring streak lanes, px.
    pub pitch_px: f64,
    /// Full width of one streak, px.
    pub width_px: f64,
    /// Mean length of one streak, px.
    pub length_px: f64,
    /// Fraction of the lane segments that carry a streak, 0..1.
    pub density: f64,
    /// Largest luma a streak adds (or takes away, for a dark streak), 0..1.
    pub amplitude: f32,
    /// Seed of the streaks' placement (a fixed hash, not a random stream).
    pub seed: u64,
}

/// SplitMix64 finaliser (Steele, Lea & Flood 2014), used as a fixed hash.
fn mix(mut z: u64) -> u64 {
    z = z.wrapping_add(0x9e37_79b9_7f4a_7c15);
    z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
    z ^ (z >> 31)
}

/// A hash of `(seed, a, b)` as a number in [0, 1).
fn unit_hash(seed: u64, a: i64, b: i64) -> f64 {
    let h = mix(seed ^ mix(a as u64 ^ mix(b as u64 ^ 0x5bd1_e995)));
    (h >> 11) as f64 / (1u64 << 53) as f64
}

impl BrushedSteel {
    /// The luma the texture adds at scene point (x, y).
    ///
    /// The plane is cut into lanes `pitch_px` apart across the streak direction; each lane is
    /// cut into segments of `length_px` along it (offset per lane); a segment carries a streak
    /// with probability `density`, of a hashed amplitude and sign, with a raised-cosine
    /// profile across its width and tapered ends.
    pub fn at(&self, x: f64, y: f64) -> f32 {
        let (c, s) = {
            let a = self.angle_deg.to_radians();
            (a.cos(), a.sin())
        };
        let along = x * c + y * s;
        let across = -x * s + y * c;
        let lane = (across / self.pitch_px).floor();
        let t = across - (lane + 0.5) * self.pitch_px;
        let half = 0.5 * self.width_px;
        if t.abs() >= half {
            return 0.0;
        }
        let li = lane as i64;
        let off = unit_hash(self.seed, li, -1) * self.length_px;
        let pos = (along + off) / self.length_px;
        let seg = pos.floor();
        let si = seg as i64;
        if unit_hash(self.seed, li, si) >= self.density {
            return 0.0;
        }
        let frac = pos - seg;
        // Streaks fill 60-95 % of their segment, placed at its middle.
        let fill = 0.6 + 0.35 * unit_hash(self.seed ^ 1, li, si);
        let e = (frac - 0.5).abs() / (0.5 * fill);
        if e >= 1.0 {
            return 0.0;
        }
        let taper = (1.0 - e * e).sqrt();
        let across_w = 0.5 * (1.0 + (std::f64::consts::PI * t / half).cos());
        let k = unit_hash(self.seed ^ 2, li, si);
        let sign = if k < 0.7 { 1.0 } else { -1.0 };
        let amp = 0.4 + 0.6 * unit_hash(self.seed ^ 3, li, si);
        (sign * amp * taper * across_w) as f32 * self.amplitude
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn streaks_are_thin_bounded_and_fixed() {
        let b = BrushedSteel {
            angle_deg: 12.0,
            pitch_px: 5.0,
            width_px: 2.5,
            length_px: 40.0,
            density: 0.4,
            amplitude: 0.1,
            seed: 7,
        };
        let mut lit = 0;
        for y in 0..100 {
            for x in 0..100 {
                let v = b.at(f64::from(x), f64::from(y));
                assert!(v.abs() <= 0.1 + 1e-6);
                if v.abs() > 0.02 {
                    lit += 1;
                }
                // The same point always gives the same luma.
                assert_eq!(v, b.at(f64::from(x), f64::from(y)));
            }
        }
        // About density × (width / pitch) × fill of the plane carries a visible streak.
        assert!((400..3000).contains(&lit), "{lit}");
    }
}
