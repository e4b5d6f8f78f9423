//! One mark measured in one frame: the mark's grid moved to where the camera's pose takes its
//! pivot, read on luma or on its learnt colour projection, the camera's roll taken off, and
//! the stripe's direction offset and rolling-shutter readout kept for later. Part of the
//! track stage: it must never import segment, mechanics, report, `analyze`, `batch` or the
//! CLI.

use crate::decode::FrameRef;
use crate::error::{Error, Result};

use super::shake::Pose;
use super::{MarkTrack, Reader, colour, refine, rolling, side, texture};

/// Measures one mark in one frame, appending to its series; returns the raw angle. The mark's
/// grid is moved to where the camera `pose` takes its pivot, and a radial mark's angle has the
/// camera's roll taken off.
pub(super) fn measure(
    t: &mut MarkTrack,
    frame: FrameRef<'_>,
    pose: Pose,
    first: bool,
) -> Result<Option<f64>> {
    let radial = match &mut t.reader {
        Reader::Radial(r) => r,
        Reader::Side(s) => {
            let shift = pose.shift_at(s.centre());
            return side::measure(t, frame, shift, first);
        }
    };
    let shift = pose.shift_at(radial.grid().geometry().0);
    if first && frame.chroma.is_some() {
        t.colour = colour::ColourProjection::learn(frame, radial.grid(), shift);
    }
    let colour = &mut t.colour;
    let m = if first {
        let on_colour = match colour.as_mut() {
            Some(c) => {
                radial.set_colour(Some(c.weights));
                radial.init(frame, shift).ok()
            }
            None => None,
        };
        match on_colour {
            Some(m) => Some(m),
            None => {
                // No colour, or the projection did not show a stripe: the luma path.
                *colour = None;
                radial.set_colour(None);
                Some(radial.init(frame, shift).map_err(|reason| Error::Mark {
                    mark: t.role.name().into(),
                    reason: format!("frame {}: {reason}", frame.index),
                })?)
            }
        }
    } else {
        radial.measure(frame, shift)
    };
    // A colour track is checked against its part's luma texture (`texture.rs`).
    if t.colour.is_some()
        && let Some(m) = m
    {
        if first {
            t.texture = texture::TextureCheck::learn(frame, radial.grid(), shift, m.angle);
        } else if let Some(tex) = t.texture.as_mut() {
            tex.check(t.angle.len(), frame, radial.grid(), shift, m.angle);
        }
    }
    t.angle.push(m.map(|m| m.angle - pose.roll));
    t.confidence.push(m.map_or(0.0, |m| m.confidence));
    t.dir_offset.push(
        m.and_then(|m| refine::direction_offset(m.angle, radial.rings(), &radial.grid().radius)),
    );
    if first {
        // Each ring's reading at rest in the first frame: later shears are measured from it.
        t.ring_ref = radial
            .rings()
            .iter()
            .map(|&(rel, w)| if w > 0.0 { f64::from(rel) } else { f64::NAN })
            .collect();
    }
    t.row.push(m.and_then(|m| {
        rolling::readout_row(
            radial.grid(),
            m.angle,
            radial.rings(),
            &t.ring_ref,
            shift,
            frame.height,
        )
    }));
    Ok(m.map(|m| m.angle))
}
