//! Stage 4, mechanics: the bar's torsional stiffness from its sections and steel (or a
//! calibration), and the per-blow quantities (advances, peak and residual twist, torque).
//!
//! In: a [`crate::Trace`] and the blows found by [`crate::segment`]. Out: per-blow metrics in
//! SI units. Sections in series share one torque, so 1/k = Σ Lᵢ/(Gᵢ·Jᵢ) (any
//! mechanics-of-materials text, e.g. Beer & Johnston, *Mechanics of Materials*, ch. 3).
//!
//! Layering: uses the trace (track) and the blows (segment); it must never import report,
//! `analyze`, `batch` or the CLI (`tests/it/layering.rs` checks). The bar's report.json types
//! are `report::BarJson` and `report::SectionJson`.

mod bar;
#[cfg(test)]
pub(crate) use bar::c5;
mod bar_report;
mod blows;
mod calibration;
pub(crate) use calibration::{csv_with_headers, parse_decimal};
pub mod fit;
mod holding;
/// The lumped torsional model of a blow (drive inertia, bar, nut, joint): the shipped tool's
/// `predict` fits and runs it, and the invented test bench (tools/scenes) renders its clips
/// with this same code, hence public.
#[doc(hidden)]
pub mod model;
mod model_predict;
mod sense;
mod steel;
pub mod subframe;
mod uncertainty;
pub mod unwind;
mod zero;

pub use bar::{BarSpec, CalibrationSpec, InertiaPart, Material, SectionSpec};
pub use bar_report::{
    BarReport, GAIN_SPRANG_BACK_MAX, GAIN_STILL_WOUND_MIN, InertiaSource, MeasuredRecovery,
    ModelRecovery, PeakStress, SectionReport, SpringbackVerdict, StiffnessSource, TORQUE_CAUTION,
    recovery_from_gain,
};
pub use blows::{
    BlowMetrics, NUT_STOP_MIN_DEG, Reading, ReadoutSkew, Summary, UNDERSAMPLED_RISE_FRAMES,
    blow_metrics, blow_metrics_read, blow_metrics_zeroed, under_read_bound,
};
pub use calibration::{
    CalibrationFit, CalibrationPair, fit_stiffness, fit_stiffness_line, parse_pair, read_pairs_csv,
};
pub use fit::{ClipObs, Estimate, FitQuality, ModelFit, blow_model, fit};
pub use holding::{HoldingTorque, MAX_SLIPS};
pub use model_predict::{PREDICTION_CAUTION, PredictInput, PredictedBlow, Prediction, predict};
pub use sense::{
    BAR_LENGTH_MM, SECTION_ACROSS_MM, SECTION_LENGTH_MM, SET_MIN_DEG, STIFFNESS_NM_PER_DEG,
    bar_sense_warnings,
};
pub use steel::{DEFAULT_SHEAR_MODULUS_GPA, STEELS, Steel, YieldCriterion, steel};
pub use uncertainty::{
    CALIBRATION_REL_SIGMA_DEFAULT, DIMENSION_SIGMA_MM, SHEAR_MODULUS_REL_SIGMA, stiffness_rel_sigma,
};
pub use unwind::{BlowUnwind, DecayFit, DecayMethod, UnwindMeasurement};
pub use zero::{QUIET_MIN_SAMPLES, TwistZero, ZeroSource};
