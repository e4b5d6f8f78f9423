//! Stage 4, mechanics: the bar's torsional stiffness from its sections and steel (or a
//! calibration), and the per-blow quantities (advances, peak and residual twist, torque).
//!
//! In: a [`crate::Trace`] and the blows found by [`crate::segment`]. Out: per-blow metrics in
//! SI units. Sections in series share one torque, so 1/k = Σ Lᵢ/(Gᵢ·Jᵢ) (any
//! mechanics-of-materials text, e.g. Beer & Johnston, *Mechanics of Materials*, ch. 3).

mod bar;
mod bar_report;
mod blows;
mod calibration;
pub(crate) use calibration::{csv_with_headers, parse_decimal};
mod steel;

pub use bar::{BarSpec, CalibrationSpec, InertiaPart, Material, SectionSpec};
pub use bar_report::{
    BarJson, BarReport, InertiaSource, MeasuredRecovery, ModelRecovery, PeakStress, SectionJson,
    SectionReport, SpringbackVerdict, StiffnessSource, TORQUE_CAUTION,
};
pub use blows::{BlowMetrics, NUT_STOP_MIN_DEG, Summary, blow_metrics};
pub use calibration::{
    CalibrationFit, CalibrationPair, fit_stiffness, fit_stiffness_line, parse_pair, read_pairs_csv,
};
pub use steel::{DEFAULT_SHEAR_MODULUS_GPA, STEELS, Steel, YieldCriterion, steel};
