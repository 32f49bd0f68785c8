//! `run.toml`: the record of how a run started (name, job, version, seed, threads, the
//! SHA-256 of the job and of every data file, the command-line overrides).
//!
//! **Invariant:** the only code that knows run.toml's format; written once when a run starts
//! (atomically), read on `--resume` and by viewers.

use serde::{Deserialize, Serialize};

use super::{fingerprint, io, RunDirectory, RunError};
use crate::export::write_atomically;

/// `run.toml`: what started the run.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct RunRecord {
    pub name: String,
    pub title: String,
    pub job_path: String,
    pub emberfit_version: String,
    pub started: String,
    pub seed: u64,
    pub threads: usize,
    pub data_sha256: std::collections::BTreeMap<String, String>,
    /// SHA-256 of the job file as started (absent in runs made before it was stored).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub job_sha256: Option<String>,
    /// The command-line overrides the run started with; `--resume` reuses them.
    #[serde(default)]
    pub overrides: fingerprint::Overrides,
}

impl RunRecord {
    /// The file's text.
    pub fn to_toml(&self) -> Result<String, toml::ser::Error> {
        toml::to_string(self)
    }

    /// Reads a record from its text.
    pub fn from_toml(text: &str) -> Result<RunRecord, toml::de::Error> {
        toml::from_str(text)
    }
}

/// Writes `run.toml` atomically.
pub fn write_record(dir: &RunDirectory, record: &RunRecord) -> Result<(), RunError> {
    let text = record.to_toml().map_err(|e| RunError::Corrupt {
        path: dir.record(),
        problem: e.to_string(),
    })?;
    write_atomically(&dir.record(), text.as_bytes()).map_err(io("cannot write", &dir.record()))
}

/// Reads `run.toml`: `Ok(None)` when the file cannot be read (the caller says what that
/// means), an error when it is there but does not parse.
pub fn read_record(dir: &RunDirectory) -> Result<Option<RunRecord>, RunError> {
    let Ok(text) = crate::input::read_text(&dir.record(), crate::input::InputKind::RunFile) else {
        return Ok(None);
    };
    RunRecord::from_toml(&text)
        .map(Some)
        .map_err(|e| RunError::Corrupt {
            path: dir.record(),
            problem: e.to_string(),
        })
}

/// `run.toml` for a viewer: `None` when it is missing or does not parse.
pub fn read_record_lenient(dir: &RunDirectory) -> Option<RunRecord> {
    read_record(dir).ok().flatten()
}
