//! `twistmark info CLIP [--json]`: frame count, size, container rate, codec, duration and the
//! display rotation.
//!
//! Part of the binary's command line: it uses the library through its public API only, and the
//! library must never import it.

use std::path::PathBuf;
use std::process::ExitCode;

use anyhow::Result;
use clap::Args;

/// Arguments of `info`.
#[derive(Debug, Args)]
pub struct InfoArgs {
    /// A video file or a folder of numbered stills.
    clip: PathBuf,
    /// Print one JSON object instead of text.
    #[arg(long)]
    json: bool,
}

pub fn run(a: InfoArgs) -> Result<ExitCode> {
    let source = twistmark::decode::open(&a.clip)?;
    let info = source.info();
    if a.json {
        let v = serde_json::json!({
            "frames": info.frames,
            "width": info.width,
            "height": info.height,
            "container_fps": info.container_fps_hz,
            "codec": info.codec,
            "bit_depth": info.bit_depth,
            "duration_s": info.duration_s,
            "display_rotation_deg": info.display_rotation_deg,
            "kind": format!("{:?}", info.kind).to_lowercase(),
            "warnings": info.warnings.iter().map(|w| w.to_string()).collect::<Vec<_>>(),
        });
        println!("{}", serde_json::to_string_pretty(&v)?);
    } else {
        println!("clip:           {}", info.path.display());
        println!("frames:         {}", info.frames);
        println!(
            "frame size:     {} x {} px, {}-bit luma",
            info.width, info.height, info.bit_depth
        );
        match info.container_fps_hz {
            Some(fps) => println!(
                "container rate: {fps} fps (usually the playback rate, not the capture rate)"
            ),
            None => println!(
                "container rate: none (stills: give the capture rate with --fps or in the rig)"
            ),
        }
        println!("codec:          {}", info.codec);
        if let Some(d) = info.duration_s {
            println!("duration:       {d:.3} s at the container rate");
        }
        if info.display_rotation_deg != 0 {
            println!(
                "rotation:       {}° clockwise on display (stored turned, as phones store portrait \
                 video); frames are read as a player shows them, so the size above and every \
                 rig coordinate are the displayed picture's",
                info.display_rotation_deg
            );
        } else {
            println!("rotation:       none");
        }
        super::print_warnings(&info.warnings);
    }
    Ok(ExitCode::SUCCESS)
}
