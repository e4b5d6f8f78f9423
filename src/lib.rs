//! twistmark measures impact blows on a torsion extension bar from high-speed video.
//!
//! # Pipeline
//!
//! ```text
//! decode ──Frame──▶ track ──Trace──▶ segment ──Segmentation──▶ mechanics ──BlowMetrics──▶ report
//! ```
//!
//! [`analyze()`] chains the stages; each stage passes plain data to the next.
//!
//! # Conventions (stated once)
//!
//! - Pixels: x to the right, y down, origin at the centre of the top-left pixel.
//! - Screen angles run from +x towards +y (clockwise on screen). Every reported angle is
//!   positive in the tightening direction given by the rig, and zero at the first analysed
//!   frame. Twist = drive − nut.
//! - Time is frame index / *capture* rate ([`TimeBase`]); the container's rate is usually the
//!   playback rate and is used only as a last resort, with a warning.
//! - Inside the library everything is SI (rad, N·m, N·m/rad, m, s); files carry the unit in
//!   every key (`peak_torque_nm`, `t_s`).
//!
//! A torque computed from video is a model (stiffness × twist), not a calibrated measurement.
#![deny(missing_docs)]

pub mod analyze;
pub mod batch;
pub mod calibrate;
pub mod decode;
#[cfg(feature = "ffmpeg")]
pub mod encode;
mod error;
pub mod find_marks;
pub mod limits;
pub mod manifest;
pub mod mechanics;
pub mod report;
pub mod rig;
pub mod sanity;
pub mod segment;
mod stats;
pub mod synth;
pub mod timing;
pub mod track;
pub mod units;
mod warning;

pub use analyze::{Analysis, AnalyzeOptions, analyze};
pub use error::{Error, Result};
pub use rig::Rig;
pub use track::Trace;
pub use units::{Angle, Stiffness, TimeBase, Torque};
pub use warning::Warning;
