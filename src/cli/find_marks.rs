//! `twistmark find-marks CLIP --out RIG.json`: find the marks by their motion and write a
//! draft rig. Nothing is replaced without `--force`, and the input clip never is.
//!
//! Part of the binary's command line: it uses the library through its public API only, and the
//! library must never import it.

use std::path::PathBuf;
use std::process::ExitCode;

use anyhow::Result;
use clap::Args;
use twistmark::find_marks::{
    FindMarksOptions, PivotFrom, check_outputs, find_marks, write_atomic, write_preview,
};

/// Arguments of `find-marks`.
#[derive(Debug, Args)]
pub struct FindMarksArgs {
    /// A video file or a folder of numbered stills.
    clip: PathBuf,
    /// Where to write the draft rig.
    #[arg(long, value_name = "RIG.json")]
    out: PathBuf,
    /// The camera's capture rate in frames per second (written as capture_fps_hz).
    #[arg(long, value_name = "HZ", allow_hyphen_values = true)]
    fps: Option<String>,
    /// Write a preview of the first frame with the marks drawn.
    #[arg(long, value_name = "PNG")]
    preview: Option<PathBuf>,
    /// Replace the rig or preview file if it exists (never the input clip or its stills).
    #[arg(long)]
    force: bool,
}

pub fn run(a: FindMarksArgs) -> Result<ExitCode> {
    let fps_hz = super::parse_fps(a.fps.as_deref())?;
    super::check_parent_folder("--out", &a.out)?;
    let mut outputs = vec![("--out", a.out.as_path())];
    if let Some(p) = &a.preview {
        super::check_parent_folder("--preview", p)?;
        outputs.push(("--preview", p.as_path()));
    }
    // Before the clip is read: a refusal should not cost the user a long wait.
    check_outputs(&a.clip, &outputs, a.force)?;
    let found = find_marks(&a.clip, &FindMarksOptions { fps_hz })?;
    write_atomic(
        &a.out,
        (found.rig.to_json_pretty() + "\n").as_bytes(),
        a.force,
    )?;
    if let Some(p) = &a.preview {
        write_preview(&found, p, a.force)?;
    }
    println!(
        "read {} frame(s) of {}; wrote the draft rig {}",
        found.frames_read,
        a.clip.display(),
        a.out.display()
    );
    for m in &found.marks {
        let role = match (m.role, &m.alternative) {
            (Some(r), Some(alt)) => format!("{} ({alt})", r.name()),
            (Some(r), None) => r.name().to_string(),
            (None, Some(alt)) => format!("({alt})"),
            (None, None) => "unused".to_string(),
        };
        let r = &m.mark;
        let pivot = match m.pivot_from {
            PivotFrom::Lines => "from the stripe's lines",
            PivotFrom::StripeEnd => "at the stripe's end (not from motion)",
            PivotFrom::Registered => {
                "from the stripe's lines, refined by registering the part between its rests"
            }
        };
        let ellipse = r.ellipse.map_or(String::new(), |e| {
            format!(
                ", oblique disc b/a {:.3} major {:.1}°",
                e.axis_ratio, e.major_deg
            )
        });
        println!(
            "  {role:<7} pivot [{:.1}, {:.1}] {pivot}, annulus {:.1}..{:.1} px, turned {:+.1}° net / {:.1}° back and forth{ellipse}",
            r.pivot[0], r.pivot[1], r.radius[0], r.radius[1], m.net_deg, m.travel_deg
        );
    }
    if let Some(p) = &a.preview {
        println!(
            "preview: {} (check every pivot, annulus and role)",
            p.display()
        );
    }
    if let Some((t, (lo, hi))) = found.readout_estimate_s {
        println!(
            "suggestion: the stripes shear as a rolling shutter reading its rows over about {:.1} ms would make them (95 %: {:.1} to {:.1} ms); if the camera has one (phones do), add \"camera\": {{\"rolling_shutter_ms\": {:.1}}} to the rig, or the camera maker's figure where known",
            1e3 * t,
            1e3 * lo,
            1e3 * hi,
            1e3 * t
        );
    }
    if found.rig.capture_fps_hz.is_none() {
        println!(
            "to do: the capture rate is not in the rig; pass --fps HZ to analyze or add \"capture_fps_hz\""
        );
    }
    println!(
        "to do: the rig has no \"bar\", so analyze will report angles and twist but no torque; add a \"bar\" with its \"sections\" (see the README's rig format), check it with `twistmark bar --rig {}`",
        a.out.display()
    );
    super::print_warnings(&found.warnings);
    Ok(ExitCode::SUCCESS)
}
