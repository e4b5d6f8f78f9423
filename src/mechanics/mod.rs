//! Stage 4, mechanics: the bar's torsional stiffness from its sections and steel (or a
//! calibration), and the per-blow quantities (advances, peak and residual twist, torque).
//!
//! In: a [`crate::Trace`] and the blows found by [`crate::segment`]. Out: per-blow metrics in
//! SI units. Sections in series share one torque, so 1/k = Σ Lᵢ/(Gᵢ·Jᵢ) (any
//! mechanics-of-materials text, e.g. Beer & Johnston, *Mechanics of Materials*, ch. 3).

mod bar;
mod blows;

pub use bar::{BarSpec, SectionSpec};
pub use blows::{BlowMetrics, NUT_STOP_MIN_DEG, StiffnessSource, Summary, blow_metrics};
