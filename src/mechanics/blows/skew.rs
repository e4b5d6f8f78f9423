//! A rolling shutter's skew on a blow's peak: the bound on how far the twist read in one
//! frame can sit from the twist at the frame's mid-readout instant, from how far each mark
//! turned to its neighbouring frames. Part of the mechanics stage: it must never import
//! report, `analyze`, `batch` or the CLI.
//!
//! A rolling-shutter sensor reads row y at `t_frame + ρ(y)·T` (`ρ` from −½ at the top edge to
//! +½ at the bottom, T the readout time; `track::rolling`). A mark whose annulus spans rows
//! with |ρ| ≤ ρ_max is read within ρ_max·T of the frame's mid-readout instant. While it turns
//! steadily by s degrees per frame interval Δ, that is at most s·ρ_max·T/Δ degrees. A sensor
//! reads one frame out before it starts the next (*common practice*), so T ≤ Δ: with no
//! readout stated, T = Δ is the bound. The twist's bound is the sum of the two marks' (the
//! worst case: their skews need not cancel). The rate is the larger step to either
//! neighbouring frame, which holds for motion that is steady across the frame interval; a
//! blow's rise shorter than a frame interval can skew more, which no frame can show.

/// How a clip's rows were read, for the skew bound.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ReadoutSkew {
    /// Readout time over the captured frame interval, T/Δ (0..=1; 1 when the readout is not
    /// stated and only bounded).
    pub readout_per_interval: f64,
    /// Largest |ρ| over the rows each mark's annulus covers: drive, nut.
    pub rho_max: [f64; 2],
    /// Whether T was stated (the rig's `camera.rolling_shutter_ms`) or bounded by Δ.
    pub stated: bool,
}

impl ReadoutSkew {
    /// The bound on the twist's skew at sample `i`, degrees, from the drive and nut angles in
    /// degrees (None where a mark was lost). None when `i` has no measured neighbour.
    pub(super) fn bound_deg(
        &self,
        drive: &[Option<f64>],
        nut: &[Option<f64>],
        i: usize,
    ) -> Option<f64> {
        let step = |v: &[Option<f64>]| -> Option<f64> {
            let here = v.get(i).copied().flatten()?;
            let prev = i.checked_sub(1).and_then(|j| v.get(j).copied().flatten());
            let next = v.get(i + 1).copied().flatten();
            [prev, next]
                .into_iter()
                .flatten()
                .map(|n| (n - here).abs())
                .reduce(f64::max)
        };
        let r = self.readout_per_interval.clamp(0.0, 1.0);
        let d = step(drive)? * self.rho_max[0];
        let n = step(nut)? * self.rho_max[1];
        Some(r * (d + n))
    }
}

/// A skew bound this large against the peak twist earns a warning (and widens the interval
/// in any case): 5 % of the peak, the project's peak-torque accuracy on phone footage.
pub(super) const SKEW_WARN_FRACTION: f64 = 0.05;

#[cfg(test)]
mod tests {
    use super::*;

    /// Steady turning: drive 10° per frame, nut 4°, T/Δ = ½, both marks at |ρ| ≤ 0.25: the
    /// bound is ½ · (10 · 0.25 + 4 · 0.25) = 1.75°. At rest it is zero; with no measured
    /// neighbour there is none.
    #[test]
    fn the_bound_follows_the_steps_to_the_neighbours() {
        let s = ReadoutSkew {
            readout_per_interval: 0.5,
            rho_max: [0.25, 0.25],
            stated: true,
        };
        let drive: Vec<Option<f64>> = [0.0, 10.0, 20.0, 20.0].map(Some).to_vec();
        let nut: Vec<Option<f64>> = [0.0, 4.0, 8.0, 8.0].map(Some).to_vec();
        assert!((s.bound_deg(&drive, &nut, 1).unwrap() - 1.75).abs() < 1e-12);
        // Frame 2: the step back (10°, 4°) is the larger.
        assert!((s.bound_deg(&drive, &nut, 2).unwrap() - 1.75).abs() < 1e-12);
        let rest: Vec<Option<f64>> = vec![Some(3.0); 4];
        assert_eq!(s.bound_deg(&rest, &rest, 2), Some(0.0));
        let lone = vec![None, Some(1.0), None];
        assert_eq!(s.bound_deg(&lone, &lone, 1), None);
    }
}
