//! Side-view marks: the bar's angle from stripes painted along it, seen from the side.
//!
//! The stretch of the bar between the rig's two axis points is sampled on a grid: positions
//! along the axis every pixel, and across it at bar angles φ from −89° to +89° in 0.25° steps,
//! placed at screen offset `t = R·sin φ` along the axis normal that points the rig's
//! tightening way (orthographic view of a cylinder: a surface point at angle φ from the
//! camera-facing direction appears at R·sin φ). Averaging along the axis gives one profile
//! P(φ) per frame, in which a stripe has the same width wherever it is, unlike on screen,
//! where it narrows as cos φ towards the silhouette.
//!
//! The stripe's angle is the centroid of its contrast over a straight baseline drawn
//! between the profile at φ ± (stripe half-width + margin), so `angle = asin(offset / R)` is
//! measured in the angle domain directly. Beyond [`MAX_FACING_DEG`] from facing the camera
//! a degree of turn moves the stripe less than R·cos φ·(π/180) px and the baseline runs into
//! the silhouette, so the stripe is not measured there: the frame is a loss (None), never a
//! guess. With N stripes (rig `stripes`) equally spaced, each visible one inside that range
//! gives θ = φₖ − 2πk/N, and the estimates are averaged with weight cos φₖ; a hand-over from
//! one stripe to the next keeps θ continuous because every stripe predicts the same θ.
//! After a loss, every stripe seen in range is a candidate, and the bar angle nearest the
//! last measured one is taken: right whenever the bar turned less than half the stripe
//! spacing while no stripe was measurable (see docs/accuracy.md).

use std::f64::consts::{PI, TAU};

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
    /// +1 when the paint is brighter than the steel, −1 when darker.
    polarity: f32,
    /// Stripe half-width in bar angle, rad (measured in the first frame).
    half: f64,
    /// Bar angle of the last measurement, or its prediction while lost (continuous), rad.
    last: Option<f64>,
    /// Turn per frame at the last measurement, rad (to predict the next frame).
    vel: f64,
    /// True while no stripe is measured (the next sighting is searched for over the range).
    lost: bool,
    /// The profile buffer, reused every frame.
    prof: Vec<f32>,
}

impl SideTracker {
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
        Ok(SideTracker {
            points,
            phi,
            stripes: m.stripes.unwrap_or(1).max(1),
            polarity: 1.0,
            half: 0.0,
            last: None,
            vel: 0.0,
            lost: false,
            prof: Vec::new(),
        })
    }

    /// The mean luma across the bar at each profile angle, into `out`.
    fn profile(&self, frame: FrameRef<'_>, shift: [f64; 2], out: &mut Vec<f32>) {
        let (w, h) = (frame.width, frame.height);
        let at = |x: f64, y: f64| -> f32 {
            let x = x.clamp(0.0, f64::from(w) - 1.0);
            let y = y.clamp(0.0, f64::from(h) - 1.0);
            let (x0, y0) = (x.floor() as u32, y.floor() as u32);
            let (x1, y1) = ((x0 + 1).min(w - 1), (y0 + 1).min(h - 1));
            let (fx, fy) = ((x - f64::from(x0)) as f32, (y - f64::from(y0)) as f32);
            let a = frame.value(x0, y0) * (1.0 - fx) + frame.value(x1, y0) * fx;
            let b = frame.value(x0, y1) * (1.0 - fx) + frame.value(x1, y1) * fx;
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

    /// Stripe centroid near `guess` (rad) in the profile, within `window` (rad); None when no
    /// stripe is there or it is beyond the measurable range.
    fn centroid(&self, prof: &[f32], guess: f64, window: f64) -> Option<(f64, f32)> {
        let lim = MAX_FACING_DEG.to_radians();
        let bin = |p: f64| ((p.to_degrees() + RANGE_DEG) / STEP_DEG).round() as isize;
        let nb = prof.len() as isize;
        // Peak of the paint's contrast inside the window.
        let (lo, hi) = (bin(guess - window).max(0), bin(guess + window).min(nb - 1));
        if lo >= hi {
            return None;
        }
        let mut best = (lo, f32::NEG_INFINITY);
        for k in lo..=hi {
            let v = self.polarity * prof[k as usize];
            if v > best.1 {
                best = (k, v);
            }
        }
        let pk = self.phi[best.0 as usize];
        if pk.abs() > lim {
            return None;
        }
        // Baseline between the profile at pk ± (half + margin).
        let m = self.half + 4f64.to_radians();
        let (ka, kb) = (bin(pk - m), bin(pk + m));
        if ka < 0 || kb >= nb {
            return None;
        }
        let (va, vb) = (
            self.polarity * prof[ka as usize],
            self.polarity * prof[kb as usize],
        );
        let (mut sw, mut sp) = (0.0f64, 0.0f64);
        for k in ka..=kb {
            let f = (k - ka) as f32 / (kb - ka) as f32;
            let base = va + (vb - va) * f;
            let c = self.polarity * prof[k as usize] - base;
            if c > 0.0 {
                sw += f64::from(c);
                sp += f64::from(c) * self.phi[k as usize];
            }
        }
        let peak_c = best.1 - 0.5 * (va + vb);
        if sw <= 0.0 || peak_c < 0.02 {
            return None;
        }
        let c = sp / sw;
        (c.abs() <= lim).then_some((c, peak_c))
    }

    /// First frame: finds the stripe nearest to facing the camera, its polarity and width.
    pub(crate) fn init(&mut self, frame: FrameRef<'_>, shift: [f64; 2]) -> Result<f64, String> {
        let mut prof = Vec::new();
        self.profile(frame, shift, &mut prof);
        // Polarity: does the most contrasting narrow feature stand above or below its
        // surroundings? Compare the largest two-sided ridge of either sign.
        let d = (4.0 / STEP_DEG) as usize * 2;
        let mut best = (0.0f32, 1.0f32);
        for k in d..prof.len().saturating_sub(d) {
            if self.phi[k].abs() > MAX_FACING_DEG.to_radians() {
                continue;
            }
            for pol in [1.0f32, -1.0] {
                let c = pol * prof[k];
                let r = (c - pol * prof[k - d]).min(c - pol * prof[k + d]);
                if r > best.0 {
                    best = (r, pol);
                }
            }
        }
        if best.0 < 0.03 {
            return Err(format!(
                "no stripe along the bar within ±{MAX_FACING_DEG:.0}° of facing the camera; turn the bar so a stripe faces the camera in the first frame, or check axis and radius_px"
            ));
        }
        self.polarity = best.1;
        // Width: bins above half the peak contrast around the strongest ridge.
        let kp = (0..prof.len())
            .filter(|&k| self.phi[k].abs() <= MAX_FACING_DEG.to_radians())
            .max_by(|&a, &b| (self.polarity * prof[a]).total_cmp(&(self.polarity * prof[b])))
            .unwrap_or(prof.len() / 2);
        let floor = (self.polarity * prof[kp.saturating_sub(d)])
            .max(self.polarity * prof[(kp + d).min(prof.len() - 1)]);
        let halfv = floor + 0.5 * (self.polarity * prof[kp] - floor);
        let mut lo = kp;
        while lo > 0 && self.polarity * prof[lo - 1] > halfv {
            lo -= 1;
        }
        let mut hi = kp;
        while hi + 1 < prof.len() && self.polarity * prof[hi + 1] > halfv {
            hi += 1;
        }
        self.half = (0.5 * (hi - lo + 1) as f64 * STEP_DEG)
            .to_radians()
            .max(1f64.to_radians());
        let (c, _) = self
            .centroid(&prof, self.phi[kp], 3.0 * self.half + 2f64.to_radians())
            .ok_or_else(|| "the stripe along the bar is too faint or too near the bar's edge in the first frame".to_string())?;
        self.last = Some(c);
        Ok(c)
    }

    /// The bar angle (continuous, rad) in a later frame, or None when no stripe can be
    /// measured reliably.
    pub(crate) fn measure(&mut self, frame: FrameRef<'_>, shift: [f64; 2]) -> Option<(f64, f32)> {
        let mut prof = std::mem::take(&mut self.prof);
        self.profile(frame, shift, &mut prof);
        let out = self.measure_profile(&prof);
        self.prof = prof;
        out
    }

    fn measure_profile(&mut self, prof: &[f32]) -> Option<(f64, f32)> {
        if self.lost {
            return self.reacquire(prof);
        }
        // Where the bar should be now if it kept turning at its last rate.
        let last = self.last? + self.vel;
        let step = TAU / f64::from(self.stripes);
        let window = (0.45 * step).min(25f64.to_radians());
        let (mut sw, mut st, mut conf) = (0.0, 0.0, 0.0f32);
        for k in 0..self.stripes {
            // Where stripe k faces now, if the bar is still near its last angle.
            let off = step * f64::from(k);
            let front = (last + off + PI).rem_euclid(TAU) - PI;
            if front.abs() > MAX_FACING_DEG.to_radians() + window {
                continue;
            }
            if let Some((c, pc)) = self.centroid(prof, front, window) {
                let w = c.cos();
                // Back to a continuous bar angle near the last one.
                let th = last + (c - front);
                sw += w;
                st += w * th;
                conf = conf.max(pc);
            }
        }
        if sw <= 0.0 {
            self.lost = true;
            self.vel = 0.0;
            return None;
        }
        let th = st / sw;
        self.vel = th - (last - self.vel);
        self.last = Some(th);
        Some((th, (conf / 0.2).clamp(0.0, 1.0)))
    }
}

impl SideTracker {
    /// After a loss: every stripe in range, each read as every stripe index, and the bar
    /// angle nearest the last measured one.
    fn reacquire(&mut self, prof: &[f32]) -> Option<(f64, f32)> {
        let last = self.last?;
        let lim = MAX_FACING_DEG.to_radians();
        let step = TAU / f64::from(self.stripes);
        let mut seen: Vec<(f64, f32)> = Vec::new();
        let mut g = -lim;
        while g <= lim {
            if let Some((c, pc)) = self.centroid(prof, g, 6f64.to_radians())
                && !seen.iter().any(|s| (s.0 - c).abs() < 2f64.to_radians())
            {
                seen.push((c, pc));
            }
            g += 8f64.to_radians();
        }
        let mut best: Option<(f64, f64, f32)> = None;
        for (c, pc) in seen {
            for k in 0..self.stripes {
                let th = c - step * f64::from(k);
                let th = th + TAU * ((last - th) / TAU).round();
                let d = (th - last).abs();
                if best.is_none_or(|b| d < b.0) {
                    best = Some((d, th, pc));
                }
            }
        }
        let (_, th, pc) = best?;
        self.lost = false;
        self.vel = 0.0;
        self.last = Some(th);
        Some((th, (pc / 0.2).clamp(0.0, 1.0)))
    }
}

/// The radial stand-in a side mark's `MarkTrack` carries (never sampled): a tiny annulus at
/// the axis midpoint, so that the radial fields stay valid without changing their type.
pub(super) fn stand_in(m: &SideMark) -> crate::rig::RadialMark {
    let [a, b] = m.axis;
    crate::rig::RadialMark {
        pivot: [0.5 * (a[0] + b[0]), 0.5 * (a[1] + b[1])],
        radius: [0.0, 1.0],
        tighten: None,
        ellipse: None,
    }
}

/// Measures a side mark in one frame into its track (the side branch of `measure`).
pub(super) fn measure(
    t: &mut super::MarkTrack,
    frame: FrameRef<'_>,
    shift: [f64; 2],
    first: bool,
) -> crate::error::Result<Option<f64>> {
    let Some(s) = t.side.as_mut() else {
        return Ok(None);
    };
    let m = if first {
        let a = s
            .init(frame, shift)
            .map_err(|reason| crate::error::Error::Mark {
                mark: t.role.name().into(),
                reason: format!("frame {}: {reason}", frame.index),
            })?;
        Some((a, 1.0))
    } else {
        s.measure(frame, shift)
    };
    t.angle.push(m.map(|m| m.0));
    t.confidence.push(m.map_or(0.0, |m| m.1));
    t.dir_offset.push(None);
    Ok(m.map(|m| m.0))
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
        let mut out = Vec::new();
        for (i, a) in angles_deg.iter().enumerate() {
            let f = sc.render(i as u64, a.to_radians());
            let v = if i == 0 {
                Some(t.init(f.view(), [0.0, 0.0]).unwrap())
            } else {
                t.measure(f.view(), [0.0, 0.0]).map(|m| m.0)
            };
            out.push(v.map(f64::to_degrees));
        }
        out
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
