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
    /// Make measured-like test data from a scenario: the simulated mass, HRR and surface and
    /// back-face temperatures as a cone calorimeter would log them, with load-cell, HRR and
    /// thermocouple noise and a start-time offset.
    ///
    /// For demo cases and twin experiments (fit data whose true parameters are known). The
    /// same seed gives the same file on every machine.
    ///
    /// Example: emberfit synthesize demo-cases/ridgeline-panel/scenario.toml --flux 25 --seed 3 --out test-25.csv
    Synthesize(SynthesizeArgs),
    /// Fit a material model to several tests at once, with the uncertainty of each parameter
    ///
    /// Reads a fit job (docs/fit-jobs.md): the starting material and scenario, the free
    /// parameters with bounds, the cases (test data and the signals to match). Runs a parallel
    /// differential-evolution search, then a Nelder–Mead refinement, writing everything to
    /// runs/<name>/ as it goes: progress.jsonl, checkpoint.json, best.toml (the calibrated
    /// model, ready for `simulate`), per-case CSVs and summary.json. Ctrl-C (or SIGTERM)
    /// finishes the current generation, writes the checkpoint and all outputs, then exits;
    /// a second Ctrl-C exits at once. `--resume` continues a stopped or killed run exactly.
    ///
    /// On a terminal the fit opens the terminal interface (progress, parameters, residuals,
    /// summary; ? lists the keys): p pauses, s stops, q stops and exits once the outputs are
    /// written. Closing the terminal or losing SSH does not stop the fit. `--detach` runs it
    /// in the background instead and prints how to watch it (`emberfit watch runs/NAME`).
    ///
    /// Examples:
    ///   emberfit fit demo-cases/ridgeline-panel/fit.toml
    ///   emberfit fit demo-cases/ridgeline-panel/fit.toml --detach --name overnight
    ///   emberfit fit demo-cases/ridgeline-panel/fit.toml --name overnight --time 8h --threads 2
    ///   emberfit fit demo-cases/ridgeline-panel/fit.toml --name overnight --resume
    #[command(verbatim_doc_comment)]
    Fit(FitArgs),
    /// Watch a running or finished fit in the terminal interface, read-only
    ///
    /// Reads only the run directory (progress.jsonl, summary.json, cases/*.csv), so it works
    /// from any terminal or SSH session, any number of viewers at once, while the fit runs
    /// (started with --detach or in another terminal) or long after it ended. It cannot pause
    /// the fit: do that from the fit's terminal. It shows the stop command with the fit's pid
    /// (from run.lock in the run directory), and s then y sends it, if the fit is yours.
    ///
    /// Keys: 1-4 or Tab switch views, ← → choose a case, ↑ ↓ a signal, ? help, q quit.
    ///
    /// Examples:
    ///   emberfit watch runs/overnight
    #[command(verbatim_doc_comment)]
    Watch(WatchArgs),
    /// Reduce one cone calorimeter test: read its data, compute HRR and MLR, print the report
    ///
    /// Reads a test description (TEST.toml, keys in docs/test-files.md) and the CSV it names,
    /// or a bare CSV with flags. HRR comes from the lab's HRR column or, with [gas_analysis],
    /// from the O2 (and CO2, CO) analysers by oxygen consumption (ISO 5660-1; Janssens 1991).
    /// MLR is the five-point derivative of the mass (ISO 5660-1). Prints time to ignition, peak
    /// HRR, total heat release, average HRR at 60/180/300 s, mass lost, average MLR between
    /// 10 % and 90 % of the mass loss, effective heat of combustion (and smoke quantities with a
    /// photometer column), and every repair made to the data ("note: ..." lines on stderr).
    ///
    /// Examples (the demo files, from the repository's root):
    ///   emberfit reduce demo-cases/ridgeline-panel/harbour-lab-50kw.toml
    ///   emberfit reduce demo-cases/ridgeline-panel/harbour-lab-50kw.toml --json --out reduced-50kw.csv
    ///   emberfit reduce demo-cases/ridgeline-panel/harbour-lab-50kw.csv --area-m2 0.01 --flux-kw-m2 50
    ///       --time-column time_s --mass-column mass_g --hrr-column hrr_kw_m2
    ///   emberfit reduce demo-cases/ridgeline-panel/harbour-lab-25kw.csv --area-m2 0.01 --flux-kw-m2 25
    ///       --time-column time_s --mass-column mass_g --hrr-column hrr_kw_m2 --ignition-time-s 185 --smooth 11
    #[command(verbatim_doc_comment)]
    Reduce(Box<ReduceArgs>),
    /// Analyse ignition times across irradiances: critical heat flux, TRP and apparent kρc
    ///
    /// Fits t_ig^(-1/2) (thermally thick), t_ig^(-0.547) (Janssens, thick with heat losses) and
    /// t_ig^(-1) (thermally thin) against the irradiance by least squares and reports each
    /// line's flux-axis intercept (the critical heat flux estimate) and R². The thick slope
    /// gives the thermal response parameter TRP; with an ignition temperature (given, or
    /// estimated from Janssens' critical heat flux by a surface heat balance) it gives the
    /// apparent kρc. Warns when the data cannot tell thick from thin (fewer than three
    /// irradiances, or R² values too close).
    ///
    /// Each input is a TEST.toml (its ignition time is the given one or the one detected from
    /// HRR), or one ignition list TOML naming tests and/or points (see docs/test-files.md).
    ///
    /// Examples (the demo files, from the repository's root):
    ///   emberfit ignition demo-cases/ridgeline-panel/harbour-lab-*.toml
    ///   emberfit ignition demo-cases/ridgeline-panel/harbour-lab-*.toml --ignition-temperature-c 378 --json
    #[command(verbatim_doc_comment)]
    Ignition(IgnitionArgs),
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
    /// Examples (the demo files, from the repository's root):
    ///   emberfit isoconversional demo-cases/ridgeline-panel/tga-5k.csv demo-cases/ridgeline-panel/tga-10k.csv demo-cases/ridgeline-panel/tga-20k.csv
    ///   emberfit isoconversional demo-cases/ridgeline-panel/tga-*.csv --from 0.05 --to 0.95 --step 0.05 --fit
    ///   emberfit isoconversional demo-cases/ridgeline-panel/tga-*.csv --json > kinetics.json
    ///   emberfit isoconversional demo-cases/ridgeline-panel/tga-*.csv --out e-against-alpha.csv
    #[command(verbatim_doc_comment)]
    Isoconversional(IsoconversionalArgs),
    /// Predict a scenario with a calibrated model, with a band from the fit's uncertainty
    ///
    /// Runs the calibrated model (a fit's best.toml, or any material model) in the scenario,
    /// optionally at another irradiance, thickness or duration. With --band, draws parameter
    /// sets from the fit's covariance (a normal in fit space, log10 for log-scale parameters,
    /// truncated to the fit's bounds; see docs/predictions.md), simulates them in parallel and
    /// writes the median and band limits of HRR, MLR, mass and temperatures, and the
    /// distributions of ignition time, peak HRR, time to peak and total heat release. The
    /// covariance is read from the run's summary.json beside best.toml; without it the
    /// calibration table's standard errors are used with correlations taken as zero (wider).
    ///
    /// Writes FILE.csv (curves) and FILE-quantities.csv (one row per draw) with --out.
    ///
    /// Examples (runs/fit/ is what `emberfit fit demo-cases/ridgeline-panel/fit.toml` makes):
    ///   emberfit predict runs/fit/best.toml demo-cases/ridgeline-panel/scenario.toml --flux 35
    ///   emberfit predict runs/fit/best.toml demo-cases/ridgeline-panel/scenario.toml --flux 35 --band 95 --out p35.csv
    ///   emberfit predict runs/fit/best.toml demo-cases/ridgeline-panel/scenario.toml --thickness-mm 12 --duration 1500 --band 90 --samples 400
    #[command(verbatim_doc_comment)]
    Predict(PredictArgs),
    /// Score a calibrated model against held-out tests
    ///
    /// Reduces each test (TEST.toml) as the fit reduces its data, simulates it at the test's
    /// irradiance (and thickness, when the test gives one) for the test's duration, and prints
    /// the errors in ignition time, peak HRR, time to peak HRR and total heat release (percent
    /// of the measured value; times also in s), and the normalised RMSE of the HRR and MLR
    /// curves (RMS difference over the measured peak). The scenario is the fit job's, found
    /// through the calibration table of a best.toml, or the one given with --scenario.
    ///
    /// Examples (runs/fit/ is what `emberfit fit demo-cases/ridgeline-panel/fit.toml` makes):
    ///   emberfit compare runs/fit/best.toml demo-cases/ridgeline-panel/harbour-lab-75kw.toml
    ///   emberfit compare models/thermoplastic.toml demo-cases/ridgeline-panel/harbour-lab-*.toml --scenario demo-cases/ridgeline-panel/scenario.toml --json
    #[command(verbatim_doc_comment)]
    Compare(CompareArgs),
    /// Write plots and an HTML report of a fit run into its directory
    ///
    /// Plots (PNG and SVG, in runs/NAME/plots/): measured against model for every case and
    /// signal with the σ band and residuals, convergence, the correlation heat map, and HRR
    /// prediction bands at the fitted conditions (and for each --test held out). report.html
    /// is self-contained (figures inline as SVG): job, data files with hashes, parameters with
    /// intervals and warnings, fit quality per case, held-out scores, and the caution.
    ///
    /// Examples (runs/fit/ is what `emberfit fit demo-cases/ridgeline-panel/fit.toml` makes):
    ///   emberfit report runs/fit
    ///   emberfit report runs/fit --test demo-cases/ridgeline-panel/harbour-lab-75kw.toml --samples 200
    #[command(verbatim_doc_comment)]
    Report(ReportArgs),
}

#[derive(Debug, clap::Args)]
pub struct PredictArgs {
    /// Calibrated material model (a fit's best.toml), or any material model without --band.
    pub calibrated: PathBuf,
    /// Scenario file (TOML) whose specimen layers take the calibrated material.
    pub scenario: PathBuf,
    /// Constant irradiance, kW/m² (default: the scenario's).
    #[arg(allow_negative_numbers = true, long, value_name = "KW_M2")]
    pub flux: Option<f64>,
    /// Thickness of the exposed specimen layer, mm (default: the scenario's).
    #[arg(allow_negative_numbers = true, long, value_name = "MM")]
    pub thickness_mm: Option<f64>,
    /// Simulated duration, s (default: the scenario's).
    #[arg(allow_negative_numbers = true, long, value_name = "S")]
    pub duration: Option<f64>,
    /// Central probability of the uncertainty band, percent (e.g. 95); none: best fit only.
    #[arg(allow_negative_numbers = true, long, value_name = "PERCENT")]
    pub band: Option<f64>,
    /// Parameter sets drawn for the band.
    #[arg(long, value_name = "N", default_value_t = 200)]
    pub samples: usize,
    /// Seed of the sampler (the same seed gives the same band).
    #[arg(long, default_value_t = 1)]
    pub seed: u64,
    /// Worker threads (default: all cores).
    #[arg(long, value_name = "N")]
    pub threads: Option<usize>,
    /// Write the curves to this CSV (and the per-draw quantities beside it).
    #[arg(long, value_name = "FILE.csv")]
    pub out: Option<PathBuf>,
    /// Print the quantities as one JSON object instead of a table.
    #[arg(long)]
    pub json: bool,
}

#[derive(Debug, clap::Args)]
pub struct CompareArgs {
    /// Calibrated material model (a fit's best.toml), or any material model with --scenario.
    pub calibrated: PathBuf,
    /// Held-out test descriptions (TEST.toml).
    #[arg(required = true)]
    pub tests: Vec<PathBuf>,
    /// Scenario the tests were run in (default: the fit job's, from the calibration table).
    #[arg(long, value_name = "SCENARIO.toml")]
    pub scenario: Option<PathBuf>,
    /// Print the scores as JSON instead of a table.
    #[arg(long)]
    pub json: bool,
}

#[derive(Debug, clap::Args)]
pub struct ReportArgs {
    /// Run directory (runs/NAME) of a finished fit.
    pub run: PathBuf,
    /// Held-out test descriptions to predict, plot and score in the report.
    #[arg(long = "test", value_name = "TEST.toml")]
    pub tests: Vec<PathBuf>,
    /// Parameter sets drawn for each prediction band (0: no bands).
    #[arg(long, value_name = "N", default_value_t = 100)]
    pub samples: usize,
    /// Central probability of the bands, percent.
    #[arg(
        allow_negative_numbers = true,
        long,
        value_name = "PERCENT",
        default_value_t = 95.0
    )]
    pub band: f64,
    /// Worker threads (default: all cores).
    #[arg(long, value_name = "N")]
    pub threads: Option<usize>,
}

#[derive(Debug, clap::Args)]
pub struct SynthesizeArgs {
    /// Scenario file (TOML) whose material plays the real specimen.
    pub scenario: PathBuf,
    /// Irradiance, kW/m² (default: the scenario's).
    #[arg(allow_negative_numbers = true, long, value_name = "KW_M2")]
    pub flux: Option<f64>,
    /// Simulated duration, s (default: the scenario's).
    #[arg(allow_negative_numbers = true, long, value_name = "S")]
    pub duration: Option<f64>,
    /// Seed of the noise generator.
    #[arg(long, default_value_t = 1)]
    pub seed: u64,
    /// Exposed specimen area, m².
    #[arg(
        allow_negative_numbers = true,
        long,
        value_name = "M2",
        default_value_t = 0.01
    )]
    pub area_m2: f64,
    /// Load-cell noise (standard deviation), g.
    #[arg(
        allow_negative_numbers = true,
        long,
        value_name = "G",
        default_value_t = 0.05
    )]
    pub mass_noise_g: f64,
    /// HRR noise (standard deviation), kW/m², on top of 3 % of the signal.
    #[arg(
        allow_negative_numbers = true,
        long,
        value_name = "KW_M2",
        default_value_t = 2.0
    )]
    pub hrr_noise_kw_m2: f64,
    /// Largest start-time offset of the logged clock, s (uniform in ±this).
    #[arg(
        allow_negative_numbers = true,
        long,
        value_name = "S",
        default_value_t = 3.0
    )]
    pub time_jitter_s: f64,
    /// Output CSV (`time_s,mass_g,hrr_kw_m2,surface_temperature_k,back_temperature_k`).
    #[arg(long, value_name = "FILE.csv")]
    pub out: PathBuf,
}

#[derive(Debug, clap::Args)]
pub struct IsoconversionalArgs {
    /// TGA or MCC files, one run each, at two or more heating rates.
    #[arg(required = true, num_args = 2.., value_name = "FILE.csv")]
    pub files: Vec<PathBuf>,
    /// First conversion analysed, 0..1.
    #[arg(
        allow_negative_numbers = true,
        long,
        default_value_t = 0.1,
        value_name = "ALPHA"
    )]
    pub from: f64,
    /// Last conversion analysed, 0..1.
    #[arg(
        allow_negative_numbers = true,
        long,
        default_value_t = 0.9,
        value_name = "ALPHA"
    )]
    pub to: f64,
    /// Step between analysed conversions.
    #[arg(
        allow_negative_numbers = true,
        long,
        default_value_t = 0.05,
        value_name = "ALPHA"
    )]
    pub step: f64,
    /// Warn when (max E − min E)/mean E exceeds this, percent (ICTAC: 10–20 % is significant).
    #[arg(
        allow_negative_numbers = true,
        long,
        default_value_t = 20.0,
        value_name = "PERCENT"
    )]
    pub max_spread: f64,
    /// Also fit one n-th order reaction (A, E, n) to all runs, starting from Kissinger's E and A.
    #[arg(long)]
    pub fit: bool,
    /// Write E against conversion for the three methods to this CSV file (kJ/mol, standard
    /// error, R²; one row per conversion).
    #[arg(long, value_name = "FILE.csv")]
    pub out: Option<PathBuf>,
    /// Print the results as one JSON object instead of tables.
    #[arg(long)]
    pub json: bool,
}

#[derive(Debug, clap::Args)]
pub struct SimulateArgs {
    /// Scenario file (TOML): layers, exposure, ignition, back face; see docs/file-formats.md.
    pub scenario: PathBuf,
    /// Override the scenario's irradiance with a constant value, kW/m².
    #[arg(allow_negative_numbers = true, long, value_name = "KW_M2")]
    pub flux: Option<f64>,
    /// Override the simulated duration, s.
    #[arg(allow_negative_numbers = true, long, value_name = "S")]
    pub duration: Option<f64>,
    /// Use this material model (e.g. a fit's best.toml) for the specimen layers.
    #[arg(long, value_name = "MATERIAL.toml")]
    pub material: Option<PathBuf>,
    /// Write the curves to this CSV file (default: print nothing but the summary).
    #[arg(long, value_name = "FILE.csv")]
    pub out: Option<PathBuf>,
    /// Print the summary as one JSON object instead of a table.
    #[arg(long)]
    pub json: bool,
}

#[derive(Debug, clap::Args)]
pub struct ReduceArgs {
    /// Test description (TEST.toml), or a CSV file to reduce with the flags below.
    pub input: PathBuf,
    /// Print the report as one JSON object instead of a table (notices included).
    #[arg(long)]
    pub json: bool,
    /// Write the reduced curves (time_s, hrr_kw_m2, mlr_g_m2s, mass_g, ...) to this CSV file.
    #[arg(long, value_name = "FILE.csv")]
    pub out: Option<PathBuf>,
    /// CSV input only: exposed specimen area, m² (0.01 for a 100 mm square, 0.0088 with the
    /// ISO 5660-1 retainer frame).
    #[arg(allow_negative_numbers = true, long, value_name = "M2")]
    pub area_m2: Option<f64>,
    /// CSV input only: irradiance set on the heater, kW/m².
    #[arg(allow_negative_numbers = true, long, value_name = "KW_M2")]
    pub flux_kw_m2: Option<f64>,
    /// CSV input only: name of the time column (default `time`, case ignored).
    #[arg(long, value_name = "NAME")]
    pub time_column: Option<String>,
    /// CSV input only: name of the mass column (default `mass`, skipped if the file has none).
    #[arg(long, value_name = "NAME")]
    pub mass_column: Option<String>,
    /// CSV input only: name of the HRR column (default `hrr`, skipped if the file has none).
    #[arg(long, value_name = "NAME")]
    pub hrr_column: Option<String>,
    /// CSV input only: unit of the time column when the file does not say (s, min, ms, h).
    #[arg(long, value_name = "UNIT")]
    pub time_unit: Option<String>,
    /// CSV input only: unit of the mass column when the file does not say (g, kg, mg).
    #[arg(long, value_name = "UNIT")]
    pub mass_unit: Option<String>,
    /// CSV input only: unit of the HRR column when the file does not say (kW/m², W/m², kW; m2 for m² works too).
    #[arg(long, value_name = "UNIT")]
    pub hrr_unit: Option<String>,
    /// CSV input only: observed time to sustained ignition, s (default: detected from HRR).
    #[arg(allow_negative_numbers = true, long, value_name = "S")]
    pub ignition_time_s: Option<f64>,
    /// CSV input only: added to the file's times so that 0 is the start of exposure, s.
    #[arg(long, value_name = "S", allow_hyphen_values = true)]
    pub time_offset_s: Option<f64>,
    /// CSV input only: the load cell weighs holder and backing too, so negative readings are
    /// not clipped.
    #[arg(long)]
    pub not_tared: bool,
    /// CSV input only: heat of combustion for the mass-loss estimate of HRR, MJ/kg.
    #[arg(allow_negative_numbers = true, long, value_name = "MJ_KG")]
    pub heat_of_combustion_mj_kg: Option<f64>,
    /// CSV input only: combustion efficiency for that estimate, 0–1 (default 1).
    #[arg(allow_negative_numbers = true, long, value_name = "FRACTION")]
    pub combustion_efficiency: Option<f64>,
    /// CSV input only: smooth the mass (Savitzky–Golay, quadratic) over this many points
    /// (odd) before the derivative.
    #[arg(long, value_name = "POINTS")]
    pub smooth: Option<usize>,
    /// Treat plausibility warnings on the test data (a mass far above `initial_mass_g`, an
    /// HRR negative on every row, a single absurd cell) as errors.
    #[arg(long)]
    pub strict: bool,
}

#[derive(Debug, clap::Args)]
pub struct IgnitionArgs {
    /// TEST.toml files (two or more irradiances), or one ignition list TOML.
    #[arg(required = true)]
    pub inputs: Vec<PathBuf>,
    /// Surface ignition temperature, °C, for kρc (default: from the surface heat balance at
    /// Janssens' critical heat flux).
    #[arg(long, value_name = "DEGC", allow_hyphen_values = true)]
    pub ignition_temperature_c: Option<f64>,
    /// Initial (ambient) temperature, °C (default 20).
    #[arg(long, value_name = "DEGC", allow_hyphen_values = true)]
    pub ambient_temperature_c: Option<f64>,
    /// Print the analysis as one JSON object instead of a table.
    #[arg(long)]
    pub json: bool,
    /// Treat plausibility warnings on the test data (a mass far above `initial_mass_g`, an
    /// HRR negative on every row, a single absurd cell) as errors.
    #[arg(long)]
    pub strict: bool,
}

#[derive(Debug, clap::Args)]
pub struct FitArgs {
    /// Fit job file (TOML); see docs/fit-jobs.md.
    pub job: PathBuf,
    /// Name of the run directory under --runs-dir (default: the job file's name, with -2, -3,
    /// ... added when that directory exists already).
    #[arg(long)]
    pub name: Option<String>,
    /// Where run directories go.
    #[arg(long, value_name = "DIR", default_value = "runs")]
    pub runs_dir: PathBuf,
    /// Continue the run from its last checkpoint (same job, same data, same seed).
    #[arg(long)]
    pub resume: bool,
    /// Worker threads (default: all cores).
    #[arg(long, value_name = "N")]
    pub threads: Option<usize>,
    /// Wall-clock budget, e.g. 90s, 20min, 8h (overrides the job's `settings.time`).
    #[arg(long, value_name = "DURATION")]
    pub time: Option<String>,
    /// Evaluation budget (overrides the job's `settings.max_evaluations`).
    #[arg(long, visible_alias = "max-evals", value_name = "N")]
    pub max_evaluations: Option<u64>,
    /// Random seed (overrides the job's `settings.seed`; ignored with --resume).
    #[arg(long)]
    pub seed: Option<u64>,
    /// Print progress lines instead of opening the terminal interface.
    #[arg(long)]
    pub headless: bool,
    /// Run the fit in the background, in its own session, with its output in the run
    /// directory's fit.log; print the run directory and how to watch and stop it.
    #[arg(long, conflicts_with = "headless")]
    pub detach: bool,
    /// Treat plausibility warnings on the test data (a mass far above `initial_mass_g`, an
    /// HRR negative on every row, a single absurd cell) as errors.
    #[arg(long)]
    pub strict: bool,
}

#[derive(Debug, clap::Args)]
pub struct WatchArgs {
    /// The run directory, e.g. runs/overnight.
    pub run: PathBuf,
}
