//! Stage 1, decode (feature `ffmpeg`): video files (mp4, mov, mkv, avi, ...) decoded with the
//! FFmpeg libraries into luma [`Frame`]s, one at a time.
//!
//! - The luma plane is copied row by row using the decoder's stride (no scaling, no range
//!   change) for every pixel format whose first plane holds Y: `gray*`, `yuv*p*`, `yuvj*p`,
//!   `nv12` and packed `yuyv422`-style formats. Only formats without a Y plane (RGB, palette)
//!   go through swscale, to `gray` (8 bit) or `gray16le` (deeper).
//! - 8-bit formats give [`Luma::U8`]; 9- to 16-bit formats give [`Luma::U16`] with the format's
//!   own bit depth (10 for `yuv420p10le`, 16 for `gray16le`).
//! - Frame indices count decoded frames from 0; container timestamps are never used for
//!   timing (Matroska, for one, rounds them to 1 ms).
//! - The frame count in [`ClipInfo`] is exact: the video stream's packets are counted on open
//!   (demuxing only, no decoding), because containers often omit the count (Matroska) or may
//!   carry a stale one. Each packet of the supported codecs holds exactly one frame, and B-frame
//!   reordering changes the order frames leave the decoder, not their number; the tests check
//!   the count against a full decode for every codec and container.

use std::path::{Path, PathBuf};

use ff::format::Pixel;
use ff::packet::Ref as _;
use ffmpeg_next as ff;

use super::{ClipInfo, ClipKind, Frame, FrameRef, FrameSource, Luma, LumaRef, Slot, ffmpeg_init};
use crate::error::{Error, Result};

/// How the luma samples are taken out of a decoded picture.
#[derive(Debug, Clone, Copy, PartialEq)]
enum LumaPlan {
    /// 8-bit Y in plane 0: byte `offset + x * step` of each row.
    Direct8 { offset: usize, step: usize },
    /// 9- to 16-bit little-endian Y in plane 0, two bytes per sample, no shift.
    Direct16 { depth: u8 },
    /// No usable Y plane: convert with swscale to `gray` (deep = false) or `gray16le`.
    Scale { deep: bool },
}

impl LumaPlan {
    fn bit_depth(self) -> u8 {
        match self {
            LumaPlan::Direct8 { .. } => 8,
            LumaPlan::Direct16 { depth } => depth,
            LumaPlan::Scale { deep } => {
                if deep {
                    16
                } else {
                    8
                }
            }
        }
    }
}

/// Chooses how to read luma from pixel format `pix`, from its FFmpeg descriptor.
fn plan_for(pix: Pixel) -> LumaPlan {
    let Some(desc) = pix.descriptor() else {
        return LumaPlan::Scale { deep: false };
    };
    // SAFETY: the descriptor pointer comes from av_pix_fmt_desc_get and is static.
    let d = unsafe { &*desc.as_ptr() };
    let c = d.comp[0];
    let flags = d.flags;
    let depth = c.depth.clamp(1, 16) as u8;
    let no_y = flags
        & (ff::ffi::AV_PIX_FMT_FLAG_RGB
            | ff::ffi::AV_PIX_FMT_FLAG_PAL
            | ff::ffi::AV_PIX_FMT_FLAG_BITSTREAM
            | ff::ffi::AV_PIX_FMT_FLAG_HWACCEL
            | ff::ffi::AV_PIX_FMT_FLAG_FLOAT
            | ff::ffi::AV_PIX_FMT_FLAG_BE) as u64
        != 0;
    if no_y || c.plane != 0 || c.shift != 0 {
        return LumaPlan::Scale { deep: depth > 8 };
    }
    match (depth, c.step, c.offset) {
        (8, step @ 1..=4, offset) if offset >= 0 => LumaPlan::Direct8 {
            offset: offset as usize,
            step: step as usize,
        },
        (9..=16, 2, 0) => LumaPlan::Direct16 { depth },
        _ => LumaPlan::Scale { deep: depth > 8 },
    }
}

/// Decodes a video file one frame at a time.
pub struct VideoSource {
    info: ClipInfo,
    ictx: ff::format::context::Input,
    stream_index: usize,
    decoder: ff::decoder::Video,
    picture: ff::frame::Video,
    packet: ff::Packet,
    scaler: Option<(Pixel, u32, u32, Scaler)>,
    gray: ff::frame::Video,
    next_index: u64,
    eof_sent: bool,
    done: bool,
    /// The decoder flagged `picture` as damaged (it concealed errors in it).
    picture_damaged: bool,
    /// A packet of an intra-only stream could not be decoded: the next frame handed out is a
    /// placeholder marked damaged (one packet is one frame, so the frame count stays right).
    lost_frame: bool,
    /// Frames are independent (every frame a key frame), so one damaged packet costs exactly
    /// one frame and decoding can go on after it.
    intra_only: bool,
    /// The stored (coded) picture size, before the display rotation.
    coded: (u32, u32),
    /// Display rotation, degrees clockwise: each frame is turned by it.
    rotation_cw: u32,
}

/// FFmpeg's pixel-format converter, the one part of [`VideoSource`] that ffmpeg-next does not
/// mark `Send` (the demuxer, decoder, frames and packet are).
struct Scaler(ff::software::scaling::Context);

// SAFETY: a SwsContext holds no thread-local state and no reference to another thread's data;
// this one is owned by exactly one `VideoSource`, used only through `&mut self`, and freed by
// its owner, so moving it to another thread between calls is sound (FFmpeg allows a context
// to be used from any one thread at a time).
unsafe impl Send for Scaler {}

impl VideoSource {
    /// Opens the file, checks that it holds a decodable video stream, and counts its frames.
    ///
    /// # Errors
    /// [`Error::Input`] naming the file when it is empty, not a video FFmpeg can read, a single
    /// still image or a text file, audio only, or has no frames; [`Error::Io`] when it cannot be
    /// read at all.
    pub fn open(path: &Path) -> Result<Self> {
        ffmpeg_init();
        let meta = std::fs::metadata(path).map_err(|e| Error::io(path, e))?;
        if meta.len() == 0 {
            return Err(Error::input(
                path,
                "the file is empty (0 bytes); give a video file or a folder of stills",
            ));
        }
        let (stream_index, counted, frame_times) = scan(path)?;
        let mut ictx = open_input(path)?;
        let stream = ictx
            .stream(stream_index)
            .ok_or_else(|| Error::input(path, "the video stream vanished on reopening"))?;
        let rotation_cw = display_rotation(&stream);
        let params = stream.parameters();
        let codec_name = params.id().name().to_string();
        let intra_only = intra_only(params.id());
        let container_fps_hz = [stream.avg_frame_rate(), stream.rate()]
            .into_iter()
            .find(|r| r.numerator() > 0 && r.denominator() > 0)
            .map(f64::from);
        let mut ctx = ff::codec::context::Context::from_parameters(params).map_err(|e| {
            Error::input(path, format!("cannot set up a {codec_name} decoder: {e}"))
        })?;
        // Only thread_count is set: libavcodec then keeps its own frame+slice threading
        // default (choosing one kind through ffmpeg-next turned threading off for FFV1).
        let threads = std::thread::available_parallelism()
            .map(|n| n.get().min(16))
            .unwrap_or(1) as i32;
        // SAFETY: ctx wraps a valid, not yet opened AVCodecContext.
        unsafe {
            (*ctx.as_mut_ptr()).thread_count = threads;
        }
        // A damaged frame must never be measured. Most decoders flag one (checked in
        // `next_picture`); the MJPEG decoder instead logs and outputs a garbled picture unless
        // told to stop at the error. Its frames are independent, so the damaged packet is
        // handed out as one frame marked damaged and decoding goes on. One decoding thread
        // keeps frames in packet order around such a loss (MJPEG decodes one frame per
        // packet, so no parallelism is lost).
        if codec_name == "mjpeg" {
            // SAFETY: as above.
            unsafe {
                (*ctx.as_mut_ptr()).err_recognition |=
                    ff::ffi::AV_EF_EXPLODE | ff::ffi::AV_EF_CRCCHECK | ff::ffi::AV_EF_BITSTREAM;
                (*ctx.as_mut_ptr()).thread_count = 1;
            }
        }
        let decoder = ctx.decoder().video().map_err(|e| {
            Error::input(
                path,
                format!(
                    "this FFmpeg build cannot decode its {codec_name} video ({e}); re-encode it, \
                     e.g. to FFV1 or H.264"
                ),
            )
        })?;
        let (width, height) = (decoder.width(), decoder.height());
        if width == 0 || height == 0 {
            return Err(Error::input(
                path,
                format!("the {codec_name} video stream has no frame size; the file may be damaged"),
            ));
        }
        crate::limits::check_frame_size(path, width, height)?;
        let bit_depth = plan_for(decoder.format()).bit_depth();
        let mut warnings = Vec::new();
        if let Some(e) = frame_times
            .as_ref()
            .and_then(crate::decode::FrameTimes::evenness)
            .filter(crate::decode::timing::Evenness::uneven)
        {
            warnings.push(crate::warning::Warning::Note(format!(
                "the container's timestamps are uneven (variable frame rate; one interval is \
                 {:.3} ms against a median of {:.3} ms): with --fps or the rig's capture_fps_hz \
                 frames are timed as frame index / capture rate, without them by these \
                 timestamps (summary.timing says which)",
                e.worst_interval_s * 1e3,
                e.median_interval_s * 1e3
            )));
        }
        // Keep the packet reader at the video stream only.
        for (i, mut s) in ictx.streams_mut().enumerate() {
            if i != stream_index {
                // SAFETY: valid stream pointer owned by ictx.
                unsafe {
                    (*s.as_mut_ptr()).discard = ff::ffi::AVDiscard::AVDISCARD_ALL;
                }
            }
        }
        let (shown_w, shown_h) = if rotation_cw % 180 == 90 {
            (height, width)
        } else {
            (width, height)
        };
        let info = ClipInfo {
            path: path.to_path_buf(),
            kind: ClipKind::Video,
            frames: counted,
            width: shown_w,
            height: shown_h,
            bit_depth,
            container_fps_hz,
            codec: codec_name,
            duration_s: container_fps_hz.map(|fps| counted as f64 / fps),
            warnings,
            frame_times,
            display_rotation_deg: rotation_cw,
        };
        Ok(VideoSource {
            info,
            ictx,
            stream_index,
            decoder,
            picture: ff::frame::Video::empty(),
            packet: ff::Packet::empty(),
            scaler: None,
            gray: ff::frame::Video::empty(),
            next_index: 0,
            eof_sent: false,
            done: false,
            picture_damaged: false,
            lost_frame: false,
            intra_only,
            coded: (width, height),
            rotation_cw,
        })
    }

    fn path(&self) -> PathBuf {
        self.info.path.clone()
    }

    /// Passes `r` on; an error ends the stream (later reads return the end).
    fn stop_on_error<T>(&mut self, r: Result<T>) -> Result<T> {
        if r.is_err() {
            self.done = true;
        }
        r
    }

    fn decode_error(&self, reason: String) -> Error {
        Error::Decode {
            path: self.path(),
            frame: self.next_index,
            reason,
        }
    }

    /// Decodes until `self.picture` holds the next frame (`Ok(true)`; `next_index` is its
    /// index) or the stream ends (`Ok(false)`), feeding packets as the decoder asks. A frame
    /// the decoder flags as damaged sets `picture_damaged`; a packet of an intra-only stream
    /// that cannot be decoded at all sets `lost_frame` (its frame is handed out as a
    /// placeholder). Either way the frame is marked damaged and never measured.
    fn next_picture(&mut self) -> Result<bool> {
        self.lost_frame = false;
        if self.done {
            return Ok(false);
        }
        loop {
            match self.decoder.receive_frame(&mut self.picture) {
                Ok(()) => {
                    // SAFETY: picture wraps a valid AVFrame just filled by the decoder.
                    let (errors, flags) = unsafe {
                        let p = self.picture.as_ptr();
                        ((*p).decode_error_flags, (*p).flags)
                    };
                    self.picture_damaged =
                        errors != 0 || flags & ff::ffi::AV_FRAME_FLAG_CORRUPT != 0;
                    return Ok(true);
                }
                Err(ff::Error::Eof) => {
                    self.done = true;
                    return Ok(false);
                }
                Err(ff::Error::Other { errno }) if errno == ff::util::error::EAGAIN => {}
                Err(e) => {
                    self.done = true;
                    return Err(self.decode_error(format!("the decoder failed: {e}")));
                }
            }
            if self.eof_sent {
                // Drained but no end-of-stream marker: treat as the end.
                self.done = true;
                return Ok(false);
            }
            // Feed the next packet of the video stream.
            loop {
                // `Packet::read` (av_read_frame) does not release the packet's previous
                // buffer, so without this every packet read stays allocated and memory grows
                // with the clip (about 0.5 MB per 720p FFV1 frame).
                // SAFETY: the packet is a valid AVPacket owned by self; unref leaves it blank.
                unsafe { ff::ffi::av_packet_unref(ff::packet::Mut::as_mut_ptr(&mut self.packet)) };
                match self.packet.read(&mut self.ictx) {
                    Ok(()) if self.packet.stream() == self.stream_index => {
                        if let Err(e) = self.decoder.send_packet(&self.packet) {
                            if self.intra_only && !is_fatal(&e) {
                                self.lost_frame = true;
                                return Ok(true);
                            }
                            self.done = true;
                            return Err(self.decode_error(format!(
                                "damaged data ({e}); the file may be cut short or corrupt"
                            )));
                        }
                        break;
                    }
                    Ok(()) => continue,
                    Err(ff::Error::Eof) => {
                        // Any error here is about flushing; the drain above reports real ones.
                        let _ = self.decoder.send_eof();
                        self.eof_sent = true;
                        break;
                    }
                    Err(e) => {
                        self.done = true;
                        return Err(self.decode_error(format!(
                            "cannot read the file ({e}); it may be cut short or corrupt"
                        )));
                    }
                }
            }
        }
    }

    /// How to read the luma of `self.picture`, after checking that its size and depth are
    /// the clip's.
    fn picture_plan(&self) -> Result<LumaPlan> {
        if bottom_up(&self.picture) {
            return Err(self.decode_error(
                "the decoder gave a picture stored bottom-up (a negative line stride), which \
                 twistmark does not read; re-encode the clip (for example to FFV1 or H.264) and \
                 try again"
                    .into(),
            ));
        }
        let (w, h) = (self.picture.width(), self.picture.height());
        if (w, h) != self.coded {
            return Err(self.decode_error(format!(
                "the frame size changed from {}x{} to {w}x{h}; twistmark needs one size per clip",
                self.coded.0, self.coded.1
            )));
        }
        let plan = plan_for(self.picture.format());
        if plan.bit_depth() != self.info.bit_depth {
            return Err(self.decode_error(format!(
                "the bit depth changed from {} to {} bits; twistmark needs one depth per clip",
                self.info.bit_depth,
                plan.bit_depth()
            )));
        }
        Ok(plan)
    }

    /// True when `self.picture`'s 8-bit Y rows are packed (stride = width, one byte per
    /// sample), so its luma can be read in place; otherwise it must be copied or converted.
    fn packed(&self, plan: LumaPlan) -> bool {
        plan == (LumaPlan::Direct8 { offset: 0, step: 1 })
            && self.rotation_cw == 0
            && self.picture.stride(0) == self.info.width as usize
    }

    /// Fills `frame` as the stand-in for a frame whose data could not be decoded: the clip's
    /// size, black, marked damaged (the tracker never reads a damaged frame's samples).
    fn placeholder(&self, frame: &mut Frame) {
        let n = self.info.width as usize * self.info.height as usize;
        frame.index = self.next_index;
        frame.width = self.info.width;
        frame.height = self.info.height;
        frame.bit_depth = self.info.bit_depth;
        match &mut frame.luma {
            Luma::U8(v) if self.info.bit_depth <= 8 => {
                v.clear();
                v.resize(n, 0);
            }
            Luma::U16(v) if self.info.bit_depth > 8 => {
                v.clear();
                v.resize(n, 0);
            }
            other if self.info.bit_depth <= 8 => *other = Luma::U8(vec![0; n]),
            other => *other = Luma::U16(vec![0; n]),
        }
        frame.chroma = None;
        frame.damaged = true;
    }

    /// Copies the luma of `self.picture` into `frame` by `plan` (from [`Self::picture_plan`]).
    fn copy_out(&mut self, plan: LumaPlan, frame: &mut Frame) -> Result<()> {
        let (w, h) = (self.picture.width(), self.picture.height());
        frame.index = self.next_index;
        frame.damaged = self.picture_damaged;
        frame.width = w;
        frame.height = h;
        frame.bit_depth = plan.bit_depth();
        let (wu, hu) = (w as usize, h as usize);
        match plan {
            LumaPlan::Direct8 { offset, step } => {
                copy_u8(&self.picture, offset, step, wu, hu, frame);
                copy_chroma(&self.picture, w, h, frame);
            }
            LumaPlan::Direct16 { .. } => {
                copy_u16(&self.picture, wu, hu, frame);
                frame.chroma = None;
            }
            LumaPlan::Scale { deep } => {
                let src_fmt = self.picture.format();
                let dst_fmt = if deep { Pixel::GRAY16LE } else { Pixel::GRAY8 };
                let stale = !matches!(&self.scaler, Some((f, sw, sh, _)) if *f == src_fmt && *sw == w && *sh == h);
                if stale {
                    let ctx = ff::software::scaling::Context::get(
                        src_fmt,
                        w,
                        h,
                        dst_fmt,
                        w,
                        h,
                        ff::software::scaling::Flags::POINT,
                    )
                    .map_err(|e| {
                        self.decode_error(format!(
                            "cannot convert pixel format {} to grey: {e}",
                            src_fmt.descriptor().map_or("?", |d| d.name())
                        ))
                    })?;
                    self.scaler = Some((src_fmt, w, h, Scaler(ctx)));
                }
                let Some((_, _, _, sws)) = self.scaler.as_mut() else {
                    unreachable!("scaler set above");
                };
                frame.chroma = None;
                sws.0
                    .run(&self.picture, &mut self.gray)
                    .map_err(|e| self.decode_error(format!("grey conversion failed: {e}")))?;
                if deep {
                    copy_u16(&self.gray, wu, hu, frame);
                } else {
                    copy_u8(&self.gray, 0, 1, wu, hu, frame);
                }
            }
        }
        Ok(())
    }
}

/// True when every frame of a stream of codec `id` is a key frame (FFmpeg's codec descriptor
/// says intra-only), so a packet that cannot be decoded costs that frame alone.
fn intra_only(id: ff::codec::Id) -> bool {
    // SAFETY: avcodec_descriptor_get returns a pointer to a static descriptor, or null.
    let d = unsafe { ff::ffi::avcodec_descriptor_get(id.into()) };
    // SAFETY: non-null descriptors point to FFmpeg's static, immutable table.
    !d.is_null() && unsafe { (*d).props } & ff::ffi::AV_CODEC_PROP_INTRA_ONLY != 0
}

/// True for a decoder error that no later packet can recover from (out of memory, an
/// unsupported feature, or a broken decoder), as opposed to damaged data in one packet.
fn is_fatal(e: &ff::Error) -> bool {
    matches!(
        e,
        ff::Error::Other { errno } if *errno == ff::util::error::ENOMEM
    ) || matches!(
        e,
        ff::Error::PatchWelcome | ff::Error::Bug | ff::Error::Bug2
    )
}

/// The stream's display rotation, degrees clockwise (0 without a display matrix).
fn display_rotation(stream: &ff::format::stream::Stream) -> u32 {
    let mut size: usize = 0;
    // SAFETY: the stream pointer is valid for the lifetime of `stream`; the side data, when
    // present, is at least `size` bytes owned by the stream, and a display matrix is nine
    // 32-bit integers, checked before it is read.
    unsafe {
        let p = ff::ffi::av_stream_get_side_data(
            stream.as_ptr(),
            ff::ffi::AVPacketSideDataType::AV_PKT_DATA_DISPLAYMATRIX,
            &mut size,
        );
        if p.is_null() || size < 9 * std::mem::size_of::<i32>() {
            return 0;
        }
        super::rotate::clockwise_quarter_turns(ff::ffi::av_display_rotation_get(p as *const i32))
    }
}

/// True when any plane of `pic` has a negative line stride (stored bottom-up, as some decoders
/// give): ffmpeg-next's plane slices assume a positive stride, so such a picture must not be
/// read through them.
fn bottom_up(pic: &ff::frame::Video) -> bool {
    // SAFETY: `pic` wraps a valid AVFrame; only its plain `data` and `linesize` fields are read.
    let f = unsafe { &*pic.as_ptr() };
    f.linesize
        .iter()
        .zip(&f.data)
        .any(|(&stride, plane)| !plane.is_null() && stride < 0)
}

/// The colour planes of an 8-bit planar 4:2:0 picture, borrowed in place (None for any other
/// format: grey, deeper or packed pictures are tracked on luma).
fn chroma_of(
    pic: &ff::frame::Video,
    width: u32,
    height: u32,
) -> Option<crate::decode::ChromaRef<'_>> {
    let jpeg = match pic.format() {
        Pixel::YUV420P => false,
        Pixel::YUVJ420P => true,
        _ => return None,
    };
    let (cw, ch) = (width.div_ceil(2), height.div_ceil(2));
    let (s1, s2) = (pic.stride(1), pic.stride(2));
    let need = |s: usize| (ch as usize - 1) * s + cw as usize;
    let cb = pic.data(1).get(..need(s1))?;
    let cr = pic.data(2).get(..need(s2))?;
    // SAFETY: `pic` wraps a valid AVFrame; only a plain field is read.
    let loc = unsafe { (*pic.as_ptr()).chroma_location };
    use ff::ffi::AVChromaLocation as L;
    let siting = match loc {
        L::AVCHROMA_LOC_CENTER => crate::decode::ChromaSiting::Centre,
        L::AVCHROMA_LOC_LEFT | L::AVCHROMA_LOC_TOPLEFT => crate::decode::ChromaSiting::Left,
        // Unspecified: JPEG centres chroma, MPEG and H.264 put it on the left.
        _ if jpeg => crate::decode::ChromaSiting::Centre,
        _ => crate::decode::ChromaSiting::Left,
    };
    Some(crate::decode::ChromaRef {
        width: cw,
        height: ch,
        cb,
        cb_stride: s1,
        cr,
        cr_stride: s2,
        siting,
    })
}

/// The reason FFmpeg gives, for messages.
fn ff_reason(e: &ff::Error) -> String {
    match e {
        ff::Error::InvalidData => {
            "FFmpeg finds no valid media data: it is not a video, or it is damaged or cut short"
                .into()
        }
        other => other.to_string(),
    }
}

/// The address handed to FFmpeg for `path`, and a file handle to keep open while FFmpeg
/// opens it. A path always reaches FFmpeg as a file, never as a protocol address: it is made
/// absolute and given the `file:` prefix, so `file:x.mkv` or `12:03:44.mkv` names the file of
/// that name. A path that is not UTF-8 (which the FFmpeg bindings cannot pass) is opened here
/// and handed over as this process's `/proc/self/fd/N` on Linux.
fn ff_address(path: &Path) -> Result<(String, Option<std::fs::File>)> {
    let abs = std::path::absolute(path).map_err(|e| Error::io(path, e))?;
    if let Some(s) = abs.to_str() {
        return Ok((format!("file:{s}"), None));
    }
    #[cfg(target_os = "linux")]
    {
        use std::os::fd::AsRawFd;
        let f = std::fs::File::open(path).map_err(|e| Error::io(path, e))?;
        let address = format!("file:/proc/self/fd/{}", f.as_raw_fd());
        Ok((address, Some(f)))
    }
    #[cfg(not(target_os = "linux"))]
    Err(Error::input(
        path,
        "the path is not valid UTF-8, which FFmpeg cannot open on this system; rename the file \
         or its folder",
    ))
}

fn open_input(path: &Path) -> Result<ff::format::context::Input> {
    let (address, _keep_open) = ff_address(path)?;
    ff::format::input(&address).map_err(|e| {
        Error::input(
            path,
            format!(
                "cannot be read as a video ({}); give a video file (mp4, mov, mkv, avi) or a \
                 folder of numbered stills",
                ff_reason(&e)
            ),
        )
    })
}

/// Opens the file once to pick the video stream and count its frames by demuxing (no
/// decoding). Returns (stream index, frame count, each frame's presentation time when every
/// packet carries a timestamp).
fn scan(path: &Path) -> Result<(usize, u64, Option<crate::decode::FrameTimes>)> {
    let mut ictx = open_input(path)?;
    let demuxer = ictx.format().name().to_string();
    if demuxer == "tty" {
        return Err(Error::input(
            path,
            "looks like a text file, not a video; give a video file or a folder of stills",
        ));
    }
    // An image demuxer holding one picture is a still; one holding several back to back (a
    // raw MJPEG stream, read by the JPEG demuxer frame by frame) is a video.
    let image_demuxer = demuxer == "image2" || demuxer.ends_with("_pipe");
    let mut video = None;
    let mut audio = 0usize;
    for s in ictx.streams() {
        let medium = s.parameters().medium();
        let attached = s
            .disposition()
            .contains(ff::format::stream::Disposition::ATTACHED_PIC);
        match medium {
            ff::media::Type::Video if !attached && video.is_none() => video = Some(s.index()),
            ff::media::Type::Audio => audio += 1,
            _ => {}
        }
    }
    let Some(index) = video else {
        let reason = if audio > 0 {
            "has only audio, no video stream; give the camera's video file".to_string()
        } else {
            format!("has no video stream ({demuxer} container); give the camera's video file")
        };
        return Err(Error::input(path, reason));
    };
    let tick_s = ictx
        .stream(index)
        .map(|s| s.time_base())
        .filter(|r| r.numerator() > 0 && r.denominator() > 0)
        .map_or(0.0, f64::from);
    let mut count = 0u64;
    let mut stamps: Vec<i64> = Vec::new();
    let mut packet = ff::Packet::empty();
    loop {
        // As in `read_into`: release the previous packet's buffer before reading the next.
        // SAFETY: the packet is a valid AVPacket owned here; unref leaves it blank.
        unsafe { ff::ffi::av_packet_unref(ff::packet::Mut::as_mut_ptr(&mut packet)) };
        match packet.read(&mut ictx) {
            Ok(()) => {}
            Err(ff::Error::Eof) => break,
            // A damaged tail: count what could be read; decoding reports the error later.
            Err(_) => break,
        }
        if packet.stream() != index {
            continue;
        }
        // SAFETY: the packet wraps a valid AVPacket just filled by av_read_frame.
        let discard = unsafe { (*packet.as_ptr()).flags & ff::ffi::AV_PKT_FLAG_DISCARD } != 0;
        if discard {
            continue;
        }
        count += 1;
        // Presentation timestamps only: a decoding timestamp is in decoding order, and a
        // frame without a pts leaves the whole clip to be timed by its rate.
        if let Some(t) = packet.pts()
            && stamps.len() < crate::limits::MAX_FRAMES_TIMED
        {
            stamps.push(t);
        }
    }
    if image_demuxer && count <= 1 {
        let kind = demuxer.trim_end_matches("_pipe");
        return Err(Error::input(
            path,
            format!(
                "is a single still image ({kind}), not a video; put numbered stills in a folder \
                 and give the folder"
            ),
        ));
    }
    if count == 0 {
        return Err(Error::input(
            path,
            "has a video stream but no frames in it; the recording may have failed",
        ));
    }
    let times = if stamps.len() as u64 == count {
        crate::decode::FrameTimes::from_ticks(&mut stamps, tick_s)
    } else {
        None
    };
    Ok((index, count, times))
}

fn copy_u8(
    pic: &ff::frame::Video,
    offset: usize,
    step: usize,
    w: usize,
    h: usize,
    frame: &mut Frame,
) {
    let buf = match &mut frame.luma {
        Luma::U8(v) => v,
        other => {
            *other = Luma::U8(Vec::new());
            let Luma::U8(v) = other else { unreachable!() };
            v
        }
    };
    buf.resize(w * h, 0);
    let stride = pic.stride(0);
    let data = pic.data(0);
    for (row, out) in buf.chunks_exact_mut(w).enumerate() {
        let line = &data[row * stride..];
        if step == 1 {
            out.copy_from_slice(&line[offset..offset + w]);
        } else {
            for (x, o) in out.iter_mut().enumerate() {
                *o = line[offset + x * step];
            }
        }
    }
}

/// Copies the colour planes of an 8-bit planar 4:2:0 picture into `frame` (reusing its
/// buffers), or clears them for any other format.
fn copy_chroma(pic: &ff::frame::Video, w: u32, h: u32, frame: &mut Frame) {
    let Some(c) = chroma_of(pic, w, h) else {
        frame.chroma = None;
        return;
    };
    let out = frame.chroma.get_or_insert_with(|| crate::decode::Chroma {
        width: 0,
        height: 0,
        cb: Vec::new(),
        cr: Vec::new(),
        siting: c.siting,
    });
    out.width = c.width;
    out.height = c.height;
    out.siting = c.siting;
    let (cw, ch) = (c.width as usize, c.height as usize);
    for (dst, src, stride) in [
        (&mut out.cb, c.cb, c.cb_stride),
        (&mut out.cr, c.cr, c.cr_stride),
    ] {
        dst.clear();
        for row in 0..ch {
            dst.extend_from_slice(&src[row * stride..row * stride + cw]);
        }
    }
}

fn copy_u16(pic: &ff::frame::Video, w: usize, h: usize, frame: &mut Frame) {
    let buf = match &mut frame.luma {
        Luma::U16(v) => v,
        other => {
            *other = Luma::U16(Vec::new());
            let Luma::U16(v) = other else { unreachable!() };
            v
        }
    };
    buf.resize(w * h, 0);
    let stride = pic.stride(0);
    let data = pic.data(0);
    for (row, out) in buf.chunks_exact_mut(w).enumerate() {
        let line = &data[row * stride..row * stride + 2 * w];
        for (o, b) in out.iter_mut().zip(line.chunks_exact(2)) {
            *o = u16::from_le_bytes([b[0], b[1]]);
        }
    }
}

impl FrameSource for VideoSource {
    fn info(&self) -> &ClipInfo {
        &self.info
    }

    fn read_into(&mut self, frame: &mut Frame) -> Result<bool> {
        if !self.next_picture()? {
            return Ok(false);
        }
        if self.lost_frame {
            // The placeholder is made at the displayed size already.
            self.placeholder(frame);
        } else {
            let copied = self
                .picture_plan()
                .and_then(|plan| self.copy_out(plan, frame));
            self.stop_on_error(copied)?;
            super::rotate::rotate_frame(frame, self.rotation_cw);
        }
        self.next_index += 1;
        Ok(true)
    }

    fn read_slot(&mut self, slot: &mut Slot) -> Result<bool> {
        slot.release();
        if !self.next_picture()? {
            return Ok(false);
        }
        if self.lost_frame {
            self.placeholder(&mut slot.frame);
            self.next_index += 1;
            return Ok(true);
        }
        let plan = self.picture_plan();
        let plan = self.stop_on_error(plan)?;
        if self.packed(plan) {
            let at = (self.next_index, self.info.width, self.info.height);
            slot.picture
                .hold(&mut self.picture, at, self.picture_damaged);
        } else {
            let copied = self.copy_out(plan, &mut slot.frame);
            self.stop_on_error(copied)?;
            super::rotate::rotate_frame(&mut slot.frame, self.rotation_cw);
        }
        self.next_index += 1;
        Ok(true)
    }
}

/// A reference to one of the decoder's pictures, held past later decoder calls: FFmpeg's
/// pictures are reference-counted, so the decoder decodes on into other buffers of its pool
/// meanwhile, and the buffer returns to the pool on [`HeldPicture::release`]. The frame
/// structure itself is kept from picture to picture, so holding allocates nothing.
pub(super) struct HeldPicture {
    pic: ff::frame::Video,
    /// Index, width and height of the picture held; None when none is.
    at: Option<(u64, u32, u32)>,
    /// The decoder flagged the picture held as damaged.
    damaged: bool,
}

impl HeldPicture {
    pub(super) fn new() -> HeldPicture {
        HeldPicture {
            pic: ff::frame::Video::empty(),
            at: None,
            damaged: false,
        }
    }

    /// Takes over `from`'s picture (leaving `from` blank for the decoder's next one), whose
    /// 8-bit luma rows must be packed.
    fn hold(&mut self, from: &mut ff::frame::Video, at: (u64, u32, u32), damaged: bool) {
        self.release();
        // SAFETY: both wrap valid AVFrames; `self.pic` holds no reference (released above),
        // as av_frame_move_ref requires, and `from` is left blank.
        unsafe { ff::ffi::av_frame_move_ref(self.pic.as_mut_ptr(), from.as_mut_ptr()) };
        self.at = Some(at);
        self.damaged = damaged;
    }

    /// The picture's luma, when one is held.
    pub(super) fn view(&self) -> Option<FrameRef<'_>> {
        let (index, width, height) = self.at?;
        let n = width as usize * height as usize;
        Some(FrameRef {
            index,
            width,
            height,
            bit_depth: 8,
            luma: LumaRef::U8(self.pic.data(0).get(..n)?),
            chroma: chroma_of(&self.pic, width, height),
            damaged: self.damaged,
        })
    }

    /// Gives the picture back (its buffer returns to the decoder's pool).
    pub(super) fn release(&mut self) {
        if self.at.take().is_some() {
            // SAFETY: `self.pic` wraps a valid AVFrame; unref leaves it blank.
            unsafe { ff::ffi::av_frame_unref(self.pic.as_mut_ptr()) };
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn plans_for_common_formats() {
        assert_eq!(
            plan_for(Pixel::YUV420P),
            LumaPlan::Direct8 { offset: 0, step: 1 }
        );
        assert_eq!(
            plan_for(Pixel::GRAY8),
            LumaPlan::Direct8 { offset: 0, step: 1 }
        );
        assert_eq!(
            plan_for(Pixel::NV12),
            LumaPlan::Direct8 { offset: 0, step: 1 }
        );
        assert_eq!(
            plan_for(Pixel::YUYV422),
            LumaPlan::Direct8 { offset: 0, step: 2 }
        );
        assert_eq!(
            plan_for(Pixel::UYVY422),
            LumaPlan::Direct8 { offset: 1, step: 2 }
        );
        assert_eq!(
            plan_for(Pixel::YUV420P10LE),
            LumaPlan::Direct16 { depth: 10 }
        );
        assert_eq!(plan_for(Pixel::GRAY16LE), LumaPlan::Direct16 { depth: 16 });
        assert_eq!(plan_for(Pixel::RGB24), LumaPlan::Scale { deep: false });
        assert_eq!(plan_for(Pixel::BGRZ), LumaPlan::Scale { deep: false });
        assert_eq!(plan_for(Pixel::PAL8), LumaPlan::Scale { deep: false });
        assert_eq!(plan_for(Pixel::RGB48LE), LumaPlan::Scale { deep: true });
        assert_eq!(plan_for(Pixel::GRAY16BE), LumaPlan::Scale { deep: true });
        // P010 keeps its 10 bits in the high end of each word: needs conversion.
        assert_eq!(plan_for(Pixel::P010LE), LumaPlan::Scale { deep: true });
    }

    #[test]
    fn bottom_up_pictures_are_recognised() {
        let mut pic = ff::frame::Video::new(Pixel::GRAY8, 8, 4);
        assert!(!bottom_up(&pic));
        // SAFETY: flips the sign of a plain field of a valid AVFrame and flips it back before
        // the frame is used or freed (freeing goes by its buffer references, not the stride).
        unsafe { (*pic.as_mut_ptr()).linesize[0] *= -1 };
        assert!(bottom_up(&pic));
        // SAFETY: as above.
        unsafe { (*pic.as_mut_ptr()).linesize[0] *= -1 };
        assert!(!bottom_up(&pic));
    }

    fn pattern(i: u64, w: u32, h: u32) -> Frame {
        let data = (0..w * h)
            .map(|p| (((p % w) * 5 + (p / w) * 3 + i as u32 * 11) % 251) as u8)
            .collect();
        Frame::from_u8(i, w, h, data)
    }

    fn decode_all(path: &Path) -> (ClipInfo, Vec<Frame>) {
        let mut src = VideoSource::open(path).unwrap();
        let mut f = Frame::empty();
        let mut out = Vec::new();
        while src.read_into(&mut f).unwrap() {
            out.push(f.clone());
        }
        (src.info().clone(), out)
    }

    #[test]
    fn rgb_video_goes_through_swscale_to_the_same_grey() {
        use crate::encode::ClipWriter;
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("rgb.mkv");
        let mut w = ClipWriter::create_rgb_for_tests(&p, 33, 20).unwrap();
        let input: Vec<Frame> = (0..5).map(|i| pattern(i, 33, 20)).collect();
        for f in &input {
            w.write(f).unwrap();
        }
        w.finish().unwrap();
        let (info, frames) = decode_all(&p);
        assert_eq!(info.codec, "png");
        assert_eq!(
            (info.frames, info.width, info.height, info.bit_depth),
            (5, 33, 20, 8)
        );
        assert_eq!(frames.len(), 5);
        for (a, b) in input.iter().zip(&frames) {
            let (Luma::U8(x), Luma::U8(y)) = (&a.luma, &b.luma) else {
                panic!("8-bit expected");
            };
            // R = G = B = v must come back as v (swscale rounding allows 1).
            let worst = x.iter().zip(y).map(|(&p, &q)| p.abs_diff(q)).max().unwrap();
            assert!(worst <= 1, "frame {}: worst difference {worst}", a.index);
        }
    }

    #[test]
    fn odd_sizes_and_strides_copy_exactly() {
        use crate::encode::{ClipWriter, Codec};
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("odd.mkv");
        // 37 px rows are padded to a larger stride inside FFmpeg.
        let mut w = ClipWriter::create(&p, Codec::Ffv1, 37, 11, 30.0).unwrap();
        let input: Vec<Frame> = (0..4).map(|i| pattern(i, 37, 11)).collect();
        for f in &input {
            w.write(f).unwrap();
        }
        w.finish().unwrap();
        let (_, frames) = decode_all(&p);
        assert_eq!(frames, input);
    }

    /// Every frame `read_slot` gives, as owned frames, and whether each one was the decoder's
    /// own picture held in place (no copy).
    fn read_all_slots(path: &Path) -> (Vec<Frame>, bool) {
        let mut src = VideoSource::open(path).unwrap();
        let mut slot = Slot::new();
        let (mut out, mut held) = (Vec::new(), true);
        while src.read_slot(&mut slot).unwrap() {
            let f = slot.view();
            let LumaRef::U8(d) = f.luma else {
                panic!("8-bit expected")
            };
            out.push(Frame::from_u8(f.index, f.width, f.height, d.to_vec()));
            held &= slot.holds_picture();
        }
        (out, held)
    }

    fn write_clip(p: &Path, w: u32, h: u32, frames: u64) -> Vec<Frame> {
        use crate::encode::{ClipWriter, Codec};
        let mut wr = ClipWriter::create(p, Codec::Ffv1, w, h, 30.0).unwrap();
        let input: Vec<Frame> = (0..frames).map(|i| pattern(i, w, h)).collect();
        for f in &input {
            wr.write(f).unwrap();
        }
        wr.finish().unwrap();
        input
    }

    #[test]
    fn slots_hold_packed_pictures_in_place_and_copy_the_rest() {
        let dir = tempfile::tempdir().unwrap();
        // 64 px rows are packed in FFmpeg's pictures; 37 px rows are padded to a larger stride.
        for (w, h, in_place) in [(64, 12, true), (37, 11, false)] {
            let p = dir.path().join(format!("v{w}.mkv"));
            let input = write_clip(&p, w, h, 5);
            let (read, held) = read_all_slots(&p);
            assert_eq!(read, input, "{w}x{h}");
            assert_eq!(held, in_place, "{w}x{h}: held in place");
            assert_eq!(decode_all(&p).1, input, "{w}x{h}: read_into");
        }
        // Packed RGB goes through swscale into the slot's own frame.
        let p = dir.path().join("rgb.mkv");
        let mut wr = crate::encode::ClipWriter::create_rgb_for_tests(&p, 32, 8).unwrap();
        for i in 0..3 {
            wr.write(&pattern(i, 32, 8)).unwrap();
        }
        wr.finish().unwrap();
        let (read, held) = read_all_slots(&p);
        assert!(!held);
        assert_eq!(read, decode_all(&p).1);
    }

    #[test]
    fn held_pictures_stay_intact_while_the_decoder_goes_on() {
        // Pictures are held by reference while later ones are decoded (as the queue to the
        // tracker holds them): each must still show its own frame, also once released and
        // refilled in turn.
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("held.mkv");
        let input = write_clip(&p, 64, 12, 12);
        let mut src = VideoSource::open(&p).unwrap();
        let mut slots: Vec<Slot> = (0..5).map(|_| Slot::new()).collect();
        let mut seen = 0;
        for round in 0..3 {
            for slot in &mut slots {
                if src.read_slot(slot).unwrap() {
                    assert!(slot.holds_picture());
                    seen += 1;
                } else {
                    assert!(!slot.holds_picture(), "an ended read leaves the slot empty");
                }
            }
            for (i, slot) in slots.iter().enumerate().filter(|(_, s)| s.holds_picture()) {
                let f = slot.view();
                let LumaRef::U8(d) = f.luma else {
                    panic!("8-bit expected")
                };
                assert_eq!(f.index, (round * 5 + i) as u64);
                let Luma::U8(want) = &input[f.index as usize].luma else {
                    unreachable!()
                };
                assert_eq!(d, &want[..], "frame {}", f.index);
            }
        }
        assert_eq!(seen, 12);
    }

    #[test]
    fn variable_frame_rate_keeps_each_frames_time_and_frames_still_count() {
        use crate::encode::{ClipWriter, Codec};
        let dir = tempfile::tempdir().unwrap();
        for ext in ["mkv", "mov"] {
            let p = dir.path().join(format!("vfr.{ext}"));
            let mut w = ClipWriter::create(&p, Codec::Ffv1, 16, 16, 30.0).unwrap();
            for i in 0..20 {
                if i == 10 {
                    w.skip_to_pts(40); // a 30-frame hole in the timestamps
                }
                w.write(&pattern(i, 16, 16)).unwrap();
            }
            w.finish().unwrap();
            let (info, frames) = decode_all(&p);
            assert_eq!((info.frames, frames.len()), (20, 20), ".{ext}");
            // Presentation times carry the hole: frame 10 is at 40 ticks of 1/30 s.
            let t = info
                .frame_times
                .as_ref()
                .expect("timestamps")
                .times_s
                .clone();
            assert_eq!(t.len(), 20, ".{ext}");
            assert!((t[9] - 9.0 / 30.0).abs() < 2e-3, ".{ext}: {t:?}");
            assert!((t[10] - 40.0 / 30.0).abs() < 2e-3, ".{ext}: {t:?}");
            let e = info.frame_times.as_ref().unwrap().evenness().unwrap();
            assert!(e.uneven() && e.worst_at == 10, ".{ext}: {e:?}");
            // Indices still count decoded frames, whatever the timestamps say.
            assert_eq!(frames[10].index, 10);
            assert_eq!(frames[10], pattern(10, 16, 16));
        }
    }

    #[test]
    fn a_display_rotation_turns_frames_to_the_displayed_picture() {
        use crate::encode::{ClipWriter, Codec};
        let dir = tempfile::tempdir().unwrap();
        for rot in [90u32, 180, 270] {
            let p = dir.path().join(format!("turned{rot}.mov"));
            // Stored 16 × 8, one bright pixel at stored (1, 0).
            let mut d = vec![0u8; 16 * 8];
            d[1] = 255;
            let mut w = ClipWriter::create_rotated(&p, Codec::Ffv1, 16, 8, 30.0, rot).unwrap();
            w.write(&Frame::from_u8(0, 16, 8, d.clone())).unwrap();
            w.finish().unwrap();
            let (info, frames) = decode_all(&p);
            assert_eq!(info.display_rotation_deg, rot);
            let want = crate::decode::rotate::rotate_plane(&d, 16, 8, rot);
            let (ww, wh) = if rot == 180 { (16, 8) } else { (8, 16) };
            assert_eq!((info.width, info.height), (ww, wh));
            assert_eq!(frames[0].luma, Luma::U8(want), "{rot}");
        }
    }
}
