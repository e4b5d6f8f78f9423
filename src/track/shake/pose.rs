//! The camera's pose in one frame relative to the first: a shift and a roll about a centre.
//!
//! Part of the track stage: it must never import segment, mechanics, report, `analyze`,
//! `batch`, `find_marks`, `calibrate` or the CLI.

/// The camera's motion in one frame relative to the first: a point at `p` in the first frame
/// appears at `centre + shift + R(roll)·(p − centre)` (screen coordinates, x right, y down;
/// a positive roll turns the picture clockwise on screen, adding to every screen angle).
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct Pose {
    /// The fixed region's centre in the first frame, px.
    pub centre: [f64; 2],
    /// The centre's displacement, px.
    pub shift: [f64; 2],
    /// The rotation, rad.
    pub roll: f64,
}

impl Pose {
    /// No motion.
    pub fn identity() -> Pose {
        Pose {
            centre: [0.0, 0.0],
            shift: [0.0, 0.0],
            roll: 0.0,
        }
    }

    /// Where the first frame's point `p` is in this frame.
    pub fn apply(&self, p: [f64; 2]) -> [f64; 2] {
        let (s, c) = self.roll.sin_cos();
        let (dx, dy) = (p[0] - self.centre[0], p[1] - self.centre[1]);
        [
            self.centre[0] + self.shift[0] + c * dx - s * dy,
            self.centre[1] + self.shift[1] + s * dx + c * dy,
        ]
    }

    /// How far the first frame's point `p` has moved, px.
    pub fn shift_at(&self, p: [f64; 2]) -> [f64; 2] {
        let q = self.apply(p);
        [q[0] - p[0], q[1] - p[1]]
    }
}
