//! The pipeline's layering, checked on the source: decode → track → segment → mechanics →
//! report, where a stage may use the stages before it and never the ones after it, the
//! orchestration (`analyze`, `batch`) or the command line; and no library module uses the
//! command line. Each module's `//!` line states its own rule; this test holds the library to
//! them, so a stage that starts to reach forward fails CI instead of a reviewer's eye.
//!
//! Only code counts: comment lines are skipped, and so is everything from a file's first
//! `#[cfg(test)]` at column 0 on (a stage's unit tests may build whole analyses) and files
//! that are tests themselves.

use std::path::{Path, PathBuf};

/// The pipeline's stages, in order (folders under src/).
const STAGES: [&str; 5] = ["decode", "track", "segment", "mechanics", "report"];

/// The crate paths a stage must never use: every later stage, the orchestration (`analyze`,
/// which report alone reads results through, and `batch`), the commands built on the
/// pipeline (`find_marks`, `calibrate`) and the command line.
fn forbidden_for(stage: &str) -> Vec<&'static str> {
    let Some(i) = STAGES.iter().position(|s| *s == stage) else {
        return Vec::new();
    };
    let mut f = STAGES[i + 1..].to_vec();
    f.extend(["batch", "cli", "find_marks", "calibrate"]);
    if stage != "report" {
        f.push("analyze");
    }
    f
}

fn rust_files(dir: &Path, out: &mut Vec<PathBuf>) {
    for e in std::fs::read_dir(dir).expect("read src folder") {
        let p = e.expect("folder entry").path();
        if p.is_dir() {
            rust_files(&p, out);
        } else if p.extension().is_some_and(|x| x == "rs") {
            out.push(p);
        }
    }
}

/// The code lines of `path` that a build of the library compiles outside its tests.
fn code_lines(path: &Path) -> Vec<(usize, String)> {
    let name = path.file_name().unwrap().to_string_lossy();
    if name == "tests.rs" || name.ends_with("_tests.rs") {
        return Vec::new();
    }
    let text = std::fs::read_to_string(path).expect("read source");
    text.lines()
        .enumerate()
        .take_while(|(_, l)| !l.starts_with("#[cfg(test)]"))
        .filter(|(_, l)| !l.trim_start().starts_with("//"))
        .map(|(i, l)| (i + 1, l.to_string()))
        .collect()
}

/// Every use of `crate::<module>` in `line`, as the module names.
fn crate_paths(line: &str) -> Vec<&str> {
    line.match_indices("crate::")
        .map(|(i, m)| {
            let rest = &line[i + m.len()..];
            let end = rest
                .find(|c: char| !(c.is_ascii_alphanumeric() || c == '_'))
                .unwrap_or(rest.len());
            &rest[..end]
        })
        .collect()
}

fn violations(src: &Path) -> Vec<String> {
    let mut found = Vec::new();
    let mut files = Vec::new();
    rust_files(src, &mut files);
    for f in &files {
        let rel = f.strip_prefix(src).unwrap();
        let top = rel
            .components()
            .next()
            .unwrap()
            .as_os_str()
            .to_string_lossy();
        let stage = top.trim_end_matches(".rs");
        let mut forbidden = forbidden_for(stage);
        // The library never uses the command line (src/cli and the binary's main.rs are it).
        if stage != "cli" && stage != "main" {
            forbidden.push("cli");
        }
        for (n, line) in code_lines(f) {
            for m in crate_paths(&line) {
                if forbidden.contains(&m) {
                    found.push(format!(
                        "src/{}:{n}: {stage} uses crate::{m}",
                        rel.display()
                    ));
                }
            }
        }
    }
    found.sort();
    found
}

#[test]
fn no_stage_uses_a_later_stage_the_orchestration_or_the_command_line() {
    let src = Path::new(env!("CARGO_MANIFEST_DIR")).join("src");
    let v = violations(&src);
    assert!(v.is_empty(), "layering broken:\n{}", v.join("\n"));
}

/// The check can fail: a stage folder that reaches forward is reported, with file and line.
#[test]
fn a_stage_reaching_forward_is_reported() {
    let dir = std::env::temp_dir().join(format!("twistmark-layering-{}", std::process::id()));
    let track = dir.join("track");
    std::fs::create_dir_all(&track).unwrap();
    std::fs::write(
        track.join("bad.rs"),
        "//! A file.\n// crate::report in a comment does not count\nuse crate::decode::Frame;\n\
         use crate::segment::Blow;\n#[cfg(test)]\nmod tests { use crate::analyze::Analysis; }\n",
    )
    .unwrap();
    std::fs::write(dir.join("rig.rs"), "use crate::cli::Args;\n").unwrap();
    let v = violations(&dir);
    std::fs::remove_dir_all(&dir).unwrap();
    assert_eq!(
        v,
        [
            "src/rig.rs:1: rig uses crate::cli",
            "src/track/bad.rs:4: track uses crate::segment",
        ]
    );
}
