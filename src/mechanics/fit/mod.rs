//! Fits the lumped blow model ([`super::model`]) to one clip's trace: the drive-side inertia
//! struck by the tool's blows, the bar as a spring in series with the nut, the nut held by
//! static and kinetic (Coulomb) friction against a joint whose torque rises linearly with
//! angle, and the tool's back-drive. See docs/mechanics.md ("The blow model").
//!
//! Method: weighted nonlinear least squares on every frame's twist and nut angle, minimised
//! with the Levenberg–Marquardt method (K. Levenberg, "A method for the solution of certain
//! non-linear problems in least squares", Q. Appl. Math. 2, 1944; D. W. Marquardt, "An
//! algorithm for least-squares estimation of nonlinear parameters", J. SIAM 11, 1963), a short
//! loop of our own on `nalgebra` (`lm.rs`). Each parameter's standard uncertainty is the
//! square root of the diagonal of s²·(JᵀJ)⁻¹, with J the Jacobian of the weighted residuals at
//! the optimum and s² the residual variance per degree of freedom (the usual linearised
//! covariance of a least-squares estimate; e.g. Press et al., *Numerical Recipes*, 3rd ed.,
//! §15.5).
//!
//! Part of the mechanics stage: it must never import report, `analyze`, `batch`, `find_marks`,
//! `calibrate` or the CLI.

use nalgebra::{DMatrix, DVector};
use serde::{Deserialize, Serialize};

use crate::error::{Error, Result};

mod lm;
mod prepare;

pub(crate) use lm::BREAKAWAY_INDEX;
use lm::{BREAKAWAY, BREAKAWAY_GRID, LM_STARTS, NUT_RATIO, Problem, minimise};
use prepare::Prepared;
pub(crate) use prepare::physical;

/// Fewest blows a fit needs: one to see the spring-back, more to see the joint's line.
pub const FIT_MIN_BLOWS: usize = 3;

/// Longest stretch of clip the fit simulates, s (a longer clip is fitted on its start): it
/// bounds the fit's time (tens of blows of any tool fit in it).
pub const FIT_MAX_CLIP_S: f64 = 2.0;

/// Most integration steps all the fit's simulations together may take: 1.5 billion, about
/// three and a half minutes on one core of the project's test machine and ten times what a typical clip's fit
/// takes. When they are spent the minimiser stops where it is and the fit's `termination`
/// says so (a fit that needs more is one the clip does not constrain).
pub const FIT_MAX_TOTAL_STEPS: f64 = 1.5e9;

/// Most integration steps one simulation of the fit may take: 4 million, 20 times what the
/// step of a typical bar needs over [`FIT_MAX_CLIP_S`] (1e-5 s steps). Trial constants that
/// would need more are rejected as a failed step, which bounds the fit's time whatever the
/// clip shows.
pub const FIT_MAX_SIM_STEPS: f64 = 4.0e6;

/// Nut-end (socket and nut) over drive-end inertia the scan starts from. It is fitted: the
/// nut end's own vibration is faster than the frames, but how far the nut turns once it breaks
/// away (its overshoot against the joint) depends on it, and measured on rendered clips the
/// fit's cost rises eightfold for a 25 % error in it.
const NUT_INERTIA_RATIO_GRID: [f64; 4] = [0.06, 0.1, 0.16, 0.25];

/// The bar's own damping ratio against the reduced inertia: fixed and small (a steel bar's
/// internal damping is a few per cent of critical, *common practice*).
pub const BAR_DAMPING_RATIO: f64 = 0.02;

/// Blow pulse length over the drive end's half period against a held nut: fixed, short (a
/// blow much shorter than the bar's period acts as an impulse, so the value hardly matters).
pub const PULSE_TO_HALF_PERIOD: f64 = 0.05;

/// Largest twist at the first frame for which the clip counts as starting at rest, degrees.
pub const FIT_MAX_START_TWIST_DEG: f64 = 0.5;

/// Noise floor of a trace angle in the fit's weights, degrees.
const NOISE_FLOOR_DEG: f64 = 0.05;

/// Range of the time from a blow's impact to the onset frame a report names, frames: the
/// impact is at most two frames before the first frame that shows motion.
const LEAD_FROM_ONSET_FRAMES: (f64, f64) = (0.0, 2.0);

/// Range of the time from a blow's impact to its measured sub-frame start
/// ([`crate::mechanics::subframe`]), frames: half a frame either way covers the straight
/// line's bias on the sine's curvature over the first two samples.
const LEAD_FROM_SUBFRAME_FRAMES: (f64, f64) = (-0.5, 0.5);

/// Number of fitted parameters.
pub const N_PARAMS: usize = 9;

/// What the fit reads from a clip: the trace, the blows' onsets and the bar's stiffness.
#[derive(Debug, Clone, PartialEq)]
pub struct ClipObs {
    /// Capture rate, frames per second.
    pub fps: f64,
    /// Frame times, s.
    pub t_s: Vec<f64>,
    /// Drive-end angle, degrees, 0 at the first frame (None where lost).
    pub drive_deg: Vec<Option<f64>>,
    /// Nut-end angle, degrees, 0 at the first frame (None where lost).
    pub nut_deg: Vec<Option<f64>>,
    /// Twist already in the bar at the first frame, degrees.
    pub twist_offset_deg: f64,
    /// Blow onsets (the first frame of the drive end's advance), s.
    pub blow_t_s: Vec<f64>,
    /// Per blow (as `blow_t_s`), the drive end's measured sub-frame start of motion, s (None
    /// where it was not measured).
    pub impact_t_s: Vec<Option<f64>>,
    /// The filmed bar's stiffness, N·m/rad.
    pub stiffness_nm_per_rad: f64,
    /// One-frame angle noise (σ), degrees.
    pub noise_deg: f64,
}

/// A fitted value and its standard uncertainty (1σ), in the unit its key names.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Estimate {
    /// The fitted value.
    pub value: f64,
    /// Standard uncertainty (1σ), same unit.
    pub sigma: f64,
}

/// The fitted parameters, each with its uncertainty.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct FittedParameters {
    /// Drive-side (anvil, drive end) inertia, kg·m².
    pub drive_inertia_kg_m2: Estimate,
    /// Angular momentum each blow hands the drive end, N·m·s.
    pub blow_momentum_nms: Estimate,
    /// The tool's damping while turning forward, N·m·s/rad.
    pub forward_damping_nms_per_rad: Estimate,
    /// The tool's resistance to back-drive (damping while the drive end turns back),
    /// N·m·s/rad.
    pub back_damping_nms_per_rad: Estimate,
    /// Kinetic joint torque at the clip's first nut angle, N·m.
    pub joint_start_torque_nm: Estimate,
    /// Joint rate: torque per radian of nut turn, N·m/rad.
    pub joint_rate_nm_per_rad: Estimate,
    /// Static over kinetic friction torque at the nut (breakaway ratio), ≥ 1.
    pub breakaway_ratio: Estimate,
    /// Time from the blow's impact to the time the fit starts from (the measured sub-frame
    /// start of motion when every blow has one, else the onset frame), s.
    pub onset_lead_s: Estimate,
    /// Nut-end (socket, nut) inertia over the drive end's.
    pub nut_to_drive_inertia_ratio: Estimate,
}

/// How well the fitted model reproduces the clip.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct FitQuality {
    /// RMS of model − measured twist over the frames, degrees.
    pub rms_twist_deg: f64,
    /// RMS of model − measured nut angle over the frames, degrees.
    pub rms_nut_deg: f64,
    /// RMS of model − measured per-blow peak twist (both frame-sampled), degrees.
    pub rms_peak_twist_deg: f64,
    /// Largest |model / measured − 1| of a blow's peak twist.
    pub max_peak_twist_rel_error: f64,
    /// RMS of model − measured per-blow nut advance, degrees.
    pub rms_nut_advance_deg: f64,
    /// Frames used.
    pub frames_used: usize,
    /// Residual evaluations the minimiser made.
    pub evaluations: usize,
    /// How the minimiser stopped.
    pub termination: String,
}

/// The clip's envelope: what the fit saw, so a prediction can say where it goes beyond it.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ClipEnvelope {
    /// The clip's capture rate, frames per second.
    pub capture_fps_hz: f64,
    /// Blows fitted.
    pub blow_count: usize,
    /// 60 / median onset interval, blows per minute.
    pub blow_rate_per_min: f64,
    /// The filmed bar's stiffness, N·m/rad.
    pub bar_stiffness_nm_per_rad: f64,
    /// Nut angle at the end of the fitted stretch, degrees.
    pub nut_total_deg: f64,
    /// Highest per-blow model peak torque over the fitted blows, N·m.
    pub peak_torque_max_nm: f64,
}

/// The blow model fitted to one clip: `report.json`'s `model`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ModelFit {
    /// The method, with its sources.
    pub method: String,
    /// Fitted parameters with their uncertainties.
    pub parameters: FittedParameters,
    /// Values held fixed (assumptions), by name.
    pub fixed: FixedAssumptions,
    /// How well the model reproduces the clip.
    pub quality: FitQuality,
    /// What the clip showed.
    pub clip: ClipEnvelope,
    /// The internal parameter vector (log scale for positive values), for `predict`.
    pub internal: Vec<f64>,
    /// Covariance of `internal` (s²·(JᵀJ)⁻¹), row by row.
    pub internal_covariance: Vec<Vec<f64>>,
}

/// The assumptions the fit holds fixed.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct FixedAssumptions {
    /// Bar damping ratio.
    pub bar_damping_ratio: f64,
    /// Blow pulse over the drive end's half period.
    pub pulse_to_half_period_ratio: f64,
}

/// Frame-sampled per-blow peak twist and nut advance (degrees) of a trace, blow by blow,
/// where `at(i)` gives (twist, nut) at used frame `i`.
fn per_blow(prep: &Prepared, at: impl Fn(usize) -> (f64, f64)) -> Vec<(f64, f64)> {
    let fr = &prep.frames;
    let t = |j: usize| prep.obs.t_s[fr[j]];
    let mut out = Vec::new();
    for (b, &tb) in prep.blows.iter().enumerate() {
        let next = prep.blows.get(b + 1).copied().unwrap_or(f64::INFINITY);
        let inside: Vec<usize> = (0..fr.len())
            .filter(|&j| t(j) >= tb && t(j) < next)
            .collect();
        let before = (0..fr.len()).rev().find(|&j| t(j) < tb);
        let (Some(&last), Some(before)) = (inside.last(), before) else {
            continue;
        };
        let peak = inside.iter().map(|&j| at(j).0).fold(f64::MIN, f64::max);
        out.push((peak, at(last).1 - at(before).1));
    }
    out
}

/// The breakaway ratio's standard uncertainty from the profiled costs on [`BREAKAWAY_GRID`]:
/// the curvature of a parabola through the lowest point and its neighbours, or half the grid
/// spacing when the lowest point is at an end of the grid (then the profile is one-sided).
fn breakaway_sigma(profile: &[f64], b_hat: f64, s2: f64) -> f64 {
    let g = &BREAKAWAY_GRID;
    let i = (0..g.len())
        .min_by(|&a, &b| profile[a].total_cmp(&profile[b]))
        .unwrap_or(0);
    let spread = g[g.len() - 1] - g[0];
    if i == 0 || i + 1 == g.len() {
        return (b_hat - 1.0).max(spread / 2.0);
    }
    let (x0, x1, x2) = (g[i - 1], g[i], g[i + 1]);
    let (y0, y1, y2) = (profile[i - 1], profile[i], profile[i + 1]);
    // Second divided difference = the parabola's leading coefficient a.
    let a = ((y2 - y1) / (x2 - x1) - (y1 - y0) / (x1 - x0)) / (x2 - x0);
    if a > 0.0 && a.is_finite() {
        (s2 / a).sqrt().min(spread)
    } else {
        spread / 2.0
    }
}

fn rms(v: impl Iterator<Item = f64>) -> f64 {
    let (s, n) = v.fold((0.0, 0usize), |(s, n), x| (s + x * x, n + 1));
    if n == 0 { 0.0 } else { (s / n as f64).sqrt() }
}

/// Fits the blow model to a clip.
///
/// # Errors
/// [`Error::Input`] when the clip has no bar stiffness, too few blows or frames, starts wound
/// up, shows a nut that never turned, or when the fit does not converge to finite values.
pub fn fit(obs: &ClipObs) -> Result<ModelFit> {
    let prep = Prepared::new(obs)?;
    // The drive inertia sets the period and is the least well guessed value: scan it on a
    // geometric grid (keeping the first peak, H/√(k·I), where the guess put it), then start
    // the minimiser from the two best points of the scan and keep the better optimum.
    let base = prep.guess();
    let cost = |q: &[f64]| prep.residuals(q).iter().map(|r| r * r).sum::<f64>();
    // The breakaway ratio acts through a threshold, so the scan covers it too.
    // So does the nut's inertia, which decides how far the nut overshoots once it slips.
    let mut starts: Vec<(f64, Vec<f64>)> = BREAKAWAY_GRID
        .iter()
        .flat_map(|&ratio| NUT_INERTIA_RATIO_GRID.iter().map(move |&nr| (ratio, nr)))
        .flat_map(|(ratio, nr)| {
            (0..13).map(move |i| {
                let ln_s = (f64::from(i) - 6.0) / 6.0 * 4.0_f64.ln();
                (ratio, nr, ln_s)
            })
        })
        .map(|(ratio, nr, ln_s)| {
            let mut q0 = base.clone();
            q0[0] += ln_s;
            q0[1] += 0.5 * ln_s;
            q0[BREAKAWAY] = (ratio - 1.0).ln();
            q0[NUT_RATIO] = nr.ln();
            (cost(&q0), q0)
        })
        .filter(|(c, _)| c.is_finite())
        .collect();
    starts.sort_by(|a, b| a.0.total_cmp(&b.0));
    let mut best: Option<(f64, Vec<f64>, usize, String)> = None;
    let mut evaluations = 0;
    for (_, q0) in starts.into_iter().take(LM_STARTS) {
        let got = minimise(&prep, &q0, q0[BREAKAWAY]);
        evaluations += got.2;
        if got.0.is_finite() && best.as_ref().is_none_or(|b| got.0 < b.0) {
            best = Some(got);
        }
    }
    let Some(mut best) = best else {
        return Err(Error::Input {
            path: "report.json".into(),
            reason: "the blow model's fit found no finite optimum for this clip; the trace \
                     may not show a tool hammering a nut"
                .into(),
        });
    };
    // Profile the breakaway ratio: minimise the rest at each grid value, each started from
    // the optimum so far, and keep the best.
    let mut profile = Vec::with_capacity(BREAKAWAY_GRID.len());
    let from = best.1.clone();
    for &ratio in &BREAKAWAY_GRID {
        let got = minimise(&prep, &from, (ratio - 1.0).ln());
        evaluations += got.2;
        profile.push(got.0);
        if got.0.is_finite() && got.0 < best.0 {
            best = got;
        }
    }
    let (_, q, _, termination) = best;
    let problem = Problem {
        prep: &prep,
        breakaway_q: q[BREAKAWAY],
    };
    let mut free = q.clone();
    free.remove(BREAKAWAY);
    let jac = problem.jacobian_at(&free);
    let r = prep.residuals(&q);
    let dof = (r.len().saturating_sub(N_PARAMS)).max(1) as f64;
    let s2 = r.iter().map(|x| x * x).sum::<f64>() / dof;
    let jtj = jac.transpose() * &jac;
    let cov_free = jtj
        .clone()
        .try_inverse()
        .or_else(|| jtj.pseudo_inverse(1e-12).ok())
        .map(|c| c * s2)
        .filter(|c| c.iter().all(|v| v.is_finite()))
        .ok_or_else(|| Error::Input {
            path: "report.json".into(),
            reason: "the blow model's parameters are not determined by this clip (singular \
                     fit); film more blows, with the nut still turning"
                .into(),
        })?;
    // The breakaway ratio's uncertainty from the profile's curvature: a parabola through the
    // best grid point and its neighbours, cost(b) ≈ c₀ + a·(b − b₀)², gives σ_b² = s²/a
    // (a change of one in χ²; the profile-likelihood interval, e.g. Press et al., §15.6).
    let b_hat = 1.0 + q[BREAKAWAY].exp();
    let sigma_b = breakaway_sigma(&profile, b_hat, s2);
    let mut cov = DMatrix::zeros(N_PARAMS, N_PARAMS);
    let idx = |c: usize| if c < BREAKAWAY { c } else { c + 1 };
    for r in 0..N_PARAMS - 1 {
        for c in 0..N_PARAMS - 1 {
            cov[(idx(r), idx(c))] = cov_free[(r, c)];
        }
    }
    cov[(BREAKAWAY, BREAKAWAY)] = (sigma_b / (b_hat - 1.0)).powi(2);
    let p = physical(&q);
    let sd = |c: usize| cov[(c, c)].max(0.0).sqrt();
    let logv = |v: f64, c: usize| Estimate {
        value: v,
        sigma: v * sd(c),
    };
    let lead_span = prep.lead_range.1 - prep.lead_range.0;
    let parameters = FittedParameters {
        drive_inertia_kg_m2: logv(p.drive_inertia, 0),
        blow_momentum_nms: logv(p.momentum, 1),
        forward_damping_nms_per_rad: logv(p.forward_damping, 2),
        back_damping_nms_per_rad: logv(p.back_damping, 3),
        joint_start_torque_nm: logv(p.joint_start, 4),
        joint_rate_nm_per_rad: logv(p.joint_rate, 5),
        breakaway_ratio: Estimate {
            value: p.breakaway,
            sigma: sigma_b,
        },
        onset_lead_s: Estimate {
            value: prep.lead(&p),
            sigma: lead_span * p.lead_frac * (1.0 - p.lead_frac) * sd(7),
        },
        nut_to_drive_inertia_ratio: logv(p.nut_ratio, NUT_RATIO),
    };
    let Some(sim) = prep.simulate(&q) else {
        return Err(Error::Input {
            path: "report.json".into(),
            reason: "the blow model's best fit needs a vibration faster than the fit simulates; \
                     the trace may not show a tool hammering a nut"
                .into(),
        });
    };
    let fr = &prep.frames;
    let model_blows = per_blow(&prep, |j| (sim.twist_deg[j], sim.nut_deg[j]));
    let meas_blows = per_blow(&prep, |j| {
        (
            prep.measured_twist(fr[j]),
            obs.nut_deg[fr[j]].unwrap_or(0.0),
        )
    });
    let pairs = || model_blows.iter().zip(&meas_blows);
    let quality = FitQuality {
        rms_twist_deg: rms((0..fr.len()).map(|j| sim.twist_deg[j] - prep.measured_twist(fr[j]))),
        rms_nut_deg: rms((0..fr.len()).map(|j| sim.nut_deg[j] - obs.nut_deg[fr[j]].unwrap_or(0.0))),
        rms_peak_twist_deg: rms(pairs().map(|(m, o)| m.0 - o.0)),
        max_peak_twist_rel_error: pairs()
            .filter(|(_, o)| o.0 > 0.0)
            .map(|(m, o)| (m.0 / o.0 - 1.0).abs())
            .fold(0.0, f64::max),
        rms_nut_advance_deg: rms(pairs().map(|(m, o)| m.1 - o.1)),
        frames_used: fr.len(),
        evaluations,
        termination,
    };
    let mut intervals: Vec<f64> = prep.blows.windows(2).map(|w| w[1] - w[0]).collect();
    intervals.sort_by(f64::total_cmp);
    let clip = ClipEnvelope {
        capture_fps_hz: obs.fps,
        blow_count: prep.blows.len(),
        blow_rate_per_min: 60.0 / intervals[intervals.len() / 2],
        bar_stiffness_nm_per_rad: obs.stiffness_nm_per_rad,
        nut_total_deg: sim.nut_deg.last().copied().unwrap_or(0.0),
        peak_torque_max_nm: sim.peak_nm.iter().copied().fold(0.0, f64::max),
    };
    Ok(ModelFit {
        method: "weighted least squares on every frame's twist and nut angle, minimised with \
                 the Levenberg-Marquardt method (Levenberg 1944; Marquardt 1963); uncertainties \
                 from the Jacobian at the optimum, s2*(JtJ)^-1"
            .into(),
        parameters,
        fixed: FixedAssumptions {
            bar_damping_ratio: BAR_DAMPING_RATIO,
            pulse_to_half_period_ratio: PULSE_TO_HALF_PERIOD,
        },
        quality,
        clip,
        internal: q,
        internal_covariance: (0..N_PARAMS)
            .map(|r| (0..N_PARAMS).map(|c| cov[(r, c)]).collect())
            .collect(),
    })
}

impl ClipObs {
    /// What the fit needs from the earlier stages: the trace (angles at every sample, with
    /// its times), the blows' onsets and measured sub-frame starts, the bar's stiffness, the
    /// twist zero and the segmenter's one-frame noise of each end. None without a finite
    /// stiffness (no bar).
    pub fn of(
        trace: &crate::track::Trace,
        fps_hz: f64,
        blows: &[super::BlowMetrics],
        summary: &super::Summary,
        noise: [Option<crate::units::Angle>; 2],
    ) -> Option<ClipObs> {
        let k = summary
            .stiffness
            .map(|k| k.nm_per_rad())
            .filter(|k| k.is_finite())?;
        let deg = |a: Option<crate::units::Angle>| a.map(|a| a.deg()).filter(|v| v.is_finite());
        let n = trace.len();
        Some(ClipObs {
            fps: fps_hz,
            t_s: (0..n).map(|i| trace.t_s(i)).collect(),
            drive_deg: (0..n).map(|i| deg(trace.drive[i])).collect(),
            nut_deg: (0..n).map(|i| deg(trace.nut[i])).collect(),
            twist_offset_deg: summary.twist_zero.offset.deg(),
            blow_t_s: blows.iter().map(|b| b.t_s).collect(),
            impact_t_s: blows
                .iter()
                .map(|b| b.onset_subframe_s.filter(|t| t.is_finite()))
                .collect(),
            stiffness_nm_per_rad: k,
            noise_deg: deg(noise[0])
                .unwrap_or(0.0)
                .hypot(deg(noise[1]).unwrap_or(0.0)),
        })
    }
}

/// The blow model for a clip, as analyze stores it and predict fits it: None without a bar
/// (`obs` None); `Err(reason)` when it cannot be fitted, or when the clip has no measured
/// peak torque (`peak_measured` false: a model is never fitted to angles whose torque the
/// self-checks withheld; such a fit could also take minutes).
pub fn blow_model(
    obs: Option<ClipObs>,
    peak_measured: bool,
) -> Option<std::result::Result<ModelFit, String>> {
    let obs = obs?;
    if !peak_measured {
        return Some(Err(
            "no peak torque was measured on this clip (see the warnings), so no blow model was fitted"
                .into(),
        ));
    }
    Some(fit(&obs).map_err(|e| e.to_string()))
}

#[cfg(test)]
mod held_out;
#[cfg(test)]
mod tests;
