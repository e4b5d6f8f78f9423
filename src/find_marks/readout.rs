//! A rolling shutter's readout time suggested from the footage: the drafted rig's marks are
//! tracked over the frames `find-marks` read, and the readout is estimated from how the
//! stripes shear across their rings while they turn (`track::rolling::estimate_readout`).
//! Offered for clips timed by the camera's own clock (no capture rate given), as a phone's are.
//!
//! Part of the `find-marks` command (built on decode and track, writing through report): it
//! must never import segment, mechanics, `analyze`, `batch` or the CLI.

use crate::decode::Frame;
use crate::error::Result;
use crate::rig::Rig;
use crate::track::Tracker;
use crate::units::TimeBase;

/// The readout estimate and its 95 % interval, s, from `frames` at `fps_hz` tracked with
/// `rig`; None when the rig cannot be tracked on them or the clip does not show a readout.
///
/// # Errors
/// Only a frame that cannot be read ([`crate::Error`] from `frames`).
pub(super) fn suggest(
    rig: &Rig,
    frames: impl Iterator<Item = Result<Frame>>,
    fps_hz: f64,
    size: (u32, u32),
) -> Result<Option<(f64, (f64, f64))>> {
    let (Ok(time_base), Ok(mut tracker)) = (
        TimeBase::from_fps(fps_hz, "the clip's frame rate"),
        Tracker::new(rig, std::path::Path::new("the draft rig"), size.0, size.1),
    ) else {
        return Ok(None);
    };
    for f in frames {
        if tracker.push(&f?).is_err() {
            return Ok(None);
        }
    }
    let rows = tracker.readout_rows();
    let (trace, _) = tracker.finish(time_base);
    Ok(crate::track::rolling::estimate_readout(&trace, &rows))
}
