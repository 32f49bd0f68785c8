//! The integration tests: one binary, one module per concern.

mod cli;
mod data;
mod properties;
mod util;
mod verification;
