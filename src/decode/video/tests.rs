//! Tests of the video reader: pixel-format plans, every codec and container against a full
//! decode, damaged and rotated clips (clips written by the test bench's clip writer).
//!
//! Tests of part of the decode stage: it must never import track, segment, mechanics, report,
//! `analyze`, `batch`, `find_marks`, `calibrate` or the CLI.

use super::*;
use crate::decode::LumaRef;

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
