//! The integration tests, built as one test binary (`cargo test --test it`): each topic is a
//! module here, so Cargo links the crate and its dependencies into one executable instead of
//! one per file (CI time, docs/performance.md). Modules that need video files carry
//! `#![cfg(feature = "ffmpeg")]` at their top. Run one topic with `cargo test --test it bar::`.
//!
//! A new topic: add `tests/it/<topic>.rs` (with its `//!` line) and a `mod <topic>;` line
//! below. A file put straight under `tests/` is not built (`autotests = false` in Cargo.toml).

mod analyze_fixtures;
mod bad_input;
mod bad_input_decode;
mod bar;
mod batch;
mod calibrate_stills;
mod decode;
mod fixtures_decode;
mod hostile;
mod locate;
mod segment;
mod side;
mod track_accuracy;
