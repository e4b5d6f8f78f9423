//! The end of a clip's tracking: side marks settled, damaged frames put back as nulls, each
//! radial mark's angles refined for an offset pivot and made relative to the first frame,
//! the physics self-checks, and the warnings for lost marks, damaged frames and unregistered
//! shake. Part of the track stage: it must never import segment, mechanics, report,
//! `analyze`, `batch` or the CLI.

use crate::units::{Angle, TimeBase};
use crate::warning::Warning;

use super::unwrap::wrap_pi;
use super::{
    MarkTrack, Reader, Trace, Tracker, refine, selfcheck, side, stripe_identity, texture, unwrap,
};

impl Tracker {
    /// Unwraps the angles and returns the trace, with warnings for lost marks.
    pub fn finish(mut self, time_base: TimeBase) -> (Trace, Vec<Warning>) {
        let mut warnings = side::settle(&mut self.drive);
        warnings.extend(side::settle(&mut self.nut));
        // A side mark's clip reading covers the frames it kept; damaged frames are null.
        for t in [&mut self.drive, &mut self.nut] {
            if t.is_side() && !self.damaged.is_empty() {
                reinsert_damaged(t, &self.frames, &self.damaged);
            }
        }
        let rel = |t: &MarkTrack,
                   notes: &mut Vec<Warning>|
         -> (Vec<Option<Angle>>, Option<Angle>) {
            let Reader::Radial(radial) = &t.reader else {
                return side::relative(t);
            };
            let (refined, outcome) = refine::refine(&t.angle, &t.dir_offset);
            if outcome == refine::Outcome::NotSignificant {
                notes.push(Warning::Note(format!(
                    "the {} mark's pivot could not be refined from its stripe (the stripe's direction is too scattered over this clip to tell a pivot error from noise, recesses, glints or rims); the rig's pivot is kept, so check it is exact",
                    t.role.name()
                )));
            }
            if outcome == refine::Outcome::Implausible {
                notes.push(Warning::Note(format!(
                    "the {} mark's pivot was not refined: its stripe's direction over this clip asks for a pivot correction that would change its angles by more than 10 % of each turn, more than any pivot error makes (the stripe was likely read on another feature in some frames); the rig's pivot is kept, so check it against the first frame",
                    t.role.name()
                )));
            }
            let zero = refined.first().copied().flatten();
            let v = refined
                .iter()
                .map(|a| Some(Angle::from_rad(t.sign * (a.as_ref()? - zero?))))
                .collect();
            // For overlays drawn about the rig's pivot: the first frame's raw angle about it.
            let screen = t
                .angle
                .first()
                .copied()
                .flatten()
                .map(|z| Angle::from_rad(wrap_pi(radial.grid().screen_angle(z))));
            (v, screen)
        };
        // A radial stripe whose line lies askew of the first frames' is another feature
        // (`stripe_identity.rs`): those frames are null, with the reason, before the pivot
        // refinement sees them.
        let mut lagged: Vec<Warning> = Vec::new();
        // Clip frame index of a trace index.
        let frame = |i: usize| self.frames.get(i).copied().unwrap_or(i as u64);
        for t in [&mut self.drive, &mut self.nut] {
            if !matches!(t.reader, Reader::Radial(_)) {
                continue;
            }
            for (from, to, skew_deg) in stripe_identity::askew_runs(&t.dir_offset) {
                t.null_frames(from, to);
                lagged.push(Warning::StripeAskew {
                    mark: t.role.name().into(),
                    first_frame: frame(from),
                    last_frame: frame(to),
                    skew_deg,
                });
            }
        }
        // A colour track behind its own part's texture at rest is not a measurement there
        // (`texture.rs`): those frames are null, with the reason (not as lost marks).
        for t in [&mut self.drive, &mut self.nut] {
            let Some(tex) = t.texture.take() else {
                continue;
            };
            for (from, to, lag_deg) in texture::lagging_runs(&tex.checks, &t.angle) {
                t.null_frames(from, to);
                lagged.push(Warning::ColourLagsTexture {
                    mark: t.role.name().into(),
                    first_frame: frame(from),
                    last_frame: frame(to),
                    lag_deg,
                });
            }
        }
        for t in [&self.drive, &self.nut] {
            if let Some(c) = &t.colour {
                warnings.push(Warning::Note(format!(
                    "{} mark tracked on colour: its paint differs from the metal more in colour than in brightness (Fisher separation {:.0} with colour, {:.0} on luma alone)",
                    t.role.name(),
                    c.separation.0,
                    c.separation.1
                )));
            }
            if let Reader::Radial(radial) = &t.reader
                && let (fixed @ 1.., frames) = radial.static_features()
            {
                warnings.push(Warning::Note(format!(
                    "{} mark: {fixed} feature{} in its annulus did not turn with the part (a lamp's glint, a washer's edge or the background beyond the part); in {frames} frames the rings that cross one were left out of its angle, so those angles rest on fewer rings. Moving the lamp keeps a glint off the stripe's path",
                    t.role.name(),
                    if fixed == 1 { "" } else { "s" },
                )));
            }
            for (first_frame, last_frame) in unwrap::lost_runs(&t.angle, &self.frames) {
                warnings.push(Warning::MarkLost {
                    mark: t.role.name().into(),
                    first_frame,
                    last_frame,
                });
            }
        }
        if let (Some(&first_frame), Some(&last_frame)) = (self.damaged.first(), self.damaged.last())
        {
            warnings.push(Warning::DamagedFrames {
                count: self.damaged.len() as u64,
                first_frame,
                last_frame,
            });
        }
        warnings.append(&mut lagged);
        warnings.append(&mut self.shake_notes);
        for (first_frame, last_frame) in unwrap::lost_runs(&self.shake_lost, &self.frames) {
            warnings.push(Warning::ShakeUnregistered {
                first_frame,
                last_frame,
            });
        }
        if let Some(reason) = self.fixed_unread.take() {
            let roll_cancels =
                !self.drive.is_side() && !self.nut.is_side() && self.drive.sign == self.nut.sign;
            warnings.push(Warning::FixedMarkUnread {
                reason,
                roll_cancels,
            });
        }
        let (mut drive, drive_zero_screen) = rel(&self.drive, &mut warnings);
        let (mut nut, nut_zero_screen) = rel(&self.nut, &mut warnings);
        // Self-checks: frames whose angles break the rig's physics are null (`selfcheck.rs`).
        warnings.extend(selfcheck::physics(&mut drive, &mut nut, &self.frames));
        let (mut drive_confidence, mut nut_confidence) =
            (self.drive.confidence, self.nut.confidence);
        for (a, c) in drive
            .iter()
            .zip(drive_confidence.iter_mut())
            .chain(nut.iter().zip(nut_confidence.iter_mut()))
        {
            if a.is_none() {
                *c = 0.0;
            }
        }
        (
            Trace {
                time_base,
                times_s: Vec::new(),
                synthetic: Vec::new(),
                frames: self.frames,
                drive,
                nut,
                drive_confidence,
                nut_confidence,
                drive_zero_screen,
                nut_zero_screen,
            },
            warnings,
        )
    }
}

/// Spreads a side mark's series, read over the frames it kept, back over the whole clip with
/// a null (confidence 0) at every damaged frame.
fn reinsert_damaged(t: &mut MarkTrack, frames: &[u64], damaged: &[u64]) {
    let (mut angle, mut confidence) = (t.angle.drain(..), t.confidence.drain(..));
    let mut a = Vec::with_capacity(frames.len());
    let mut c = Vec::with_capacity(frames.len());
    for f in frames {
        if damaged.binary_search(f).is_ok() {
            a.push(None);
            c.push(0.0);
        } else {
            a.push(angle.next().flatten());
            c.push(confidence.next().unwrap_or(0.0));
        }
    }
    drop((angle, confidence));
    t.angle = a;
    t.confidence = c;
    t.dir_offset = vec![None; frames.len()];
}
