//! The preview picture: the first frame with each mark's pivot, annulus and role drawn.
//!
//! Part of the `find-marks` command (built on decode and track, writing through report): it
//! must never import segment, mechanics, `analyze`, `batch` or the CLI.

use std::f64::consts::PI;
use std::path::Path;

use super::{FoundMarks, PivotFrom};
use crate::error::{Error, Result};
use crate::rig::{Role, Spin};

/// Writes the preview: the first frame with every mark's pivot, annulus (both rims, through
/// the ellipse on an oblique disc), its first-frame stripe line and a label with its role.
///
/// # Errors
/// [`Error::Output`] naming `path` when the PNG cannot be written, or exists and `force` is
/// false.
pub fn write_preview(found: &FoundMarks, path: &Path, force: bool) -> Result<()> {
    use crate::report::overlay::{
        DRIVE, FIXED, NUT, View, disc_point, font, label, thick_line, to_rgb,
    };
    let font = font()?;
    let s = crate::report::overlay::scale_for(found.first.width);
    let mut img = to_rgb(&found.first, s);
    let view = View { s: s as f32 };
    let grey = image::Rgb([200, 200, 200]);
    for m in &found.marks {
        let colour = match m.role {
            Some(Role::Drive) => DRIVE,
            Some(Role::Nut) => NUT,
            Some(Role::Fixed) => FIXED,
            None => grey,
        };
        let r = &m.mark;
        for rad in r.radius {
            let steps = 144;
            for k in 0..steps {
                let a0 = k as f64 * 2.0 * PI / steps as f64;
                let a1 = (k + 1) as f64 * 2.0 * PI / steps as f64;
                let p0 = disc_point(r.pivot, rad, a0, r.ellipse.as_ref());
                let p1 = disc_point(r.pivot, rad, a1, r.ellipse.as_ref());
                thick_line(&mut img, view.p(p0.0, p0.1), view.p(p1.0, p1.1), colour, 2);
            }
        }
        let c = view.p(r.pivot[0], r.pivot[1]);
        let arm = 6.0 * s as f32;
        thick_line(&mut img, (c.0 - arm, c.1), (c.0 + arm, c.1), colour, 2);
        thick_line(&mut img, (c.0, c.1 - arm), (c.0, c.1 + arm), colour, 2);
        let mut text = match (m.role, &m.alternative) {
            (Some(role), Some(alt)) => format!("{} {alt}", role.name()),
            (Some(role), None) => role.name().to_string(),
            (None, Some(alt)) => alt.clone(),
            (None, None) => "unused stripe".to_string(),
        };
        if let Some(t) = r.tighten {
            text.push_str(match t {
                Spin::Cw => " (tightens cw)",
                Spin::Ccw => " (tightens ccw)",
            });
        }
        if m.pivot_from == PivotFrom::StripeEnd && m.role != Some(Role::Fixed) {
            text.push_str(" pivot?");
        }
        if let Some(e) = r.ellipse {
            text.push_str(&format!(" b/a {:.2}", e.axis_ratio));
        }
        let top = disc_point(r.pivot, r.radius[1], -PI / 2.0, r.ellipse.as_ref());
        let (lx, ly) = view.p(r.pivot[0], top.1);
        label(
            &mut img,
            &font,
            lx as i32 - 30 * s as i32,
            ly as i32 - 14 * s as i32,
            7.0 * s as f32,
            &text,
        );
    }
    crate::report::rulers::draw_pixel_rulers(&mut img, s, &font);
    let mut png = std::io::Cursor::new(Vec::new());
    img.write_to(&mut png, image::ImageFormat::Png)
        .map_err(|e| Error::Output {
            path: path.to_path_buf(),
            reason: format!("could not encode the preview PNG: {e}"),
        })?;
    super::outputs::write_atomic(path, &png.into_inner(), force)
}
