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
//!
//! Part of the decode stage: it must never import track, segment, mechanics, report, `analyze`,
//! `batch`, `find_marks`, `calibrate` or the CLI.

use std::path::{Path, PathBuf};

use ff::format::Pixel;
use ffmpeg_next as ff;

use super::{ClipInfo, ClipKind, Frame, FrameSource, Luma, Slot, ffmpeg_init};
use crate::error::{Error, Result};

mod open;
mod pixels;
#[cfg(test)]
mod tests;

use open::*;
pub(super) use pixels::HeldPicture;
use pixels::*;

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
