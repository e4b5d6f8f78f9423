//! A mark tracked on colour, checked against its own part's brightness texture: where lossy
//! video codes colour coarser and later than brightness, the paint seen in the chroma planes
//! can stay behind the part that carries it, and a colour track then reads a turn short while
//! every per-frame check passes. Part of the track stage: it must never import segment,
//! mechanics, report, `analyze`, `batch` or the CLI.
//!
//! Why it happens: an inter-coded frame (H.264, HEVC) is predicted from earlier ones by
//! motion vectors that encoders choose on luma, and chroma's residual is quantised more
//! coarsely (it carries a quarter of the samples at 4:2:0 and a larger quantiser step; ITU-T
//! H.264, §8.5.8, chroma QP derivation; the clause number *from memory*). A stripe whose contrast is only in colour, on a part
//! whose brightness texture moves it, can be left where it was (*common practice*: "colour
//! smear" on low-bit-rate video).
//!
//! The check: the part's own luma texture (brushing, mottle, pits, a recess) turns with the
//! paint, so its rotation since the first frame is a second, independent measure of the same
//! angle. Every [`CHECK_STRIDE`]-th frame the mark's annulus is sampled on luma, each ring
//! normalised to zero mean and unit variance (so a lamp's flicker does not matter), and
//! correlated with the first frame's over angular shifts within [`SEARCH_DEG`] of the colour
//! track's reading; the best shift, refined by a parabola through its neighbours, is the
//! texture's rotation (cross-correlation registration; Zitová & Flusser, "Image registration
//! methods: a survey", Image and Vision Computing 21 (2003) 977–1000, §4.1 on correlation methods; section
//! *from memory*). A correlation
//! peak below [`MIN_CORRELATION`] means the part is too plain (or too changed) to be a check,
//! and that frame is not judged.
//!
//! Only one direction of disagreement is acted on: the colour track turning *less* than the
//! texture. Anything in the annulus that does not turn (a glint, a washer, background beyond
//! a small part) pulls the texture's estimate towards no turn, so it can hide a lag but never
//! make one; a colour track turning more than the texture is not evidence against it. Frames
//! are judged only where the mark is at rest (see [`lagging_runs`]), since in fast motion the
//! two planes' blur and the codec's prediction differ for reasons of their own.

use super::polar::PolarGrid;
use crate::decode::FrameRef;

// The stride, search span and correlation floor below are design choices set before any
// scene was run (a lag persists over many frames, so a quarter of them suffice; ±4° is five
// times the largest raw lag at rest later seen on the tuning seeds, 0.73°); only `LAG_SIGMAS` and
// `LAG_RUN_CHECKS` came from a tuning seed's false alarm (seed 144; docs/accuracy.md).

/// One frame in this many is checked.
pub(crate) const CHECK_STRIDE: usize = 4;
/// The texture's rotation is searched this far either side of the colour track's, degrees.
pub(crate) const SEARCH_DEG: f64 = 4.0;
/// A check needs the two frames' normalised textures to correlate at least this well.
pub(crate) const MIN_CORRELATION: f64 = 0.5;
/// A colour track that turned less than its texture by more than this (degrees) at rest is
/// behind: above the 0.20° per-frame accuracy target for compressed clips, so a lag this size
/// would already fail it.
pub(crate) const LAG_DEG: f64 = 0.3;
/// A lag must exceed this many standard deviations of the texture estimate's own noise.
pub(crate) const LAG_SIGMAS: f64 = 4.0;
/// Lagging checks needed in a row (judged ones) before frames are made null.
pub(crate) const LAG_RUN_CHECKS: usize = 2;
/// A mark is at rest at a checked frame when its colour angle moved less than this (degrees)
/// over the [`CHECK_STRIDE`] frames either side.
pub(crate) const REST_DEG: f64 = 0.3;
/// Rings whose luma spread (0..1 scale) is below this are too plain to carry texture.
const MIN_RING_SD: f32 = 0.004;

/// The first frame's texture and the checks made since.
#[derive(Debug, Clone)]
pub(crate) struct TextureCheck {
    /// First frame's luma on the grid, each ring normalised; plain rings are zero.
    reference: Vec<f32>,
    /// Rings that carry texture in the first frame.
    textured: Vec<bool>,
    /// Scratch: the current frame's samples, its textured rings and the search's scores (kept
    /// so that a check allocates nothing).
    buf: Vec<f32>,
    textured_now: Vec<bool>,
    scores: Vec<f64>,
    /// The colour track's raw angle in the first frame, rad.
    raw0: f64,
    /// Per checked frame: sample index, the colour track's turn and the texture's, rad.
    pub checks: Vec<(usize, f64, f64)>,
}

/// Each ring of `v` (`rings × bins`) to zero mean and unit variance; rings spread less than
/// [`MIN_RING_SD`] become zero and are marked untextured.
fn normalise(v: &mut [f32], bins: usize, textured: &mut [bool]) {
    for (ring, tex) in v.chunks_mut(bins).zip(textured.iter_mut()) {
        let n = ring.len() as f32;
        let mean = ring.iter().sum::<f32>() / n;
        let var = ring.iter().map(|x| (x - mean) * (x - mean)).sum::<f32>() / n;
        let sd = var.sqrt();
        if sd < MIN_RING_SD {
            ring.fill(0.0);
            *tex = false;
        } else {
            ring.iter_mut().for_each(|x| *x = (*x - mean) / sd);
        }
    }
}

impl TextureCheck {
    /// Learns the texture of the first frame's luma on `grid` moved by `shift`, where the
    /// colour track read `raw0` (rad). None when no ring carries texture.
    pub fn learn(
        frame: FrameRef<'_>,
        grid: &PolarGrid,
        shift: [f64; 2],
        raw0: f64,
    ) -> Option<TextureCheck> {
        let mut reference = vec![0.0f32; grid.rings * grid.bins];
        grid.sample(&grid.prepare(frame, shift), &mut reference);
        let mut textured = vec![true; grid.rings];
        normalise(&mut reference, grid.bins, &mut textured);
        textured.iter().any(|&t| t).then(|| TextureCheck {
            buf: vec![0.0; reference.len()],
            textured_now: textured.clone(),
            scores: Vec::new(),
            reference,
            textured,
            raw0,
            checks: Vec::new(),
        })
    }

    /// Checks sample `i` (a frame whose colour track read `raw`, rad) when it is due; records
    /// the texture's turn when its correlation is good enough.
    pub fn check(
        &mut self,
        i: usize,
        frame: FrameRef<'_>,
        grid: &PolarGrid,
        shift: [f64; 2],
        raw: f64,
    ) {
        if !i.is_multiple_of(CHECK_STRIDE) {
            return;
        }
        grid.sample(&grid.prepare(frame, shift), &mut self.buf);
        self.textured_now.clone_from(&self.textured);
        normalise(&mut self.buf, grid.bins, &mut self.textured_now);
        let textured = &self.textured_now;
        let n = grid.bins as i64;
        let step = grid.step();
        let turn = raw - self.raw0;
        let s0 = (turn / step).round() as i64;
        let w = ((SEARCH_DEG.to_radians() / step).ceil() as i64).max(3);
        let used = textured.iter().filter(|&&t| t).count();
        if used == 0 {
            return;
        }
        let norm = (used * grid.bins) as f64;
        // C(s) = Σ_k Σ_j now[k][j + s]·first[k][j]: the first frame's texture moved by s bins.
        let corr = |s: i64| -> f64 {
            let mut sum = 0.0f64;
            for (k, &t) in textured.iter().enumerate() {
                if !t {
                    continue;
                }
                let now = &self.buf[k * grid.bins..(k + 1) * grid.bins];
                let first = &self.reference[k * grid.bins..(k + 1) * grid.bins];
                let s = s.rem_euclid(n) as usize;
                let (a, b) = now.split_at(s);
                // now[j + s] for j < n − s is b[j]; for the rest, a[j − (n − s)].
                let m = b.len();
                sum += f64::from(dot(b, &first[..m]) + dot(a, &first[m..]));
            }
            sum / norm
        };
        let mut scores = std::mem::take(&mut self.scores);
        scores.clear();
        scores.extend((s0 - w - 1..=s0 + w + 1).map(corr));
        let (best, peak) = scores[1..scores.len() - 1]
            .iter()
            .enumerate()
            .max_by(|a, b| a.1.total_cmp(b.1))
            .map(|(j, &v)| (j + 1, v))
            .expect("the search window is not empty");
        let (l, r) = (scores[best - 1], scores[best + 1]);
        self.scores = scores;
        if peak < MIN_CORRELATION {
            return;
        }
        let den = l - 2.0 * peak + r;
        let frac = if den < 0.0 {
            (0.5 * (l - r) / den).clamp(-0.5, 0.5)
        } else {
            0.0
        };
        let s = (s0 - w - 1 + best as i64) as f64 + frac;
        self.checks.push((i, turn, s * step));
    }
}

/// Σ a[j]·b[j] over the shorter of the two, in eight running sums (so the compiler can keep
/// them in one vector register; a single running sum is a chain of dependent additions,
/// and this search runs 25 of them over the whole annulus every fourth frame).
fn dot(a: &[f32], b: &[f32]) -> f32 {
    let n = a.len().min(b.len());
    let (a, b) = (&a[..n], &b[..n]);
    let mut acc = [0.0f32; 8];
    let (ca, cb) = (a.chunks_exact(8), b.chunks_exact(8));
    let tail: f32 = ca
        .remainder()
        .iter()
        .zip(cb.remainder())
        .map(|(x, y)| x * y)
        .sum();
    for (x, y) in ca.zip(cb) {
        for l in 0..8 {
            acc[l] += x[l] * y[l];
        }
    }
    acc.iter().sum::<f32>() + tail
}

/// Runs of samples where a colour-tracked mark lags its own texture at rest: each run spans
/// from the sample after the last agreeing check before a lagging one to the sample before
/// the next agreeing check (or the end), with the largest lag seen in it, degrees. `angle`
/// is the mark's raw angle per sample (rad, None where lost). The lag is judged in the
/// direction the texture turned.
///
/// The texture's estimate has noise of its own (a plain or noisy part, a lamp's flicker): its
/// standard deviation is taken from the differences of successive judged lags (a lag held
/// over frames cancels in them), 1.4826 × median |difference| / √2 (the median absolute
/// deviation about zero, which the differences of a held lag are centred on). A check lags when it is behind by more
/// than [`LAG_DEG`] and [`LAG_SIGMAS`] of that noise; a run needs [`LAG_RUN_CHECKS`] lagging
/// checks in a row, so one outlying check is never a run.
pub(crate) fn lagging_runs(
    checks: &[(usize, f64, f64)],
    angle: &[Option<f64>],
) -> Vec<(usize, usize, f64)> {
    let at_rest = |i: usize| {
        let a = angle.get(i).copied().flatten();
        let lo = angle.get(i.saturating_sub(CHECK_STRIDE)).copied().flatten();
        let hi = angle.get(i + CHECK_STRIDE).copied().flatten();
        match (a, lo, hi) {
            (Some(a), Some(lo), Some(hi)) => {
                (a - lo).abs().to_degrees() < REST_DEG && (hi - a).abs().to_degrees() < REST_DEG
            }
            _ => false,
        }
    };
    // Per judged check: its sample and its lag (degrees, positive when the colour track
    // turned less than the texture, in the texture's direction of turn).
    let judged: Vec<(usize, f64)> = checks
        .iter()
        .filter(|c| at_rest(c.0))
        .map(|&(i, colour, texture)| {
            let lag = (texture - colour) * texture.signum();
            (i, lag.to_degrees())
        })
        .collect();
    let steps: Vec<f64> = judged.windows(2).map(|w| (w[1].1 - w[0].1).abs()).collect();
    let sigma = crate::stats::median(&steps).map_or(0.0, |m| 1.4826 * m / std::f64::consts::SQRT_2);
    let bar = LAG_DEG.max(LAG_SIGMAS * sigma);
    let mut runs: Vec<(usize, usize, f64)> = Vec::new();
    let mut last_agree: Option<usize> = None;
    // The open run: its first sample, lagging checks so far, the worst lag.
    let mut open: Option<(usize, usize, f64)> = None;
    let close = |open: Option<(usize, usize, f64)>, to: usize, runs: &mut Vec<_>| {
        if let Some((from, n, worst)) = open
            && n >= LAG_RUN_CHECKS
        {
            runs.push((from, to, worst));
        }
    };
    for &(i, lag) in &judged {
        if lag > bar {
            let from = last_agree.map_or(0, |a| a + 1);
            open = Some(match open {
                Some((f, n, worst)) => (f, n + 1, worst.max(lag)),
                None => (from, 1, lag),
            });
        } else {
            close(open.take(), i.saturating_sub(1), &mut runs);
            last_agree = Some(i);
        }
    }
    close(open, angle.len().saturating_sub(1), &mut runs);
    runs
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn dot_is_the_sum_of_products_at_every_length() {
        for n in [0usize, 1, 7, 8, 9, 23, 64, 963] {
            let a: Vec<f32> = (0..n).map(|i| ((i * 7 % 13) as f32 - 6.0) * 0.25).collect();
            let b: Vec<f32> = (0..n).map(|i| ((i * 5 % 11) as f32 - 5.0) * 0.5).collect();
            let want: f64 = a.iter().zip(&b).map(|(x, y)| f64::from(x * y)).sum();
            assert!((f64::from(dot(&a, &b)) - want).abs() < 1e-3, "{n}");
            // Only the shorter length counts.
            assert_eq!(dot(&a, &b[..n / 2]), dot(&a[..n / 2], &b[..n / 2]));
        }
    }
    use crate::decode::Frame;
    use crate::rig::{RadialMark, Spin};

    /// A part's surface: smooth stripes of brightness across angle and radius (no paint),
    /// turned by `turn` (rad, from +x towards +y) about (60, 60), 4×4 sub-samples a pixel.
    fn part(turn: f64) -> Frame {
        let (w, h) = (120u32, 120u32);
        let data = (0..w * h)
            .map(|k| {
                let (x, y) = (f64::from(k % w), f64::from(k / w));
                let mut acc = 0.0;
                for j in 0..16 {
                    let dx = x + (f64::from(j % 4) + 0.5) / 4.0 - 0.5 - 60.0;
                    let dy = y + (f64::from(j / 4) + 0.5) / 4.0 - 0.5 - 60.0;
                    let (r, phi) = (dx.hypot(dy), dy.atan2(dx) - turn);
                    acc += 0.5
                        + 0.15 * (7.0 * phi + r / 3.0).sin()
                        + 0.1 * (13.0 * phi - r / 5.0).cos();
                }
                (acc / 16.0 * 255.0).round() as u8
            })
            .collect();
        Frame::from_u8(0, w, h, data)
    }

    fn grid() -> PolarGrid {
        let mark = RadialMark {
            pivot: [60.0, 60.0],
            radius: [15.0, 45.0],
            tighten: Some(Spin::Cw),
            ellipse: None,
        };
        PolarGrid::new(&mark, 120, 120)
    }

    #[test]
    fn the_texture_turn_is_measured_whatever_the_colour_track_says() {
        let g = grid();
        let first = part(0.0);
        let mut tex = TextureCheck::learn(first.view(), &g, [0.0, 0.0], 0.0).unwrap();
        let turn = 3.0f64.to_radians();
        let moved = part(turn);
        // The colour track reads a degree short; the texture must still read the turn.
        let colour = turn - 1.0f64.to_radians();
        tex.check(CHECK_STRIDE, moved.view(), &g, [0.0, 0.0], colour);
        let &(i, c, t) = tex.checks.last().expect("a textured part is checked");
        assert_eq!(i, CHECK_STRIDE);
        assert!((c - colour).abs() < 1e-12);
        assert!(
            (t - turn).abs().to_degrees() < 0.05,
            "texture turn {:.3}°",
            t.to_degrees()
        );
        // Frames between strides are not checked.
        tex.check(CHECK_STRIDE + 1, moved.view(), &g, [0.0, 0.0], colour);
        assert_eq!(tex.checks.len(), 1);
    }

    #[test]
    fn a_plain_part_is_no_check() {
        let g = grid();
        let plain = Frame::from_u8(0, 120, 120, vec![128; 120 * 120]);
        assert!(TextureCheck::learn(plain.view(), &g, [0.0, 0.0], 0.0).is_none());
    }

    /// Checks every stride over 100 samples at rest at `angle_deg`, with the texture's turn
    /// given per sample.
    fn checks(colour_deg: f64, texture: impl Fn(usize) -> f64) -> Vec<(usize, f64, f64)> {
        (0..100)
            .step_by(CHECK_STRIDE)
            .map(|i| (i, colour_deg.to_radians(), texture(i).to_radians()))
            .collect()
    }

    #[test]
    fn a_colour_track_behind_its_texture_at_rest_is_a_run_to_the_next_agreement() {
        let angle = vec![Some(5f64.to_radians()); 100];
        // Behind by 1° from sample 40 to 68, agreeing again from 72.
        let c = checks(5.0, |i| if (40..=68).contains(&i) { 6.0 } else { 5.0 });
        let runs = lagging_runs(&c, &angle);
        assert_eq!(runs.len(), 1);
        let (from, to, worst) = runs[0];
        assert_eq!((from, to), (37, 71));
        assert!((worst - 1.0).abs() < 1e-9);
        // A lag that lasts to the end runs to the last sample.
        let c = checks(5.0, |i| if i >= 40 { 6.0 } else { 5.0 });
        assert_eq!(lagging_runs(&c, &angle)[0].1, 99);
    }

    #[test]
    fn a_colour_track_ahead_of_its_texture_or_within_tolerance_is_kept() {
        let angle = vec![Some(5f64.to_radians()); 100];
        // Something static pulls the texture's estimate towards no turn: the colour reads more.
        assert!(lagging_runs(&checks(5.0, |_| 4.0), &angle).is_empty());
        assert!(lagging_runs(&checks(5.0, |_| 5.0 + 0.9 * LAG_DEG), &angle).is_empty());
        // Turning the other way, a lag is the colour reading less of that turn.
        let back = vec![Some((-5f64).to_radians()); 100];
        assert_eq!(lagging_runs(&checks(-5.0, |_| -6.0), &back).len(), 1);
        assert!(lagging_runs(&checks(-5.0, |_| -4.0), &back).is_empty());
    }

    #[test]
    fn a_noisy_texture_needs_a_lag_beyond_its_noise_held_over_checks() {
        let angle = vec![Some(5f64.to_radians()); 100];
        // Texture noise of ±0.15° (alternating), one check 0.5° behind: not a run.
        let noise = |i: usize| {
            if (i / CHECK_STRIDE).is_multiple_of(2) {
                0.15
            } else {
                -0.15
            }
        };
        let c = checks(5.0, |i| 5.0 + noise(i) + if i == 48 { 0.5 } else { 0.0 });
        assert!(lagging_runs(&c, &angle).is_empty());
        // The same noise with a held 0.5° lag: within four of its standard deviations
        // (1.4826 × median |±0.3| / √2 ≈ 0.31°), so not judged either.
        let c = checks(5.0, |i| 5.0 + noise(i) + if i >= 48 { 0.5 } else { 0.0 });
        assert!(lagging_runs(&c, &angle).is_empty());
        // A held 2° lag is.
        let c = checks(5.0, |i| 5.0 + noise(i) + if i >= 48 { 2.0 } else { 0.0 });
        assert_eq!(lagging_runs(&c, &angle).len(), 1);
    }

    #[test]
    fn frames_in_motion_are_not_judged() {
        // Turning 0.2° a sample: never at rest, so even a large lag is not judged.
        let angle: Vec<Option<f64>> = (0..100)
            .map(|i| Some((0.2 * i as f64).to_radians()))
            .collect();
        assert!(lagging_runs(&checks(5.0, |_| 8.0), &angle).is_empty());
    }
}
