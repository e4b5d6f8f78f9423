//! Safe output: the one way results reach the disk (docs/conventions.md, "Output safety").
//!
//! - [`check_not_input`] and [`check_folder_not_input`]: no output path is an input (a clip,
//!   any still in a stills folder, a rig, a CSV), whichever command writes it.
//! - [`lock_output`]: an advisory lock on an output folder, so two runs into one folder
//!   cannot mix their files.
//! - [`write_all`]: one clip's results, used by both `analyze` and `batch`. The old
//!   `report.json` is removed first and the new one written last, so a `report.json` in a
//!   folder means the set beside it is complete; leftovers of an interrupted run (`.partial`
//!   files, overlay frames) are cleared; an `overlays` symbolic link is refused, so nothing is
//!   written outside the folder.
//!
//! Every file goes through [`write_file`]'s atomic write: a temporary file created exclusively
//! (O_EXCL, never through a symbolic link) inside the output folder, then renamed into place.
//!
//! Part of the report stage: it reads results through `crate::Analysis` and must never import
//! `batch`, `find_marks`, `calibrate` or the CLI.

use std::fs;
use std::io::Write;
use std::path::{Path, PathBuf};

use crate::analyze::Analysis;
use crate::error::{Error, Result};

use super::overlay::{OverlayOptions, write_overlays};

/// The files [`write_all`] writes (or may write) directly in a clip's output folder.
pub const CLIP_OUTPUTS: &[&str] = &[
    "report.json",
    "report.html",
    "blows.csv",
    "trace.csv",
    "angles.svg",
    "angles.png",
    "twist_torque.svg",
    "twist_torque.png",
    "nut_advance.svg",
    "nut_advance.png",
];

/// The batch-level files a batch writes directly in its output folder.
pub const BATCH_OUTPUTS: &[&str] = &[
    "summary.csv",
    "summary.json",
    "summary.html",
    "comparison.svg",
    "comparison.png",
];

/// The sub-folder of overlay frames.
pub const OVERLAYS: &str = "overlays";

/// The advisory lock file inside an output folder.
pub const LOCK_FILE: &str = ".twistmark.lock";

/// Makes a path absolute and resolves `.`, `..` and symbolic links as far as it exists.
pub fn resolve(p: &Path) -> PathBuf {
    let abs = std::path::absolute(p).unwrap_or_else(|_| p.to_path_buf());
    let mut existing = abs.clone();
    let mut rest: Vec<std::ffi::OsString> = Vec::new();
    while fs::symlink_metadata(&existing).is_err() {
        match (existing.file_name(), existing.parent()) {
            (Some(n), Some(parent)) => {
                rest.push(n.to_os_string());
                existing = parent.to_path_buf();
            }
            _ => break,
        }
    }
    let mut out = fs::canonicalize(&existing).unwrap_or(existing);
    for c in rest.iter().rev() {
        match Path::new(c).components().next() {
            Some(std::path::Component::ParentDir) => {
                out.pop();
            }
            Some(std::path::Component::CurDir) | None => {}
            _ => out.push(c),
        }
    }
    out
}

/// True when `a` and `b` name the same file (also through hard links).
fn same_file(a: &Path, b: &Path) -> bool {
    #[cfg(unix)]
    {
        use std::os::unix::fs::MetadataExt;
        if let (Ok(x), Ok(y)) = (fs::metadata(a), fs::metadata(b)) {
            return x.dev() == y.dev() && x.ino() == y.ino();
        }
    }
    resolve(a) == resolve(b)
}

/// Refuses an output *file* `out` (given with `flag`) that is one of `inputs`, or an image
/// inside an input folder (it would be a still of that clip, or replace one).
///
/// # Errors
/// [`Error::Output`] naming `out`, the input and what to do.
pub fn check_not_input(out: &Path, flag: &str, inputs: &[&Path]) -> Result<()> {
    let o = resolve(out);
    for input in inputs {
        let i = resolve(input);
        if same_file(out, input) || o == i {
            return Err(refusal(out, flag, input, "is an input of this run"));
        }
        // Inside a stills folder, an image would be read as one of the clip's frames.
        let image = o.extension().and_then(|e| e.to_str()).is_some_and(|e| {
            crate::decode::STILL_EXTENSIONS.contains(&e.to_ascii_lowercase().as_str())
        });
        if o.starts_with(&i) && image {
            return Err(refusal(
                out,
                flag,
                input,
                "is an image inside the stills folder",
            ));
        }
    }
    Ok(())
}

/// Refuses an output *folder* `dir` (given with `flag`) that is an input, lies inside an input
/// folder, or holds an input under a name that `outputs` (files or per-clip folders), the
/// `overlays` folder or a `.partial` file would take.
///
/// # Errors
/// [`Error::Output`] naming `dir`, the input and what to do.
pub fn check_folder_not_input(
    dir: &Path,
    flag: &str,
    inputs: &[&Path],
    outputs: &[&str],
) -> Result<()> {
    let d = resolve(dir);
    for input in inputs {
        let i = resolve(input);
        if d == i || same_file(dir, input) {
            return Err(refusal(dir, flag, input, "is an input of this run"));
        }
        if d.starts_with(&i) {
            return Err(refusal(dir, flag, input, "lies inside the input"));
        }
        if let Ok(rel) = i.strip_prefix(&d) {
            let mut parts = rel.components();
            let first = parts
                .next()
                .map(|c| c.as_os_str().to_string_lossy().into_owned());
            let direct = parts.next().is_none();
            let clobbered = first.as_deref().is_some_and(|f| {
                f == OVERLAYS || f.ends_with(".partial") || (direct && outputs.contains(&f))
            });
            if clobbered {
                return Err(refusal(
                    dir,
                    flag,
                    input,
                    "holds the input where results are written",
                ));
            }
        }
    }
    Ok(())
}

fn refusal(out: &Path, flag: &str, input: &Path, how: &str) -> Error {
    Error::Output {
        path: out.to_path_buf(),
        reason: format!(
            "{flag} {how} {}; twistmark never writes over its inputs: choose another {flag}",
            input.display()
        ),
    }
}

/// Writes one output file atomically and confined to its folder (see the module doc); for
/// commands that write a single file, such as a rig.
///
/// # Errors
/// [`Error::Io`] naming the file.
pub fn write_file(path: &Path, bytes: &[u8]) -> Result<()> {
    write_atomic(path, bytes)
}

/// Writes `bytes` to `path` through a temporary file in the same folder and a rename. The
/// temporary file has a random name and is created exclusively (O_EXCL: an existing file or
/// a symbolic link planted at that name is never opened), by the `tempfile` crate; it is
/// removed if anything fails. The rename replaces a symbolic link at `path` rather than
/// following it.
///
/// # Errors
/// [`crate::Error::Io`] naming the file.
pub(crate) fn write_atomic(path: &Path, bytes: &[u8]) -> Result<()> {
    let tmp = filled_temp(path, bytes)?;
    tmp.persist(path).map_err(|e| Error::Io {
        path: path.to_path_buf(),
        cause: e.error,
    })?;
    Ok(())
}

/// As `write_atomic` (the replacing writer), but never replaces anything: the finished temporary file is linked to
/// `path` with a call that fails when `path` exists, even when it appeared while the bytes
/// were written.
///
/// # Errors
/// [`Error::Output`] naming `path` when it exists (saying to pass `--force`);
/// [`crate::Error::Io`] when the file cannot be written.
pub fn write_new_atomic(path: &Path, bytes: &[u8]) -> Result<()> {
    let tmp = filled_temp(path, bytes)?;
    tmp.persist_noclobber(path).map_err(|e| {
        if e.error.kind() == std::io::ErrorKind::AlreadyExists {
            Error::Output {
                path: path.to_path_buf(),
                reason: "the file exists (it may have appeared meanwhile); pass --force to \
                         replace it, or write elsewhere"
                    .into(),
            }
        } else {
            Error::Io {
                path: path.to_path_buf(),
                cause: e.error,
            }
        }
    })?;
    Ok(())
}

/// A temporary file beside `path`, created exclusively with a random name, holding `bytes`
/// and synced to the disk; removed when dropped unless persisted.
fn filled_temp(path: &Path, bytes: &[u8]) -> Result<tempfile::NamedTempFile> {
    let name = path
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_else(|| "output".into());
    let dir = match path.parent() {
        Some(p) if !p.as_os_str().is_empty() => p,
        _ => Path::new("."),
    };
    let mut builder = tempfile::Builder::new();
    let prefix = format!(".{name}.");
    builder.prefix(&prefix).suffix(".partial");
    #[cfg(unix)]
    {
        // As a plain create would: rw for all, less the user's umask (tempfile's default is
        // owner-only, which would hide results from the rest of a lab's group).
        use std::os::unix::fs::PermissionsExt;
        builder.permissions(fs::Permissions::from_mode(0o666));
    }
    let io = |p: &Path| {
        let p = p.to_path_buf();
        move |cause| Error::Io { path: p, cause }
    };
    let mut tmp = builder.tempfile_in(dir).map_err(io(path))?;
    tmp.write_all(bytes).map_err(io(tmp.path()))?;
    tmp.as_file().sync_all().map_err(io(tmp.path()))?;
    Ok(tmp)
}

/// An advisory lock on an output folder, held until dropped.
#[derive(Debug)]
pub struct OutputLock {
    _file: fs::File,
}

/// Creates `dir` if needed and takes an advisory lock on it (a lock on `dir/.twistmark.lock`),
/// so that a second twistmark run into the same folder stops instead of mixing its files
/// with this one's.
///
/// # Errors
/// [`Error::Output`] when the folder cannot be created or another run holds the lock;
/// [`Error::Io`] when the lock file cannot be opened.
pub fn lock_output(dir: &Path) -> Result<OutputLock> {
    ensure_folder(dir)?;
    let path = dir.join(LOCK_FILE);
    let mut opts = fs::OpenOptions::new();
    opts.read(true).write(true).create(true).truncate(false);
    #[cfg(unix)]
    {
        use std::os::unix::fs::OpenOptionsExt;
        opts.custom_flags(libc::O_NOFOLLOW);
    }
    let file = opts.open(&path).map_err(|e| Error::io(&path, e))?;
    match file.try_lock() {
        Ok(()) => Ok(OutputLock { _file: file }),
        Err(fs::TryLockError::WouldBlock) => Err(Error::Output {
            path: dir.to_path_buf(),
            reason: "another twistmark run is writing into this folder; wait for it to finish \
                     or choose another --out"
                .into(),
        }),
        Err(fs::TryLockError::Error(e)) => Err(Error::io(&path, e)),
    }
}

/// Creates `dir` (and its parents) unless it exists; refuses a file in its place.
pub(crate) fn ensure_folder(dir: &Path) -> Result<()> {
    if dir.exists() && !dir.is_dir() {
        return Err(Error::Output {
            path: dir.to_path_buf(),
            reason: "is a file, not a folder: give --out a folder name".into(),
        });
    }
    fs::create_dir_all(dir).map_err(|e| Error::Output {
        path: dir.to_path_buf(),
        reason: format!("cannot create the output folder ({e}): choose another --out"),
    })
}

/// Removes what an interrupted run may have left in `dir`: temporary `.partial` files (here
/// and in `overlays/`) and overlay frames, which belong to the report being replaced. Only
/// files with twistmark's own names are touched.
///
/// # Errors
/// [`Error::Io`] naming a file that cannot be removed; [`Error::Output`] when `overlays` is
/// a symbolic link or not a folder.
pub fn clear_leftovers(dir: &Path) -> Result<()> {
    let overlays = dir.join(OVERLAYS);
    if let Ok(m) = fs::symlink_metadata(&overlays) {
        if m.file_type().is_symlink() || !m.is_dir() {
            return Err(Error::Output {
                path: overlays,
                reason: "is a symbolic link or a file, not twistmark's folder of overlay frames; \
                         twistmark writes only inside the output folder: remove it or choose \
                         another --out"
                    .into(),
            });
        }
        remove_matching(&overlays, |n| {
            (n.starts_with("frame_") && n.ends_with(".png")) || is_partial(n)
        })?;
    }
    remove_matching(dir, is_partial)
}

fn is_partial(name: &str) -> bool {
    name.starts_with('.') && name.ends_with(".partial")
}

fn remove_matching(dir: &Path, pick: impl Fn(&str) -> bool) -> Result<()> {
    let Ok(rd) = fs::read_dir(dir) else {
        return Ok(());
    };
    for e in rd.flatten() {
        let name = e.file_name();
        let Some(n) = name.to_str() else { continue };
        let is_file = e.file_type().is_ok_and(|t| t.is_file() || t.is_symlink());
        if is_file && pick(n) {
            let p = e.path();
            fs::remove_file(&p).map_err(|err| Error::io(&p, err))?;
        }
    }
    Ok(())
}

/// Writes one clip's results into `dir`: plots, overlay frames (when `overlay` is given),
/// `blows.csv`, `trace.csv`, and `report.json` last. The caller has already checked the
/// folder ([`super::check_output_folder`]) and holds its lock when others could write there.
///
/// # Errors
/// [`Error::Output`] when `dir` cannot be used; [`Error::Io`] naming a file that cannot be
/// written; a decoding error when the clip cannot be re-read for the overlays.
pub fn write_all(
    analysis: &Analysis,
    dir: &Path,
    overlay: Option<&OverlayOptions>,
    opts: &super::ReportOptions,
) -> Result<Vec<PathBuf>> {
    ensure_folder(dir)?;
    // The old report goes first: from here until the new one is in place, the folder holds
    // no report.json, so a run killed midway never leaves an old report beside new files.
    let report = dir.join("report.json");
    match fs::remove_file(&report) {
        Ok(()) => {}
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => {}
        Err(e) => return Err(Error::io(&report, e)),
    }
    clear_leftovers(dir)?;
    let mut written = super::plot::write_plots_with(analysis, dir, opts)?;
    if let Some(o) = overlay {
        written.extend(write_overlays(analysis, dir, o)?);
    }
    // write_outputs_with writes the CSVs and report.html, then report.json.
    let mut outputs = super::write_outputs_with(analysis, dir, opts)?;
    outputs.append(&mut written);
    Ok(outputs)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn an_output_file_that_is_an_input_or_inside_one_is_refused() {
        let dir = tempfile::tempdir().unwrap();
        let clip = dir.path().join("clip");
        fs::create_dir(&clip).unwrap();
        let still = clip.join("f_1.png");
        fs::write(&still, b"x").unwrap();
        let rig = dir.path().join("rig.json");
        fs::write(&rig, b"{}").unwrap();
        let inputs = [clip.as_path(), rig.as_path()];
        assert!(check_not_input(&still, "--preview", &inputs).is_err());
        assert!(check_not_input(&clip.join("f_9.png"), "--preview", &inputs).is_err());
        assert!(check_not_input(&clip.join("draft.json"), "--out", &inputs).is_ok());
        assert!(check_not_input(&rig, "--out", &inputs).is_err());
        // The same file by another spelling.
        let other = dir.path().join("clip/../rig.json");
        let e = check_not_input(&other, "--out", &inputs)
            .unwrap_err()
            .to_string();
        assert!(e.contains("--out") && e.contains("rig.json"), "{e}");
        assert!(check_not_input(&dir.path().join("new.json"), "--out", &inputs).is_ok());
    }

    #[test]
    fn an_output_folder_over_an_input_is_refused_but_a_rig_beside_results_is_fine() {
        let dir = tempfile::tempdir().unwrap();
        let out = dir.path().join("out");
        fs::create_dir(&out).unwrap();
        let rig = out.join("rig.json");
        fs::write(&rig, b"{}").unwrap();
        assert!(check_folder_not_input(&out, "--out", &[&rig], CLIP_OUTPUTS).is_ok());
        let trace = out.join("trace.csv");
        fs::write(&trace, b"x").unwrap();
        assert!(check_folder_not_input(&out, "--out", &[&trace], CLIP_OUTPUTS).is_err());
        // The parent of an input folder that a clip's results would take, and a folder inside
        // an input folder.
        let clip = out.join("take1");
        fs::create_dir(&clip).unwrap();
        assert!(check_folder_not_input(&out, "--out", &[&clip], CLIP_OUTPUTS).is_ok());
        assert!(check_folder_not_input(&out, "--out", &[&clip], &["take1"]).is_err());
        assert!(check_folder_not_input(&clip.join("o"), "--out", &[&clip], &[]).is_err());
    }

    #[test]
    fn a_second_lock_on_a_folder_is_refused_until_the_first_is_dropped() {
        let dir = tempfile::tempdir().unwrap();
        let a = lock_output(dir.path()).unwrap();
        let e = lock_output(dir.path()).unwrap_err().to_string();
        assert!(e.contains("another twistmark run"), "{e}");
        drop(a);
        assert!(lock_output(dir.path()).is_ok());
    }

    #[cfg(unix)]
    #[test]
    fn a_link_planted_at_a_temporary_name_is_never_followed() {
        // The temporary name was once predictable (`.NAME.PID.partial`) and opened through
        // links, so a link planted there sent the write outside the folder.
        let dir = tempfile::tempdir().unwrap();
        let outside = tempfile::tempdir().unwrap();
        let victim = outside.path().join("victim.txt");
        fs::write(&victim, b"keep").unwrap();
        let planted = dir
            .path()
            .join(format!(".report.json.{}.partial", std::process::id()));
        std::os::unix::fs::symlink(&victim, &planted).unwrap();
        write_file(&dir.path().join("report.json"), b"new").unwrap();
        assert_eq!(fs::read(&victim).unwrap(), b"keep");
        assert_eq!(fs::read(dir.path().join("report.json")).unwrap(), b"new");
        // A link at the final name is replaced, not written through.
        std::os::unix::fs::symlink(&victim, dir.path().join("trace.csv")).unwrap();
        write_file(&dir.path().join("trace.csv"), b"t").unwrap();
        assert_eq!(fs::read(&victim).unwrap(), b"keep");
        // The new file has the mode a plain create gives (the umask's, not owner-only).
        use std::os::unix::fs::PermissionsExt;
        let mode = |p: &Path| fs::metadata(p).unwrap().permissions().mode() & 0o777;
        fs::write(dir.path().join("plain"), b"p").unwrap();
        assert_eq!(
            mode(&dir.path().join("report.json")),
            mode(&dir.path().join("plain"))
        );
    }

    #[cfg(unix)]
    #[test]
    fn an_overlays_symlink_is_refused_and_leftovers_are_cleared() {
        let dir = tempfile::tempdir().unwrap();
        let elsewhere = tempfile::tempdir().unwrap();
        let out = dir.path().join("out");
        fs::create_dir(&out).unwrap();
        fs::write(out.join(".trace.csv.abc.partial"), b"x").unwrap();
        fs::write(out.join("notes.txt"), b"keep").unwrap();
        fs::create_dir(out.join(OVERLAYS)).unwrap();
        fs::write(out.join("overlays/frame_000007.png"), b"x").unwrap();
        clear_leftovers(&out).unwrap();
        let left: Vec<_> = fs::read_dir(&out)
            .unwrap()
            .flatten()
            .map(|e| e.file_name())
            .collect();
        assert_eq!(left.len(), 2, "{left:?}");
        assert_eq!(fs::read_dir(out.join(OVERLAYS)).unwrap().count(), 0);
        fs::remove_dir(out.join(OVERLAYS)).unwrap();
        std::os::unix::fs::symlink(elsewhere.path(), out.join(OVERLAYS)).unwrap();
        let e = clear_leftovers(&out).unwrap_err().to_string();
        assert!(e.contains("symbolic link"), "{e}");
    }
}
