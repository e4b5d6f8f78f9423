//! Folders of numbered still frames (png, tif/tiff, jpg, bmp), ordered by the number in each
//! file name so that `f_2` comes before `f_10`.

use std::path::Path;

use super::{ClipInfo, Frame, FrameSource};
use crate::error::{Error, Result};

/// Reads a folder of numbered stills one frame at a time.
pub struct StillsSource {
    info: ClipInfo,
}

impl StillsSource {
    /// Lists and checks the folder.
    pub fn open(path: &Path) -> Result<Self> {
        Err(Error::input(path, "stills reading is not built yet"))
    }
}

impl FrameSource for StillsSource {
    fn info(&self) -> &ClipInfo {
        &self.info
    }
    fn read_into(&mut self, _frame: &mut Frame) -> Result<bool> {
        Ok(false)
    }
}
