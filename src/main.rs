//! The `emberfit` command: thin glue over the library.

use clap::Parser;

/// emberfit: calibrate a pyrolysis model of a material from fire tests (work in progress; see
/// README.md for what is built so far).
#[derive(Parser)]
#[command(version, about)]
struct Cli {}

fn main() {
    let _ = Cli::parse();
}
