//! The integration tests: one binary, one module per concern.

mod microscale;
mod util;
mod verification;
