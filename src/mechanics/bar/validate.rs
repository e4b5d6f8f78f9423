//! Validation of the rig's `"bar"` object: every dimension, modulus, steel name, inertia and
//! calibration field, each error naming its field and what to change. Part of the mechanics
//! stage: imports nothing from report, `analyze`, `batch` or the CLI.
//!
//! Part of the mechanics stage: it must never import report, `analyze`, `batch`, `find_marks`,
//! `calibrate` or the CLI.

use crate::error::{Error, Result};
use crate::mechanics::steel::{self, SHEAR_MODULUS_RANGE_GPA, Steel};

use super::{BarSpec, SectionSpec};

fn bad(field: String, reason: String) -> Error {
    Error::Bar { field, reason }
}

fn check_g(field: String, g: f64) -> Result<()> {
    let (lo, hi) = SHEAR_MODULUS_RANGE_GPA;
    if g.is_finite() && (lo..=hi).contains(&g) {
        Ok(())
    } else {
        Err(bad(
            field,
            format!("{g} GPa is outside {lo}-{hi} GPa; give G in GPa (steel is about 79.3)"),
        ))
    }
}

fn check_steel(field: String, name: &str) -> Result<&'static Steel> {
    steel::steel(name).ok_or_else(|| {
        bad(
            field,
            format!(
                "unknown steel '{name}'; use one of {}",
                steel::steel_names()
            ),
        )
    })
}

fn check_positive(field: String, v: f64, what: &str) -> Result<()> {
    if v.is_finite() && v > 0.0 {
        Ok(())
    } else {
        Err(bad(field, format!("must be a positive {what}, got {v}")))
    }
}

impl BarSpec {
    /// Checks every dimension, modulus, steel name, inertia and calibration field.
    ///
    /// # Errors
    /// [`Error::Bar`] naming the field (`bar.sections[1].bore_mm`) and what to change.
    pub fn validate(&self) -> Result<()> {
        if self.sections.is_empty() {
            return Err(bad(
                "bar.sections".into(),
                "give at least one section".into(),
            ));
        }
        if let Some(g) = self.shear_modulus_gpa {
            check_g("bar.shear_modulus_gpa".into(), g)?;
        }
        if let Some(name) = &self.steel {
            check_steel("bar.steel".into(), name)?;
        }
        for (i, s) in self.sections.iter().enumerate() {
            let f = |name: &str| format!("bar.sections[{i}].{name}");
            for (name, v) in s.dimensions() {
                check_positive(f(name), v, "length in mm")?;
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
            let (steel_name, g) = s.overrides();
            if let Some(name) = steel_name {
                check_steel(f("steel"), name)?;
            }
            if let Some(g) = g {
                check_g(f("shear_modulus_gpa"), g)?;
            }
        }
        if let Some(sy) = self.yield_strength_mpa {
            check_positive(
                "bar.yield_strength_mpa".into(),
                sy,
                "tensile yield strength in MPa",
            )?;
        }
        if let Some(fr) = self.stress_warn_fraction
            && !(fr.is_finite() && fr > 0.0 && fr <= 1.0)
        {
            return Err(bad(
                "bar.stress_warn_fraction".into(),
                format!("must be a fraction of shear yield in (0, 1], e.g. 0.7; got {fr}"),
            ));
        }
        if let Some(r) = self.rating_nm {
            check_positive("bar.rating_nm".into(), r, "torque in N·m")?;
        }
        if let Some(k) = self.calibrated_stiffness_nm_per_deg {
            check_positive(
                "bar.calibrated_stiffness_nm_per_deg".into(),
                k,
                "stiffness in N·m/deg",
            )?;
        }
        if let Some(c) = &self.calibration {
            if self.calibrated_stiffness_nm_per_deg.is_none() {
                return Err(bad(
                    "bar.calibration".into(),
                    "is present without bar.calibrated_stiffness_nm_per_deg; rerun twistmark calibrate or remove it".into(),
                ));
            }
            if c.torque_nm.len() != c.twist_deg.len() {
                return Err(bad(
                    "bar.calibration.twist_deg".into(),
                    format!(
                        "has {} values but torque_nm has {}; give one twist per torque",
                        c.twist_deg.len(),
                        c.torque_nm.len()
                    ),
                ));
            }
            if let Some(s) = c.stderr_nm_per_deg
                && !(s.is_finite() && s >= 0.0)
            {
                return Err(bad(
                    "bar.calibration.stderr_nm_per_deg".into(),
                    format!("must be a non-negative stiffness in N·m/deg, got {s}"),
                ));
            }
        }
        if let Some(i) = self.drive_inertia_kg_m2 {
            check_positive(
                "bar.drive_inertia_kg_m2".into(),
                i,
                "moment of inertia in kg·m²",
            )?;
            if self.drive_parts.is_some() {
                return Err(bad(
                    "bar.drive_parts".into(),
                    "give either drive_inertia_kg_m2 or drive_parts, not both".into(),
                ));
            }
        }
        if let Some(c) = self.drive_back_damping_nms_per_rad
            && !(c.is_finite() && c >= 0.0)
        {
            return Err(bad(
                "bar.drive_back_damping_nms_per_rad".into(),
                format!("must be a damping of 0 or more in N·m·s/rad, got {c}"),
            ));
        }
        if let Some(parts) = &self.drive_parts {
            if parts.is_empty() {
                return Err(bad(
                    "bar.drive_parts".into(),
                    "is empty; list the anvil and drive socket, or remove it".into(),
                ));
            }
            for (i, p) in parts.iter().enumerate() {
                let f = |name: &str| format!("bar.drive_parts[{i}].{name}");
                check_positive(f("mass_kg"), p.mass_kg, "mass in kg")?;
                check_positive(f("outer_d_mm"), p.outer_d_mm, "diameter in mm")?;
                if let Some(b) = p.bore_mm
                    && !(b.is_finite() && b >= 0.0 && b < p.outer_d_mm)
                {
                    return Err(bad(
                        f("bore_mm"),
                        format!(
                            "bore {b} mm must be at least 0 and smaller than outer_d_mm {} mm",
                            p.outer_d_mm
                        ),
                    ));
                }
            }
        }
        Ok(())
    }
}
