//! `twistmark calibrate --rig RIG --pair TORQUE_NM:TWIST_DEG ... [--csv FILE] [--out RIG]`:
//! fits the bar's stiffness through the origin from torque-wrench checks, prints it with its
//! uncertainty and residuals, and writes it into a rig as `calibrated_stiffness_nm_per_deg`.
//!
//! Pairs come from sources that all yield (torque, twist); typed pairs and a CSV file today.
//! Twist measured from still images of the loaded bar (a `--stills` source using the rig's
//! marks) needs the tracker and would be one more source feeding the same fit.

use std::path::PathBuf;
use std::process::ExitCode;

use anyhow::{Context, Result};
use clap::Args;
use twistmark::mechanics::{self, CalibrationPair, TORQUE_CAUTION};
use twistmark::units::Torque;

/// Arguments of `calibrate`.
#[derive(Debug, Args)]
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
    /// Write the rig with the calibrated stiffness to this file (may be the --rig file).
    #[arg(long, value_name = "RIG.json")]
    out: Option<PathBuf>,
    /// Print one JSON object instead of text.
    #[arg(long)]
    json: bool,
}

pub fn run(a: CalibrateArgs) -> Result<ExitCode> {
    let (mut rig, mut bar) = super::bar::load_bar(&a.rig)?;
    let mut pairs: Vec<CalibrationPair> = Vec::new();
    for p in &a.pairs {
        pairs.push(mechanics::parse_pair(p)?);
    }
    if let Some(csv) = &a.csv {
        pairs.extend(mechanics::read_pairs_csv(csv)?);
    }
    if pairs.is_empty() {
        anyhow::bail!(
            "--pair: no checks given; pass --pair TORQUE_NM:TWIST_DEG for each, or --csv FILE"
        );
    }
    let fit = mechanics::fit_stiffness(&pairs)?;
    let computed = bar.computed_stiffness();
    let k = fit.stiffness;
    let u = fit.stderr;
    let vs_pct = 100.0 * (k.nm_per_rad() / computed.nm_per_rad() - 1.0);

    bar.calibrated_stiffness_nm_per_deg = Some(k.nm_per_deg());
    bar.calibration = Some(fit.to_spec(computed, "given"));
    rig.bar = Some(bar);
    if let Some(out) = &a.out {
        let text = rig.to_json_pretty() + "\n";
        // Re-read what we are about to write, so a written rig always parses.
        twistmark::Rig::from_json_str(&text, out)?;
        std::fs::write(out, text).with_context(|| format!("{}: cannot write", out.display()))?;
    }

    if a.json {
        let v = serde_json::json!({
            "calibrated_stiffness_nm_per_deg": k.nm_per_deg(),
            "calibrated_stiffness_nm_per_rad": k.nm_per_rad(),
            "stderr_nm_per_deg": u.nm_per_deg(),
            "computed_stiffness_nm_per_deg": computed.nm_per_deg(),
            "calibrated_vs_computed_pct": vs_pct,
            "rms_residual_deg": fit.rms_residual.deg(),
            "pairs": fit.pairs.iter().zip(&fit.residuals).map(|(p, r)| serde_json::json!({
                "torque_nm": p.torque.nm(),
                "twist_deg": p.twist.deg(),
                "fitted_twist_deg": (p.torque / k).deg(),
                "residual_deg": r.deg(),
            })).collect::<Vec<_>>(),
            "written_to": a.out.as_ref().map(|p| p.display().to_string()),
        });
        println!("{}", serde_json::to_string_pretty(&v)?);
        return Ok(ExitCode::SUCCESS);
    }
    println!(
        "calibration from {} check(s), fit through the origin",
        fit.pairs.len()
    );
    println!(
        "  {:>10}  {:>10}  {:>10}  {:>10}  {:>12}",
        "torque", "twist", "fitted", "residual", "as torque"
    );
    for (p, r) in fit.pairs.iter().zip(&fit.residuals) {
        println!(
            "  {:>6.1} N·m  {:>6.3} deg  {:>6.3} deg  {:>+6.3} deg  {:>+8.2} N·m",
            p.torque.nm(),
            p.twist.deg(),
            (p.torque / k).deg(),
            r.deg(),
            (k * *r).nm()
        );
    }
    println!(
        "stiffness:  {:.3} ± {:.3} N·m/deg (standard uncertainty) = {:.1} ± {:.1} N·m/rad = {:.3} lbf·ft/deg",
        k.nm_per_deg(),
        u.nm_per_deg(),
        k.nm_per_rad(),
        u.nm_per_rad(),
        Torque::from_nm(k.nm_per_deg()).lbf_ft()
    );
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
