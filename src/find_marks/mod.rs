//! Finds the painted marks in a clip and drafts a rig: each stripe's pivot (where its lines
//! across frames meet), its annulus, its role from its motion, its tightening direction, and an
//! oblique disc's ellipse from the disc's outline where the outline is visible.
//!
//! # Method
//!
//! 1. **Stripes.** A painted stripe is a *ridge*: brighter (or darker) than the surface on
//!    *both* sides. Per pixel and for eight directions the response is
//!    `min(I(p) − I(p + d·n), I(p) − I(p − d·n))` with `d` = [`RIDGE_OFFSET_PX`]: a step edge
//!    (the hex nut's outline, a bracket's border) has one side equal to the centre and scores
//!    zero, and a round highlight is rejected afterwards because its component is not elongated.
//!    Components are grown by hysteresis and kept when long and thin (weighted second moments,
//!    Hu 1962; facts.md §7.1).
//! 2. **Tracks.** Each first-frame stripe is followed frame by frame inside a window around
//!    its last position; its orientation is unwrapped modulo π.
//! 3. **Pivot.** A radial stripe's centre line passes through its pivot, so the pivot is the
//!    least-squares intersection of the track's lines: minimise Σ (nₜ·(p − cₜ))² over all
//!    frames (nₜ the line normal, cₜ the centroid). It is only defined when the stripe turned;
//!    below [`MIN_SPAN_DEG`] the pivot is not decided and a warning says so.
//! 4. **Roles.** A stripe that never turns is the fixed mark; of the turning stripes, the one
//!    with the most back-and-forth travel (total variation) is the drive end, the next the nut.
//! 5. **Tightening.** The drive end's fast steps (the blows) run the tightening way: the sign
//!    of Σ Δθ·|Δθ|² over the drive's frame steps. The nut end's net advance gives its own.
//! 6. **Ellipse.** Rays from the pivot find the disc's outline (the strongest luma step
//!    beyond the stripe); a centred conic `A x² + B xy + C y² = 1` chosen by consensus over
//!    fixed triples of those points, then fitted by trimmed least squares, gives the axes
//!    (eigenvalues) and the major-axis direction (eigenvector). It is used only when the fit
//!    is tight (RMS ≤ 1.2 % of the major axis); a hexagon does not fit.
//!
//! At most the first [`MAX_FRAMES`] frames are read.

use std::path::Path;

use crate::decode::{self, Frame};
use crate::error::{Error, Result};
use crate::rig::{Mark, Marks, RIG_VERSION, RadialMark, Rig, Role, Spin};
use crate::warning::Warning;

mod draft;
mod ellipse;
mod luma;
mod outputs;
mod preview;
mod ridge;
mod stripes;

pub use outputs::{check_outputs, write_atomic};
pub use preview::write_preview;
pub use ridge::RIDGE_OFFSET_PX;

use draft::{fixed_from, radial_from, unsure};
use luma::Img;
use ridge::detect;
use stripes::Track;

/// Below this turn over the clip a stripe's pivot is not decided from its motion, degrees.
pub const MIN_SPAN_DEG: f64 = 4.0;
/// A stripe that turns less than this over the clip is taken as fixed, degrees (the jitter of
/// a short stripe's orientation under noise and flicker stays below it).
const STILL_DEG: f64 = 2.0;
/// A radial stripe's lines over the clip pass within this RMS distance of their
/// intersection, px; a track whose lines do not meet is not a radial stripe.
const MAX_LINE_RMS_PX: f64 = 1.5;

/// Frames read at most (the first ones of the clip).
pub const MAX_FRAMES: u64 = 1500;
/// The annulus is the stripe's span trimmed by this much at the inner and outer ends, px
/// (as the project's exact rigs are drawn).
/// The ridge component reaches about 1.5 px past each painted end (the 3×3 smoothing), so
/// that is added to the trims.
pub(crate) const TRIM_INNER_PX: f64 = 4.0 + 1.5;
pub(crate) const TRIM_OUTER_PX: f64 = 2.0 + 1.5;

/// Options of [`find_marks`].
#[derive(Debug, Clone, Default)]
pub struct FindMarksOptions {
    /// The camera's capture rate, written into the draft rig as `capture_fps_hz`.
    pub fps_hz: Option<f64>,
}

/// How a mark's pivot was decided.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum PivotFrom {
    /// Intersection of the stripe's lines over the clip.
    Lines,
    /// Not decided from motion: placed at the stripe's end (fixed marks, or too little turn).
    StripeEnd,
}

/// One mark found in the clip.
#[derive(Debug, Clone, PartialEq)]
pub struct FoundMark {
    /// The role given to it (None: a stripe that was not used).
    pub role: Option<Role>,
    /// The drafted rig mark.
    pub mark: RadialMark,
    /// How the pivot was decided.
    pub pivot_from: PivotFrom,
    /// Net turn over the clip on screen, degrees (clockwise positive).
    pub net_deg: f64,
    /// Total back-and-forth travel over the clip, degrees.
    pub travel_deg: f64,
    /// True when the paint is darker than the surface around it.
    pub dark: bool,
}

/// What [`find_marks`] found.
#[derive(Debug, Clone)]
pub struct FoundMarks {
    /// The draft rig (no bar: the user fills it in).
    pub rig: Rig,
    /// Every stripe found, with its role.
    pub marks: Vec<FoundMark>,
    /// What could not be decided, or was decided with doubt.
    pub warnings: Vec<Warning>,
    /// The clip's first frame (for the preview).
    pub first: Frame,
    /// Frames read.
    pub frames_read: u64,
}

/// Finds the marks in the clip at `clip` and drafts a rig.
///
/// # Errors
/// [`Error::Input`]/[`Error::Decode`] when the clip cannot be read; [`Error::Mark`] naming the
/// role when fewer than two turning stripes are found (the drive and nut ends cannot be drafted).
pub fn find_marks(clip: &Path, opts: &FindMarksOptions) -> Result<FoundMarks> {
    let mut source = decode::open(clip)?;
    let mut frame = Frame::empty();
    if !source.read_into(&mut frame)? {
        return Err(Error::input(clip, "the clip has no frames"));
    }
    let first = frame.clone();
    let mut count = 1u64;
    let next = move || -> Result<Option<Frame>> {
        if count >= MAX_FRAMES || !source.read_into(&mut frame)? {
            return Ok(None);
        }
        count += 1;
        Ok(Some(frame.clone()))
    };
    find_stream(clip, first, next, opts)
}

/// As [`find_marks`], on frames already in memory (first frame first).
///
/// # Errors
/// As [`find_marks`].
pub fn find_marks_frames(
    clip: &Path,
    frames: &[Frame],
    opts: &FindMarksOptions,
) -> Result<FoundMarks> {
    let Some(first) = frames.first() else {
        return Err(Error::input(clip, "the clip has no frames"));
    };
    let mut rest = frames[1..].iter().take(MAX_FRAMES as usize - 1);
    find_stream(clip, first.clone(), || Ok(rest.next().cloned()), opts)
}

/// The work of [`find_marks`]: the first frame, then the others one at a time.
fn find_stream(
    clip: &Path,
    first: Frame,
    mut next: impl FnMut() -> Result<Option<Frame>>,
    opts: &FindMarksOptions,
) -> Result<FoundMarks> {
    let first = &first;
    if first.width < 16 || first.height < 16 {
        return Err(Error::input(
            clip,
            format!(
                "the {}x{} frame is too small to hold a mark",
                first.width, first.height
            ),
        ));
    }
    let img0 = Img::from_frame(first);
    let mut tracks: Vec<Track> = detect(&img0, [0, img0.w, 0, img0.h])
        .into_iter()
        .map(|s| Track {
            first: s,
            last: s,
            seen: vec![Some((s, s.theta))],
            theta: s.theta,
        })
        .collect();
    let mut warnings = Vec::new();
    let mut n = 1usize;
    while let Some(f) = next()? {
        let f = &f;
        n += 1;
        if (f.width, f.height) != (first.width, first.height) {
            return Err(Error::input(
                clip,
                format!(
                    "frame {} is {}x{} but the clip started at {}x{}; re-encode the clip at one frame size",
                    f.index, f.width, f.height, first.width, first.height
                ),
            ));
        }
        let img = Img::from_frame(f);
        for t in tracks.iter_mut() {
            t.follow(&img);
        }
    }
    // A stripe seen in under half the frames is not a mark we can rely on.
    tracks.retain(|t| t.seen.iter().flatten().count() * 2 >= n);

    // Moving stripes, most travel first; still ones.
    let mut moving: Vec<&Track> = Vec::new();
    let mut still: Vec<&Track> = Vec::new();
    for t in &tracks {
        let span = t.span_deg();
        if span < STILL_DEG {
            still.push(t);
        } else if span < MIN_SPAN_DEG || t.is_radial() {
            moving.push(t);
        }
    }
    // The two longest turning stripes are the drive and nut marks (painted stripes are long;
    // a sliver between two parts that happens to turn is short); of the two, the one that
    // swings back more is the drive end.
    moving.sort_by(|a, b| b.first.length.total_cmp(&a.first.length));
    if moving.len() >= 2 && moving[1].back_swing() > moving[0].back_swing() {
        moving.swap(0, 1);
    }
    if moving.len() < 2 {
        return Err(Error::Mark {
            mark: if moving.is_empty() { "drive" } else { "nut" }.into(),
            reason: format!(
                "found {} turning stripe(s) in {} frame(s) of {}; need the drive and the nut stripe: use a clip with at least one blow, paint 3-8 px wide stripes that contrast with the surface, or write the rig by hand",
                moving.len(),
                n,
                clip.display()
            ),
        });
    }
    if moving.len() > 2 {
        warnings.push(unsure(
            "roles",
            format!(
                "{} turning stripes found; the two longest were taken as drive and nut, check the preview",
                moving.len()
            ),
        ));
    }
    let nm = moving[1].motion();
    let (db, nb) = (moving[0].back_swing(), moving[1].back_swing());
    if db < 2.0 * nb.max(0.25) {
        warnings.push(unsure(
            "drive/nut",
            format!(
                "the two turning stripes swing back alike ({db:.1}° and {nb:.1}° over the clip); the one that swings back more was called the drive end, swap \"drive\" and \"nut\" if the preview shows otherwise"
            ),
        ));
    }

    // Tightening: the drive's fast steps.
    let drive_steps = moving[0].sign_steps();
    let drive_spin = if drive_steps >= 0.0 {
        Spin::Cw
    } else {
        Spin::Ccw
    };
    let nut_spin = if nm.0.abs() >= 0.5 {
        if nm.0 > 0.0 { Spin::Cw } else { Spin::Ccw }
    } else {
        warnings.push(unsure(
            "nut tighten",
            format!(
                "the nut stripe advanced only {:.2}° over the clip; its tightening direction was copied from the drive end",
                nm.0
            ),
        ));
        drive_spin
    };
    if nm.0.abs() >= 0.5 && nut_spin != drive_spin {
        warnings.push(unsure(
            "tighten",
            "the drive end's blows and the nut's advance turn opposite ways on screen; check each mark's \"tighten\" against the preview".to_string(),
        ));
    }

    let mut marks = Vec::new();
    let drive = radial_from(
        moving[0],
        Role::Drive,
        Some(drive_spin),
        &img0,
        &mut warnings,
    );
    let nut = radial_from(moving[1], Role::Nut, Some(nut_spin), &img0, &mut warnings);
    marks.push(drive.clone());
    marks.push(nut.clone());
    for t in moving.iter().skip(2) {
        marks.push(FoundMark {
            role: None,
            ..radial_from(t, Role::Nut, None, &img0, &mut Vec::new())
        });
    }
    // The fixed mark: the longest still stripe.
    still.sort_by(|a, b| b.first.length.total_cmp(&a.first.length));
    let fixed = still.first().map(|t| fixed_from(t));
    if still.len() > 1 {
        warnings.push(unsure(
            "fixed",
            format!(
                "{} still stripes found; the longest was taken as the fixed mark",
                still.len()
            ),
        ));
    }
    if fixed.is_none() {
        warnings.push(unsure(
            "fixed",
            "no still stripe found, so the draft has no fixed mark and camera shake will not be corrected; paint a stripe on something that does not move".to_string(),
        ));
    }
    if let Some(f) = &fixed {
        marks.push(f.clone());
    }
    for t in still.iter().skip(1) {
        marks.push(FoundMark {
            role: None,
            ..fixed_from(t)
        });
    }
    let rig = Rig {
        rig_version: RIG_VERSION,
        capture_fps_hz: opts.fps_hz,
        marks: Marks {
            drive: Mark::Radial(drive.mark),
            nut: Mark::Radial(nut.mark),
            fixed: fixed.map(|f| Mark::Radial(f.mark)),
        },
        bar: None,
    };
    Ok(FoundMarks {
        rig,
        marks,
        warnings,
        first: first.clone(),
        frames_read: n as u64,
    })
}
