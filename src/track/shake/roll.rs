//! How much of the camera roll the rigid registration measures is applied: none until the
//! clip's rolls stand clearly above their noise, then each frame's roll shrunk by its noise
//! (the sources are in [`RollShrink::shrink`]). Kept apart from the registration, which only
//! measures each frame's roll and its variance.
//!
//! Part of the track stage: it must never import segment, mechanics, report, `analyze`,
//! `batch`, `find_marks`, `calibrate` or the CLI.

/// Registered frames needed before any roll is applied (see [`RollShrink::shrink`]).
pub(super) const MIN_ROLL_FRAMES: f64 = 20.0;
/// The rolls' spread over the noise's variance needed before any roll is applied: 2 means a
/// roll variance at least equal to the noise's (see [`RollShrink::shrink`]).
pub(super) const ROLL_SNR: f64 = 2.0;

/// Smallest roll worth applying: the rolls' spread above their noise must reach this
/// standard deviation, degrees. A camera roll turns every mark's angle alike, so it leaves the
/// twist (and every torque) untouched and moves each end's angle by itself; the tightest angle
/// target is 0.10° RMS (lossless clips, docs/accuracy.md), and a roll under a third of it adds
/// under a ninth of that target's variance. Below it the roll is not applied, which also spares
/// the rigid step's second fit on every frame.
pub(super) const ROLL_MATERIAL_DEG: f64 = 0.03;

/// Running sums over the registered frames' rolls.
#[derive(Debug, Clone, Default)]
pub(super) struct RollShrink {
    /// Count, Σθ², Σ var(θ).
    sums: [f64; 3],
    /// The last frame's measured roll (for successive differences).
    prev: Option<f64>,
    /// Σθ (the rolls' mean, for their spread about it).
    sum: f64,
    /// Successive differences: count, Σ(Δθ)² (the roll noise as the data show it).
    diff_sums: [f64; 2],
}

impl RollShrink {
    /// The roll to apply: the measured one shrunk towards zero by its noise. A small region
    /// measures roll only to a few tenths of a degree per frame, and each mark's pivot is moved
    /// by the roll times its distance from the fixed region, so an unshrunk noisy roll would add
    /// more error than it removes. The clip's roll variance s² is estimated from running sums
    /// (measured variance less the mean variance of the estimates), and each frame's roll θ
    /// with variance v is applied as θ·s²/(s² + v): the empirical-Bayes (Wiener) shrinkage of
    /// Efron & Morris, "Stein's estimation rule and its competitors — an empirical Bayes
    /// approach", JASA 68 (1973) 117–130. A roll that rises well above its noise is kept
    /// nearly whole; a roll lost in its noise is not applied.
    pub(super) fn shrink(&mut self, theta: f64, var: f64) -> f64 {
        if !var.is_finite() {
            return 0.0;
        }
        self.sums[0] += 1.0;
        self.sums[1] += theta * theta;
        self.sums[2] += var;
        if let Some(prev) = self.prev {
            self.diff_sums[0] += 1.0;
            self.diff_sums[1] += (theta - prev).powi(2);
        }
        self.prev = Some(theta);
        let n = self.sums[0];
        // The noise is the larger of the fit's own variance and half the mean squared successive
        // difference (von Neumann, "Distribution of the ratio of the mean square successive
        // difference to the variance", Ann. Math. Statist. 12, 1941): a camera's roll changes
        // little between frames, so successive differences measure the noise even where the
        // fit's covariance understates it (pixel noise correlated by resampling, texture that
        // is not paint).
        let diff_var = if self.diff_sums[0] > 0.0 {
            0.5 * self.diff_sums[1] / self.diff_sums[0]
        } else {
            f64::INFINITY
        };
        let noise = (self.sums[2] / n).max(diff_var);
        let v = var.max(diff_var);
        // Shake is motion: the signal is the rolls' spread about their mean, not about zero. A
        // constant offset is what registering noisy frames to one noisy template gives (the
        // template's own noise tilts it a little, the same for every frame), not a camera that
        // turned. The roll is applied only once that spread rejects "noise alone" at three
        // standard deviations (under it, spread/noise has mean about 1 and standard deviation
        // √(2/n), the χ²ₙ₋₁/(n−1) law); below that the positive-part estimate would still
        // apply noise. The test is repeated on every frame as the sums grow, so a run of
        // frames would pass it by chance now and then on a clip with no roll at all, and then
        // the constant template offset would be applied whole (it is in θ, and frame 0, the
        // angles' zero, does not have it). So the test also waits for `MIN_ROLL_FRAMES` frames
        // and asks for a roll variance at least as large as the noise's (`ROLL_SNR`): below
        // that the shrinkage would remove less than half the roll anyway, and a clip without
        // roll is left as the translation-only estimate leaves it.
        self.sum += theta;
        let mean = self.sum / n;
        let spread = (self.sums[1] / n - mean * mean).max(0.0);
        let signal = if n >= MIN_ROLL_FRAMES
            && spread > noise * ROLL_SNR.max(1.0 + 3.0 * (2.0 / n).sqrt())
            && spread - noise > ROLL_MATERIAL_DEG.to_radians().powi(2)
        {
            spread - noise
        } else {
            0.0
        };
        if signal + v > 0.0 && v.is_finite() {
            theta * signal / (signal + v)
        } else {
            0.0
        }
    }
}
