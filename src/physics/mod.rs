//! The physics core: condensed-phase components and reactions, the 1-D conduction–pyrolysis
//! solver and its outputs (docs/physics.md §1). No I/O, clock, threads or randomness; SI units;
//! the same inputs give the same bits out.

pub mod kinetics;
pub mod material;
pub mod output;
pub mod scenario;
pub mod solver;
pub mod zero_d;

pub use output::{History, Sample, Summary};
pub use scenario::Scenario;
pub use solver::simulate;

/// Errors from building or running a model.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum PhysicsError {
    /// An input that no physical specimen can have.
    #[error("{what} {problem}")]
    Invalid { what: String, problem: String },
    /// The solver could not advance.
    #[error("the solver could not advance at t = {time_s:.3} s: {detail}")]
    NoConvergence { time_s: f64, detail: String },
}

impl PhysicsError {
    pub(crate) fn invalid(what: &str, problem: impl Into<String>) -> Self {
        PhysicsError::Invalid {
            what: what.to_string(),
            problem: problem.into(),
        }
    }
}
