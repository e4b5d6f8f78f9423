//! Batch manifest: a CSV that says what each clip of a batch is (which tool, bar, air
//! pressure, battery, ...), so the summary can carry and group by it.
//!
//! In: a CSV file with a header row `clip,rig,<tag>,<tag>,...`: `clip` (required) is the
//! clip's path relative to the manifest's folder, `rig` (optional column, cells may be empty)
//! a rig file for that clip, relative to the same folder, and every other column a tag whose
//! header is its name. Fields may be separated by `,` or `;` (as spreadsheets set to a
//! decimal comma write them). Out: [`Manifest`], rows in file order.
//!
//! Bounded: at most [`MAX_BYTES`] of text, [`MAX_ROWS`] rows and [`MAX_TAGS`] tag columns.
//!
//! Read by `batch`: it must never import decode, track, segment, report, `analyze`, `batch`,
//! `find_marks` or the CLI.

use std::path::{Path, PathBuf};

use crate::error::{Error, Result};

/// Largest manifest read, bytes.
pub const MAX_BYTES: u64 = 4 << 20;
/// Most rows.
pub const MAX_ROWS: usize = 100_000;
/// Most tag columns.
pub const MAX_TAGS: usize = 32;

/// One clip's line of the manifest.
#[derive(Debug, Clone, PartialEq)]
pub struct ManifestRow {
    /// Line in the file (1-based, the header is line 1).
    pub line: u64,
    /// The clip's path, resolved against the manifest's folder.
    pub clip: PathBuf,
    /// The clip's rig, resolved against the manifest's folder, when the row names one.
    pub rig: Option<PathBuf>,
    /// (tag name, value), in the manifest's column order.
    pub tags: Vec<(String, String)>,
}

/// A whole manifest.
#[derive(Debug, Clone, PartialEq)]
pub struct Manifest {
    /// The file read.
    pub path: PathBuf,
    /// Tag names, in column order.
    pub tag_names: Vec<String>,
    /// Rows, in file order.
    pub rows: Vec<ManifestRow>,
}

/// Reads a manifest.
///
/// # Errors
/// [`Error::Input`] naming the file (and line or column) and saying what to fix: a missing
/// or unreadable file, no `clip` column, an empty or repeated column name, an empty `clip`
/// cell, the same clip twice, or a file past the bounds.
pub fn read_manifest(path: &Path) -> Result<Manifest> {
    let bad = |reason: String| Error::input(path, reason);
    let meta = std::fs::metadata(path).map_err(|e| {
        bad(format!(
            "cannot read the manifest ({e}); check the --manifest path"
        ))
    })?;
    if meta.len() > MAX_BYTES {
        return Err(bad(format!(
            "is {} bytes; a manifest holds at most {MAX_BYTES} (one line per clip)",
            meta.len()
        )));
    }
    // Through the text cap too: a device or pipe reports no length above.
    let text = crate::limits::read_text(path, "manifest")?;
    let text = text.strip_prefix('\u{feff}').unwrap_or(&text);
    let (mut rdr, headers) = crate::mechanics::csv_with_headers(text).map_err(bad)?;
    let mut clip_col = None;
    let mut rig_col = None;
    let mut tags: Vec<(usize, String)> = Vec::new();
    for (i, h) in headers.iter().enumerate() {
        match h {
            "" => {
                return Err(bad(format!(
                    "column {} has no name; give every column a header (clip, rig, then your tags)",
                    i + 1
                )));
            }
            "clip" if clip_col.is_none() => clip_col = Some(i),
            "rig" if rig_col.is_none() => rig_col = Some(i),
            h if h == "clip" || h == "rig" || tags.iter().any(|t| t.1 == h) => {
                return Err(bad(format!("column '{h}' appears twice; keep one")));
            }
            h => tags.push((i, h.to_string())),
        }
    }
    let Some(clip_col) = clip_col else {
        return Err(bad(
            "has no 'clip' column; the header row must start clip,rig,... (rig and the tag columns are optional)"
                .into(),
        ));
    };
    if tags.len() > MAX_TAGS {
        return Err(bad(format!(
            "has {} tag columns; at most {MAX_TAGS}",
            tags.len()
        )));
    }
    let base = path.parent().unwrap_or(Path::new("."));
    let mut rows: Vec<ManifestRow> = Vec::new();
    for rec in rdr.records() {
        let rec = rec.map_err(|e| bad(format!("{e}")))?;
        let line = rec.position().map_or(0, |p| p.line());
        if rows.len() >= MAX_ROWS {
            return Err(bad(format!("has more than {MAX_ROWS} rows")));
        }
        let clip = rec.get(clip_col).unwrap_or("");
        if clip.is_empty() {
            return Err(bad(format!(
                "line {line}: the clip cell is empty; give the clip's path relative to the manifest's folder"
            )));
        }
        let clip = base.join(clip);
        if let Some(first) = rows.iter().find(|r| r.clip == clip) {
            return Err(bad(format!(
                "line {line}: {} is listed twice (first on line {}); keep one row per clip",
                clip.display(),
                first.line
            )));
        }
        let rig = rig_col
            .and_then(|c| rec.get(c))
            .filter(|r| !r.is_empty())
            .map(|r| base.join(r));
        rows.push(ManifestRow {
            line,
            clip,
            rig,
            tags: tags
                .iter()
                .map(|(c, name)| (name.clone(), rec.get(*c).unwrap_or("").to_string()))
                .collect(),
        });
    }
    Ok(Manifest {
        path: path.to_path_buf(),
        tag_names: tags.into_iter().map(|t| t.1).collect(),
        rows,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn write(text: &str) -> (tempfile::TempDir, PathBuf) {
        let d = tempfile::tempdir().unwrap();
        let p = d.path().join("manifest.csv");
        std::fs::write(&p, text).unwrap();
        (d, p)
    }

    #[test]
    fn reads_clips_rigs_and_tags_in_order() {
        let (d, p) = write("clip,rig,tool,pressure_bar\na/x.mp4,a/rig.json,T1,6.2\nb.mp4,,T2,5\n");
        let m = read_manifest(&p).unwrap();
        assert_eq!(m.tag_names, ["tool", "pressure_bar"]);
        assert_eq!(m.rows.len(), 2);
        assert_eq!(m.rows[0].clip, d.path().join("a/x.mp4"));
        assert_eq!(m.rows[0].rig, Some(d.path().join("a/rig.json")));
        assert_eq!(m.rows[1].rig, None);
        assert_eq!(
            m.rows[1].tags,
            vec![
                ("tool".into(), "T2".into()),
                ("pressure_bar".into(), "5".into())
            ]
        );
        assert_eq!(m.rows[1].line, 3);
    }

    #[test]
    fn semicolons_from_a_european_spreadsheet_are_read() {
        let (_d, p) = write("clip;tool;pressure_bar\nx.mp4;T1;6,2\n");
        let m = read_manifest(&p).unwrap();
        assert_eq!(m.rows[0].tags[1].1, "6,2");
    }

    #[test]
    fn bad_manifests_name_the_problem_and_the_fix() {
        for (text, want) in [
            ("tool,rig\nT1,r.json\n", "no 'clip' column"),
            ("clip,tool,tool\nx.mp4,a,b\n", "'tool' appears twice"),
            ("clip,,tool\nx.mp4,a,b\n", "column 2 has no name"),
            ("clip,tool\n,T1\n", "line 2: the clip cell is empty"),
            ("clip\nx.mp4\nx.mp4\n", "listed twice (first on line 2)"),
        ] {
            let (_d, p) = write(text);
            let e = read_manifest(&p).unwrap_err().to_string();
            assert!(
                e.contains(want) && e.contains("manifest.csv"),
                "{text:?}: {e}"
            );
        }
        let e = read_manifest(Path::new("/no/such/manifest.csv"))
            .unwrap_err()
            .to_string();
        assert!(e.contains("--manifest"), "{e}");
    }
}
