//! Synthetic scenes with exact known truth: a small torsional model of impact blows and a
//! renderer of marked discs, for tests, benchmarks, fixtures and the demo. These are scenes of
//! the project's own invented test bench, not real footage.
//!
//! A [`Scenario`] holds every knob (tool, bar, joint, camera, scene, realism effects) and a
//! seed. [`simulate`] integrates the model and returns the [`Truth`]: per-frame angles and the
//! per-blow quantities computed with exactly the definitions of the `report.json` section of
//! the interface, so tests can compare field by field. [`render_frame`] draws any frame.
//!
//! ```
//! use twistmark_scenes::synth::{Scenario, render_frame, simulate};
//! let sc = Scenario::preset("fast-tool").unwrap();
//! let truth = simulate(&sc);
//! let frame = render_frame(&sc, &truth, 10);
//! assert_eq!((frame.width, frame.height), (320, 240));
//! assert!(truth.summary.peak_torque_nm.unwrap() > sc.bar.rating_nm.unwrap());
//! ```
//!
//! Conventions: angles in the truth are degrees, relative to frame 0, positive in the
//! tightening direction; `twist = drive − nut`. Frame `f` is the instant `t = f / fps` (the
//! middle of its exposure). A torque here is the model's bar stiffness × twist on an invented
//! bench, not a measurement.

#[doc(hidden)]
pub mod fixtures;
pub mod layout;
mod look;
pub mod phone;
pub mod random;
mod render;
pub mod rolling;
mod scenario;
mod scene;
pub mod side;
pub mod side_random;
mod texture;
mod truth;
mod write;

use rand::RngExt;
use rand::rngs::ChaCha8Rng;

pub use look::{Finish, Look, Washer, Wheel};
pub use render::{render_clip, render_frame, render_rest_frame};
pub use scenario::{Camera, Effects, Flicker, JointSpec, PRESETS, Scenario, Tool};
pub use scene::{DriveDisc, FixedMark, Highlight, NutFace, Paint, Scene, Steel, Stripe};
pub use texture::BrushedSteel;
pub use truth::{BlowTruth, ModelTruth, SummaryTruth, TraceTruth, Truth, simulate};
#[cfg(feature = "ffmpeg")]
pub use write::write_video;
pub use write::{StillFormat, write_rest_still, write_sidecars, write_stills};

use render::finish_frame;
use scenario::{bench_bar, bench_scene};

/// Version of the truth.json layout written by this build.
pub const TRUTH_VERSION: u32 = 1;

fn is_zero(v: &f64) -> bool {
    *v == 0.0
}

/// One standard normal deviate (Box–Muller).
fn gauss(rng: &mut ChaCha8Rng) -> f64 {
    let u1: f64 = 1.0 - rng.random::<f64>();
    let u2: f64 = rng.random::<f64>();
    (-2.0 * u1.ln()).sqrt() * (2.0 * std::f64::consts::PI * u2).cos()
}
