//! Stage 4, mechanics: the bar's torsional stiffness from its sections and steel (or a
//! calibration), and the per-blow quantities (advances, peak and residual twist, torque).
//!
//! In: a [`crate::Trace`] and the blows found by [`crate::segment`]. Out: per-blow metrics in
//! SI units. Sections in series share one torque, so 1/k = Σ Lᵢ/(Gᵢ·Jᵢ) (any
//! mechanics-of-materials text, e.g. Beer & Johnston, *Mechanics of Materials*, ch. 3).

mod bar;
mod blows;

pub use bar::{BarSpec, SectionSpec};
pub use blows::{BlowMetrics, NUT_STOP_MIN_DEG, Summary, blow_metrics};

// Stand-in until the bar-report work lands: it defines `StiffnessSource` with the same
// variants and `as_str`, and this block goes.
/// Where the stiffness used for torque came from.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum StiffnessSource {
    /// The rig's `calibrated_stiffness_nm_per_deg`.
    Calibrated,
    /// Computed from the bar's sections and shear modulus.
    Computed,
}

impl StiffnessSource {
    /// `"calibrated"` or `"computed"`, as written in reports.
    pub fn as_str(self) -> &'static str {
        match self {
            StiffnessSource::Calibrated => "calibrated",
            StiffnessSource::Computed => "computed",
        }
    }
}
