//! Drafting rig marks from followed stripes: the pivot, the annulus, the ellipse and the
//! tightening direction of each.
//!
//! Part of the `find-marks` command (built on decode and track, writing through report): it
//! must never import segment, mechanics, `analyze`, `batch` or the CLI.

use super::ellipse::outline_ellipse;
use super::luma::Img;
use super::stripes::Track;
use super::{FoundMark, MIN_SPAN_DEG, PivotFrom, TRIM_INNER_PX, TRIM_OUTER_PX};
use crate::rig::{RadialMark, Role, Spin};
use crate::warning::Warning;

pub(super) fn unsure(item: &str, reason: String) -> Warning {
    Warning::FindMarksUnsure {
        item: item.into(),
        reason,
    }
}

/// The still stripe as a fixed mark: pivot at its first end, annulus along it.
pub(super) fn fixed_from(t: &Track) -> FoundMark {
    let s = t.first;
    let [a, _] = s.ends();
    let u = s.dir();
    // The painted end lies about 1.5 px inside the component's end (the 3×3 smoothing).
    let pivot = [a[0] + 1.5 * u[0], a[1] + 1.5 * u[1]];
    let len = s.ext[1] - s.ext[0] - 3.0;
    let inner = 4.0f64.min(0.25 * len);
    FoundMark {
        role: Some(Role::Fixed),
        mark: RadialMark {
            pivot: round2(pivot),
            radius: [round1(inner), round1((len - 2.0).max(inner + 2.0))],
            tighten: None,
            ellipse: None,
        },
        pivot_from: PivotFrom::StripeEnd,
        net_deg: 0.0,
        travel_deg: t.motion().1,
        dark: s.dark,
        alternative: None,
    }
}

/// A turning stripe as a radial mark. `registered` is a pivot refined by registering the part
/// between its rests (`register.rs`): it replaces `pivot`, and the part was shown to turn
/// rigidly on screen, so it is face-on and no ellipse is looked for.
pub(super) fn radial_from(
    t: &Track,
    role: Role,
    tighten: Option<Spin>,
    pivot: Option<[f64; 2]>,
    registered: Option<[f64; 2]>,
    img: &Img,
    warnings: &mut Vec<Warning>,
) -> FoundMark {
    let s = t.first;
    let span = t.span_deg();
    let (pivot, from) = match pivot {
        Some(p) if span >= MIN_SPAN_DEG => (p, PivotFrom::Lines),
        _ => {
            warnings.push(unsure(
                &format!("{} pivot", role.name()),
                format!(
                    "the {} stripe turned only {span:.1}° over the clip, too little to place its pivot; it was put at the stripe's end nearer the frame centre: read the true centre of rotation off the preview",
                    role.name()
                ),
            ));
            let [a, b] = s.ends();
            let (cx, cy) = (img.w as f64 / 2.0, img.h as f64 / 2.0);
            let da = (a[0] - cx).hypot(a[1] - cy);
            let db = (b[0] - cx).hypot(b[1] - cy);
            (if da < db { a } else { b }, PivotFrom::StripeEnd)
        }
    };
    let (pivot, from) = match registered {
        Some(r) if from == PivotFrom::Lines => (r, PivotFrom::Registered),
        _ => (pivot, from),
    };
    let ellipse = if from == PivotFrom::Lines {
        outline_ellipse(img, pivot, &s).filter(|e| t.length_agrees_with(e))
    } else {
        None
    };
    let lr = t.length_ratio();
    if ellipse.is_none() && lr > 1.03 {
        warnings.push(unsure(
            &format!("{} ellipse", role.name()),
            format!(
                "the {} stripe's length on screen changes by {:.0} % as it turns, a sign of a disc seen at an angle, but the disc's outline is not clear enough to measure; if the disc is tilted, add \"ellipse\" by hand",
                role.name(),
                100.0 * (lr - 1.0)
            ),
        ));
    }
    // Annulus: the stripe's end radii in the disc plane.
    let to_disc = |p: [f64; 2]| -> f64 {
        let (dx, dy) = (p[0] - pivot[0], p[1] - pivot[1]);
        match ellipse {
            None => dx.hypot(dy),
            Some(e) => {
                let phi = e.major_deg.to_radians();
                let u = dx * phi.cos() + dy * phi.sin();
                let v = (-dx * phi.sin() + dy * phi.cos()) / e.axis_ratio;
                u.hypot(v)
            }
        }
    };
    let [a, b] = s.ends();
    let (ra, rb) = (to_disc(a), to_disc(b));
    let (r_in, r_out) = (ra.min(rb), ra.max(rb));
    let inner = r_in + TRIM_INNER_PX;
    let outer = (r_out - TRIM_OUTER_PX).max(inner + 4.0);
    let (net, tv) = t.motion();
    FoundMark {
        role: Some(role),
        mark: RadialMark {
            pivot: round2(pivot),
            radius: [round1(inner), round1(outer)],
            tighten,
            ellipse,
        },
        pivot_from: from,
        net_deg: net,
        travel_deg: tv,
        dark: s.dark,
        alternative: None,
    }
}

pub(super) fn round1(v: f64) -> f64 {
    (v * 10.0).round() / 10.0
}
pub(super) fn round2(p: [f64; 2]) -> [f64; 2] {
    [
        (p[0] * 100.0).round() / 100.0,
        (p[1] * 100.0).round() / 100.0,
    ]
}
