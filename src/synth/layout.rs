//! Random layouts of the invented bench for held-out checks of `find-marks`: frame shapes
//! (landscape, portrait, 800×600), the nut left or right of the drive, small parts off
//! centre, on textured and streaked (brushed-steel) backgrounds.
//!
//! [`HELDOUT_LAYOUT_SEEDS`] was drawn once from the operating system's random source and
//! committed before any part of `find-marks` was tuned; it is never changed. Tuning uses other
//! seeds; the held-out figures in docs/accuracy.md come from these.

/// The held-out layouts: one seed each. Fixed before tuning; never change or reorder them.
pub const HELDOUT_LAYOUT_SEEDS: [u64; 16] = [
    1016527157, 523224565, 179604061, 1708391181, 2647506476, 3451293760, 1073509136, 3111847097,
    2754332359, 3875020168, 2929450450, 1921786228, 1021562915, 1003453448, 475466200, 976364522,
];
