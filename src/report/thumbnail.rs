//! Stage 5, report: the frame thumbnail of `report.html`. In: an [`Analysis`] and its clip
//! (re-read up to the first analysed frame). Out: that frame with every mark's pivot, annulus,
//! detected stripe and angle drawn (the overlay drawing, [`super::overlay`]), at most
//! [`MAX_WIDTH_PX`] wide, as a PNG `data:` URI that the page carries inline.
//!
//! Part of the report stage: it reads results through `crate::Analysis` and must never import
//! `batch`, `find_marks`, `calibrate` or the CLI.

use base64::Engine;
use image::imageops::FilterType;

use super::overlay::{Moment, draw_overlay, font};
use crate::analyze::Analysis;
use crate::decode::{self, Frame};

/// Widest thumbnail, pixels (a little over an A4 page's text width at 150 dpi).
pub(crate) const MAX_WIDTH_PX: u32 = 960;

/// The thumbnail as a `data:image/png;base64,…` URI, or why there is none (a clip held only
/// in memory, or one moved or changed since the analysis).
pub(crate) fn first_frame_data_uri(a: &Analysis) -> Result<String, String> {
    let Some(&first) = a.trace.frames.first() else {
        return Err("no frame was analysed".into());
    };
    if !a.clip.path.exists() {
        return Err(format!(
            "{} cannot be read any more, so no frame is shown",
            a.clip.path.display()
        ));
    }
    let mut source = decode::open(&a.clip.path).map_err(|e| e.to_string())?;
    let mut frame = Frame::empty();
    loop {
        if !source.read_into(&mut frame).map_err(|e| e.to_string())? {
            return Err(format!(
                "the clip ended before frame {first}; was it changed since the analysis?"
            ));
        }
        if frame.index >= first {
            break;
        }
    }
    let m = Moment {
        sample: 0,
        frame: frame.index,
        reasons: vec!["first analysed frame".into()],
    };
    let font = font().map_err(|e| e.to_string())?;
    let mut img = draw_overlay(&frame, a, &m, &font);
    if img.width() > MAX_WIDTH_PX {
        let h = (u64::from(img.height()) * u64::from(MAX_WIDTH_PX) / u64::from(img.width())).max(1)
            as u32;
        img = image::imageops::resize(&img, MAX_WIDTH_PX, h, FilterType::Triangle);
    }
    let mut png = Vec::new();
    img.write_to(&mut std::io::Cursor::new(&mut png), image::ImageFormat::Png)
        .map_err(|e| format!("could not encode the thumbnail: {e}"))?;
    Ok(format!(
        "data:image/png;base64,{}",
        base64::engine::general_purpose::STANDARD.encode(&png)
    ))
}
