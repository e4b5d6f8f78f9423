//! Side-view marks: the bar's angle from stripes painted along it, seen from the side.
//!
//! The stretch of the bar between the rig's two axis points is sampled on a grid: positions
//! along the axis every pixel, and across it at bar angles φ from −89° to +89° in 0.25° steps,
//! placed at screen offset `t = R·sin φ` along the axis normal that points the rig's
//! tightening way (orthographic view of a cylinder: a surface point at angle φ from the
//! camera-facing direction appears at R·sin φ). Averaging along the axis gives one profile
//! P(φ) per frame, in which a stripe has the same width wherever it is, unlike on screen,
//! where it narrows as cos φ towards the silhouette. Where the clip has colour and the paint
//! differs from the steel more in colour than in brightness, the profile is read on a colour
//! projection learnt from the first frame (`colour.rs`).
//!
//! The profiles are kept (one per frame, 713 values) and read once the clip is in
//! (`layers.rs`): paint is told from a static line along the bar (a lamp's reflection) by
//! motion, the lines are taken out, and the paint is followed (`follow.rs`). A stripe beyond
//! [`MAX_FACING_DEG`] from facing the camera, round the back, or on a static line's core is a
//! loss (None), never a guess.
//!
//! Part of the track stage: it must never import segment, mechanics, report, `analyze`,
//! `batch`, `find_marks`, `calibrate` or the CLI.

mod colour;
mod follow;
mod layers;
mod see_through;

use crate::decode::FrameRef;
use crate::rig::SideMark;

/// Largest angle from facing the camera at which a stripe is measured, degrees.
pub(crate) const MAX_FACING_DEG: f64 = 66.0;
/// Angular step of the profile, degrees.
const STEP_DEG: f64 = 0.25;
/// Profile range, degrees either side of facing.
const RANGE_DEG: f64 = 89.0;

/// Measures one side-view mark.
#[derive(Debug, Clone)]
pub(crate) struct SideTracker {
    /// Sample positions: per profile bin, the screen points along the axis.
    points: Vec<Vec<[f64; 2]>>,
    /// Profile bin angles, rad.
    phi: Vec<f64>,
    stripes: u32,
    /// The colour projection the profile is read on, if colour separates the paint.
    projection: Option<colour::Projection>,
    /// The pixel box every sample point lies in, inclusive: x_lo, x_hi, y_lo, y_hi.
    sample_box: [u32; 4],
    /// The projection over `sample_box` (moved by the shift), reused every frame.
    plane: Vec<f32>,
    /// Every frame's profile, in order.
    profiles: Vec<Vec<f32>>,
    /// The axis's midpoint, px: where the camera's shift is taken for this mark.
    centre: [f64; 2],
}

impl SideTracker {
    /// The axis's midpoint, px: where the camera's shift is taken for this mark.
    pub(crate) fn centre(&self) -> [f64; 2] {
        self.centre
    }

    /// Prepares the sampling grid. The axis points must lie inside the frame (the rig check).
    pub(crate) fn new(m: &SideMark, width: u32, height: u32) -> Result<SideTracker, String> {
        let [a, b] = m.axis;
        let (dx, dy) = (b[0] - a[0], b[1] - a[1]);
        let len = dx.hypot(dy);
        let u = [dx / len, dy / len];
        let mut n = [-u[1], u[0]];
        if let Some(t) = m.tighten {
            let v = t.vector();
            let dot = n[0] * v[0] + n[1] * v[1];
            if dot.abs() < 0.3 {
                return Err(format!(
                    "\"tighten\" points along the bar (axis direction {:.0}°); give the screen direction across the bar in which the facing stripe moves",
                    dy.atan2(dx).to_degrees()
                ));
            }
            if dot < 0.0 {
                n = [-n[0], -n[1]];
            }
        }
        let r = m.radius_px;
        let count = len.floor() as usize;
        let nbin = (2.0 * RANGE_DEG / STEP_DEG).round() as usize + 1;
        let mut phi = Vec::with_capacity(nbin);
        let mut points = Vec::with_capacity(nbin);
        for k in 0..nbin {
            let p = (-RANGE_DEG + k as f64 * STEP_DEG).to_radians();
            let t = r * p.sin();
            let pts: Vec<[f64; 2]> = (0..count)
                .map(|i| {
                    let s = i as f64 + 0.5 * (len - count as f64 + 1.0);
                    [a[0] + s * u[0] + t * n[0], a[1] + s * u[1] + t * n[1]]
                })
                .filter(|q| {
                    q[0] >= 0.0
                        && q[1] >= 0.0
                        && q[0] <= f64::from(width) - 1.0
                        && q[1] <= f64::from(height) - 1.0
                })
                .collect();
            phi.push(p);
            points.push(pts);
        }
        if points.iter().any(|p| p.len() < 4) {
            return Err(format!(
                "the bar's sides (radius {r} px about the axis) leave the frame; film the bar with its whole width in view or correct radius_px"
            ));
        }
        let (mut x0, mut x1, mut y0, mut y1) = (f64::MAX, f64::MIN, f64::MAX, f64::MIN);
        for q in points.iter().flatten() {
            x0 = x0.min(q[0]);
            x1 = x1.max(q[0]);
            y0 = y0.min(q[1]);
            y1 = y1.max(q[1]);
        }
        Ok(SideTracker {
            points,
            phi,
            stripes: m.stripes.unwrap_or(1).max(1),
            projection: None,
            sample_box: [
                x0.floor() as u32,
                (x1.ceil() as u32).min(width - 1),
                y0.floor() as u32,
                (y1.ceil() as u32).min(height - 1),
            ],
            plane: Vec::new(),
            profiles: Vec::new(),
            centre: [0.5 * (a[0] + b[0]), 0.5 * (a[1] + b[1])],
        })
    }

    /// The mean (luma or colour projection) across the bar at each profile angle, into `out`.
    fn profile(&mut self, frame: FrameRef<'_>, shift: [f64; 2], out: &mut Vec<f32>) {
        let (w, h) = (frame.width, frame.height);
        // The box the samples can reach this frame, and the values over it.
        let grow = |lo: u32, hi: u32, s: f64, n: u32| -> (u32, u32) {
            let lo = (f64::from(lo) + s - 2.0)
                .floor()
                .clamp(0.0, f64::from(n - 1)) as u32;
            let hi = (f64::from(hi) + s + 2.0)
                .ceil()
                .clamp(0.0, f64::from(n - 1)) as u32;
            (lo, hi)
        };
        let [bx0, bx1, by0, by1] = self.sample_box;
        let (x0, x1) = grow(bx0, bx1, shift[0], w);
        let (y0, y1) = grow(by0, by1, shift[1], h);
        let bw = (x1 - x0 + 1) as usize;
        self.plane.clear();
        for y in y0..=y1 {
            for x in x0..=x1 {
                self.plane.push(match &self.projection {
                    Some(p) => p.at(frame, x, y),
                    None => frame.value(x, y),
                });
            }
        }
        let plane = &self.plane;
        let at = |x: f64, y: f64| -> f32 {
            let x = x.clamp(f64::from(x0), f64::from(x1));
            let y = y.clamp(f64::from(y0), f64::from(y1));
            let (ix, iy) = (x.floor() as u32, y.floor() as u32);
            let (jx, jy) = ((ix + 1).min(x1), (iy + 1).min(y1));
            let (fx, fy) = ((x - f64::from(ix)) as f32, (y - f64::from(iy)) as f32);
            let v = |xx: u32, yy: u32| plane[(yy - y0) as usize * bw + (xx - x0) as usize];
            let a = v(ix, iy) * (1.0 - fx) + v(jx, iy) * fx;
            let b = v(ix, jy) * (1.0 - fx) + v(jx, jy) * fx;
            a * (1.0 - fy) + b * fy
        };
        out.clear();
        out.extend(self.points.iter().map(|pts| {
            let s: f32 = pts
                .iter()
                .map(|q| at(q[0] + shift[0], q[1] + shift[1]))
                .sum();
            s / pts.len() as f32
        }));
    }

    /// First frame: learns the colour projection (if colour separates the paint), keeps the
    /// profile and checks that some stripe stands out within the measurable range. Returns the
    /// strongest stripe's bar angle (a first reading; the clip's reading comes from
    /// [`SideTracker::solve`]).
    pub(crate) fn init(&mut self, frame: FrameRef<'_>, shift: [f64; 2]) -> Result<f64, String> {
        if frame.chroma.is_some() {
            let bins: Vec<(f64, &[[f64; 2]])> = self
                .phi
                .iter()
                .zip(&self.points)
                .filter(|(p, _)| p.abs() <= 80f64.to_radians())
                .map(|(p, pts)| (*p, pts.as_slice()))
                .collect();
            self.projection = colour::Projection::learn(frame, &bins, shift);
        }
        let mut prof = Vec::new();
        self.profile(frame, shift, &mut prof);
        let found = layers::solve(std::slice::from_ref(&prof), &self.phi, self.stripes);
        self.profiles.push(prof);
        // Nothing stands out at all: the axis or radius is wrong, or no stripe faces the
        // camera. A stripe beside a bright line may not be measurable alone in this frame; the
        // clip's reading decides ([`SideTracker::solve`]).
        if !found.any_ridge {
            return Err(format!(
                "no stripe along the bar within ±{MAX_FACING_DEG:.0}° of facing the camera; turn the bar so a stripe faces the camera in the first frame, or check axis and radius_px"
            ));
        }
        Ok(found.angle.first().copied().flatten().unwrap_or(f64::NAN))
    }

    /// Keeps a later frame's profile (read with the whole clip in [`SideTracker::solve`]).
    pub(crate) fn measure(&mut self, frame: FrameRef<'_>, shift: [f64; 2]) {
        let mut prof = Vec::with_capacity(self.phi.len());
        self.profile(frame, shift, &mut prof);
        self.profiles.push(prof);
    }

    /// Reads the whole clip: the bar angle per frame (continuous, rad, None where no stripe
    /// can be measured), confidences, and the static lines found.
    fn solve(&self) -> layers::Solved {
        layers::solve(&self.profiles, &self.phi, self.stripes)
    }

    /// Fisher's separation with colour and with luma alone, when the profile is read on colour.
    pub(crate) fn colour_separation(&self) -> Option<(f64, f64)> {
        self.projection.as_ref().map(|p| p.separation)
    }
}

/// Measures a side mark in one frame into its track (the side branch of `measure`). Later
/// frames are read with the whole clip ([`settle`]); until then they hold None.
pub(super) fn measure(
    t: &mut super::MarkTrack,
    frame: FrameRef<'_>,
    shift: [f64; 2],
    first: bool,
) -> crate::error::Result<Option<f64>> {
    let super::Reader::Side(s) = &mut t.reader else {
        return Ok(None);
    };
    let m = if first {
        let a = s
            .init(frame, shift)
            .map_err(|reason| crate::error::Error::Mark {
                mark: t.role.name().into(),
                reason: format!("frame {}: {reason}", frame.index),
            })?;
        Some(a).filter(|v| v.is_finite())
    } else {
        s.measure(frame, shift);
        None
    };
    t.angle.push(m);
    t.confidence.push(if m.is_some() { 1.0 } else { 0.0 });
    t.dir_offset.push(None);
    Ok(m)
}

/// Reads a side mark's whole clip into its track (angles and confidences), with notes on
/// static lines taken out and colour used; nothing for other marks.
pub(super) fn settle(t: &mut super::MarkTrack) -> Vec<crate::Warning> {
    let super::Reader::Side(s) = &t.reader else {
        return Vec::new();
    };
    let got = s.solve();
    let mut notes = Vec::new();
    if let Some((c, l)) = s.colour_separation() {
        notes.push(crate::Warning::Note(format!(
            "{} side mark read on colour: its paint differs from the steel more in colour than in brightness (Fisher separation {c:.0} with colour, {l:.0} on luma alone)",
            t.role.name()
        )));
    }
    let degrees = |v: &[f64]| v.iter().map(|d| format!("{d:.0}°")).collect::<Vec<_>>();
    let hidden: Vec<f64> = got
        .static_lines_deg
        .iter()
        .copied()
        .filter(|d| !got.seen_through_deg.contains(d))
        .collect();
    if !hidden.is_empty() {
        notes.push(crate::Warning::Note(format!(
            "{} side mark: a static line along the bar (a reflection that does not turn with it) at {} from facing the camera was taken out; frames with the paint on it are not measured",
            t.role.name(),
            degrees(&hidden).join(", ")
        )));
    }
    if !got.seen_through_deg.is_empty() {
        notes.push(crate::Warning::Note(format!(
            "{} side mark: a static line along the bar (a reflection that does not turn with it) at {} from facing the camera was taken out; the paint, of the other brightness, is read across it, its depth there evened by a fit of how much of the reflection the paint keeps",
            t.role.name(),
            degrees(&got.seen_through_deg).join(", ")
        )));
    }
    if got.unresolved {
        notes.push(crate::Warning::Note(format!(
            "{} side mark: every stripe seen in the first frame is a static line along the bar (a reflection), so the paint was not found and no frame is measured; start the clip with the paint facing the camera away from the bright line",
            t.role.name()
        )));
    }
    if let Some(i0) = got.first_measured {
        notes.push(crate::Warning::Note(format!(
            "{} side mark: its paint sits on or beside a static line along the bar (a reflection) in the first frame and was first measured in frame {i0}, but could not be followed back to the first frame, which is the angles' zero; so no frame is read (no guess). Start the clip where the paint faces the camera away from the bright line (--start-s), or turn the bar so it does",
            t.role.name()
        )));
    }
    if got.still {
        notes.push(crate::Warning::Note(format!(
            "{} side mark: nothing along the bar moved in the whole clip, so its stripe could not be told from a reflection by motion; if the bar turned, its stripe was not seen (check the paint shows in the first frame)",
            t.role.name()
        )));
    }
    t.angle = got.angle;
    t.confidence = got.confidence;
    notes
}

/// A side mark's angles relative to the first frame, and the first frame's bar angle (from
/// facing the camera) as the overlay's zero.
pub(super) fn relative(
    t: &super::MarkTrack,
) -> (
    Vec<Option<crate::units::Angle>>,
    Option<crate::units::Angle>,
) {
    use crate::units::Angle;
    let zero = t.angle.first().copied().flatten();
    let v = t
        .angle
        .iter()
        .map(|a| Some(Angle::from_rad(a.as_ref()? - zero?)))
        .collect();
    (v, zero.map(Angle::from_rad))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::rig::Mark;
    use crate::synth::side::SideScene;

    fn track(sc: &SideScene, angles_deg: &[f64]) -> Vec<Option<f64>> {
        let Mark::Side(m) = sc.mark() else { panic!() };
        let mut t = SideTracker::new(&m, sc.width, sc.height).unwrap();
        for (i, a) in angles_deg.iter().enumerate() {
            let f = sc.render(i as u64, a.to_radians());
            if i == 0 {
                t.init(f.view(), [0.0, 0.0]).unwrap();
            } else {
                t.measure(f.view(), [0.0, 0.0]);
            }
        }
        t.solve()
            .angle
            .into_iter()
            .map(|v| v.map(f64::to_degrees))
            .collect()
    }

    #[test]
    fn a_facing_stripe_reads_its_angle() {
        let mut sc = SideScene::bench(1);
        sc.supersample = 4;
        let got = track(&sc, &[0.0, 10.0, 20.0, 30.0, 40.0, 50.0]);
        for (g, w) in got.iter().zip([0.0, 10.0, 20.0, 30.0, 40.0, 50.0]) {
            let g = g.expect("measured");
            assert!((g - w).abs() < 0.5, "{g:.3} vs {w}");
        }
    }

    #[test]
    fn near_the_silhouette_the_stripe_is_lost_not_misread() {
        let mut sc = SideScene::bench(1);
        sc.supersample = 4;
        let angles: Vec<f64> = (0..=16).map(|k| 5.0 * k as f64).collect();
        let got = track(&sc, &angles);
        for (g, w) in got.iter().zip(&angles) {
            match g {
                Some(g) => assert!((g - w).abs() < 0.5, "{g:.3} vs {w}"),
                None => assert!(*w > 60.0, "lost at {w}°"),
            }
        }
        assert!(got.last().unwrap().is_none(), "80° must be a loss");
    }
}
