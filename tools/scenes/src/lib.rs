//! The invented test bench of twistmark, kept out of the shipped crate: [`synth`] renders
//! scenes of marked discs on a torsion bar with exact known truth, [`encode`] (feature
//! `ffmpeg`) writes them as video clips, and the `twistmark-fixtures` binary regenerates and
//! checks `fixtures/`. Used by twistmark's integration tests, benchmarks and tools; these are
//! scenes of the project's own invented bench, never real footage.
//!
//! Must never be imported by twistmark's library or binary (only by its tests, benches and
//! tools): the shipped tool carries no renderer and no random generator of its own.
//!
//! The files under `synth/` and `encode/` name the library's items by `crate::` paths
//! (`crate::decode::Frame`, `crate::mechanics::model`, `crate::Error`): twistmark's own unit
//! tests compile these same files as a test-only module of the library (src/lib.rs), where
//! those paths are the library's modules, so they test private code against the renderer
//! with one copy of each type. Here the imports below give the same paths.

#[cfg(test)]
use twistmark::{Analysis, analyze, timing};
use twistmark::{Error, Result, decode, mechanics, rig};

#[cfg(feature = "ffmpeg")]
pub mod encode;
pub mod synth;
