//! Synthetic scenes with exact known truth: a small torsional model of impact blows and a
//! renderer of marked discs, for tests, benchmarks, fixtures and the demo. These are scenes of
//! the project's own invented test bench, not real footage.
