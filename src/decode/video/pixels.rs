//! Reading luma (and 8-bit chroma) out of FFmpeg's decoded pictures: how each pixel format's
//! Y plane is read, the row copies, bottom-up pictures, and a picture held in place.
//!
//! Part of the decode stage: it must never import track, segment, mechanics, report, `analyze`,
//! `batch`, `find_marks`, `calibrate` or the CLI.

use ff::format::Pixel;
use ffmpeg_next as ff;

use crate::decode::{Frame, FrameRef, Luma, LumaRef};

/// How the luma samples are taken out of a decoded picture.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(super) enum LumaPlan {
    /// 8-bit Y in plane 0: byte `offset + x * step` of each row.
    Direct8 { offset: usize, step: usize },
    /// 9- to 16-bit little-endian Y in plane 0, two bytes per sample, no shift.
    Direct16 { depth: u8 },
    /// No usable Y plane: convert with swscale to `gray` (deep = false) or `gray16le`.
    Scale { deep: bool },
}

impl LumaPlan {
    pub(in crate::decode) fn bit_depth(self) -> u8 {
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
pub(super) fn plan_for(pix: Pixel) -> LumaPlan {
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

/// True when any plane of `pic` has a negative line stride (stored bottom-up, as some decoders
/// give): ffmpeg-next's plane slices assume a positive stride, so such a picture must not be
/// read through them.
pub(super) fn bottom_up(pic: &ff::frame::Video) -> bool {
    // SAFETY: `pic` wraps a valid AVFrame; only its plain `data` and `linesize` fields are read.
    let f = unsafe { &*pic.as_ptr() };
    f.linesize
        .iter()
        .zip(&f.data)
        .any(|(&stride, plane)| !plane.is_null() && stride < 0)
}

/// The colour planes of an 8-bit planar 4:2:0 picture, borrowed in place (None for any other
/// format: grey, deeper or packed pictures are tracked on luma).
pub(super) fn chroma_of(
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

pub(super) fn copy_u8(
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
pub(super) fn copy_chroma(pic: &ff::frame::Video, w: u32, h: u32, frame: &mut Frame) {
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

pub(super) fn copy_u16(pic: &ff::frame::Video, w: usize, h: usize, frame: &mut Frame) {
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

/// A reference to one of the decoder's pictures, held past later decoder calls: FFmpeg's
/// pictures are reference-counted, so the decoder decodes on into other buffers of its pool
/// meanwhile, and the buffer returns to the pool on [`HeldPicture::release`]. The frame
/// structure itself is kept from picture to picture, so holding allocates nothing.
pub(in crate::decode) struct HeldPicture {
    pic: ff::frame::Video,
    /// Index, width and height of the picture held; None when none is.
    at: Option<(u64, u32, u32)>,
    /// The decoder flagged the picture held as damaged.
    damaged: bool,
}

impl HeldPicture {
    pub(in crate::decode) fn new() -> HeldPicture {
        HeldPicture {
            pic: ff::frame::Video::empty(),
            at: None,
            damaged: false,
        }
    }

    /// Takes over `from`'s picture (leaving `from` blank for the decoder's next one), whose
    /// 8-bit luma rows must be packed.
    pub(super) fn hold(&mut self, from: &mut ff::frame::Video, at: (u64, u32, u32), damaged: bool) {
        self.release();
        // SAFETY: both wrap valid AVFrames; `self.pic` holds no reference (released above),
        // as av_frame_move_ref requires, and `from` is left blank.
        unsafe { ff::ffi::av_frame_move_ref(self.pic.as_mut_ptr(), from.as_mut_ptr()) };
        self.at = Some(at);
        self.damaged = damaged;
    }

    /// The picture's luma, when one is held.
    pub(in crate::decode) fn view(&self) -> Option<FrameRef<'_>> {
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
    pub(in crate::decode) fn release(&mut self) {
        if self.at.take().is_some() {
            // SAFETY: `self.pic` wraps a valid AVFrame; unref leaves it blank.
            unsafe { ff::ffi::av_frame_unref(self.pic.as_mut_ptr()) };
        }
    }
}
