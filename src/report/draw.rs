//! Drawing on an RGB image for the overlay frames and the set-up preview: one-pixel straight
//! lines, filled rectangles and text in the embedded font.
//!
//! Lines follow Bresenham's algorithm (J. E. Bresenham, "Algorithm for computer control of a
//! digital plotter", IBM Systems Journal 4(1), 1965): step one pixel along the longer axis and
//! move one pixel along the other whenever the accumulated error passes half a pixel. The
//! endpoints need not be whole pixels, so the error is carried in floating point; every pixel
//! drawn is the line's own colour, with no blending. Text is laid out with the font's advances
//! and kerning, each glyph outline rasterised by `ab_glyph` to a coverage per pixel, and that
//! coverage used as the weight of the text colour over the image (the "over" operator of
//! T. Porter and T. Duff, "Compositing digital images", Computer Graphics 18(3), 1984, with
//! coverage as alpha). Everything drawn is clipped to the image.
//!
//! Part of the report stage, used by the overlays and by find-marks' preview: it must never
//! import any other module of the crate.

use ab_glyph::{Font, FontRef, OutlinedGlyph, PxScale, ScaleFont, point};
use image::{Rgb, RgbImage};

/// Sets pixel (`x`, `y`) when it lies inside the image.
fn put(img: &mut RgbImage, x: i32, y: i32, color: Rgb<u8>) {
    if x >= 0 && y >= 0 && (x as u32) < img.width() && (y as u32) < img.height() {
        img.put_pixel(x as u32, y as u32, color);
    }
}

/// A one-pixel line from `a` to `b`, image pixel coordinates (see the module doc).
pub(crate) fn line(img: &mut RgbImage, a: (f32, f32), b: (f32, f32), color: Rgb<u8>) {
    // Clipped to the image (a pixel of margin) first, so the pixels stepped through are
    // bounded by the image's size whatever a rig's pivot or radii put at the ends.
    let Some((a, b)) = clip(a, b, img.width() as f32, img.height() as f32) else {
        return;
    };
    let steep = (b.1 - a.1).abs() > (b.0 - a.0).abs();
    // Step along x: swap the axes of a steep line, and draw from left to right.
    let (mut a, mut b) = if steep {
        ((a.1, a.0), (b.1, b.0))
    } else {
        (a, b)
    };
    if a.0 > b.0 {
        std::mem::swap(&mut a, &mut b);
    }
    let (dx, dy) = (b.0 - a.0, (b.1 - a.1).abs());
    let y_step = if a.1 < b.1 { 1 } else { -1 };
    let mut y = a.1 as i32;
    let mut error = dx / 2.0;
    for x in (a.0 as i32)..=(b.0 as i32) {
        if steep {
            put(img, y, x, color);
        } else {
            put(img, x, y, color);
        }
        error -= dy;
        if error < 0.0 {
            y += y_step;
            error += dx;
        }
    }
}

/// The part of the segment `a`–`b` inside [−1, w] × [−1, h], None when none of it is, or an
/// end is not finite (Liang & Barsky, "A new concept and method for line clipping", ACM
/// Transactions on Graphics 3(1), 1984: the segment's parameter range narrowed by each edge).
fn clip(a: (f32, f32), b: (f32, f32), w: f32, h: f32) -> Option<((f32, f32), (f32, f32))> {
    // In f64: an end a billion pixels away leaves f32 no precision for the clipped end.
    let (ax, ay, bx, by) = (
        f64::from(a.0),
        f64::from(a.1),
        f64::from(b.0),
        f64::from(b.1),
    );
    if ![ax, ay, bx, by].iter().all(|v| v.is_finite()) {
        return None;
    }
    let (dx, dy) = (bx - ax, by - ay);
    let (mut t0, mut t1) = (0.0f64, 1.0f64);
    for (p, q) in [
        (-dx, ax + 1.0),
        (dx, f64::from(w) - ax),
        (-dy, ay + 1.0),
        (dy, f64::from(h) - ay),
    ] {
        if p == 0.0 {
            if q < 0.0 {
                return None;
            }
        } else {
            let t = q / p;
            if p < 0.0 {
                t0 = t0.max(t);
            } else {
                t1 = t1.min(t);
            }
        }
    }
    let at = |t: f64| ((ax + t * dx) as f32, (ay + t * dy) as f32);
    (t0 <= t1).then(|| (at(t0), at(t1)))
}

/// Fills the `w` × `h` rectangle whose top-left pixel is (`x`, `y`).
pub(crate) fn fill_rect(img: &mut RgbImage, x: i32, y: i32, w: u32, h: u32, color: Rgb<u8>) {
    let patch = RgbImage::from_pixel(w, h, color);
    image::imageops::replace(img, &patch, i64::from(x), i64::from(y));
}

/// Lays out `text` at `size` pixels (the font's ascent-to-descent height) with its top-left
/// corner at the origin, hands each visible glyph's outline to `each`, and returns the text's
/// box: one pixel more than the rounded-up advance width, and the font's height rounded up.
fn layout(
    font: &FontRef<'_>,
    size: f32,
    text: &str,
    mut each: impl FnMut(OutlinedGlyph),
) -> (u32, u32) {
    if text.is_empty() {
        return (0, 0);
    }
    let scale = PxScale::from(size);
    let font = font.as_scaled(scale);
    let mut caret = 0.0f32;
    let mut previous = None;
    for c in text.chars() {
        let id = font.glyph_id(c);
        if let Some(p) = previous {
            caret += font.kern(p, id);
        }
        previous = Some(id);
        let glyph = id.with_scale_and_position(scale, point(caret, font.ascent()));
        if let Some(outline) = font.outline_glyph(glyph) {
            each(outline);
        }
        caret += font.h_advance(id);
    }
    (
        1 + caret.max(0.0).ceil() as u32,
        font.height().max(0.0).ceil() as u32,
    )
}

/// Width and height of `text` drawn at `size` pixels, image pixels.
pub(crate) fn text_size(font: &FontRef<'_>, size: f32, text: &str) -> (u32, u32) {
    layout(font, size, text, |_| {})
}

/// Draws `text` at `size` pixels with the top-left corner of its box at (`x`, `y`).
pub(crate) fn text(
    img: &mut RgbImage,
    font: &FontRef<'_>,
    size: f32,
    (x, y): (i32, i32),
    color: Rgb<u8>,
    text: &str,
) {
    layout(font, size, text, |glyph| {
        let corner = glyph.px_bounds().min;
        let (x0, y0) = (x + corner.x as i32, y + corner.y as i32);
        glyph.draw(|gx, gy, coverage| {
            let (px, py) = (x0 + gx as i32, y0 + gy as i32);
            if px < 0 || py < 0 || px as u32 >= img.width() || py as u32 >= img.height() {
                return;
            }
            let a = coverage.clamp(0.0, 1.0);
            let under = img.get_pixel_mut(px as u32, py as u32);
            for (u, c) in under.0.iter_mut().zip(color.0) {
                *u = (f32::from(*u) * (1.0 - a) + f32::from(c) * a).round() as u8;
            }
        });
    });
}

#[cfg(test)]
mod tests {
    #[test]
    fn a_line_far_outside_is_clipped_not_stepped_through() {
        // Ends a billion pixels away: the same pixels as the segment across the image, and
        // no billion-step loop (this test would take minutes without the clip).
        let mut far = super::RgbImage::new(20, 10);
        let ink = super::Rgb([255, 0, 0]);
        super::line(&mut far, (-1e9, 5.0), (1e9, 5.0), ink);
        let mut near = super::RgbImage::new(20, 10);
        super::line(&mut near, (-1.0, 5.0), (20.0, 5.0), ink);
        assert_eq!(far, near);
        let mut none = super::RgbImage::new(20, 10);
        super::line(&mut none, (-50.0, -50.0), (-40.0, 60.0), ink);
        super::line(&mut none, (f32::NAN, 1.0), (3.0, 3.0), ink);
        assert_eq!(none, super::RgbImage::new(20, 10));
    }

    use super::*;

    const INK: Rgb<u8> = Rgb([200, 10, 10]);
    const PAPER: Rgb<u8> = Rgb([255, 255, 255]);

    fn inked(img: &RgbImage) -> Vec<(u32, u32)> {
        img.enumerate_pixels()
            .filter(|(_, _, p)| **p != PAPER)
            .map(|(x, y, _)| (x, y))
            .collect()
    }

    #[test]
    fn lines_are_one_pixel_per_step_along_the_longer_axis() {
        // A shallow line: one pixel per column from x = 2 to 12, y moving from 3 to 7.
        let mut img = RgbImage::from_pixel(20, 20, PAPER);
        line(&mut img, (2.0, 3.0), (12.0, 7.0), INK);
        let px = inked(&img);
        assert_eq!(px.len(), 11, "{px:?}");
        let mut cols: Vec<u32> = px.iter().map(|p| p.0).collect();
        cols.sort_unstable();
        assert_eq!(cols, (2..=12).collect::<Vec<_>>());
        assert_eq!(*img.get_pixel(2, 3), INK);
        assert_eq!(*img.get_pixel(12, 7), INK);
        // Every drawn pixel lies within half a pixel (plus rounding) of the true line.
        for (x, y) in px {
            let on = 3.0 + 0.4 * (x as f32 - 2.0);
            assert!((y as f32 - on).abs() <= 0.6, "({x}, {y})");
        }
        // A steep line drawn from its far end: one pixel per row, ends included.
        let mut img = RgbImage::from_pixel(20, 20, PAPER);
        line(&mut img, (9.0, 15.0), (5.0, 1.0), INK);
        let mut rows: Vec<u32> = inked(&img).iter().map(|p| p.1).collect();
        rows.sort_unstable();
        assert_eq!(rows, (1..=15).collect::<Vec<_>>());
        assert_eq!(*img.get_pixel(9, 15), INK);
        assert_eq!(*img.get_pixel(5, 1), INK);
    }

    #[test]
    fn drawing_off_the_image_is_clipped_not_a_panic() {
        let mut img = RgbImage::from_pixel(10, 10, PAPER);
        line(&mut img, (-5.0, 5.0), (30.0, 5.0), INK);
        assert_eq!(inked(&img).len(), 10);
        fill_rect(&mut img, -3, 8, 5, 10, INK);
        assert_eq!(*img.get_pixel(0, 9), INK);
        assert_eq!(*img.get_pixel(1, 8), INK);
        assert_eq!(*img.get_pixel(2, 8), PAPER);
        let font = super::super::overlay::font().unwrap();
        text(&mut img, &font, 14.0, (-4, -6), INK, "x88");
        text(&mut img, &font, 14.0, (8, 8), INK, "x88");
    }

    #[test]
    fn text_is_inked_inside_its_box_and_grows_with_size() {
        let font = super::super::overlay::font().unwrap();
        let (w, h) = text_size(&font, 20.0, "drive +1.25°");
        assert!(
            (81..140).contains(&w) && (20..=24).contains(&h),
            "{w} × {h}"
        );
        let (w2, _) = text_size(&font, 40.0, "drive +1.25°");
        assert!(w2.abs_diff(2 * w) <= 2, "{w} {w2}");
        assert_eq!(text_size(&font, 20.0, ""), (0, 0));
        let mut img = RgbImage::from_pixel(200, 60, PAPER);
        text(&mut img, &font, 20.0, (30, 15), INK, "drive +1.25°");
        let px = inked(&img);
        assert!(px.len() > 100, "{}", px.len());
        for (x, y) in &px {
            assert!(
                (30..30 + w).contains(x) && (15..15 + h).contains(y),
                "({x}, {y})"
            );
        }
        // Fully covered pixels take the text colour itself.
        assert!(img.pixels().any(|p| *p == INK));
    }
}
