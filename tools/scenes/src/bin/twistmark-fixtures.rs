//! Developer tool: regenerates the synthetic fixtures under `fixtures/`, or checks them for
//! drift (exit 1): `--check` re-renders every frame in memory and compares the frame
//! checksums, the JSON sidecars, README.md and the file list (no encoding; CI runs this);
//! `--check --full` also re-encodes into a temporary folder and compares the media byte for
//! byte. All the work is in `twistmark_scenes::synth::fixtures`; this file only reads the arguments.
//!
//! Usage: `twistmark-fixtures [--check [--full]] [FIXTURES_DIR]` (default `fixtures`).

use std::path::PathBuf;
use std::process::ExitCode;

use twistmark_scenes::synth::fixtures::{check_fixture_sums, check_fixtures, write_fixtures};

fn main() -> ExitCode {
    let mut check = false;
    let mut full = false;
    let mut root = PathBuf::from("fixtures");
    for a in std::env::args().skip(1) {
        match a.as_str() {
            "--check" => check = true,
            "--full" => full = true,
            "-h" | "--help" => {
                println!("usage: twistmark-fixtures [--check [--full]] [FIXTURES_DIR]");
                return ExitCode::SUCCESS;
            }
            s if s.starts_with('-') => {
                eprintln!("error: unknown option {s}; use --check, --check --full or a folder");
                return ExitCode::from(2);
            }
            s => root = PathBuf::from(s),
        }
    }
    if full && !check {
        eprintln!("error: --full goes with --check");
        return ExitCode::from(2);
    }
    if check {
        let scratch =
            std::env::temp_dir().join(format!("twistmark-fixtures-{}", std::process::id()));
        let result = if full {
            check_fixtures(&root, &scratch)
        } else {
            check_fixture_sums(&root, &scratch)
        };
        let _ = std::fs::remove_dir_all(&scratch);
        match result {
            Ok(diffs) if diffs.is_empty() => {
                println!("fixtures match: {}", root.display());
                ExitCode::SUCCESS
            }
            Ok(diffs) => {
                for d in &diffs {
                    eprintln!("{d}");
                }
                eprintln!(
                    "error: {} fixture file(s) differ from this build; run tools/make-fixtures and commit",
                    diffs.len()
                );
                ExitCode::from(1)
            }
            Err(e) => {
                eprintln!("error: {e}");
                ExitCode::from(1)
            }
        }
    } else {
        match write_fixtures(&root) {
            Ok(files) => {
                println!("wrote {} files under {}", files.len(), root.display());
                ExitCode::SUCCESS
            }
            Err(e) => {
                eprintln!("error: {e}");
                ExitCode::from(1)
            }
        }
    }
}
