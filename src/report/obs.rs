//! A written report read back as the blow model's observations: `predict` fits the model
//! from a report.json when analyze did not store one (`analyze --fit-model`).
//!
//! Part of the report stage: it reads results through `crate::Analysis` and must never import
//! `batch`, `find_marks`, `calibrate` or the CLI.

use super::json::Report;
use crate::mechanics::ClipObs;

impl Report {
    /// What the blow model's fit needs, taken from the report's trace, blows, twist zero,
    /// bar stiffness and noise (the same values `mechanics::ClipObs::of` takes from the
    /// analysis). None when the report was made without a bar (no finite stiffness).
    pub fn clip_obs(&self) -> Option<ClipObs> {
        let s = &self.summary;
        let k = s
            .bar_stiffness_nm_per_rad
            .filter(|k| k.is_finite() && *k > 0.0)?;
        let finite = |v: Option<f64>| v.filter(|x| x.is_finite());
        Some(ClipObs {
            fps: self.fps,
            t_s: self.trace.t_s.clone(),
            drive_deg: self.trace.drive_deg.iter().map(|&v| finite(v)).collect(),
            nut_deg: self.trace.nut_deg.iter().map(|&v| finite(v)).collect(),
            twist_offset_deg: s.twist_zero.offset_deg,
            blow_t_s: self.blows.iter().map(|b| b.t_s).collect(),
            impact_t_s: self
                .blows
                .iter()
                .map(|b| finite(b.onset_subframe_t_s))
                .collect(),
            stiffness_nm_per_rad: k,
            noise_deg: finite(s.drive_noise_deg)
                .unwrap_or(0.0)
                .hypot(finite(s.nut_noise_deg).unwrap_or(0.0)),
        })
    }

    /// Whether the report holds a measured peak torque (null when the self-checks withheld
    /// it); no blow model is fitted without one.
    pub fn peak_torque_measured(&self) -> bool {
        self.summary.peak_torque_nm.is_some_and(f64::is_finite)
    }
}

#[cfg(test)]
mod tests {
    use super::super::tests::analysis;

    /// A report written and read back gives the fit the same observations as the analysis
    /// it was written from (angles to the report's rounding).
    #[test]
    fn a_written_report_gives_the_analysis_observations() {
        let a = analysis(true);
        let from_analysis = crate::mechanics::ClipObs::of(
            &a.trace,
            a.time_base.fps_hz(),
            &a.blows,
            &a.summary,
            [a.segmentation.drive_noise, a.segmentation.nut_noise],
        )
        .expect("the test analysis has a bar");
        let text = serde_json::to_string(&super::super::report(&a)).unwrap();
        let r: super::Report = serde_json::from_str(&text).unwrap();
        let back = r.clip_obs().expect("a bar");
        assert_eq!(back.t_s.len(), from_analysis.t_s.len());
        assert_eq!(back.blow_t_s.len(), from_analysis.blow_t_s.len());
        for (a, b) in back.drive_deg.iter().zip(&from_analysis.drive_deg) {
            assert_eq!(a.is_some(), b.is_some());
            if let (Some(a), Some(b)) = (a, b) {
                assert!((a - b).abs() < 1e-3, "{a} vs {b}");
            }
        }
        assert!(
            (back.stiffness_nm_per_rad - from_analysis.stiffness_nm_per_rad).abs()
                <= 1e-6 * from_analysis.stiffness_nm_per_rad
        );
        assert_eq!(r.peak_torque_measured(), a.summary.peak_torque.is_some());
    }
}
