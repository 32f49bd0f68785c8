//! The physics core: condensed-phase components and reactions, the 1-D conduction–pyrolysis
//! solver and its outputs (physics.md §1). No I/O, clock, threads or randomness; SI units;
//! the same inputs give the same bits out.

pub mod kinetics;
pub mod material;
pub mod zero_d;

/// Errors from building or running a model.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum PhysicsError {
    /// An input that no physical specimen can have.
    #[error("{what} {problem}")]
    Invalid { what: String, problem: String },
}

impl PhysicsError {
    pub(crate) fn invalid(what: &str, problem: impl Into<String>) -> Self {
        PhysicsError::Invalid {
            what: what.to_string(),
            problem: problem.into(),
        }
    }
}
