//! `twistmark bar --rig RIG [--json]`: the bar's stiffness (computed or calibrated), each
//! section's share, twist and shear stress at the rating against shear yield, and the drive
//! end's natural frequency and spring-back time.
//!
//! Part of the binary's command line: it uses the library through its public API only, and the
//! library must never import it.

use std::path::{Path, PathBuf};
use std::process::ExitCode;

use anyhow::Result;
use clap::Args;
use twistmark::Rig;
use twistmark::mechanics::{BarReport, BarSpec, StiffnessSource, TORQUE_CAUTION};

/// Arguments of `bar`.
#[derive(Debug, Args)]
pub struct BarArgs {
    /// The rig file holding the bar.
    #[arg(long)]
    rig: PathBuf,
    /// Print one JSON object instead of text.
    #[arg(long)]
    json: bool,
}

/// Reads the rig and returns its bar, or a one-line error naming the rig.
pub(crate) fn load_bar(path: &Path) -> Result<(Rig, BarSpec)> {
    let rig = Rig::from_path(path)?;
    let Some(bar) = rig.bar.clone() else {
        anyhow::bail!(
            "{}: bar: the rig has no \"bar\"; add its sections (see docs/mechanics.md)",
            path.display()
        );
    };
    Ok((rig, bar))
}

/// A file that holds a bar: a whole rig, or a file with only a bar (a rig with `"bar"` and no
/// `"marks"`, or the bar's object itself, `{"sections": ...}`), since checking or
/// calibrating a bar needs no marks.
pub(crate) enum BarFile {
    /// A whole rig.
    Rig(Box<Rig>),
    /// A JSON object holding the bar under `"bar"` (`wrapped`) or being the bar itself.
    BarOnly {
        doc: serde_json::Map<String, serde_json::Value>,
        wrapped: bool,
    },
}

impl BarFile {
    /// The file's text with `bar` in place of its bar, in the file's own shape.
    pub(crate) fn with_bar(self, bar: BarSpec) -> Result<String> {
        let text = match self {
            BarFile::Rig(mut rig) => {
                rig.bar = Some(bar);
                rig.to_json_pretty()
            }
            BarFile::BarOnly { mut doc, wrapped } => {
                let v = serde_json::to_value(&bar)?;
                let doc = if wrapped {
                    doc.insert("bar".into(), v);
                    serde_json::Value::Object(doc)
                } else {
                    v
                };
                serde_json::to_string_pretty(&doc)?
            }
        };
        Ok(text + "\n")
    }
}

/// Reads a [`BarFile`] and its bar, or a one-line error naming the file and field.
pub(crate) fn load_bar_file(path: &Path) -> Result<(BarFile, BarSpec)> {
    let rig_error = match load_bar(path) {
        Ok((rig, bar)) => return Ok((BarFile::Rig(Box::new(rig)), bar)),
        Err(e) => e,
    };
    let Ok(text) = twistmark::limits::read_text(path, "rig") else {
        return Err(rig_error);
    };
    let Ok(serde_json::Value::Object(doc)) = serde_json::from_str::<serde_json::Value>(&text)
    else {
        return Err(rig_error);
    };
    let (value, prefix) = match (doc.get("bar"), doc.contains_key("marks")) {
        (Some(bar), false) => (bar.clone(), "bar"),
        (None, false) if doc.contains_key("sections") => {
            (serde_json::Value::Object(doc.clone()), "")
        }
        _ => return Err(rig_error),
    };
    let bar: BarSpec = serde_path_to_error::deserialize(value).map_err(|e| {
        let at = e.path().to_string();
        let field = match (prefix, at.as_str()) {
            ("", f) => f.to_string(),
            (p, ".") => p.to_string(),
            (p, f) => format!("{p}.{f}"),
        };
        anyhow::anyhow!(
            "{}: {field}: {}; check it against the bar format in the README",
            path.display(),
            e.into_inner()
        )
    })?;
    bar.validate()
        .map_err(|e| anyhow::anyhow!("{}: {e}", path.display()))?;
    let wrapped = !prefix.is_empty();
    Ok((BarFile::BarOnly { doc, wrapped }, bar))
}

pub fn run(a: BarArgs) -> Result<ExitCode> {
    let (_, bar) = load_bar_file(&a.rig)?;
    let report = BarReport::new(&bar)?;
    let json = report.to_json();
    if a.json {
        println!("{}", serde_json::to_string_pretty(&json)?);
        super::print_warnings(&report.warnings());
        return Ok(ExitCode::SUCCESS);
    }
    println!(
        "bar in {}: {} section(s), drive end first",
        a.rig.display(),
        json.sections.len()
    );
    println!(
        "  {:>2}  {:<6} {:>8}  {:<15} {:>7}  {:>10}  {:>12}  {:>10}  {:>11}",
        "#", "shape", "length", "steel", "G", "J", "k", "compliance", "tau/torque"
    );
    for s in &json.sections {
        println!(
            "  {:>2}  {:<6} {:>5.1} mm  {:<15} {:>4.1} GPa {:>7.0} mm4 {:>7.0} N·m/rad {:>9.1} %  {:>5.3} MPa/N·m",
            s.index,
            s.shape,
            s.length_mm,
            s.steel.unwrap_or("(not named)"),
            s.shear_modulus_gpa,
            s.torsion_constant_mm4,
            s.stiffness_nm_per_rad,
            100.0 * s.compliance_share,
            s.shear_stress_per_nm_mpa,
        );
    }
    let source = match json.stiffness_source {
        StiffnessSource::Calibrated => {
            let u = json
                .calibration_stderr_nm_per_deg
                .map(|u| format!(" ± {u:.2}"))
                .unwrap_or_default();
            format!(
                "calibrated{u}; {:+.1} % from the {:.3} N·m/deg computed from the sections",
                json.calibrated_vs_computed_pct.unwrap_or(0.0),
                json.computed_stiffness_nm_per_deg
            )
        }
        StiffnessSource::Computed => "computed from the sections (not calibrated)".to_string(),
    };
    println!(
        "stiffness:      {:.3} N·m/deg = {:.1} N·m/rad = {:.3} lbf·ft/deg, {source}",
        json.stiffness_nm_per_deg, json.stiffness_nm_per_rad, json.stiffness_lbf_ft_per_deg
    );
    match (json.rating_nm, json.rating_lbf_ft, json.twist_at_rating_deg) {
        (Some(nm), Some(lbf), Some(tw)) => {
            println!("rating:         {nm:.1} N·m = {lbf:.1} lbf·ft, twist {tw:.3} deg");
            if let (Some(tau), Some(sec)) = (
                json.shear_stress_at_rating_mpa,
                &json.shear_stress_at_rating_section,
            ) {
                println!("max shear:      {tau:.0} MPa at the rating, in {sec}");
            }
            match (
                json.stress_ratio_at_rating,
                &json.stress_ratio_at_rating_section,
            ) {
                (Some(r), Some(sec)) => {
                    let i = json
                        .sections
                        .iter()
                        .position(|s| sec.starts_with(&format!("bar.sections[{}]", s.index)))
                        .unwrap_or(0);
                    let ty = json.sections[i].shear_yield_mpa.unwrap_or(f64::NAN);
                    println!(
                        "stress margin:  {:.0} % of shear yield ({ty:.0} MPa, {}) in {sec}; warning above {:.0} %",
                        100.0 * r,
                        json.yield_criterion,
                        100.0 * json.stress_warn_fraction
                    );
                }
                _ => println!(
                    "stress margin:  unknown: no yield strength (set bar.steel or bar.yield_strength_mpa)"
                ),
            }
        }
        _ => {
            println!("rating:         not given (set bar.rating_nm for twist and stress at rating)")
        }
    }
    match (
        json.natural_frequency_hz,
        json.springback_ms,
        json.drive_inertia_kg_m2,
    ) {
        (Some(f), Some(sb), Some(i)) => {
            let damping = match (json.drive_back_damping_nms_per_rad, json.damping_ratio) {
                (Some(c), Some(z)) if c > 0.0 => {
                    format!("back-drive damping {c} N·m·s/rad, ratio {z:.2}")
                }
                _ => "no damping given, so a lower bound".to_string(),
            };
            println!(
                "spring-back:    drive-end inertia {i:.3e} kg·m², natural frequency {f:.0} Hz; \
                 unwinds to a quarter of its peak {sb:.2} ms after a blow ({damping})"
            );
        }
        _ => println!("spring-back:    unknown: set bar.drive_inertia_kg_m2 or bar.drive_parts"),
    }
    super::print_warnings(&report.warnings());
    println!("caution: {TORQUE_CAUTION}");
    Ok(ExitCode::SUCCESS)
}
