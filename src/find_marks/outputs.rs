//! Where `find-marks` may write. Its outputs (the draft rig and the preview) never replace the
//! input clip or a still in it, not even with `force`; never replace any other existing file
//! without `force`; and are written atomically (a temporary file beside the target, then a
//! rename), so a reader never sees half a rig.
//!
//! Part of the `find-marks` command (built on decode and track, writing through report): it
//! must never import segment, mechanics, `analyze`, `batch` or the CLI.

use std::path::{Path, PathBuf};

use crate::error::{Error, Result};

/// The path as the file system resolves it: the file itself when it exists, else its resolved
/// folder joined with its name. None when the folder does not exist either.
fn resolved(p: &Path) -> Option<PathBuf> {
    if let Ok(c) = p.canonicalize() {
        return Some(c);
    }
    let name = p.file_name()?;
    let parent = match p.parent() {
        Some(d) if !d.as_os_str().is_empty() => d.to_path_buf(),
        _ => PathBuf::from("."),
    };
    Some(parent.canonicalize().ok()?.join(name))
}

/// True when `a` and `b` are the same file on disk (a hard link counts).
#[cfg(unix)]
fn same_file(a: &Path, b: &Path) -> bool {
    use std::os::unix::fs::MetadataExt;
    match (std::fs::metadata(a), std::fs::metadata(b)) {
        (Ok(x), Ok(y)) => x.dev() == y.dev() && x.ino() == y.ino(),
        _ => false,
    }
}

#[cfg(not(unix))]
fn same_file(a: &Path, b: &Path) -> bool {
    match (a.canonicalize(), b.canonicalize()) {
        (Ok(x), Ok(y)) => x == y,
        _ => false,
    }
}

fn refuse(path: &Path, reason: impl Into<String>) -> Error {
    Error::Output {
        path: path.to_path_buf(),
        reason: reason.into(),
    }
}

/// Checks every output before anything is read or written.
///
/// `outputs` pairs each output's flag (`--out`, `--preview`) with its path.
///
/// # Errors
/// [`Error::Output`] naming the path, with a one-line reason, when an output is the clip, lies
/// inside the clip's folder of stills, is the same file as another output, is a folder, sits
/// in a folder that does not exist, or exists and `force` is false.
pub fn check_outputs(clip: &Path, outputs: &[(&str, &Path)], force: bool) -> Result<()> {
    let clip_dir = clip.is_dir();
    let clip_res = clip.canonicalize().ok();
    let mut seen: Vec<(PathBuf, &str)> = Vec::new();
    for &(flag, out) in outputs {
        let Some(res) = resolved(out) else {
            return Err(refuse(
                out,
                format!("{flag}: the folder does not exist; create it first or write elsewhere"),
            ));
        };
        if let Some(c) = &clip_res {
            if clip_dir && res.starts_with(c) {
                return Err(refuse(
                    out,
                    format!(
                        "{flag}: refused, this is inside the input clip's folder of stills, where it could replace a still or join the clip; write it elsewhere"
                    ),
                ));
            }
            if !clip_dir && (res == *c || same_file(out, clip)) {
                return Err(refuse(
                    out,
                    format!(
                        "{flag}: refused, this is the input clip itself (not even --force replaces an input); write it elsewhere"
                    ),
                ));
            }
        }
        if clip_dir && out.exists() {
            // A hard link to a still, made elsewhere, is the still too.
            if let Ok(rd) = std::fs::read_dir(clip)
                && rd.flatten().any(|e| same_file(&e.path(), out))
            {
                return Err(refuse(
                    out,
                    format!(
                        "{flag}: refused, this is the same file as a still of the input clip (not even --force replaces an input); write it elsewhere"
                    ),
                ));
            }
        }
        if let Some((_, other)) = seen.iter().find(|(p, _)| *p == res) {
            return Err(refuse(
                out,
                format!("{flag}: the same file as {other}; give each output its own name"),
            ));
        }
        if out.is_dir() {
            return Err(refuse(
                out,
                format!("{flag}: this is a folder; give a file name"),
            ));
        }
        if out.exists() && !force {
            return Err(refuse(
                out,
                format!("{flag}: the file exists; pass --force to replace it, or write elsewhere"),
            ));
        }
        seen.push((res, flag));
    }
    Ok(())
}

/// Writes `bytes` to `path` atomically: a temporary file created exclusively in the same
/// folder, then a rename (with `force`) or a link that fails when `path` exists, even when it
/// appeared meanwhile (without it). The one atomic writer is `report::write`'s.
///
/// # Errors
/// [`Error::Output`] naming `path` when it exists and `force` is false; [`Error::Io`] when
/// the file cannot be written.
pub fn write_atomic(path: &Path, bytes: &[u8], force: bool) -> Result<()> {
    if path.file_name().is_none() {
        return Err(refuse(path, "not a file name; give a file name"));
    }
    if force {
        crate::report::write_file(path, bytes)
    } else {
        crate::report::write_new_atomic(path, bytes)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn outputs_never_replace_the_clip_and_need_force_for_other_files() {
        let tmp = tempfile::tempdir().unwrap();
        let stills = tmp.path().join("stills");
        std::fs::create_dir(&stills).unwrap();
        std::fs::write(stills.join("f_0.png"), b"x").unwrap();
        let video = tmp.path().join("clip.mp4");
        std::fs::write(&video, b"v").unwrap();
        let rig = tmp.path().join("rig.json");

        // A new file is fine; an existing one needs force.
        check_outputs(&stills, &[("--out", &rig)], false).unwrap();
        std::fs::write(&rig, b"{}").unwrap();
        let e = check_outputs(&stills, &[("--out", &rig)], false).unwrap_err();
        assert!(e.to_string().contains("--force"), "{e}");
        check_outputs(&stills, &[("--out", &rig)], true).unwrap();

        // The clip, a still, a file inside the stills folder, or a hard link to a still: never.
        for (clip, out) in [
            (&video, video.clone()),
            (&stills, stills.join("f_0.png")),
            (&stills, stills.join("new.png")),
        ] {
            for force in [false, true] {
                let e = check_outputs(clip, &[("--out", &out)], force).unwrap_err();
                assert!(e.to_string().contains("refused"), "{e}");
            }
        }
        let link = tmp.path().join("link.png");
        std::fs::hard_link(stills.join("f_0.png"), &link).unwrap();
        let e = check_outputs(&stills, &[("--preview", &link)], true).unwrap_err();
        assert!(e.to_string().contains("still"), "{e}");

        // Two outputs to one file.
        let p = tmp.path().join("a.png");
        let e = check_outputs(&video, &[("--out", &p), ("--preview", &p)], true).unwrap_err();
        assert!(e.to_string().contains("same file"), "{e}");
    }

    #[test]
    fn atomic_writes_keep_an_existing_file_without_force() {
        let tmp = tempfile::tempdir().unwrap();
        let p = tmp.path().join("r.json");
        write_atomic(&p, b"one", false).unwrap();
        assert!(write_atomic(&p, b"two", false).is_err());
        assert_eq!(std::fs::read(&p).unwrap(), b"one");
        write_atomic(&p, b"two", true).unwrap();
        assert_eq!(std::fs::read(&p).unwrap(), b"two");
        // No temporary file is left behind.
        assert_eq!(std::fs::read_dir(tmp.path()).unwrap().count(), 1);
    }
}
