//! Physical quantities as newtypes, stored in SI units: angles in radians, torque in N·m,
//! stiffness in N·m/rad, and the capture rate that turns frame indices into seconds.
//!
//! Conversions to degrees, lbf·ft and N·m/deg happen only at the edges (rig parsing and
//! report writing). The lbf·ft factor is derived from the exact definitions of the foot
//! (0.3048 m) and the pound-force (0.453 592 37 kg × 9.806 65 m/s²), as NIST SP 811 App. B
//! states them, rather than a rounded constant.
//!
//! A shared leaf: it must never import any other module of the crate.

use std::ops::{Add, Div, Mul, Neg, Sub};

/// Metres per international foot, exact (NIST SP 811, App. B).
pub const M_PER_FT: f64 = 0.3048;
/// Newtons per pound-force, exact: 0.453 592 37 kg × 9.806 65 m/s² (NIST SP 811, App. B).
pub const N_PER_LBF: f64 = 0.453_592_37 * 9.806_65;
/// N·m per lbf·ft, the exact product of the two definitions above.
pub const NM_PER_LBF_FT: f64 = M_PER_FT * N_PER_LBF;

/// A plane angle. Stored in radians.
#[derive(Debug, Clone, Copy, PartialEq, PartialOrd, Default)]
pub struct Angle(f64);

impl Angle {
    /// Zero angle.
    pub const ZERO: Angle = Angle(0.0);
    /// An angle given in radians.
    pub const fn from_rad(rad: f64) -> Self {
        Angle(rad)
    }
    /// An angle given in degrees.
    pub fn from_deg(deg: f64) -> Self {
        Angle(deg.to_radians())
    }
    /// The angle in radians.
    pub const fn rad(self) -> f64 {
        self.0
    }
    /// The angle in degrees.
    pub fn deg(self) -> f64 {
        self.0.to_degrees()
    }
    /// Absolute value.
    pub fn abs(self) -> Self {
        Angle(self.0.abs())
    }
}

impl Add for Angle {
    type Output = Angle;
    fn add(self, o: Angle) -> Angle {
        Angle(self.0 + o.0)
    }
}
impl Sub for Angle {
    type Output = Angle;
    fn sub(self, o: Angle) -> Angle {
        Angle(self.0 - o.0)
    }
}
impl Neg for Angle {
    type Output = Angle;
    fn neg(self) -> Angle {
        Angle(-self.0)
    }
}
impl Mul<f64> for Angle {
    type Output = Angle;
    fn mul(self, s: f64) -> Angle {
        Angle(self.0 * s)
    }
}

/// A torque (moment about the bar's axis). Stored in N·m.
#[derive(Debug, Clone, Copy, PartialEq, PartialOrd, Default)]
pub struct Torque(f64);

impl Torque {
    /// A torque given in N·m.
    pub const fn from_nm(nm: f64) -> Self {
        Torque(nm)
    }
    /// A torque given in lbf·ft.
    pub fn from_lbf_ft(lbf_ft: f64) -> Self {
        Torque(lbf_ft * NM_PER_LBF_FT)
    }
    /// The torque in N·m.
    pub const fn nm(self) -> f64 {
        self.0
    }
    /// The torque in lbf·ft.
    pub fn lbf_ft(self) -> f64 {
        self.0 / NM_PER_LBF_FT
    }
}

impl Div<Stiffness> for Torque {
    type Output = Angle;
    fn div(self, k: Stiffness) -> Angle {
        Angle(self.0 / k.0)
    }
}

/// Torsional stiffness of a bar. Stored in N·m/rad.
#[derive(Debug, Clone, Copy, PartialEq, PartialOrd, Default)]
pub struct Stiffness(f64);

impl Stiffness {
    /// A stiffness given in N·m/rad.
    pub const fn from_nm_per_rad(v: f64) -> Self {
        Stiffness(v)
    }
    /// A stiffness given in N·m/deg.
    pub fn from_nm_per_deg(v: f64) -> Self {
        Stiffness(v.to_degrees())
    }
    /// The stiffness in N·m/rad.
    pub const fn nm_per_rad(self) -> f64 {
        self.0
    }
    /// The stiffness in N·m/deg.
    pub fn nm_per_deg(self) -> f64 {
        self.0.to_radians()
    }
}

impl Mul<Angle> for Stiffness {
    type Output = Torque;
    fn mul(self, a: Angle) -> Torque {
        Torque(self.0 * a.0)
    }
}

/// The camera's capture rate: the only thing that turns a frame index into seconds.
///
/// High-speed clips are stored with a playback rate (often 25 or 30 fps) in the container;
/// that rate is never used for timing unless nothing else is known.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct TimeBase {
    fps_hz: f64,
}

impl TimeBase {
    /// A time base from a capture rate in frames per second.
    ///
    /// # Errors
    /// Returns [`crate::Error::Option`] when the rate is not a finite positive number.
    pub fn from_fps(fps_hz: f64, origin: &str) -> crate::Result<Self> {
        if fps_hz.is_finite() && fps_hz > 0.0 {
            Ok(TimeBase { fps_hz })
        } else {
            Err(crate::Error::Option {
                flag: origin.to_string(),
                reason: format!(
                    "capture rate must be a positive number of frames per second, got {fps_hz}"
                ),
            })
        }
    }
    /// The capture rate in frames per second.
    pub fn fps_hz(self) -> f64 {
        self.fps_hz
    }
    /// Seconds at a frame index: index / capture rate.
    pub fn seconds(self, frame_index: f64) -> f64 {
        frame_index / self.fps_hz
    }
    /// The frame interval in seconds.
    pub fn dt_s(self) -> f64 {
        1.0 / self.fps_hz
    }
    /// The frame index at a time, rounded to the nearest frame.
    pub fn frame_at(self, t_s: f64) -> f64 {
        t_s * self.fps_hz
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    #[test]
    fn lbf_ft_factor_matches_nist_sp811() {
        // NIST SP 811 App. B.9 tabulates 1 lbf·ft = 1.355 818 N·m (rounded); exact product
        // 0.3048 × 4.448 221 615 260 5 = 1.355 817 948 331 400 4 (computed from SP 811's exact foot
        // and pound-force).
        assert_relative_eq!(NM_PER_LBF_FT, 1.355_817_948_331_400_4, max_relative = 1e-15);
        assert_relative_eq!(N_PER_LBF, 4.448_221_615_260_5, max_relative = 1e-15);
        // 100 lbf·ft = 135.5818 N·m (computed from the same factor).
        assert_relative_eq!(
            Torque::from_lbf_ft(100.0).nm(),
            135.5818,
            max_relative = 1e-6
        );
        // 1 N·m = 0.737 562 149 277 265 lbf·ft (computed from the same factor).
        assert_relative_eq!(
            Torque::from_nm(1.0).lbf_ft(),
            0.737_562_149_277_265,
            max_relative = 1e-14
        );
    }

    #[test]
    fn stiffness_times_angle_is_torque() {
        // C1 solid round bar: k = 2551.07 N·m/rad = 44.525 N·m/deg (θ = T·L/(G·J), Beer & Johnston ch. 3).
        let k = Stiffness::from_nm_per_rad(2551.07);
        assert_relative_eq!(k.nm_per_deg(), 44.525, max_relative = 1e-4);
        let t = k * Angle::from_deg(3.3689);
        assert_relative_eq!(t.nm(), 150.0, max_relative = 1e-4);
        assert_relative_eq!((t / k).deg(), 3.3689, max_relative = 1e-12);
    }

    #[test]
    fn time_base_rejects_bad_rates() {
        assert!(TimeBase::from_fps(0.0, "--fps").is_err());
        assert!(TimeBase::from_fps(-5.0, "--fps").is_err());
        assert!(TimeBase::from_fps(f64::NAN, "--fps").is_err());
        let tb = TimeBase::from_fps(2000.0, "--fps").unwrap();
        assert_relative_eq!(tb.seconds(1000.0), 0.5);
    }
}
