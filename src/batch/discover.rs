//! Finding a batch's clips: video files and stills folders in the folder and its
//! sub-folders (to [`MAX_DEPTH`]), in natural order, each with a unique output name, its
//! sidecar rigs, the nearest folder rig and the manifest's tags.
//!
//! Part of `batch` (runs `analyze` and the report writer per clip): it must never import
//! `find_marks` or the CLI.

use super::*;

/// Compares names as a file manager does: runs of digits by value, the rest as text.
pub fn natural_cmp(a: &str, b: &str) -> Ordering {
    let (mut x, mut y) = (a.as_bytes(), b.as_bytes());
    while !x.is_empty() && !y.is_empty() {
        let dx = x[0].is_ascii_digit();
        let dy = y[0].is_ascii_digit();
        let ord = if dx && dy {
            let nx = x.iter().take_while(|c| c.is_ascii_digit()).count();
            let ny = y.iter().take_while(|c| c.is_ascii_digit()).count();
            let (sx, sy) = (trim_zeros(&x[..nx]), trim_zeros(&y[..ny]));
            let o = sx.len().cmp(&sy.len()).then_with(|| sx.cmp(sy));
            x = &x[nx..];
            y = &y[ny..];
            o
        } else {
            let o = x[0].to_ascii_lowercase().cmp(&y[0].to_ascii_lowercase());
            x = &x[1..];
            y = &y[1..];
            o
        };
        if ord != Ordering::Equal {
            return ord;
        }
    }
    x.len().cmp(&y.len()).then_with(|| a.cmp(b))
}

pub(super) fn trim_zeros(d: &[u8]) -> &[u8] {
    let n = d.iter().take_while(|&&c| c == b'0').count();
    &d[n.min(d.len().saturating_sub(1))..]
}

pub(super) fn lower_ext(p: &Path) -> Option<String> {
    p.extension()
        .and_then(OsStr::to_str)
        .map(str::to_ascii_lowercase)
}

pub(super) fn is_hidden(p: &Path) -> bool {
    p.file_name()
        .and_then(OsStr::to_str)
        .is_some_and(|n| n.starts_with('.'))
}

/// True when `dir` holds at least one still image with a number in its name.
pub(super) fn is_stills_folder(dir: &Path) -> bool {
    let Ok(rd) = std::fs::read_dir(dir) else {
        // Unreadable: treat as a clip so that its failure is reported with the reason.
        return true;
    };
    rd.flatten().any(|e| {
        let p = e.path();
        p.is_file()
            && lower_ext(&p).is_some_and(|x| STILL_EXTENSIONS.contains(&x.as_str()))
            && p.file_stem()
                .and_then(OsStr::to_str)
                .is_some_and(|s| s.bytes().any(|c| c.is_ascii_digit()))
    })
}

/// Lists the clips in `folder`: video files by extension and subfolders of numbered stills,
/// sorted as the folder is. `skip` (the output folder, when it lies inside) is never listed.
///
/// # Errors
/// [`Error::Input`] when the folder does not exist, is not a folder, cannot be read, is
/// empty, or holds no clips.
pub fn find_clips(folder: &Path) -> Result<Vec<Clip>> {
    if !folder.exists() {
        return Err(Error::input(folder, "no such folder; check the path"));
    }
    if !folder.is_dir() {
        return Err(Error::input(
            folder,
            "is a file, not a folder: `batch` takes a folder of clips (use `analyze` for one clip)",
        ));
    }
    let rd = std::fs::read_dir(folder).map_err(|e| Error::io(folder, e))?;
    let mut entries: Vec<PathBuf> = Vec::new();
    for e in rd {
        let e = e.map_err(|e| Error::io(folder, e))?;
        entries.push(e.path());
    }
    let visible: Vec<&PathBuf> = entries.iter().filter(|p| !is_hidden(p)).collect();
    if visible.is_empty() {
        return Err(Error::input(
            folder,
            "the folder is empty: put video files or folders of numbered stills in it",
        ));
    }
    let mut found: Vec<(PathBuf, ClipForm)> = Vec::new();
    gather(folder, 0, &mut found)?;
    if found.is_empty() {
        return Err(Error::input(
            folder,
            format!(
                "holds no clips, in it or in its sub-folders (up to {MAX_DEPTH} levels): expected video files ({}) or folders of numbered stills ({})",
                VIDEO_EXTENSIONS[..6].join(", "),
                STILL_EXTENSIONS.join(", ")
            ),
        ));
    }
    let file_name = |p: &Path| p.file_name().map(|n| n.to_string_lossy().into_owned());
    // The clip's folder relative to the batch folder, `/`-separated ("" at the top).
    let rel_dir = |p: &Path| -> String {
        p.parent()
            .and_then(|d| d.strip_prefix(folder).ok())
            .map(|r| {
                r.components()
                    .map(|c| c.as_os_str().to_string_lossy().into_owned())
                    .collect::<Vec<_>>()
                    .join("/")
            })
            .unwrap_or_default()
    };
    found.sort_by(|a, b| {
        natural_cmp(&rel_dir(&a.0), &rel_dir(&b.0)).then_with(|| {
            natural_cmp(
                &file_name(&a.0).unwrap_or_default(),
                &file_name(&b.0).unwrap_or_default(),
            )
        })
    });
    let stem = |p: &Path, form: ClipForm| -> String {
        match form {
            ClipForm::Stills => file_name(p).unwrap_or_default(),
            ClipForm::Video => p
                .file_stem()
                .map(|s| s.to_string_lossy().into_owned())
                .unwrap_or_default(),
        }
    };
    let keyed: Vec<(String, String)> = found
        .iter()
        .map(|(p, f)| (rel_dir(p), stem(p, *f)))
        .collect();
    let clips = found
        .iter()
        .zip(&keyed)
        .map(|((path, form), (dir, s))| {
            // Stems shared within one folder keep their extension.
            let shared = keyed.iter().filter(|k| k.0 == *dir && k.1 == *s).count() > 1;
            let full = file_name(path).unwrap_or_default();
            let mut name = if shared { full.clone() } else { s.clone() };
            // Never let a clip folder take the name of a batch-level file.
            if dir.is_empty() && RESERVED_NAMES.contains(&name.as_str()) {
                name.push_str("_clip");
            }
            if !dir.is_empty() {
                name = format!("{dir}/{name}");
            }
            let here = path.parent().unwrap_or(folder);
            let mut sidecars = Vec::new();
            for base in [s.as_str(), full.as_str()] {
                let c = here.join(format!("{base}{SIDECAR_SUFFIX}"));
                // Anything at that name counts (a dangling link or a folder too), so that a
                // sidecar that cannot be read fails the clip with its reason instead of being
                // passed over in silence.
                if std::fs::symlink_metadata(&c).is_ok() && !sidecars.contains(&c) {
                    sidecars.push(c);
                }
            }
            if sidecars.is_empty() {
                sidecars.extend(folder_rig(folder, here));
            }
            Clip {
                name,
                path: path.clone(),
                form: *form,
                sidecars,
                tags: Vec::new(),
            }
        })
        .collect();
    Ok(unique_names(clips))
}

/// Makes every clip's output folder name unique, also where the file system ignores case
/// (`x.mp4`, `x.mov` and `x.mp4.mkv` would otherwise give two folders named `x.mp4`): a
/// repeated name gets `_2`, `_3`, … in folder order.
pub(super) fn unique_names(mut clips: Vec<Clip>) -> Vec<Clip> {
    let mut taken: std::collections::HashSet<String> =
        RESERVED_NAMES.iter().map(|n| n.to_lowercase()).collect();
    let originals: std::collections::HashSet<String> =
        clips.iter().map(|c| c.name.to_lowercase()).collect();
    for c in &mut clips {
        if taken.insert(c.name.to_lowercase()) {
            continue;
        }
        let base = c.name.clone();
        let mut k = 2;
        loop {
            let candidate = format!("{base}_{k}");
            let key = candidate.to_lowercase();
            if !originals.contains(&key) && taken.insert(key) {
                c.name = candidate;
                break;
            }
            k += 1;
        }
    }
    clips
}

/// Deepest sub-folder level searched for clips below the batch folder.
pub const MAX_DEPTH: usize = 8;

/// The name of a folder's own rig: one folder per test, with the rig inside.
pub const FOLDER_RIG: &str = "rig.json";

/// The nearest `rig.json` in `dir` or a folder above it, below `root` (a `rig.json` in the
/// batch folder itself stands for `--rig`, which beats it; see the CLI).
pub(super) fn folder_rig(root: &Path, dir: &Path) -> Option<PathBuf> {
    let mut d = dir;
    while d != root && d.starts_with(root) {
        let c = d.join(FOLDER_RIG);
        if c.is_file() {
            return Some(c);
        }
        d = d.parent()?;
    }
    None
}

/// Adds the clips in `dir` and, for folders that are not stills clips, below it (at most
/// [`MAX_DEPTH`] levels; hidden entries skipped; a linked folder is read only when it is
/// itself a stills clip, so a link cannot make the walk loop).
pub(super) fn gather(dir: &Path, depth: usize, found: &mut Vec<(PathBuf, ClipForm)>) -> Result<()> {
    let rd = std::fs::read_dir(dir).map_err(|e| Error::io(dir, e))?;
    for e in rd {
        let e = e.map_err(|e| Error::io(dir, e))?;
        let p = e.path();
        if is_hidden(&p) {
            continue;
        }
        if p.is_dir() {
            if is_stills_folder(&p) {
                found.push((p, ClipForm::Stills));
            } else if depth < MAX_DEPTH && !e.file_type().is_ok_and(|t| t.is_symlink()) {
                gather(&p, depth + 1, found)?;
            }
        } else if lower_ext(&p).is_some_and(|x| VIDEO_EXTENSIONS.contains(&x.as_str())) {
            found.push((p, ClipForm::Video));
        }
    }
    Ok(())
}

/// Gives the clips the manifest lists their tags and rigs (a manifest rig beats every other).
///
/// # Errors
/// [`Error::Input`] naming the manifest and line of a clip that is not among those found.
pub(super) fn apply_manifest(
    clips: &mut [Clip],
    m: &crate::manifest::Manifest,
    folder: &Path,
) -> Result<()> {
    let canon = |p: &Path| std::fs::canonicalize(p).unwrap_or_else(|_| p.to_path_buf());
    let found: Vec<PathBuf> = clips.iter().map(|c| canon(&c.path)).collect();
    for row in &m.rows {
        let want = canon(&row.clip);
        let Some(i) = found.iter().position(|f| *f == want) else {
            return Err(Error::input(
                &m.path,
                format!(
                    "line {}: {} is not one of the clips found in {}; give its path relative to the manifest's folder",
                    row.line,
                    row.clip.display(),
                    folder.display()
                ),
            ));
        };
        clips[i].tags = row.tags.clone();
        if let Some(r) = &row.rig {
            clips[i].sidecars = vec![r.clone()];
        }
    }
    Ok(())
}
