//! Named steels (shear modulus and tensile yield, each with its source) and the yield
//! criterion that turns tensile yield into shear yield.
//!
//! Each value comes from the published datasheet or handbook named beside it.
//!
//! Part of the mechanics stage: it must never import report, `analyze`, `batch`, `find_marks`,
//! `calibrate` or the CLI.

use serde::{Deserialize, Serialize};

/// Default shear modulus of carbon steel, GPa (Shigley, *Mechanical Engineering Design*,
/// Table A-5, from memory; 79.3 GPa is also published by Engineering ToolBox "Modulus of
/// rigidity").
pub const DEFAULT_SHEAR_MODULUS_GPA: f64 = 79.3;

/// Accepted range for any shear modulus, GPa. Steels are 73–82 GPa (the datasheets in [`STEELS`]); the wide
/// range lets other metals through while catching a value typed in MPa or psi.
pub const SHEAR_MODULUS_RANGE_GPA: (f64, f64) = (20.0, 250.0);

/// One named steel.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Steel {
    /// The name used in rig files (`"steel": "4140-qt425"`).
    pub name: &'static str,
    /// What it is, in words.
    pub description: &'static str,
    /// Shear modulus G, GPa.
    pub shear_modulus_gpa: f64,
    /// Where G comes from.
    pub shear_modulus_source: &'static str,
    /// Tensile yield strength Sy, MPa, when a published value exists.
    pub yield_strength_mpa: Option<f64>,
    /// Where Sy comes from.
    pub yield_source: &'static str,
}

/// Every steel a rig may name. G and Sy from the source named beside each.
pub const STEELS: &[Steel] = &[
    Steel {
        name: "carbon",
        description: "plain carbon steel (design default)",
        shear_modulus_gpa: 79.3,
        shear_modulus_source: "Shigley Table A-5 (from memory); Engineering ToolBox 'Modulus of rigidity'",
        yield_strength_mpa: None,
        yield_source: "no single value: grades differ; give bar.yield_strength_mpa",
    },
    Steel {
        name: "4140-annealed",
        description: "Cr-Mo AISI 4140, annealed at 815 °C",
        shear_modulus_gpa: 80.0,
        shear_modulus_source: "MatWeb AISI 4140 datasheet, 'typical for steel' (MakeItFrom's 73 GPa treated as an outlier)",
        yield_strength_mpa: Some(417.0),
        yield_source: "eFunda AISI 4140",
    },
    Steel {
        name: "4140-normalized",
        description: "Cr-Mo AISI 4140, normalized at 870 °C",
        shear_modulus_gpa: 80.0,
        shear_modulus_source: "MatWeb AISI 4140 datasheet, 'typical for steel' (MakeItFrom's 73 GPa treated as an outlier)",
        yield_strength_mpa: Some(655.0),
        yield_source: "eFunda AISI 4140",
    },
    Steel {
        name: "4140-qt205",
        description: "Cr-Mo AISI 4140, oil quenched and tempered at 205 °C",
        shear_modulus_gpa: 80.0,
        shear_modulus_source: "MatWeb AISI 4140, OQ + 205 °C temper",
        yield_strength_mpa: Some(1641.0),
        yield_source: "eFunda AISI 4140",
    },
    Steel {
        name: "4140-qt425",
        description: "Cr-Mo AISI 4140, oil quenched and tempered at 425 °C",
        shear_modulus_gpa: 80.0,
        shear_modulus_source: "MatWeb AISI 4140 datasheet, 'typical for steel'",
        yield_strength_mpa: Some(1138.0),
        yield_source: "eFunda AISI 4140",
    },
    Steel {
        name: "4140-qt540",
        description: "Cr-Mo AISI 4140, oil quenched and tempered at 540 °C",
        shear_modulus_gpa: 80.0,
        shear_modulus_source: "MatWeb AISI 4140 datasheet, 'typical for steel'",
        yield_strength_mpa: Some(834.0),
        yield_source: "eFunda AISI 4140",
    },
    Steel {
        name: "6150-annealed",
        description: "Cr-V AISI 6150, annealed",
        shear_modulus_gpa: 80.0,
        shear_modulus_source: "AZoM AISI 6150, 'typical'",
        yield_strength_mpa: Some(415.0),
        yield_source: "AZoM AISI 6150",
    },
    Steel {
        name: "6145-qt",
        description: "Cr-V AISI 6145, quenched and tempered (HB 429)",
        shear_modulus_gpa: 81.5,
        shear_modulus_source: "AZoM AISI 6145 gives 81-82 GPa; midpoint",
        yield_strength_mpa: Some(1165.0),
        yield_source: "AZoM AISI 6145",
    },
    Steel {
        name: "s2",
        description: "S2 shock-resisting tool steel at HRC 55",
        shear_modulus_gpa: 80.0,
        shear_modulus_source: "AZoM S2 (UNS T41902), 'typical'",
        yield_strength_mpa: Some(2000.0),
        yield_source: "MatWeb S2 data as reproduced by a tool-maker's page",
    },
];

/// Looks a steel up by its rig name (exact, lower case).
pub fn steel(name: &str) -> Option<&'static Steel> {
    STEELS.iter().find(|s| s.name == name)
}

/// The rig names of every steel, comma separated, for error messages.
pub(crate) fn steel_names() -> String {
    STEELS.iter().map(|s| s.name).collect::<Vec<_>>().join(", ")
}

/// How tensile yield becomes shear yield.
///
/// Distortion energy (von Mises): τy = Sy/√3 ≈ 0.577·Sy. Maximum shear (Tresca): τy = 0.5·Sy,
/// the more conservative one (Shigley, *Mechanical Engineering Design*, failure theories).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum YieldCriterion {
    /// τy = Sy/√3.
    #[default]
    VonMises,
    /// τy = Sy/2.
    Tresca,
}

impl YieldCriterion {
    /// Shear yield from tensile yield (any consistent unit).
    pub fn shear_yield(self, yield_strength: f64) -> f64 {
        match self {
            YieldCriterion::VonMises => yield_strength / 3f64.sqrt(),
            YieldCriterion::Tresca => 0.5 * yield_strength,
        }
    }

    /// The name used in rig files and reports.
    pub fn name(self) -> &'static str {
        match self {
            YieldCriterion::VonMises => "von_mises",
            YieldCriterion::Tresca => "tresca",
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn shear_yield_matches_reference_table() {
        // Shear yield computed from Sy of eFunda / AZoM / MatWeb (von Mises 0.577·Sy, Tresca 0.5·Sy; Shigley, failure theories):
        // (name, 0.577·Sy, 0.5·Sy) in whole MPa; the table's rounding is not uniform
        // (6145: Sy/√3 = 672.6 is listed as 672), so allow 1 MPa.
        let table = [
            ("4140-annealed", 241.0, 209.0),
            ("4140-normalized", 378.0, 328.0),
            ("4140-qt205", 947.0, 821.0),
            ("4140-qt425", 657.0, 569.0),
            ("4140-qt540", 482.0, 417.0),
            ("6150-annealed", 240.0, 208.0),
            ("6145-qt", 672.0, 583.0),
            ("s2", 1155.0, 1000.0),
        ];
        for (name, vm, tr) in table {
            let sy = steel(name).unwrap().yield_strength_mpa.unwrap();
            let got_vm = YieldCriterion::VonMises.shear_yield(sy);
            let got_tr = YieldCriterion::Tresca.shear_yield(sy);
            assert!((got_vm - vm).abs() <= 1.0, "{name}: {got_vm} vs {vm}");
            assert!((got_tr - tr).abs() <= 1.0, "{name}: {got_tr} vs {tr}");
        }
    }

    #[test]
    fn every_steel_is_in_range_and_named_once() {
        for (i, s) in STEELS.iter().enumerate() {
            let (lo, hi) = SHEAR_MODULUS_RANGE_GPA;
            assert!((lo..=hi).contains(&s.shear_modulus_gpa), "{}", s.name);
            // Steels sit at 73-82 GPa (the datasheets above).
            assert!((73.0..=82.0).contains(&s.shear_modulus_gpa), "{}", s.name);
            assert!(STEELS[i + 1..].iter().all(|o| o.name != s.name));
        }
        assert_eq!(steel("carbon").unwrap().shear_modulus_gpa, 79.3);
        assert!(steel("Carbon").is_none());
        assert!(steel_names().contains("s2"));
    }
}
