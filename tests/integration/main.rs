//! The integration tests: one binary, one module per concern.

mod cli;
mod data;
mod fit;
mod microscale;
mod milligram_fit;
mod numerics;
mod pmma_fit;
mod predict;
mod properties;
mod tui;
mod util;
mod verification;
