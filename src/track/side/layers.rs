//! Telling paint from a static line along the bar, by motion, once the whole clip's profiles
//! are in (`mod.rs` keeps one profile P_t(φ) per frame).
//!
//! A lamp's reflection along a round bar sits at one angle on screen whatever the bar's turn
//! (the bar is a surface of revolution), while paint turns with the bar. So:
//!
//! 1. Every narrow ridge of either polarity in the first frame's profile is a candidate.
//! 2. Each candidate's motion: the share of frames in which its neighbourhood of the profile
//!    changed shape (least-squares gain removed, so lighting flicker is not motion). Paint is the
//!    candidate that moves most (ties: the stronger); a static line barely changes, only while
//!    paint passes over it.
//! 3. Static lines are ridges present in the profile's 10 % and 90 % quantiles over time alike
//!    (a feature in nine frames out of ten; a gap between two places the paint visited shows in
//!    one quantile only), away from the paint's first-frame place. Each line's bump over the
//!    chord under it, from the median over time, is subtracted from every frame, and its core
//!    (the bump above a quarter of its height) is where a stripe is not measured at all: paint
//!    over the line cannot be told from the line.
//! 4. The paint is followed (`follow.rs`) on the corrected profiles from its first-frame place;
//!    where it has gone round the back, nothing is left in range to follow, so the frame is null.
//!    Dark paint is read across a bright line where the clip shows how deep it is there
//!    (`see_through.rs`).
//! 5. A line the paint kept crossing (inside a swing's range, or beside where it started) is in
//!    the 90 % quantile as paint and fails step 3's test. So the quantiles are taken again over
//!    the frames in which step 4 put every stripe more than its half-width and a flank away
//!    from each bin, and any line found there and not already known is added and the paint
//!    followed again (a first-frame reading that leaned on such a line made every angle of a
//!    clip 0.8° off, since the first frame is the zero).
//!
//! Part of the track stage: it must never import segment, mechanics, report, `analyze`,
//! `batch`, `find_marks`, `calibrate` or the CLI.

use super::follow::Follower;
use super::see_through::SeeThrough;
use super::{MAX_FACING_DEG, STEP_DEG};

/// Least ridge contrast of a candidate or static line (profile units).
const MIN_RIDGE: f32 = 0.03;
/// Share of a candidate's contrast its neighbourhood must change by to count as moved.
const MOVED: f32 = 0.15;
/// Frames used for the quantiles over time at most (evenly spaced).
const QUANTILE_FRAMES: usize = 2048;

/// The follower's output for the whole clip.
#[derive(Debug, Clone, Default)]
pub(super) struct Solved {
    /// Continuous bar angle per frame, rad.
    pub angle: Vec<Option<f64>>,
    /// Confidence per frame, 0..1.
    pub confidence: Vec<f32>,
    /// Static lines found, bar angles from facing the camera, degrees.
    pub static_lines_deg: Vec<f64>,
    /// Those of them the paint, of the other polarity, was read across (`see_through.rs`).
    pub seen_through_deg: Vec<f64>,
    /// True when nothing along the bar moved in the whole clip (then paint cannot be told
    /// from a reflection by motion).
    pub still: bool,
    /// True when every stripe in the first frame was a static line although something moved:
    /// the paint was not told from the lines, and every frame is null.
    pub unresolved: bool,
    /// The frame in which the paint was first measured, when it could not be followed back to
    /// the first frame (the zero): then every frame is null.
    pub first_measured: Option<usize>,
    /// True when the first frame shows any narrow ridge at all.
    pub any_ridge: bool,
}

#[derive(Debug, Clone, Copy)]
struct Ridge {
    bin: usize,
    polarity: f32,
    contrast: f32,
}

/// Bins either side used for a ridge's flanks (8°).
fn flank() -> usize {
    (8.0 / STEP_DEG) as usize
}

/// Local ridges of `polarity` in `prof` within the measurable range, strongest first, at least
/// 8° apart.
fn ridges(prof: &[f32], phi: &[f64], polarity: f32, min: f32) -> Vec<Ridge> {
    let d = flank();
    let lim = MAX_FACING_DEG.to_radians();
    let r = |k: usize| {
        let c = polarity * prof[k];
        (c - polarity * prof[k - d]).min(c - polarity * prof[k + d])
    };
    let mut out: Vec<Ridge> = Vec::new();
    #[allow(clippy::needless_range_loop)] // k indexes the profile and its flanks alike
    for k in d + 1..prof.len().saturating_sub(d + 1) {
        if phi[k].abs() > lim {
            continue;
        }
        let v = r(k);
        if v >= min && v >= r(k - 1) && v > r(k + 1) {
            out.push(Ridge {
                bin: k,
                polarity,
                contrast: v,
            });
        }
    }
    out.sort_by(|a, b| b.contrast.total_cmp(&a.contrast));
    let mut kept: Vec<Ridge> = Vec::new();
    for c in out {
        if kept.iter().all(|k| k.bin.abs_diff(c.bin) >= d) {
            kept.push(c);
        }
    }
    kept
}

/// Half-width (rad) of a ridge: the bins above half its contrast.
fn half_width(prof: &[f32], r: Ridge) -> f64 {
    let d = flank();
    let p = |k: usize| r.polarity * prof[k];
    let floor = p(r.bin.saturating_sub(d)).max(p((r.bin + d).min(prof.len() - 1)));
    let halfv = floor + 0.5 * (p(r.bin) - floor);
    let (mut lo, mut hi) = (r.bin, r.bin);
    while lo > 0 && p(lo - 1) > halfv && r.bin - lo < d {
        lo -= 1;
    }
    while hi + 1 < prof.len() && p(hi + 1) > halfv && hi - r.bin < d {
        hi += 1;
    }
    (0.5 * (hi - lo + 1) as f64 * STEP_DEG)
        .to_radians()
        .max(1f64.to_radians())
}

/// A static line: its bump over the chord (per bin from `lo`), and its core, rad.
#[derive(Debug, Clone)]
struct Line {
    lo: usize,
    bump: Vec<f32>,
    core: (f64, f64),
    centre: f64,
    polarity: f32,
}

/// The `q` quantiles (0..1) of every bin over the frames `frames`.
fn quantiles(frames: &[Vec<f32>], qs: &[f64]) -> Vec<Vec<f32>> {
    let nb = frames.first().map_or(0, Vec::len);
    let mut out = vec![vec![0.0f32; nb]; qs.len()];
    let mut col = vec![0.0f32; frames.len()];
    for k in 0..nb {
        for (c, f) in col.iter_mut().zip(frames) {
            *c = f[k];
        }
        col.sort_by(f32::total_cmp);
        for (o, q) in out.iter_mut().zip(qs) {
            let i = ((col.len() - 1) as f64 * q).round() as usize;
            o[k] = col[i];
        }
    }
    out
}

/// The bump of a ridge at `k` of `polarity` in `env` over the chord between its flanks.
fn bump_at(env: &[f32], k: usize, polarity: f32) -> f32 {
    let d = flank();
    polarity * (env[k] - 0.5 * (env[k - d] + env[k + d]))
}

/// Static lines in the quantile envelopes (`lo`, `mid`, `hi`: the 10 %, 50 % and 90 %
/// quantiles over time).
fn static_lines(lo: &[f32], mid: &[f32], hi: &[f32], phi: &[f64]) -> Vec<Line> {
    let d = flank();
    let mut lines = Vec::new();
    for pol in [1.0f32, -1.0] {
        // Present in nine frames out of ten: a ridge of this polarity in the quantile that
        // would lose it first (the low one for bright lines, the high one for dark).
        let (first, other) = if pol > 0.0 { (lo, hi) } else { (hi, lo) };
        for r in ridges(first, phi, pol, MIN_RIDGE) {
            let k = r.bin;
            let b_first = bump_at(first, k, pol);
            let b_other = bump_at(other, k, pol);
            if b_other < 0.5 * b_first {
                continue;
            }
            // The bump over the chord, from the median over time.
            let (a, b) = (k - d, k + d);
            let (va, vb) = (mid[a], mid[b]);
            let bump: Vec<f32> = (a..=b)
                .map(|j| {
                    let f = (j - a) as f32 / (b - a) as f32;
                    mid[j] - (va + (vb - va) * f)
                })
                .collect();
            let peak = pol * bump[k - a];
            if peak < MIN_RIDGE {
                continue;
            }
            let mut c0 = k;
            while c0 > a && pol * bump[c0 - 1 - a] >= 0.25 * peak {
                c0 -= 1;
            }
            let mut c1 = k;
            while c1 < b && pol * bump[c1 + 1 - a] >= 0.25 * peak {
                c1 += 1;
            }
            // Only the line's own bump is removed: beyond where it falls under a twentieth of
            // its height, the profile is left as it is.
            let mut e0 = c0;
            while e0 > a && pol * bump[e0 - 1 - a] >= 0.05 * peak {
                e0 -= 1;
            }
            let mut e1 = c1;
            while e1 < b && pol * bump[e1 + 1 - a] >= 0.05 * peak {
                e1 += 1;
            }
            lines.push(Line {
                lo: e0,
                bump: bump[e0 - a..=e1 - a].to_vec(),
                core: (phi[c0], phi[c1]),
                centre: phi[k],
                polarity: pol,
            });
        }
    }
    lines
}

/// Subtracts the static lines' bumps from a profile.
fn correct(prof: &mut [f32], lines: &[Line]) {
    for l in lines {
        for (j, b) in l.bump.iter().enumerate() {
            prof[l.lo + j] -= b;
        }
    }
}

/// Follows the side mark through `frames` (one decoded profile per frame, bins at `phi`).
pub(super) fn solve(frames: &[Vec<f32>], phi: &[f64], stripes: u32) -> Solved {
    let n = frames.len();
    let mut out = Solved {
        angle: vec![None; n],
        confidence: vec![0.0; n],
        static_lines_deg: Vec::new(),
        seen_through_deg: Vec::new(),
        still: false,
        unresolved: false,
        first_measured: None,
        any_ridge: false,
    };
    let Some(p0) = frames.first() else {
        return out;
    };
    let d = flank();
    // Static lines: ridges present in nine frames out of ten.
    let every = n.div_ceil(QUANTILE_FRAMES);
    let sample: Vec<Vec<f32>> = if n >= 8 {
        frames.iter().step_by(every).cloned().collect()
    } else {
        Vec::new()
    };
    let q = if n >= 8 {
        quantiles(&sample, &[0.1, 0.5, 0.9])
    } else {
        Vec::new()
    };
    let mut lines = if n >= 8 {
        static_lines(&q[0], &q[1], &q[2], phi)
    } else {
        Vec::new()
    };
    // 1. Candidates.
    let mut cands: Vec<Ridge> = ridges(p0, phi, 1.0, MIN_RIDGE);
    cands.extend(ridges(p0, phi, -1.0, MIN_RIDGE));
    cands.sort_by(|a, b| b.contrast.total_cmp(&a.contrast));
    cands.truncate(8);
    if cands.is_empty() {
        return out;
    }
    out.any_ridge = true;
    // 2. Motion of each candidate's neighbourhood.
    let moved: Vec<f64> = cands
        .iter()
        .map(|c| {
            let hb = (half_width(p0, *c).to_degrees() / STEP_DEG) as usize;
            let a = c.bin.saturating_sub(hb + d / 2);
            let b = (c.bin + hb + d / 2).min(p0.len() - 1);
            let ref0 = &p0[a..=b];
            let e0: f32 = ref0.iter().map(|v| v * v).sum();
            let count = frames[1..]
                .iter()
                .filter(|f| {
                    let cur = &f[a..=b];
                    let g = cur.iter().zip(ref0).map(|(x, y)| x * y).sum::<f32>() / e0.max(1e-12);
                    let res = (cur
                        .iter()
                        .zip(ref0)
                        .map(|(x, y)| (x - g * y).powi(2))
                        .sum::<f32>()
                        / cur.len() as f32)
                        .sqrt();
                    res > MOVED * c.contrast
                })
                .count();
            count as f64 / (n - 1).max(1) as f64
        })
        .collect();
    let most = moved.iter().copied().fold(0.0, f64::max);
    out.still = n >= 8 && most < 0.02;
    // A candidate on a static line of its polarity is that line (its neighbourhood changes only
    // as paint passes), unless nothing moved at all: then it may be paint at rest.
    let on_line = |c: &Ridge| {
        let tol = half_width(p0, *c).max(1.5f64.to_radians());
        lines
            .iter()
            .any(|l| l.polarity == c.polarity && (l.centre - phi[c.bin]).abs() <= tol)
    };
    let paint = (0..cands.len())
        .filter(|&i| out.still || !on_line(&cands[i]))
        .filter(|&i| moved[i] >= 0.8 * most)
        .max_by(|&a, &b| cands[a].contrast.total_cmp(&cands[b].contrast));
    let Some(paint) = paint else {
        // Every stripe seen in the first frame is a static line, yet something moved.
        out.unresolved = true;
        out.static_lines_deg = lines.iter().map(|l| l.centre.to_degrees()).collect();
        return out;
    };
    let pr = cands[paint];
    let half = half_width(p0, pr);
    if out.still {
        lines.retain(|l| {
            !(l.polarity == pr.polarity && (l.centre - phi[pr.bin]).abs() <= 1.5f64.to_radians())
        });
    }
    let ctx = Paint {
        frames,
        phi,
        stripes,
        p0,
        pr,
        half,
        sample: &sample,
        q: &q,
    };
    follow_paint(&ctx, lines.clone(), &mut out);
    // Lines the quantiles over the whole clip miss because the paint kept crossing them (a
    // line inside a swing's range, or beside the paint's first-frame place): read again on the
    // frames where the paint was elsewhere, and the paint followed again with them.
    if n >= 8 {
        let extra: Vec<Line> = paint_free_lines(&ctx, &out.angle)
            .into_iter()
            .filter(|l| {
                // Not one already taken out: its centre outside every known line's bump.
                lines.iter().all(|o| {
                    let (a, b) = (phi[o.lo], phi[o.lo + o.bump.len() - 1]);
                    o.polarity != l.polarity || l.centre < a || l.centre > b
                })
            })
            .collect();
        if !extra.is_empty() {
            let mut again = Solved {
                angle: vec![None; n],
                confidence: vec![0.0; n],
                any_ridge: true,
                still: out.still,
                ..Solved::default()
            };
            lines.extend(extra);
            follow_paint(&ctx, lines, &mut again);
            out = again;
        }
    }
    out
}

/// Static lines read on the frames where the paint was elsewhere: per bin, the 10 %, 50 % and
/// 90 % quantiles of the profile over the sampled frames in which every stripe (at the
/// followed `angle`) lay more than its half-width and a flank away, then the same test as over
/// the whole clip. A line the paint kept crossing (inside a swing's range, or beside where it
/// started) is present in those frames alike. Bins with fewer than eight such frames are not
/// read, and no line is kept whose ridge reaches one.
fn paint_free_lines(ctx: &Paint<'_>, angle: &[Option<f64>]) -> Vec<Line> {
    const MIN_FRAMES: usize = 8;
    let (frames, phi) = (ctx.frames, ctx.phi);
    let n = frames.len();
    let nb = ctx.p0.len();
    let d = flank();
    let every = n.div_ceil(QUANTILE_FRAMES);
    let clear = ctx.half + (d as f64 * STEP_DEG).to_radians();
    let stripes = ctx.stripes.max(1);
    let spacing = std::f64::consts::TAU / f64::from(stripes);
    let mut cols: Vec<Vec<f32>> = vec![Vec::new(); nb];
    for (i, f) in frames.iter().enumerate().step_by(every) {
        let Some(th) = angle[i] else { continue };
        for (k, col) in cols.iter_mut().enumerate() {
            let near = (0..stripes).any(|j| {
                let c = th + f64::from(j) * spacing;
                let off = (phi[k] - c).rem_euclid(std::f64::consts::TAU);
                off.min(std::f64::consts::TAU - off) <= clear
            });
            if !near {
                col.push(f[k]);
            }
        }
    }
    let dense: Vec<bool> = cols.iter().map(|c| c.len() >= MIN_FRAMES).collect();
    let mut env = [vec![0.0f32; nb], vec![0.0f32; nb], vec![0.0f32; nb]];
    for (k, col) in cols.iter_mut().enumerate() {
        if !dense[k] {
            // Not read: the whole clip's quantiles stand in, and no line may reach here.
            for (e, qk) in env.iter_mut().zip(ctx.q) {
                e[k] = qk[k];
            }
            continue;
        }
        col.sort_by(f32::total_cmp);
        for (e, qv) in env.iter_mut().zip([0.1, 0.5, 0.9]) {
            e[k] = col[((col.len() - 1) as f64 * qv).round() as usize];
        }
    }
    static_lines(&env[0], &env[1], &env[2], phi)
        .into_iter()
        .filter(|l| {
            let k = phi.partition_point(|&p| p < l.centre);
            k >= d && k + d < nb && (k - d..=k + d).all(|j| dense[j])
        })
        .collect()
}

/// The paint chosen in the first frame and what following it needs.
struct Paint<'a> {
    frames: &'a [Vec<f32>],
    phi: &'a [f64],
    stripes: u32,
    p0: &'a [f32],
    pr: Ridge,
    half: f64,
    /// The frames the quantiles were taken over, and the 10 %, 50 % and 90 % quantiles.
    sample: &'a [Vec<f32>],
    q: &'a [Vec<f32>],
}

/// Follows the paint through the clip with the static lines `lines` taken out (steps 3 and 4
/// of the module's doc), filling `out`'s angles, confidences and line lists.
fn follow_paint(ctx: &Paint<'_>, mut lines: Vec<Line>, out: &mut Solved) {
    let Paint {
        frames,
        phi,
        stripes,
        p0,
        pr,
        half,
        sample,
        q,
    } = *ctx;
    let n = frames.len();
    out.static_lines_deg = lines.iter().map(|l| l.centre.to_degrees()).collect();
    // Bright lines (a lamp's reflection) with dark paint: the paint is read across them where
    // the clip determines how deep it shows there (`see_through.rs`); else their cores are
    // not measured. The model is of a reflection added to what the surface returns, so a dark
    // static line (a shadow, a groove) is never read across.
    let across = |l: &Line| l.polarity > 0.0 && pr.polarity < 0.0;
    let see = if n >= 8 && lines.iter().any(across) {
        let mut s = vec![0.0f32; p0.len()];
        for l in lines.iter().filter(|l| across(l)) {
            for (j, b) in l.bump.iter().enumerate() {
                s[l.lo + j] += (l.polarity * b).max(0.0);
            }
        }
        // The envelope the dark paint does not reach: the 90 % quantile over time.
        SeeThrough::fit(sample, &q[2], s, pr.polarity, phi)
    } else {
        None
    };
    if see.is_some() {
        out.seen_through_deg = lines
            .iter()
            .filter(|l| across(l))
            .map(|l| l.centre.to_degrees())
            .collect();
        lines.retain(|l| !across(l));
    }
    let cores: Vec<(f64, f64)> = lines.iter().map(|l| l.core).collect();
    let correct = |prof: &mut Vec<f32>| {
        correct(prof, &lines);
        if let Some(st) = &see {
            st.apply(prof);
        }
    };
    // 4. Follow the paint on the corrected profiles.
    let mut f = Follower {
        phi,
        stripes: stripes.max(1),
        polarity: pr.polarity,
        half,
        min_contrast: (0.25 * pr.contrast).max(0.02),
        cores: &cores,
        last: None,
        vel: 0.0,
        lost: false,
        width: None,
    };
    let mut buf = p0.to_vec();
    correct(&mut buf);
    // The first frame's reading, or, where the paint sits on or beside a line there, the
    // paint's first-frame place as the guess the follower reacquires from.
    match f.centroid(&buf, phi[pr.bin], half + 1f64.to_radians()) {
        Some((c, pc, w)) => {
            f.width = Some(w);
            f.last = Some(c);
            out.angle[0] = Some(c);
            out.confidence[0] = (pc / 0.2).clamp(0.0, 1.0);
        }
        None => {
            f.last = Some(phi[pr.bin]);
            f.lost = true;
        }
    }
    for (i, p) in frames.iter().enumerate().skip(1) {
        buf.clear();
        buf.extend_from_slice(p);
        correct(&mut buf);
        if let Some((th, pc)) = f.step(&buf) {
            out.angle[i] = Some(th);
            out.confidence[i] = (pc / 0.2).clamp(0.0, 1.0);
        }
    }
    if out.angle[0].is_none() {
        carry_back(frames, &correct, &f, out);
    }
}

/// Carries the reading back from the first measured frame to the first frame, following the
/// paint backwards frame by frame. Angles are relative to the first frame, so when the paint
/// cannot be followed all the way back (it sits on or beside a static line there), no frame
/// is read at all and `first_measured` names the frame where the stripe was first measured.
fn carry_back(
    frames: &[Vec<f32>],
    correct: &impl Fn(&mut Vec<f32>),
    f: &Follower<'_>,
    out: &mut Solved,
) {
    let Some(i0) = out.angle.iter().position(Option::is_some) else {
        return;
    };
    let mut b = f.clone();
    b.last = out.angle[i0];
    b.vel = 0.0;
    b.lost = false;
    let mut buf = Vec::new();
    for i in (0..i0).rev() {
        buf.clear();
        buf.extend_from_slice(&frames[i]);
        correct(&mut buf);
        match b.step(&buf) {
            Some((th, pc)) => {
                out.angle[i] = Some(th);
                out.confidence[i] = (pc / 0.2).clamp(0.0, 1.0);
            }
            None => break,
        }
    }
    if out.angle[0].is_none() {
        out.first_measured = Some(i0);
        out.angle.iter_mut().for_each(|a| *a = None);
        out.confidence.iter_mut().for_each(|c| *c = 0.0);
    }
}
