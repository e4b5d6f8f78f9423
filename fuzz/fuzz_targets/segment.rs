//! Fuzz target: the blow segmenter and per-blow metrics on an arbitrary trace. Each pair of
//! input bytes is one sample: drive and nut steps (signed, scaled) with 0x80 meaning "lost".
//! Blows must come out sorted, inside the trace, and every number finite or absent.
#![no_main]

use libfuzzer_sys::fuzz_target;
use twistmark::units::{Angle, TimeBase};
use twistmark::{Trace, mechanics, segment};

fuzz_target!(|data: &[u8]| {
    if data.len() < 3 {
        return;
    }
    // First byte picks a capture rate and a step scale.
    let fps = [500.0, 1000.0, 2000.0, 10000.0][usize::from(data[0] & 3)];
    let scale = [0.01, 0.1, 1.0, 10.0][usize::from((data[0] >> 2) & 3)];
    let body = &data[1..];
    let n = body.len() / 2;
    let (mut d, mut u) = (0.0f64, 0.0f64);
    let mut drive = Vec::with_capacity(n);
    let mut nut = Vec::with_capacity(n);
    for p in body.chunks_exact(2) {
        let step = |b: u8, acc: &mut f64| {
            if b == 0x80 {
                None
            } else {
                *acc += f64::from(b as i8) * scale;
                Some(Angle::from_deg(*acc))
            }
        };
        drive.push(step(p[0], &mut d));
        nut.push(step(p[1], &mut u));
    }
    let trace = Trace {
        time_base: TimeBase::from_fps(fps, "fuzz").expect("positive rate"),
        times_s: Vec::new(),
        synthetic: Vec::new(),
        frames: (0..n as u64).collect(),
        drive,
        nut,
        drive_confidence: vec![1.0; n],
        nut_confidence: vec![1.0; n],
        drive_zero_screen: None,
        nut_zero_screen: None,
    };
    let seg = segment::find_blows(&trace);
    let mut last_end = 0;
    for b in &seg.blows {
        assert!(
            b.onset < b.end && b.end <= n,
            "blow outside the trace: {b:?} of {n}"
        );
        assert!(b.onset >= last_end, "blows overlap or are out of order");
        if let Some(k) = b.nut_onset {
            assert!(k < n, "nut onset outside the trace");
        }
        last_end = b.end;
    }
    let bar = twistmark_scenes::synth::Scenario::preset("fast-tool").map(|s| s.bar);
    let (blows, summary, _warnings) = mechanics::blow_metrics(&trace, &seg, bar.as_ref());
    assert_eq!(blows.len(), seg.blows.len());
    assert_eq!(summary.blow_count, blows.len());
    let finite = |a: Option<Angle>| a.is_none_or(|a| a.deg().is_finite());
    for b in &blows {
        assert!(b.t_s.is_finite());
        assert!(finite(b.drive_advance) && finite(b.nut_advance));
        assert!(finite(b.peak_twist) && finite(b.residual_twist));
        assert!(b.peak_torque.is_none_or(|q| q.nm().is_finite()));
    }
});
