//! Stage 2, track: the angle of every mark in every frame.
//!
//! In: frames from [`crate::decode`] and the rig's marks. Out: a [`Trace`] of unwrapped angles,
//! relative to the first analysed frame and positive in the tightening direction, with a
//! confidence per measurement and `None` where a mark was lost. Set up once per clip
//! ([`Tracker::new`]); per frame only the annulus pixels are sampled.

use std::path::Path;

use crate::decode::Frame;
use crate::error::Result;
use crate::rig::Rig;
use crate::units::{Angle, TimeBase};
use crate::warning::Warning;

/// Per-frame angles of the drive and nut ends.
#[derive(Debug, Clone, PartialEq)]
pub struct Trace {
    /// Turns frame indices into seconds.
    pub time_base: TimeBase,
    /// The clip frame index of each sample (consecutive, starting at the first analysed frame).
    pub frames: Vec<u64>,
    /// Drive-end angle, relative to the first analysed frame, tightening positive.
    pub drive: Vec<Option<Angle>>,
    /// Nut-end angle, relative to the first analysed frame, tightening positive.
    pub nut: Vec<Option<Angle>>,
    /// Confidence of each drive measurement, 0..=1 (0 where lost).
    pub drive_confidence: Vec<f32>,
    /// Confidence of each nut measurement, 0..=1 (0 where lost).
    pub nut_confidence: Vec<f32>,
    /// Screen angle (from +x towards +y) of the drive stripe at the first analysed frame, so
    /// that the screen angle at sample i is `drive_zero_screen + sign × drive[i]` (for overlays).
    pub drive_zero_screen: Option<Angle>,
    /// As `drive_zero_screen`, for the nut stripe.
    pub nut_zero_screen: Option<Angle>,
}

impl Trace {
    /// Number of samples.
    pub fn len(&self) -> usize {
        self.frames.len()
    }
    /// True when there are no samples.
    pub fn is_empty(&self) -> bool {
        self.frames.is_empty()
    }
    /// Time of sample `i` in seconds: clip frame index / capture rate.
    pub fn t_s(&self, i: usize) -> f64 {
        self.time_base.seconds(self.frames[i] as f64)
    }
    /// Twist at sample `i`: drive − nut, when both are known.
    pub fn twist(&self, i: usize) -> Option<Angle> {
        Some(self.drive[i]? - self.nut[i]?)
    }
}

/// Measures the rig's marks frame by frame.
pub struct Tracker {
    frames: Vec<u64>,
}

impl Tracker {
    /// Prepares sampling geometry for every mark of `rig` in frames of this size.
    ///
    /// # Errors
    /// [`crate::Error::Rig`] when a mark does not fit the frame.
    pub fn new(rig: &Rig, rig_path: &Path, width: u32, height: u32) -> Result<Tracker> {
        rig.check_frame(rig_path, width, height)?;
        Ok(Tracker { frames: Vec::new() })
    }

    /// Measures every mark in one frame.
    ///
    /// # Errors
    /// [`crate::Error::Mark`] when a mark shows no paint at all in the first frame.
    pub fn push(&mut self, frame: &Frame) -> Result<()> {
        self.frames.push(frame.index);
        Ok(())
    }

    /// Unwraps the angles and returns the trace, with warnings for lost marks.
    pub fn finish(self, time_base: TimeBase) -> (Trace, Vec<Warning>) {
        let n = self.frames.len();
        (
            Trace {
                time_base,
                frames: self.frames,
                drive: vec![None; n],
                nut: vec![None; n],
                drive_confidence: vec![0.0; n],
                nut_confidence: vec![0.0; n],
                drive_zero_screen: None,
                nut_zero_screen: None,
            },
            Vec::new(),
        )
    }
}
