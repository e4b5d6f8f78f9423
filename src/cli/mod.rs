//! Command-line definition (clap derive) and dispatch. Each subcommand lives in its own file
//! and turns what the user typed into library calls; nothing here leaks into the library.
//!
//! Layering: the binary's half. The library (everything outside `src/cli` and `src/main.rs`)
//! must never import it, and neither must the test bench (tools/scenes).

use std::process::ExitCode;

use anyhow::Result;
use clap::{Parser, Subcommand};

mod analyze;
mod bar;
mod batch;
mod calibrate;
mod find_marks;
mod info;
mod predict;
mod progress;

/// Measures impact blows on a torsion extension bar from high-speed video: per-frame angles
/// of the drive and nut ends, each blow's advance, twist, residual wind-up and torque.
#[derive(Debug, Parser)]
#[command(name = "twistmark", version, about, long_about = None, propagate_version = true)]
pub struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Debug, Subcommand)]
enum Command {
    /// Print a clip's frame count, frame size, container rate, codec and duration.
    Info(info::InfoArgs),
    /// Measure one clip: per-frame angles, blows, twist and torque.
    Analyze(analyze::AnalyzeArgs),
    /// Analyse every clip in a folder and compare them.
    Batch(batch::BatchArgs),
    /// Print the bar's stiffness, twist and stress at its rating.
    Bar(bar::BarArgs),
    /// Find the painted marks in a clip by their motion and write a draft rig.
    FindMarks(find_marks::FindMarksArgs),
    /// Fit the bar's stiffness from torque-wrench checks and write it into a rig.
    Calibrate(calibrate::CalibrateArgs),
    /// Fit the blow model to a report and predict another bar, blow rate or blow count.
    Predict(predict::PredictArgs),
}

/// Parses the command line and runs the chosen command.
pub fn run() -> Result<ExitCode> {
    let cli = Cli::parse();
    match cli.command {
        Command::Info(a) => info::run(a),
        Command::Analyze(a) => analyze::run(a),
        Command::Batch(a) => batch::run(a),
        Command::Bar(a) => bar::run(a),
        Command::FindMarks(a) => find_marks::run(a),
        Command::Calibrate(a) => calibrate::run(a),
        Command::Predict(a) => predict::run(a),
    }
}

/// Parses a number given as text, so that a bad value is a one-line error (exit 1) naming the
/// flag, as the interface asks, rather than a usage screen.
pub(crate) fn parse_number(flag: &str, text: &str) -> Result<f64> {
    let v: f64 = text
        .trim()
        .parse()
        .map_err(|_| anyhow::anyhow!("{flag}: '{text}' is not a number"))?;
    if !v.is_finite() {
        anyhow::bail!("{flag}: '{text}' is not a finite number");
    }
    Ok(v)
}

/// Parses `--fps`: a positive capture rate in Hz.
pub(crate) fn parse_fps(text: Option<&str>) -> Result<Option<f64>> {
    let Some(text) = text else { return Ok(None) };
    let v = parse_number("--fps", text)?;
    if v <= 0.0 {
        anyhow::bail!(
            "--fps: the capture rate must be a positive number of frames per second, got {text}"
        );
    }
    twistmark::sanity::check_fps(v, "--fps")?;
    Ok(Some(v))
}

/// Checks, before any long work, that the folder a file is to be written into exists, so the
/// message says what to do instead of "No such file or directory" at the end.
pub(crate) fn check_parent_folder(flag: &str, path: &std::path::Path) -> Result<()> {
    if let Some(parent) = path.parent().filter(|p| !p.as_os_str().is_empty())
        && !parent.is_dir()
    {
        anyhow::bail!(
            "{flag}: the folder {} does not exist; create it first (mkdir -p {}) or give a path in an existing folder",
            parent.display(),
            parent.display()
        );
    }
    Ok(())
}

/// Prints library warnings on stderr, one line each (a mark lost in many separate runs in
/// one line; `twistmark::condensed_warnings`).
pub(crate) fn print_warnings(warnings: &[twistmark::Warning]) {
    for line in twistmark::condensed_warnings(warnings) {
        eprintln!("warning: {line}");
    }
}

/// `--timing`: `auto`, `rate` or `timestamps`.
pub(crate) fn parse_timing(v: &str) -> anyhow::Result<twistmark::timing::TimingChoice> {
    use twistmark::timing::TimingChoice;
    match v {
        "auto" => Ok(TimingChoice::Auto),
        "rate" => Ok(TimingChoice::Rate),
        "timestamps" => Ok(TimingChoice::Timestamps),
        _ => anyhow::bail!("--timing: give auto, rate or timestamps, got '{v}'"),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use clap::CommandFactory;

    #[test]
    fn verify_cli() {
        Cli::command().debug_assert();
    }

    #[test]
    fn fps_parsing() {
        assert_eq!(parse_fps(Some("2000")).unwrap(), Some(2000.0));
        assert!(parse_fps(Some("0")).is_err());
        assert!(parse_fps(Some("-5")).is_err());
        assert!(parse_fps(Some("NaN")).is_err());
        assert!(
            parse_fps(Some("fast"))
                .unwrap_err()
                .to_string()
                .contains("--fps")
        );
    }
}
