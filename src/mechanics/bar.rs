//! The bar as written in the rig file (sections, steel, rating, calibration) and its
//! torsional stiffness.

use serde::{Deserialize, Serialize};

use crate::error::{Error, Result};
use crate::units::Stiffness;

/// Default shear modulus of carbon steel, GPa (Shigley, *Mechanical Engineering Design*,
/// Table A-5; also Engineering ToolBox "Modulus of rigidity").
pub const DEFAULT_SHEAR_MODULUS_GPA: f64 = 79.3;

/// The `"bar"` object of a rig file.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct BarSpec {
    /// Sections from drive end to nut end; the same torque passes through each.
    pub sections: Vec<SectionSpec>,
    /// Shear modulus for every section without its own, GPa (default 79.3).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub shear_modulus_gpa: Option<f64>,
    /// The bar's rated torque, N·m.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub rating_nm: Option<f64>,
    /// A measured stiffness that replaces the computed one, N·m/deg.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub calibrated_stiffness_nm_per_deg: Option<f64>,
}

/// One section of the bar, by shape.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(tag = "shape", rename_all = "lowercase", deny_unknown_fields)]
pub enum SectionSpec {
    /// Solid round.
    Round {
        /// Length, mm.
        length_mm: f64,
        /// Diameter, mm.
        d_mm: f64,
    },
    /// Round tube.
    Tube {
        /// Length, mm.
        length_mm: f64,
        /// Outside diameter, mm.
        d_mm: f64,
        /// Bore (inside diameter), mm.
        bore_mm: f64,
    },
    /// Regular hexagon.
    Hex {
        /// Length, mm.
        length_mm: f64,
        /// Across flats, mm.
        across_flats_mm: f64,
    },
    /// Square.
    Square {
        /// Length, mm.
        length_mm: f64,
        /// Side, mm.
        side_mm: f64,
    },
}

impl SectionSpec {
    fn length_m(&self) -> f64 {
        match *self {
            SectionSpec::Round { length_mm, .. }
            | SectionSpec::Tube { length_mm, .. }
            | SectionSpec::Hex { length_mm, .. }
            | SectionSpec::Square { length_mm, .. } => length_mm * 1e-3,
        }
    }

    /// Saint-Venant torsion constant J in m⁴ (the polar moment only for round sections).
    ///
    /// Round and tube: πd⁴/32 and π(D⁴−d⁴)/32. Square: 0.140577·s⁴ (Saint-Venant series).
    /// Hexagon: 0.11505·s⁴ across flats (finite-difference Saint-Venant solution recorded
    /// in the project's reference facts; handbook value ≈ 0.115 s⁴ from memory).
    fn torsion_constant_m4(&self) -> f64 {
        use std::f64::consts::PI;
        match *self {
            SectionSpec::Round { d_mm, .. } => PI * (d_mm * 1e-3).powi(4) / 32.0,
            SectionSpec::Tube { d_mm, bore_mm, .. } => {
                PI * ((d_mm * 1e-3).powi(4) - (bore_mm * 1e-3).powi(4)) / 32.0
            }
            SectionSpec::Hex {
                across_flats_mm, ..
            } => 0.115_05 * (across_flats_mm * 1e-3).powi(4),
            SectionSpec::Square { side_mm, .. } => 0.140_577 * (side_mm * 1e-3).powi(4),
        }
    }
}

impl BarSpec {
    /// Checks every dimension.
    ///
    /// # Errors
    /// [`Error::Bar`] naming the field.
    pub fn validate(&self) -> Result<()> {
        let bad = |field: String, reason: String| Error::Bar { field, reason };
        if self.sections.is_empty() {
            return Err(bad(
                "bar.sections".into(),
                "give at least one section".into(),
            ));
        }
        for (i, s) in self.sections.iter().enumerate() {
            let f = |name: &str| format!("bar.sections[{i}].{name}");
            let dims: Vec<(&str, f64)> = match *s {
                SectionSpec::Round { length_mm, d_mm } => {
                    vec![("length_mm", length_mm), ("d_mm", d_mm)]
                }
                SectionSpec::Tube {
                    length_mm,
                    d_mm,
                    bore_mm,
                } => {
                    vec![
                        ("length_mm", length_mm),
                        ("d_mm", d_mm),
                        ("bore_mm", bore_mm),
                    ]
                }
                SectionSpec::Hex {
                    length_mm,
                    across_flats_mm,
                } => {
                    vec![
                        ("length_mm", length_mm),
                        ("across_flats_mm", across_flats_mm),
                    ]
                }
                SectionSpec::Square { length_mm, side_mm } => {
                    vec![("length_mm", length_mm), ("side_mm", side_mm)]
                }
            };
            for (name, v) in dims {
                if !(v.is_finite() && v > 0.0) {
                    return Err(bad(
                        f(name),
                        format!("must be a positive length in mm, got {v}"),
                    ));
                }
            }
            if let SectionSpec::Tube { d_mm, bore_mm, .. } = *s
                && bore_mm >= d_mm
            {
                return Err(bad(
                    f("bore_mm"),
                    format!(
                        "bore {bore_mm} mm must be smaller than the outside diameter {d_mm} mm"
                    ),
                ));
            }
        }
        if let Some(g) = self.shear_modulus_gpa
            && !(g.is_finite() && (20.0..=250.0).contains(&g))
        {
            return Err(bad(
                "bar.shear_modulus_gpa".into(),
                format!("{g} GPa is outside 20-250 GPa; steel is about 79.3"),
            ));
        }
        if let Some(r) = self.rating_nm
            && !(r.is_finite() && r > 0.0)
        {
            return Err(bad(
                "bar.rating_nm".into(),
                format!("must be a positive torque in N·m, got {r}"),
            ));
        }
        if let Some(k) = self.calibrated_stiffness_nm_per_deg
            && !(k.is_finite() && k > 0.0)
        {
            return Err(bad(
                "bar.calibrated_stiffness_nm_per_deg".into(),
                format!("must be a positive stiffness in N·m/deg, got {k}"),
            ));
        }
        Ok(())
    }

    /// Stiffness computed from the sections in series: 1/k = Σ Lᵢ/(G·Jᵢ).
    pub fn computed_stiffness(&self) -> Stiffness {
        let g_pa = self.shear_modulus_gpa.unwrap_or(DEFAULT_SHEAR_MODULUS_GPA) * 1e9;
        let compliance: f64 = self
            .sections
            .iter()
            .map(|s| s.length_m() / (g_pa * s.torsion_constant_m4()))
            .sum();
        Stiffness::from_nm_per_rad(1.0 / compliance)
    }

    /// The stiffness used for torque: the calibrated one when given, else the computed one.
    pub fn stiffness(&self) -> Stiffness {
        match self.calibrated_stiffness_nm_per_deg {
            Some(k) => Stiffness::from_nm_per_deg(k),
            None => self.computed_stiffness(),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    #[test]
    fn c1_solid_round_matches_hand_calculation() {
        // facts.md §1.3 C1: d = 16 mm, L = 200 mm, G = 79.3 GPa → k = 2551.07 N·m/rad (a, computed
        // from θ = TL/(GJ), Beer & Johnston ch. 3).
        let bar = BarSpec {
            sections: vec![SectionSpec::Round {
                length_mm: 200.0,
                d_mm: 16.0,
            }],
            shear_modulus_gpa: None,
            rating_nm: None,
            calibrated_stiffness_nm_per_deg: None,
        };
        assert_relative_eq!(bar.stiffness().nm_per_rad(), 2551.07, max_relative = 1e-3);
    }

    #[test]
    fn c5_series_matches_reference() {
        // facts.md §1.3 C5: 25 mm square s=12.7 + 150 mm round d=16 + 30 mm hex s=19 →
        // k_series = 2466.51 N·m/rad (a, computed).
        let bar = BarSpec {
            sections: vec![
                SectionSpec::Square {
                    length_mm: 25.0,
                    side_mm: 12.7,
                },
                SectionSpec::Round {
                    length_mm: 150.0,
                    d_mm: 16.0,
                },
                SectionSpec::Hex {
                    length_mm: 30.0,
                    across_flats_mm: 19.0,
                },
            ],
            shear_modulus_gpa: Some(79.3),
            rating_nm: None,
            calibrated_stiffness_nm_per_deg: None,
        };
        assert_relative_eq!(bar.stiffness().nm_per_rad(), 2466.51, max_relative = 1e-3);
    }
}
