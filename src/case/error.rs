//! Errors from reading a material, scenario or fit job file: always file, line and key. The
//! type is the crate's one error of hand-written TOML files (`crate::source::FileError`).

/// What went wrong with a file, and where.
pub type CaseError = crate::source::FileError;
