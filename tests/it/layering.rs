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

/// The library's top-level modules, as `crate::` paths name them.
const MODULES: [&str; 19] = [
    "decode",
    "track",
    "segment",
    "mechanics",
    "report",
    "analyze",
    "batch",
    "cli",
    "find_marks",
    "calibrate",
    "sanity",
    "rig",
    "timing",
    "manifest",
    "limits",
    "stats",
    "units",
    "error",
    "warning",
];

/// What a file's leading `//!` block says it must never import, as module names: the clause
/// after "must never import" up to the end of its sentence. "the CLI" and "the command line"
/// are `cli`; "any other module of the crate" is every module but the file's own; "a later
/// one (…)" lists them in its parentheses. None when the block states no rule.
fn stated_rule(text: &str, own: &str) -> Option<Vec<&'static str>> {
    let block: String = text
        .lines()
        .take_while(|l| l.starts_with("//!"))
        .map(|l| l.trim_start_matches("//!").trim())
        .collect::<Vec<_>>()
        .join(" ");
    let at = block.find("must never import")?;
    let clause = &block[at + "must never import".len()..];
    let clause = match clause.find(". ") {
        Some(end) => &clause[..end],
        None => clause.trim_end_matches('.'),
    };
    if clause.contains("any other module of the crate") {
        return Some(MODULES.iter().copied().filter(|m| *m != own).collect());
    }
    let words: Vec<String> = clause
        .split(|c: char| !(c.is_ascii_alphanumeric() || c == '_'))
        .map(str::to_lowercase)
        .collect();
    let mut out: Vec<&'static str> = MODULES
        .iter()
        .copied()
        .filter(|m| words.iter().any(|w| w == m))
        .collect();
    if clause.contains("CLI") || clause.contains("command line") {
        out.push("cli");
    }
    out.sort_unstable();
    out.dedup();
    Some(out)
}

/// Every source file's own stated rule, held against its code: files with no rule, and each
/// `crate::` path a file's rule forbids.
fn stated_rule_breaches(src: &Path) -> Vec<String> {
    let mut files = Vec::new();
    rust_files(src, &mut files);
    let mut found = Vec::new();
    for f in &files {
        let rel = f.strip_prefix(src).unwrap();
        let own = rel
            .components()
            .next()
            .unwrap()
            .as_os_str()
            .to_string_lossy()
            .trim_end_matches(".rs")
            .to_string();
        let text = std::fs::read_to_string(f).unwrap();
        let Some(rule) = stated_rule(&text, &own) else {
            found.push(format!(
                "src/{}: its //! states no import rule",
                rel.display()
            ));
            continue;
        };
        for (n, line) in code_lines(f) {
            for m in crate_paths(&line) {
                if m != own && rule.contains(&m) {
                    found.push(format!(
                        "src/{}:{n}: uses crate::{m}, which its //! forbids",
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
fn every_file_states_what_it_must_never_import_and_keeps_to_it() {
    let src = Path::new(env!("CARGO_MANIFEST_DIR")).join("src");
    let v = stated_rule_breaches(&src);
    assert!(v.is_empty(), "{}", v.join("\n"));
}

/// The check can fail: a file with no rule, and one that uses what its rule forbids.
#[test]
fn a_file_breaking_its_own_rule_is_reported() {
    let dir = std::env::temp_dir().join(format!("twistmark-rules-{}", std::process::id()));
    std::fs::create_dir_all(dir.join("track")).unwrap();
    std::fs::write(
        dir.join("track/a.rs"),
        "//! A file. It must never import segment,\n//! `batch` or the CLI.\nuse crate::decode::F;\n\
         use crate::segment::B;\nuse crate::cli::C;\n",
    )
    .unwrap();
    std::fs::write(dir.join("units.rs"), "//! A leaf.\nuse crate::error::E;\n").unwrap();
    std::fs::write(
        dir.join("stats.rs"),
        "//! A shared leaf: it must never import any other module of the crate.\nuse crate::units::U;\nuse crate::stats::S;\n",
    )
    .unwrap();
    let v = stated_rule_breaches(&dir);
    std::fs::remove_dir_all(&dir).unwrap();
    assert_eq!(
        v,
        [
            "src/stats.rs:2: uses crate::units, which its //! forbids",
            "src/track/a.rs:4: uses crate::segment, which its //! forbids",
            "src/track/a.rs:5: uses crate::cli, which its //! forbids",
            "src/units.rs: its //! states no import rule",
        ]
    );
}
