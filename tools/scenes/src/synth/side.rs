//! Side-view scenes: a round bar seen from the side with stripes painted along it, rendered at a
//! known bar angle (exact truth for the side-view tracker).
//!
//! Geometry (orthographic camera, the bar's axis in the image plane): a surface point at bar
//! angle φ, measured from the camera-facing direction, appears at offset `t = R·sin φ` across
//! the axis and is visible when `cos φ > 0`. Screen offset `t` runs along the unit normal `n`
//! of the axis that points the way the rig's `tighten` direction points, so a bar turning the
//! tightening way moves its facing stripe towards +t. Stripe k (of N, equally spaced) sits at
//! bar angle `θ + 2πk/N`. The surface is shaded by a Lambertian term (a light on the camera
//! axis: brightness ∝ cos φ; Lambert's cosine law, from memory), paint and steel alike.
//!
//! Optionally ([`LampLine`]) a lamp's specular reflection runs along the bar: on a surface of
//! revolution the mirror point of a far lamp sits at one angle φ_s on screen whatever the bar's
//! turn, so the line is static while the paint moves (Gaussian across, in φ; its height on
//! matte paint scaled by the paint's gloss). Optionally ([`SideColour`]) steel and paint have
//! colours: frames then carry full-size Cb and Cr planes (BT.601-7 weights, as `look.rs`), the
//! lamp's line is white (it adds to Y′ only). Sensor noise is seeded per frame.

use rand::SeedableRng;
use rand::rngs::ChaCha8Rng;

use crate::decode::Frame;
use crate::rig::{Mark, ScreenDir, SideMark};

use super::look::{Ycc, rgb_to_ycc};

/// A lamp's specular line along the bar (static on screen while the bar turns).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LampLine {
    /// Bar angle from facing the camera at which the line sits, rad.
    pub phi_rad: f64,
    /// Its Gaussian half-width across (standard deviation in bar angle), rad.
    pub sigma_rad: f64,
    /// Its peak added brightness on bare steel, 0..1 (before clipping).
    pub peak: f32,
    /// The share of the peak that shows on paint (0 = matte paint, 1 = as glossy as steel).
    pub paint_gloss: f32,
}

/// Steel and paint colours (R′G′B′, 0..1 each, as lit facing the camera).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SideColour {
    /// Bare steel.
    pub steel_rgb: [f32; 3],
    /// Paint.
    pub paint_rgb: [f32; 3],
    /// Background.
    pub background_rgb: [f32; 3],
}

/// A side view of the bar.
#[derive(Debug, Clone, PartialEq)]
pub struct SideScene {
    /// Frame width, px.
    pub width: u32,
    /// Frame height, px.
    pub height: u32,
    /// Background luma, 0..1.
    pub background: f32,
    /// Bare steel luma facing the camera, 0..1.
    pub steel: f32,
    /// Paint luma facing the camera, 0..1.
    pub paint: f32,
    /// Two points on the bar's centre line (the bar runs through the whole frame), px.
    pub axis: [[f64; 2]; 2],
    /// The bar's radius on screen, px.
    pub radius_px: f64,
    /// Where the stripes start and end along the axis, as fractions of `axis[0]`→`axis[1]`.
    pub stripe_span: [f64; 2],
    /// Each stripe's width on the bar's surface, px (arc length).
    pub stripe_width_px: f64,
    /// Number of stripes equally spaced around the bar.
    pub stripes: u32,
    /// Screen direction in which the facing stripe moves when the bar tightens.
    pub tighten: ScreenDir,
    /// Subsamples per pixel side (n × n per pixel).
    pub supersample: u32,
    /// A static specular line along the bar, if any.
    pub lamp: Option<LampLine>,
    /// Colours (colour frames) instead of the luma levels above, if any.
    pub colour: Option<SideColour>,
    /// Sensor noise, standard deviation on Y′ (0..1); Cb and Cr get half of it.
    pub noise_sigma: f32,
    /// Seed of the noise.
    pub seed: u64,
}

impl SideScene {
    /// A 320×240 bench view: a 12 mm bar about 36 px in radius, running left to right at a
    /// slight slope, yellow paint on bare steel, tightening moves the facing stripe up.
    pub fn bench(stripes: u32) -> SideScene {
        SideScene {
            width: 320,
            height: 240,
            background: 0.12,
            steel: 0.55,
            paint: 0.90,
            axis: [[20.0, 112.0], [300.0, 126.0]],
            radius_px: 36.0,
            stripe_span: [0.2, 0.8],
            stripe_width_px: 6.0,
            stripes: stripes.max(1),
            tighten: ScreenDir::Up,
            supersample: 8,
            lamp: None,
            colour: None,
            noise_sigma: 0.0,
            seed: 0,
        }
    }

    /// The exact rig mark for this view: the stripes' stretch of the axis, the radius, the
    /// tightening direction and the stripe count.
    pub fn mark(&self) -> Mark {
        let [a, b] = self.axis;
        let p = |f: f64| [a[0] + f * (b[0] - a[0]), a[1] + f * (b[1] - a[1])];
        Mark::Side(SideMark {
            axis: [p(self.stripe_span[0]), p(self.stripe_span[1])],
            radius_px: self.radius_px,
            tighten: Some(self.tighten),
            stripes: (self.stripes > 1).then_some(self.stripes),
        })
    }

    /// Unit axis direction and the normal pointing the tightening way.
    fn frame_axes(&self) -> ([f64; 2], [f64; 2]) {
        let [a, b] = self.axis;
        let (dx, dy) = (b[0] - a[0], b[1] - a[1]);
        let len = dx.hypot(dy).max(1e-9);
        let u = [dx / len, dy / len];
        let mut n = [-u[1], u[0]];
        let v = self.tighten.vector();
        if n[0] * v[0] + n[1] * v[1] < 0.0 {
            n = [-n[0], -n[1]];
        }
        (u, n)
    }

    /// Y′CbCr at screen point (x, y) with the bar at angle `theta` (rad, tightening positive).
    fn eval(&self, u: [f64; 2], n: [f64; 2], theta: f64, x: f64, y: f64) -> Ycc {
        let a = self.axis[0];
        let (dx, dy) = (x - a[0], y - a[1]);
        let t = dx * n[0] + dy * n[1];
        let r = self.radius_px;
        let (steel, paint, background) = match self.colour {
            Some(c) => (
                rgb_to_ycc(c.steel_rgb),
                rgb_to_ycc(c.paint_rgb),
                rgb_to_ycc(c.background_rgb),
            ),
            None => (
                [self.steel, 0.0, 0.0],
                [self.paint, 0.0, 0.0],
                [self.background, 0.0, 0.0],
            ),
        };
        if t.abs() >= r {
            return background;
        }
        let s = (dx * u[0] + dy * u[1]) / (self.axis[1][0] - a[0]).hypot(self.axis[1][1] - a[1]);
        let phi = (t / r).asin();
        let shade = phi.cos() as f32;
        let in_span = s >= self.stripe_span[0] && s <= self.stripe_span[1];
        let half = 0.5 * self.stripe_width_px / r;
        let step = std::f64::consts::TAU / f64::from(self.stripes.max(1));
        let painted = in_span
            && (0..self.stripes.max(1)).any(|k| {
                let c = theta + step * f64::from(k);
                let d = (phi - c + std::f64::consts::PI).rem_euclid(std::f64::consts::TAU)
                    - std::f64::consts::PI;
                d.abs() < half
            });
        let base = if painted { paint } else { steel };
        let lit = 0.25 + 0.75 * shade;
        let mut out = base.map(|v| v * lit);
        if let Some(l) = self.lamp {
            let z = (phi - l.phi_rad) / l.sigma_rad.max(1e-6);
            let gloss = if painted { l.paint_gloss } else { 1.0 };
            out[0] += l.peak * gloss * (-0.5 * z * z).exp() as f32;
        }
        out
    }

    /// Renders one 8-bit frame with the bar at angle `theta_rad` (tightening positive, 0 =
    /// stripe 0 facing the camera); a colour frame (full-size Cb, Cr) when [`SideScene::colour`]
    /// is set.
    pub fn render(&self, index: u64, theta_rad: f64) -> Frame {
        let (u, n) = self.frame_axes();
        let ss = self.supersample.max(1);
        let (w, h) = (self.width, self.height);
        let a = self.axis[0];
        let mut img: Vec<Ycc> = Vec::with_capacity(w as usize * h as usize);
        for py in 0..h {
            for px in 0..w {
                // Far from the bar every subsample is background: one sample is enough.
                let t = (f64::from(px) - a[0]) * n[0] + (f64::from(py) - a[1]) * n[1];
                if t.abs() > self.radius_px + 1.5 {
                    img.push(self.eval(u, n, theta_rad, f64::from(px), f64::from(py)));
                    continue;
                }
                let mut acc = [0.0f32; 3];
                for j in 0..ss {
                    for i in 0..ss {
                        let x = f64::from(px) - 0.5 + (f64::from(i) + 0.5) / f64::from(ss);
                        let y = f64::from(py) - 0.5 + (f64::from(j) + 0.5) / f64::from(ss);
                        let v = self.eval(u, n, theta_rad, x, y);
                        for k in 0..3 {
                            acc[k] += v[k];
                        }
                    }
                }
                img.push(acc.map(|v| v / (ss * ss) as f32));
            }
        }
        if self.noise_sigma > 0.0 {
            let mut rng = ChaCha8Rng::seed_from_u64(self.seed);
            rng.set_stream(1_000 + index);
            let sigma = self.noise_sigma;
            for v in img.iter_mut() {
                v[0] += sigma * super::gauss(&mut rng) as f32;
                if self.colour.is_some() {
                    v[1] += 0.5 * sigma * super::gauss(&mut rng) as f32;
                    v[2] += 0.5 * sigma * super::gauss(&mut rng) as f32;
                }
            }
        }
        let q = |v: f32| (v.clamp(0.0, 1.0) * 255.0).round() as u8;
        let mut f = Frame::from_u8(index, w, h, img.iter().map(|v| q(v[0])).collect());
        if self.colour.is_some() {
            let qc = |v: f32| (128.0 + v * 255.0).round().clamp(0.0, 255.0) as u8;
            f.chroma = Some(crate::decode::Chroma {
                width: w,
                height: h,
                cb: img.iter().map(|v| qc(v[1])).collect(),
                cr: img.iter().map(|v| qc(v[2])).collect(),
                siting: crate::decode::ChromaSiting::Centre,
            });
        }
        f
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn facing_stripe_moves_the_tightening_way() {
        // At +30° the facing stripe sits R·sin 30° = 18 px towards "up" (smaller y).
        let sc = SideScene::bench(1);
        let f = sc.render(0, 30f64.to_radians());
        let x = 160u32;
        // Centre line at x = 160: y = 112 + (140/280)·14 = 119.
        // Paint rows: brighter than any bare steel (0.55 at most).
        let rows: Vec<f64> = (0..240u32)
            .filter(|&y| f.value(x, y) > 0.62)
            .map(f64::from)
            .collect();
        assert!(!rows.is_empty());
        let mid = rows.iter().sum::<f64>() / rows.len() as f64;
        // Normal "up" for this slope: the offset is along n, mostly −y.
        assert!(
            (mid - (119.0 - 18.0)).abs() <= 1.0,
            "stripe centre row {mid}"
        );
    }
}
