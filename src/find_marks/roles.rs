//! Which followed stripes are marks, and which mark is which, from their motion alone.
//!
//! - A painted mark on a turning part rotates rigidly about one fixed point: its lines over the
//!   clip meet there (robustly, `pivot.rs`), that point lies beyond one of the stripe's ends,
//!   and the stripe keeps its distance from it. A follower that hops between background
//!   streaks (a brushed-steel bench) fails these tests and is background.
//! - A stripe that does not turn is still: a candidate for the fixed mark.
//! - Of more than two turning parts, the drive and the nut are the pair that move together:
//!   both start at every blow, and a follower of background texture that passes for a
//!   turning part does not keep time with them (`shared_onsets`).
//! - Of two turning parts, the drive end **leads** each blow (its onsets come first), swings
//!   back after each blow, and travels more; the nut **lags**, moves less and stops first.
//!   Each of the three is a vote; stripe length plays no part. When the votes disagree, the
//!   choice is reported as unsure and both readings are drawn on the preview.
//!
//! Part of the `find-marks` command (built on decode and track, writing through report): it
//! must never import segment, mechanics, `analyze`, `batch` or the CLI.

use super::stripes::Track;
use super::{MAX_LINE_RMS_PX, MIN_SPAN_DEG, STILL_DEG};

/// What a followed stripe is, judged from its motion.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(super) enum Kind {
    /// Turns rigidly about `pivot`.
    Turning {
        /// Where its lines meet, px.
        pivot: [f64; 2],
    },
    /// Turned a little (between [`STILL_DEG`] and [`MIN_SPAN_DEG`]): too little to place a
    /// pivot or to tell it from jitter; used only when no better stripe turns.
    Weak,
    /// Does not turn.
    Still,
    /// Anything else: seen too rarely, or its lines do not meet at one point it turns about.
    Background,
}

/// Least fraction of the frames a turning mark is seen in.
const MIN_SEEN: f64 = 0.7;
/// Least fraction of its lines that pass through the pivot.
const MIN_INLIERS: f64 = 0.8;
/// A still candidate for the fixed mark is seen in at least this fraction of the frames.
const MIN_SEEN_STILL: f64 = 0.9;

/// Judges one followed stripe in a `w` × `h` frame.
pub(super) fn classify(t: &Track, w: usize, h: usize) -> Kind {
    let seen = t.seen_fraction();
    let span = t.span_deg();
    if span < STILL_DEG {
        return if seen >= MIN_SEEN_STILL {
            Kind::Still
        } else {
            Kind::Background
        };
    }
    if seen < MIN_SEEN {
        return Kind::Background;
    }
    if span < MIN_SPAN_DEG {
        return Kind::Weak;
    }
    let Some(m) = t.meeting() else {
        return Kind::Background;
    };
    let p = m.p;
    // The turn must be carried by the lines that meet: a stripe that sits still and now and
    // then catches something else has all its still lines through any point on its own line.
    let th: Vec<f64> = t
        .series()
        .into_iter()
        .flatten()
        .zip(&m.inliers)
        .filter(|(_, k)| **k)
        .map(|(a, _)| a)
        .collect();
    let lo = th.iter().copied().fold(f64::INFINITY, f64::min);
    let hi = th.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    if (hi - lo).to_degrees() < MIN_SPAN_DEG {
        return Kind::Background;
    }
    let margin = 0.1 * w.max(h) as f64;
    let inside =
        p[0] > -margin && p[1] > -margin && p[0] < w as f64 + margin && p[1] < h as f64 + margin;
    let r = (t.first.c[0] - p[0]).hypot(t.first.c[1] - p[1]);
    let rigid = t.radius_spread(p) <= 2.0 + 0.06 * r;
    if m.inlier_fraction >= MIN_INLIERS
        && m.rms_px <= MAX_LINE_RMS_PX
        && inside
        && rigid
        && t.is_radial_about(p)
    {
        Kind::Turning { pivot: p }
    } else {
        Kind::Background
    }
}

/// The orientation series with gaps filled by the last value seen, radians.
fn filled(series: &[Option<f64>]) -> Vec<f64> {
    let first = series.iter().flatten().next().copied().unwrap_or(0.0);
    let mut last = first;
    series
        .iter()
        .map(|v| {
            if let Some(v) = v {
                last = *v;
            }
            last
        })
        .collect()
}

/// Frames where a part starts to move after resting: its speed crosses a quarter of its own
/// high (95th percentile) speed after at least three frames below it, with the crossing placed
/// to a fraction of a frame by linear interpolation.
pub(super) fn onsets(series: &[Option<f64>]) -> Vec<f64> {
    let a = filled(series);
    if a.len() < 8 {
        return Vec::new();
    }
    let v: Vec<f64> = a.windows(2).map(|w| (w[1] - w[0]).abs()).collect();
    let mut sorted = v.clone();
    sorted.sort_by(f64::total_cmp);
    let high = sorted[sorted.len() * 95 / 100];
    if high <= 0.0 {
        return Vec::new();
    }
    let thr = 0.25 * high;
    let mut out = Vec::new();
    let mut quiet = 0usize;
    for (k, &s) in v.iter().enumerate() {
        if s >= thr {
            if quiet >= 3 {
                let prev = if k > 0 { v[k - 1] } else { 0.0 };
                let frac = if s > prev {
                    (thr - prev) / (s - prev)
                } else {
                    0.0
                };
                out.push(k as f64 - 1.0 + frac.clamp(0.0, 1.0));
            }
            quiet = 0;
        } else {
            quiet += 1;
        }
    }
    out
}

/// How much `b` lags `a` at the blows, frames: the median over `a`'s onsets of the delay to
/// `b`'s nearest onset within ±`reach` frames (None when no onset pairs up).
pub(super) fn lag_frames(a: &[Option<f64>], b: &[Option<f64>], reach: f64) -> Option<f64> {
    let (oa, ob) = (onsets(a), onsets(b));
    let mut d: Vec<f64> = oa
        .iter()
        .filter_map(|&ta| {
            ob.iter()
                .map(|&tb| tb - ta)
                .filter(|d| d.abs() <= reach)
                .min_by(|x, y| x.abs().total_cmp(&y.abs()))
        })
        .collect();
    if d.is_empty() {
        return None;
    }
    d.sort_by(f64::total_cmp);
    Some(d[d.len() / 2])
}

/// How many of the blow onsets `a` (frames, from [`onsets`]) are matched by an onset in `b`
/// within ±`reach` frames, and how many `a` has: the drive and the nut both move at every
/// blow, and a follower of background texture that passes for a turning part does not keep
/// time with them.
pub(super) fn shared_onsets(a: &[f64], b: &[f64], reach: f64) -> (usize, usize) {
    let shared = a
        .iter()
        .filter(|&&ta| b.iter().any(|&tb| (tb - ta).abs() <= reach))
        .count();
    (shared, a.len())
}

/// The three votes on which of two turning parts is the drive end.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(super) struct Votes {
    /// How much `b` lags `a` at the blows, frames (None: no blows paired up).
    pub(super) lag_frames: Option<f64>,
    /// Back-swing of `a` and `b`, degrees.
    pub(super) back_swing_deg: [f64; 2],
    /// Total back-and-forth travel of `a` and `b`, degrees.
    pub(super) travel_deg: [f64; 2],
}

impl Votes {
    /// Weighs the votes: Some(true) when `a` is the drive end, Some(false) when `b` is, and
    /// the count of votes that agree with the choice out of those cast.
    pub(super) fn decide(&self) -> (bool, usize, usize) {
        let mut cast = Vec::new();
        if let Some(l) = self.lag_frames
            && l.abs() >= 0.25
        {
            cast.push(l > 0.0);
        }
        let [ba, bb] = self.back_swing_deg;
        if (ba - bb).abs() >= 0.5 {
            cast.push(ba > bb);
        }
        let [ta, tb] = self.travel_deg;
        if (ta - tb).abs() >= 0.05 * ta.max(tb) {
            cast.push(ta > tb);
        }
        let yes = cast.iter().filter(|v| **v).count();
        let a_drive = yes * 2 >= cast.len() && !(cast.is_empty() && ta < tb);
        let agree = if a_drive { yes } else { cast.len() - yes };
        (a_drive, agree, cast.len())
    }
}

/// The votes for `a` against `b`.
pub(super) fn votes(a: &Track, b: &Track) -> Votes {
    Votes {
        lag_frames: lag_frames(&a.series(), &b.series(), 6.0),
        back_swing_deg: [a.back_swing(), b.back_swing()],
        travel_deg: [a.travel_deg(), b.travel_deg()],
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A blow train: `rest` frames still, then a ramp of `len` frames of `step` rad each.
    fn train(offset: usize, step: f64, len: usize) -> Vec<Option<f64>> {
        let mut a = 0.0;
        (0..120)
            .map(|k| {
                let phase = (k + 40 - offset) % 40;
                if (10..10 + len).contains(&phase) {
                    a += step;
                }
                Some(a)
            })
            .collect()
    }

    #[test]
    fn the_part_that_moves_first_leads() {
        let drive = train(0, 0.02, 6);
        let nut = train(2, 0.01, 3);
        let l = lag_frames(&drive, &nut, 6.0).unwrap();
        assert!((l - 2.0).abs() < 0.3, "{l}");
        let back = lag_frames(&nut, &drive, 6.0).unwrap();
        assert!((back + 2.0).abs() < 0.3, "{back}");
    }

    /// The nut keeps time with the drive; a part that moves at other times does not.
    #[test]
    fn parts_that_move_at_the_blows_share_their_onsets() {
        let drive = train(0, 0.02, 6);
        let nut = train(2, 0.01, 3);
        let other = train(20, 0.02, 3);
        let [drive, nut, other] = [drive, nut, other].map(|s| onsets(&s));
        assert_eq!(shared_onsets(&drive, &nut, 6.0), (3, 3));
        assert_eq!(shared_onsets(&drive, &other, 6.0), (0, 3));
    }

    #[test]
    fn votes_decide_and_say_how_many_agree() {
        let v = Votes {
            lag_frames: Some(1.0),
            back_swing_deg: [5.0, 0.5],
            travel_deg: [40.0, 30.0],
        };
        assert_eq!(v.decide(), (true, 3, 3));
        let v = Votes {
            lag_frames: Some(-1.0),
            back_swing_deg: [5.0, 0.5],
            travel_deg: [20.0, 30.0],
        };
        assert_eq!(v.decide(), (false, 2, 3));
    }
}
