//! Pixel rulers for the set-up preview, so a pivot or radius can be read off the picture and
//! typed into the rig by hand.
//!
//! In: the preview image (the frame enlarged by a whole factor `s`). Out: the same image, same
//! size (so it stays the frame enlarged by `s`), with light bands along its top and left edges
//! carrying rulers in *frame* pixel coordinates: x to the right, y down, origin at the centre
//! of the top-left pixel (docs/conventions.md). Frame coordinate `x` sits at image column
//! `x·s + (s − 1)/2` (see [`super::overlay::View`]). The bands are see-through, so the frame
//! under them still shows.
//!
//! Part of the report stage: it reads results through `crate::Analysis` and must never import
//! `batch`, `find_marks`, `calibrate` or the CLI.

use ab_glyph::FontRef;
use image::{Rgb, RgbImage};

use super::draw;

/// Width of the ruler bands, image pixels.
const MARGIN_PX: u32 = 26;

/// How much of a band is white over the frame (0 to 1).
const BAND_WHITE: f32 = 0.72;

/// The spacing of numbered ticks, frame pixels: about every 60 to 150 image pixels.
fn label_step(s: u32) -> u32 {
    let s = s.max(1);
    [10, 20, 50, 100, 200, 500]
        .into_iter()
        .find(|&st| st * s >= 60)
        .unwrap_or(1000)
}

/// Tick length, image pixels: longest at numbered ticks, then every 50 frame pixels.
fn tick_len(v: u32, step: u32) -> f32 {
    if v.is_multiple_of(step) {
        12.0
    } else if v.is_multiple_of(50) {
        8.0
    } else {
        4.0
    }
}

/// Adds the rulers: see-through light bands on the top and left edges, a tick every 10 frame
/// pixels (longer every 50) and a number at every numbered tick.
pub(crate) fn draw_pixel_rulers(img: &mut RgbImage, s: u32, font: &FontRef<'_>) {
    let s = s.max(1);
    let (w, h) = img.dimensions();
    let m = MARGIN_PX.min(w / 4).min(h / 4);
    if m < 8 {
        return;
    }
    for (x, y, p) in img.enumerate_pixels_mut() {
        if x < m || y < m {
            for c in &mut p.0 {
                *c = (f32::from(*c) * (1.0 - BAND_WHITE) + 255.0 * BAND_WHITE).round() as u8;
            }
        }
    }
    let ink = Rgb([30, 30, 30]);
    let step = label_step(s);
    let size = 12.0;
    let pos = |v: u32| (v * s) as f32 + (s as f32 - 1.0) / 2.0;
    let edge = m as f32 - 1.0;
    // Top ruler: x.
    let mut x = 0;
    while x * s < w {
        let len = tick_len(x, step);
        draw::line(img, (pos(x), edge - len), (pos(x), edge), ink);
        if x.is_multiple_of(step) && pos(x) as u32 > m {
            let t = x.to_string();
            let (tw, _) = draw::text_size(font, size, &t);
            let tx = (pos(x) as i32 - tw as i32 / 2).min(w as i32 - tw as i32 - 1);
            draw::text(img, font, size, (tx, 1), ink, &t);
        }
        x += 10;
    }
    // Left ruler: y.
    let mut y = 0;
    while y * s < h {
        let len = tick_len(y, step);
        draw::line(img, (edge - len, pos(y)), (edge, pos(y)), ink);
        if y.is_multiple_of(step) && pos(y) as u32 > m {
            let t = y.to_string();
            let (_, th) = draw::text_size(font, size, &t);
            let ty = pos(y) as i32 - th as i32 - 2;
            draw::text(img, font, size, (1, ty.max(0)), ink, &t);
        }
        y += 10;
    }
    draw::text(img, font, 11.0, (2, 2), ink, "px");
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn rulers_keep_the_size_and_ink_at_frame_pixel_ticks() {
        let font = super::super::overlay::font().unwrap();
        let s = 2;
        let mut img = RgbImage::from_pixel(320 * s, 240 * s, Rgb([128, 128, 128]));
        draw_pixel_rulers(&mut img, s, &font);
        assert_eq!(
            img.dimensions(),
            (320 * s, 240 * s),
            "still the frame enlarged by s"
        );
        // Inside the bands the frame is lightened; beyond them it is unchanged.
        assert!(img.get_pixel(330, 5).0[0] > 200);
        assert_eq!(
            img.get_pixel(MARGIN_PX + 5, MARGIN_PX + 5),
            &Rgb([128, 128, 128])
        );
        // A tick at frame x = 110 (image column 110·2 + 0.5), none between ticks.
        let dark = |px: &Rgb<u8>| px.0[0] < 100;
        let at = (110 * s) as f32 + 0.5;
        let at = at.round() as u32;
        assert!((at - 1..=at + 1).any(|c| dark(img.get_pixel(c, MARGIN_PX - 2))));
        let between = (115 * s) as f32 + 0.5;
        assert!(!dark(img.get_pixel(between.round() as u32, MARGIN_PX - 2)));
        assert_eq!(label_step(1), 100);
        assert_eq!(label_step(4), 20);
    }
}
