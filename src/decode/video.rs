//! Video files decoded with the FFmpeg libraries; the luma plane is copied row by row.

use std::path::Path;

use super::{ClipInfo, Frame, FrameSource};
use crate::error::{Error, Result};

/// Decodes a video file one frame at a time.
pub struct VideoSource {
    info: ClipInfo,
}

impl VideoSource {
    /// Opens the file and its first video stream.
    pub fn open(path: &Path) -> Result<Self> {
        Err(Error::input(path, "video decoding is not built yet"))
    }
}

impl FrameSource for VideoSource {
    fn info(&self) -> &ClipInfo {
        &self.info
    }
    fn read_into(&mut self, _frame: &mut Frame) -> Result<bool> {
        Ok(false)
    }
}
