//! One function per subcommand, grouped by family: each parses its arguments into library
//! calls, calls the library and hands the result to `emberfit::present` to print.
//!
//! **Invariant:** no table layout or JSON document (those are `present`'s), no signal handler
//! (`crate::signals`), no physics or run-directory format of its own: files are read and
//! written by the library (`case`, `data`, `run`, `export`). Two deliberate exceptions, both
//! in `data.rs`: `is_ignition_list` peeks at a TOML's keys to tell a list from a test, and
//! the `reduce` flags are written as TEST.toml keys so that file's own validator checks them.

mod data;
mod detach;
mod fit;
mod milligram;
mod predict;
mod simulate;

use anyhow::{bail, Context, Result};

use emberfit::data::Notice;

use crate::cli::{Cli, Command};

pub fn run(cli: Cli) -> Result<()> {
    match cli.command {
        Command::Simulate(args) => simulate::simulate(args),
        Command::Synthesize(args) => simulate::synthesize(args),
        Command::Fit(args) => fit::fit(args),
        Command::Watch(args) => fit::watch(args),
        Command::Reduce(args) => data::reduce(*args),
        Command::Ignition(args) => data::ignition(args),
        Command::Isoconversional(args) => milligram::isoconversional(args),
        Command::Predict(args) => predict::predict(args),
        Command::Compare(args) => predict::compare(args),
        Command::Report(args) => predict::report(args),
    }
}

/// Starts the worker threads of `--threads` (the default pool otherwise).
fn start_threads(threads: Option<usize>) -> Result<()> {
    if let Some(threads) = threads {
        let threads = emberfit::limits::check_threads(threads).map_err(anyhow::Error::msg)?;
        rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build_global()
            .context("starting the worker threads")?;
    }
    Ok(())
}

/// Writes a line to stderr, ignoring failure: after a hang-up the terminal is gone, and the
/// fit must keep running rather than panic on a failed write (as `eprintln!` would).
fn tell(line: &str) {
    use std::io::Write;
    let _ = writeln!(std::io::stderr(), "{line}");
}

/// Prints repairs as `note:` and plausibility warnings as `warning:` lines on stderr.
fn print_notices(notices: &[Notice]) {
    for line in emberfit::present::notice_lines(notices) {
        tell(&line);
    }
}

/// `--strict`: a plausibility warning on test data is an error.
fn refuse_warnings_when_strict(notices: &[Notice], strict: bool) -> Result<()> {
    let warnings: Vec<&str> = notices
        .iter()
        .filter(|n| n.is_warning)
        .map(|n| n.message.as_str())
        .collect();
    if strict && !warnings.is_empty() {
        bail!(
            "--strict: the test data are implausible:\n  {}",
            warnings.join("\n  ")
        );
    }
    Ok(())
}
