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
    ///
    /// A milligram-scale scenario (one with a [programme] table: a heating programme instead of
    /// an irradiance) runs the 0-D TGA/DSC/MCC model; see docs/milligram-scale.md.
    Simulate(SimulateArgs),
    /// Make measured-like test data from a scenario: the simulated mass and HRR as a cone
    /// calorimeter would log them, with load-cell noise, HRR noise and a start-time offset.
    ///
    /// For demo cases and twin experiments (fit data whose true parameters are known). The
    /// same seed gives the same file on every machine.
    ///
    /// Example: emberfit synthesize demo-cases/ridgeline-panel/scenario.toml --flux 25 --seed 3 --out test-25.csv
    Synthesize(SynthesizeArgs),
    /// Model-free kinetics from TGA (or MCC) runs at several heating rates
    ///
    /// Reads two or more files (a row of column names, a row of units such as [s], [K] or
    /// [°C], and [mg], [g/g] or [%] for TGA, [W/g] for MCC), turns each into conversion α
    /// against temperature, and estimates the activation energy E at each conversion:
    ///
    ///   friedman  ln(dα/dt) against 1/T at fixed α; slope −E/R (no approximation)
    ///   kas       Kissinger–Akahira–Sunose: ln(β/T²) against 1/T; slope −E/R
    ///   ofw       Ozawa–Flynn–Wall: ln β against 1/T; slope −1.052·E/R (Doyle)
    ///
    /// with R² and the standard error of E at each α, and Kissinger's E and A from the
    /// rate-peak temperatures. When E varies by more than --max-spread of its mean, one
    /// single-step reaction cannot describe the data, and a warning says so (ICTAC Kinetics
    /// Committee, Vyazovkin et al. 2011). β is each run's measured heating rate while it
    /// reacts, not the nominal one.
    ///
    /// Examples:
    ///   emberfit isoconversional tga/run_5k.csv tga/run_10k.csv tga/run_20k.csv
    ///   emberfit isoconversional tga/*.csv --from 0.05 --to 0.95 --step 0.05 --fit
    ///   emberfit isoconversional tga/*.csv --json > kinetics.json
    #[command(verbatim_doc_comment)]
    Isoconversional(IsoconversionalArgs),
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
pub struct IsoconversionalArgs {
    /// TGA or MCC files, one run each, at two or more heating rates.
    #[arg(required = true, num_args = 2.., value_name = "FILE.csv")]
    pub files: Vec<PathBuf>,
    /// First conversion analysed, 0..1.
    #[arg(long, default_value_t = 0.1, value_name = "ALPHA")]
    pub from: f64,
    /// Last conversion analysed, 0..1.
    #[arg(long, default_value_t = 0.9, value_name = "ALPHA")]
    pub to: f64,
    /// Step between analysed conversions.
    #[arg(long, default_value_t = 0.05, value_name = "ALPHA")]
    pub step: f64,
    /// Warn when (max E − min E)/mean E exceeds this, percent (ICTAC: 10–20 % is significant).
    #[arg(long, default_value_t = 20.0, value_name = "PERCENT")]
    pub max_spread: f64,
    /// Also fit one n-th order reaction (A, E, n) to all runs, starting from Kissinger's E and A.
    #[arg(long)]
    pub fit: bool,
    /// Print the results as one JSON object instead of tables.
    #[arg(long)]
    pub json: bool,
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
