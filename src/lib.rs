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
//!
//! The crate root: it declares the modules and must never import the CLI.
#![deny(missing_docs)]

pub mod analyze;
pub mod batch;
pub mod calibrate;
pub mod decode;
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
// The invented test bench (renderer with exact truth, clip writer) lives in the workspace
// member tools/scenes, which depends on this crate, so the shipped tool carries neither. Unit
// tests here use it by compiling its source files as a test-only module of this crate: a
// dev-dependency on twistmark-scenes would link a second copy of this crate, whose `Frame`,
// `Rig` and `BarSpec` are other types than the ones under test, and most tests that render a
// scene check private code that tests/it cannot reach. Those files name this crate's items by
// `crate::` paths that resolve the same way in both crates (tools/scenes/src/lib.rs). Their own
// unit tests run here, once (the scenes crate builds no test target of its own).
#[cfg(all(test, feature = "ffmpeg"))]
#[allow(dead_code, unused_imports)]
#[path = "../tools/scenes/src/encode/mod.rs"]
mod encode;
#[cfg(test)]
#[allow(dead_code, unused_imports)]
#[path = "../tools/scenes/src/synth/mod.rs"]
mod synth;
pub mod timing;
pub mod track;
pub mod units;
mod warning;

pub use analyze::{Analysis, AnalyzeOptions, analyze};
pub use error::{Error, Result};
pub use rig::Rig;
pub use track::{CameraMotion, Signal, Trace};
pub use units::{Angle, Stiffness, TimeBase, Torque};
pub use warning::{Warning, condensed as condensed_warnings};
