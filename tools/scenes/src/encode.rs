//! Clip writer (feature `ffmpeg`): turns luma [`Frame`]s into a video file with the FFmpeg
//! libraries. The renderer uses it to store synthetic scenes and the tests use it to make
//! clips in every supported codec and container.
//!
//! The container comes from the file extension (`mkv`, `mp4`, `mov`, `avi`). Luma samples
//! are stored as they are: no range scaling, so a decoder that copies the Y plane gets the
//! same values back (exactly for FFV1, approximately for the lossy codecs). Chroma planes, where
//! the pixel format has them, hold the neutral value (128 for 8 bit, 512 for 10 bit).
//!
//! | codec | 8-bit input | 10-bit input | 12-bit input | 16-bit input |
//! |---|---|---|---|---|
//! | [`Codec::Ffv1`] | `gray` | `yuv420p10le` | `gray12le` | `gray16le` |
//! | [`Codec::H264`] | `yuv420p` | `yuv420p10le` | – | – |
//! | [`Codec::Hevc`] | `yuv420p` | `yuv420p10le` | – | – |
//! | [`Codec::Mjpeg`] | `yuvj420p` | – | – | – |
//! | [`Codec::Mpeg4`] | `yuv420p` | – | – | – |
//!
//! FFV1, MJPEG and MPEG-4 output is byte-for-byte deterministic for the same frames and settings
//! on the same FFmpeg build (H.264 was seen to differ between some runs; see the tests):
//! every encoder runs on one thread, the codec and the muxer run in bit-exact mode
//! (no version strings, no random container identifiers), and timestamps are the frame index
//! in units of 1 / fps. Frame timing inside twistmark never comes from these timestamps; they
//! only make the file playable.

use std::path::{Path, PathBuf};

use ff::codec::{self, encoder};
use ff::format::Pixel;
use ff::{Dictionary, Rational};
use ffmpeg_next as ff;

use crate::decode::{Frame, Luma, ffmpeg_init};
use crate::{Error, Result};

/// Which video codec to write, with its one quality setting.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Codec {
    /// FFV1, lossless; decoded luma equals the input exactly.
    Ffv1,
    /// H.264 through libx264 (preset `veryfast`, one thread, B-frames on).
    H264 {
        /// Constant rate factor, 0 (lossless for 8 bit) to 51; 18 looks clean, 23 is x264's default.
        crf: u8,
    },
    /// HEVC (H.265) through libx265 (preset `ultrafast`, one thread); 10-bit input is what
    /// phones' HDR modes write. Only where the FFmpeg build has libx265.
    Hevc {
        /// Constant rate factor, 0 to 51; 28 is x265's default.
        crf: u8,
    },
    /// Motion JPEG, every frame a JPEG.
    Mjpeg {
        /// Quantiser scale 1 (best) to 31 (worst); 2 to 5 is visually clean.
        quality: u8,
    },
    /// MPEG-4 Part 2.
    Mpeg4 {
        /// Quantiser scale 1 (best) to 31 (worst); 2 to 5 is visually clean.
        quality: u8,
    },
}

impl Codec {
    /// The pixel format written for frames of `bit_depth` bits, or `None` when unsupported.
    fn pixel_format(self, bit_depth: u8) -> Option<Pixel> {
        match (self, bit_depth) {
            (Codec::Ffv1, 8) => Some(Pixel::GRAY8),
            (Codec::Ffv1, 10) => Some(Pixel::YUV420P10LE),
            (Codec::Ffv1, 12) => Some(Pixel::GRAY12LE),
            (Codec::Ffv1, 16) => Some(Pixel::GRAY16LE),
            (Codec::H264 { .. }, 8) => Some(Pixel::YUV420P),
            (Codec::H264 { .. }, 10) => Some(Pixel::YUV420P10LE),
            (Codec::Hevc { .. }, 8) => Some(Pixel::YUV420P),
            (Codec::Hevc { .. }, 10) => Some(Pixel::YUV420P10LE),
            (Codec::Mjpeg { .. }, 8) => Some(Pixel::YUVJ420P),
            (Codec::Mpeg4 { .. }, 8) => Some(Pixel::YUV420P),
            _ => None,
        }
    }

    fn name(self) -> &'static str {
        match self {
            Codec::Ffv1 => "FFV1",
            Codec::H264 { .. } => "H.264",
            Codec::Hevc { .. } => "HEVC",
            Codec::Mjpeg { .. } => "MJPEG",
            Codec::Mpeg4 { .. } => "MPEG-4 Part 2",
        }
    }
}

/// What a clip's pictures hold.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Layout {
    /// The codec's own format for the depth (grey, or 4:2:0 with neutral chroma).
    Planes,
    /// 4:2:0 with each frame's chroma.
    Colour,
    /// PNG-coded packed RGB (tests only).
    #[cfg_attr(not(test), allow(dead_code))]
    RgbPng,
}

/// Writes luma frames to a video file. Create it, [`write`](ClipWriter::write) each frame in
/// order, then call [`finish`](ClipWriter::finish); a writer dropped without `finish` leaves
/// an incomplete file.
///
/// ```no_run
/// use twistmark::decode::Frame;
/// use twistmark_scenes::encode::{ClipWriter, Codec};
/// let mut w = ClipWriter::create("clip.mkv".as_ref(), Codec::Ffv1, 64, 48, 2000.0)?;
/// for i in 0..10 {
///     w.write(&Frame::from_u8(i, 64, 48, vec![(i * 20) as u8; 64 * 48]))?;
/// }
/// w.finish()?;
/// # Ok::<(), twistmark::Error>(())
/// ```
pub struct ClipWriter {
    path: PathBuf,
    octx: ff::format::context::Output,
    encoder: encoder::video::Encoder,
    picture: ff::frame::Video,
    packet: ff::Packet,
    stream_index: usize,
    encoder_tb: Rational,
    stream_tb: Rational,
    width: u32,
    height: u32,
    bit_depth: u8,
    next_pts: i64,
    /// Frames written.
    written: u64,
    /// Colour planes are written from each frame's chroma.
    colour: bool,
}

impl ClipWriter {
    /// Creates an 8-bit clip at `path`; the container is chosen by the extension.
    ///
    /// `fps_hz` is the rate stored in the container (for high-speed footage, usually a
    /// playback rate; twistmark's timing always uses the capture rate given separately).
    ///
    /// # Errors
    /// [`Error::Output`] naming the path when the extension is unknown, the size is not
    /// usable by the codec (4:2:0 codecs need even sizes), the rate is not positive, or the
    /// file cannot be created.
    pub fn create(path: &Path, codec: Codec, width: u32, height: u32, fps_hz: f64) -> Result<Self> {
        Self::create_with_depth(path, codec, width, height, fps_hz, 8)
    }

    /// Like [`create`](ClipWriter::create) for frames of `bit_depth` bits (8, 10, 12 or 16;
    /// see the module table for which codecs take which depth).
    ///
    /// # Errors
    /// As [`create`](ClipWriter::create), and when the codec cannot store `bit_depth`.
    pub fn create_with_depth(
        path: &Path,
        codec: Codec,
        width: u32,
        height: u32,
        fps_hz: f64,
        bit_depth: u8,
    ) -> Result<Self> {
        Self::create_inner(
            path,
            codec,
            width,
            height,
            fps_hz,
            bit_depth,
            Layout::Planes,
            0,
            None,
        )
    }

    /// Like [`create`](ClipWriter::create), with a display-rotation matrix in the container
    /// saying that a player turns the stored `width × height` picture `rotation_cw_deg`
    /// (90, 180 or 270) clockwise, as phones store portrait video. The container must keep
    /// it (MP4 and QuickTime do).
    ///
    /// # Errors
    /// As [`create`](ClipWriter::create).
    pub fn create_rotated(
        path: &Path,
        codec: Codec,
        width: u32,
        height: u32,
        fps_hz: f64,
        rotation_cw_deg: u32,
    ) -> Result<Self> {
        Self::create_inner(
            path,
            codec,
            width,
            height,
            fps_hz,
            8,
            Layout::Planes,
            rotation_cw_deg,
            None,
        )
    }

    /// An 8-bit colour clip: 4:2:0 Y′CbCr (`yuv420p`, `yuvj420p` for MJPEG) for any codec.
    /// Frames with [`Frame::chroma`] have their colour planes stored (averaged over 2×2
    /// blocks when given at full size); frames without it are stored grey.
    ///
    /// # Errors
    /// As [`create`](ClipWriter::create).
    pub fn create_colour(
        path: &Path,
        codec: Codec,
        width: u32,
        height: u32,
        fps_hz: f64,
    ) -> Result<Self> {
        Self::create_inner(
            path,
            codec,
            width,
            height,
            fps_hz,
            8,
            Layout::Colour,
            0,
            None,
        )
    }

    /// A luma clip whose frames carry the presentation timestamps given to
    /// [`write_at`](ClipWriter::write_at), in ticks of 1/`tick_hz` s (90,000 in the MPEG-4
    /// files phones write), with `fps_hz` stated as the container's rate: a variable frame
    /// rate clip, as phones record.
    ///
    /// # Errors
    /// As [`create`](ClipWriter::create).
    pub fn create_timed(
        path: &Path,
        codec: Codec,
        width: u32,
        height: u32,
        fps_hz: f64,
        tick_hz: u32,
    ) -> Result<Self> {
        Self::create_inner(
            path,
            codec,
            width,
            height,
            fps_hz,
            8,
            Layout::Planes,
            0,
            Some(tick_hz),
        )
    }

    /// Encodes one frame with presentation timestamp `pts` (in the clip's ticks; each must
    /// exceed the last).
    ///
    /// # Errors
    /// As [`write`](ClipWriter::write).
    pub fn write_at(&mut self, frame: &Frame, pts: i64) -> Result<()> {
        self.next_pts = pts;
        self.write(frame)
    }

    /// A clip in PNG-coded packed RGB (R = G = B = luma), so tests can reach the decoder's
    /// swscale path for formats without a Y plane. Used by twistmark's decode tests, which
    /// compile this file as a module of the library (src/lib.rs).
    #[cfg(test)]
    #[allow(dead_code)]
    pub(crate) fn create_rgb_for_tests(path: &Path, width: u32, height: u32) -> Result<Self> {
        Self::create_inner(
            path,
            Codec::Ffv1,
            width,
            height,
            30.0,
            8,
            Layout::RgbPng,
            0,
            None,
        )
    }

    #[allow(clippy::too_many_arguments)] // one private constructor behind the public ones
    fn create_inner(
        path: &Path,
        codec: Codec,
        width: u32,
        height: u32,
        fps_hz: f64,
        bit_depth: u8,
        layout: Layout,
        rotation_cw_deg: u32,
        tick_hz: Option<u32>,
    ) -> Result<Self> {
        let rgb_png = layout == Layout::RgbPng;
        let colour = layout == Layout::Colour;
        ffmpeg_init();
        let fail = |reason: String| Error::Output {
            path: path.to_path_buf(),
            reason,
        };
        let ext = path
            .extension()
            .and_then(|e| e.to_str())
            .map(str::to_ascii_lowercase)
            .unwrap_or_default();
        let muxer = match ext.as_str() {
            "mkv" => "matroska",
            "mp4" => "mp4",
            "mov" => "mov",
            "avi" => "avi",
            _ => {
                return Err(fail(format!(
                    "unknown container '.{ext}'; use .mkv, .mp4, .mov or .avi"
                )));
            }
        };
        if codec == Codec::Ffv1 && muxer == "mp4" {
            return Err(fail(
                "the mp4 container cannot hold FFV1; use .mkv, .mov or .avi".into(),
            ));
        }
        let pix = if rgb_png {
            Some(Pixel::RGB24)
        } else if colour && bit_depth == 8 {
            Some(match codec {
                Codec::Mjpeg { .. } => Pixel::YUVJ420P,
                _ => Pixel::YUV420P,
            })
        } else {
            codec.pixel_format(bit_depth)
        };
        let pix = pix.ok_or_else(|| {
            fail(format!(
                "{} cannot store {bit_depth}-bit frames here; use FFV1 (8, 10, 12, 16 bit) or \
                 H.264 (8, 10 bit)",
                codec.name()
            ))
        })?;
        if width == 0 || height == 0 {
            return Err(fail(format!("frame size {width}x{height} is empty")));
        }
        let subsampled = !matches!(
            pix,
            Pixel::GRAY8 | Pixel::GRAY12LE | Pixel::GRAY16LE | Pixel::RGB24
        );
        if subsampled && (!width.is_multiple_of(2) || !height.is_multiple_of(2)) {
            return Err(fail(format!(
                "{} stores 4:2:0 colour and needs an even frame size, got {width}x{height}",
                codec.name()
            )));
        }
        if !(fps_hz.is_finite() && fps_hz > 0.0) {
            return Err(fail(format!(
                "frame rate must be a positive number, got {fps_hz}"
            )));
        }
        let frame_rate = rate_rational(fps_hz);
        let encoder_tb = match tick_hz {
            Some(t) => Rational::new(1, t.clamp(1, i32::MAX as u32) as i32),
            None => Rational::new(frame_rate.denominator(), frame_rate.numerator()),
        };

        let ff_err = |what: &str, e: ff::Error| fail(format!("{what}: {e}"));
        let mut octx =
            ff::format::output_as(&path, muxer).map_err(|e| ff_err("cannot create the file", e))?;
        // Bit-exact muxing: no random segment/track identifiers, no version strings.
        // SAFETY: octx owns a valid AVFormatContext; only the flags field is changed.
        unsafe {
            (*octx.as_mut_ptr()).flags |= ff::ffi::AVFMT_FLAG_BITEXACT;
        }
        let global_header = octx
            .format()
            .flags()
            .contains(ff::format::Flags::GLOBAL_HEADER);

        let (codec_id, name) = match codec {
            _ if rgb_png => (codec::Id::PNG, None),
            Codec::Ffv1 => (codec::Id::FFV1, None),
            Codec::H264 { .. } => (codec::Id::H264, Some("libx264")),
            Codec::Hevc { .. } => (codec::Id::HEVC, Some("libx265")),
            Codec::Mjpeg { .. } => (codec::Id::MJPEG, None),
            Codec::Mpeg4 { .. } => (codec::Id::MPEG4, None),
        };
        let ff_codec = match name {
            Some(n) => encoder::find_by_name(n),
            None => encoder::find(codec_id),
        }
        .ok_or_else(|| {
            fail(format!(
                "this FFmpeg build has no {} encoder; install one with it (e.g. Debian's libavcodec59 with libx264)",
                codec.name()
            ))
        })?;

        let stream_index = {
            let st = octx
                .add_stream(ff_codec)
                .map_err(|e| ff_err("cannot add a video stream", e))?;
            st.index()
        };
        let mut enc = codec::context::Context::new_with_codec(ff_codec)
            .encoder()
            .video()
            .map_err(|e| ff_err("cannot set up the encoder", e))?;
        enc.set_width(width);
        enc.set_height(height);
        enc.set_format(pix);
        if colour {
            // The 2×2 means written by `write_chroma` sit at the centre of their block.
            // SAFETY: enc wraps a valid, not yet opened AVCodecContext; a plain field is set.
            unsafe {
                (*enc.as_mut_ptr()).chroma_sample_location =
                    ff::ffi::AVChromaLocation::AVCHROMA_LOC_CENTER;
            }
        }
        enc.set_time_base(encoder_tb);
        enc.set_frame_rate(Some(frame_rate));
        // set_flags replaces earlier flags, so every flag goes in this one call.
        let mut flags = codec::Flags::BITEXACT;
        if global_header {
            flags |= codec::Flags::GLOBAL_HEADER;
        }
        let mut opts = Dictionary::new();
        match codec {
            Codec::Ffv1 => {}
            Codec::H264 { crf } => {
                opts.set("crf", &crf.min(51).to_string());
                opts.set("preset", "veryfast");
            }
            Codec::Hevc { crf } => {
                opts.set("crf", &crf.min(51).to_string());
                opts.set("preset", "ultrafast");
                // x265 runs its own thread pool and logs to stderr: one thread, errors only.
                opts.set("x265-params", "log-level=error:pools=none:frame-threads=1");
            }
            Codec::Mjpeg { quality } | Codec::Mpeg4 { quality } => {
                flags |= codec::Flags::QSCALE;
                // FF_QP2LAMBDA = 118: the quantiser scale in lambda units.
                enc.set_global_quality(i32::from(quality.clamp(1, 31)) * 118);
                if matches!(codec, Codec::Mjpeg { .. }) {
                    enc.set_color_range(ff::util::color::Range::JPEG);
                }
            }
        }
        enc.set_flags(flags);
        // One thread: multi-threaded encoders may split work differently from run to run.
        // SAFETY: enc wraps a valid, not yet opened AVCodecContext.
        unsafe {
            (*enc.as_mut_ptr()).thread_count = 1;
        }
        let encoder = enc
            .open_with(opts)
            .map_err(|e| ff_err("cannot open the encoder", e))?;
        {
            let mut st = octx
                .stream_mut(stream_index)
                .ok_or_else(|| fail("the video stream vanished".into()))?;
            st.set_parameters(&encoder);
            st.set_time_base(encoder_tb);
            st.set_rate(frame_rate);
            st.set_avg_frame_rate(frame_rate);
            if !rotation_cw_deg.is_multiple_of(360) {
                // SAFETY: the stream is valid and owned by octx; av_stream_new_side_data
                // returns 36 writable bytes (nine i32) or null, checked before writing.
                unsafe {
                    let p = ff::ffi::av_stream_new_side_data(
                        st.as_mut_ptr(),
                        ff::ffi::AVPacketSideDataType::AV_PKT_DATA_DISPLAYMATRIX,
                        9 * std::mem::size_of::<i32>(),
                    );
                    if p.is_null() {
                        return Err(fail("cannot store the display rotation".into()));
                    }
                    // Sign found by round trip through the MP4/QuickTime muxer and demuxer: the
                    // decoder (src/decode/video.rs) reads a clockwise display turn as minus
                    // av_display_rotation_get, as FFmpeg's own command-line player turns
                    // pictures (*from memory*), and this angle reads back with that sign.
                    ff::ffi::av_display_rotation_set(p.cast::<i32>(), f64::from(rotation_cw_deg));
                }
            }
        }
        octx.write_header()
            .map_err(|e| ff_err("cannot write the header", e))?;
        // The muxer may change the stream time base in write_header: read it again.
        let stream_tb = octx
            .stream(stream_index)
            .map(|s| s.time_base())
            .ok_or_else(|| fail("the video stream vanished".into()))?;

        let mut picture = ff::frame::Video::new(pix, width, height);
        fill_neutral_chroma(&mut picture, pix);
        Ok(ClipWriter {
            path: path.to_path_buf(),
            octx,
            encoder,
            picture,
            packet: ff::Packet::empty(),
            stream_index,
            encoder_tb,
            stream_tb,
            width,
            height,
            bit_depth,
            next_pts: 0,
            written: 0,
            colour,
        })
    }

    /// Encodes one frame. Frames are stored in call order; `frame.index` is not used.
    ///
    /// # Errors
    /// [`Error::Output`] when the frame's size or bit depth differs from the clip's, or the
    /// encoder or the file fails.
    pub fn write(&mut self, frame: &Frame) -> Result<()> {
        if frame.width != self.width || frame.height != self.height {
            return Err(self.fail(format!(
                "frame {} is {}x{} but the clip is {}x{}",
                self.written, frame.width, frame.height, self.width, self.height
            )));
        }
        let depth_ok = match &frame.luma {
            Luma::U8(_) => self.bit_depth == 8,
            Luma::U16(_) => self.bit_depth > 8 && frame.bit_depth == self.bit_depth,
        };
        if !depth_ok {
            return Err(self.fail(format!(
                "frame {} is {}-bit but the clip was created for {}-bit frames",
                self.written, frame.bit_depth, self.bit_depth
            )));
        }
        // The encoder may still hold a reference to the previous picture's buffer.
        // SAFETY: picture wraps a valid AVFrame allocated with buffers.
        let r = unsafe { ff::ffi::av_frame_make_writable(self.picture.as_mut_ptr()) };
        if r < 0 {
            return Err(self.fail(format!("cannot get a frame buffer: {}", ff::Error::from(r))));
        }
        let w = self.width as usize;
        let stride = self.picture.stride(0);
        let rgb = self.picture.format() == Pixel::RGB24;
        let dst = self.picture.data_mut(0);
        match &frame.luma {
            Luma::U8(src) if rgb => {
                for (row, line) in src.chunks_exact(w).enumerate() {
                    let out = &mut dst[row * stride..row * stride + 3 * w];
                    for (o, &v) in out.chunks_exact_mut(3).zip(line) {
                        o.fill(v);
                    }
                }
            }
            Luma::U8(src) => {
                for (row, line) in src.chunks_exact(w).enumerate() {
                    dst[row * stride..row * stride + w].copy_from_slice(line);
                }
            }
            Luma::U16(src) => {
                let max = (1u32 << self.bit_depth) - 1;
                for (row, line) in src.chunks_exact(w).enumerate() {
                    let out = &mut dst[row * stride..row * stride + 2 * w];
                    for (o, &v) in out.chunks_exact_mut(2).zip(line) {
                        o.copy_from_slice(&(u32::from(v).min(max) as u16).to_le_bytes());
                    }
                }
            }
        }
        if self.colour {
            self.write_chroma(frame);
        }
        self.picture.set_pts(Some(self.next_pts));
        self.next_pts += 1;
        self.written += 1;
        self.encoder
            .send_frame(&self.picture)
            .map_err(|e| self.fail(format!("encoder refused frame {}: {e}", self.written - 1)))?;
        self.drain()
    }

    /// Fills the 4:2:0 colour planes from `frame`'s chroma (2×2 means of full-size planes,
    /// rounded; copied when already at half size), or with the neutral value.
    fn write_chroma(&mut self, frame: &Frame) {
        let (cw, ch) = (
            self.width.div_ceil(2) as usize,
            self.height.div_ceil(2) as usize,
        );
        for plane in 1..3 {
            let stride = self.picture.stride(plane);
            let dst = self.picture.data_mut(plane);
            let Some(c) = &frame.chroma else {
                dst.fill(128);
                continue;
            };
            let src = if plane == 1 { &c.cb } else { &c.cr };
            let (sw, sh) = (c.width as usize, c.height as usize);
            for y in 0..ch {
                for x in 0..cw {
                    dst[y * stride + x] = if sw == cw && sh == ch {
                        src[y * sw + x]
                    } else {
                        let mut acc = 0u32;
                        for (dy, dx) in [(0, 0), (0, 1), (1, 0), (1, 1)] {
                            let (sx, sy) = ((2 * x + dx).min(sw - 1), (2 * y + dy).min(sh - 1));
                            acc += u32::from(src[sy * sw + sx]);
                        }
                        ((acc + 2) / 4) as u8
                    };
                }
            }
        }
    }

    /// Flushes the encoder and writes the file's trailer. Returns the number of frames written.
    ///
    /// # Errors
    /// [`Error::Output`] when flushing or writing fails.
    pub fn finish(mut self) -> Result<u64> {
        self.encoder
            .send_eof()
            .map_err(|e| self.fail(format!("cannot flush the encoder: {e}")))?;
        self.drain()?;
        self.octx
            .write_trailer()
            .map_err(|e| self.fail(format!("cannot finish the file: {e}")))?;
        Ok(self.written)
    }

    /// Moves the next frame's timestamp (in 1/fps units), so tests can make a clip with a
    /// variable frame rate. Used by twistmark's decode tests (see above).
    #[cfg(test)]
    #[allow(dead_code)]
    pub(crate) fn skip_to_pts(&mut self, pts: i64) {
        self.next_pts = pts;
    }

    fn drain(&mut self) -> Result<()> {
        loop {
            match self.encoder.receive_packet(&mut self.packet) {
                Ok(()) => {}
                Err(ff::Error::Other { errno }) if errno == ff::util::error::EAGAIN => {
                    return Ok(());
                }
                Err(ff::Error::Eof) => return Ok(()),
                Err(e) => return Err(self.fail(format!("encoder failed: {e}"))),
            }
            if self.packet.duration() == 0 {
                self.packet.set_duration(1);
            }
            self.packet.set_stream(self.stream_index);
            self.packet.rescale_ts(self.encoder_tb, self.stream_tb);
            self.packet
                .write_interleaved(&mut self.octx)
                .map_err(|e| Error::Output {
                    path: self.path.clone(),
                    reason: format!("cannot write a packet: {e}"),
                })?;
        }
    }

    fn fail(&self, reason: String) -> Error {
        Error::Output {
            path: self.path.clone(),
            reason,
        }
    }
}

/// The frame rate as a rational: exact for integer rates, FFmpeg's best approximation else.
fn rate_rational(fps_hz: f64) -> Rational {
    if fps_hz.fract() == 0.0 && fps_hz <= i32::MAX as f64 {
        Rational::new(fps_hz as i32, 1)
    } else {
        Rational::from(fps_hz)
    }
}

/// Sets the chroma planes (if any) to the neutral value: 128 for 8 bit, 512 for 10 bit.
fn fill_neutral_chroma(picture: &mut ff::frame::Video, pix: Pixel) {
    for plane in 1..picture.planes() {
        let data = picture.data_mut(plane);
        if pix == Pixel::YUV420P10LE {
            for pair in data.chunks_exact_mut(2) {
                pair.copy_from_slice(&512u16.to_le_bytes());
            }
        } else {
            data.fill(128);
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn ramp(i: u64, w: u32, h: u32) -> Frame {
        let data = (0..w * h)
            .map(|p| ((p % w + p / w + i as u32 * 7) % 256) as u8)
            .collect();
        Frame::from_u8(i, w, h, data)
    }

    fn write_clip(path: &Path, codec: Codec) -> Vec<u8> {
        let mut w = ClipWriter::create(path, codec, 64, 48, 30.0).unwrap();
        for i in 0..12 {
            w.write(&ramp(i, 64, 48)).unwrap();
        }
        assert_eq!(w.finish().unwrap(), 12);
        std::fs::read(path).unwrap()
    }

    #[test]
    fn every_lossless_and_intra_codec_is_deterministic() {
        let dir = tempfile::tempdir().unwrap();
        let codecs = [
            Codec::Ffv1,
            Codec::H264 { crf: 18 },
            Codec::Mjpeg { quality: 3 },
            Codec::Mpeg4 { quality: 3 },
        ];
        for (ci, codec) in codecs.into_iter().enumerate() {
            for ext in ["mkv", "mp4", "mov", "avi"] {
                if matches!(codec, Codec::Ffv1) && ext == "mp4" {
                    let p = dir.path().join("f.mp4");
                    let e = ClipWriter::create(&p, codec, 64, 48, 30.0).err().unwrap();
                    assert!(e.to_string().contains("mkv"), "{e}");
                    continue;
                }
                let a = dir.path().join(format!("a{ci}.{ext}"));
                let b = dir.path().join(format!("b{ci}.{ext}"));
                let (da, db) = (write_clip(&a, codec), write_clip(&b, codec));
                assert!(!da.is_empty());
                if matches!(codec, Codec::H264 { .. }) {
                    // libx264 through these libraries was seen to produce different bytes on
                    // some runs even with one thread (not understood yet); its decoded accuracy
                    // is checked in tests/it/decode.rs instead, and the fixture check compares
                    // H.264 files through checksums.json.
                    continue;
                }
                assert!(da == db, "{codec:?} in .{ext} differs between two runs");
            }
        }
    }

    #[test]
    fn rejects_bad_settings() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("x.webm");
        assert!(ClipWriter::create(&p, Codec::Ffv1, 8, 8, 30.0).is_err());
        let p = dir.path().join("x.mkv");
        let e = ClipWriter::create(&p, Codec::H264 { crf: 18 }, 7, 8, 30.0)
            .err()
            .unwrap();
        assert!(e.to_string().contains("even"), "{e}");
        assert!(ClipWriter::create(&p, Codec::Ffv1, 8, 8, 0.0).is_err());
        assert!(
            ClipWriter::create_with_depth(&p, Codec::Mjpeg { quality: 3 }, 8, 8, 30.0, 16).is_err()
        );
        let mut w = ClipWriter::create(&p, Codec::Ffv1, 8, 8, 30.0).unwrap();
        assert!(w.write(&Frame::from_u8(0, 4, 4, vec![0; 16])).is_err());
    }
}
