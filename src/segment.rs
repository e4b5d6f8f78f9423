//! Stage 3, segment: splits the motion into impact blows.
//!
//! In: a [`Trace`]. Out: the onset sample of every blow (the first sample of the drive end's
//! rapid advance after an impact), the nut end's onset within each blow, and the blow rate.

use crate::track::Trace;
use crate::warning::Warning;

/// One blow, as sample indices into the trace.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Blow {
    /// First sample of the drive end's rapid advance.
    pub onset: usize,
    /// One past the last sample of this blow: the next blow's onset, or the trace length.
    pub end: usize,
    /// First sample of the nut end's advance within the blow, if it moved.
    pub nut_onset: Option<usize>,
}

/// Blows found in a trace and the blow rate.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Segmentation {
    /// Blows in time order, non-overlapping.
    pub blows: Vec<Blow>,
    /// Median blow rate, blows per minute (None with fewer than two blows).
    pub rate_per_min: Option<f64>,
    /// Spread of the blow rate (standard deviation of per-interval rates), blows per minute.
    pub rate_spread_per_min: Option<f64>,
    /// Data-quality notes.
    pub warnings: Vec<Warning>,
}

/// Finds the blows in a trace from the drive end's motion.
pub fn find_blows(trace: &Trace) -> Segmentation {
    let _ = trace;
    Segmentation::default()
}
