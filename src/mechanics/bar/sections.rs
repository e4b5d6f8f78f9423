//! The bar's sections by shape (round, tube, hexagon, square): their dimensions, torsion
//! constant and maximum shear stress per unit torque, each formula with its source, and the
//! compliance of one prismatic segment. Part of the mechanics stage: imports nothing from
//! report, `analyze`, `batch` or the CLI.
//!
//! Part of the mechanics stage: it must never import report, `analyze`, `batch`, `find_marks`,
//! `calibrate` or the CLI.

use std::f64::consts::PI;

use serde::{Deserialize, Serialize};

/// Torsion constant of a square, K = β·s⁴ with β = 0.140577: Saint-Venant's series for a
/// rectangular bar at a side ratio of 1 (Timoshenko & Goodier, *Theory of Elasticity*, 3rd ed.,
/// ch. 10; their table gives k₁ = 0.1406). Checked against that series and a finite-difference
/// Prandtl solve in `bar/saint_venant_check.rs`.
pub(super) const SQUARE_J_COEFF: f64 = 0.140_577;
/// Maximum shear stress of a square, τ = 4.808·T/s³ = T/(0.208·s³), at mid-side (Timoshenko &
/// Goodier, ch. 10, table for rectangular bars: k₂ = 0.208, from memory). Checked against a
/// finite-difference Prandtl solve in `bar/saint_venant_check.rs`.
pub(super) const SQUARE_TAU_COEFF: f64 = 4.808;
/// Torsion constant of a regular hexagon, J = 0.11505·s⁴, s across flats: a finite-difference
/// Saint-Venant (Prandtl stress function) solution, checked by the solve in
/// `bar/saint_venant_check.rs`; the handbook value ≈ 0.115·s⁴ is from memory.
pub(super) const HEX_J_COEFF: f64 = 0.115_05;
/// Maximum shear stress of a regular hexagon, τ = 5.328·T/s³ = T/(0.1877·s³), at the middle
/// of each flat (the same finite-difference solution, checked in `bar/saint_venant_check.rs`).
pub(super) const HEX_TAU_COEFF: f64 = 5.328;

/// One section of the bar, by shape. `steel` and `shear_modulus_gpa` override the bar's.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(tag = "shape", rename_all = "lowercase", deny_unknown_fields)]
pub enum SectionSpec {
    /// Solid round.
    Round {
        /// Length, mm.
        length_mm: f64,
        /// Diameter, mm.
        d_mm: f64,
        /// This section's steel, if not the bar's.
        #[serde(default, skip_serializing_if = "Option::is_none")]
        steel: Option<String>,
        /// This section's shear modulus, GPa, if not the bar's.
        #[serde(default, skip_serializing_if = "Option::is_none")]
        shear_modulus_gpa: Option<f64>,
    },
    /// Round tube.
    Tube {
        /// Length, mm.
        length_mm: f64,
        /// Outside diameter, mm.
        d_mm: f64,
        /// Bore (inside diameter), mm.
        bore_mm: f64,
        /// This section's steel, if not the bar's.
        #[serde(default, skip_serializing_if = "Option::is_none")]
        steel: Option<String>,
        /// This section's shear modulus, GPa, if not the bar's.
        #[serde(default, skip_serializing_if = "Option::is_none")]
        shear_modulus_gpa: Option<f64>,
    },
    /// Regular hexagon.
    Hex {
        /// Length, mm.
        length_mm: f64,
        /// Across flats, mm.
        across_flats_mm: f64,
        /// This section's steel, if not the bar's.
        #[serde(default, skip_serializing_if = "Option::is_none")]
        steel: Option<String>,
        /// This section's shear modulus, GPa, if not the bar's.
        #[serde(default, skip_serializing_if = "Option::is_none")]
        shear_modulus_gpa: Option<f64>,
    },
    /// Square.
    Square {
        /// Length, mm.
        length_mm: f64,
        /// Side, mm.
        side_mm: f64,
        /// This section's steel, if not the bar's.
        #[serde(default, skip_serializing_if = "Option::is_none")]
        steel: Option<String>,
        /// This section's shear modulus, GPa, if not the bar's.
        #[serde(default, skip_serializing_if = "Option::is_none")]
        shear_modulus_gpa: Option<f64>,
    },
}

impl SectionSpec {
    /// A solid round section of length `length_mm` and diameter `d_mm`.
    pub fn round(length_mm: f64, d_mm: f64) -> Self {
        SectionSpec::Round {
            length_mm,
            d_mm,
            steel: None,
            shear_modulus_gpa: None,
        }
    }
    /// A tube of outside diameter `d_mm` and bore `bore_mm`.
    pub fn tube(length_mm: f64, d_mm: f64, bore_mm: f64) -> Self {
        SectionSpec::Tube {
            length_mm,
            d_mm,
            bore_mm,
            steel: None,
            shear_modulus_gpa: None,
        }
    }
    /// A regular hexagon, `across_flats_mm` across flats.
    pub fn hex(length_mm: f64, across_flats_mm: f64) -> Self {
        SectionSpec::Hex {
            length_mm,
            across_flats_mm,
            steel: None,
            shear_modulus_gpa: None,
        }
    }
    /// A square of side `side_mm`.
    pub fn square(length_mm: f64, side_mm: f64) -> Self {
        SectionSpec::Square {
            length_mm,
            side_mm,
            steel: None,
            shear_modulus_gpa: None,
        }
    }

    /// The shape's name as written in the rig.
    pub fn shape_name(&self) -> &'static str {
        match self {
            SectionSpec::Round { .. } => "round",
            SectionSpec::Tube { .. } => "tube",
            SectionSpec::Hex { .. } => "hex",
            SectionSpec::Square { .. } => "square",
        }
    }

    /// Length in metres.
    pub fn length_m(&self) -> f64 {
        match *self {
            SectionSpec::Round { length_mm, .. }
            | SectionSpec::Tube { length_mm, .. }
            | SectionSpec::Hex { length_mm, .. }
            | SectionSpec::Square { length_mm, .. } => length_mm * 1e-3,
        }
    }

    pub(super) fn overrides(&self) -> (Option<&str>, Option<f64>) {
        match self {
            SectionSpec::Round {
                steel,
                shear_modulus_gpa,
                ..
            }
            | SectionSpec::Tube {
                steel,
                shear_modulus_gpa,
                ..
            }
            | SectionSpec::Hex {
                steel,
                shear_modulus_gpa,
                ..
            }
            | SectionSpec::Square {
                steel,
                shear_modulus_gpa,
                ..
            } => (steel.as_deref(), *shear_modulus_gpa),
        }
    }

    /// Saint-Venant torsion constant J in m⁴ (the polar moment only for round sections).
    ///
    /// Round πd⁴/32 and tube π(D⁴−d⁴)/32 (Beer & Johnston, *Mechanics of Materials*, ch. 3).
    /// Square 0.140577·s⁴ (Saint-Venant series; Young & Budynas, *Roark's Formulas for Stress
    /// and Strain*, 7th ed., Table 10.1, square: K = 2.25·a⁴ with a = s/2, *from memory*). Hexagon
    /// 0.11505·s⁴ across flats (finite-difference Saint-Venant solution computed for this project). For
    /// the non-round shapes J is below the polar moment because the section warps
    /// (Timoshenko & Goodier, *Theory of Elasticity*, ch. 10, *from memory*; for the hexagon
    /// the polar moment 5√3/72·s⁴ = 0.1203·s⁴ is 4.6 % above the J here).
    pub fn torsion_constant_m4(&self) -> f64 {
        match *self {
            SectionSpec::Round { d_mm, .. } => PI * (d_mm * 1e-3).powi(4) / 32.0,
            SectionSpec::Tube { d_mm, bore_mm, .. } => {
                PI * ((d_mm * 1e-3).powi(4) - (bore_mm * 1e-3).powi(4)) / 32.0
            }
            SectionSpec::Hex {
                across_flats_mm, ..
            } => HEX_J_COEFF * (across_flats_mm * 1e-3).powi(4),
            SectionSpec::Square { side_mm, .. } => SQUARE_J_COEFF * (side_mm * 1e-3).powi(4),
        }
    }

    /// Maximum shear stress per unit torque, Pa per N·m: τ_max = this × T.
    ///
    /// Round 16/(πd³) and tube 16·D/(π(D⁴−d⁴)) (Beer & Johnston ch. 3, τ = T·r/J at the
    /// outer radius). Square 4.808/s³ at mid-side (Roark's Table 10.1, square:
    /// τ = 0.601·T/a³ with a = s/2, *from memory*). Hexagon
    /// 5.328/s³ at mid-flat (finite-difference solution computed for this project).
    pub fn shear_stress_per_nm(&self) -> f64 {
        match *self {
            SectionSpec::Round { d_mm, .. } => 16.0 / (PI * (d_mm * 1e-3).powi(3)),
            SectionSpec::Tube { d_mm, bore_mm, .. } => {
                let (d_o, d_i) = (d_mm * 1e-3, bore_mm * 1e-3);
                16.0 * d_o / (PI * (d_o.powi(4) - d_i.powi(4)))
            }
            SectionSpec::Hex {
                across_flats_mm, ..
            } => HEX_TAU_COEFF / (across_flats_mm * 1e-3).powi(3),
            SectionSpec::Square { side_mm, .. } => SQUARE_TAU_COEFF / (side_mm * 1e-3).powi(3),
        }
    }

    /// Where the maximum shear stress sits on this shape, in words.
    pub fn stress_location(&self) -> &'static str {
        match self {
            SectionSpec::Round { .. } | SectionSpec::Tube { .. } => "outer surface",
            SectionSpec::Hex { .. } | SectionSpec::Square { .. } => "middle of the flats",
        }
    }

    pub(crate) fn dimensions(&self) -> Vec<(&'static str, f64)> {
        match *self {
            SectionSpec::Round {
                length_mm, d_mm, ..
            } => vec![("length_mm", length_mm), ("d_mm", d_mm)],
            SectionSpec::Tube {
                length_mm,
                d_mm,
                bore_mm,
                ..
            } => vec![
                ("length_mm", length_mm),
                ("d_mm", d_mm),
                ("bore_mm", bore_mm),
            ],
            SectionSpec::Hex {
                length_mm,
                across_flats_mm,
                ..
            } => vec![
                ("length_mm", length_mm),
                ("across_flats_mm", across_flats_mm),
            ],
            SectionSpec::Square {
                length_mm, side_mm, ..
            } => vec![("length_mm", length_mm), ("side_mm", side_mm)],
        }
    }
}

/// Compliance of one prismatic segment, rad per N·m: L/(G·J), from θ = T·L/(G·J)
/// (Beer & Johnston, *Mechanics of Materials*, ch. 3).
pub(crate) fn segment_compliance(length_m: f64, shear_modulus_pa: f64, j_m4: f64) -> f64 {
    length_m / (shear_modulus_pa * j_m4)
}
