//! The `emberfit` command: thin glue over the library.

use std::process::ExitCode;

use clap::Parser;

mod cli;
mod commands;

fn main() -> ExitCode {
    match commands::run(cli::Cli::parse()) {
        Ok(()) => ExitCode::SUCCESS,
        Err(err) => {
            eprintln!("error: {err:#}");
            ExitCode::FAILURE
        }
    }
}
