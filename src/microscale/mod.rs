//! The milligram scale (docs/physics.md §3): reading TGA, DSC and MCC files, isoconversional and
//! Kissinger analysis, milligram-scale scenario files (a heating programme instead of an
//! irradiance) run through the 0-D model of `physics::zero_d`, and a single-step kinetic fit
//! (a fit job's milligram cases are simulated by `case::model`). File formats are in
//! docs/milligram-scale.md. This module does I/O only in `files` and `scenario`; the analysis
//! and fit functions compute on values already read.

pub mod files;
pub mod fit;
pub mod isoconversional;
pub mod scenario;

use std::path::PathBuf;

pub use files::{read_thermogram, MeasurementKind, Thermogram};
pub use fit::{fit_single_step, MilligramCase, SingleStepFit};
pub use isoconversional::{analyse, ConversionRun, IsoconversionalReport, Method};
pub use scenario::{
    is_milligram_scenario, load_milligram_scenario, simulate_programme, zero_d_csv,
    MilligramScenario,
};

/// Errors of the milligram-scale tools: always saying what is wrong and, for files, where.
#[derive(Debug, thiserror::Error)]
pub enum MicroscaleError {
    /// A file that cannot be read, a scenario that cannot be parsed, or a key of it with a
    /// bad value (`file:line: \`key\` problem`): the crate's one file error.
    #[error(transparent)]
    File(#[from] crate::source::FileError),
    /// A data or scenario file whose content is wrong at a line (0 when no line applies).
    #[error("{}:{line}: {problem}", path.display())]
    Format {
        path: PathBuf,
        line: usize,
        problem: String,
    },
    /// The material file named by a scenario could not be loaded.
    #[error("loading the material of {}", path.display())]
    Material {
        path: PathBuf,
        #[source]
        source: Box<crate::case::CaseError>,
    },
    /// The generic table reader could not read a data file.
    #[error(transparent)]
    Data(Box<crate::data::DataError>),
    /// Data that the analysis cannot use.
    #[error("{0}")]
    Analysis(String),
    /// The 0-D model rejected its inputs or failed to integrate.
    #[error(transparent)]
    Physics(#[from] crate::physics::PhysicsError),
}

impl MicroscaleError {
    pub(crate) fn analysis(problem: impl Into<String>) -> Self {
        MicroscaleError::Analysis(problem.into())
    }
}
