//! The physics core: pure, SI, deterministic. No files, printing, clock, threads or randomness.
//!
//! This first part holds the implicit finite-volume conduction kernel (physics.md §1, energy
//! equation without reactions) that the pyrolysis solver builds on.

pub mod conduction;
