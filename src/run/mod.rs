//! The run directory `runs/<name>/`, the seam between the fit engine and any viewer:
//!
//! ```text
//! job.toml         copy of the job as started        run.toml       version, seed, data hashes
//! progress.jsonl   one event per line (append-only)   checkpoint.json  the engine state
//! best.toml        the calibrated material model      parameters.csv   fitted values, intervals
//! cases/*.csv      measured vs model and residuals    summary.json     the final figures
//! posterior.json   the posterior sample (if asked)    posterior-checkpoint.json  the sampler's state
//! ```
//!
//! **Invariant:** `run` is the only module that knows these formats, one submodule per file:
//! `record` (run.toml), `checkpoint` (checkpoint.json, the serde of the engine's state),
//! `best` (best.toml), `progress` (progress.jsonl, strict and lenient readers), `summary`
//! (summary.json, parameters.csv), `curves` (cases/), `lock` (run.lock), `posterior`
//! (posterior.json, posterior-checkpoint.json); this file runs a fit
//! and writes job.toml. Viewers (tui, report, predict) read a run directory only through them.
//! Every file but the append-only log is replaced atomically, so a run killed at any moment
//! resumes from its last checkpoint.

pub mod best;
pub mod checkpoint;
pub mod curves;
pub mod fingerprint;
pub mod lock;
pub mod posterior;
pub mod progress;
pub mod record;
pub mod summary;

pub use posterior::read_posterior;
pub use record::RunRecord;
pub use summary::{read_summary, PosteriorInfo, RunSummary, SummaryParameter};

use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::Arc;

use sha2::{Digest, Sha256};

use crate::case::job::{data_files, load_job, FitJob};
use crate::case::model::CaseModel;
use crate::export::material::Provenance;
use crate::export::write_atomically;
use crate::fit::engine::{
    initial_state, optimise_on, EngineSettings, EngineState, IterationReport, Observer, Outcome,
    Phase,
};
use crate::fit::evaluator::{Evaluator, Local};
use crate::fit::identifiability::analyse_on;
use crate::fit::objective::Objective;
use crate::fit::posterior::SamplerState;
use best::write_best_model;
use progress::{ParameterInfo, PartInfo, ProgressEvent, ProgressWriter, FORMAT_VERSION};

/// Errors of a fit run.
#[derive(Debug, thiserror::Error)]
pub enum RunError {
    #[error(transparent)]
    Job(#[from] crate::case::CaseError),
    #[error("{action} {}", path.display())]
    Io {
        action: &'static str,
        path: PathBuf,
        #[source]
        source: std::io::Error,
    },
    #[error("run directory {} already exists; give --resume to continue it or --name to start another", .0.display())]
    Exists(PathBuf),
    #[error("run directory {} has no checkpoint to resume from", .0.display())]
    NoCheckpoint(PathBuf),
    #[error("run directory {} has no run.toml (the record of how the run started), so it cannot be resumed; start a new run", .0.display())]
    NoRecord(PathBuf),
    #[error("{0}")]
    Name(String),
    #[error(transparent)]
    Lock(#[from] lock::LockError),
    /// `--resume` was given another job than the run started with (both named).
    #[error("{0}")]
    OtherJob(String),
    #[error("{} changed since the run started (its SHA-256 differs); start a new run instead of resuming", .0)]
    Changed(String),
    #[error("cannot read {}: {problem}", path.display())]
    Corrupt { path: PathBuf, problem: String },
    #[error("cannot write the calibrated model: {0}")]
    Export(#[from] crate::export::material::ExportError),
    /// The saved posterior sample was drawn from another start than the one now due.
    #[error("{} holds a posterior sample drawn from another start ({differences}), so it cannot be continued; start a new run (or delete that file to draw the sample again)", path.display())]
    OtherSample { path: PathBuf, differences: String },
}

fn io(action: &'static str, path: &Path) -> impl FnOnce(std::io::Error) -> RunError {
    let path = path.to_path_buf();
    move |source| RunError::Io {
        action,
        path,
        source,
    }
}

/// The files of a run directory.
#[derive(Debug, Clone)]
pub struct RunDirectory {
    pub root: PathBuf,
}

impl RunDirectory {
    pub fn new(root: &Path) -> Self {
        RunDirectory {
            root: root.to_path_buf(),
        }
    }
    pub fn job(&self) -> PathBuf {
        self.root.join("job.toml")
    }
    pub fn record(&self) -> PathBuf {
        self.root.join("run.toml")
    }
    pub fn progress(&self) -> PathBuf {
        self.root.join("progress.jsonl")
    }
    pub fn checkpoint(&self) -> PathBuf {
        self.root.join("checkpoint.json")
    }
    pub fn best(&self) -> PathBuf {
        self.root.join("best.toml")
    }
    pub fn parameters_csv(&self) -> PathBuf {
        self.root.join("parameters.csv")
    }
    pub fn summary(&self) -> PathBuf {
        self.root.join("summary.json")
    }

    /// `posterior.json`: the posterior sample (`fit::posterior::Posterior`).
    pub fn posterior(&self) -> PathBuf {
        self.root.join("posterior.json")
    }
    /// `posterior-checkpoint.json`: the sampler's state while it samples (`run::posterior`).
    pub fn posterior_checkpoint(&self) -> PathBuf {
        self.root.join("posterior-checkpoint.json")
    }
    pub fn cases(&self) -> PathBuf {
        self.root.join("cases")
    }
    /// The file a detached fit writes its terminal output to.
    pub fn log(&self) -> PathBuf {
        self.root.join("fit.log")
    }

    /// True when the directory holds nothing but the log a detached fit opened before
    /// starting (`fit --detach` creates it so the background process has somewhere to write
    /// from its first line): a new run may still start there.
    pub fn holds_only_the_log(&self) -> bool {
        let Ok(entries) = std::fs::read_dir(&self.root) else {
            return false;
        };
        let log = self.log();
        entries
            .filter_map(Result::ok)
            .all(|entry| entry.path() == log)
    }
}

/// How the run is to be started.
#[derive(Debug, Clone)]
pub struct RunOptions {
    pub runs_root: PathBuf,
    pub name: Option<String>,
    pub resume: bool,
    pub threads: usize,
    pub time_budget_s: Option<f64>,
    pub max_evaluations: Option<u64>,
    pub seed: Option<u64>,
}

/// SHA-256 of a file, as lower-case hex.
pub fn sha256_hex(path: &Path) -> Result<String, RunError> {
    let bytes = crate::input::read_bytes(path, crate::input::InputKind::RunFile)
        .map_err(io("cannot read", path))?;
    Ok(Sha256::digest(&bytes)
        .iter()
        .map(|b| format!("{b:02x}"))
        .collect())
}

/// A file-system-friendly form of a name: ASCII letters and digits, the superscripts ² and ³
/// spelt as 2 and 3 (`25 kW/m²` → `25-kw-m2`), everything else a dash.
pub fn slug(name: &str) -> String {
    let mut out: String = name
        .chars()
        .map(|c| match c {
            '²' => '2',
            '³' => '3',
            c if c.is_ascii_alphanumeric() => c.to_ascii_lowercase(),
            _ => '-',
        })
        .collect();
    while out.contains("--") {
        out = out.replace("--", "-");
    }
    out.trim_matches('-').to_string()
}

/// Writes progress and checkpoints as the engine runs.
struct Recorder<'a> {
    dir: &'a RunDirectory,
    writer: ProgressWriter,
    job: &'a FitJob,
    start_text: &'a str,
    provenance: Provenance,
    stop: Arc<AtomicBool>,
    pause: Arc<AtomicBool>,
    best_written: f64,
    io_error: Option<RunError>,
    last_best: Option<(Vec<f64>, f64)>,
    /// Whether the `stopping` event has been written.
    stop_announced: bool,
    /// The model the live curves are simulated with.
    model: &'a CaseModel<'a>,
    /// When the live curves were last written.
    curves_written: Option<std::time::Instant>,
}

impl Recorder<'_> {
    fn record(&mut self, result: Result<(), RunError>) {
        if let Err(err) = result {
            if self.io_error.is_none() {
                self.io_error = Some(err);
            }
        }
    }

    fn write_event(&mut self, event: &ProgressEvent) {
        let path = self.dir.progress();
        let result = self
            .writer
            .write(event)
            .map_err(io("cannot append to", &path));
        self.record(result);
    }

    fn write_best(&mut self, values: &[f64], cost: f64) {
        let result = write_best_model(
            self.dir,
            self.job,
            self.start_text,
            values,
            None,
            cost,
            &self.provenance,
        );
        self.record(result);
        self.best_written = cost;
    }
}

impl Recorder<'_> {
    /// The current best model against the data in `cases/`, at most every
    /// [`LIVE_CURVES_EVERY`] (one simulation of each case, beside a generation's many).
    fn write_live_curves(&mut self, values: &[f64], cost: f64, state: &EngineState) {
        if self
            .curves_written
            .is_some_and(|t| t.elapsed() < LIVE_CURVES_EVERY)
        {
            return;
        }
        self.curves_written = Some(std::time::Instant::now());
        let stamp = curves::CurveStamp {
            iteration: state.iteration,
            evaluations: state.evaluations,
            objective: cost,
            is_final: false,
        };
        let result = curves::write_case_curves(self.dir, self.job, self.model, values, stamp);
        self.record(result);
    }
}

/// The shortest time between two sets of live curves.
const LIVE_CURVES_EVERY: std::time::Duration = std::time::Duration::from_secs(2);

impl Observer for Recorder<'_> {
    fn iteration(&mut self, report: &IterationReport<'_>) {
        let event = ProgressEvent::Iteration {
            iter: report.iteration,
            phase: match report.phase {
                Phase::Global => "global",
                Phase::Local => "local",
                Phase::Done => "done",
            }
            .to_string(),
            evaluations: report.evaluations,
            elapsed_s: report.elapsed_s,
            best_cost: report.best.cost,
            parts: report
                .best
                .parts
                .iter()
                .map(|p| PartInfo {
                    case: p.case.clone(),
                    signal: p.signal.clone(),
                    cost: p.cost,
                })
                .collect(),
            best_params: report.best_values.clone(),
        };
        self.write_event(&event);
        self.last_best = Some((report.best_values.clone(), report.best.cost));
    }

    fn checkpoint(&mut self, state: &EngineState) {
        let result = checkpoint::write_checkpoint(self.dir, state);
        self.record(result);
        if let Some((values, cost)) = self.last_best.clone() {
            if cost < self.best_written {
                self.write_best(&values, cost);
                self.write_live_curves(&values, cost, state);
            }
        }
        self.write_event(&ProgressEvent::Checkpoint {
            iter: state.iteration,
            evaluations: state.evaluations,
            elapsed_s: state.elapsed_s,
        });
    }

    fn failure(&mut self, message: &str) {
        let event = ProgressEvent::Failure {
            evaluations: 0,
            message: message.to_string(),
        };
        self.write_event(&event);
    }

    fn should_stop(&mut self) -> bool {
        if self.pause.load(Ordering::SeqCst) {
            self.write_event(&ProgressEvent::Paused { elapsed_s: 0.0 });
            while self.pause.load(Ordering::SeqCst) && !self.stop.load(Ordering::SeqCst) {
                std::thread::sleep(std::time::Duration::from_millis(100));
            }
            self.write_event(&ProgressEvent::Resumed { elapsed_s: 0.0 });
        }
        let stop = self.stop.load(Ordering::SeqCst);
        if stop && !self.stop_announced {
            self.stop_announced = true;
            self.write_event(&ProgressEvent::Stopping);
        }
        stop
    }
}

/// What a finished (or stopped) run produced.
#[derive(Debug, Clone)]
pub struct FitReport {
    pub directory: PathBuf,
    pub summary: RunSummary,
    /// Short labels and meanings of the parameters, in the summary's order.
    pub labels: Vec<crate::case::label::ParameterLabel>,
}

/// Starts or resumes a fit and runs it to its end (or to a stop request).
pub fn run_fit(
    job_path: &Path,
    options: &RunOptions,
    stop: Arc<AtomicBool>,
    pause: Arc<AtomicBool>,
) -> Result<FitReport, RunError> {
    run_fit_on(job_path, options, stop, pause, &Local)
}

/// `run_fit` with the batches of evaluations (population, Jacobian) done by `evaluator`.
pub fn run_fit_on<E: Evaluator>(
    job_path: &Path,
    options: &RunOptions,
    stop: Arc<AtomicBool>,
    pause: Arc<AtomicBool>,
    evaluator: &E,
) -> Result<FitReport, RunError> {
    let name = options.name.clone().unwrap_or_else(|| {
        job_path
            .file_stem()
            .map(|s| slug(&s.to_string_lossy()))
            .unwrap_or_else(|| "fit".into())
    });
    fingerprint::check_run_name(&name).map_err(RunError::Name)?;
    let dir = RunDirectory::new(&options.runs_root.join(&name));
    // On resume: the same job, the overrides it started with (unless given again), and no
    // other process on the same directory.
    let mut _lock = None;
    let options = &if options.resume {
        let taken = take_lock(&dir)?;
        _lock = Some(taken);
        resumed_options(&dir, job_path, options)?
    } else {
        options.clone()
    };
    let job = load_job(job_path)?;
    let job_text = crate::input::read_text(job_path, crate::input::InputKind::Toml)
        .map_err(io("cannot read", job_path))?;
    let start_text = crate::input::read_text(&job.material_path, crate::input::InputKind::Toml)
        .map_err(io("cannot read", &job.material_path))?;
    let mut hashes = std::collections::BTreeMap::new();
    hashes.insert(job_path.display().to_string(), sha256_hex(job_path)?);
    for path in data_files(&job).values() {
        hashes.insert(path.display().to_string(), sha256_hex(path)?);
    }
    let recorded = if options.resume {
        Some(record::read_record(&dir)?.ok_or_else(|| RunError::NoRecord(dir.root.clone()))?)
    } else {
        None
    };
    // The job's settings with the command line's budget, and the one place the run's seed is
    // decided: a resumed run keeps its record's; a new one takes --seed, else the job's.
    let settings = EngineSettings {
        max_evaluations: options
            .max_evaluations
            .unwrap_or(job.settings.engine.max_evaluations),
        time_budget_s: options.time_budget_s.or(job.settings.engine.time_budget_s),
        seed: recorded
            .as_ref()
            .map(|record| record.seed)
            .or(options.seed)
            .unwrap_or(job.settings.engine.seed),
        ..job.settings.engine.clone()
    };
    let (state, resumed_from) = if let Some(record) = &recorded {
        for (path, hash) in &record.data_sha256 {
            if hashes.get(path).is_some_and(|now| now != hash) {
                return Err(RunError::Changed(path.clone()));
            }
        }
        let state = checkpoint::read_checkpoint(&dir)?;
        // The sample's log lines past its checkpoint are drawn again.
        let sample_step = posterior::read_sample_checkpoint(&dir)?.map_or(0, |c| c.state.step);
        progress::trim_to_iteration(&dir.progress(), state.iteration, sample_step)?;
        let iteration = state.iteration;
        (state, Some(iteration))
    } else {
        if dir.root.exists() && !dir.holds_only_the_log() {
            return Err(RunError::Exists(dir.root.clone()));
        }
        std::fs::create_dir_all(dir.cases()).map_err(io("cannot create", &dir.root))?;
        _lock = Some(take_lock(&dir)?);
        write_atomically(&dir.job(), job_text.as_bytes())
            .map_err(io("cannot write", &dir.job()))?;
        let record = RunRecord {
            name: name.clone(),
            title: job.title.clone(),
            job_path: job_path.display().to_string(),
            emberfit_version: env!("CARGO_PKG_VERSION").to_string(),
            started: humantime::format_rfc3339_seconds(std::time::SystemTime::now()).to_string(),
            seed: settings.seed,
            threads: options.threads,
            data_sha256: hashes.clone(),
            job_sha256: hashes.get(&job_path.display().to_string()).cloned(),
            overrides: fingerprint::Overrides {
                max_evaluations: options.max_evaluations,
                time_budget_s: options.time_budget_s,
                threads: Some(options.threads),
                seed: options.seed,
            },
        };
        record::write_record(&dir, &record)?;
        (initial_state(&job.parameters, &settings), None)
    };
    let provenance = Provenance {
        job: job_path.display().to_string(),
        emberfit_version: env!("CARGO_PKG_VERSION").to_string(),
        date: humantime::format_rfc3339_seconds(std::time::SystemTime::now()).to_string(),
        objective: f64::NAN,
        data_sha256: hashes.iter().map(|(k, v)| (k.clone(), v.clone())).collect(),
        not_converged: Some("the fit is still running".into()),
    };
    // The sample's seed is the run's (run.toml), as the optimiser's is.
    let mut job = job;
    if let Some(posterior) = job.settings.posterior.as_mut() {
        posterior.seed = settings.seed;
    }
    let job = job;
    let job_sha256 = hashes
        .get(&job_path.display().to_string())
        .cloned()
        .unwrap_or_default();
    let model = CaseModel::new(&job);
    let mut recorder = Recorder {
        dir: &dir,
        writer: ProgressWriter::append_to(&dir.progress())
            .map_err(io("cannot open", &dir.progress()))?,
        job: &job,
        start_text: &start_text,
        provenance: provenance.clone(),
        stop: stop.clone(),
        pause,
        best_written: f64::INFINITY,
        io_error: None,
        last_best: None,
        stop_announced: false,
        model: &model,
        curves_written: None,
    };
    let labels = crate::case::label::labels(&job.parameters, &job.targets, &job.material.material);
    recorder.write_event(&ProgressEvent::Started {
        format_version: FORMAT_VERSION,
        title: job.title.clone(),
        seed: settings.seed,
        threads: options.threads,
        parameters: job
            .parameters
            .iter()
            .zip(&labels)
            .map(|(p, label)| ParameterInfo {
                name: p.name.clone(),
                unit: p.unit.clone(),
                lower: p.lower,
                upper: p.upper,
                log_scale: p.scale == crate::fit::parameters::Scale::Log,
                label: label.short.clone(),
                meaning: label.meaning.clone(),
            })
            .collect(),
        cases: job
            .cases
            .iter()
            .map(|c| {
                (
                    c.name.clone(),
                    c.signals.iter().map(|s| s.label()).collect(),
                )
            })
            .collect(),
        max_evaluations: settings.max_evaluations,
        time_budget_s: settings.time_budget_s,
        resumed_from,
    });
    let objective = Objective::new(&model);
    let outcome = optimise_on(&objective, evaluator, &settings, state, &mut recorder);
    if let Some(err) = recorder.io_error.take() {
        recorder.write_event(&ProgressEvent::Failed {
            message: err.to_string(),
        });
        return Err(err);
    }
    // After every step of the posterior sample: its log line, then a pause or stop request
    // is honoured as between the optimiser's generations.
    let burn_in = job.settings.posterior.as_ref().map_or(0, |p| p.burn_in);
    let mut posterior_step = |state: &SamplerState, steps: usize| -> bool {
        let acceptance = state.acceptance();
        recorder.write_event(&ProgressEvent::Posterior {
            step: state.step,
            steps,
            burn_in,
            acceptance: if acceptance.is_finite() {
                acceptance
            } else {
                0.0
            },
            elapsed_s: state.elapsed_s,
        });
        !recorder.should_stop()
    };
    let summary = match finish(
        &dir,
        &job,
        &start_text,
        (&objective, evaluator),
        &model,
        (&outcome, &provenance),
        SampleControl {
            stop: &stop,
            step: &mut posterior_step,
            job_sha256: &job_sha256,
        },
    ) {
        Ok(summary) => summary,
        Err(err) => {
            // Viewers learn from the log that no outputs will come.
            recorder.write_event(&ProgressEvent::Failed {
                message: err.to_string(),
            });
            return Err(err);
        }
    };
    recorder.write_event(&ProgressEvent::Finished {
        reason: summary.reason.clone(),
        best_cost: summary.objective,
        evaluations: summary.evaluations,
        elapsed_s: summary.elapsed_s,
    });
    Ok(FitReport {
        directory: dir.root.clone(),
        summary,
        labels,
    })
}

/// Takes the run directory's lock; a note on a stale lock taken over goes to the log.
fn take_lock(dir: &RunDirectory) -> Result<lock::RunLock, RunError> {
    let (taken, note) = lock::acquire(&dir.root)?;
    if let Some(note) = note {
        // Written to the terminal only when no interface owns it: the lock note is for
        // whoever looks at the log later.
        use std::io::Write;
        let log = std::fs::OpenOptions::new()
            .create(true)
            .append(true)
            .open(dir.log());
        if let Ok(mut log) = log {
            let _ = writeln!(log, "note: {note}");
        }
    }
    Ok(taken)
}

/// The options of a resumed run: the job must be the one the run started with (its copy in
/// the run directory), and every override not given again is the one stored in run.toml.
fn resumed_options(
    dir: &RunDirectory,
    job_path: &Path,
    options: &RunOptions,
) -> Result<RunOptions, RunError> {
    let record = record::read_record(dir)?.ok_or_else(|| {
        if dir.root.is_dir() {
            RunError::NoRecord(dir.root.clone())
        } else {
            RunError::NoCheckpoint(dir.root.clone())
        }
    })?;
    let given_hash = sha256_hex(job_path)?;
    let started_hash = match &record.job_sha256 {
        Some(hash) => hash.clone(),
        None => sha256_hex(&dir.job())?,
    };
    if given_hash != started_hash {
        return Err(RunError::OtherJob(format!(
            "run {} was started with the job {} (its copy is {}), and --resume was given {}, \
             whose content differs (SHA-256 {:.12}… against {:.12}…); resume with the job it \
             started with, or start a new run",
            dir.root.display(),
            record.job_path,
            dir.job().display(),
            job_path.display(),
            given_hash,
            started_hash
        )));
    }
    let given = fingerprint::Overrides {
        max_evaluations: options.max_evaluations,
        time_budget_s: options.time_budget_s,
        threads: None,
        seed: None,
    };
    let merged = given.merged_over(&record.overrides);
    Ok(RunOptions {
        max_evaluations: merged.max_evaluations,
        time_budget_s: merged.time_budget_s,
        ..options.clone()
    })
}

/// The shortest time between two posterior checkpoints (the chain grows with every step, so
/// it is not rewritten after each); the last step and a stop are always saved.
const SAMPLE_CHECKPOINT_EVERY: std::time::Duration = std::time::Duration::from_secs(2);

/// What `finish` needs to run the posterior sample: the stop flag, the step report (log line,
/// pause and stop; false ends the sample) and the job's SHA-256 for the sample's fingerprint.
struct SampleControl<'a, 'b> {
    stop: &'a AtomicBool,
    step: &'a mut (dyn FnMut(&SamplerState, usize) -> bool + 'b),
    job_sha256: &'a str,
}

/// Draws the posterior sample, or continues the one saved in posterior-checkpoint.json when
/// it was drawn from the same start (else [`RunError::OtherSample`]); saves the sampler's
/// state every [`SAMPLE_CHECKPOINT_EVERY`], at the last step and at a stop.
#[allow(clippy::too_many_arguments)]
fn draw_posterior<E: Evaluator>(
    dir: &RunDirectory,
    job: &FitJob,
    (objective, evaluator): (&Objective<'_, CaseModel<'_>>, &E),
    best_values: &[f64],
    analysis: &crate::fit::identifiability::Identifiability,
    settings: &crate::fit::posterior::PosteriorSettings,
    control: SampleControl<'_, '_>,
) -> Result<Result<crate::fit::posterior::Posterior, String>, RunError> {
    let start = fingerprint::SampleStart {
        job_sha256: control.job_sha256.to_string(),
        names: job.parameters.iter().map(|p| p.name.clone()).collect(),
        best: best_values.to_vec(),
        temperature: analysis.likelihood_temperature,
        walkers: settings.walkers,
        steps: settings.steps,
        burn_in: settings.burn_in,
        seed: settings.seed,
    };
    let resume = match posterior::read_sample_checkpoint(dir)? {
        Some(saved) => {
            fingerprint::check_sample_start(&saved.start, &start).map_err(|differences| {
                RunError::OtherSample {
                    path: dir.posterior_checkpoint(),
                    differences,
                }
            })?;
            Some(saved.state)
        }
        None => None,
    };
    let mut written_at = std::time::Instant::now();
    let mut write_error = None;
    let step = control.step;
    let mut report = |state: &SamplerState| -> bool {
        let go_on = step(state, settings.steps);
        if !go_on || state.step == settings.steps || written_at.elapsed() >= SAMPLE_CHECKPOINT_EVERY
        {
            if let Err(err) = posterior::write_sample_checkpoint(dir, &start, state) {
                write_error = Some(err);
                return false;
            }
            written_at = std::time::Instant::now();
        }
        go_on
    };
    let result = crate::fit::posterior::sample(
        objective,
        evaluator,
        best_values,
        &analysis.covariance,
        analysis.likelihood_temperature,
        settings,
        resume,
        &mut report,
    );
    if let Some(err) = write_error {
        return Err(err);
    }
    Ok(result.map_err(|e| e.to_string()))
}

fn finish<E: Evaluator>(
    dir: &RunDirectory,
    job: &FitJob,
    start_text: &str,
    (objective, evaluator): (&Objective<'_, CaseModel<'_>>, &E),
    model: &CaseModel<'_>,
    (outcome, provenance): (&Outcome, &Provenance),
    control: SampleControl<'_, '_>,
) -> Result<RunSummary, RunError> {
    let analysis = analyse_on(objective, evaluator, &outcome.best_values);
    let (analysis, problem) = match analysis {
        Ok(a) => (Some(a), None),
        Err(e) => (None, Some(e.to_string())),
    };
    // A sample that cannot be drawn must not cost the fit its outputs: it is left out and
    // summary.json says why (`posterior_problem`).
    let stop_requested = control.stop.load(Ordering::Relaxed);
    let (posterior, posterior_problem) = match (&job.settings.posterior, &analysis) {
        (Some(settings), Some(analysis)) if !stop_requested => {
            match draw_posterior(
                dir,
                job,
                (objective, evaluator),
                &outcome.best_values,
                analysis,
                settings,
                control,
            )? {
                Ok(sample) if !sample.samples.is_empty() => {
                    posterior::write_posterior(dir, &sample)?;
                    (Some(sample), None)
                }
                Ok(sample) => (
                    None,
                    Some(format!(
                        "stopped on request at step {} of {}, before the burn-in ({} steps) \
                         ended, so no point was kept; `emberfit fit --resume` continues the \
                         sample from posterior-checkpoint.json",
                        sample.steps, settings.steps, settings.burn_in
                    )),
                ),
                Err(e) => (None, Some(e)),
            }
        }
        (Some(_), None) => (
            None,
            Some("no posterior sample without the uncertainty analysis".to_string()),
        ),
        (Some(_), Some(_)) => (
            None,
            Some("a stop was requested before the sample".to_string()),
        ),
        (None, _) => (None, None),
    };
    let mut provenance = provenance.clone();
    provenance.not_converged =
        crate::fit::engine::convergence(outcome.state.stop_reason.as_deref().unwrap_or("finished"))
            .err();
    let provenance = &provenance;
    write_best_model(
        dir,
        job,
        start_text,
        &outcome.best_values,
        analysis.as_ref(),
        outcome.best.cost,
        provenance,
    )?;
    let stamp = curves::CurveStamp {
        iteration: outcome.state.iteration,
        evaluations: outcome.state.evaluations,
        objective: outcome.best.cost,
        is_final: true,
    };
    curves::write_case_curves(dir, job, model, &outcome.best_values, stamp)?;
    let parameters: Vec<SummaryParameter> = job
        .parameters
        .iter()
        .enumerate()
        .map(|(i, p)| {
            let estimate = analysis.as_ref().map(|a| &a.estimates[i]);
            SummaryParameter {
                name: p.name.clone(),
                unit: p.unit.clone(),
                value: outcome.best_values[i],
                lower_bound: p.lower,
                upper_bound: p.upper,
                log_scale: p.scale == crate::fit::parameters::Scale::Log,
                lower_95: estimate.map(|e| e.interval_95.0).filter(|v| v.is_finite()),
                upper_95: estimate.map(|e| e.interval_95.1).filter(|v| v.is_finite()),
                standard_error_fit_space: estimate
                    .map(|e| e.standard_error_fit_space)
                    .filter(|v| v.is_finite()),
                sensitivity: estimate.map(|e| e.sensitivity),
                sensitivity_rank: estimate.map(|e| e.sensitivity_rank),
                posterior_lower_95: posterior.as_ref().map(|s| s.quantile(i, 0.025)),
                posterior_upper_95: posterior.as_ref().map(|s| s.quantile(i, 0.975)),
                posterior_median: posterior.as_ref().map(|s| s.quantile(i, 0.5)),
                warnings: estimate.map_or_else(Vec::new, |e| {
                    e.warnings.iter().map(|w| w.to_string()).collect()
                }),
            }
        })
        .collect();
    summary::write_parameters_csv(dir, &parameters)?;
    let reason = outcome
        .state
        .stop_reason
        .clone()
        .unwrap_or_else(|| "finished".into());
    let not_converged_reason = crate::fit::engine::convergence(&reason).err();
    let summary = RunSummary {
        title: job.title.clone(),
        converged: not_converged_reason.is_none(),
        not_converged_reason,
        reason,
        objective: outcome.best.cost,
        parts: outcome
            .best
            .parts
            .iter()
            .map(|p| PartInfo {
                case: p.case.clone(),
                signal: p.signal.clone(),
                cost: p.cost,
            })
            .collect(),
        // + 0.0 turns a −0.0 (a sum of no priors) into 0.0, so the file never says "-0.0".
        prior_cost: outcome.best.prior_cost + 0.0,
        evaluations: outcome.state.evaluations,
        elapsed_s: outcome.state.elapsed_s,
        parameters,
        correlation: analysis
            .as_ref()
            .map_or_else(Vec::new, |a| a.correlation.clone()),
        covariance: analysis
            .as_ref()
            .map_or_else(Vec::new, |a| a.covariance.clone()),
        n_residuals: analysis.as_ref().map_or(0, |a| a.n_residuals),
        effective_residuals: analysis.as_ref().map_or(0.0, |a| a.effective_residuals),
        residual_variance: analysis.as_ref().map_or(f64::NAN, |a| a.residual_variance),
        singular_values: analysis
            .as_ref()
            .map_or_else(Vec::new, |a| a.singular_values.clone()),
        identifiability_problem: problem,
        likelihood_temperature: analysis.as_ref().map(|a| a.likelihood_temperature),
        posterior_problem,
        posterior: posterior.as_ref().map(|s| PosteriorInfo {
            file: "posterior.json".into(),
            walkers: s.walkers,
            steps: s.steps,
            burn_in: s.burn_in,
            points: s.samples.len(),
            acceptance: s.acceptance,
            temperature: s.temperature,
            lowest_cost: s.lowest_cost,
            stopped: s.stopped,
            requested_steps: job.settings.posterior.as_ref().map(|p| p.steps),
        }),
    };
    summary::write_summary(dir, &summary)?;
    Ok(summary)
}

#[cfg(test)]
mod fixture_tests {
    //! A run directory written by the version before `run` was split into its file modules
    //! (the demo fit, `tests/fixtures/run/demo-fit/`, its progress log cut to six lines and
    //! one case curve kept): every file must read through `run` and write back to the same
    //! bytes, so the split changed no format.

    use super::*;

    fn fixture() -> RunDirectory {
        RunDirectory::new(
            &Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/fixtures/run/demo-fit"),
        )
    }

    fn bytes(path: &Path) -> Vec<u8> {
        std::fs::read(path).unwrap()
    }

    #[test]
    fn run_toml_round_trips_byte_for_byte() {
        let dir = fixture();
        let record = record::read_record(&dir)
            .unwrap()
            .expect("the fixture has a run.toml");
        assert_eq!(record.seed, 7);
        assert_eq!(record.overrides.threads, Some(2));
        assert_eq!(record.to_toml().unwrap().into_bytes(), bytes(&dir.record()));
    }

    #[test]
    fn checkpoint_json_round_trips_byte_for_byte() {
        let dir = fixture();
        let state = checkpoint::read_checkpoint(&dir).unwrap();
        assert_eq!(state.phase, Phase::Done);
        assert_eq!(
            checkpoint::checkpoint_bytes(&state).unwrap(),
            bytes(&dir.checkpoint())
        );
    }

    #[test]
    fn summary_json_and_parameters_csv_round_trip_byte_for_byte() {
        let dir = fixture();
        let summary = read_summary(&dir.summary()).unwrap();
        assert_eq!(summary.parameters.len(), 7);
        assert_eq!(summary.to_json_bytes().unwrap(), bytes(&dir.summary()));
        assert_eq!(
            summary::parameters_csv(&summary.parameters).unwrap(),
            bytes(&dir.parameters_csv())
        );
        // The lenient view reads the same file with nothing missing.
        let text = String::from_utf8(bytes(&dir.summary())).unwrap();
        let (view, missing) = summary::SummaryView::from_json(&text).unwrap();
        assert!(missing.is_empty(), "{missing:?}");
        assert_eq!(view.objective, Some(summary.objective));
    }

    #[test]
    fn progress_lines_round_trip_byte_for_byte_through_both_readers() {
        let dir = fixture();
        let strict = progress::read_all(&dir.progress()).unwrap();
        assert_eq!(strict.len(), 6);
        let mut written = String::new();
        for event in &strict {
            written.push_str(&serde_json::to_string(event).unwrap());
            written.push('\n');
        }
        assert_eq!(written.into_bytes(), bytes(&dir.progress()));
        assert_eq!(progress::read_all_lenient(&dir.progress()), strict);
    }

    #[test]
    fn the_case_curves_are_named_and_read_as_they_were_written() {
        let dir = fixture();
        let index = curves::read_index(&dir.cases().join(curves::INDEX_FILE)).unwrap();
        let entry = index
            .curves
            .iter()
            .find(|e| e.signal == "ignition_time" && e.case == "25 kW/m²")
            .unwrap();
        assert_eq!(curves::curve_file(&entry.case, &entry.signal), entry.file);
        let text = String::from_utf8(bytes(&dir.cases().join(&entry.file))).unwrap();
        let strict = curves::parse_case_curve_strict(&text).unwrap();
        let (lenient, missing) = curves::parse_case_curve(&text).unwrap();
        assert!(missing.is_empty());
        assert_eq!(strict, lenient);
        assert_eq!(strict.measured, [182.6]);
        let index_bytes = serde_json::to_vec_pretty(&index).unwrap();
        assert_eq!(index_bytes, bytes(&dir.cases().join(curves::INDEX_FILE)));
    }
}
