//! The lumped torsional model of a blow: a drive-end inertia struck by hammer blows, a
//! torsion bar, and a nut-end inertia held by a joint whose torque rises with nut angle. The
//! renderer (tools/scenes/src/synth) simulates test clips with it and `predict` fits and runs it
//! (src/mechanics/fit/; docs/mechanics.md, section 14).
//! Integrated with a fixed small step (semi-implicit Euler) and sampled at any sorted list of
//! times. Everything is SI inside (rad, rad/s, N·m, N·m/rad, kg·m², s); angles are positive in
//! the tightening direction and zero at the start of the simulation.
//!
//! Equations (see docs/scenes.md and docs/mechanics.md for the derivation and every knob):
//!
//! ```text
//! I_d·θ̈_d = P(t) − T_bar − T_tool(θ̇_d)
//! I_n·θ̈_n = T_bar − T_joint            (only while the nut slips)
//! T_bar   = k·(θ_d − θ_n) + c_b·(θ̇_d − θ̇_n)
//! T_tool  = c_fwd·θ̇_d when θ̇_d ≥ 0, c_back·θ̇_d when θ̇_d < 0
//! T_joint = T_snug + k_j·θ_n            (kinetic; breakaway from rest needs ratio × T_joint)
//! P(t)    = (π·H / (2·t_p))·sin(π·(t − t_b)/t_p) on t_b ≤ t ≤ t_b + t_p, one half-sine per blow
//! ```
//!
//! Each blow is a half-sine torque pulse whose integral is the angular momentum `H` the hammer
//! hands to the anvil (∫P dt = H). A pulse much shorter than the bar's period acts as an impulse:
//! then the drive end's undamped response against a held nut is θ(t) = (H/√(k·I_d))·sin(√(k/I_d)·t),
//! which peaks a quarter period after the blow and is back at zero after half a period,
//! π·√(I_d/k) (free torsional vibration of a disc on a massless shaft, any theory-of-machines text).
//!
//! Part of the mechanics stage: it must never import report, `analyze`, `batch`, `find_marks`,
//! `calibrate` or the CLI.

use std::f64::consts::PI;

/// The nut end's joint: a hard joint that rises linearly in torque with nut angle after snug.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Joint {
    /// Torque to keep the nut turning at the snug point (θ_n = 0), N·m.
    pub snug_nm: f64,
    /// Joint rate, N·m/rad.
    pub rate_nm_per_rad: f64,
    /// Static over kinetic torque: a stuck nut breaks away when the bar torque exceeds
    /// `breakaway × T_joint`.
    pub breakaway: f64,
}

impl Joint {
    /// Kinetic joint torque at nut angle `theta_n`, N·m.
    pub fn torque(&self, theta_n: f64) -> f64 {
        self.snug_nm + self.rate_nm_per_rad * theta_n
    }
}

/// Every constant of the model, in SI.
#[derive(Debug, Clone, PartialEq)]
pub struct Model {
    /// Drive-end (anvil, flag disc, bar drive end) inertia, kg·m².
    pub drive_inertia: f64,
    /// Nut-end (socket, nut) inertia, kg·m².
    pub nut_inertia: f64,
    /// Bar stiffness k, N·m/rad.
    pub stiffness: f64,
    /// Bar internal damping c_b, N·m·s/rad.
    pub bar_damping: f64,
    /// Tool damping on the drive end while it turns forward, N·m·s/rad.
    pub forward_damping: f64,
    /// Tool damping on the drive end while it turns back (the mechanism resisting back-drive),
    /// N·m·s/rad.
    pub back_damping: f64,
    /// The joint; `None` leaves the nut end free in both directions (used by tests).
    pub joint: Option<Joint>,
    /// Blow start times, s, ascending.
    pub blow_times: Vec<f64>,
    /// Angular momentum per blow, N·m·s.
    pub blow_momentum: f64,
    /// Length of each half-sine pulse, s.
    pub pulse: f64,
    /// Integration step, s.
    pub step: f64,
    /// Simulation start time, s (the state is at rest there).
    pub start: f64,
}

/// The state at one instant.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct State {
    /// Drive-end angle, rad.
    pub theta_d: f64,
    /// Drive-end speed, rad/s.
    pub omega_d: f64,
    /// Nut-end angle, rad.
    pub theta_n: f64,
    /// Nut-end speed, rad/s.
    pub omega_n: f64,
    /// True while the nut is held by static friction.
    pub stuck: bool,
}

impl State {
    /// Spring part of the bar torque, k·twist, N·m.
    pub fn spring_torque(&self, k: f64) -> f64 {
        k * (self.theta_d - self.theta_n)
    }
}

/// Events found while integrating, in continuous time.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Events {
    /// For each blow, the first time the nut broke away after that blow started (before the
    /// next blow), s.
    pub nut_slip: Vec<Option<f64>>,
    /// For each blow, the largest spring torque k·twist between its start and the next blow,
    /// N·m.
    pub peak_spring_torque: Vec<f64>,
}

impl Model {
    /// Mean blow torque over the step [t, t + h], N·m: the half-sine integrated exactly, so
    /// that each blow hands over exactly H whatever the step.
    fn pulse_torque(&self, t: f64, h: f64, next_blow: usize) -> f64 {
        // Only blows that started by the end of the step can act; pulses are far shorter
        // than intervals, so the search stops at the first finished one.
        let amp = PI * self.blow_momentum / (2.0 * self.pulse);
        let w = PI / self.pulse;
        let mut impulse = 0.0;
        let started = self.blow_times[next_blow..]
            .iter()
            .take_while(|&&tb| tb < t + h)
            .count();
        for &tb in self.blow_times[..next_blow + started].iter().rev() {
            let u0 = (t - tb).clamp(0.0, self.pulse);
            let u1 = (t + h - tb).clamp(0.0, self.pulse);
            if t - tb >= self.pulse {
                break;
            }
            impulse += amp / w * ((w * u0).cos() - (w * u1).cos());
        }
        impulse / h
    }

    /// Integrates from rest at `start` and returns the state at each of `times` (ascending,
    /// all ≥ `start`), linearly interpolated between steps, plus the blow events up to the
    /// last requested time.
    ///
    /// # Panics
    /// When `times` is not ascending or starts before `start`.
    pub fn run(&self, times: &[f64]) -> (Vec<State>, Events) {
        assert!(times.windows(2).all(|w| w[0] <= w[1]), "times ascending");
        assert!(times.first().is_none_or(|&t| t >= self.start));
        let nb = self.blow_times.len();
        let mut ev = Events {
            nut_slip: vec![None; nb],
            peak_spring_torque: vec![0.0; nb],
        };
        let mut out = Vec::with_capacity(times.len());
        let mut s = State {
            stuck: self.joint.is_some(),
            ..State::default()
        };
        let h = self.step;
        let k = self.stiffness;
        let mut t = self.start;
        let mut next_blow = 0usize; // blows with start ≤ t
        let mut ti = 0usize;
        let mut step_no: u64 = 0;
        while ti < times.len() && times[ti] <= t {
            out.push(s);
            ti += 1;
        }
        while ti < times.len() {
            while next_blow < nb && self.blow_times[next_blow] <= t {
                next_blow += 1;
            }
            let prev = s;
            // Forces at the start of the step; the pulse as its exact mean over the step.
            let p = self.pulse_torque(t, h, next_blow);
            let t_bar = k * (s.theta_d - s.theta_n) + self.bar_damping * (s.omega_d - s.omega_n);
            let c_tool = if s.omega_d >= 0.0 {
                self.forward_damping
            } else {
                self.back_damping
            };
            // Semi-implicit Euler: speeds first, then angles with the new speeds. The tool's
            // damping is taken implicitly so that large back-drive damping stays stable.
            s.omega_d = (s.omega_d * self.drive_inertia + h * (p - t_bar))
                / (self.drive_inertia + h * c_tool);
            match self.joint {
                None => {
                    s.omega_n += h * t_bar / self.nut_inertia;
                }
                Some(j) => {
                    if s.stuck && t_bar > j.breakaway * j.torque(s.theta_n) {
                        s.stuck = false;
                        if next_blow > 0 && ev.nut_slip[next_blow - 1].is_none() {
                            ev.nut_slip[next_blow - 1] = Some(t);
                        }
                    }
                    if !s.stuck {
                        let w = s.omega_n + h * (t_bar - j.torque(s.theta_n)) / self.nut_inertia;
                        if w <= 0.0 {
                            s.omega_n = 0.0;
                            s.stuck = true;
                        } else {
                            s.omega_n = w;
                        }
                    }
                }
            }
            s.theta_d += h * s.omega_d;
            s.theta_n += h * s.omega_n;
            step_no += 1;
            let t_new = self.start + step_no as f64 * h;
            if next_blow > 0 {
                let tq = s.spring_torque(k);
                let pk = &mut ev.peak_spring_torque[next_blow - 1];
                if tq > *pk {
                    *pk = tq;
                }
            }
            while ti < times.len() && times[ti] <= t_new {
                let f = (times[ti] - t) / h;
                out.push(State {
                    theta_d: prev.theta_d + f * (s.theta_d - prev.theta_d),
                    omega_d: prev.omega_d + f * (s.omega_d - prev.omega_d),
                    theta_n: prev.theta_n + f * (s.theta_n - prev.theta_n),
                    omega_n: prev.omega_n + f * (s.omega_n - prev.omega_n),
                    stuck: s.stuck,
                });
                ti += 1;
            }
            t = t_new;
        }
        (out, ev)
    }

    /// Total mechanical energy (kinetic + bar strain), J.
    #[cfg(test)]
    pub fn energy(&self, s: &State) -> f64 {
        0.5 * self.drive_inertia * s.omega_d.powi(2)
            + 0.5 * self.nut_inertia * s.omega_n.powi(2)
            + 0.5 * self.stiffness * (s.theta_d - s.theta_n).powi(2)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    fn base() -> Model {
        Model {
            drive_inertia: 2.0e-3,
            nut_inertia: 2.0e-4,
            stiffness: 800.0,
            bar_damping: 0.0,
            forward_damping: 0.0,
            back_damping: 0.0,
            joint: None,
            blow_times: vec![0.0],
            blow_momentum: 0.2,
            pulse: 2.0e-6,
            step: 1.0e-7,
            start: 0.0,
        }
    }

    fn grid(n: usize, dt: f64) -> Vec<f64> {
        (0..n).map(|i| i as f64 * dt).collect()
    }

    #[test]
    fn free_nut_without_damping_conserves_momentum_and_energy() {
        // No joint and no damping: after the pulse, angular momentum I_d·ω_d + I_n·ω_n equals
        // the blow's H and the energy H²/(2·I_d) delivered by an impulse stays constant.
        let mut m = base();
        m.step = 1.0e-6;
        let times = grid(400, 5.0e-5);
        let (states, _) = m.run(&times);
        let h = m.blow_momentum;
        let e0 = h * h / (2.0 * m.drive_inertia);
        for s in &states[1..] {
            let l = m.drive_inertia * s.omega_d + m.nut_inertia * s.omega_n;
            assert_relative_eq!(l, h, max_relative = 1e-9);
            // Semi-implicit Euler keeps energy bounded (symplectic), within O(ω·h).
            assert_relative_eq!(m.energy(s), e0, max_relative = 5e-3);
        }
    }

    #[test]
    fn held_nut_springs_back_after_half_a_period() {
        // Free torsional vibration (any theory-of-machines text): a disc on a massless torsion shaft has period 2π·√(I/k). After an
        // impulse H the drive end follows θ = (H/√(kI))·sin(√(k/I)·t): the peak twist is
        // H/√(kI) at a quarter period, and the bar is back at zero twist after π·√(I/k).
        let mut m = base();
        m.joint = Some(Joint {
            snug_nm: 1.0e6,
            rate_nm_per_rad: 0.0,
            breakaway: 1.0,
        });
        let (i, k, h) = (m.drive_inertia, m.stiffness, m.blow_momentum);
        let half = PI * (i / k).sqrt(); // 4.967 ms for I = 2e-3 kg·m², k = 800 N·m/rad
        assert_relative_eq!(half, 4.967e-3, max_relative = 1e-3);
        let dt = 1.0e-6;
        let times = grid(6000, dt);
        let (s, ev) = m.run(&times);
        let twist: Vec<f64> = s.iter().map(|s| s.theta_d - s.theta_n).collect();
        let (imax, &peak) = twist
            .iter()
            .enumerate()
            .max_by(|a, b| a.1.total_cmp(b.1))
            .unwrap();
        assert_relative_eq!(peak, h / (k * i).sqrt(), max_relative = 1e-4);
        // The pulse's centre is at t_p/2 = 1 µs.
        let t_peak = imax as f64 * dt - m.pulse / 2.0;
        assert!((t_peak - half / 2.0).abs() < 2.0e-6, "peak at {t_peak}");
        let zero = twist
            .iter()
            .enumerate()
            .skip(10)
            .find(|&(_, &w)| w < 0.0)
            .map(|(j, _)| j as f64 * dt - m.pulse / 2.0)
            .unwrap();
        assert!((zero - half).abs() < 2.0e-6, "back at zero after {zero} s");
        assert_relative_eq!(ev.peak_spring_torque[0], k * peak, max_relative = 1e-4);
        assert_eq!(ev.nut_slip, vec![None]);
    }

    #[test]
    fn back_drive_damping_unwinds_at_the_overdamped_rate() {
        // A damped single-degree-of-freedom system I·θ̈ + c·θ̇ + k·θ = 0 with c² > 4kI decays
        // on its slow mode λ = (c − √(c² − 4kI))/(2I) (any vibrations text; from memory,
        // e.g. Rao, Mechanical Vibrations, ch. 2). The tool's back-drive damping c_back applies
        // while the drive end turns back, so the twist decays at that rate after the peak.
        let mut m = base();
        m.step = 1.0e-6;
        m.back_damping = 20.0;
        m.joint = Some(Joint {
            snug_nm: 1.0e6,
            rate_nm_per_rad: 0.0,
            breakaway: 1.0,
        });
        let (i, k, c) = (m.drive_inertia, m.stiffness, m.back_damping);
        let lambda = (c - (c * c - 4.0 * k * i).sqrt()) / (2.0 * i);
        assert_relative_eq!(lambda, 40.16, max_relative = 1e-3); // ≈ k/c = 40 s⁻¹
        let times = [0.010, 0.040];
        let (s, _) = m.run(&times);
        let r = s[1].theta_d / s[0].theta_d;
        assert_relative_eq!(r.ln() / -(times[1] - times[0]), lambda, max_relative = 1e-3);
    }

    #[test]
    fn nut_stops_once_the_joint_beats_the_blows() {
        // Blow after blow against a rising joint: the nut advances less each time and stops
        // once breakaway × T_joint exceeds the peak bar torque a blow can reach.
        let mut m = base();
        m.step = 1.0e-6;
        m.pulse = 2.0e-4;
        m.forward_damping = 0.1;
        m.back_damping = 5.0;
        m.bar_damping = 0.05;
        m.blow_momentum = 0.2;
        m.joint = Some(Joint {
            snug_nm: 30.0,
            rate_nm_per_rad: 3.0_f64.to_degrees(),
            breakaway: 1.2,
        });
        m.blow_times = (0..12).map(|b| 0.001 + b as f64 * 0.05).collect();
        let times: Vec<f64> = (0..=12).map(|b| b as f64 * 0.05).collect();
        let (s, ev) = m.run(&times);
        let adv: Vec<f64> = s.windows(2).map(|w| w[1].theta_n - w[0].theta_n).collect();
        assert!(adv[0] > 0.0);
        for w in adv.windows(2) {
            assert!(w[1] <= w[0] + 1e-12, "advances shrink: {adv:?}");
        }
        assert_eq!(*adv.last().unwrap(), 0.0, "nut stopped: {adv:?}");
        let j = m.joint.unwrap();
        let final_hold = j.breakaway * j.torque(s.last().unwrap().theta_n);
        assert!(ev.peak_spring_torque.last().unwrap() < &final_hold);
        assert!(ev.nut_slip[0].is_some() && ev.nut_slip[11].is_none());
    }
}
