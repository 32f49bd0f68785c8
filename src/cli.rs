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
    /// Make measured-like test data from a scenario: the simulated mass and HRR as a cone
    /// calorimeter would log them, with load-cell noise, HRR noise and a start-time offset.
    ///
    /// For demo cases and twin experiments (fit data whose true parameters are known). The
    /// same seed gives the same file on every machine.
    ///
    /// Example: emberfit synthesize demo-cases/ridgeline-panel/scenario.toml --flux 25 --seed 3 --out test-25.csv
    Synthesize(SynthesizeArgs),
}

#[derive(Debug, clap::Args)]
pub struct SynthesizeArgs {
    /// Scenario file (TOML) whose material plays the real specimen.
    pub scenario: PathBuf,
    /// Irradiance, kW/m² (default: the scenario's).
    #[arg(long, value_name = "KW_M2")]
    pub flux: Option<f64>,
    /// Simulated duration, s (default: the scenario's).
    #[arg(long, value_name = "S")]
    pub duration: Option<f64>,
    /// Seed of the noise generator.
    #[arg(long, default_value_t = 1)]
    pub seed: u64,
    /// Exposed specimen area, m².
    #[arg(long, value_name = "M2", default_value_t = 0.01)]
    pub area_m2: f64,
    /// Load-cell noise (standard deviation), g.
    #[arg(long, value_name = "G", default_value_t = 0.05)]
    pub mass_noise_g: f64,
    /// HRR noise (standard deviation), kW/m², on top of 3 % of the signal.
    #[arg(long, value_name = "KW_M2", default_value_t = 2.0)]
    pub hrr_noise_kw_m2: f64,
    /// Largest start-time offset of the logged clock, s (uniform in ±this).
    #[arg(long, value_name = "S", default_value_t = 3.0)]
    pub time_jitter_s: f64,
    /// Output CSV (`time_s,mass_g,hrr_kw_m2`).
    #[arg(long, value_name = "FILE.csv")]
    pub out: PathBuf,
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
