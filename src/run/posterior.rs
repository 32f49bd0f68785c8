//! `posterior.json`: the posterior sample of a run (`fit::posterior::Posterior`, its serde
//! form), written once after the fit when the job asks for one.
//!
//! **Invariant:** the only code that reads or writes `posterior.json`.

use std::path::Path;

use super::{io, RunDirectory, RunError};
use crate::export::write_atomically;
use crate::fit::posterior::Posterior;

/// Writes `posterior.json` atomically.
pub fn write_posterior(dir: &RunDirectory, sample: &Posterior) -> Result<(), RunError> {
    let path = dir.posterior();
    let bytes = serde_json::to_vec(sample).map_err(|e| RunError::Corrupt {
        path: path.clone(),
        problem: e.to_string(),
    })?;
    write_atomically(&path, &bytes).map_err(io("cannot write", &path))
}

/// Reads a run's `posterior.json`.
pub fn read_posterior(path: &Path) -> Result<Posterior, RunError> {
    let bytes = crate::input::read_bytes(path, crate::input::InputKind::RunFile)
        .map_err(io("cannot read", path))?;
    serde_json::from_slice(&bytes).map_err(|e| RunError::Corrupt {
        path: path.to_path_buf(),
        problem: e.to_string(),
    })
}
