//! Stage 1, decode: folders of numbered still frames (png, tif/tiff, jpg/jpeg, bmp; extensions
//! in any case), read one file at a time into luma [`Frame`]s.
//!
//! Rules, in order:
//! - A file takes part when its extension is one of the above, its name does not start with
//!   `.` (hidden and resource-fork files), and its stem contains a number. The frame number is
//!   the *last* run of digits in the stem (`shot2_f_0010.png` → 10), compared numerically, so
//!   `f_2` comes before `f_10`. Other files (no number, other extensions, sub-folders) are
//!   ignored.
//! - Files are ordered by that number whatever their format: a `f_0003.jpg` among png files is
//!   frame 3, never moved to the end. Mixing formats is allowed, with a warning, since a lossy
//!   frame in a lossless run is usually a mistake.
//! - Two files with the same number (`f_7.png` and `f_007.png`, or `a_1.png` and `b_1.png`) are
//!   an error naming both: the order would be a guess.
//! - Frame indices count files in order from 0; a gap in the numbers is a
//!   [`Warning::FrameGap`] (times after it assume no frame was lost).
//! - Every header is read on open (size and sample type, no pixel decoding), so a frame of
//!   another size or bit depth is reported before any analysis, naming that file.
//! - 8-bit images give [`Luma::U8`]; 16-bit images give [`Luma::U16`] with `bit_depth` 16.
//!   Colour images are reduced to luma with the Rec. 601 weights Y = 0.299 R + 0.587 G +
//!   0.114 B (ITU-R BT.601-7, §2.5.1), the weights video luma uses; alpha is ignored.
//!
//! Part of the decode stage: it must never import track, segment, mechanics, report, `analyze`,
//! `batch`, `find_marks`, `calibrate` or the CLI.

use std::ffi::OsStr;
use std::path::{Path, PathBuf};

use image::{ColorType, ImageDecoder, ImageReader};

use super::{ClipInfo, ClipKind, Frame, FrameSource, Luma};
use crate::error::{Error, Result};
use crate::warning::Warning;

/// Extensions (lower case) of the still images read as a clip's frames; everything that
/// looks for stills (batch's discovery, the report's clip hash, the output guard) uses this
/// list.
pub const STILL_EXTENSIONS: &[&str] = &["png", "tif", "tiff", "jpg", "jpeg", "bmp"];
/// Largest decoded still accepted, bytes (1 GiB: an 8k × 8k 16-bit RGBA frame is 512 MiB).
const MAX_FRAME_BYTES: usize = 1 << 30;
/// At most this many gap warnings; the rest are summed up in one note.
const MAX_GAP_WARNINGS: usize = 10;

/// One numbered still.
#[derive(Debug, Clone, PartialEq)]
struct Still {
    number: u64,
    path: PathBuf,
}

/// The sample layout of a still: what the frame will hold.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Samples {
    Eight,
    Sixteen,
}

impl Samples {
    fn of(color: ColorType) -> Option<Samples> {
        match color {
            ColorType::L8 | ColorType::La8 | ColorType::Rgb8 | ColorType::Rgba8 => {
                Some(Samples::Eight)
            }
            ColorType::L16
            | ColorType::La16
            | ColorType::Rgb16
            | ColorType::Rgba16
            | ColorType::Rgb32F
            | ColorType::Rgba32F => Some(Samples::Sixteen),
            _ => None,
        }
    }
    fn bit_depth(self) -> u8 {
        match self {
            Samples::Eight => 8,
            Samples::Sixteen => 16,
        }
    }
}

/// Reads a folder of numbered stills one frame at a time.
pub struct StillsSource {
    info: ClipInfo,
    stills: Vec<Still>,
    next: usize,
    raw: Vec<u8>,
}

/// The frame number of a file stem: its last run of ASCII digits, or None.
fn frame_number(stem: &str) -> Option<u64> {
    let bytes = stem.as_bytes();
    let end = bytes.iter().rposition(u8::is_ascii_digit)? + 1;
    let start = bytes[..end]
        .iter()
        .rposition(|b| !b.is_ascii_digit())
        .map_or(0, |i| i + 1);
    stem[start..end].parse().ok()
}

/// The lower-case still extension of `path`, if it is one we read.
fn still_extension(path: &Path) -> Option<String> {
    let ext = path
        .extension()
        .and_then(OsStr::to_str)?
        .to_ascii_lowercase();
    STILL_EXTENSIONS.contains(&ext.as_str()).then_some(ext)
}

/// Canonical format name for an extension (`tif` → `tiff`, `jpg` → `jpeg`).
fn format_name(ext: &str) -> &'static str {
    match ext {
        "png" => "png",
        "tif" | "tiff" => "tiff",
        "jpg" | "jpeg" => "jpeg",
        _ => "bmp",
    }
}

fn file_name(p: &Path) -> String {
    p.file_name().map_or_else(
        || p.display().to_string(),
        |n| n.to_string_lossy().into_owned(),
    )
}

/// Opens a still's decoder, naming the file on failure.
fn decoder_for(path: &Path) -> Result<impl ImageDecoder> {
    crate::limits::refuse_pipe(path)?;
    let mut reader = ImageReader::open(path)
        .map_err(|e| Error::io(path, e))?
        .with_guessed_format()
        .map_err(|e| Error::io(path, e))?;
    // The header is checked against the frame cap before any pixel is decoded, for every
    // still: clip frames, calibration stills and zero stills alike.
    reader.limits(crate::limits::image_limits());
    let dec = reader.into_decoder().map_err(|e| {
        if matches!(e, image::ImageError::Limits(_)) {
            return Error::input(
                path,
                format!(
                    "the header claims a frame larger than twistmark reads ({e}); the file is \
                     damaged or not a camera frame: replace or remove it"
                ),
            );
        }
        Error::input(
            path,
            format!("cannot be read as an image ({e}); replace or remove this frame"),
        )
    })?;
    let (w, h) = dec.dimensions();
    crate::limits::check_frame_size(path, w, h)?;
    Ok(dec)
}

/// Lists the numbered stills in `dir`, sorted by number.
///
/// # Errors
/// [`Error::Input`] naming both files when two share a number; [`Error::Io`] when the folder
/// cannot be listed.
fn list_stills(dir: &Path) -> Result<(Vec<Still>, Vec<String>)> {
    let mut stills = Vec::new();
    let mut formats: Vec<String> = Vec::new();
    for entry in std::fs::read_dir(dir).map_err(|e| Error::io(dir, e))? {
        let entry = entry.map_err(|e| Error::io(dir, e))?;
        let path = entry.path();
        let Some(name) = path.file_name().and_then(OsStr::to_str) else {
            continue;
        };
        if name.starts_with('.') || !path.is_file() {
            continue;
        }
        let Some(ext) = still_extension(&path) else {
            continue;
        };
        let Some(number) = path
            .file_stem()
            .and_then(OsStr::to_str)
            .and_then(frame_number)
        else {
            continue;
        };
        formats.push(format_name(&ext).to_string());
        stills.push(Still { number, path });
    }
    // Sort by number, then name, so that duplicates sit side by side in a fixed order.
    let mut order: Vec<usize> = (0..stills.len()).collect();
    order.sort_by(|&a, &b| {
        (stills[a].number, &stills[a].path).cmp(&(stills[b].number, &stills[b].path))
    });
    let stills: Vec<Still> = order.iter().map(|&i| stills[i].clone()).collect();
    let formats: Vec<String> = order.iter().map(|&i| formats[i].clone()).collect();
    if let Some(pair) = stills.windows(2).find(|p| p[0].number == p[1].number) {
        return Err(Error::input(
            dir,
            format!(
                "'{}' and '{}' both have frame number {}; remove or rename one so that every \
                 frame has its own number",
                file_name(&pair[0].path),
                file_name(&pair[1].path),
                pair[0].number
            ),
        ));
    }
    Ok((stills, formats))
}

/// Gap warnings for sorted frame numbers (at most [`MAX_GAP_WARNINGS`], then one note).
fn gap_warnings(stills: &[Still]) -> Vec<Warning> {
    let gaps: Vec<(u64, u64)> = stills
        .windows(2)
        .filter(|p| p[1].number > p[0].number + 1)
        .map(|p| (p[0].number, p[1].number))
        .collect();
    let mut out: Vec<Warning> = gaps
        .iter()
        .take(MAX_GAP_WARNINGS)
        .map(|&(after, next)| Warning::FrameGap { after, next })
        .collect();
    if gaps.len() > MAX_GAP_WARNINGS {
        let missing: u64 = gaps[MAX_GAP_WARNINGS..]
            .iter()
            .map(|(a, n)| n - a - 1)
            .sum();
        out.push(Warning::Note(format!(
            "{} more gaps in the stills numbering ({missing} more frames missing)",
            gaps.len() - MAX_GAP_WARNINGS
        )));
    }
    out
}

impl StillsSource {
    /// Lists the folder, orders the stills by number and checks every file's header.
    ///
    /// # Errors
    /// [`Error::Input`] when the folder holds no numbered stills, two files share a number, a
    /// file is not a readable image, or a frame's size or bit depth differs from the first
    /// frame's (naming that file); [`Error::Io`] when the folder cannot be listed.
    pub fn open(dir: &Path) -> Result<Self> {
        let (stills, formats) = list_stills(dir)?;
        let Some(first) = stills.first() else {
            return Err(Error::input(
                dir,
                "no numbered still images (png, tif, tiff, jpg, jpeg, bmp with a frame number \
                 in the name, like f_0001.png) in this folder",
            ));
        };
        let mut expect: Option<((u32, u32), Samples)> = None;
        for s in &stills {
            let dec = decoder_for(&s.path)?;
            let size = dec.dimensions();
            let samples = Samples::of(dec.color_type()).ok_or_else(|| {
                Error::input(
                    &s.path,
                    format!(
                        "unsupported sample type {:?}; save stills as 8- or 16-bit grey or colour",
                        dec.color_type()
                    ),
                )
            })?;
            match expect {
                None => expect = Some((size, samples)),
                Some((size0, samples0)) => {
                    if size != size0 {
                        return Err(Error::input(
                            &s.path,
                            format!(
                                "frame is {}x{} but '{}' (the first frame) is {}x{}; every frame \
                                 must have the same size",
                                size.0,
                                size.1,
                                file_name(&first.path),
                                size0.0,
                                size0.1
                            ),
                        ));
                    }
                    if samples != samples0 {
                        return Err(Error::input(
                            &s.path,
                            format!(
                                "frame is {}-bit but '{}' (the first frame) is {}-bit; save every \
                                 frame with the same bit depth",
                                samples.bit_depth(),
                                file_name(&first.path),
                                samples0.bit_depth()
                            ),
                        ));
                    }
                }
            }
        }
        let Some(((width, height), samples)) = expect else {
            unreachable!("stills is not empty");
        };
        let mut warnings = gap_warnings(&stills);
        let mut kinds: Vec<&str> = formats.iter().map(String::as_str).collect();
        kinds.sort_unstable();
        kinds.dedup();
        let codec = if kinds.len() == 1 {
            kinds[0].to_string()
        } else {
            let counts: Vec<String> = kinds
                .iter()
                .map(|k| format!("{} {k}", formats.iter().filter(|f| f == k).count()))
                .collect();
            warnings.push(Warning::Note(format!(
                "the stills mix image formats ({}); they are ordered by number regardless of \
                 format, but check that no frame came from another take or a lossy export",
                counts.join(", ")
            )));
            format!("mixed ({})", kinds.join(", "))
        };
        let info = ClipInfo {
            path: dir.to_path_buf(),
            kind: ClipKind::Stills,
            frames: stills.len() as u64,
            width,
            height,
            bit_depth: samples.bit_depth(),
            container_fps_hz: None,
            codec,
            duration_s: None,
            warnings,
            frame_times: None,
            display_rotation_deg: 0,
        };
        Ok(StillsSource {
            info,
            stills,
            next: 0,
            raw: Vec::new(),
        })
    }
}

/// Rec. 601 luma of 8-bit RGB, rounded: (299 R + 587 G + 114 B + 500) / 1000.
fn luma601_u8(r: u8, g: u8, b: u8) -> u8 {
    ((299 * u32::from(r) + 587 * u32::from(g) + 114 * u32::from(b) + 500) / 1000) as u8
}

/// Rec. 601 luma of 16-bit RGB, rounded.
fn luma601_u16(r: u16, g: u16, b: u16) -> u16 {
    ((299 * u64::from(r) + 587 * u64::from(g) + 114 * u64::from(b) + 500) / 1000) as u16
}

/// Fills `frame`'s luma from a raw decoded image of colour type `color`.
fn fill_luma(raw: &[u8], color: ColorType, n: usize, frame: &mut Frame) {
    let channels = usize::from(color.channel_count());
    match Samples::of(color) {
        Some(Samples::Eight) => {
            let buf = match &mut frame.luma {
                Luma::U8(v) => v,
                other => {
                    *other = Luma::U8(Vec::new());
                    let Luma::U8(v) = other else { unreachable!() };
                    v
                }
            };
            buf.clear();
            let px = raw.chunks_exact(channels).take(n);
            if channels >= 3 {
                buf.extend(px.map(|p| luma601_u8(p[0], p[1], p[2])));
            } else {
                buf.extend(px.map(|p| p[0]));
            }
            frame.bit_depth = 8;
        }
        _ => {
            let buf = match &mut frame.luma {
                Luma::U16(v) => v,
                other => {
                    *other = Luma::U16(Vec::new());
                    let Luma::U16(v) = other else { unreachable!() };
                    v
                }
            };
            buf.clear();
            let float = matches!(color, ColorType::Rgb32F | ColorType::Rgba32F);
            let bytes = if float { 4 } else { 2 };
            let sample = |b: &[u8]| -> u16 {
                if float {
                    let v = f32::from_ne_bytes([b[0], b[1], b[2], b[3]]);
                    (v.clamp(0.0, 1.0) * 65535.0).round() as u16
                } else {
                    u16::from_ne_bytes([b[0], b[1]])
                }
            };
            let px = raw.chunks_exact(channels * bytes).take(n);
            if channels >= 3 {
                buf.extend(px.map(|p| {
                    luma601_u16(
                        sample(&p[0..]),
                        sample(&p[bytes..]),
                        sample(&p[2 * bytes..]),
                    )
                }));
            } else {
                buf.extend(px.map(sample));
            }
            frame.bit_depth = 16;
        }
    }
}

/// Fills `frame`'s colour planes (full size) from 8-bit RGB(A) samples, or clears them for any
/// other colour type: Cb = 128 − 0.168736 R − 0.331264 G + 0.5 B and
/// Cr = 128 + 0.5 R − 0.418688 G − 0.081312 B, rounded (full-range Y′CbCr of ITU-T T.871,
/// JFIF, §7, which uses the BT.601 weights).
fn fill_chroma(raw: &[u8], color: ColorType, w: u32, h: u32, frame: &mut Frame) {
    let channels = usize::from(color.channel_count());
    if !(Samples::of(color) == Some(Samples::Eight) && channels >= 3) {
        frame.chroma = None;
        return;
    }
    let c = frame.chroma.get_or_insert_with(|| crate::decode::Chroma {
        width: 0,
        height: 0,
        cb: Vec::new(),
        cr: Vec::new(),
        siting: crate::decode::ChromaSiting::Centre,
    });
    c.width = w;
    c.height = h;
    c.cb.clear();
    c.cr.clear();
    let q = |v: f32| (128.0 + v).round().clamp(0.0, 255.0) as u8;
    for p in raw.chunks_exact(channels).take(w as usize * h as usize) {
        let (r, g, b) = (f32::from(p[0]), f32::from(p[1]), f32::from(p[2]));
        c.cb.push(q(-0.168_736 * r - 0.331_264 * g + 0.5 * b));
        c.cr.push(q(0.5 * r - 0.418_688 * g - 0.081_312 * b));
    }
}

/// Reads one still image into a luma [`Frame`] (index 0), with the same decoding and Rec. 601
/// luma reduction as a stills folder. Used by `calibrate` for single images of a loaded bar.
///
/// # Errors
/// [`Error::Io`] when the file cannot be opened; [`Error::Input`] naming the file when it is
/// not a readable image or has an unsupported sample type.
pub(crate) fn read_still(path: &Path) -> Result<Frame> {
    let dec = decoder_for(path)?;
    let (w, h) = dec.dimensions();
    let color = dec.color_type();
    if Samples::of(color).is_none() {
        return Err(Error::input(
            path,
            format!(
                "unsupported sample type {color:?}; save the image as 8- or 16-bit grey or colour"
            ),
        ));
    }
    let total = usize::try_from(dec.total_bytes())
        .map_err(|_| Error::input(path, "image too large for this machine's memory"))?;
    let mut raw = vec![0u8; total];
    dec.read_image(&mut raw)
        .map_err(|e| Error::input(path, format!("cannot be decoded ({e}); replace this image")))?;
    let mut frame = Frame::empty();
    fill_luma(&raw, color, w as usize * h as usize, &mut frame);
    frame.width = w;
    frame.height = h;
    Ok(frame)
}

impl FrameSource for StillsSource {
    fn info(&self) -> &ClipInfo {
        &self.info
    }

    fn read_into(&mut self, frame: &mut Frame) -> Result<bool> {
        let Some(still) = self.stills.get(self.next) else {
            return Ok(false);
        };
        let path = still.path.clone();
        let dec = decoder_for(&path)?;
        let (w, h) = dec.dimensions();
        if (w, h) != (self.info.width, self.info.height) {
            return Err(Error::input(
                &path,
                format!(
                    "frame is {w}x{h} but the clip is {}x{}; every frame must have the same size",
                    self.info.width, self.info.height
                ),
            ));
        }
        let color = dec.color_type();
        if Samples::of(color).map(Samples::bit_depth) != Some(self.info.bit_depth) {
            return Err(Error::input(
                &path,
                format!(
                    "frame's sample type {color:?} differs from the clip's {}-bit frames; save \
                     every frame with the same bit depth",
                    self.info.bit_depth
                ),
            ));
        }
        // A damaged header can claim petabytes (found by fuzzing): refuse before allocating,
        // so the run ends with a message instead of an aborted allocation.
        let too_big = || {
            Error::input(
                &path,
                format!(
                    "the header claims a {w}x{h} frame of {} bytes, more than any camera frame;                      the file is damaged: replace or remove this frame",
                    dec.total_bytes()
                ),
            )
        };
        let total = usize::try_from(dec.total_bytes())
            .ok()
            .filter(|&t| t <= MAX_FRAME_BYTES)
            .ok_or_else(too_big)?;
        self.raw.resize(total, 0);
        dec.read_image(&mut self.raw).map_err(|e| {
            Error::input(
                &path,
                format!("cannot be decoded ({e}); replace or remove this frame"),
            )
        })?;
        let n = w as usize * h as usize;
        fill_luma(&self.raw, color, n, frame);
        fill_chroma(&self.raw, color, w, h, frame);
        frame.index = self.next as u64;
        frame.width = w;
        frame.height = h;
        self.next += 1;
        Ok(true)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use image::{ImageBuffer, Luma as PxLuma, Rgb};

    fn gray(path: &Path, w: u32, h: u32, v: u8) {
        ImageBuffer::from_pixel(w, h, PxLuma([v]))
            .save(path)
            .unwrap();
    }

    fn read_all(src: &mut StillsSource) -> Vec<Frame> {
        let mut out = Vec::new();
        let mut f = Frame::empty();
        while src.read_into(&mut f).unwrap() {
            out.push(f.clone());
        }
        out
    }

    #[test]
    fn last_digit_run_is_the_number() {
        assert_eq!(frame_number("f_0010"), Some(10));
        assert_eq!(frame_number("shot2_f_0003"), Some(3));
        assert_eq!(frame_number("take3"), Some(3));
        assert_eq!(frame_number("42"), Some(42));
        assert_eq!(frame_number("12ab"), Some(12));
        assert_eq!(frame_number("preview"), None);
        assert_eq!(frame_number(""), None);
        // Too long for u64: not a frame number.
        assert_eq!(frame_number("f_99999999999999999999999"), None);
    }

    #[test]
    fn orders_numerically_and_ignores_other_files() {
        let dir = tempfile::tempdir().unwrap();
        for (name, v) in [
            ("f_10.png", 10),
            ("f_2.png", 2),
            ("f_1.PNG", 1),
            ("f_3.Tif", 3),
        ] {
            gray(&dir.path().join(name), 4, 3, v);
        }
        gray(&dir.path().join("preview.png"), 9, 9, 0); // no number: ignored
        std::fs::write(dir.path().join("notes_5.txt"), "x").unwrap(); // other extension
        std::fs::write(dir.path().join(".f_4.png"), "junk").unwrap(); // hidden
        std::fs::create_dir(dir.path().join("sub_7.png")).unwrap(); // a folder
        let mut src = StillsSource::open(dir.path()).unwrap();
        let frames = read_all(&mut src);
        let values: Vec<u8> = frames
            .iter()
            .map(|f| match &f.luma {
                Luma::U8(d) => d[0],
                Luma::U16(_) => panic!("8-bit expected"),
            })
            .collect();
        assert_eq!(values, vec![1, 2, 3, 10]);
        assert_eq!(
            frames.iter().map(|f| f.index).collect::<Vec<_>>(),
            vec![0, 1, 2, 3]
        );
        let info = src.info();
        assert_eq!(
            (info.frames, info.width, info.height, info.bit_depth),
            (4, 4, 3, 8)
        );
        // 3 → 10 is a gap; the png/tiff mix is noted.
        assert!(
            info.warnings
                .contains(&Warning::FrameGap { after: 3, next: 10 })
        );
        assert!(info.codec.starts_with("mixed"), "{}", info.codec);
    }

    #[test]
    fn a_jpeg_among_pngs_keeps_its_place() {
        let dir = tempfile::tempdir().unwrap();
        for i in [1u8, 2, 4] {
            gray(&dir.path().join(format!("f_{i:04}.png")), 8, 8, i * 20);
        }
        gray(&dir.path().join("f_0003.jpg"), 8, 8, 60);
        let mut src = StillsSource::open(dir.path()).unwrap();
        let frames = read_all(&mut src);
        let firsts: Vec<u8> = frames
            .iter()
            .map(|f| match &f.luma {
                Luma::U8(d) => d[0],
                Luma::U16(_) => 0,
            })
            .collect();
        assert_eq!(firsts[0], 20);
        assert_eq!(firsts[1], 40);
        assert!(
            (i32::from(firsts[2]) - 60).abs() <= 2,
            "jpeg frame 3 at index 2"
        );
        assert_eq!(firsts[3], 80);
        assert!(
            src.info()
                .warnings
                .iter()
                .all(|w| !matches!(w, Warning::FrameGap { .. }))
        );
    }

    #[test]
    fn duplicate_numbers_name_both_files() {
        let dir = tempfile::tempdir().unwrap();
        gray(&dir.path().join("f_7.png"), 4, 4, 0);
        gray(&dir.path().join("f_007.png"), 4, 4, 0);
        let e = StillsSource::open(dir.path()).err().unwrap().to_string();
        assert!(e.contains("f_7.png") && e.contains("f_007.png"), "{e}");
    }

    #[test]
    fn empty_folder_and_no_images_are_input_errors() {
        let dir = tempfile::tempdir().unwrap();
        let e = StillsSource::open(dir.path()).err().unwrap();
        assert!(matches!(e, Error::Input { .. }), "{e}");
        std::fs::write(dir.path().join("readme.txt"), "x").unwrap();
        gray(&dir.path().join("cover.png"), 4, 4, 0);
        assert!(matches!(
            StillsSource::open(dir.path()),
            Err(Error::Input { .. })
        ));
    }

    #[test]
    fn size_mismatch_names_the_file() {
        let dir = tempfile::tempdir().unwrap();
        gray(&dir.path().join("f_1.png"), 8, 6, 0);
        gray(&dir.path().join("f_2.png"), 8, 6, 0);
        gray(&dir.path().join("f_3.png"), 6, 8, 0);
        let e = StillsSource::open(dir.path()).err().unwrap();
        match &e {
            Error::Input { path, reason } => {
                assert!(path.ends_with("f_3.png"), "{e}");
                assert!(reason.contains("6x8") && reason.contains("8x6"), "{e}");
            }
            other => panic!("unexpected {other}"),
        }
    }

    #[test]
    fn sixteen_bit_tiff_gives_u16_frames() {
        let dir = tempfile::tempdir().unwrap();
        let data: Vec<u16> = (0..12u16).map(|i| i * 5000 + 3).collect();
        let img: ImageBuffer<PxLuma<u16>, Vec<u16>> =
            ImageBuffer::from_raw(4, 3, data.clone()).unwrap();
        img.save(dir.path().join("f_1.tif")).unwrap();
        img.save(dir.path().join("f_2.tiff")).unwrap();
        let mut src = StillsSource::open(dir.path()).unwrap();
        assert_eq!(src.info().bit_depth, 16);
        assert_eq!(src.info().codec, "tiff");
        let frames = read_all(&mut src);
        assert_eq!(frames.len(), 2);
        assert_eq!(frames[0].bit_depth, 16);
        assert_eq!(frames[0].luma, Luma::U16(data));
    }

    #[test]
    fn colour_is_reduced_with_rec601_weights() {
        // Pure primaries and one mix; expected values are 0.299/0.587/0.114 × 255, rounded
        // (ITU-R BT.601-7 §2.5.1).
        let dir = tempfile::tempdir().unwrap();
        let px: [[u8; 3]; 4] = [[255, 0, 0], [0, 255, 0], [0, 0, 255], [200, 100, 50]];
        let img = ImageBuffer::from_fn(4, 1, |x, _| Rgb(px[x as usize]));
        img.save(dir.path().join("c_1.png")).unwrap();
        img.save(dir.path().join("c_2.bmp")).unwrap();
        let mut src = StillsSource::open(dir.path()).unwrap();
        for f in read_all(&mut src) {
            // 76.245 → 76, 149.685 → 150, 29.07 → 29, 59.8+58.7+5.7 = 124.2 → 124
            assert_eq!(f.luma, Luma::U8(vec![76, 150, 29, 124]));
        }
        // 16-bit colour.
        let img16: ImageBuffer<Rgb<u16>, Vec<u16>> = ImageBuffer::from_fn(2, 1, |x, _| {
            if x == 0 {
                Rgb([65535, 0, 0])
            } else {
                Rgb([0, 0, 65535])
            }
        });
        let d16 = tempfile::tempdir().unwrap();
        img16.save(d16.path().join("c_1.png")).unwrap();
        let mut src = StillsSource::open(d16.path()).unwrap();
        let f = read_all(&mut src).remove(0);
        // 0.299 × 65535 = 19594.97 → 19595; 0.114 × 65535 = 7470.99 → 7471
        assert_eq!(f.luma, Luma::U16(vec![19595, 7471]));
    }

    #[test]
    fn read_still_matches_the_folder_reader() {
        // One image read alone gives the same luma as the same file read as a folder frame
        // (Rec. 601 weights, ITU-R BT.601-7 §2.5.1), and a bad file is named.
        let dir = tempfile::tempdir().unwrap();
        let px: [[u8; 3]; 4] = [[255, 0, 0], [0, 255, 0], [0, 0, 255], [200, 100, 50]];
        let img = ImageBuffer::from_fn(4, 1, |x, _| Rgb(px[x as usize]));
        img.save(dir.path().join("c_1.png")).unwrap();
        let f = read_still(&dir.path().join("c_1.png")).unwrap();
        assert_eq!((f.width, f.height, f.bit_depth), (4, 1, 8));
        let mut src = StillsSource::open(dir.path()).unwrap();
        assert_eq!(f.luma, read_all(&mut src).remove(0).luma);
        assert_eq!(f.luma, Luma::U8(vec![76, 150, 29, 124]));
        std::fs::write(dir.path().join("bad.png"), b"nope").unwrap();
        let e = read_still(&dir.path().join("bad.png")).unwrap_err();
        assert!(
            matches!(&e, Error::Input { path, .. } if path.ends_with("bad.png")),
            "{e}"
        );
    }

    #[test]
    fn gap_warnings_are_capped() {
        let stills: Vec<Still> = (0..30)
            .map(|i| Still {
                number: i * 3,
                path: PathBuf::new(),
            })
            .collect();
        let w = gap_warnings(&stills);
        assert_eq!(w.len(), MAX_GAP_WARNINGS + 1);
        assert_eq!(w[0], Warning::FrameGap { after: 0, next: 3 });
        assert!(
            matches!(&w[MAX_GAP_WARNINGS], Warning::Note(s) if s.contains("19 more gaps") && s.contains("38 more frames"))
        );
    }

    #[test]
    fn a_broken_file_is_named() {
        let dir = tempfile::tempdir().unwrap();
        gray(&dir.path().join("f_1.png"), 4, 4, 0);
        std::fs::write(dir.path().join("f_2.png"), b"not a png at all").unwrap();
        let e = StillsSource::open(dir.path()).err().unwrap();
        assert!(
            matches!(&e, Error::Input { path, .. } if path.ends_with("f_2.png")),
            "{e}"
        );
    }

    proptest::proptest! {
        // A fixed seed, so every run checks the same cases.
        #![proptest_config(proptest::test_runner::Config {
            cases: 64,
            rng_seed: proptest::test_runner::RngSeed::Fixed(0x7157_4d61_726b),
            ..proptest::test_runner::Config::default()
        })]

        /// Whatever the prefix (digits included), zero padding and digit-free suffix, the
        /// frame number is the value of the last digit run.
        #[test]
        fn frame_number_is_the_last_digit_run(
            prefix in "[a-z0-9_-]{0,8}",
            n in 0u64..10_000_000,
            pad in 0usize..10,
            suffix in "[a-z_.-]{0,6}",
        ) {
            let stem = format!("{prefix}_{n:0pad$}{suffix}");
            proptest::prop_assert_eq!(frame_number(&stem), Some(n));
        }

        /// Listing a folder orders any set of distinct numbers numerically, whatever their
        /// zero padding.
        #[test]
        fn listing_orders_numerically(
            numbers in proptest::collection::btree_set(0u64..100_000, 1..12),
            pads in proptest::collection::vec(0usize..7, 12),
        ) {
            let dir = tempfile::tempdir().unwrap();
            for (i, n) in numbers.iter().enumerate() {
                let name = format!("f_{n:0w$}.png", w = pads[i]);
                std::fs::write(dir.path().join(name), b"").unwrap();
            }
            let (stills, _) = list_stills(dir.path()).unwrap();
            let got: Vec<u64> = stills.iter().map(|s| s.number).collect();
            let want: Vec<u64> = numbers.into_iter().collect();
            proptest::prop_assert_eq!(got, want);
        }
    }
}
