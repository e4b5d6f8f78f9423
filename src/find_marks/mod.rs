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
//!    Hu 1962, "Visual pattern recognition by moment invariants", IRE Trans. Inf. Theory).
//! 2. **Tracks.** Each first-frame stripe is followed frame by frame inside a window around
//!    its last position; its orientation is unwrapped modulo π.
//!    Where nothing changed around a stripe since the first frame (a count of changed pixels
//!    over its window, flicker scaled out), it is still there and is not searched for, so a
//!    busy background costs little.
//! 3. **Pivot.** A radial stripe's centre line passes through its pivot, so the pivot is the
//!    point nearest the track's lines over all frames: Σ (nₜ·(p − cₜ))² minimised (nₜ the line
//!    normal, cₜ the centroid), made robust to frames where the follower caught something
//!    else by random sample consensus over pairs of lines and a trimmed refit (`pivot.rs`).
//!    It is only defined when the stripe turned; below [`MIN_SPAN_DEG`] the pivot is not
//!    decided and a warning says so.
//! 4. **Marks by motion, roles by physics** (`roles.rs`). A stripe is a mark on a turning
//!    part only when it turns rigidly about one fixed point: most of its lines meet there,
//!    the point lies beyond one of its ends, and the stripe keeps its distance from it.
//!    Anything else that moves (a follower hopping between the streaks of a brushed-steel
//!    bench) is background. Of more than two turning parts, the pair whose blow onsets
//!    coincide most often is taken (the drive and the nut both move at every blow; a streak
//!    follower that passed the rigid-turn test does not keep time with them), then the most
//!    travel. The drive end leads each blow, swings back after it and travels
//!    more; the nut lags, moves less and stops first: three votes. Stripe length plays no
//!    part. When the votes disagree, a warning says so and the preview labels both readings.
//!    A stripe that does not turn is still; the one that stands out most is the fixed mark.
//! 5. **Tightening.** The drive end's fast steps (the blows) run the tightening way: the sign
//!    of Σ Δθ·|Δθ|² over the drive's frame steps. The nut end's net advance gives its own.
//! 6. **Ellipse.** Rays from the pivot find the disc's outline (the strongest luma step
//!    beyond the stripe); a centred conic `A x² + B xy + C y² = 1` chosen by consensus over
//!    fixed triples of those points, then fitted by trimmed least squares, gives the axes
//!    (eigenvalues) and the major-axis direction (eigenvector). It is used only when the fit
//!    is tight (RMS ≤ 1.2 % of the major axis); a hexagon does not fit.
//!
//! At most the first [`MAX_FRAMES`] frames are read.
//!
//! Part of the `find-marks` command (built on decode and track, writing through report): it
//! must never import segment, mechanics, `analyze`, `batch` or the CLI.

use std::path::Path;

use crate::decode::{self, Frame};
use crate::error::{Error, Result};
use crate::rig::{Mark, Marks, RIG_VERSION, RadialMark, Rig, Role, Spin};
use crate::warning::Warning;

mod draft;
mod ellipse;
mod luma;
mod outputs;
mod pivot;
mod preview;
mod readout;
mod register;
mod ridge;
mod roles;
mod stripes;

pub use outputs::{check_outputs, write_atomic};
pub use preview::write_preview;
pub use ridge::RIDGE_OFFSET_PX;

use draft::{fixed_from, radial_from, unsure};
use luma::{Change, Img};
use ridge::detect;
use roles::{Kind, classify, votes};
use stripes::Track;

/// Below this turn over the clip a stripe's pivot is not decided from its motion, degrees.
pub const MIN_SPAN_DEG: f64 = 4.0;
/// A stripe that turns less than this over the clip is taken as fixed, degrees (the jitter of
/// a short stripe's orientation under noise and flicker stays below it).
const STILL_DEG: f64 = 2.0;
/// A radial stripe's lines over the clip pass within this RMS distance of their
/// intersection, px; a track whose lines do not meet is not a radial stripe.
const MAX_LINE_RMS_PX: f64 = 1.5;

/// Stripes followed at most (those that stand out most in the first frame).
const MAX_STRIPES: usize = 400;
/// Turning stripes whose pivots are this close belong to one part, px.
const SAME_PIVOT_PX: f64 = 4.0;
/// A still stripe is taken for the fixed mark only when it stands out at least this fraction
/// as much as the fainter of the drive and nut stripes.
const FIXED_MIN_CONTRAST: f64 = 0.5;
/// Still stripes drawn on the preview as alternatives to the fixed mark, at most.
const MAX_ALTERNATIVES: usize = 4;

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
    /// The lines' point refined by registering the part's image between the positions it
    /// rested at (`register.rs`).
    Registered,
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
    /// When the role is unsure or the stripe is not used: the other reading, for the preview.
    pub alternative: Option<String>,
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
    /// A rolling shutter's readout time suggested by the stripes' shear and its 95 %
    /// interval, s (`readout.rs`): for a clip timed by the camera's own clock (no capture rate
    /// given) that shows one; None otherwise.
    pub readout_estimate_s: Option<(f64, (f64, f64))>,
}

/// Finds the marks in the clip at `clip` and drafts a rig.
///
/// # Errors
/// [`Error::Input`]/[`Error::Decode`] when the clip cannot be read; [`Error::Mark`] naming the
/// role when fewer than two turning stripes are found (the drive and nut ends cannot be drafted).
pub fn find_marks(clip: &Path, opts: &FindMarksOptions) -> Result<FoundMarks> {
    let mut source = decode::open(clip)?;
    let camera_fps = source
        .info()
        .container_fps_hz
        .filter(|_| opts.fps_hz.is_none());
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
    let replay = |n: usize, visit: &mut dyn FnMut(usize, &Frame)| -> Result<()> {
        let mut source = decode::open(clip)?;
        let mut f = Frame::empty();
        let mut t = 0;
        while t < n && source.read_into(&mut f)? {
            visit(t, &f);
            t += 1;
        }
        Ok(())
    };
    let mut found = find_stream(clip, first, next, replay, opts)?;
    // A clip timed by the camera's clock (a phone's): the same frames again, tracked with the
    // draft, for the readout its stripes' shear shows.
    if let Some(fps) = camera_fps {
        let mut source = decode::open(clip)?;
        let size = (found.first.width, found.first.height);
        let frames = std::iter::from_fn(move || {
            let mut f = Frame::empty();
            match source.read_into(&mut f) {
                Ok(true) => Some(Ok(f)),
                Ok(false) => None,
                Err(e) => Some(Err(e)),
            }
        })
        .take(found.frames_read as usize);
        found.readout_estimate_s = readout::suggest(&found.rig, frames, fps, size)?;
    }
    Ok(found)
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
    let replay = |n: usize, visit: &mut dyn FnMut(usize, &Frame)| -> Result<()> {
        frames
            .iter()
            .take(n)
            .enumerate()
            .for_each(|(t, f)| visit(t, f));
        Ok(())
    };
    find_stream(
        clip,
        first.clone(),
        || Ok(rest.next().cloned()),
        replay,
        opts,
    )
}

/// The work of [`find_marks`]: the first frame, then the others one at a time; `replay(n,
/// visit)` shows the first `n` frames again, in order, for the pivots' refinement.
fn find_stream(
    clip: &Path,
    first: Frame,
    mut next: impl FnMut() -> Result<Option<Frame>>,
    replay: impl FnOnce(usize, &mut dyn FnMut(usize, &Frame)) -> Result<()>,
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
    let mut warnings = Vec::new();
    let mut segs = detect(&img0, [0, img0.w, 0, img0.h]);
    if segs.len() > MAX_STRIPES {
        // Bounded work on a busy background: keep the stripes that stand out most.
        warnings.push(unsure(
            "stripes",
            format!(
                "{} stripe-like features in the first frame; only the {MAX_STRIPES} that stand out most were followed",
                segs.len()
            ),
        ));
        segs.sort_by(|a, b| b.contrast.total_cmp(&a.contrast));
        segs.truncate(MAX_STRIPES);
    }
    let mut tracks: Vec<Track> = segs.into_iter().map(Track::start).collect();
    let mut change = Change::new(&img0);
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
        change.update(&img);
        for t in tracks.iter_mut() {
            // Nothing changed around the stripe since the first frame: it is still there.
            if change.count(t.window(img.w, img.h)) <= 2 {
                t.stay();
            } else {
                t.follow(&img);
            }
        }
    }
    let (w, h) = (img0.w, img0.h);
    let kinds: Vec<Kind> = tracks.iter().map(|t| classify(t, w, h)).collect();

    // Turning parts: turning stripes grouped by pivot; per part, the stripe seen most often.
    let mut parts: Vec<(usize, [f64; 2])> = Vec::new();
    for (i, k) in kinds.iter().enumerate() {
        let Kind::Turning { pivot } = *k else {
            continue;
        };
        let near = |q: &[f64; 2]| (q[0] - pivot[0]).hypot(q[1] - pivot[1]) <= SAME_PIVOT_PX;
        match parts.iter_mut().find(|(_, q)| near(q)) {
            Some(part) => {
                let (a, b) = (&tracks[i], &tracks[part.0]);
                if (a.seen_fraction(), a.first.contrast) > (b.seen_fraction(), b.first.contrast) {
                    *part = (i, pivot);
                }
            }
            None => parts.push((i, pivot)),
        }
    }
    // Most travel first (motion, not looks, orders them).
    parts.sort_by(|a, b| {
        tracks[b.0]
            .travel_deg()
            .total_cmp(&tracks[a.0].travel_deg())
    });
    // With more than two turning parts, the pair that moves together at the blows: of the
    // pairs, the one whose onsets coincide most often (both ways), then the most travel.
    if parts.len() > 2 {
        // Each part's onsets once; then every pair.
        let starts: Vec<Vec<f64>> = parts
            .iter()
            .map(|&(i, _)| roles::onsets(&tracks[i].series()))
            .collect();
        let mut best: Option<((usize, usize), (f64, f64))> = None;
        for a in 0..parts.len() {
            for b in a + 1..parts.len() {
                let (sab, na) = roles::shared_onsets(&starts[a], &starts[b], 6.0);
                let (sba, nb) = roles::shared_onsets(&starts[b], &starts[a], 6.0);
                let together = (sab + sba) as f64 / (na + nb).max(1) as f64;
                let travel = tracks[parts[a].0].travel_deg() + tracks[parts[b].0].travel_deg();
                let key = (together, travel);
                if best.is_none_or(|(_, k)| key > k) {
                    best = Some(((a, b), key));
                }
            }
        }
        if let Some(((a, b), _)) = best {
            let (pa, pb) = (parts[a], parts[b]);
            parts.retain(|q| q.0 != pa.0 && q.0 != pb.0);
            parts.insert(0, pb);
            parts.insert(0, pa);
        }
    }
    let mut cands: Vec<(usize, Option<[f64; 2]>)> =
        parts.iter().map(|&(i, p)| (i, Some(p))).collect();
    if cands.len() < 2 {
        // Stripes that turned a little: their pivots cannot be placed from the motion.
        let mut weak: Vec<usize> = (0..tracks.len())
            .filter(|&i| kinds[i] == Kind::Weak)
            .collect();
        weak.sort_by(|&a, &b| tracks[b].motion().1.total_cmp(&tracks[a].motion().1));
        cands.extend(weak.into_iter().map(|i| (i, None)).take(2 - cands.len()));
    }
    if cands.len() < 2 {
        let background = kinds.iter().filter(|k| **k == Kind::Background).count();
        return Err(Error::Mark {
            mark: if cands.is_empty() { "drive" } else { "nut" }.into(),
            reason: format!(
                "found {} turning stripe(s) in {} frame(s) of {} ({background} stripe-like feature(s) moved but did not turn about a fixed point, so were taken as background); need the drive and the nut stripe: use a clip with at least one blow, paint 3-8 px wide stripes that contrast with the surface, or write the rig by hand",
                cands.len(),
                n,
                clip.display()
            ),
        });
    }
    if parts.len() > 2 {
        warnings.push(unsure(
            "roles",
            format!(
                "{} parts turn about distinct pivots; the two that travel most were taken as drive and nut, and the others are drawn on the preview as alternatives",
                parts.len()
            ),
        ));
    }
    let (ia, ib) = (cands[0].0, cands[1].0);
    let v = votes(&tracks[ia], &tracks[ib]);
    let (a_drive, agree, cast) = v.decide();
    let (di, ni) = if a_drive { (0, 1) } else { (1, 0) };
    let (dt, nt) = (&tracks[cands[di].0], &tracks[cands[ni].0]);
    let roles_sure = cast >= 2 && agree == cast;
    if !roles_sure {
        let lag = v
            .lag_frames
            .map_or("no blow onsets paired up".to_string(), |l| {
                let l = if a_drive { l } else { -l };
                format!("the nut's onsets lag by {l:+.1} frame(s)")
            });
        let [bs, ts] =
            [v.back_swing_deg, v.travel_deg].map(|x| if a_drive { x } else { [x[1], x[0]] });
        warnings.push(unsure(
            "drive/nut",
            format!(
                "{agree} of {cast} signs call the part at [{:.0}, {:.0}] the drive end ({lag}; back-swing {:.1}° vs {:.1}°; travel {:.1}° vs {:.1}°); the preview labels both readings: swap \"drive\" and \"nut\" if the other one leads the blows",
                dt.first.c[0], dt.first.c[1], bs[0], bs[1], ts[0], ts[1]
            ),
        ));
    }
    let nm = nt.motion();

    // Tightening: the drive's fast steps.
    let drive_steps = dt.sign_steps();
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

    // The drive's and the nut's pivots refined by registering each part between its rests.
    let refined = refine_pivots([(dt, cands[di].1), (nt, cands[ni].1)], n, (w, h), replay)?;
    let mut marks = Vec::new();
    let mut drive = radial_from(
        dt,
        Role::Drive,
        Some(drive_spin),
        cands[di].1,
        refined[0],
        &img0,
        &mut warnings,
    );
    let mut nut = radial_from(
        nt,
        Role::Nut,
        Some(nut_spin),
        cands[ni].1,
        refined[1],
        &img0,
        &mut warnings,
    );
    if !roles_sure {
        drive.alternative = Some("or nut?".into());
        nut.alternative = Some("or drive?".into());
    }
    marks.push(drive.clone());
    marks.push(nut.clone());
    for &(i, p) in cands.iter().skip(2) {
        marks.push(FoundMark {
            role: None,
            alternative: Some("turning, not used".into()),
            ..radial_from(&tracks[i], Role::Nut, None, p, None, &img0, &mut Vec::new())
        });
    }
    // The fixed mark: of the still stripes, the one that stands out most from its surface.
    let mut still: Vec<&Track> = tracks
        .iter()
        .zip(&kinds)
        .filter(|(_, k)| **k == Kind::Still)
        .map(|(t, _)| t)
        .collect();
    still.sort_by(|a, b| b.first.contrast.total_cmp(&a.first.contrast));
    // The fixed mark is painted like the others: a still stripe far fainter than the paint on
    // the turning parts is texture (a streak of the bench), and tracking it would only add
    // its noise to both ends through the shake correction.
    let paint = dt.first.contrast.min(nt.first.contrast);
    let faint = still
        .iter()
        .filter(|t| t.first.contrast < FIXED_MIN_CONTRAST * paint)
        .count();
    let fixed = still
        .first()
        .filter(|t| t.first.contrast >= FIXED_MIN_CONTRAST * paint)
        .map(|t| fixed_from(t));
    if fixed.is_none() && faint > 0 {
        warnings.push(unsure(
            "fixed",
            format!(
                "{faint} still stripe(s) found, but none stands out like the paint on the turning parts (texture, not paint), so the draft has no fixed mark and camera shake will not be corrected; paint a stripe on something that does not move"
            ),
        ));
    }
    let strong = still.len() - faint;
    if fixed.is_some() && strong > 1 {
        warnings.push(unsure(
            "fixed",
            format!(
                "{strong} still stripes stand out like paint; the one that stands out most was taken as the fixed mark, and the next {} are drawn on the preview as alternatives",
                (strong - 1).min(MAX_ALTERNATIVES)
            ),
        ));
    }
    if fixed.is_none() && faint == 0 {
        warnings.push(unsure(
            "fixed",
            "no still stripe found, so the draft has no fixed mark and camera shake will not be corrected; paint a stripe on something that does not move".to_string(),
        ));
    }
    if let Some(f) = &fixed {
        marks.push(f.clone());
    }
    for t in still
        .iter()
        .skip(1)
        .filter(|t| t.first.contrast >= FIXED_MIN_CONTRAST * paint)
        .take(MAX_ALTERNATIVES)
    {
        marks.push(FoundMark {
            role: None,
            alternative: Some("still, not used".into()),
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
        camera: None,
    };
    Ok(FoundMarks {
        rig,
        marks,
        warnings,
        first: first.clone(),
        frames_read: n as u64,
        readout_estimate_s: None,
    })
}

/// The pivots of `parts` (a track and its lines' pivot) refined by registration
/// (`register.rs`), from one more pass over the first `n` frames of a `size` clip; None where
/// a part cannot be refined (too little turn, no rests, an oblique disc, or a registration
/// that fails its checks).
fn refine_pivots(
    parts: [(&Track, Option<[f64; 2]>); 2],
    n: usize,
    size: (usize, usize),
    replay: impl FnOnce(usize, &mut dyn FnMut(usize, &Frame)) -> Result<()>,
) -> Result<[Option<[f64; 2]>; 2]> {
    let mut stacks: Vec<Option<(register::Stack, [f64; 2], f64)>> = parts
        .iter()
        .map(|&(t, p)| {
            let p = p?;
            // An oblique disc does not turn rigidly on screen.
            if t.span_deg() < MIN_SPAN_DEG || t.length_ratio() > 1.03 {
                return None;
            }
            let [a, b] = t.first.ends();
            let ra = (a[0] - p[0]).hypot(a[1] - p[1]);
            let rb = (b[0] - p[0]).hypot(b[1] - p[1]);
            let reach = ra.max(rb);
            let rests = register::choose(register::rests(&t.series(), reach));
            if rests.is_empty() {
                return None;
            }
            let stack =
                register::Stack::new(rests, p, register::window_half(reach), size.0, size.1);
            Some((stack, p, reach))
        })
        .collect();
    if stacks.iter().all(Option::is_none) {
        return Ok([None, None]);
    }
    replay(n, &mut |t, f| {
        for (s, _, _) in stacks.iter_mut().flatten() {
            s.add(t, f);
        }
    })?;
    let mut out = [None, None];
    for (o, s) in out.iter_mut().zip(&stacks) {
        *o = s
            .as_ref()
            .and_then(|(s, p, reach)| register::refine(s, *p, *reach))
            .map(|r| r.pivot);
    }
    Ok(out)
}
