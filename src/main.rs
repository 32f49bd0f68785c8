//! The `emberfit` command: thin glue over the library.

use std::process::ExitCode;

use clap::Parser;

mod cli;
mod commands;
mod signals;

fn main() -> ExitCode {
    let cli = cli::Cli::parse();
    if !matches!(cli.command, cli::Command::Fit(_)) {
        // A closed pipe (`emberfit reduce ... | head -2`) ends these commands quietly, as it
        // ends any Unix filter, instead of a panic in `println!`. A fit keeps the default of
        // Rust programs (the write fails, the fit ignores it and still writes its outputs).
        // SAFETY: called before any thread starts; SIG_DFL is a valid disposition.
        unsafe {
            libc::signal(libc::SIGPIPE, libc::SIG_DFL);
        }
    }
    match commands::run(cli) {
        Ok(()) => ExitCode::SUCCESS,
        Err(err) => {
            use std::io::Write;
            let _ = writeln!(std::io::stderr(), "error: {err:#}");
            ExitCode::FAILURE
        }
    }
}
