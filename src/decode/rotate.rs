//! Turns decoded frames to the orientation a player displays them in: phones store portrait
//! video landscape with a display-rotation matrix in the container, and every pixel
//! coordinate in twistmark (rig, overlays, preview, find-marks) is the displayed picture's
//! (docs/conventions.md, "Pixel coordinates").
//!
//! Part of the decode stage: it must never import track, segment, mechanics, report, `analyze`,
//! `batch`, `find_marks`, `calibrate` or the CLI.

use super::{Frame, Luma};

/// A plane of `w × h` samples turned `cw_deg` (0, 90, 180 or 270) clockwise: returns the new
/// samples; the new width is `h` for 90 and 270.
pub(crate) fn rotate_plane<T: Copy>(src: &[T], w: usize, h: usize, cw_deg: u32) -> Vec<T> {
    match cw_deg {
        90 => {
            // Displayed (x', y') of a w' = h, h' = w picture shows stored (y', h − 1 − x').
            let mut out = Vec::with_capacity(src.len());
            for yp in 0..w {
                for xp in 0..h {
                    out.push(src[(h - 1 - xp) * w + yp]);
                }
            }
            out
        }
        180 => src.iter().rev().copied().collect(),
        270 => {
            // Displayed (x', y') shows stored (w − 1 − y', x').
            let mut out = Vec::with_capacity(src.len());
            for yp in 0..w {
                for xp in 0..h {
                    out.push(src[xp * w + (w - 1 - yp)]);
                }
            }
            out
        }
        _ => src.to_vec(),
    }
}

/// Turns a whole frame (luma and colour planes) `cw_deg` clockwise, in place.
pub(crate) fn rotate_frame(f: &mut Frame, cw_deg: u32) {
    if cw_deg == 0 {
        return;
    }
    let (w, h) = (f.width as usize, f.height as usize);
    f.luma = match &f.luma {
        Luma::U8(d) => Luma::U8(rotate_plane(d, w, h, cw_deg)),
        Luma::U16(d) => Luma::U16(rotate_plane(d, w, h, cw_deg)),
    };
    if let Some(c) = f.chroma.as_mut() {
        let (cw, ch) = (c.width as usize, c.height as usize);
        c.cb = rotate_plane(&c.cb, cw, ch, cw_deg);
        c.cr = rotate_plane(&c.cr, cw, ch, cw_deg);
        if cw_deg != 180 {
            std::mem::swap(&mut c.width, &mut c.height);
        }
    }
    if cw_deg != 180 {
        std::mem::swap(&mut f.width, &mut f.height);
    }
}

/// The clockwise display rotation (0, 90, 180 or 270) of a display matrix's counter-clockwise
/// rotation angle in degrees (as FFmpeg's `av_display_rotation_get` gives it), to the nearest
/// quarter turn.
pub(crate) fn clockwise_quarter_turns(ccw_deg: f64) -> u32 {
    if !ccw_deg.is_finite() {
        return 0;
    }
    let q = (-ccw_deg / 90.0).round() as i64;
    (q.rem_euclid(4) * 90) as u32
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn quarter_turns_move_the_corners_where_a_player_shows_them() {
        // 3 × 2 stored: a b c / d e f.
        let s = ['a', 'b', 'c', 'd', 'e', 'f'];
        // 90° clockwise: d a / e b / f c.
        assert_eq!(rotate_plane(&s, 3, 2, 90), ['d', 'a', 'e', 'b', 'f', 'c']);
        assert_eq!(rotate_plane(&s, 3, 2, 180), ['f', 'e', 'd', 'c', 'b', 'a']);
        // 270° clockwise: c f / b e / a d.
        assert_eq!(rotate_plane(&s, 3, 2, 270), ['c', 'f', 'b', 'e', 'a', 'd']);
        assert_eq!(clockwise_quarter_turns(-90.0), 90);
        assert_eq!(clockwise_quarter_turns(90.0), 270);
        assert_eq!(clockwise_quarter_turns(180.0), 180);
        assert_eq!(clockwise_quarter_turns(-0.0), 0);
    }
}
