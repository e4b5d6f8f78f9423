//! `twistmark predict --report R --rig OTHER [--blow-rate BPM] [--blows N] [--json]`: runs the
//! blow model fitted to one clip (the report's `model` when `analyze --fit-model` stored it,
//! else fitted here from the report's trace) with another bar, blow rate or number of blows,
//! and prints what the model predicts.
//!
//! Part of the binary's command line: it uses the library through its public API only, and the
//! library must never import it.

use std::path::PathBuf;
use std::process::ExitCode;

use anyhow::Result;
use clap::Args;
use twistmark::mechanics::{ModelFit, PredictInput, blow_model, predict, stiffness_rel_sigma};
use twistmark::report::Report;

/// Arguments of `predict`.
#[derive(Debug, Args)]
pub struct PredictArgs {
    /// A report.json written by `analyze` with a bar in its rig.
    #[arg(long)]
    report: PathBuf,
    /// The rig (or bar-only file) holding the other bar.
    #[arg(long)]
    rig: PathBuf,
    /// Blows per minute (default: the clip's rate).
    #[arg(long, value_name = "BPM")]
    blow_rate: Option<String>,
    /// Number of blows (default: the clip's count).
    #[arg(long, value_name = "N")]
    blows: Option<String>,
    /// Print one JSON object instead of text.
    #[arg(long)]
    json: bool,
}

/// The report's blow model: the one `analyze --fit-model` stored, else fitted here from the
/// report's trace, blows, twist zero and bar (the same fit; it takes seconds).
fn load_fit(path: &std::path::Path) -> Result<(ModelFit, Report)> {
    let text = twistmark::limits::read_text(path, "report")?;
    let report: Report = serde_json::from_str(&text).map_err(|e| {
        anyhow::anyhow!(
            "{}: not a twistmark report.json ({e}); give the report.json that analyze wrote",
            path.display()
        )
    })?;
    let rerun = "run twistmark analyze on the clip again (with a rig that has a \"bar\"; \
                 --fit-model stores the model)";
    let Some(m) = &report.model else {
        if report.summary.bar_stiffness_nm_per_rad.is_none() {
            anyhow::bail!(
                "{}: the report was made without a bar, so no blow model can be fitted; {rerun}",
                path.display()
            );
        }
        if report.peak_torque_measured() {
            eprintln!(
                "predict: {} holds no fitted blow model; fitting it to the report's trace \
                 now (analyze --fit-model stores it)",
                path.display()
            );
        }
        return match blow_model(report.clip_obs(), report.peak_torque_measured()) {
            Some(Ok(f)) => Ok((f, report)),
            Some(Err(e)) => anyhow::bail!("{}: model: {}", path.display(), strip_path(&e)),
            None => anyhow::bail!(
                "{}: the report's bar stiffness is not a finite positive number, so no blow \
                 model can be fitted; {rerun}",
                path.display()
            ),
        };
    };
    if let Some(err) = m.get("error").and_then(|v| v.as_str()) {
        anyhow::bail!("{}: model: {}", path.display(), strip_path(err));
    }
    let f = serde_json::from_value::<ModelFit>(m.clone()).map_err(|e| {
        anyhow::anyhow!(
            "{}: the report's `model` is not one this version reads ({e}); {rerun}",
            path.display()
        )
    })?;
    Ok((f, report))
}

/// The library names the report as "report.json"; the CLI names the real path instead.
fn strip_path(msg: &str) -> &str {
    msg.strip_prefix("report.json: ").unwrap_or(msg)
}

pub fn run(a: PredictArgs) -> Result<ExitCode> {
    let blow_rate = a
        .blow_rate
        .as_deref()
        .map(|t| super::parse_number("--blow-rate", t))
        .transpose()?;
    let blows = a
        .blows
        .as_deref()
        .map(|t| {
            t.trim()
                .parse::<usize>()
                .map_err(|_| anyhow::anyhow!("--blows: '{t}' is not a whole number of blows"))
        })
        .transpose()?;
    let (fit, _) = load_fit(&a.report)?;
    let (_, bar) = super::bar::load_bar_file(&a.rig)?;
    let input = PredictInput {
        stiffness_nm_per_rad: bar.stiffness().nm_per_rad(),
        stiffness_rel_sigma: stiffness_rel_sigma(&bar).0,
        rating_nm: bar.rating_nm,
        blow_rate_per_min: blow_rate,
        blows,
    };
    let p = predict(&fit, &input)?;
    if a.json {
        println!("{}", serde_json::to_string_pretty(&p)?);
        return Ok(ExitCode::SUCCESS);
    }
    println!(
        "prediction for the bar in {} ({} stiffness {:.1} N·m/deg), {} blows at {:.0} per minute,\nfrom the blow model fitted to {}:",
        a.rig.display(),
        bar.stiffness_source().as_str(),
        p.bar_stiffness_nm_per_rad.to_radians(),
        p.blows.len(),
        p.blow_rate_per_min,
        a.report.display()
    );
    println!(
        "  {:>5}  {:>10}  {:>22}  {:>11}  {:>13}",
        "blow", "peak N·m", "95 % interval N·m", "nut adv deg", "residual deg"
    );
    for b in &p.blows {
        println!(
            "  {:>5}  {:>10.1}  {:>10.1} .. {:<9.1}  {:>11.2}  {:>13.2}",
            b.index,
            b.peak_torque_nm,
            b.peak_torque_ci95_nm[0],
            b.peak_torque_ci95_nm[1],
            b.nut_advance_deg,
            b.residual_twist_deg
        );
    }
    println!(
        "holding torque {:.1} N·m (95 % interval {:.1} .. {:.1} N·m)",
        p.holding_torque_nm, p.holding_torque_ci95_nm[0], p.holding_torque_ci95_nm[1]
    );
    match (p.limits, p.rating_nm) {
        (Some(true), Some(r)) => {
            println!("limits: yes, at or below the bar's rating of {r:.0} N·m")
        }
        (Some(false), Some(r)) => println!("limits: NO, above the bar's rating of {r:.0} N·m"),
        _ => println!("limits: unknown, the bar has no rating_nm"),
    }
    if p.extrapolation.is_empty() {
        println!(
            "within what the clip showed (same bar stiffness, blow rate and range of nut turn)"
        );
    }
    for e in &p.extrapolation {
        println!("extrapolates: {e}");
    }
    for u in &p.undecided {
        println!("undecided: {u}");
    }
    for m in &p.misfit {
        println!("misfit: {m}");
    }
    println!("{}", p.caution);
    Ok(ExitCode::SUCCESS)
}
