//! Reading the project's TOML files (material models and scenarios) into validated physics
//! types. Raw structs mirror the files and keep spans, so every error names file, line and
//! key; validation then builds the SI types of `physics`. The file formats are documented key
//! by key in docs/file-formats.md.

pub mod budget;
mod error;
pub mod material;
pub mod scenario;
pub(crate) mod source;

pub use error::CaseError;
pub use material::{load_material, MaterialModel};
pub use scenario::{load_scenario, LoadedScenario};
