//! Opening a clip for writing: checks the container, codec, frame size, depth and rate, picks
//! the pixel format, and sets up the muxer and the encoder for bit-exact, single-threaded
//! output (the module doc of [`super`] lists the formats).

use std::path::Path;

use ff::codec::{self, encoder};
use ff::format::Pixel;
use ff::{Dictionary, Rational};
use ffmpeg_next as ff;

use super::{ClipWriter, Codec, Layout, Options};
use crate::decode::ffmpeg_init;
use crate::{Error, Result};

impl ClipWriter {
    /// The one constructor behind the public ones.
    pub(super) fn create_inner(
        path: &Path,
        codec: Codec,
        [width, height]: [u32; 2],
        fps_hz: f64,
        opts: Options,
    ) -> Result<Self> {
        let Options {
            bit_depth,
            layout,
            rotation_cw_deg,
            tick_hz,
        } = opts;
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
