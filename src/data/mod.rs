//! Test data in: reads lab files (a TEST.toml description and its CSV), reduces cone calorimeter
//! signals to HRR and MLR curves, computes the report quantities of ISO 5660-1, combines repeats
//! and analyses ignition times across irradiances.
//!
//! This module owns everything between a lab's file and the curves the fit uses. It never
//! prints: every repair it makes to the data is returned as a [`Notice`], every failure as a
//! [`DataError`] naming file, line and column or field. Curves leave this module in the trade's
//! units (`hrr_kw_m2`, `mlr_g_m2s`, `mass_g`) because that is what the fit compares with the
//! lab's own numbers; each name carries its unit.

pub mod derivative;
pub mod description;
pub mod ignition;
pub mod lag;
pub mod oxygen;
pub mod plausibility;
pub mod reduce;
pub mod repeats;
pub mod report;
pub mod table;

use std::fmt;
use std::path::PathBuf;

pub use description::TestDescription;
pub use reduce::{reduce, Reduced};

/// A repair or assumption made while reading or reducing a test (dropped rows, clipped values,
/// assumed units). Notices are never silent: commands print them and `--json` carries them.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Notice {
    /// What was done and why, in one lower-case sentence that names the file or column.
    pub message: String,
    /// A plausibility warning (a value a real test cannot have; see `plausibility`) rather
    /// than a repair: printed as `warning:`, an error with `--strict`.
    pub is_warning: bool,
}

impl Notice {
    /// Makes a notice from any message.
    pub fn new(message: impl Into<String>) -> Self {
        Notice {
            message: message.into(),
            is_warning: false,
        }
    }

    /// Makes a plausibility warning.
    pub fn warning(message: impl Into<String>) -> Self {
        Notice {
            message: message.into(),
            is_warning: true,
        }
    }

    /// `warning` or `note`, the word a command prints before the message.
    pub fn label(&self) -> &'static str {
        if self.is_warning {
            "warning"
        } else {
            "note"
        }
    }
}

impl fmt::Display for Notice {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.message)
    }
}

/// Everything that can stop a test file from being read or reduced.
#[derive(Debug, thiserror::Error)]
pub enum DataError {
    /// A hand-written TOML file (a test description, an ignition list) that cannot be read or
    /// parsed, or one of its keys with a value that cannot be used (`file:line: \`key\`
    /// problem`); also a data file that cannot be read.
    #[error(transparent)]
    Input(#[from] crate::source::FileError),
    /// A required key of the TOML description is missing.
    #[error("{}: `{field}` {problem}", path.display())]
    Missing {
        /// TOML file.
        path: PathBuf,
        /// Key path that is missing.
        field: String,
        /// What is needed instead.
        problem: String,
    },
    /// A cell of a data file cannot be read.
    #[error("{}:{line}: column `{column}`: {problem}", path.display())]
    Cell {
        /// Data file.
        path: PathBuf,
        /// Line in the file (1-based).
        line: usize,
        /// Column name as in the header.
        column: String,
        /// What is wrong and what was found.
        problem: String,
    },
    /// A data file as a whole cannot be used (no header, a missing column, too few rows).
    #[error("{}: {problem}", path.display())]
    File {
        /// Data file.
        path: PathBuf,
        /// What is wrong and what was found.
        problem: String,
    },
    /// The data were read but cannot be reduced as asked (e.g. a quantity needs a signal that
    /// the test does not have).
    #[error("{problem}")]
    Reduction {
        /// What is wrong and what was found.
        problem: String,
    },
}

/// Reads a hand-written TOML file of the data module (a test description, an ignition list)
/// through the input guard, as a [`DataError::Input`] naming the file when it fails.
pub(crate) fn read_toml_text(path: &std::path::Path) -> Result<String, DataError> {
    Ok(crate::source::read_toml_text(path)?)
}
