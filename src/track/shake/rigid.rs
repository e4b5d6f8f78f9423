//! Camera shake with roll: a rigid (translation + rotation) registration of the fixed region
//! against the first frame.
//!
//! Method: Lucas–Kanade registration (Lucas & Kanade, "An iterative image registration
//! technique with an application to stereo vision", IJCAI 1981) in its inverse-compositional
//! form for the 2-D Euclidean warp `W(p) = c + d + R(θ)(p − c)` about the fixed mark's centre
//! `c` (Baker & Matthews, "Lucas-Kanade 20 Years On: A Unifying Framework", IJCV 56 (2004)
//! 221–255, section 3.2 and, for the weighted robust form, Part 2: Baker, Gross, Matthews,
//! CMU-RI-TR-03-01 (2003), section 4.2). The steepest-descent images of the template
//! (`[gx, gy, −gx·(y − cy) + gy·(x − cx)]`) are computed once; each iteration samples the frame
//! at the warped template points, fits a gain and an offset (so lamp flicker and exposure drift
//! do not read as motion), and solves the 3×3 weighted normal equations. The weights are
//! Tukey's biweight on the residuals scaled by their median absolute deviation (iteratively
//! reweighted least squares; Holland & Welsch, "Robust regression using iteratively reweighted
//! least-squares", Commun. Statist. A6 (1977) 813–827, with the 4.685 tuning constant): pixels
//! that do not move with the camera (a turning nut inside a wheel face, a glint, a passing
//! tool) get weight 0 instead of pulling the estimate.
//!
//! The region is the fixed mark's annulus, not a square patch: a fixed mark concentric with the
//! nut (a stripe on a wheel face around it) then leaves out the nut that turns inside it. Any
//! pixel within another mark's disc is left out as well. The region need not hold a stripe: a
//! textured face, bolt holes or a bracket's edges register as well; only its gradients count.
//!
//! Every frame is registered to the first frame (never frame to frame), so errors do not
//! accumulate over a clip. The start point is the previous frame's estimate; if that does not
//! converge to a good match, a coarse search over whole-pixel shifts (normalised
//! cross-correlation on a subset of the points) gives the start instead. A frame that still
//! does not match (too few inliers or a low correlation) is reported as not registered: the
//! caller then reports its angles as null.
//!
//! Roll is estimated only when the region constrains it: the information about θ left after
//! the translation is accounted for (the Schur complement of the normal matrix) must be worth
//! a lever arm of `MIN_ROLL_LEVER_PX`. A plain ring (a concentric circle and nothing else) does
//! not, and then only the translation is estimated.
//!
//! The frame is read through the binomial kernel (σ = 1 px) folded with bilinear interpolation
//! ([`super::kernel::folded_kernel`]), per point, so no region of the frame is copied.
//!
//! Part of the track stage: it must never import segment, mechanics, report, `analyze`,
//! `batch`, `find_marks`, `calibrate` or the CLI.

use crate::decode::FrameRef;
use crate::rig::RadialMark;

use super::kernel::sample;
use super::pose::Pose;
use super::roll::RollShrink;

/// Largest number of template points.
const MAX_POINTS: usize = 384;
/// Angular sectors (of a point's position about the centre) × edge-direction classes the
/// template points are spread over, so that every direction of motion and the roll stay
/// constrained.
const SECTORS: usize = 8;
const DIRECTIONS: usize = 4;
/// Iterations per start at most.
const MAX_ITER: usize = 12;
/// Stop when every point moves less than this in an update, px.
const CONVERGED_PX: f64 = 1e-3;
/// Tukey's biweight tuning constant, in robust standard deviations (95 % efficiency under
/// Gaussian noise; Holland & Welsch 1977).
const TUKEY_C: f64 = 4.685;
/// Below this weighted correlation with the first frame the registration is not trusted.
const MIN_CORRELATION: f64 = 0.75;
/// At least this share of the points must be inliers (non-zero weight).
const MIN_INLIERS: f64 = 0.5;
/// Roll is estimated only when the region's information about it is worth this lever arm, px.
const MIN_ROLL_LEVER_PX: f64 = 4.0;
/// The coarse search covers whole-pixel shifts up to this far, px.
const SEARCH_PX: i64 = 6;
/// Points used by the coarse search.
const SEARCH_POINTS: usize = 96;
/// Room around the region for the shift, px (points nearer the frame's edge are not used).
const EDGE_PX: f64 = SEARCH_PX as f64 + 6.0;

/// Estimates the camera's translation and roll from the fixed region.
pub(crate) struct RigidEstimator {
    centre: [f64; 2],
    /// Template points (whole pixels, screen coordinates).
    pts: Vec<[f64; 2]>,
    tmpl: Vec<f32>,
    /// Steepest-descent images: gx, gy and the roll column divided by `lever`.
    sd: Vec<[f64; 3]>,
    /// RMS distance of the points from the centre, px: the roll column's scale.
    lever: f64,
    roll_ok: bool,
    /// The last good estimate: shift x, shift y, roll (rad).
    state: [f64; 3],
    /// The registered frames' rolls, for the decision to apply roll and its shrinkage.
    shrink: RollShrink,
    /// Whether this registration's translation is used when no roll is applied (false when
    /// the square patch gives the translation then: the re-fit is skipped).
    shift_needed: bool,
    /// Whether the last registered frame had a roll applied.
    roll_applied: bool,
    /// Scratch: samples, residuals, weights.
    s: Vec<f64>,
    r: Vec<f64>,
    w: Vec<f64>,
    abs: Vec<f64>,
}

/// The template's candidate points: the annulus `[r0, r1]` about `centre`, away from the frame's
/// edge and from every disc in `avoid` (centre, radius).
fn candidates(
    centre: [f64; 2],
    r0: f64,
    r1: f64,
    avoid: &[([f64; 2], f64)],
    width: usize,
    height: usize,
) -> Vec<[f64; 2]> {
    let mut out = Vec::new();
    let x0 = (centre[0] - r1).floor().max(EDGE_PX) as i64;
    let x1 = (centre[0] + r1).ceil().min(width as f64 - 1.0 - EDGE_PX) as i64;
    let y0 = (centre[1] - r1).floor().max(EDGE_PX) as i64;
    let y1 = (centre[1] + r1).ceil().min(height as f64 - 1.0 - EDGE_PX) as i64;
    for y in y0..=y1 {
        for x in x0..=x1 {
            let p = [x as f64, y as f64];
            let r = (p[0] - centre[0]).hypot(p[1] - centre[1]);
            if r < r0 || r > r1 {
                continue;
            }
            if avoid
                .iter()
                .any(|(c, rad)| (p[0] - c[0]).hypot(p[1] - c[1]) <= *rad)
            {
                continue;
            }
            out.push(p);
        }
    }
    out
}

impl RigidEstimator {
    /// Plans the region of the fixed `mark` in frames of `width × height`, leaving out the discs
    /// in `avoid` (the moving marks: centre and radius, px).
    pub fn new(
        mark: &RadialMark,
        avoid: &[([f64; 2], f64)],
        width: u32,
        height: u32,
    ) -> RigidEstimator {
        let (w, h) = (width as usize, height as usize);
        // The annulus the user marked, a little wider outwards (the stripe's ends and the
        // face around them); inwards only when it starts at the centre.
        let r0 = if mark.radius[0] > 2.0 {
            mark.radius[0] + 1.0
        } else {
            0.0
        };
        let r1 = mark.radius[1] + 4.0;
        let pts = candidates(mark.pivot, r0, r1, avoid, w, h);
        RigidEstimator {
            centre: mark.pivot,
            pts,
            tmpl: Vec::new(),
            sd: Vec::new(),
            lever: 1.0,
            roll_ok: false,
            state: [0.0; 3],
            shrink: RollShrink::default(),
            shift_needed: true,
            roll_applied: false,
            s: Vec::new(),
            r: Vec::new(),
            w: Vec::new(),
            abs: Vec::new(),
        }
    }

    /// Whether the region constrains the roll (decided by [`Self::init`]).
    pub fn roll_measured(&self) -> bool {
        self.roll_ok
    }

    /// Takes the template from the first frame. Returns false when the region has too little
    /// texture to register.
    pub fn init(&mut self, frame: FrameRef<'_>) -> bool {
        let c = self.centre;
        // Smoothed value and gradient (central differences of the smoothed image) per candidate.
        let mut cand: Vec<(usize, f32, [f64; 2], f64)> = Vec::with_capacity(self.pts.len());
        for (i, p) in self.pts.iter().enumerate() {
            let at = |dx: f64, dy: f64| sample(frame, [p[0] + dx, p[1] + dy]);
            let (Some(v), Some(xp), Some(xm), Some(yp), Some(ym)) = (
                at(0.0, 0.0),
                at(1.0, 0.0),
                at(-1.0, 0.0),
                at(0.0, 1.0),
                at(0.0, -1.0),
            ) else {
                continue;
            };
            let g = [0.5 * f64::from(xp - xm), 0.5 * f64::from(yp - ym)];
            cand.push((i, v, g, g[0] * g[0] + g[1] * g[1]));
        }
        // Strongest gradients per (sector, edge direction), then the strongest of the rest.
        let bins = SECTORS * DIRECTIONS;
        let mut by_bin: Vec<Vec<usize>> = vec![Vec::new(); bins];
        for (k, (i, _, g, _)) in cand.iter().enumerate() {
            let p = self.pts[*i];
            let pos = (p[1] - c[1])
                .atan2(p[0] - c[0])
                .rem_euclid(std::f64::consts::TAU);
            let sector = ((pos / std::f64::consts::TAU * SECTORS as f64) as usize).min(SECTORS - 1);
            let dir = g[1].atan2(g[0]).rem_euclid(std::f64::consts::PI);
            let d = ((dir / std::f64::consts::PI * DIRECTIONS as f64) as usize).min(DIRECTIONS - 1);
            by_bin[sector * DIRECTIONS + d].push(k);
        }
        let mut keep = Vec::with_capacity(MAX_POINTS);
        let mut rest = Vec::new();
        for mut bin in by_bin {
            bin.sort_unstable_by(|a, b| cand[*b].3.total_cmp(&cand[*a].3).then(a.cmp(b)));
            let quota = (MAX_POINTS / bins).min(bin.len());
            keep.extend_from_slice(&bin[..quota]);
            rest.extend_from_slice(&bin[quota..]);
        }
        rest.sort_unstable_by(|a, b| cand[*b].3.total_cmp(&cand[*a].3).then(a.cmp(b)));
        keep.extend(rest.iter().take(MAX_POINTS.saturating_sub(keep.len())));
        // Row-major order, for memory locality in every later frame.
        keep.sort_unstable_by_key(|&k| cand[k].0);
        let pts: Vec<[f64; 2]> = keep.iter().map(|&k| self.pts[cand[k].0]).collect();
        self.tmpl = keep.iter().map(|&k| cand[k].1).collect();
        let grads: Vec<[f64; 2]> = keep.iter().map(|&k| cand[k].2).collect();
        self.pts = pts;
        let n = self.pts.len();
        if n < 16 {
            return false;
        }
        self.lever = (self
            .pts
            .iter()
            .map(|p| (p[0] - c[0]).powi(2) + (p[1] - c[1]).powi(2))
            .sum::<f64>()
            / n as f64)
            .sqrt()
            .max(1.0);
        self.sd = self
            .pts
            .iter()
            .zip(&grads)
            .map(|(p, g)| {
                let (dx, dy) = (p[0] - c[0], p[1] - c[1]);
                [g[0], g[1], (-g[0] * dy + g[1] * dx) / self.lever]
            })
            .collect();
        let mean = self.tmpl.iter().map(|&t| f64::from(t)).sum::<f64>() / n as f64;
        let var = self
            .tmpl
            .iter()
            .map(|&t| (f64::from(t) - mean).powi(2))
            .sum::<f64>()
            / n as f64;
        let ones = vec![1.0; n];
        let h = normal_matrix(&self.sd, &ones);
        let (hxx, hyy) = (h[0][0], h[1][1]);
        let det2 = hxx * hyy - h[0][1] * h[0][1];
        if var < 1e-8 || det2 <= 1e-6 * (hxx + hyy).powi(2) {
            return false;
        }
        // Roll information left after the translation (Schur complement), as a lever arm.
        let (a, b) = (h[0][2], h[1][2]);
        let schur = h[2][2] - (hyy * a * a - 2.0 * h[0][1] * a * b + hxx * b * b) / det2;
        let lever_eff = self.lever * (schur.max(0.0) / (0.5 * (hxx + hyy))).sqrt();
        self.roll_ok = lever_eff >= MIN_ROLL_LEVER_PX;
        self.s = vec![0.0; n];
        self.r = vec![0.0; n];
        self.w = vec![1.0; n];
        self.abs = Vec::with_capacity(n);
        self.state = [0.0; 3];
        true
    }

    /// Says whether the translation is used when no roll is applied; when it is not (the
    /// square patch gives it), the translation-only re-fit of such frames is skipped and the
    /// pose's shift is the free fit's.
    pub fn set_shift_needed(&mut self, needed: bool) {
        self.shift_needed = needed;
    }

    /// Whether the last registered frame had a roll applied (the clip's rolls stand above
    /// their noise and matter; `roll.rs`).
    pub fn roll_applied(&self) -> bool {
        self.roll_applied
    }

    /// The camera's pose in this frame relative to the first, or None when the region does not
    /// match the first frame's (obscured, gone, or moved beyond the search).
    pub fn estimate(&mut self, frame: FrameRef<'_>) -> Option<Pose> {
        let free = self.roll_ok;
        let mut found = self.solve(frame, self.state, free);
        if found.is_none() && self.state != [0.0; 3] {
            found = self.solve(frame, [0.0; 3], free);
        }
        if found.is_none()
            && let Some(start) = self.search(frame)
        {
            found = self.solve(frame, start, free);
        }
        let (p, var) = found?;
        self.state = p;
        let roll = if self.roll_ok {
            self.shrink.shrink(p[2], var)
        } else {
            0.0
        };
        // The shift that goes with the roll applied: with the roll held there, the translation
        // alone is fitted again. When no roll is applied this is the translation-only estimate,
        // so a clip without roll is corrected exactly as by translation alone; the roll's own
        // noise (and the constant offset the first frame's template gives it) does not leak
        // into the shift.
        self.roll_applied = roll != 0.0;
        let mut shift = [p[0], p[1]];
        if self.roll_ok
            && roll != p[2]
            && (roll != 0.0 || self.shift_needed)
            && let Some((q, _)) = self.solve(frame, [p[0], p[1], roll], false)
        {
            shift = [q[0], q[1]];
        }
        Some(Pose {
            centre: self.centre,
            shift,
            roll,
        })
    }

    /// Where template point `i` lands under the state `st`.
    fn warp(&self, i: usize, st: [f64; 3]) -> [f64; 2] {
        let p = self.pts[i];
        let (s, c) = st[2].sin_cos();
        let (dx, dy) = (p[0] - self.centre[0], p[1] - self.centre[1]);
        [
            self.centre[0] + st[0] + c * dx - s * dy,
            self.centre[1] + st[1] + s * dx + c * dy,
        ]
    }

    /// Robust inverse-compositional iterations from `start`; the converged state when it
    /// matches the template well enough.
    /// Also returns the variance of the roll, rad² (from the weighted residuals and the
    /// normal matrix).
    /// With `free_roll` false the roll stays at `start`'s and only the translation is fitted.
    fn solve(
        &mut self,
        frame: FrameRef<'_>,
        start: [f64; 3],
        free_roll: bool,
    ) -> Option<([f64; 3], f64)> {
        let n = self.pts.len();
        let mut st = start;
        self.w.iter_mut().for_each(|w| *w = 1.0);
        let mut quality = None;
        let mut var_roll = f64::NAN;
        for iter in 0..MAX_ITER {
            // Sample; points that leave the frame get weight 0.
            for i in 0..n {
                let q = self.warp(i, st);
                match sample(frame, q) {
                    Some(v) => self.s[i] = f64::from(v),
                    None => {
                        self.s[i] = f64::NAN;
                        self.w[i] = 0.0;
                    }
                }
            }
            // Weighted gain and offset: s ≈ a·t + b.
            let (mut sw, mut st_, mut ss_, mut stt, mut sts) = (0.0, 0.0, 0.0, 0.0, 0.0);
            for i in 0..n {
                let w = self.w[i];
                if w <= 0.0 {
                    continue;
                }
                let t = f64::from(self.tmpl[i]);
                let s = self.s[i];
                sw += w;
                st_ += w * t;
                ss_ += w * s;
                stt += w * t * t;
                sts += w * t * s;
            }
            if sw < 8.0 {
                return None;
            }
            let (tm, sm) = (st_ / sw, ss_ / sw);
            let vt = stt / sw - tm * tm;
            let a = (sts / sw - tm * sm) / vt;
            if a.is_nan() || a <= 0.05 || !a.is_finite() {
                return None;
            }
            let b = sm - a * tm;
            // Residuals in template units, their robust scale, Tukey weights.
            self.abs.clear();
            for i in 0..n {
                let s = self.s[i];
                if s.is_nan() {
                    self.r[i] = 0.0;
                    continue;
                }
                self.r[i] = (s - b) / a - f64::from(self.tmpl[i]);
                self.abs.push(self.r[i].abs());
            }
            if self.abs.len() < 16 {
                return None;
            }
            let mid = self.abs.len() / 2;
            let (_, med, _) = self.abs.select_nth_unstable_by(mid, f64::total_cmp);
            // The scale is floored at a noise level far below any texture's contrast.
            let sigma = (1.4826 * *med).max(2e-3 * vt.sqrt()).max(1e-5);
            let cut = TUKEY_C * sigma;
            for i in 0..n {
                if self.s[i].is_nan() {
                    self.w[i] = 0.0;
                    continue;
                }
                let u = self.r[i] / cut;
                self.w[i] = if u.abs() < 1.0 {
                    (1.0 - u * u).powi(2)
                } else {
                    0.0
                };
            }
            // Weighted correlation and inlier share at this state (before the update).
            let inliers = self.w.iter().filter(|&&w| w > 0.0).count() as f64 / n as f64;
            quality = Some((self.correlation(), inliers));
            // Normal equations.
            let h = normal_matrix(&self.sd, &self.w);
            let mut g = [0.0f64; 3];
            for i in 0..n {
                let wr = self.w[i] * self.r[i];
                if wr == 0.0 {
                    continue;
                }
                for (k, gk) in g.iter_mut().enumerate() {
                    *gk += self.sd[i][k] * wr;
                }
            }
            if free_roll {
                let (mut swr, mut sw) = (0.0, 0.0);
                for i in 0..n {
                    swr += self.w[i] * self.r[i] * self.r[i];
                    sw += self.w[i];
                }
                let s2 = swr / (sw - 3.0).max(1.0);
                let det = h[0][0] * (h[1][1] * h[2][2] - h[1][2] * h[2][1])
                    - h[0][1] * (h[1][0] * h[2][2] - h[1][2] * h[2][0])
                    + h[0][2] * (h[1][0] * h[2][1] - h[1][1] * h[2][0]);
                let cof = h[0][0] * h[1][1] - h[0][1] * h[1][0];
                var_roll = s2 * cof / det / (self.lever * self.lever);
            }
            let delta = if free_roll {
                solve3(h, g)?
            } else {
                let det = h[0][0] * h[1][1] - h[0][1] * h[0][1];
                if det <= 0.0 {
                    return None;
                }
                [
                    (h[1][1] * g[0] - h[0][1] * g[1]) / det,
                    (h[0][0] * g[1] - h[0][1] * g[0]) / det,
                    0.0,
                ]
            };
            // Inverse composition: W ← W ∘ W(Δ)⁻¹, i.e. θ ← θ − Δθ, d ← d − R(θ)·Δd.
            let dth = delta[2] / self.lever;
            st[2] -= dth;
            let (sn, cs) = st[2].sin_cos();
            st[0] -= cs * delta[0] - sn * delta[1];
            st[1] -= sn * delta[0] + cs * delta[1];
            if !st.iter().all(|v| v.is_finite()) || st[0].abs() > EDGE_PX || st[1].abs() > EDGE_PX {
                return None;
            }
            if delta[0].hypot(delta[1]) + delta[2].abs() < CONVERGED_PX && iter > 0 {
                break;
            }
        }
        let (corr, inliers) = quality?;
        (corr >= MIN_CORRELATION && inliers >= MIN_INLIERS).then_some((st, var_roll))
    }

    /// Weighted correlation between the samples and the template.
    fn correlation(&self) -> f64 {
        let (mut sw, mut st, mut ss) = (0.0, 0.0, 0.0);
        for i in 0..self.pts.len() {
            let w = self.w[i];
            if w > 0.0 {
                sw += w;
                st += w * f64::from(self.tmpl[i]);
                ss += w * self.s[i];
            }
        }
        if sw <= 0.0 {
            return 0.0;
        }
        let (tm, sm) = (st / sw, ss / sw);
        let (mut vtt, mut vss, mut vts) = (0.0, 0.0, 0.0);
        for i in 0..self.pts.len() {
            let w = self.w[i];
            if w > 0.0 {
                let (dt, ds) = (f64::from(self.tmpl[i]) - tm, self.s[i] - sm);
                vtt += w * dt * dt;
                vss += w * ds * ds;
                vts += w * dt * ds;
            }
        }
        if vtt <= 0.0 || vss <= 0.0 {
            0.0
        } else {
            vts / (vtt * vss).sqrt()
        }
    }

    /// Coarse start: the whole-pixel shift (no roll) whose samples correlate best with the
    /// template, over a spread subset of the points; None when nothing correlates.
    fn search(&self, frame: FrameRef<'_>) -> Option<[f64; 3]> {
        let n = self.pts.len();
        let step = n.div_ceil(SEARCH_POINTS).max(1);
        let idx: Vec<usize> = (0..n).step_by(step).collect();
        let t: Vec<f64> = idx.iter().map(|&i| f64::from(self.tmpl[i])).collect();
        let tm = t.iter().sum::<f64>() / t.len() as f64;
        let mut best: Option<(f64, [f64; 3])> = None;
        let mut s = vec![0.0f64; idx.len()];
        for dy in -SEARCH_PX..=SEARCH_PX {
            for dx in -SEARCH_PX..=SEARCH_PX {
                let mut ok = true;
                for (k, &i) in idx.iter().enumerate() {
                    let p = self.pts[i];
                    match sample(frame, [p[0] + dx as f64, p[1] + dy as f64]) {
                        Some(v) => s[k] = f64::from(v),
                        None => {
                            ok = false;
                            break;
                        }
                    }
                }
                if !ok {
                    continue;
                }
                let sm = s.iter().sum::<f64>() / s.len() as f64;
                let (mut vts, mut vss, mut vtt) = (0.0, 0.0, 0.0);
                for (a, b) in t.iter().zip(&s) {
                    vts += (a - tm) * (b - sm);
                    vss += (b - sm) * (b - sm);
                    vtt += (a - tm) * (a - tm);
                }
                let c = if vss > 0.0 && vtt > 0.0 {
                    vts / (vss * vtt).sqrt()
                } else {
                    0.0
                };
                if best.is_none_or(|(bc, _)| c > bc) {
                    best = Some((c, [dx as f64, dy as f64, 0.0]));
                }
            }
        }
        best.filter(|(c, _)| *c > 0.5).map(|(_, st)| st)
    }

    /// The region's points, for tests.
    #[cfg(test)]
    pub fn points(&self) -> &[[f64; 2]] {
        &self.pts
    }
}

/// Σ w·sd·sdᵀ.
fn normal_matrix(sd: &[[f64; 3]], w: &[f64]) -> [[f64; 3]; 3] {
    let mut h = [[0.0f64; 3]; 3];
    for (v, &w) in sd.iter().zip(w) {
        if w <= 0.0 {
            continue;
        }
        for r in 0..3 {
            for c in r..3 {
                h[r][c] += w * v[r] * v[c];
            }
        }
    }
    (h[1][0], h[2][0], h[2][1]) = (h[0][1], h[0][2], h[1][2]);
    h
}

/// Solves a symmetric 3×3 system; None when it is singular for its scale (the product of
/// its diagonal's magnitudes; [`crate::stats::solve3`]).
fn solve3(a: [[f64; 3]; 3], b: [f64; 3]) -> Option<[f64; 3]> {
    let scale = a[0][0].abs() * a[1][1].abs() * a[2][2].abs();
    crate::stats::solve3(a, b, 1e-12 * scale)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::decode::Frame;
    use proptest::prelude::*;
    use rand::{RngExt, SeedableRng};

    /// A smooth random texture (seeded sum of Gaussian blobs), 0..1, defined everywhere.
    struct Texture(Vec<([f64; 2], f64, f64)>);

    impl Texture {
        fn new(seed: u64, centre: [f64; 2], spread: f64) -> Texture {
            let mut rng = rand::rngs::ChaCha8Rng::seed_from_u64(seed);
            Texture(
                (0..160)
                    .map(|_| {
                        (
                            [
                                centre[0] + rng.random_range(-spread..spread),
                                centre[1] + rng.random_range(-spread..spread),
                            ],
                            rng.random_range(1.5..4.0),
                            rng.random_range(-0.3..0.3),
                        )
                    })
                    .collect(),
            )
        }
        fn at(&self, x: f64, y: f64) -> f64 {
            let mut v = 0.5;
            for (c, s, a) in &self.0 {
                let d2 = (x - c[0]).powi(2) + (y - c[1]).powi(2);
                v += a * (-0.5 * d2 / (s * s)).exp();
            }
            v.clamp(0.02, 0.98)
        }
    }

    /// Renders the texture seen through `pose` (plus a gain), each pixel the mean of 4×4
    /// sub-samples; `spin` turns the disc of radius `inner` about the centre by that angle
    /// (a moving part the registration must ignore).
    fn render(tex: &Texture, w: u32, h: u32, pose: Pose, gain: f64, spin: (f64, f64)) -> Frame {
        let inv = |q: [f64; 2]| {
            // p = c + R(−θ)(q − c − d)
            let (s, c) = (-pose.roll).sin_cos();
            let (dx, dy) = (
                q[0] - pose.centre[0] - pose.shift[0],
                q[1] - pose.centre[1] - pose.shift[1],
            );
            [
                pose.centre[0] + c * dx - s * dy,
                pose.centre[1] + s * dx + c * dy,
            ]
        };
        let data = (0..w * h)
            .map(|k| {
                let (x, y) = (f64::from(k % w), f64::from(k / w));
                let mut acc = 0.0;
                for j in 0..16 {
                    let q = [
                        x + (f64::from(j % 4) + 0.5) / 4.0 - 0.5,
                        y + (f64::from(j / 4) + 0.5) / 4.0 - 0.5,
                    ];
                    let mut p = inv(q);
                    let (dx, dy) = (p[0] - pose.centre[0], p[1] - pose.centre[1]);
                    if dx.hypot(dy) < spin.0 {
                        let (s, c) = spin.1.sin_cos();
                        p = [
                            pose.centre[0] + c * dx - s * dy,
                            pose.centre[1] + s * dx + c * dy,
                        ];
                    }
                    acc += tex.at(p[0], p[1]);
                }
                ((gain * acc / 16.0).clamp(0.0, 1.0) * 65535.0).round() as u16
            })
            .collect();
        Frame {
            index: 0,
            width: w,
            height: h,
            bit_depth: 16,
            luma: crate::decode::Luma::U16(data),
            chroma: None,
            damaged: false,
        }
    }

    fn mark(centre: [f64; 2], r0: f64, r1: f64) -> RadialMark {
        RadialMark {
            pivot: centre,
            radius: [r0, r1],
            tighten: None,
            ellipse: None,
        }
    }

    #[test]
    fn recovers_a_known_shift_and_roll_on_a_textured_region() {
        // Synthetic texture with known motion (no stripe at all).
        let (w, h) = (120u32, 120u32);
        let c = [60.0, 60.0];
        let tex = Texture::new(11, c, 40.0);
        let id = Pose {
            centre: c,
            ..Pose::identity()
        };
        let mut est = RigidEstimator::new(&mark(c, 0.0, 30.0), &[], w, h);
        assert!(est.init(render(&tex, w, h, id, 1.0, (0.0, 0.0)).view()));
        assert!(est.roll_measured());
        for (shift, roll_deg, gain) in [
            ([0.3, -0.2], 0.1, 1.0),
            ([1.7, 0.9], -0.3, 0.9),
            ([-2.4, 3.1], 0.5, 1.1),
            ([4.5, -4.2], -0.8, 1.0),
        ] {
            let truth = Pose {
                centre: c,
                shift,
                roll: f64::to_radians(roll_deg),
            };
            let got = est
                .estimate(render(&tex, w, h, truth, gain, (0.0, 0.0)).view())
                .expect("registered");
            // The measured pose (the applied roll waits for `MIN_ROLL_FRAMES` frames, and the
            // applied shift goes with the applied roll).
            let _ = got;
            let e = (est.state[0] - shift[0]).hypot(est.state[1] - shift[1]);
            let er = (est.state[2] - truth.roll).to_degrees().abs();
            assert!(
                e < 0.02 && er < 0.01,
                "{shift:?} {roll_deg}°: {:?}",
                est.state
            );
        }
    }

    #[test]
    fn ignores_a_part_turning_inside_the_fixed_annulus() {
        // The inner disc (radius 16) turns by up to 20° while the annulus around it only moves
        // with the camera: the annulus [18, 34] is the fixed region.
        let (w, h) = (130u32, 130u32);
        let c = [65.0, 65.0];
        let tex = Texture::new(5, c, 45.0);
        let id = Pose {
            centre: c,
            ..Pose::identity()
        };
        let mut est = RigidEstimator::new(&mark(c, 18.0, 34.0), &[], w, h);
        assert!(est.init(render(&tex, w, h, id, 1.0, (16.0, 0.0)).view()));
        for k in 1..6 {
            let truth = Pose {
                centre: c,
                shift: [0.4 * f64::from(k), -0.3 * f64::from(k)],
                roll: f64::to_radians(0.1 * f64::from(k)),
            };
            let spin = (16.0, f64::to_radians(4.0 * f64::from(k)));
            let got = est
                .estimate(render(&tex, w, h, truth, 1.0, spin).view())
                .expect("registered");
            // The measured pose (the applied roll waits for `MIN_ROLL_FRAMES` frames, and the
            // applied shift goes with the applied roll).
            let _ = got;
            let e = (est.state[0] - truth.shift[0]).hypot(est.state[1] - truth.shift[1]);
            let er = (est.state[2] - truth.roll).to_degrees().abs();
            assert!(e < 0.03 && er < 0.02, "step {k}: {:?}", est.state);
        }
    }

    #[test]
    fn a_region_that_is_gone_is_not_registered() {
        let (w, h) = (100u32, 100u32);
        let c = [50.0, 50.0];
        let id = Pose {
            centre: c,
            ..Pose::identity()
        };
        let mut est = RigidEstimator::new(&mark(c, 0.0, 25.0), &[], w, h);
        assert!(est.init(render(&Texture::new(1, c, 35.0), w, h, id, 1.0, (0.0, 0.0)).view()));
        // A different texture in its place.
        let other = render(&Texture::new(2, c, 35.0), w, h, id, 1.0, (0.0, 0.0));
        assert!(est.estimate(other.view()).is_none());
    }

    #[test]
    fn a_plain_ring_does_not_claim_to_measure_roll() {
        // Concentric rings: translation is constrained, roll is not.
        let (w, h) = (100u32, 100u32);
        let c = [50.0, 50.0];
        let data = (0..w * h)
            .map(|k| {
                let (x, y) = (f64::from(k % w) - c[0], f64::from(k / w) - c[1]);
                let r = x.hypot(y);
                (((0.5 + 0.4 * (r / 3.0).sin()) * 255.0).round()) as u8
            })
            .collect();
        let f = Frame::from_u8(0, w, h, data);
        let mut est = RigidEstimator::new(&mark(c, 0.0, 25.0), &[], w, h);
        assert!(est.init(f.view()));
        assert!(!est.roll_measured());
    }

    #[test]
    fn avoided_discs_hold_no_points() {
        let c = [60.0, 60.0];
        let avoid = [([80.0, 60.0], 8.0)];
        let est = RigidEstimator::new(&mark(c, 5.0, 30.0), &avoid, 120, 120);
        assert!(!est.points().is_empty());
        for p in est.points() {
            let r = (p[0] - c[0]).hypot(p[1] - c[1]);
            assert!((6.0..=34.0).contains(&r), "{p:?}");
            assert!((p[0] - 80.0).hypot(p[1] - 60.0) > 8.0, "{p:?}");
        }
    }

    proptest! {
        #![proptest_config(ProptestConfig::with_cases(64))]

        /// Pose::apply is a rigid motion: it keeps distances and moves the centre by `shift`.
        #[test]
        fn pose_is_rigid(
            cx in -50.0f64..50.0, cy in -50.0f64..50.0,
            sx in -5.0f64..5.0, sy in -5.0f64..5.0, roll in -0.1f64..0.1,
            ax in -100.0f64..100.0, ay in -100.0f64..100.0,
            bx in -100.0f64..100.0, by in -100.0f64..100.0,
        ) {
            let p = Pose { centre: [cx, cy], shift: [sx, sy], roll };
            let (a, b) = (p.apply([ax, ay]), p.apply([bx, by]));
            let d0 = (ax - bx).hypot(ay - by);
            let d1 = (a[0] - b[0]).hypot(a[1] - b[1]);
            prop_assert!((d0 - d1).abs() < 1e-9 * (1.0 + d0));
            let c = p.apply([cx, cy]);
            prop_assert!((c[0] - cx - sx).abs() < 1e-9 && (c[1] - cy - sy).abs() < 1e-9);
            // The screen direction of any segment turns by exactly `roll`.
            if d0 > 1.0 {
                let t0 = (by - ay).atan2(bx - ax);
                let t1 = (b[1] - a[1]).atan2(b[0] - a[0]);
                let dt = crate::track::unwrap::wrap_pi(t1 - t0 - roll);
                prop_assert!(dt.abs() < 1e-9);
            }
        }
    }
}
