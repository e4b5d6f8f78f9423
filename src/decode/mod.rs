//! Stage 1, decode: turns a clip (a video file or a folder of numbered stills) into a stream of
//! luma frames, one at a time, so memory does not grow with clip length.
//!
//! Frame indices count from 0 at the clip's first frame. A video also reports each frame's
//! presentation time ([`ClipInfo::frame_times`]); the analysis decides whether time is frame
//! index / capture rate (see [`crate::TimeBase`]) or those timestamps (docs/conventions.md,
//! "Time").
//!
//! Layering: the first stage; it must never import a later one (track, segment, mechanics,
//! report), nor `analyze`, `batch` or the CLI (`tests/it/layering.rs` checks).

use std::path::{Path, PathBuf};

use crate::error::{Error, Result};
use crate::warning::Warning;

mod stills;
pub use stills::STILL_EXTENSIONS;
pub(crate) use stills::read_still;
#[cfg(feature = "ffmpeg")]
mod rotate;
pub mod timing;
pub use timing::FrameTimes;
#[cfg(feature = "ffmpeg")]
mod video;

/// Luma samples of one frame, row-major, `width * height` values with no row padding.
#[derive(Debug, Clone, PartialEq)]
pub enum Luma {
    /// 8-bit samples, 0..=255.
    U8(Vec<u8>),
    /// Deeper samples (10, 12 or 16 bit), 0..=max where max = 2^bit_depth − 1.
    U16(Vec<u16>),
}

/// The two colour-difference planes of a colour frame, 8 bit (Cb and Cr of Y′CbCr, the
/// neutral grey at 128; ITU-R BT.601-7 §2.5.2 with full-range scaling), row-major with no
/// padding. They may be subsampled: 4:2:0 video stores half the width and height
/// (rounded up), an RGB still the full size.
#[derive(Debug, Clone, PartialEq)]
pub struct Chroma {
    /// Plane width in samples.
    pub width: u32,
    /// Plane height in samples.
    pub height: u32,
    /// Blue-difference samples, `width * height`.
    pub cb: Vec<u8>,
    /// Red-difference samples, `width * height`.
    pub cr: Vec<u8>,
    /// Where subsampled samples sit (ignored for full-size planes).
    pub siting: ChromaSiting,
}

/// Where chroma samples sit relative to the luma grid of a subsampled plane.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum ChromaSiting {
    /// Between the two luma samples it covers, horizontally and vertically (JPEG, and the
    /// 2×2 means this project's writer stores).
    #[default]
    Centre,
    /// On the left luma sample of the pair, vertically between rows (the MPEG-2 / H.264
    /// default, ITU-T H.264 Annex E chroma_sample_loc_type 0).
    Left,
}

impl Chroma {
    /// The planes borrowed.
    pub fn view(&self) -> ChromaRef<'_> {
        ChromaRef {
            width: self.width,
            height: self.height,
            cb: &self.cb,
            cb_stride: self.width as usize,
            cr: &self.cr,
            cr_stride: self.width as usize,
            siting: self.siting,
        }
    }
}

/// Colour-difference planes borrowed from a [`Frame`] or a decoder's own picture (whose rows
/// may be padded: `stride` samples apart).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ChromaRef<'a> {
    /// Plane width in samples.
    pub width: u32,
    /// Plane height in samples.
    pub height: u32,
    /// Blue-difference samples.
    pub cb: &'a [u8],
    /// Distance between Cb rows, samples.
    pub cb_stride: usize,
    /// Red-difference samples.
    pub cr: &'a [u8],
    /// Distance between Cr rows, samples.
    pub cr_stride: usize,
    /// Where subsampled samples sit (ignored for full-size planes).
    pub siting: ChromaSiting,
}

impl ChromaRef<'_> {
    /// An owned copy, rows packed (stride = width).
    pub fn to_owned_planes(&self) -> Chroma {
        let (w, h) = (self.width as usize, self.height as usize);
        let pack = |p: &[u8], s: usize| -> Vec<u8> {
            (0..h)
                .flat_map(|y| p[y * s..y * s + w].iter().copied())
                .collect()
        };
        Chroma {
            width: self.width,
            height: self.height,
            cb: pack(self.cb, self.cb_stride),
            cr: pack(self.cr, self.cr_stride),
            siting: self.siting,
        }
    }

    /// (Cb, Cr) at the centre of luma pixel (x, y) of a `luma_w × luma_h` frame, centred on 0
    /// and scaled to −0.5..0.5: the sample itself for a full-size plane, bilinear between the
    /// four nearest samples (by their siting) for a subsampled one ([`Self::at_point`]).
    #[inline]
    pub fn at(&self, x: u32, y: u32, luma_w: u32, luma_h: u32) -> (f32, f32) {
        self.at_point(x as f32, y as f32, luma_w, luma_h)
    }

    /// (Cb, Cr) at the point (x, y) of a `luma_w × luma_h` frame, in luma pixel coordinates
    /// (luma sample (i, j) sits at (i, j)), centred on 0 and scaled to −0.5..0.5: bilinear
    /// between the four chroma samples around the point, each placed by its siting (a 4:2:0
    /// sample i sits at luma x = 2i + 0.5 with centred siting, 2i with left siting, and at
    /// luma y = 2j + 0.5); a full-size plane's sample (i, j) sits at (i, j). Clamped to the
    /// plane.
    #[inline]
    pub fn at_point(&self, x: f32, y: f32, luma_w: u32, luma_h: u32) -> (f32, f32) {
        let taps = |v: f32, full: bool, centre: bool, n: u32| -> (usize, usize, f32) {
            let m = n.saturating_sub(1) as usize;
            let t = if full {
                v.max(0.0)
            } else {
                ((v - if centre { 0.5 } else { 0.0 }) * 0.5).max(0.0)
            };
            // t ≥ 0, so truncation is the floor (and needs no call to the C library).
            let i = t as usize;
            (i.min(m), (i + 1).min(m), t - i as f32)
        };
        let centred = self.siting == ChromaSiting::Centre;
        let (x0, x1, fx) = taps(x, self.width == luma_w, centred, self.width);
        let (y0, y1, fy) = taps(y, self.height == luma_h, true, self.height);
        let bil = |p: &[u8], s: usize| -> f32 {
            let top = Self::lerp_row(p, y0 * s, x0, x1, fx);
            let bot = Self::lerp_row(p, y1 * s, x0, x1, fx);
            top + fy * (bot - top)
        };
        (
            Self::centred(bil(self.cb, self.cb_stride)),
            Self::centred(bil(self.cr, self.cr_stride)),
        )
    }

    /// The horizontal step of the bilinear interpolation: samples `x0` and `x1` of the row
    /// starting at `row` in plane `p`, mixed by `fx`.
    #[inline]
    fn lerp_row(p: &[u8], row: usize, x0: usize, x1: usize, fx: f32) -> f32 {
        let a = f32::from(p[row + x0]);
        let b = f32::from(p[row + x1]);
        a + fx * (b - a)
    }

    /// An interpolated 8-bit sample centred on 0 and scaled to −0.5..0.5.
    #[inline]
    fn centred(v: f32) -> f32 {
        (v - 128.0) / 255.0
    }
}

/// One decoded frame: its index in the clip and its luma plane.
#[derive(Debug, Clone, PartialEq)]
pub struct Frame {
    /// Zero-based index of the frame in the clip.
    pub index: u64,
    /// Width in pixels.
    pub width: u32,
    /// Height in pixels.
    pub height: u32,
    /// Bits per luma sample (8 for `Luma::U8`).
    pub bit_depth: u8,
    /// The samples.
    pub luma: Luma,
    /// The colour-difference planes, when the clip has colour and its luma is 8 bit (`None`
    /// for monochrome footage).
    pub chroma: Option<Chroma>,
    /// True when the decoder flagged this frame as damaged (it concealed errors, or the
    /// frame's data could not be decoded at all): its samples must not be measured, and the
    /// tracker records the frame as lost.
    pub damaged: bool,
}

impl Frame {
    /// An empty 8-bit frame, to be filled by [`FrameSource::read_into`].
    pub fn empty() -> Self {
        Frame {
            index: 0,
            width: 0,
            height: 0,
            bit_depth: 8,
            luma: Luma::U8(Vec::new()),
            chroma: None,
            damaged: false,
        }
    }

    /// An 8-bit frame from a row-major buffer of `width * height` samples.
    ///
    /// # Panics
    /// When the buffer length is not `width * height`.
    pub fn from_u8(index: u64, width: u32, height: u32, data: Vec<u8>) -> Self {
        assert_eq!(
            data.len(),
            width as usize * height as usize,
            "frame buffer size"
        );
        Frame {
            index,
            width,
            height,
            bit_depth: 8,
            luma: Luma::U8(data),
            chroma: None,
            damaged: false,
        }
    }

    /// The frame borrowed, as the tracker reads it.
    pub fn view(&self) -> FrameRef<'_> {
        FrameRef {
            index: self.index,
            width: self.width,
            height: self.height,
            bit_depth: self.bit_depth,
            luma: match &self.luma {
                Luma::U8(d) => LumaRef::U8(d),
                Luma::U16(d) => LumaRef::U16(d),
            },
            chroma: self.chroma.as_ref().map(Chroma::view),
            damaged: self.damaged,
        }
    }

    /// The largest possible sample value (255 for 8 bit).
    pub fn max_value(&self) -> f32 {
        self.view().max_value()
    }

    /// The sample at integer pixel (x, y), scaled to 0..=1.
    ///
    /// # Panics
    /// When (x, y) is outside the frame.
    pub fn value(&self, x: u32, y: u32) -> f32 {
        self.view().value(x, y)
    }

    /// A simple checksum of the luma samples (FNV-1a over the sample values as little-endian
    /// bytes), used to check that decoders reproduce what the renderer wrote.
    pub fn checksum(&self) -> u64 {
        let mut h: u64 = 0xcbf2_9ce4_8422_2325;
        let mut eat = |b: u8| {
            h ^= u64::from(b);
            h = h.wrapping_mul(0x0000_0100_0000_01b3);
        };
        match &self.luma {
            Luma::U8(d) => d.iter().for_each(|&b| eat(b)),
            Luma::U16(d) => d
                .iter()
                .for_each(|&v| v.to_le_bytes().into_iter().for_each(&mut eat)),
        }
        h
    }
}

/// Luma samples borrowed from a [`Frame`] or from a decoder's own picture: row-major,
/// `width * height` values with no row padding, as in [`Luma`].
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum LumaRef<'a> {
    /// 8-bit samples, 0..=255.
    U8(&'a [u8]),
    /// Deeper samples, 0..=max where max = 2^bit_depth − 1.
    U16(&'a [u16]),
}

/// One frame as the tracker reads it, borrowed: a [`Frame`]'s buffer ([`Frame::view`]) or a
/// video decoder's picture read in place ([`Slot`]).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct FrameRef<'a> {
    /// Zero-based index of the frame in the clip.
    pub index: u64,
    /// Width in pixels.
    pub width: u32,
    /// Height in pixels.
    pub height: u32,
    /// Bits per luma sample (8 for `LumaRef::U8`).
    pub bit_depth: u8,
    /// The samples.
    pub luma: LumaRef<'a>,
    /// The colour-difference planes, when the frame has them.
    pub chroma: Option<ChromaRef<'a>>,
    /// As [`Frame::damaged`]: flagged by the decoder, never measured.
    pub damaged: bool,
}

impl FrameRef<'_> {
    /// The largest possible sample value (255 for 8 bit).
    pub fn max_value(&self) -> f32 {
        ((1u32 << self.bit_depth) - 1) as f32
    }

    /// The sample at integer pixel (x, y), scaled to 0..=1.
    ///
    /// # Panics
    /// When (x, y) is outside the frame.
    pub fn value(&self, x: u32, y: u32) -> f32 {
        let i = y as usize * self.width as usize + x as usize;
        match self.luma {
            LumaRef::U8(d) => d[i] as f32 / 255.0,
            LumaRef::U16(d) => d[i] as f32 / self.max_value(),
        }
    }
}

/// What kind of clip a source reads.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ClipKind {
    /// A video file decoded with FFmpeg.
    Video,
    /// A folder of numbered still images.
    Stills,
    /// Frames held in memory (tests, synthetic scenes).
    Memory,
}

/// Facts about a clip known before (or, for the frame count, by) reading it.
#[derive(Debug, Clone, PartialEq)]
pub struct ClipInfo {
    /// The clip's path.
    pub path: PathBuf,
    /// Video file or stills folder.
    pub kind: ClipKind,
    /// Exact number of frames.
    pub frames: u64,
    /// Frame width in pixels.
    pub width: u32,
    /// Frame height in pixels.
    pub height: u32,
    /// Bits per luma sample.
    pub bit_depth: u8,
    /// The container's frame rate, usually the playback rate (None for stills).
    pub container_fps_hz: Option<f64>,
    /// Codec name (`h264`, `ffv1`, ...) or image format for stills (`png`, ...).
    pub codec: String,
    /// Duration at the container rate in seconds, when known.
    pub duration_s: Option<f64>,
    /// Problems noticed while opening (gaps in numbering, ...).
    pub warnings: Vec<Warning>,
    /// Each frame's presentation time from the container (None for stills, frames in memory
    /// without times, or a stream whose packets carry no timestamps).
    pub frame_times: Option<FrameTimes>,
    /// The container's display rotation, degrees clockwise (0, 90, 180 or 270). Frames are
    /// already turned by it: `width` and `height` are the displayed picture's.
    pub display_rotation_deg: u32,
}

impl ClipInfo {
    /// True unless every frame is stored exactly: a codec or image format that keeps every
    /// sample (FFV1, PNG, TIFF, BMP, raw and the lossless intermediate codecs) is lossless;
    /// anything else, including one not listed here and H.264 (which has a rarely used lossless
    /// mode), is taken as lossy, the cautious side for the intervals that depend on it
    /// (`mechanics::uncertainty`). Stills of mixed formats are lossy when any format is.
    pub fn lossy(&self) -> bool {
        const LOSSLESS: [&str; 13] = [
            "ffv1", "png", "apng", "tiff", "bmp", "raw", "rawvideo", "huffyuv", "ffvhuff",
            "utvideo", "magicyuv", "pgm", "ppm",
        ];
        let inner = self
            .codec
            .strip_prefix("mixed (")
            .and_then(|m| m.strip_suffix(')'))
            .unwrap_or(&self.codec);
        inner
            .split(", ")
            .any(|k| !LOSSLESS.contains(&k.trim().to_ascii_lowercase().as_str()))
    }
}

/// A stream of frames from one clip.
pub trait FrameSource: Send {
    /// Facts about the clip.
    fn info(&self) -> &ClipInfo;

    /// Reads the next frame into `frame`, reusing its buffer. Returns `Ok(false)` at the end.
    ///
    /// # Errors
    /// [`Error::Decode`] with the frame index when a frame cannot be decoded, or
    /// [`Error::Input`] naming the file for a bad still.
    fn read_into(&mut self, frame: &mut Frame) -> Result<bool>;

    /// Reads the next frame into `slot`, reusing its buffers; returns `Ok(false)` at the end.
    /// A video decoder whose picture rows are packed hands over a reference to its own
    /// picture (no copy; it decodes on into other buffers meanwhile); every other case reads
    /// into the slot's frame buffer, as [`FrameSource::read_into`] does.
    ///
    /// # Errors
    /// As [`FrameSource::read_into`].
    fn read_slot(&mut self, slot: &mut Slot) -> Result<bool> {
        slot.release();
        self.read_into(&mut slot.frame)
    }
}

/// One decoded frame on its way from a decoding thread to the tracker
/// ([`FrameSource::read_slot`]): a frame buffer of its own, reused from frame to frame, or a
/// reference to a video decoder's own picture, read in place with no copy.
pub struct Slot {
    frame: Frame,
    #[cfg(feature = "ffmpeg")]
    picture: video::HeldPicture,
}

impl Slot {
    /// An empty slot.
    pub fn new() -> Slot {
        Slot {
            frame: Frame::empty(),
            #[cfg(feature = "ffmpeg")]
            picture: video::HeldPicture::new(),
        }
    }

    /// The frame in the slot (empty until a source has read into it).
    pub fn view(&self) -> FrameRef<'_> {
        #[cfg(feature = "ffmpeg")]
        if let Some(view) = self.picture.view() {
            return view;
        }
        self.frame.view()
    }

    /// True when the slot holds a decoder's own picture rather than a copy.
    pub fn holds_picture(&self) -> bool {
        #[cfg(feature = "ffmpeg")]
        return self.picture.view().is_some();
        #[cfg(not(feature = "ffmpeg"))]
        false
    }

    /// Gives a held picture back to its decoder (its buffer returns to the decoder's pool, so
    /// memory does not grow with the frames in flight); the slot keeps its buffers for reuse.
    pub fn release(&mut self) {
        #[cfg(feature = "ffmpeg")]
        self.picture.release();
    }
}

impl Default for Slot {
    fn default() -> Self {
        Slot::new()
    }
}

/// Opens a clip: a folder is read as numbered stills, anything else as a video file.
///
/// # Errors
/// [`Error::Input`] naming the path when it does not exist, is empty, or is not a clip.
pub fn open(path: &Path) -> Result<Box<dyn FrameSource>> {
    if path.is_dir() {
        return Ok(Box::new(stills::StillsSource::open(path)?));
    }
    if !path.exists() {
        return Err(Error::input(path, "no such file or folder; check the path"));
    }
    crate::limits::refuse_pipe(path)?;
    open_video(path)
}

/// Initialises the FFmpeg libraries once per process and silences their logging: even at the
/// "error" level FFmpeg prints lines such as "moov atom not found" to stderr, and the library
/// must never print. Every failure still reaches the caller as an [`Error`]. Public for the
/// clip writer of the invented test bench (tools/scenes), which opens encoders the same way.
#[cfg(feature = "ffmpeg")]
#[doc(hidden)]
pub fn ffmpeg_init() {
    static ONCE: std::sync::Once = std::sync::Once::new();
    ONCE.call_once(|| {
        // `init` only registers devices and sets nothing that can fail in a way we could act on;
        // a failure here shows up as an open error on the first file.
        let _ = ffmpeg_next::init();
        ffmpeg_next::util::log::set_level(ffmpeg_next::util::log::Level::Quiet);
    });
}

#[cfg(feature = "ffmpeg")]
fn open_video(path: &Path) -> Result<Box<dyn FrameSource>> {
    Ok(Box::new(video::VideoSource::open(path)?))
}

#[cfg(not(feature = "ffmpeg"))]
fn open_video(path: &Path) -> Result<Box<dyn FrameSource>> {
    Err(Error::input(
        path,
        "this build reads only folders of stills; rebuild with the default \"ffmpeg\" feature to read video files",
    ))
}

/// Frames held in memory, for tests and synthetic scenes.
pub struct MemorySource {
    info: ClipInfo,
    frames: std::vec::IntoIter<Frame>,
}

impl MemorySource {
    /// A source over `frames`, which must all have the same size.
    ///
    /// # Panics
    /// When `frames` is empty or the sizes differ.
    pub fn new(frames: Vec<Frame>, container_fps_hz: Option<f64>) -> Self {
        let first = frames.first().expect("at least one frame");
        assert!(
            frames
                .iter()
                .all(|f| f.width == first.width && f.height == first.height)
        );
        let info = ClipInfo {
            path: PathBuf::from("(memory)"),
            kind: ClipKind::Memory,
            frames: frames.len() as u64,
            width: first.width,
            height: first.height,
            bit_depth: first.bit_depth,
            container_fps_hz,
            codec: "raw".into(),
            duration_s: None,
            warnings: Vec::new(),
            frame_times: None,
            display_rotation_deg: 0,
        };
        MemorySource {
            info,
            frames: frames.into_iter(),
        }
    }
}

impl MemorySource {
    /// A source over `frames` whose container times each frame: `times_s[i]` is frame i's
    /// presentation time, s, on a timestamp tick of `tick_s` (as a phone's file would).
    ///
    /// # Panics
    /// As [`MemorySource::new`], and when the lengths differ.
    pub fn with_times(
        frames: Vec<Frame>,
        container_fps_hz: Option<f64>,
        times_s: Vec<f64>,
        tick_s: f64,
    ) -> Self {
        assert_eq!(frames.len(), times_s.len(), "one time per frame");
        let mut s = MemorySource::new(frames, container_fps_hz);
        s.info.frame_times = Some(FrameTimes { times_s, tick_s });
        s
    }
}

impl FrameSource for MemorySource {
    fn info(&self) -> &ClipInfo {
        &self.info
    }
    fn read_into(&mut self, frame: &mut Frame) -> Result<bool> {
        match self.frames.next() {
            Some(f) => {
                *frame = f;
                Ok(true)
            }
            None => Ok(false),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn clip(codec: &str) -> ClipInfo {
        ClipInfo {
            path: PathBuf::from("clip"),
            kind: ClipKind::Video,
            frames: 1,
            width: 8,
            height: 8,
            bit_depth: 8,
            container_fps_hz: None,
            codec: codec.into(),
            duration_s: None,
            warnings: Vec::new(),
            frame_times: None,
            display_rotation_deg: 0,
        }
    }

    #[test]
    fn only_codecs_that_keep_every_sample_are_lossless() {
        for c in ["ffv1", "png", "tiff", "bmp", "raw", "mixed (png, tiff)"] {
            assert!(!clip(c).lossy(), "{c}");
        }
        for c in [
            "h264",
            "hevc",
            "mjpeg",
            "jpeg",
            "vp9",
            "prores",
            "mixed (jpeg, png)",
            "",
        ] {
            assert!(clip(c).lossy(), "{c}");
        }
    }
}
