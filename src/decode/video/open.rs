//! Opening a video file with FFmpeg: the input (paths and descriptors), the frame count by
//! demuxing alone, the stream's properties (intra-only codec, display rotation) and FFmpeg's
//! errors as messages.
//!
//! Part of the decode stage: it must never import track, segment, mechanics, report, `analyze`,
//! `batch`, `find_marks`, `calibrate` or the CLI.

use std::path::Path;

use ff::packet::Ref as _;
use ffmpeg_next as ff;

use crate::error::{Error, Result};

/// True when every frame of a stream of codec `id` is a key frame (FFmpeg's codec descriptor
/// says intra-only), so a packet that cannot be decoded costs that frame alone.
pub(super) fn intra_only(id: ff::codec::Id) -> bool {
    // SAFETY: avcodec_descriptor_get returns a pointer to a static descriptor, or null.
    let d = unsafe { ff::ffi::avcodec_descriptor_get(id.into()) };
    // SAFETY: non-null descriptors point to FFmpeg's static, immutable table.
    !d.is_null() && unsafe { (*d).props } & ff::ffi::AV_CODEC_PROP_INTRA_ONLY != 0
}

/// True for a decoder error that no later packet can recover from (out of memory, an
/// unsupported feature, or a broken decoder), as opposed to damaged data in one packet.
pub(super) fn is_fatal(e: &ff::Error) -> bool {
    matches!(
        e,
        ff::Error::Other { errno } if *errno == ff::util::error::ENOMEM
    ) || matches!(
        e,
        ff::Error::PatchWelcome | ff::Error::Bug | ff::Error::Bug2
    )
}

/// The stream's display rotation, degrees clockwise (0 without a display matrix).
pub(super) fn display_rotation(stream: &ff::format::stream::Stream) -> u32 {
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
        crate::decode::rotate::clockwise_quarter_turns(ff::ffi::av_display_rotation_get(
            p as *const i32,
        ))
    }
}

/// The reason FFmpeg gives, for messages.
pub(super) fn ff_reason(e: &ff::Error) -> String {
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
pub(super) fn ff_address(path: &Path) -> Result<(String, Option<std::fs::File>)> {
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

pub(super) fn open_input(path: &Path) -> Result<ff::format::context::Input> {
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
pub(super) fn scan(path: &Path) -> Result<(usize, u64, Option<crate::decode::FrameTimes>)> {
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
