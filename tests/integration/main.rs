//! Verification of the physics core against published analytical solutions.

mod data;
mod verification;
