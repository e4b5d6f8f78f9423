//! The colour renderer of a scene with a [`Look`]: the same geometry as the luma renderer,
//! with finishes, wear, recess, pits, rim, glints, washer and wheel, into Y′CbCr.

use rayon::prelude::*;

use super::super::look::{Look, Ycc, mix, rgb_to_ycc, scale};
use super::raster::{EDGE_MARGIN_PX, Geo, Pose, Prepared, rect_sd, splitmix64};

impl Prepared<'_> {
    /// Scene colour (before any light gain) at screen point (x, y) of a scene with a [`Look`],
    /// and the lower bound of the distance to the nearest edge, px. The same geometry as
    /// [`Prepared::eval`], with finishes, wear, recess, pits, rim, glints, washer and wheel.
    fn eval_look(&self, lk: &Look, g: &Geo, x: f64, y: f64) -> (Ycc, f64) {
        let s = self.scene;
        let seed = lk.texture_seed;
        let (x, y) = self.to_scene(g, x, y);
        let mut margin = f64::INFINITY;
        let fy = (y / f64::from(s.height.max(1))).clamp(0.0, 1.0) as f32;
        let mut c: Ycc = [
            s.background_top + (s.background_bottom - s.background_top) * fy,
            0.0,
            0.0,
        ];
        let paint = rgb_to_ycc(lk.paint_rgb);

        // Wheel face behind the nut.
        let mut on_wheel = false;
        if let Some(wh) = &lk.wheel {
            let (dx, dy) = (x - wh.centre[0], y - wh.centre[1]);
            let sd = (dx * dx + dy * dy).sqrt() - wh.radius_px;
            margin = margin.min(sd.abs());
            if sd < 0.0 {
                on_wheel = true;
                c = wh.finish.at(seed ^ 0x3, dx, dy);
            }
        }
        // Fixed mark: on the wheel, or on a bracket plate.
        if let Some(f) = &s.fixed {
            let dx = x - f.pivot[0];
            let dy = y - f.pivot[1];
            if lk.wheel.is_none() {
                let cm = 0.5 * (f.stripe.r_inner_px + f.stripe.r_outer_px);
                let (cx, cy) = (cm * self.fixed_dir[0], cm * self.fixed_dir[1]);
                let pd = ((dx - cx).abs() - f.plate_half_px[0])
                    .max((dy - cy).abs() - f.plate_half_px[1]);
                margin = margin.min(pd.abs());
                if pd < 0.0 {
                    c = lk.bracket_finish.at(seed ^ 0x4, dx, dy);
                }
            }
            let u = dx * self.fixed_dir[0] + dy * self.fixed_dir[1];
            let w = -dx * self.fixed_dir[1] + dy * self.fixed_dir[0];
            let sd = rect_sd(u, w, &f.stripe);
            margin = margin.min(sd.abs());
            if sd < 0.0 {
                c = mix(c, paint, lk.coverage(0xF1, u, w));
            }
        }
        // Bolt holes go through whatever is painted on the wheel.
        if let (Some(wh), true) = (&lk.wheel, on_wheel) {
            for k in 0..wh.holes {
                let a = (wh.hole_phase_deg + 360.0 * f64::from(k) / f64::from(wh.holes.max(1)))
                    .to_radians();
                let hx = wh.centre[0] + wh.hole_circle_px * a.cos();
                let hy = wh.centre[1] + wh.hole_circle_px * a.sin();
                let d = ((x - hx).powi(2) + (y - hy).powi(2)).sqrt() - wh.hole_radius_px;
                margin = margin.min(d.abs());
                if d < 0.0 {
                    c = [0.03, 0.0, 0.0];
                }
            }
        }

        // Drive flag disc.
        let d = &s.drive;
        let dx = x - d.pivot[0];
        let dy = y - d.pivot[1];
        let p = self.to_disc(dx, dy);
        let sc = self.ellipse.map_or(1.0, |e| e.1);
        let rr = (p[0] * p[0] + p[1] * p[1]).sqrt();
        let disc_sd = rr - d.radius_px;
        margin = margin.min(disc_sd.abs() * sc);
        if disc_sd < 0.0 {
            let u = p[0] * g.drive_dir[0] + p[1] * g.drive_dir[1];
            let w = -p[0] * g.drive_dir[1] + p[1] * g.drive_dir[0];
            let mut base = lk.drive_finish.at(seed ^ 0x1, u, w);
            if lk.rim_px > 0.0 {
                let rim_sd = rr - (d.radius_px - lk.rim_px);
                margin = margin.min(rim_sd.abs() * sc);
                if rim_sd > 0.0 {
                    // A bevel facing outwards: lit where it faces the lamp, static on screen.
                    let phi = dy.atan2(dx) - lk.light_deg.to_radians();
                    base = scale(base, (0.5 + 0.9 * phi.cos().max(0.0)) as f32);
                }
            }
            if lk.recess_half_px > 0.0 {
                let sd = u.abs().max(w.abs()) - lk.recess_half_px;
                margin = margin.min(sd.abs() * sc);
                if sd < 0.0 {
                    base = [0.035, 0.0, 0.0];
                }
            }
            for pit in &lk.pits {
                let sd = ((u - pit[0]).powi(2) + (w - pit[1]).powi(2)).sqrt() - pit[2];
                margin = margin.min(sd.abs() * sc);
                if sd < 0.0 {
                    base = scale(base, 0.4);
                }
            }
            let sd = rect_sd(u, w, &d.stripe);
            margin = margin.min(sd.abs() * sc);
            if sd < 0.0 {
                base = mix(base, paint, lk.coverage(0xD1, u, w));
            }
            if let Some(h) = &d.highlight {
                let hx = dx - h.offset_px[0];
                let hy = dy - h.offset_px[1];
                base[0] +=
                    h.peak * (-(hx * hx + hy * hy) / (2.0 * h.sigma_px * h.sigma_px)).exp() as f32;
            }
            c = base;
        }

        // Washer (static) and nut face.
        let n = &s.nut;
        let dx = x - n.pivot[0];
        let dy = y - n.pivot[1];
        let rn = (dx * dx + dy * dy).sqrt();
        if let Some(wa) = &lk.washer {
            let sd = rn - wa.r_outer_px;
            margin = margin.min(sd.abs());
            if sd < 0.0 {
                c = scale(
                    rgb_to_ycc(wa.rgb),
                    1.0 + 0.06 * super::super::look::value_noise(seed ^ 0x5, dx / 3.0, dy / 3.0),
                );
            }
        }
        let apothem = 0.5 * n.across_flats_px;
        let mut hex_sd = f64::NEG_INFINITY;
        let c30 = 3f64.sqrt() / 2.0;
        let base = [
            g.hex_dir[0] * c30 - g.hex_dir[1] * 0.5,
            g.hex_dir[1] * c30 + g.hex_dir[0] * 0.5,
        ];
        let normals = [
            base,
            [base[0] * 0.5 - base[1] * c30, base[1] * 0.5 + base[0] * c30],
            [
                -base[0] * 0.5 - base[1] * c30,
                -base[1] * 0.5 + base[0] * c30,
            ],
        ];
        for nn in normals {
            hex_sd = hex_sd.max((dx * nn[0] + dy * nn[1]).abs() - apothem);
        }
        margin = margin.min(hex_sd.abs());
        if hex_sd < 0.0 {
            let u = dx * g.nut_dir[0] + dy * g.nut_dir[1];
            let w = -dx * g.nut_dir[1] + dy * g.nut_dir[0];
            let mut face = lk.nut_finish.at(seed ^ 0x2, u, w);
            let stud_sd = rn - n.stud_radius_px;
            margin = margin.min(stud_sd.abs());
            if stud_sd < 0.0 {
                face = [0.06, 0.0, 0.0];
            }
            let sd = rect_sd(u, w, &n.stripe);
            margin = margin.min(sd.abs());
            if sd < 0.0 {
                face = mix(face, paint, lk.coverage(0xE1, u, w));
            }
            if let Some(h) = &lk.nut_glint {
                let hx = dx - h.offset_px[0];
                let hy = dy - h.offset_px[1];
                face[0] +=
                    h.peak * (-(hx * hx + hy * hy) / (2.0 * h.sigma_px * h.sigma_px)).exp() as f32;
            }
            c = face;
        }
        (c, margin)
    }

    /// Mean colour over the pixel square at (x, y), averaged over the poses, with the static
    /// lighting of the look: as [`Prepared::pixel`] for a scene with a [`Look`].
    fn pixel_look(&self, lk: &Look, geos: &[Geo], x: u32, y: u32, n: u32) -> Ycc {
        let (px, py) = (f64::from(x), f64::from(y));
        let mut acc = [0.0f32; 3];
        for (gi, g) in geos.iter().enumerate() {
            let (v, margin) = self.eval_look(lk, g, px, py);
            let mean = if margin > EDGE_MARGIN_PX {
                v
            } else {
                let base = (u64::from(x) << 32) ^ u64::from(y) ^ ((gi as u64) << 56);
                let inv = 1.0 / f64::from(n);
                let mut s = [0.0f32; 3];
                for j in 0..n {
                    for i in 0..n {
                        let h = splitmix64(base ^ (u64::from(j * n + i) << 40));
                        let u = (h >> 11) as f64 * (1.0 / (1u64 << 53) as f64);
                        let w = (splitmix64(h) >> 11) as f64 * (1.0 / (1u64 << 53) as f64);
                        let ox = (f64::from(i) + u) * inv - 0.5;
                        let oy = (f64::from(j) + w) * inv - 0.5;
                        let e = self.eval_look(lk, g, px + ox, py + oy).0;
                        for k in 0..3 {
                            s[k] += e[k];
                        }
                    }
                }
                scale(s, 1.0 / (n * n) as f32)
            };
            for k in 0..3 {
                acc[k] += mean[k] * g.gain;
            }
        }
        let light = lk.light(
            px,
            py,
            f64::from(self.scene.width),
            f64::from(self.scene.height),
        );
        scale(acc, light / geos.len() as f32)
    }

    /// Renders a scene with a [`Look`] averaged over `poses` into Y′CbCr, row-major.
    ///
    /// # Panics
    /// When the scene has no look.
    pub fn render_colour(&self, poses: &[Pose]) -> Vec<Ycc> {
        let s = self.scene;
        let lk = s.look.as_ref().expect("a scene with a look");
        let n = s.supersample.clamp(1, 16);
        let geos: Vec<Geo> = poses.iter().map(|p| self.geo(p)).collect();
        let w = s.width as usize;
        let mut out = vec![[0.0f32; 3]; w * s.height as usize];
        out.par_chunks_mut(w.max(1))
            .enumerate()
            .for_each(|(y, row)| {
                for (x, o) in row.iter_mut().enumerate() {
                    *o = self.pixel_look(lk, &geos, x as u32, y as u32, n);
                }
            });
        out
    }
}
