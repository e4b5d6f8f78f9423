//! The angle of one radial stripe in one frame, from the polar samples of its annulus.
//!
//! Method, per frame (all buffers are owned by the tracker and reused; nothing is allocated):
//! 1. Sample the annulus on the coarse grid: a few of the rings (at most `COARSE_RINGS`), whole,
//!    with angular bins about a quarter of the stripe's width apart (a [`PolarGrid`] built
//!    once the first frame has shown the stripe).
//! 2. Normalise each coarse ring by its own mean and noise level (the noise is estimated from
//!    differences of neighbouring samples), so a global gain or offset change (lighting flicker)
//!    leaves every score unchanged.
//! 3. Coarse search over the whole circle: per ring, a box of the stripe's width against the
//!    ring mean, signed by the stripe's polarity, clipped to a fraction of the stripe's own
//!    first-frame contrast, and summed over rings after shifting each ring by its own stripe
//!    offset. Clipping makes a blob (a specular highlight) that covers a few rings score less
//!    than the stripe, which crosses all of them. Among the local maxima, a soft prior favours
//!    the angle predicted from the recent velocity; the penalty is mild so a blow that jumps
//!    tens of degrees in one frame is still followed.
//! 4. The half-maximum points of that score give the stripe's centre and its width in this
//!    frame; a width above the first frame's means motion blur, and the fine windows widen.
//! 5. Fine centre per ring, on the full grid (every ring; equal angular bins, 0.75 px apart on
//!    the middle ring, and every m-th bin read on inner rings where they are closer than
//!    0.75 px), sampled only in the window that ring's centroid reads: the centroid of the
//!    stripe's excess over a straight baseline drawn through the two flanks, with a window
//!    re-centred on the estimate until it stops moving (so the window is symmetric about the
//!    answer and truncation does not bias it). This is
//!    the brightness-weighted centroid refinement of Crocker & Grier (1996), applied along a
//!    ring (J. Colloid Interface Sci. 179, 1996). Each ring's window starts at the coarse prediction moved by the
//!    median of the last three good rings' moves: the coarse centre's error is common to all
//!    rings, so the window starts near its answer and re-centres fewer times.
//! 6. The ring centres, less each ring's offset learnt in the first frame, are combined with
//!    inverse-variance weights (contrast² × radius²) and Tukey's biweight (Tukey's bisquare
//!    M-estimator, c = 4.685 × scale, scale = 1.4826 × MAD), which drops rings spoilt by a
//!    highlight, a compression block or the pivot's hub. A ring whose window or flanks reach a
//!    feature marked in the first frame that does not turn with the part (a lamp's glint; one
//!    not judged yet counts too) is left out first (`distractor.rs`): a feature spanning many
//!    rings pulls them all alike, which the biweight cannot see.
//!
//! The first frame is sampled whole on the full grid. It decides the stripe's polarity (bright
//! or dark paint, found by contrast, so its colour need not be known), its width, each ring's
//! offset (a stripe that misses the pivot a little sits at a different angle on each ring), the
//! reference contrast that later frames are judged against, and each ring's noise level
//! relative to its nearest coarse ring (later frames scale the coarse rings' noise by it).
//!
//! Cost: a 1280×720 clip's mark of 32 rings × 964 bins is about 31,000 samples whole; per later
//! frame the coarse grid and the fine windows take a few thousand (docs/performance.md).
//!
//! Part of the track stage: it must never import segment, mechanics, report, `analyze`,
//! `batch`, `find_marks`, `calibrate` or the CLI.

use std::f64::consts::PI;

use super::polar::{ColourWeights, LatticeTaps, PolarGrid, Prepared};
use crate::decode::FrameRef;

mod coarse;
mod distractor;
mod fine;
mod init;
mod measure;
mod robust;

use coarse::Coarse;
use distractor::Distractors;

/// Candidate stripe half-widths tried in the first frame, px of arc.
const HALF_WIDTHS_PX: [f64; 11] = [1.0, 1.5, 2.0, 3.0, 4.0, 5.5, 7.0, 9.0, 12.0, 16.0, 21.0];
/// Per-ring contrast (excess / noise) a ring needs to count.
const RING_MIN_Z: f64 = 2.5;
/// Median per-ring contrast needed in the first frame to accept a stripe.
const INIT_MIN_Z: f64 = 4.0;
/// Fraction of rings that must show the stripe in the first frame.
const INIT_MIN_RINGS: f64 = 0.5;
/// A frame's median ring contrast must reach this fraction of the first frame's.
const LOST_Z_FRACTION: f64 = 0.15;
/// Fraction of rings that must agree for a measurement to stand.
const MIN_INLIER_FRACTION: f64 = 0.4;
/// Prior: a candidate this far from the prediction loses `PRIOR_WEIGHT` of the reference score.
const PRIOR_SPAN_RAD: f64 = PI / 2.0;
const PRIOR_WEIGHT: f64 = 0.3;
/// Rings used by the coarse search at most.
const COARSE_RINGS: usize = 4;
/// Coarse bins per stripe half-width on the outermost coarse ring, at least.
const COARSE_BINS_PER_HALF_WIDTH: f64 = 1.5;
/// Fewest coarse bins around the circle.
const MIN_COARSE_BINS: usize = 90;
/// The fine centre reads every m-th bin of a ring whose bins are closer than this, px of arc
/// (the grid's bins are equal angles, so an inner ring's are far closer than an outer one's).
const FINE_SPACING_PX: f64 = 0.75;
/// The fine centre's window stops following its centroid when a step is shorter than this,
/// bins.
const FINE_STOP_BINS: f64 = 1e-3;
/// Tukey biweight tuning constant (95 % efficiency at the normal distribution).
const TUKEY_C: f64 = 4.685;
/// The first frame's stripe must stand this far above the annulus's own texture: its coarse
/// score's peak over the score elsewhere on the circle, in robust standard deviations
/// ([`Coarse::significance`]). Below it the "stripe" is one bump of the metal's texture among
/// many (paint that differs from the metal only in colour, filmed in monochrome, looks so).
/// Set by the false-alarm rate, not tuned to scenes: the coarse circle holds at most a few
/// hundred bins, about a hundred of them independent at the stripe's width, and the largest
/// of 100 standard normal values passes 4.5 with probability about 100 × 3.4·10⁻⁶ = 3·10⁻⁴
/// (the normal upper tail Q(4.5); Abramowitz & Stegun, Handbook of Mathematical Functions,
/// table 26.1).
const INIT_MIN_SIG: f64 = 4.5;
/// A later frame's significance must reach this fraction of the first frame's, and at least
/// [`LOST_MIN_SIG`] (Q(3.5) ≈ 2.3·10⁻⁴ per independent bin), else the stripe has faded into
/// the background and the frame is null. The fraction asks at most [`LOST_SIG_CAP`]: a peak
/// that many robust standard deviations above the texture is no bump of it (Q(10) ≈ 7.6·10⁻²⁴),
/// and a clean first frame whose background is nearly flat (a compressed, noiseless picture)
/// has a significance in the hundreds that blur or flicker later divide without the stripe
/// ever fading.
const LOST_SIG_FRACTION: f64 = 0.25;
const LOST_MIN_SIG: f64 = 3.5;
const LOST_SIG_CAP: f64 = 10.0;

/// One measurement of a mark in one frame.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct Measurement {
    /// Disc-plane angle of the stripe, rad, from the grid's zero direction towards +y, made
    /// continuous with the tracker's previous measurements.
    pub angle: f64,
    /// 0..=1.
    pub confidence: f32,
}

/// What the first frame taught about the stripe.
#[derive(Debug, Clone)]
struct StripeModel {
    /// +1 for paint brighter than the metal, −1 for darker.
    polarity: f32,
    /// Stripe half-width, px of arc.
    half_width_px: f64,
    /// Each ring's angular offset from the stripe's mean angle, rad.
    offset: Vec<f64>,
    /// Median per-ring contrast in the first frame.
    z_ref: f64,
    /// Clip level for one ring's coarse score.
    clip: f32,
    /// Coarse score of the stripe in the first frame.
    score_ref: f64,
    /// Half-width (coarse bins) of the coarse score's peak at half maximum in the first frame.
    peak_half_bins: f64,
}

/// Tracks one radial mark through a clip.
pub(crate) struct RadialTracker {
    grid: PolarGrid,
    /// The colour projection sampled instead of luma, when the mark is tracked on colour.
    colour: Option<ColourWeights>,
    polar: Vec<f32>,
    mean: Vec<f32>,
    sigma: Vec<f32>,
    scratch: Vec<f32>,
    /// One fine window's lattice samples, flanks included (`fine_ring`).
    lattice: Vec<f32>,
    ring_c: Vec<f64>,
    ring_z: Vec<f64>,
    ring_ok: Vec<bool>,
    sort_buf: Vec<(f64, f64)>,
    dev_buf: Vec<(f64, f64)>,
    /// Per ring, from the last measurement: angle relative to the result (rad) and weight.
    ring_out: Vec<(f32, f32)>,
    /// The rings the coarse search uses (indices into `grid`, increasing).
    coarse_rings: Vec<usize>,
    /// Per ring: the position in `coarse_rings` of the nearest coarse ring.
    near: Vec<usize>,
    /// Per ring: its noise level over the nearest coarse ring's, from the first frame.
    sigma_ratio: Vec<f32>,
    /// Built by [`Self::init`].
    coarse: Option<Coarse>,
    /// Per ring: the fine centre reads every `stride[k]`-th bin.
    stride: Vec<usize>,
    /// Per ring whose stride is above 1: the taps of its lattice bins, and their samples in
    /// consecutive places (bin `q·stride` at `q`), so a window is read in place.
    lat_taps: Vec<Option<LatticeTaps>>,
    lat_vals: Vec<Vec<f32>>,
    model: Option<StripeModel>,
    /// Last good continuous angle, its velocity (rad/frame) and frames since it.
    last: Option<f64>,
    velocity: f64,
    since_good: u32,
    /// The stripe's significance against the annulus's texture: in the first frame, and in
    /// the last frame measured (see [`Coarse::significance`]).
    sig_ref: f64,
    sig_last: f64,
    /// Scratch for the significance's medians (coarse bins).
    sig_buf: Vec<f32>,
    /// [`INIT_MIN_SIG`], but for tuning aids that need to see what a lower one would track.
    init_min_sig: f64,
    /// The first frame's features beside the stripe, which no ring's window may read
    /// (`distractor.rs`); and the later frames in which a ring was left out for one.
    distractors: Distractors,
    distracted_frames: u64,
}

impl RadialTracker {
    /// A tracker over `grid`; the stripe is learnt from the first frame given to [`Self::init`].
    pub fn new(grid: PolarGrid) -> RadialTracker {
        let (k, n) = (grid.rings, grid.bins);
        // At most COARSE_RINGS rings, evenly spaced: enough to place the stripe to a bin or two.
        let coarse_rings: Vec<usize> = (0..k).step_by(k.div_ceil(COARSE_RINGS)).collect();
        let near = (0..k)
            .map(|r| {
                (0..coarse_rings.len())
                    .min_by_key(|&i| coarse_rings[i].abs_diff(r))
                    .expect("a grid has at least one ring")
            })
            .collect();
        let stride = grid
            .radius
            .iter()
            .map(|&r| ((FINE_SPACING_PX / (r * grid.step())).floor() as usize).max(1))
            .collect::<Vec<_>>();
        let lat_taps: Vec<Option<LatticeTaps>> = stride
            .iter()
            .enumerate()
            .map(|(r, &m)| (m > 1).then(|| grid.lattice(r, m)))
            .collect();
        let lat_vals = lat_taps
            .iter()
            .map(|t| vec![0.0; t.as_ref().map_or(0, LatticeTaps::len)])
            .collect();
        RadialTracker {
            colour: None,
            stride,
            lat_taps,
            lat_vals,
            polar: vec![0.0; k * n],
            mean: vec![0.0; k],
            sigma: vec![0.0; k],
            scratch: vec![0.0; n],
            lattice: Vec::with_capacity(2 * n),
            ring_c: vec![0.0; k],
            ring_z: vec![0.0; k],
            ring_ok: vec![false; k],
            sort_buf: Vec::with_capacity(k.max(n)),
            dev_buf: Vec::with_capacity(k),
            ring_out: vec![(0.0, 0.0); k],
            coarse_rings,
            near,
            sigma_ratio: vec![1.0; k],
            coarse: None,
            model: None,
            last: None,
            velocity: 0.0,
            since_good: 0,
            sig_ref: 0.0,
            sig_last: 0.0,
            sig_buf: Vec::with_capacity(n),
            init_min_sig: INIT_MIN_SIG,
            distractors: Distractors::default(),
            distracted_frames: 0,
            grid,
        }
    }

    /// The sampling grid.
    pub fn grid(&self) -> &PolarGrid {
        &self.grid
    }

    /// Tracks on the colour projection `weights` from now on (None: on luma).
    pub fn set_colour(&mut self, weights: Option<ColourWeights>) {
        self.colour = weights;
    }

    /// Lowers (or raises) the first frame's significance bar, for tuning aids.
    #[cfg(test)]
    pub fn set_init_min_sig(&mut self, v: f64) {
        self.init_min_sig = v;
    }

    /// The stripe's significance against the annulus's texture in the last frame searched,
    /// and in the first frame (see [`Coarse::significance`]).
    #[cfg(test)]
    pub fn significance(&self) -> (f64, f64) {
        (self.sig_last, self.sig_ref)
    }

    /// Features found in the annulus that do not turn with the part, and the frames in which
    /// a ring was left out because its window reached a marked feature (`distractor.rs`).
    pub fn static_features(&self) -> (usize, u64) {
        (self.distractors.fixed(), self.distracted_frames)
    }

    /// Per ring, from the last successful measurement: the ring's stripe angle minus the
    /// measured angle (rad), and the ring's weight in the result (0 when not used).
    pub fn rings(&self) -> &[(f32, f32)] {
        &self.ring_out
    }

    /// Measures the stripe in a later frame; `None` when it cannot be found with confidence.
    ///
    /// Only the coarse grid is sampled whole (for the search over the whole circle and the
    /// noise level); each ring of the full grid is sampled only in the window its fine centre
    /// reads, and its noise level is the nearest coarse ring's, scaled by their ratio in the
    /// first frame.
    pub fn measure(&mut self, frame: FrameRef<'_>, shift: [f64; 2]) -> Option<Measurement> {
        let coarse = self.coarse.as_mut()?;
        coarse.load(frame, shift, self.colour);
        for k in 0..self.grid.rings {
            self.sigma[k] = coarse.sigma[self.near[k]] * self.sigma_ratio[k];
        }
        let frame = self.grid.prepare_with(frame, shift, self.colour);
        self.measure_at(Some(frame))
    }

    /// Measures from the coarse grid's samples and the full grid's: all of those in the first
    /// frame (`src` is None), else sampled from `src` where the fine centres need them.
    fn measure_at(&mut self, src: Option<Prepared<'_>>) -> Option<Measurement> {
        let model = self.model.take()?;
        let mut coarse = self.coarse.take()?;
        let out = self.measure_with(&model, &mut coarse, src);
        self.model = Some(model);
        self.coarse = Some(coarse);
        match out {
            Some(m) => {
                if let Some(last) = self.last {
                    let gap = f64::from(self.since_good + 1);
                    self.velocity = (m.angle - last) / gap;
                }
                self.last = Some(m.angle);
                self.since_good = 0;
            }
            None => self.since_good += 1,
        }
        out
    }
}
