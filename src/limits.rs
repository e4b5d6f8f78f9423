//! Bounds on every resource a user's input controls: frame area, text file size, worker threads.
//! One place, so that every reader applies the same caps (docs/conventions.md, "Plausible ranges
//! and limits").
//!
//! The caps are far above anything a camera, a rig or a calibration table needs, and far
//! below what would exhaust a workstation's memory. They are *common practice* sizes, not
//! measurements: the largest frame a high-speed or phone camera records is about 8.3 Mpx (4K),
//! and a still camera's about 60 Mpx.
//!
//! Shared by every stage: it imports only `error` and must never import a pipeline stage or the
//! CLI.

use std::io::Read;
use std::path::Path;

use crate::error::{Error, Result};

/// Largest frame area accepted from any image or video reader, pixels (8192 × 8192).
pub const MAX_FRAME_PIXELS: u64 = 1 << 26;

/// Largest frame side accepted from any image or video reader, pixels.
pub const MAX_FRAME_SIDE: u32 = 1 << 15;

/// Largest text input (a rig or a CSV), bytes (16 MiB: a rig is a few kB, a calibration table
/// a few hundred lines).
pub const MAX_TEXT_BYTES: u64 = 16 << 20;

/// Most frames whose presentation timestamps are kept (8 bytes each: 128 MiB at the cap, 19
/// hours at 240 fps). A longer clip is timed by its rate.
pub const MAX_FRAMES_TIMED: usize = 1 << 24;

/// Most worker threads per core a batch may start (`--jobs` above this is clamped).
pub const MAX_JOBS_PER_CORE: usize = 4;

/// Most blows `predict --blows` simulates (each draw of its interval runs them all).
pub const MAX_PREDICT_BLOWS: usize = 200;

/// Blow rates `predict --blow-rate` accepts, blows per minute: from a slow hand-held tool to
/// well past the fastest impact tools (*common practice* range), so that the simulated time
/// (blows / rate) stays at most two minutes.
pub const PREDICT_BLOW_RATE_PER_MIN: (f64, f64) = (100.0, 10_000.0);

/// Frames of one analysis that side-view marks may hold: a side mark keeps one profile across
/// the bar per frame (about 2.9 kB) until the clip ends, so this bounds that store at about
/// 290 MB a mark (over 80 s at 1,000 fps). Radial marks keep a few numbers a frame and have
/// no such bound.
pub const MAX_SIDE_VIEW_FRAMES: usize = 100_000;

/// Checks a frame size read from a header before any pixel is decoded.
///
/// # Errors
/// [`Error::Input`] naming `path` when the frame is larger than [`MAX_FRAME_PIXELS`] or a
/// side larger than [`MAX_FRAME_SIDE`].
pub fn check_frame_size(path: &Path, width: u32, height: u32) -> Result<()> {
    let area = u64::from(width) * u64::from(height);
    if area > MAX_FRAME_PIXELS || width > MAX_FRAME_SIDE || height > MAX_FRAME_SIDE {
        return Err(Error::input(
            path,
            format!(
                "the header claims a {width}x{height} frame, larger than twistmark reads \
                 ({} Mpx, {MAX_FRAME_SIDE} px a side); the file is damaged or not a camera \
                 frame: replace it or scale it down",
                MAX_FRAME_PIXELS >> 20
            ),
        ));
    }
    Ok(())
}

/// The decoding limits handed to the `image` crate, so that a header is checked against
/// [`MAX_FRAME_SIDE`] and the decoder's allocations stay bounded before any pixel is read.
pub fn image_limits() -> image::Limits {
    let mut l = image::Limits::default();
    l.max_image_width = Some(MAX_FRAME_SIDE);
    l.max_image_height = Some(MAX_FRAME_SIDE);
    // 16-bit RGBA at the largest area, plus room for the decoder's own buffers.
    l.max_alloc = Some(MAX_FRAME_PIXELS * 8 + (64 << 20));
    l
}

/// Refuses a named pipe or a socket given as an input file: opening one waits, without end,
/// for a writer that may never come. (Devices such as `/dev/zero` are read through the size
/// caps instead; a missing path is left for the caller to report.)
///
/// # Errors
/// [`Error::Input`] naming `path` when it is a pipe or socket.
pub fn refuse_pipe(path: &Path) -> Result<()> {
    #[cfg(unix)]
    {
        use std::os::unix::fs::FileTypeExt;
        if let Ok(meta) = std::fs::metadata(path) {
            let t = meta.file_type();
            if t.is_fifo() || t.is_socket() {
                return Err(Error::input(
                    path,
                    "is a named pipe or socket, not a file (reading it would wait for a writer); \
                     save the data to a file and give that",
                ));
            }
        }
    }
    #[cfg(not(unix))]
    let _ = path;
    Ok(())
}

/// Reads a text file of at most [`MAX_TEXT_BYTES`] through `take`, so a device such as
/// `/dev/zero` or a huge file ends in a message rather than exhausting memory.
///
/// # Errors
/// [`Error::Io`] when it cannot be read; [`Error::Input`] when it is not a regular file, is
/// too large, or is not UTF-8 text.
pub fn read_text(path: &Path, what: &str) -> Result<String> {
    refuse_pipe(path)?;
    let meta = std::fs::metadata(path).map_err(|e| {
        if e.kind() == std::io::ErrorKind::NotFound {
            Error::input(path, format!("no such {what} file; check the path"))
        } else {
            Error::io(path, e)
        }
    })?;
    if meta.is_dir() {
        return Err(Error::input(
            path,
            format!("is a folder, not a {what} file; give the file's path"),
        ));
    }
    let f = std::fs::File::open(path).map_err(|e| Error::io(path, e))?;
    let mut bytes = Vec::new();
    f.take(MAX_TEXT_BYTES + 1)
        .read_to_end(&mut bytes)
        .map_err(|e| Error::io(path, e))?;
    if bytes.len() as u64 > MAX_TEXT_BYTES {
        return Err(Error::input(
            path,
            format!(
                "is larger than {} MiB, far more than any {what} file; give the right file",
                MAX_TEXT_BYTES >> 20
            ),
        ));
    }
    String::from_utf8(bytes).map_err(|e| {
        Error::input(
            path,
            format!(
                "is not UTF-8 text (byte {}); give a {what} file saved as text",
                e.utf8_error().valid_up_to()
            ),
        )
    })
}

/// Worker threads for `jobs` requested on a machine with `cores` cores: at most
/// [`MAX_JOBS_PER_CORE`] per core. Returns the number and whether it was clamped.
pub fn clamp_jobs(jobs: usize, cores: usize) -> (usize, bool) {
    let cap = cores.max(1) * MAX_JOBS_PER_CORE;
    if jobs > cap {
        (cap, true)
    } else {
        (jobs, false)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn frame_size_cap_is_on_area_and_side() {
        let p = Path::new("x.png");
        assert!(check_frame_size(p, 3840, 2160).is_ok());
        assert!(check_frame_size(p, 8192, 8192).is_ok());
        assert!(check_frame_size(p, 8193, 8192).is_err());
        assert!(check_frame_size(p, 65535, 2).is_err());
        let e = check_frame_size(p, 65535, 65535).unwrap_err().to_string();
        assert!(e.contains("x.png") && e.contains("65535x65535"), "{e}");
    }

    #[test]
    fn text_cap_stops_at_the_limit_and_refuses_folders_and_binary() {
        let dir = tempfile::tempdir().unwrap();
        let e = read_text(dir.path(), "rig").unwrap_err().to_string();
        assert!(e.contains("folder"), "{e}");
        let big = dir.path().join("big.json");
        std::fs::write(&big, vec![b' '; (MAX_TEXT_BYTES + 10) as usize]).unwrap();
        let e = read_text(&big, "rig").unwrap_err().to_string();
        assert!(e.contains("MiB"), "{e}");
        let bin = dir.path().join("bin.json");
        std::fs::write(&bin, [b'{', 0xff, 0xfe]).unwrap();
        assert!(
            read_text(&bin, "rig")
                .unwrap_err()
                .to_string()
                .contains("UTF-8")
        );
        let ok = dir.path().join("ok.json");
        std::fs::write(&ok, "{}").unwrap();
        assert_eq!(read_text(&ok, "rig").unwrap(), "{}");
    }

    #[test]
    fn jobs_are_clamped_to_a_multiple_of_the_cores() {
        assert_eq!(clamp_jobs(3, 2), (3, false));
        assert_eq!(clamp_jobs(8, 2), (8, false));
        assert_eq!(clamp_jobs(10_000, 2), (8, true));
        assert_eq!(clamp_jobs(5, 0), (4, true));
    }
}
