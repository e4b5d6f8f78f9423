//! The library's one error type. Every message names the file, flag, field, frame or mark
//! at fault and says what to change, on one line.
//!
//! A shared leaf: it must never import any other module of the crate.

use std::path::PathBuf;

/// Result with the library's [`Error`].
pub type Result<T, E = Error> = std::result::Result<T, E>;

/// Everything that can stop an analysis. Data-quality problems that still allow a result
/// are [`crate::Warning`]s instead.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum Error {
    /// A file or folder could not be read or written.
    // The OS error is part of the one-line message, not a separate cause, so that the CLI's
    // `{:#}` chain does not print it twice.
    #[error("{path}: {cause}")]
    Io {
        /// The file or folder.
        path: PathBuf,
        /// What the operating system said.
        cause: std::io::Error,
    },
    /// An input clip (video file or stills folder) is unusable.
    #[error("{path}: {reason}")]
    Input {
        /// The clip, or the file inside a stills folder.
        path: PathBuf,
        /// What is wrong and what to do.
        reason: String,
    },
    /// Decoding failed part-way through a clip.
    #[error("{path}: frame {frame}: {reason}")]
    Decode {
        /// The clip.
        path: PathBuf,
        /// Zero-based index of the frame that failed.
        frame: u64,
        /// What the decoder said.
        reason: String,
    },
    /// The rig file is malformed or a field is out of range.
    #[error("{path}: {field}: {reason}")]
    Rig {
        /// The rig file (empty when the rig came from memory).
        path: PathBuf,
        /// The offending field, as a JSON path (`marks.drive.radius`).
        field: String,
        /// What is wrong and what to change.
        reason: String,
    },
    /// A command-line option or analysis option is invalid.
    #[error("{flag}: {reason}")]
    Option {
        /// The flag or option name (`--fps`).
        flag: String,
        /// What is wrong and what to change.
        reason: String,
    },
    /// A mark could not be measured at all.
    #[error("mark '{mark}': {reason}")]
    Mark {
        /// The mark's role (`drive`, `nut`, `fixed`).
        mark: String,
        /// What was seen and what to check.
        reason: String,
    },
    /// The bar description gives an impossible bar.
    #[error("bar: {field}: {reason}")]
    Bar {
        /// The offending field (`bar.sections[1].bore_mm`).
        field: String,
        /// What is wrong and what to change.
        reason: String,
    },
    /// An output folder or file cannot be used.
    #[error("{path}: {reason}")]
    Output {
        /// The output path.
        path: PathBuf,
        /// What is wrong and what to do.
        reason: String,
    },
}

impl Error {
    /// Builds an [`Error::Io`] for `path`.
    pub fn io(path: impl Into<PathBuf>, source: std::io::Error) -> Self {
        Error::Io {
            path: path.into(),
            cause: source,
        }
    }
    /// Builds an [`Error::Input`] for `path`.
    pub fn input(path: impl Into<PathBuf>, reason: impl Into<String>) -> Self {
        Error::Input {
            path: path.into(),
            reason: reason.into(),
        }
    }
}
