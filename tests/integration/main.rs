//! The integration tests: one binary, one module per concern.

mod cli;
mod data;
mod fit;
mod fuzz;
mod hostile;
mod microscale;
mod milligram_fit;
mod numerics;
mod pmma_fit;
mod predict;
mod properties;
mod reactions;
mod templates;
mod tui;
mod twins;
mod util;
mod verification;
