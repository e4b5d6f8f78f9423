//! Features beside the stripe in the first frame that a ring's fine centre must not read: a
//! lamp's glint, a bright pit or a paint splash in the stripe's polarity, found once in the
//! first frame's whole rings and, in every later frame, a ring whose window would read one is
//! left out of the combination.
//!
//! Why: the fine centre (`fine.rs`) is the centroid of everything in its window that stands
//! above a straight baseline through its flanks. A compact bright feature inside the window
//! or a flank pulls that centroid towards it or away from it, on every ring it crosses, by an
//! amount the rings' robust combination cannot see when the feature spans many rings (they
//! agree on the same wrong angle). A glint of the lamp does not turn with the part, so the
//! stripe meets it wherever the part's turn takes it, and is read askew there for as long as
//! it stays (a held-out scene read 2–4° ahead for the rest of its clip; docs/accuracy.md,
//! "Features beside the stripe").
//!
//! What is done, by construction rather than by a tuned look: the first frame is sampled
//! whole, so every ring's profile is known all round. A feature's excess at bin j is how far
//! the sample stands out, in the stripe's polarity, above *both* samples `d` bins either side
//! (d: the window's half-length and half a flank, so the filter's reach is the centroid's own);
//! a slow lighting gradient or broad mottle gives none, and neither does the shoulder of a
//! feature of the other polarity (whose far side is still metal). Runs of bins whose excess passes a share of the
//! stripe's own excess on that ring (and the filter's noise several times over), outside the
//! first frame's stripe and its window, are marked (hysteresis: a run is kept from half the
//! threshold, so a feature's tails go with its core; Canny, "A computational approach to edge
//! detection", IEEE Trans. PAMI 8 (1986) 679–698, on thresholding with hysteresis; pages and
//! section *from memory*); runs on neighbouring
//! rings that overlap are one feature.
//!
//! Only a feature that does not turn with the part can bias a later frame: one that turns
//! keeps its place relative to the stripe, which the first frame's reading already holds. So
//! each feature is judged by motion, the first time a ring's window or flanks reach its
//! first-frame place after the part has turned it clear of that place: its bins clear of the
//! stripe are read again, and a feature still there does not turn (a glint, a washer's edge,
//! the background beyond a small part) and every ring whose window reaches it is left out of
//! the combination from then on. One found gone [`MOVES_TO_TRUST`] times running turned with
//! the part and is never asked about again. Until a feature is judged, the rings that reach
//! it are left out.
//!
//! Part of the track stage: it must never import segment, mechanics, report, `analyze`,
//! `batch`, `find_marks`, `calibrate` or the CLI.

use super::RadialTracker;
use crate::track::polar::Prepared;
use crate::track::unwrap::wrap_pi;

/// A feature is marked when its excess reaches this share of the stripe's own on its ring.
/// A feature of this height inside a window moves a centroid by up to about a sixth of the
/// window's half-length (weight 0.2 against 1 at the window's edge), several times the angle
/// targets on any ring, so lower features are marked too if the noise allows (next constant).
pub(super) const SHARE_OF_STRIPE: f32 = 0.2;
/// ... and this many standard deviations of the filter's own noise (a bin's excess is a
/// difference of noisy samples, taken as σ·√1.5, that of a sample less the mean of two). At
/// 4σ a ring of metal alone reads about 3·10⁻⁵ of its bins as features by chance (the normal
/// upper tail Q(4); Abramowitz & Stegun, Handbook of Mathematical Functions, table 26.1).
pub(super) const NOISE_SIGMAS: f32 = 4.0;

/// A feature is still in its place when its excess there, summed over its bins clear of the
/// stripe, reaches this share of the first frame's (a lamp's flicker scales both alike); one
/// that turned with the part has left its place, which then shows the metal beside it.
pub(super) const STILL_THERE: f32 = 0.5;
/// A feature is judged only when its bins clear of the stripe hold at least this share of
/// its first-frame excess: most of one under the stripe cannot be told from the stripe.
pub(super) const CLEAR_TO_JUDGE: f32 = 0.25;
/// A feature found gone from its place this many judgements running turned with the part
/// (one judgement could be a dark frame of a flickering lamp over a glint).
pub(super) const MOVES_TO_TRUST: u8 = 3;

/// The first frame's marked features: per ring, running counts of marked bins for a window's
/// quick query, and the runs they form; the runs grouped into features across rings.
#[derive(Debug, Clone, Default)]
pub(super) struct Distractors {
    /// Bins per ring.
    n: usize,
    /// Ring k's count of marked bins before bin j at `k·(n+1) + j`.
    prefix: Vec<u32>,
    /// Ring k's marked runs.
    runs: Vec<Vec<Run>>,
    /// The features the runs belong to.
    features: Vec<Feature>,
    /// Ring k's stripe centre in the first frame, bins (the part's turn since is measured
    /// from it).
    centre0: Vec<f64>,
    /// The first frame's excess at ring k's bin j, at `k·n + j` (0 where nothing is marked).
    excess0: Vec<f32>,
    /// Later frames measured so far (a feature is judged at most once per frame).
    frame: u32,
}

/// One marked run of bins on one ring.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(super) struct Run {
    /// First bin (0..n) and length, bins; the run may wrap past bin n − 1.
    pub from: usize,
    pub len: usize,
    /// The excess filter's reach on this ring, bins.
    pub d: usize,
    /// The feature the run belongs to (index into the features).
    pub feature: usize,
}

/// One feature: overlapping runs on neighbouring rings.
#[derive(Debug, Clone, PartialEq)]
struct Feature {
    /// Its runs: (ring, index into that ring's runs).
    runs: Vec<(usize, usize)>,
    /// Its longest run, bins: the turn that takes it clear of its place.
    longest: usize,
    state: FeatureState,
    /// The frame it was last judged in.
    judged: u32,
}

/// Whether a marked feature turns with the part.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub(super) enum FeatureState {
    /// Not judged yet.
    #[default]
    Unknown,
    /// Still in its first-frame place after the part turned: it does not turn.
    Static,
    /// Gone from its place this many judgements running.
    Moved(u8),
}

/// One ring's first-frame facts the marking needs.
pub(super) struct RingFacts {
    /// The stripe's fine centre on the ring, bins (continuous), when the ring saw it.
    pub centre: Option<f64>,
    /// The fine window's half-length and flank length, bins.
    pub half: f64,
    pub flank: f64,
    /// How far past the window and flanks a ring's read may reach, bins: its lattice's
    /// stride (a window's ends are rounded out to the lattice).
    pub stride: f64,
    /// The ring's noise level (polar-sample units).
    pub sigma: f32,
}

/// |a − b| round a ring of `n` bins, bins.
fn bins_apart(a: f64, b: f64, n: usize) -> f64 {
    let tau = std::f64::consts::TAU;
    wrap_pi((a - b) * tau / n as f64).abs() * n as f64 / tau
}

impl Distractors {
    /// Marks the features of the first frame's whole rings `polar` (`facts.len()` rings of `n`
    /// bins; `polarity` +1 for paint brighter than the metal).
    pub(super) fn learn(polar: &[f32], n: usize, facts: &[RingFacts], polarity: f32) -> Self {
        let mut prefix = vec![0u32; facts.len() * (n + 1)];
        let mut runs: Vec<Vec<Run>> = vec![Vec::new(); facts.len()];
        let mut excess0 = vec![0.0f32; facts.len() * n];
        let mut excess = vec![0.0f32; n];
        let mut marked = vec![false; n];
        for (k, fact) in facts.iter().enumerate() {
            let Some(c) = fact.centre else { continue };
            let ring = &polar[k * n..(k + 1) * n];
            let d = ((fact.half + 0.5 * fact.flank).round() as usize).clamp(1, n / 4);
            for (j, e) in excess.iter_mut().enumerate() {
                let (l, r) = (ring[(j + n - d) % n], ring[(j + d) % n]);
                *e = polarity * ring[j] - (polarity * l).max(polarity * r);
            }
            // The stripe's own excess on this ring: the largest within its window.
            let reach = fact.half.ceil() as i64;
            let ci = c.round() as i64;
            let stripe = (-reach..=reach)
                .map(|o| excess[(ci + o).rem_euclid(n as i64) as usize])
                .fold(0.0f32, f32::max);
            let hi = (SHARE_OF_STRIPE * stripe).max(NOISE_SIGMAS * fact.sigma * 1.5f32.sqrt());
            let lo = 0.5 * hi;
            // The first frame's stripe, as far as a later frame's query reaches (`measure.rs`:
            // window, flanks and a stride) and two bins more for the stripe's jitter at rest:
            // a feature that near is read in the first frame too, so it biases nothing.
            let keep_out = fact.half + fact.flank + fact.stride + 2.0;
            marked.iter_mut().for_each(|m| *m = false);
            // Runs above `lo` (circular), kept when their peak reaches `hi`.
            let Some(start) = (0..n).find(|&j| excess[j] <= lo) else {
                continue; // a ring above the low threshold all round has no features to mark
            };
            let mut j = 0;
            while j < n {
                if excess[(start + j) % n] <= lo {
                    j += 1;
                    continue;
                }
                let mut len = 0;
                let mut peak = 0.0f32;
                while j + len < n && excess[(start + j + len) % n] > lo {
                    peak = peak.max(excess[(start + j + len) % n]);
                    len += 1;
                }
                if peak >= hi {
                    // The part of the run outside the stripe's keep-out, as runs of its own.
                    let mut open: Option<(usize, usize)> = None;
                    for o in 0..=len {
                        let b = (start + j + o) % n;
                        if o < len && bins_apart(b as f64, c, n) > keep_out {
                            marked[b] = true;
                            open = Some(open.map_or((b, 1), |(f, l)| (f, l + 1)));
                        } else if let Some((from, len)) = open.take() {
                            runs[k].push(Run {
                                from,
                                len,
                                d,
                                feature: usize::MAX,
                            });
                        }
                    }
                }
                j += len;
            }
            let row = &mut prefix[k * (n + 1)..(k + 1) * (n + 1)];
            for j in 0..n {
                row[j + 1] = row[j] + u32::from(marked[j]);
                if marked[j] {
                    excess0[k * n + j] = excess[j];
                }
            }
        }
        let features = group(&mut runs, n);
        let centre0 = facts.iter().map(|f| f.centre.unwrap_or(0.0)).collect();
        Distractors {
            n,
            prefix,
            runs,
            features,
            centre0,
            excess0,
            frame: 0,
        }
    }

    /// Counts one more later frame (features are judged at most once per frame).
    pub(super) fn next_frame(&mut self) {
        self.frame = self.frame.wrapping_add(1);
    }

    /// Ring `k`'s marked runs that have a bin in `from..=to` (unwrapped bins).
    #[cfg(test)]
    pub(super) fn runs_in(&self, k: usize, from: i64, to: i64) -> impl Iterator<Item = &Run> {
        self.runs[k]
            .iter()
            .filter(move |r| r.meets(self.n, from, to))
    }

    /// True when ring `k` has a marked bin in `from..=to` (bins, unwrapped: either may lie
    /// outside 0..n; a span of a whole turn or more covers the ring).
    pub(super) fn hits(&self, k: usize, from: i64, to: i64) -> bool {
        let n = self.n as i64;
        if n == 0 || to < from {
            return false;
        }
        let row = &self.prefix[k * (self.n + 1)..(k + 1) * (self.n + 1)];
        let count = |a: i64, b: i64| row[b as usize] - row[a as usize]; // bins a..b, 0 ≤ a ≤ b ≤ n
        if to - from + 1 >= n {
            return row[self.n] > 0;
        }
        let a = from.rem_euclid(n);
        let b = a + (to - from) + 1;
        if b <= n {
            count(a, b) > 0
        } else {
            count(a, n) + count(0, b - n) > 0
        }
    }

    /// Marked bins over all rings.
    #[cfg(test)]
    pub(super) fn marked(&self) -> u32 {
        (0..self.prefix.len() / (self.n + 1).max(1))
            .map(|k| self.prefix[k * (self.n + 1) + self.n])
            .sum()
    }

    /// The features found, and how many of them were judged not to turn.
    #[cfg(test)]
    pub(super) fn features(&self) -> (usize, usize) {
        (self.features.len(), self.fixed())
    }

    /// The features judged not to turn with the part.
    pub(super) fn fixed(&self) -> usize {
        self.features
            .iter()
            .filter(|f| f.state == FeatureState::Static)
            .count()
    }
}

/// Groups the runs into features: runs on neighbouring rings that share a bin are one
/// (union–find over the runs). Sets each run's feature and returns the features.
fn group(runs: &mut [Vec<Run>], n: usize) -> Vec<Feature> {
    let ids: Vec<Vec<usize>> = {
        let mut next = 0;
        runs.iter()
            .map(|r| {
                let v = (next..next + r.len()).collect();
                next += r.len();
                v
            })
            .collect()
    };
    let total: usize = runs.iter().map(Vec::len).sum();
    let mut parent: Vec<usize> = (0..total).collect();
    fn root(p: &mut [usize], mut i: usize) -> usize {
        while p[i] != i {
            p[i] = p[p[i]];
            i = p[i];
        }
        i
    }
    for k in 1..runs.len() {
        for (a, ra) in runs[k - 1].iter().enumerate() {
            for (b, rb) in runs[k].iter().enumerate() {
                let to = ra.from as i64 + ra.len as i64 - 1;
                if rb.meets(n, ra.from as i64, to) {
                    let (x, y) = (
                        root(&mut parent, ids[k - 1][a]),
                        root(&mut parent, ids[k][b]),
                    );
                    parent[x] = y;
                }
            }
        }
    }
    let mut index = vec![usize::MAX; total];
    let mut features: Vec<Feature> = Vec::new();
    for (k, ring) in runs.iter_mut().enumerate() {
        for (i, run) in ring.iter_mut().enumerate() {
            let r = root(&mut parent, ids[k][i]);
            if index[r] == usize::MAX {
                index[r] = features.len();
                features.push(Feature {
                    runs: Vec::new(),
                    longest: 0,
                    state: FeatureState::Unknown,
                    judged: u32::MAX,
                });
            }
            let f = &mut features[index[r]];
            f.runs.push((k, i));
            f.longest = f.longest.max(run.len);
            run.feature = index[r];
        }
    }
    features
}

impl Run {
    /// True when the run has a bin in `from..=to` (unwrapped bins of a ring of `n`).
    fn meets(&self, n: usize, from: i64, to: i64) -> bool {
        let n = n.max(1) as i64;
        // The run's first bin as the copy round the ring nearest below the span's start.
        let a = self.from as i64 + (from - self.from as i64).div_euclid(n) * n;
        let last = self.len as i64 - 1;
        [a - n, a, a + n]
            .iter()
            .any(|&s| s <= to && s + last >= from)
    }
}

impl RadialTracker {
    /// True when ring `k`'s window and flanks (bins `from..=to`, unwrapped) reach a feature
    /// marked in the first frame that does not turn with the part, or one not judged yet
    /// (the module's doc). `c` is ring k's fine centre in this frame, bins; `stripe` the
    /// stripe's polarity and half-width (px); `frame` is this frame, read again where a
    /// feature is judged.
    pub(super) fn static_feature_in(
        &mut self,
        k: usize,
        (from, to): (i64, i64),
        c: f64,
        stripe: (f32, f64),
        frame: &Prepared<'_>,
    ) -> bool {
        let n = self.grid.bins;
        let turned = bins_apart(c, self.distractors.centre0[k], n);
        let mut any = false;
        for i in 0..self.distractors.runs[k].len() {
            let run = self.distractors.runs[k][i];
            if !run.meets(n, from, to) {
                continue;
            }
            let f = run.feature;
            let feature = &self.distractors.features[f];
            match feature.state {
                FeatureState::Static => return true,
                FeatureState::Moved(m) if m >= MOVES_TO_TRUST => continue,
                _ if feature.judged == self.distractors.frame => {
                    any = true;
                    continue;
                }
                _ => {}
            }
            // Not before the part has turned the feature clear of its place.
            if turned <= feature.longest as f64 + 2.0 {
                any = true;
                continue;
            }
            match self.feature_still_there(f, c - self.distractors.centre0[k], stripe, frame) {
                Some(true) => {
                    self.distractors.features[f].state = FeatureState::Static;
                    return true;
                }
                Some(false) => {
                    let feature = &mut self.distractors.features[f];
                    let m = match feature.state {
                        FeatureState::Moved(m) => m + 1,
                        _ => 1,
                    };
                    feature.state = FeatureState::Moved(m);
                    any |= m < MOVES_TO_TRUST;
                }
                None => any = true,
            }
            self.distractors.features[f].judged = self.distractors.frame;
        }
        any
    }

    /// Reads feature `f`'s first-frame place again in `frame`, on every ring it crosses, where
    /// it lies clear of the stripe (the stripe's centre on ring j: its first-frame centre
    /// turned by `turn` bins; the stripe's polarity and half-width, px). Some(true) when its excess there is still [`STILL_THERE`] of the
    /// first frame's, Some(false) when not, None when too little of it is clear of the stripe.
    fn feature_still_there(
        &mut self,
        f: usize,
        turn: f64,
        (polarity, half_width_px): (f32, f64),
        frame: &Prepared<'_>,
    ) -> Option<bool> {
        let (n, step) = (self.grid.bins, self.grid.step());
        let ni = n as i64;
        let (mut now, mut then, mut total) = (0.0f32, 0.0f32, 0.0f32);
        for q in 0..self.distractors.features[f].runs.len() {
            let (j, i) = self.distractors.features[f].runs[q];
            let run = self.distractors.runs[j][i];
            let c = self.distractors.centre0[j] + turn;
            let clear = half_width_px / (self.grid.radius[j] * step) + 2.0;
            let d = run.d as i64;
            let (a, b) = (
                run.from as i64 - d,
                run.from as i64 + run.len as i64 - 1 + d,
            );
            self.grid.sample_span(frame, j, a, b, 1, &mut self.polar);
            let ring = &self.polar[j * n..(j + 1) * n];
            let at = |x: i64| polarity * ring[x.rem_euclid(ni) as usize];
            for x in run.from as i64..(run.from + run.len) as i64 {
                let e0 = self.distractors.excess0[j * n + x.rem_euclid(ni) as usize];
                total += e0;
                if bins_apart(x as f64, c, n) <= clear {
                    continue;
                }
                // The smaller side: a side on the stripe now leaves the other to judge.
                now += at(x) - at(x - d).min(at(x + d));
                then += e0;
            }
        }
        (then >= CLEAR_TO_JUDGE * total && then > 0.0).then_some(now >= STILL_THERE * then)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// One ring of 360 bins: flat metal at 100 with a stripe of `stripe` at bin 90 (±4 bins)
    /// and a compact glint of `glint` at bin 130 (±3 bins).
    fn ring(stripe: f32, glint: f32) -> Vec<f32> {
        (0..360)
            .map(|j: i64| {
                let mut v = 100.0;
                if (j - 90).abs() <= 4 {
                    v += stripe;
                }
                if (j - 130).abs() <= 3 {
                    v += glint;
                }
                v
            })
            .collect()
    }

    fn facts() -> Vec<RingFacts> {
        vec![RingFacts {
            centre: Some(90.0),
            half: 7.0,
            flank: 4.0,
            stride: 1.0,
            sigma: 0.5,
        }]
    }

    #[test]
    fn a_glint_beside_the_stripe_is_marked_and_the_stripe_is_not() {
        let d = Distractors::learn(&ring(40.0, 30.0), 360, &facts(), 1.0);
        assert!(d.hits(0, 125, 135), "the glint's bins are marked");
        assert!(
            !d.hits(0, 80, 100),
            "the stripe's own place is never marked"
        );
        assert!(!d.hits(0, 200, 300));
        assert_eq!(d.marked(), 7);
        let runs: Vec<_> = d.runs_in(0, 100, 140).collect();
        assert_eq!(runs.len(), 1);
        assert_eq!((runs[0].from, runs[0].len, runs[0].d), (127, 7, 9));
        assert_eq!(d.features(), (1, 0));
        assert_eq!(d.runs_in(0, 127 - 360, 127 - 360).count(), 1);
        assert_eq!(d.runs_in(0, 134, 200).count(), 0);
    }

    #[test]
    fn overlapping_runs_on_neighbouring_rings_are_one_feature() {
        // Three rings: the glint on rings 0 and 1 (overlapping bins), another on ring 2 only
        // but elsewhere.
        let mut polar = ring(40.0, 30.0);
        polar.extend(ring(40.0, 30.0).iter().cycle().skip(2).take(360));
        let mut third = ring(40.0, 0.0);
        (200..205).for_each(|j| third[j] += 30.0);
        polar.extend(third);
        let facts: Vec<RingFacts> = (0..3)
            .map(|_| RingFacts {
                centre: Some(90.0),
                half: 7.0,
                flank: 4.0,
                stride: 1.0,
                sigma: 0.5,
            })
            .collect();
        let d = Distractors::learn(&polar, 360, &facts, 1.0);
        assert_eq!(d.features(), (2, 0));
        let f = |k: usize, lo: i64, hi: i64| d.runs_in(k, lo, hi).next().unwrap().feature;
        assert_eq!(f(0, 127, 133), f(1, 120, 133));
        assert_ne!(f(0, 127, 133), f(2, 200, 205));
    }

    #[test]
    fn a_feature_of_the_other_polarity_or_under_the_share_is_not_marked() {
        let d = Distractors::learn(&ring(40.0, -30.0), 360, &facts(), 1.0);
        assert_eq!(
            d.marked(),
            0,
            "a dark pit beside a bright stripe does not pull its centroid up"
        );
        let d = Distractors::learn(&ring(40.0, 5.0), 360, &facts(), 1.0);
        assert_eq!(d.marked(), 0, "5 is under a fifth of the stripe's 40");
    }

    #[test]
    fn a_lighting_gradient_is_no_feature() {
        let n = 360;
        let v: Vec<f32> = (0..n)
            .map(|j| {
                let a = j as f32 * std::f32::consts::TAU / n as f32;
                100.0
                    + 20.0 * a.cos()
                    + if (j as i64 - 90).abs() <= 4 {
                        40.0
                    } else {
                        0.0
                    }
            })
            .collect();
        let d = Distractors::learn(&v, n, &facts(), 1.0);
        assert_eq!(d.marked(), 0);
    }

    #[test]
    fn queries_wrap_and_a_whole_turn_covers_the_ring() {
        let d = Distractors::learn(&ring(40.0, 30.0), 360, &facts(), 1.0);
        assert!(d.hits(0, 127 + 360, 128 + 360));
        assert!(d.hits(0, 127 - 720, 128 - 720));
        assert!(d.hits(0, 355, 365 + 130 - 5));
        assert!(d.hits(0, -1000, 1000));
        assert!(!d.hits(0, 350, 370));
        assert!(!d.hits(0, 10, 5));
    }
}
