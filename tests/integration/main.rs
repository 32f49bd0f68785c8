//! The integration tests: one binary, one module per concern.

mod util;
mod verification;
