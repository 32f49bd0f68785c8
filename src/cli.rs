//! Command-line argument types only: no work is done here.

use std::path::PathBuf;

use clap::{Parser, Subcommand};

/// emberfit: turn cone calorimeter and milligram-scale fire tests into a calibrated 1-D
/// pyrolysis model of a material, and predict its behaviour at conditions nobody tested.
///
/// Model results support, and do not replace, standard tests, local codes and the judgement
/// of a qualified fire engineer.
#[derive(Debug, Parser)]
#[command(version, about, long_about)]
pub struct Cli {
    #[command(subcommand)]
    pub command: Command,
}

#[derive(Debug, Subcommand)]
pub enum Command {
    /// Simulate a specimen in a scenario (layers, exposure, back face) and write its curves.
    ///
    /// Prints a summary (ignition, peak HRR, total heat release, mass lost, energy and mass
    /// balance) and writes a CSV with one row per output interval.
    ///
    /// Example: emberfit simulate demo-cases/ridgeline-panel/scenario.toml --flux 35 --out run.csv
    Simulate(SimulateArgs),
}

#[derive(Debug, clap::Args)]
pub struct SimulateArgs {
    /// Scenario file (TOML): layers, exposure, ignition, back face; see docs/file-formats.md.
    pub scenario: PathBuf,
    /// Override the scenario's irradiance with a constant value, kW/m².
    #[arg(long, value_name = "KW_M2")]
    pub flux: Option<f64>,
    /// Override the simulated duration, s.
    #[arg(long, value_name = "S")]
    pub duration: Option<f64>,
    /// Write the curves to this CSV file (default: print nothing but the summary).
    #[arg(long, value_name = "FILE.csv")]
    pub out: Option<PathBuf>,
    /// Print the summary as one JSON object instead of a table.
    #[arg(long)]
    pub json: bool,
}
