//! The invented test bench as seen by the camera: a flag disc with a painted stripe at the
//! drive end, a nut face (hexagon) with its stripe at the nut end, an optional fixed stripe on
//! a stationary bracket, and a background. Renders one luma frame from the two end angles.
//!
//! Anti-aliasing: every pixel is the mean of the scene over its 1×1 px square. Pixels whose
//! centre is farther than 0.75 px from every edge (more than half the pixel diagonal) are
//! uniform and take one sample; the others take n×n jittered (stratified) samples.
//! The distance tests are lower bounds of the true distance, so no edge pixel is missed.
//! Pixel convention: x right, y down, origin at the centre of the top-left pixel; screen angles
//! run from +x towards +y (clockwise on screen).

mod colour;
mod raster;

use serde::{Deserialize, Serialize};

use crate::rig::Ellipse;

use super::look::Look;

pub(crate) use raster::{Pose, Prepared, splitmix64};

/// Paint colours and their luma (ITU-R BT.601 weights 0.299 R + 0.587 G + 0.114 B applied to
/// nominal paint colours; the colours themselves are common practice for marking paint).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, Default)]
#[serde(rename_all = "lowercase")]
pub enum Paint {
    /// Yellow, RGB ≈ (1.0, 0.9, 0.05): luma 0.83.
    #[default]
    Yellow,
    /// White, RGB ≈ (0.93, 0.93, 0.93): luma 0.93.
    White,
    /// Orange, RGB ≈ (1.0, 0.5, 0.0): luma 0.59.
    Orange,
    /// Red, RGB ≈ (0.85, 0.1, 0.1): luma 0.32 (darker than bare steel).
    Red,
    /// Green, RGB ≈ (0.15, 0.65, 0.25): luma 0.46.
    Green,
    /// Blue, RGB ≈ (0.12, 0.30, 0.85): luma 0.31.
    Blue,
    /// Fluorescent pink, RGB ≈ (1.0, 0.25, 0.65): luma 0.52.
    Pink,
}

impl Paint {
    /// Every paint, in a fixed order.
    pub const ALL: [Paint; 7] = [
        Paint::White,
        Paint::Yellow,
        Paint::Orange,
        Paint::Red,
        Paint::Green,
        Paint::Blue,
        Paint::Pink,
    ];

    /// Nominal R′G′B′ colour, 0..1.
    pub fn rgb(self) -> [f32; 3] {
        match self {
            Paint::Yellow => [1.0, 0.9, 0.05],
            Paint::White => [0.93, 0.93, 0.93],
            Paint::Orange => [1.0, 0.5, 0.0],
            Paint::Red => [0.85, 0.1, 0.1],
            Paint::Green => [0.15, 0.65, 0.25],
            Paint::Blue => [0.12, 0.30, 0.85],
            Paint::Pink => [1.0, 0.25, 0.65],
        }
    }

    /// Linear luma of the paint, 0..1.
    pub fn luma(self) -> f32 {
        let [r, g, b] = self.rgb();
        0.299 * r + 0.587 * g + 0.114 * b
    }
}

/// Finish of the steel parts.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, Default)]
#[serde(rename_all = "lowercase")]
pub enum Steel {
    /// Black oxide or phosphate finish: luma 0.16.
    #[default]
    Dark,
    /// Bare machined steel: luma 0.50.
    Bare,
}

impl Steel {
    /// Linear luma of the surface, 0..1 (common practice values for a lit bench).
    pub fn luma(self) -> f32 {
        match self {
            Steel::Dark => 0.16,
            Steel::Bare => 0.50,
        }
    }
}

/// A painted stripe along a radius of a turning part.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Stripe {
    /// Inner end's distance from the pivot, px (in the disc plane for an oblique disc).
    pub r_inner_px: f64,
    /// Outer end's distance from the pivot, px.
    pub r_outer_px: f64,
    /// Full width across the stripe, px.
    pub width_px: f64,
    /// Screen angle of the stripe at the start of the simulation (before any rotation),
    /// degrees from +x towards +y.
    pub start_deg: f64,
}

/// The drive end's flag disc.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct DriveDisc {
    /// Centre of rotation on screen, px.
    pub pivot: [f64; 2],
    /// Disc radius, px (along the major axis when oblique).
    pub radius_px: f64,
    /// The disc's finish.
    pub steel: Steel,
    /// The painted stripe.
    pub stripe: Stripe,
    /// A disc seen obliquely appears as this ellipse (None: seen square on).
    #[serde(default)]
    pub ellipse: Option<Ellipse>,
    /// A static specular highlight on the disc (a light's reflection), if any.
    #[serde(default)]
    pub highlight: Option<Highlight>,
}

/// A bright spot that stays put on screen while the disc turns under it.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Highlight {
    /// Centre relative to the disc's pivot on screen, px.
    pub offset_px: [f64; 2],
    /// Gaussian radius (standard deviation), px.
    pub sigma_px: f64,
    /// Added luma at the centre, 0..1.
    pub peak: f32,
}

/// The nut end: a hexagonal nut (or socket) face with a stud end in the middle.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct NutFace {
    /// Centre of rotation on screen, px.
    pub pivot: [f64; 2],
    /// Across flats, px.
    pub across_flats_px: f64,
    /// The face's finish.
    pub steel: Steel,
    /// Stud end radius, px (drawn darker than the face).
    pub stud_radius_px: f64,
    /// Screen angle of one corner at the start, degrees.
    pub corner_start_deg: f64,
    /// The painted stripe.
    pub stripe: Stripe,
}

/// A painted stripe on a stationary bracket, for cancelling camera shake.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct FixedMark {
    /// Inner end of the stripe (the mark's pivot), px.
    pub pivot: [f64; 2],
    /// The stripe (its `start_deg` is its fixed angle).
    pub stripe: Stripe,
    /// Half size of the bracket plate around the stripe, px.
    pub plate_half_px: [f64; 2],
}

/// Everything the camera sees, except what moves (given per frame as angles).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Scene {
    /// Frame width, px.
    pub width: u32,
    /// Frame height, px.
    pub height: u32,
    /// Background luma at the top of the frame, 0..1.
    pub background_top: f32,
    /// Background luma at the bottom of the frame, 0..1.
    pub background_bottom: f32,
    /// Paint used for every stripe.
    pub paint: Paint,
    /// Tightening direction as seen on screen (both ends are seen from the same side).
    pub tighten: crate::rig::Spin,
    /// The drive end.
    pub drive: DriveDisc,
    /// The nut end.
    pub nut: NutFace,
    /// The optional fixed mark.
    #[serde(default)]
    pub fixed: Option<FixedMark>,
    /// Supersampling per axis at edge pixels (n×n jittered samples), 1..=16.
    pub supersample: u32,
    /// A textured bench behind the parts (None: the plain gradient alone).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub background_texture: Option<super::texture::BrushedSteel>,
    /// Colour and surface detail (randomised scenes); `None` renders the plain luma scene of
    /// the named presets, unchanged.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub look: Option<Look>,
}

impl Scene {
    /// The same scene `f` times larger: the frame, every position and every size (a phone's
    /// 1080p picture of the bench, for instance); angles, finishes and paint unchanged. The
    /// frame's size is rounded to whole pixels. Textured benches and looks keep their own
    /// scale.
    pub fn scaled(&self, f: f64) -> Scene {
        assert!(f.is_finite() && f > 0.0, "scale {f}");
        let p = |q: [f64; 2]| [q[0] * f, q[1] * f];
        let stripe = |s: &Stripe| Stripe {
            r_inner_px: s.r_inner_px * f,
            r_outer_px: s.r_outer_px * f,
            width_px: s.width_px * f,
            start_deg: s.start_deg,
        };
        let mut out = self.clone();
        out.width = (f64::from(self.width) * f).round() as u32;
        out.height = (f64::from(self.height) * f).round() as u32;
        out.drive.pivot = p(self.drive.pivot);
        out.drive.radius_px *= f;
        out.drive.stripe = stripe(&self.drive.stripe);
        out.drive.highlight = self.drive.highlight.map(|h| Highlight {
            offset_px: p(h.offset_px),
            sigma_px: h.sigma_px * f,
            peak: h.peak,
        });
        out.nut.pivot = p(self.nut.pivot);
        out.nut.across_flats_px *= f;
        out.nut.stud_radius_px *= f;
        out.nut.stripe = stripe(&self.nut.stripe);
        out.fixed = self.fixed.map(|m| FixedMark {
            pivot: p(m.pivot),
            stripe: stripe(&m.stripe),
            plate_half_px: p(m.plate_half_px),
        });
        out
    }
}
