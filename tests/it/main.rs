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
mod common;
mod coverage;
mod decode;
mod find_marks;
mod find_marks_layouts;
mod fixtures_decode;
mod held_out;
mod holding;
mod hostile;
mod html_report;
mod layering;
mod messages;
mod phone;
mod predict;
mod segment;
mod side;
mod springback;
mod track_accuracy;
