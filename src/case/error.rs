//! Errors from reading a material or scenario file: always file, line and key.

use std::path::PathBuf;

/// What went wrong with a file, and where.
#[derive(Debug, thiserror::Error)]
pub enum CaseError {
    #[error("cannot read {}", path.display())]
    Read {
        path: PathBuf,
        #[source]
        source: std::io::Error,
    },
    /// toml's own message carries the line, column and key.
    #[error("cannot parse {}", path.display())]
    Syntax {
        path: PathBuf,
        #[source]
        source: toml::de::Error,
    },
    #[error("{}:{line}: `{field}` {problem}", path.display())]
    Invalid {
        path: PathBuf,
        line: usize,
        field: String,
        problem: String,
    },
    /// A value that is fine alone but not with the rest of the file.
    #[error("{}: {problem}", path.display())]
    Inconsistent { path: PathBuf, problem: String },
}
