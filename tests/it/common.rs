//! What the integration tests share: running the real binary with a time limit, and the
//! checks on what it printed. No test of its own.

use std::path::{Path, PathBuf};
use std::time::Duration;

use assert_cmd::Command;

/// What one run of the binary gave.
pub struct Out {
    pub code: i32,
    pub stdout: String,
    pub stderr: String,
}

/// Runs `twistmark` with `args` (at most two minutes: a hang fails the test); fails the test
/// if any output mentions a panic.
pub fn run<I, S>(args: I) -> Out
where
    I: IntoIterator<Item = S>,
    S: AsRef<std::ffi::OsStr>,
{
    let o = Command::cargo_bin("twistmark")
        .unwrap()
        .args(args)
        .timeout(Duration::from_secs(120))
        .output()
        .unwrap();
    let out = Out {
        code: o.status.code().unwrap_or(-1),
        stdout: String::from_utf8_lossy(&o.stdout).into_owned(),
        stderr: String::from_utf8_lossy(&o.stderr).into_owned(),
    };
    assert!(
        !out.stdout.contains("panicked") && !out.stderr.contains("panicked"),
        "panic: {}{}",
        out.stdout,
        out.stderr
    );
    out
}

/// Exit 1 with exactly one stderr line holding every needle.
pub fn one_line_error(out: &Out, needles: &[&str]) {
    assert_eq!(out.code, 1, "exit code; stderr: {}", out.stderr);
    let lines: Vec<&str> = out
        .stderr
        .lines()
        .filter(|l| !l.trim().is_empty())
        .collect();
    assert_eq!(lines.len(), 1, "one line expected, got: {}", out.stderr);
    for n in needles {
        assert!(lines[0].contains(n), "'{n}' missing from: {}", lines[0]);
    }
}

/// A bundled fixture's path (`fixtures/<name>`).
pub fn fixture(name: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("fixtures")
        .join(name)
}

/// A fixture clip analysed by the real binary (`twistmark analyze fixtures/<name>/<clip>
/// --rig fixtures/<name>/rig.json`): the fixture's folder, the run, and the output folder
/// (kept while the returned guard lives). Fails the test unless the run exits 0.
#[cfg(feature = "ffmpeg")]
pub fn analyze_fixture(name: &str, clip: &str) -> (PathBuf, Out, tempfile::TempDir) {
    let dir = fixture(name);
    let out = tempfile::tempdir().unwrap();
    let r = run([
        "analyze".as_ref(),
        dir.join(clip).as_os_str(),
        "--rig".as_ref(),
        dir.join("rig.json").as_os_str(),
        "--out".as_ref(),
        out.path().as_os_str(),
    ]);
    assert_eq!(r.code, 0, "{name}/{clip}: {}{}", r.stdout, r.stderr);
    (dir, r, out)
}

/// A JSON file, parsed.
#[cfg(feature = "ffmpeg")]
pub fn read_json(path: &Path) -> serde_json::Value {
    serde_json::from_str(&std::fs::read_to_string(path).unwrap()).unwrap()
}
