//! Developer tool: regenerates the synthetic fixtures under `fixtures/`, or with `--check`
//! re-renders them into a temporary folder and compares byte for byte (exit 1 on drift).
//! All the work is in `twistmark::synth::fixtures`; this file only reads two arguments.
//!
//! Usage: `twistmark-fixtures [--check] [FIXTURES_DIR]` (default `fixtures`).

use std::path::PathBuf;
use std::process::ExitCode;

use twistmark::synth::fixtures::{check_fixtures, write_fixtures};

fn main() -> ExitCode {
    let mut check = false;
    let mut root = PathBuf::from("fixtures");
    for a in std::env::args().skip(1) {
        match a.as_str() {
            "--check" => check = true,
            "-h" | "--help" => {
                println!("usage: twistmark-fixtures [--check] [FIXTURES_DIR]");
                return ExitCode::SUCCESS;
            }
            s if s.starts_with('-') => {
                eprintln!("error: unknown option {s}; use --check or a folder");
                return ExitCode::from(2);
            }
            s => root = PathBuf::from(s),
        }
    }
    if check {
        let scratch =
            std::env::temp_dir().join(format!("twistmark-fixtures-{}", std::process::id()));
        let result = check_fixtures(&root, &scratch);
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
