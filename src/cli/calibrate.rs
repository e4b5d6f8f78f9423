//! `twistmark calibrate --rig RIG (--pair TORQUE_NM:TWIST_DEG ... | --csv FILE | --stills FILE
//! [--reference IMAGE]) [--out RIG]`: fits the bar's stiffness from torque-wrench checks
//! (through the origin for given twists, a line with an offset for twists measured from
//! stills), prints it with its uncertainty and residuals, and writes it into a rig as
//! `calibrated_stiffness_nm_per_deg`.
//!
//! Twist comes either as numbers (typed pairs and/or a CSV, which may be combined) or measured
//! by the tracker from still images of the loaded bar (`--stills`, see `twistmark::calibrate`).
//! The two kinds are not mixed in one fit: the fit is unweighted, so it assumes every twist
//! has the same noise, and the rig's record names one twist source. Clap refuses the mix as a
//! usage error (exit 2).
//!
//! Part of the binary's command line: it uses the library through its public API only, and the
//! library must never import it.

use std::path::PathBuf;
use std::process::ExitCode;

use anyhow::{Context, Result};
use clap::Args;
use twistmark::calibrate::{StillsMeasurement, measure_stills, read_stills_csv};
use twistmark::mechanics::{self, CalibrationPair, TORQUE_CAUTION};
use twistmark::units::Torque;

/// A fitted point's image, CSV line, drive and nut angles (deg), for `--stills`.
type StillInfo = (String, Option<u64>, f64, f64);

/// Arguments of `calibrate`.
#[derive(Debug, Args)]
#[command(after_help = "\
Twist from still images (--stills): a CSV with a header row, torque_nm (or torque_lbf_ft) and
image, one row per photo of the bar held at that torque; image paths are relative to the CSV's
folder. The row with torque 0 (or --reference IMAGE) is the bar at rest. Each image is measured
against it with the rig's drive and nut marks: twist = drive - nut, tightening positive. Take
every photo from the same fixed camera position, at the same size, e.g.

    torque_nm,image
    0,rest.png
    40,t040.png
    80,t080.png

--stills cannot be combined with --pair or --csv; --pair and --csv can be combined.
Torque from twist is a model, not a calibrated measurement: follow the vehicle maker's
specification and check with a calibrated torque wrench.")]
pub struct CalibrateArgs {
    /// The rig file holding the bar.
    #[arg(long)]
    rig: PathBuf,
    /// One check: applied torque in N·m and measured twist in degrees, e.g. 100:2.32. Repeat
    /// for each check.
    #[arg(
        long = "pair",
        value_name = "TORQUE_NM:TWIST_DEG",
        allow_hyphen_values = true
    )]
    pairs: Vec<String>,
    /// A CSV file of checks with a header row: torque_nm (or torque_lbf_ft) and twist_deg
    /// (or twist_rad).
    #[arg(long, value_name = "FILE")]
    csv: Option<PathBuf>,
    /// A CSV of photos of the loaded bar: torque_nm (or torque_lbf_ft) and image; the twist in
    /// each image is measured against the unloaded one with the rig's drive and nut marks.
    #[arg(long, value_name = "FILE.csv", conflicts_with_all = ["pairs", "csv"])]
    stills: Option<PathBuf>,
    /// The image of the bar at rest, when the --stills CSV has no row with torque 0.
    #[arg(long, value_name = "IMAGE", requires = "stills", conflicts_with_all = ["pairs", "csv"])]
    reference: Option<PathBuf>,
    /// The day the checks were made, YYYY-MM-DD (default: today, UTC); written into the
    /// rig's calibration record.
    #[arg(long, value_name = "YYYY-MM-DD")]
    date: Option<String>,
    /// The torque reference used (maker, model, serial number, its calibration certificate),
    /// written into the rig's calibration record so a report can name it.
    #[arg(long, value_name = "TEXT")]
    reference_wrench: Option<String>,
    /// Write the rig with the calibrated stiffness to this file (may be the --rig file).
    #[arg(long, value_name = "RIG.json")]
    out: Option<PathBuf>,
    /// Print one JSON object instead of text.
    #[arg(long)]
    json: bool,
}

pub fn run(a: CalibrateArgs) -> Result<ExitCode> {
    let date = match &a.date {
        Some(d) => check_date(d)?,
        None => twistmark::report::ToolJson::today_utc(),
    };
    let (file, mut bar) = super::bar::load_bar_file(&a.rig)?;
    let mut pairs: Vec<CalibrationPair> = Vec::new();
    let mut stills: Option<StillsMeasurement> = None;
    // Every file read, so that --out is never one of them (the rig alone may be updated).
    let mut inputs: Vec<PathBuf> = a.csv.iter().chain(&a.stills).cloned().collect();
    inputs.extend(a.reference.iter().cloned());
    if let Some(table) = &a.stills {
        let super::bar::BarFile::Rig(rig) = &file else {
            anyhow::bail!(
                "{}: --stills measures the twist with the rig's drive and nut marks, and this file \
                 holds only a bar; give a whole rig (with \"marks\") to --rig",
                a.rig.display()
            );
        };
        let plan = read_stills_csv(table, a.reference.as_deref())?;
        inputs.extend(plan.rows.iter().map(|r| r.path.clone()));
        if let twistmark::calibrate::Reference::Row(r) = &plan.reference {
            inputs.push(r.path.clone());
        }
        let m = measure_stills(rig, &a.rig, &plan)?;
        super::print_warnings(&m.warnings);
        pairs = m.pairs();
        if m.twists.iter().all(|t| t.twist().rad() <= 0.0) {
            anyhow::bail!(
                "--stills: every measured twist is zero or negative (drive - nut, tightening positive); \
                 check the rig's \"tighten\" directions, that the drive and nut marks are not swapped, \
                 and that the reference is the unloaded image"
            );
        }
        stills = Some(m);
    }
    for p in &a.pairs {
        pairs.push(mechanics::parse_pair(p)?);
    }
    if let Some(csv) = &a.csv {
        pairs.extend(mechanics::read_pairs_csv(csv)?);
    }
    if pairs.is_empty() {
        anyhow::bail!(
            "--pair: no checks given; pass --pair TORQUE_NM:TWIST_DEG for each, --csv FILE, or --stills FILE"
        );
    }
    let fit = match &stills {
        Some(m) => {
            let fit = m.fit()?;
            super::print_warnings(&m.offset_warning(&fit).into_iter().collect::<Vec<_>>());
            fit
        }
        None => mechanics::fit_stiffness(&pairs)?,
    };
    // Per fitted point, for stills: (image, CSV line, drive, nut); the reference comes first.
    let images: Vec<Option<StillInfo>> = match &stills {
        Some(m) => std::iter::once(Some((m.reference.clone(), m.reference_line, 0.0, 0.0)))
            .chain(m.twists.iter().map(|t| {
                Some((
                    t.row.image.clone(),
                    Some(t.row.line),
                    t.drive.deg(),
                    t.nut.deg(),
                ))
            }))
            .collect(),
        None => vec![None; fit.pairs.len()],
    };
    let source = if stills.is_some() { "stills" } else { "given" };
    let computed = bar.computed_stiffness();
    let k = fit.stiffness;
    let u = fit.stderr;
    let vs_pct = 100.0 * (k.nm_per_rad() / computed.nm_per_rad() - 1.0);

    bar.calibrated_stiffness_nm_per_deg = Some(k.nm_per_deg());
    let mut record = fit.to_spec(computed, source);
    record.date = Some(date);
    record.reference_wrench = a
        .reference_wrench
        .as_deref()
        .map(str::trim)
        .filter(|t| !t.is_empty())
        .map(str::to_string);
    bar.calibration = Some(record);
    let is_rig = matches!(file, super::bar::BarFile::Rig(_));
    let text = file.with_bar(bar)?;
    if let Some(out) = &a.out {
        // Re-read what we are about to write, so a written rig always parses.
        if is_rig {
            twistmark::Rig::from_json_str(&text, out)?;
        } else {
            let doc: serde_json::Value = serde_json::from_str(&text)?;
            let bar = doc.get("bar").unwrap_or(&doc);
            serde_json::from_value::<twistmark::mechanics::BarSpec>(bar.clone())?.validate()?;
        }
        let read: Vec<&std::path::Path> = inputs.iter().map(PathBuf::as_path).collect();
        twistmark::report::check_not_input(out, "--out", &read)?;
        twistmark::report::write::write_file(out, text.as_bytes())
            .with_context(|| format!("{}: cannot write", out.display()))?;
    }

    if a.json {
        let v = serde_json::json!({
            "calibrated_stiffness_nm_per_deg": k.nm_per_deg(),
            "calibrated_stiffness_nm_per_rad": k.nm_per_rad(),
            "stderr_nm_per_deg": fit.stderr_known().then(|| u.nm_per_deg()),
            "computed_stiffness_nm_per_deg": computed.nm_per_deg(),
            "calibrated_vs_computed_pct": vs_pct,
            "rms_residual_deg": fit.rms_residual.deg(),
            "twist_source": source,
            "offset_deg": fit.offset.map(|a| a.deg()),
            "pairs": fit.pairs.iter().zip(&fit.residuals).zip(&images).map(|((p, r), img)| {
                let mut o = serde_json::json!({
                    "torque_nm": p.torque.nm(),
                    "twist_deg": p.twist.deg(),
                    "fitted_twist_deg": fit.fitted_twist(p).deg(),
                    "residual_deg": r.deg(),
                });
                if let Some((image, line, drive, nut)) = img {
                    o["image"] = image.clone().into();
                    o["line"] = (*line).into();
                    o["drive_deg"] = (*drive).into();
                    o["nut_deg"] = (*nut).into();
                }
                o
            }).collect::<Vec<_>>(),
            "caution": TORQUE_CAUTION,
            "written_to": a.out.as_ref().map(|p| p.display().to_string()),
        });
        println!("{}", serde_json::to_string_pretty(&v)?);
        return Ok(ExitCode::SUCCESS);
    }
    match fit.offset {
        None => println!(
            "calibration from {} check(s), fit through the origin",
            fit.pairs.len()
        ),
        Some(a) => println!(
            "calibration from {} image(s) including the reference, straight line with an offset \
             (the reference's own error is shared by every twist): offset {:+.4} deg",
            fit.pairs.len(),
            a.deg()
        ),
    }
    if let Some(m) = &stills {
        println!(
            "twist measured from stills, against the unloaded reference (tightening positive)"
        );
        println!(
            "  {:>4}  {:>10}  {:>10}  {:>10}  {:>10}  image",
            "line", "torque", "drive", "nut", "twist"
        );
        for t in &m.twists {
            println!(
                "  {:>4}  {:>6.1} N·m  {:>6.3} deg  {:>6.3} deg  {:>6.3} deg  {}",
                t.row.line,
                t.row.torque.nm(),
                t.drive.deg(),
                t.nut.deg(),
                t.twist().deg(),
                t.row.image
            );
        }
    }
    println!(
        "  {:>10}  {:>10}  {:>10}  {:>10}  {:>12}",
        "torque", "twist", "fitted", "residual", "as torque"
    );
    for (p, r) in fit.pairs.iter().zip(&fit.residuals) {
        println!(
            "  {:>6.1} N·m  {:>6.3} deg  {:>6.3} deg  {:>+6.3} deg  {:>+8.2} N·m",
            p.torque.nm(),
            p.twist.deg(),
            fit.fitted_twist(p).deg(),
            r.deg(),
            (k * *r).nm()
        );
    }
    if fit.stderr_known() {
        println!(
            "stiffness:  {:.3} ± {:.3} N·m/deg (standard uncertainty) = {:.1} ± {:.1} N·m/rad = {:.3} lbf·ft/deg",
            k.nm_per_deg(),
            u.nm_per_deg(),
            k.nm_per_rad(),
            u.nm_per_rad(),
            Torque::from_nm(k.nm_per_deg()).lbf_ft()
        );
    } else {
        println!(
            "stiffness:  {:.3} N·m/deg = {:.1} N·m/rad = {:.3} lbf·ft/deg; uncertainty: cannot be estimated \
             (the checks repeat one point; measure at several different torques)",
            k.nm_per_deg(),
            k.nm_per_rad(),
            Torque::from_nm(k.nm_per_deg()).lbf_ft()
        );
    }
    println!(
        "residuals:  rms {:.4} deg; computed from the sections: {:.3} N·m/deg, calibrated is {vs_pct:+.1} % from it",
        fit.rms_residual.deg(),
        computed.nm_per_deg()
    );
    if !(-25.0..=10.0).contains(&vs_pct) {
        eprintln!(
            "warning: the calibrated stiffness is {vs_pct:+.0} % from the computed one; check the sections, \
             the steel, and that each pair is (torque in N·m, twist in degrees). Play in the drive square usually \
             makes a measured k somewhat lower, not higher."
        );
    }
    match &a.out {
        Some(out) => println!(
            "written:    {} (bar.calibrated_stiffness_nm_per_deg and bar.calibration)",
            out.display()
        ),
        None => println!("not written: pass --out RIG.json to store the calibration in a rig"),
    }
    println!("caution: {TORQUE_CAUTION}");
    Ok(ExitCode::SUCCESS)
}

/// Checks `--date`: a calendar day written YYYY-MM-DD (ISO 8601).
fn check_date(text: &str) -> Result<String> {
    let t = text.trim();
    let ok = t.len() == 10
        && t.bytes().enumerate().all(|(i, b)| {
            if i == 4 || i == 7 {
                b == b'-'
            } else {
                b.is_ascii_digit()
            }
        })
        && humantime::parse_rfc3339(&format!("{t}T00:00:00Z")).is_ok();
    if !ok {
        anyhow::bail!("--date: '{text}' is not a day written YYYY-MM-DD (for example 2026-03-14)");
    }
    Ok(t.to_string())
}
