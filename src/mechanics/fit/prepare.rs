//! The clip as the blow model's fit sees it: the model's physical constants decoded from the
//! fitted vector, the frames used and their weights, the model's runs on them and the
//! residuals the minimiser reduces.
//!
//! Part of the mechanics stage: it must never import report, `analyze`, `batch`, `find_marks`,
//! `calibrate` or the CLI.

use super::*;
use crate::mechanics::model::{Joint, Model};

/// The model's physical constants, decoded from the internal vector.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct Physical {
    pub drive_inertia: f64,
    pub momentum: f64,
    pub forward_damping: f64,
    pub back_damping: f64,
    pub joint_start: f64,
    pub joint_rate: f64,
    pub breakaway: f64,
    pub lead_frac: f64,
    pub nut_ratio: f64,
}

/// Decodes the internal vector: logarithms for positive values, 1 + e^q for the breakaway
/// ratio, logistic(q) for the onset lead's place in its range.
pub(crate) fn physical(q: &[f64]) -> Physical {
    Physical {
        drive_inertia: q[0].exp(),
        momentum: q[1].exp(),
        forward_damping: q[2].exp(),
        back_damping: q[3].exp(),
        joint_start: q[4].exp(),
        joint_rate: q[5].exp(),
        breakaway: 1.0 + q[6].exp(),
        lead_frac: 1.0 / (1.0 + (-q[7]).exp()),
        nut_ratio: q[8].exp(),
    }
}

impl Physical {
    /// The simulator for this set of constants on a bar of stiffness `k` (N·m/rad), with
    /// blows at `blow_times` (impacts, s) and the state at rest at `start`.
    pub(crate) fn model(&self, k: f64, blow_times: Vec<f64>, start: f64) -> Model {
        let i_d = self.drive_inertia;
        let i_n = self.nut_ratio * i_d;
        let i_red = i_d * i_n / (i_d + i_n);
        let half = std::f64::consts::PI * (i_d / k).sqrt();
        let pulse = PULSE_TO_HALF_PERIOD * half;
        Model {
            drive_inertia: i_d,
            nut_inertia: i_n,
            stiffness: k,
            bar_damping: 2.0 * BAR_DAMPING_RATIO * (k * i_red).sqrt(),
            forward_damping: self.forward_damping,
            back_damping: self.back_damping,
            joint: Some(Joint {
                snug_nm: self.joint_start,
                rate_nm_per_rad: self.joint_rate,
                breakaway: self.breakaway,
            }),
            blow_times,
            blow_momentum: self.momentum,
            pulse,
            // The nut end's vibration, √(k/I_n), sets the step: 1/100 of its period keeps
            // semi-implicit Euler's phase error far below the frame spacing.
            step: (half * (self.nut_ratio / (1.0 + self.nut_ratio)).sqrt() / 50.0)
                .min(pulse / 10.0)
                .min(1.0e-5),
            start,
        }
    }
}

/// The clip as prepared for fitting: the frames used and their weights.
pub(super) struct Prepared {
    pub(super) obs: ClipObs,
    /// Frames used (index into the trace), ascending, within the fitted stretch.
    pub(super) frames: Vec<usize>,
    /// Blow onsets within the fitted stretch, s.
    pub(super) blows: Vec<f64>,
    /// The times the impacts are placed from (less the fitted lead): the measured sub-frame
    /// starts when every fitted blow has one, else `blows`, s.
    pub(super) base: Vec<f64>,
    /// The lead's range, s.
    pub(super) lead_range: (f64, f64),
    /// Time the state is at rest, s.
    pub(super) start: f64,
    pub(super) sigma_deg: f64,
    /// Integration steps taken by every simulation so far (bounded by
    /// [`FIT_MAX_TOTAL_STEPS`]).
    pub(super) steps_used: std::cell::Cell<f64>,
}

/// One evaluation of the model on the clip's frames.
pub(super) struct Sim {
    /// Model twist at each used frame, degrees.
    pub(super) twist_deg: Vec<f64>,
    /// Model nut angle at each used frame, degrees.
    pub(super) nut_deg: Vec<f64>,
    /// Continuous peak spring torque per blow, N·m.
    pub(super) peak_nm: Vec<f64>,
}

impl Prepared {
    pub(super) fn new(obs: &ClipObs) -> Result<Prepared> {
        let bad = |reason: String| Error::Input {
            path: "report.json".into(),
            reason,
        };
        let k = obs.stiffness_nm_per_rad;
        if !(k.is_finite() && k > 0.0) {
            return Err(bad(
                "the report was made without a bar (no stiffness), so there is no torque to \
                 fit; analyze the clip again with a rig that has a \"bar\""
                    .into(),
            ));
        }
        if obs.twist_offset_deg.abs() > FIT_MAX_START_TWIST_DEG {
            return Err(bad(format!(
                "the clip starts with {:.2} deg of twist already in the bar; the blow model \
                 is fitted from rest, so film from before the first blow",
                obs.twist_offset_deg
            )));
        }
        let t0 = obs.t_s.first().copied().unwrap_or(0.0);
        let t_end = obs
            .t_s
            .last()
            .copied()
            .unwrap_or(t0)
            .min(t0 + FIT_MAX_CLIP_S);
        let kept: Vec<usize> = (0..obs.blow_t_s.len())
            .filter(|&b| obs.blow_t_s[b] > t0 && obs.blow_t_s[b] <= t_end)
            .collect();
        let blows: Vec<f64> = kept.iter().map(|&b| obs.blow_t_s[b]).collect();
        let sub: Option<Vec<f64>> = kept
            .iter()
            .map(|&b| obs.impact_t_s.get(b).copied().flatten())
            .map(|t| t.filter(|t| t.is_finite() && *t > t0 - 2.0 / obs.fps))
            .collect();
        let (base, range) = match sub {
            Some(s) => (s, LEAD_FROM_SUBFRAME_FRAMES),
            None => (blows.clone(), LEAD_FROM_ONSET_FRAMES),
        };
        let lead_range = (range.0 / obs.fps, range.1 / obs.fps);
        if blows.len() < FIT_MIN_BLOWS {
            return Err(bad(format!(
                "{} blow(s) in the clip; fitting the blow model needs at least {FIT_MIN_BLOWS} \
                 (film more blows)",
                blows.len()
            )));
        }
        let frames: Vec<usize> = (0..obs.t_s.len())
            .filter(|&i| {
                obs.t_s[i] <= t_end && obs.drive_deg[i].is_some() && obs.nut_deg[i].is_some()
            })
            .collect();
        if frames.len() < 4 * N_PARAMS {
            return Err(bad(format!(
                "only {} frames with both marks; the fit needs at least {}",
                frames.len(),
                4 * N_PARAMS
            )));
        }
        let nut_moved = frames
            .iter()
            .filter_map(|&i| obs.nut_deg[i])
            .fold(0.0_f64, f64::max);
        if nut_moved < 0.5 {
            return Err(bad(
                "the nut never turned in the clip, so the joint cannot be fitted; film a run \
                 in which the nut still turns"
                    .into(),
            ));
        }
        Ok(Prepared {
            obs: obs.clone(),
            frames,
            blows,
            base,
            lead_range,
            start: t0 - 1.0 / obs.fps,
            sigma_deg: obs.noise_deg.max(NOISE_FLOOR_DEG),
            steps_used: std::cell::Cell::new(0.0),
        })
    }

    /// The lead, s.
    pub(super) fn lead(&self, p: &Physical) -> f64 {
        self.lead_range.0 + (self.lead_range.1 - self.lead_range.0) * p.lead_frac
    }

    pub(super) fn measured_twist(&self, i: usize) -> f64 {
        self.obs.drive_deg[i].unwrap_or(0.0) - self.obs.nut_deg[i].unwrap_or(0.0)
            + self.obs.twist_offset_deg
    }

    /// The model's trace at the used frames; None when these constants would need more than
    /// [`FIT_MAX_SIM_STEPS`] integration steps (a vibration so fast that no clip could show
    /// it), so that no trial point of the minimiser can make one simulation unbounded.
    pub(super) fn simulate(&self, q: &[f64]) -> Option<Sim> {
        let p = physical(q);
        let lead = self.lead(&p);
        let impacts: Vec<f64> = self.base.iter().map(|t| t - lead).collect();
        let start = self.start.min(impacts[0] - 1e-6);
        let m = p.model(self.obs.stiffness_nm_per_rad, impacts, start);
        let times: Vec<f64> = self.frames.iter().map(|&i| self.obs.t_s[i]).collect();
        let span = times.last().copied().unwrap_or(start) - start;
        let steps = span / m.step;
        if !(m.step > 0.0 && steps <= FIT_MAX_SIM_STEPS) {
            return None;
        }
        self.steps_used.set(self.steps_used.get() + steps);
        let (states, ev) = m.run(&times);
        Some(Sim {
            twist_deg: states
                .iter()
                .map(|s| (s.theta_d - s.theta_n).to_degrees())
                .collect(),
            nut_deg: states.iter().map(|s| s.theta_n.to_degrees()).collect(),
            peak_nm: ev.peak_spring_torque,
        })
    }

    /// True once the fit's simulations have taken [`FIT_MAX_TOTAL_STEPS`] steps.
    pub(super) fn budget_spent(&self) -> bool {
        self.steps_used.get() >= FIT_MAX_TOTAL_STEPS
    }

    pub(super) fn residuals(&self, q: &[f64]) -> Vec<f64> {
        let sim = if self.budget_spent() {
            None
        } else {
            self.simulate(q)
        };
        let Some(sim) = sim else {
            return vec![f64::INFINITY; 2 * self.frames.len()];
        };
        let mut r = Vec::with_capacity(2 * self.frames.len());
        for (j, &i) in self.frames.iter().enumerate() {
            r.push((sim.twist_deg[j] - self.measured_twist(i)) / self.sigma_deg);
            r.push((sim.nut_deg[j] - self.obs.nut_deg[i].unwrap_or(0.0)) / self.sigma_deg);
        }
        r
    }

    /// A first guess from the first blow's rise and spring-back and the nut's total turn.
    pub(super) fn guess(&self) -> Vec<f64> {
        let k = self.obs.stiffness_nm_per_rad;
        let span = |a: f64, b: f64| {
            self.frames
                .iter()
                .copied()
                .filter(move |&i| self.obs.t_s[i] >= a && self.obs.t_s[i] < b)
        };
        let (b0, b1) = (self.blows[0], self.blows[1]);
        let (mut peak, mut t_peak) = (0.0_f64, b0);
        for i in span(b0, b1) {
            let w = self.measured_twist(i);
            if w > peak {
                peak = w;
                t_peak = self.obs.t_s[i];
            }
        }
        let peak_rad = peak.to_radians().max(1e-3);
        // Quarter period of a disc on a shaft (free torsional vibration): t = (π/2)·√(I/k).
        let rise = (t_peak - b0 + 0.5 / self.obs.fps).max(0.5 / self.obs.fps);
        let i_d = k * (2.0 * rise / std::f64::consts::PI).powi(2);
        let h = peak_rad * (k * i_d).sqrt();
        // Overdamped return at the slow rate k/c: residual = peak · e^(−k·Δt/c).
        let residual = span(b1 - 1.5 / self.obs.fps, b1)
            .map(|i| self.measured_twist(i))
            .next_back()
            .unwrap_or(0.0)
            .to_radians();
        let dt = (b1 - t_peak).max(1.0 / self.obs.fps);
        let ratio = (peak_rad / residual.max(peak_rad * 0.02)).max(1.05);
        let c_back = (k * dt / ratio.ln()).max((k * i_d).sqrt());
        let last = *self.frames.last().unwrap_or(&0);
        let nut_total = self.obs.nut_deg[last].unwrap_or(0.0).to_radians().max(1e-3);
        let snug = 0.5 * k * peak_rad;
        let rate = ((0.8 * k * peak_rad - snug) / nut_total).max(0.05 * k);
        vec![
            i_d.ln(),
            h.ln(),
            (0.05 * (k * i_d).sqrt()).ln(),
            c_back.ln(),
            snug.ln(),
            rate.ln(),
            (0.1_f64).ln(),
            // Halfway through the lead's range.
            0.0,
            NUT_INERTIA_RATIO_GRID[1].ln(),
        ]
    }
}
