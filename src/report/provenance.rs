//! Stage 5, report: where a report came from (interface v2, "Provenance"). In: an
//! [`Analysis`] and the clip on disk. Out: the `tool`, `created_utc`, `clip` and `window`
//! blocks of `report.json`.
//!
//! The clip's `sha256` lets a lab show later that a filed report belongs to a given file. For a
//! video file it is the SHA-256 of the file's bytes (FIPS 180-4, Secure Hash Standard). For a
//! folder of numbered stills it is the SHA-256 over every still, in file-name byte order, of
//! its file name, a zero byte, its length as 8 little-endian bytes and its bytes; `bytes` is
//! then the stills' total size. Files are read in 64 KiB blocks, so memory stays bounded
//! whatever the clip's size.
//!
//! Part of the report stage: it reads results through `crate::Analysis` and must never import
//! `batch`, `find_marks`, `calibrate` or the CLI.

use std::fs::File;
use std::io::Read;
use std::path::Path;

use serde::{Deserialize, Deserializer, Serialize};
use sha2::{Digest, Sha256};

use crate::analyze::Analysis;
use crate::decode::STILL_EXTENSIONS;

/// `report.json`'s `tool`: the program and version that wrote it.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ToolJson {
    /// Always `twistmark`.
    pub name: String,
    /// The crate version (Cargo.toml).
    pub version: String,
}

impl ToolJson {
    /// Today's date in UTC, ISO 8601 (`YYYY-MM-DD`), for records this build writes.
    pub fn today_utc() -> String {
        now_utc().chars().take(10).collect()
    }

    /// This build of twistmark.
    pub fn this() -> Self {
        ToolJson {
            name: env!("CARGO_PKG_NAME").to_string(),
            version: env!("CARGO_PKG_VERSION").to_string(),
        }
    }
}

/// `report.json`'s `clip`: the analysed file or stills folder, its size and SHA-256.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, Default)]
pub struct ClipJson {
    /// The clip's path as given on the command line.
    pub path: String,
    /// Size in bytes (the stills' total for a folder); null when it could not be read.
    pub bytes: Option<u64>,
    /// Lower-case hex SHA-256 (see the module notes); null when it could not be read.
    pub sha256: Option<String>,
}

impl ClipJson {
    /// Reads `path` (a file or a stills folder) and hashes it. An unreadable clip (one in
    /// memory, or moved since the analysis) gets null size and hash, not an error: the
    /// measurements stand without them.
    pub fn of(path: &Path) -> Self {
        let (bytes, sha256) = match hash_clip(path) {
            Some((n, h)) => (Some(n), Some(h)),
            None => (None, None),
        };
        ClipJson {
            path: path.display().to_string(),
            bytes,
            sha256,
        }
    }
}

/// Reads `report.json`'s `clip` as written now (an object) or by earlier versions (the path
/// as a string).
pub(crate) fn clip_from_either<'de, D: Deserializer<'de>>(d: D) -> Result<ClipJson, D::Error> {
    #[derive(Deserialize)]
    #[serde(untagged)]
    enum Either {
        Path(String),
        Full(ClipJson),
    }
    Ok(match Either::deserialize(d)? {
        Either::Path(path) => ClipJson {
            path,
            ..ClipJson::default()
        },
        Either::Full(c) => c,
    })
}

/// `report.json`'s `window`: the analysed frames (clip frame indices, both included).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, Default)]
pub struct WindowJson {
    /// First analysed frame; null when no frame was analysed.
    pub first_frame: Option<u64>,
    /// Last analysed frame; null when no frame was analysed.
    pub last_frame: Option<u64>,
    /// `first_frame / fps`, s.
    pub start_s: Option<f64>,
    /// `last_frame / fps`, s.
    pub end_s: Option<f64>,
}

impl WindowJson {
    /// The window of an analysis.
    pub fn of(a: &Analysis) -> Self {
        let first = a.trace.frames.first().copied();
        let last = a.trace.frames.last().copied();
        let t = |f: Option<u64>| f.map(|f| a.time_base.seconds(f as f64));
        WindowJson {
            first_frame: first,
            last_frame: last,
            start_s: t(first),
            end_s: t(last),
        }
    }
}

/// Now, as ISO 8601 / RFC 3339 in UTC to the second (`2026-12-03T07:59:00Z`).
pub fn now_utc() -> String {
    humantime::format_rfc3339_seconds(std::time::SystemTime::now()).to_string()
}

fn hash_clip(path: &Path) -> Option<(u64, String)> {
    let meta = std::fs::metadata(path).ok()?;
    let mut h = Sha256::new();
    let total = if meta.is_dir() {
        let mut files: Vec<_> = std::fs::read_dir(path)
            .ok()?
            .filter_map(|e| e.ok().map(|e| e.path()))
            .filter(|p| {
                p.is_file()
                    && p.extension().is_some_and(|x| {
                        STILL_EXTENSIONS.contains(&x.to_string_lossy().to_lowercase().as_str())
                    })
            })
            .collect();
        files.sort_by(|a, b| a.file_name().cmp(&b.file_name()));
        let mut total = 0u64;
        for f in files {
            let len = std::fs::metadata(&f).ok()?.len();
            h.update(f.file_name()?.as_encoded_bytes());
            h.update([0u8]);
            h.update(len.to_le_bytes());
            total += feed(&mut h, &f)?;
        }
        total
    } else {
        feed(&mut h, path)?
    };
    let digest = h.finalize();
    let hex = digest.iter().map(|b| format!("{b:02x}")).collect();
    Some((total, hex))
}

/// Feeds a file's bytes into `h` in 64 KiB blocks; returns the count.
fn feed(h: &mut Sha256, path: &Path) -> Option<u64> {
    let mut f = File::open(path).ok()?;
    let mut buf = vec![0u8; 64 * 1024];
    let mut n = 0u64;
    loop {
        let k = f.read(&mut buf).ok()?;
        if k == 0 {
            return Some(n);
        }
        h.update(&buf[..k]);
        n += k as u64;
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sha256_of_a_file_matches_the_fips_180_example() {
        // FIPS 180-4 / NIST's published SHA-256 example: "abc" gives
        // ba7816bf 8f01cfea 414140de 5dae2223 b00361a3 96177a9c b410ff61 f20015ad.
        let d = tempfile::tempdir().unwrap();
        let p = d.path().join("clip.bin");
        std::fs::write(&p, b"abc").unwrap();
        let c = ClipJson::of(&p);
        assert_eq!(c.bytes, Some(3));
        assert_eq!(
            c.sha256.as_deref(),
            Some("ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad")
        );
    }

    #[test]
    fn a_stills_folder_hashes_names_and_bytes_and_ignores_other_files() {
        let d = tempfile::tempdir().unwrap();
        std::fs::write(d.path().join("f_1.png"), b"one").unwrap();
        std::fs::write(d.path().join("f_2.png"), b"two").unwrap();
        std::fs::write(d.path().join("notes.txt"), b"ignored").unwrap();
        let a = ClipJson::of(d.path());
        assert_eq!(a.bytes, Some(6));
        std::fs::write(d.path().join("notes.txt"), b"changed").unwrap();
        assert_eq!(
            ClipJson::of(d.path()).sha256,
            a.sha256,
            "non-still files do not count"
        );
        // Renaming a still changes the hash even with the same bytes.
        std::fs::rename(d.path().join("f_2.png"), d.path().join("f_3.png")).unwrap();
        assert_ne!(ClipJson::of(d.path()).sha256, a.sha256);
    }

    #[test]
    fn a_missing_clip_has_null_size_and_hash() {
        let c = ClipJson::of(Path::new("/no/such/clip.mp4"));
        assert_eq!((c.bytes, c.sha256), (None, None));
        assert_eq!(c.path, "/no/such/clip.mp4");
    }

    #[test]
    fn created_utc_is_iso_8601_utc() {
        let t = now_utc();
        assert_eq!(t.len(), 20, "{t}");
        assert!(t.ends_with('Z') && t.as_bytes()[10] == b'T', "{t}");
    }

    #[test]
    fn old_reports_with_a_path_string_still_read() {
        #[derive(Deserialize)]
        struct R {
            #[serde(deserialize_with = "clip_from_either")]
            clip: ClipJson,
        }
        let r: R = serde_json::from_str(r#"{"clip": "a.mp4"}"#).unwrap();
        assert_eq!(r.clip.path, "a.mp4");
        let r: R =
            serde_json::from_str(r#"{"clip": {"path": "b", "bytes": 2, "sha256": "x"}}"#).unwrap();
        assert_eq!(r.clip.bytes, Some(2));
    }
}
