//! Reading the project's TOML files (material models, scenarios, fit jobs) into validated
//! physics types, and the fit job as a `fit::Model`. Raw structs mirror the files and keep
//! spans, so every error names file, line and key; validation then builds the SI types of
//! `physics`. The file formats are documented key by key in docs/file-formats.md and
//! docs/fit-jobs.md.
//!
//! - `material`, `scenario`: models and cone scenarios; `budget`: the run-size estimate.
//! - `job`: the fit job (parameters, settings, cone and milligram cases, the σ policy).
//! - `targets`: the one table of fittable values (path, target, file key, unit, SI factor).
//! - `model`: `CaseModel`, the job's cases simulated for the fit engine.
//! - `label`: short labels and meanings of a job's parameters.

pub mod budget;
mod error;
pub mod job;
pub mod label;
pub mod material;
pub mod model;
pub mod scenario;
pub(crate) mod source;
pub mod targets;

pub use error::CaseError;
pub use material::{load_material, MaterialModel};
pub use scenario::{load_scenario, LoadedScenario};
