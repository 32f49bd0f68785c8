//! The inverse fit: free parameters by path, the objective over cases and signals, a parallel
//! population optimiser with local refinement, and how well each parameter is determined.
//! The engine sees the physics only through `model::Model`; it never writes files (the `run`
//! module does, through the `engine::Observer` it is given).

pub mod engine;
pub mod evaluator;
pub mod identifiability;
pub mod job;
pub mod label;
pub mod model;
pub mod objective;
pub mod parameters;
pub mod posterior;
