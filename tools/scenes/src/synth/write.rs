//! Writers for simulated clips: numbered stills (8- or 16-bit PNG, 16-bit TIFF), video files
//! through [`crate::encode::ClipWriter`], and the truth, rig and scenario JSON beside them.
//! Output is deterministic byte for byte for the same scenario (PNG and TIFF through the
//! `image` crate; video on the same FFmpeg build).

use std::io::Write;
use std::path::Path;

use image::{ImageBuffer, Luma as PixLuma, Rgb};

use super::{Scenario, Truth, render_clip};
use crate::decode::{Frame, Luma};
use crate::{Error, Result};

/// Still image format for [`write_stills`].
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum StillFormat {
    /// PNG, at the camera's depth (8 or 16 bit grey).
    Png,
    /// TIFF, 16-bit grey (8-bit frames are widened ×257), uncompressed.
    Tiff16,
}

impl StillFormat {
    pub(crate) fn extension(self) -> &'static str {
        match self {
            StillFormat::Png => "png",
            StillFormat::Tiff16 => "tif",
        }
    }
}

fn out_err(path: &Path, e: impl std::fmt::Display) -> Error {
    Error::Output {
        path: path.to_path_buf(),
        reason: format!("cannot write: {e}"),
    }
}

/// Writes pretty JSON with a final newline.
pub(crate) fn write_json<T: serde::Serialize>(path: &Path, value: &T) -> Result<()> {
    let mut text = serde_json::to_string_pretty(value).map_err(|e| out_err(path, e))?;
    text.push('\n');
    let mut f = std::fs::File::create(path).map_err(|e| Error::io(path, e))?;
    f.write_all(text.as_bytes()).map_err(|e| Error::io(path, e))
}

/// Writes `truth.json`, `rig.json` and `scenario.json` into `dir` (created if missing).
///
/// # Errors
/// [`Error::Io`] naming the file when it cannot be written.
pub fn write_sidecars(sc: &Scenario, truth: &Truth, dir: &Path) -> Result<()> {
    std::fs::create_dir_all(dir).map_err(|e| Error::io(dir, e))?;
    write_json(&dir.join("truth.json"), truth)?;
    write_json(&dir.join("rig.json"), &sc.rig())?;
    write_json(&dir.join("scenario.json"), sc)
}

/// 8-bit R′G′B′ of a colour frame (full-size chroma), from full-range Y′CbCr by the inverse
/// of the ITU-R BT.601-7 §2.5.2 matrix.
fn frame_rgb(frame: &Frame, luma: &[u8]) -> Vec<u8> {
    let Some(c) = &frame.chroma else {
        return luma.iter().flat_map(|&v| [v, v, v]).collect();
    };
    let w = frame.width as usize;
    let mut out = Vec::with_capacity(luma.len() * 3);
    for (i, &y) in luma.iter().enumerate() {
        let (x, row) = (i % w, i / w);
        let cx = (x * c.width as usize / w).min(c.width as usize - 1);
        let cy = (row * c.height as usize / frame.height as usize).min(c.height as usize - 1);
        let j = cy * c.width as usize + cx;
        let ycc = [
            f32::from(y) / 255.0,
            (f32::from(c.cb[j]) - 128.0) / 255.0,
            (f32::from(c.cr[j]) - 128.0) / 255.0,
        ];
        let rgb = super::look::ycc_to_rgb(ycc);
        out.extend(rgb.map(|v| (v.clamp(0.0, 1.0) * 255.0).round() as u8));
    }
    out
}

fn save_frame(frame: &Frame, path: &Path, fmt: StillFormat) -> Result<()> {
    let (w, h) = (frame.width, frame.height);
    let result = match (&frame.luma, fmt) {
        (Luma::U8(d), StillFormat::Png) if frame.chroma.is_some() => {
            let rgb = frame_rgb(frame, d);
            ImageBuffer::<Rgb<u8>, _>::from_raw(w, h, rgb).map(|img| img.save(path))
        }
        (Luma::U8(d), StillFormat::Png) => {
            ImageBuffer::<PixLuma<u8>, _>::from_raw(w, h, d.clone()).map(|img| img.save(path))
        }
        (Luma::U16(d), _) => {
            ImageBuffer::<PixLuma<u16>, _>::from_raw(w, h, d.clone()).map(|img| img.save(path))
        }
        (Luma::U8(d), StillFormat::Tiff16) => {
            let wide: Vec<u16> = d.iter().map(|&v| u16::from(v) * 257).collect();
            ImageBuffer::<PixLuma<u16>, _>::from_raw(w, h, wide).map(|img| img.save(path))
        }
    };
    match result {
        Some(r) => r.map_err(|e| out_err(path, e)),
        None => Err(out_err(path, "frame buffer does not match its size")),
    }
}

/// Renders every frame into `dir/frames/f_00000.<ext>` … and writes the sidecars into `dir`.
/// Returns the number of frames written.
///
/// # Errors
/// [`Error::Io`] or [`Error::Output`] naming the file that could not be written.
pub fn write_stills(sc: &Scenario, truth: &Truth, dir: &Path, fmt: StillFormat) -> Result<u64> {
    let frames = render_clip(sc, truth);
    save_stills(&frames, &dir.join("frames"), fmt)?;
    write_sidecars(sc, truth, dir)?;
    Ok(truth.frames)
}

/// Renders the bench at rest ([`super::render_rest_frame`]) into `path`: a PNG at the
/// camera's depth, or a 16-bit TIFF when the name ends in `.tif`/`.tiff`. This is the zero
/// still a take is analysed against (`analyze --zero-still`, or `<clip>.rest.png` in a batch).
///
/// # Errors
/// [`Error::Io`] or [`Error::Output`] naming the file that could not be written.
pub fn write_rest_still(sc: &Scenario, path: &Path) -> Result<()> {
    let ext = path
        .extension()
        .map(|e| e.to_string_lossy().to_ascii_lowercase())
        .unwrap_or_default();
    let fmt = if ext == "tif" || ext == "tiff" {
        StillFormat::Tiff16
    } else {
        StillFormat::Png
    };
    save_frame(&super::render_rest_frame(sc), path, fmt)
}

/// Saves rendered frames as `dir/f_00000.<ext>` ….
pub(crate) fn save_stills(frames: &[Frame], dir: &Path, fmt: StillFormat) -> Result<()> {
    std::fs::create_dir_all(dir).map_err(|e| Error::io(dir, e))?;
    for frame in frames {
        let path = dir.join(format!("f_{:05}.{}", frame.index, fmt.extension()));
        save_frame(frame, &path, fmt)?;
    }
    Ok(())
}

/// Renders every frame into the video file `path` (container from the extension) with the
/// given codec, storing `container_fps_hz` as the container's (playback) rate. Returns the
/// path written.
///
/// # Errors
/// As [`crate::encode::ClipWriter::create_with_depth`] and [`crate::encode::ClipWriter::write`].
#[cfg(feature = "ffmpeg")]
pub fn write_video(
    sc: &Scenario,
    truth: &Truth,
    path: &Path,
    codec: crate::encode::Codec,
    container_fps_hz: f64,
) -> Result<std::path::PathBuf> {
    let frames = render_clip(sc, truth);
    save_video(&frames, path, codec, container_fps_hz)?;
    Ok(path.to_path_buf())
}

/// Encodes rendered frames (all the same size and depth) into `path`.
#[cfg(feature = "ffmpeg")]
pub(crate) fn save_video(
    frames: &[Frame],
    path: &Path,
    codec: crate::encode::Codec,
    container_fps_hz: f64,
) -> Result<()> {
    let Some(first) = frames.first() else {
        return Err(out_err(path, "no frames to write"));
    };
    if let Some(parent) = path.parent() {
        std::fs::create_dir_all(parent).map_err(|e| Error::io(parent, e))?;
    }
    let mut w = if first.chroma.is_some() {
        crate::encode::ClipWriter::create_colour(
            path,
            codec,
            first.width,
            first.height,
            container_fps_hz,
        )?
    } else {
        crate::encode::ClipWriter::create_with_depth(
            path,
            codec,
            first.width,
            first.height,
            container_fps_hz,
            first.bit_depth,
        )?
    };
    for f in frames {
        w.write(f)?;
    }
    w.finish()?;
    Ok(())
}
