//! `fit` and `watch`: start (or resume) a fit run and show it, or view a run directory.
//!
//! **Invariant:** the fit runs in a worker thread (`run::run_fit_on`); this thread only shows
//! it (the interface, or `headless::Follow`'s lines) and prints `present::fit`'s table.

use std::sync::atomic::Ordering;
use std::sync::Arc;

use anyhow::{bail, Context, Result};

use emberfit::present::fit::fit_summary_table;
use emberfit::run::{FitReport, RunDirectory, RunError};

use super::{print_notices, refuse_warnings_when_strict, tell};
use crate::cli::{FitArgs, WatchArgs};
use crate::signals::FitSignals;

/// The run directory's name: given, or the job's name made unique (a fresh user may run the
/// demo twice).
pub(super) fn run_name(args: &FitArgs) -> String {
    if let Some(name) = &args.name {
        return name.clone();
    }
    let stem = args
        .job
        .file_stem()
        .map(|s| emberfit::run::slug(&s.to_string_lossy()))
        .unwrap_or_else(|| "fit".into());
    let mut candidate = stem.clone();
    let mut n = 2;
    while !args.resume && args.runs_dir.join(&candidate).exists() {
        candidate = format!("{stem}-{n}");
        n += 1;
    }
    candidate
}

pub fn fit(args: FitArgs) -> Result<()> {
    use std::io::IsTerminal;

    // Under an MPI launcher (docs/cluster.md): the other ranks serve rank 0's batches.
    let cluster = emberfit::cluster::Cluster::join().context("joining the MPI job")?;
    if !cluster.is_worker() {
        check_before_start(&args)?;
        check_fit_data(&args)?;
    }
    if cluster.size() > 1 && args.detach {
        bail!(
            "--detach is for a lone process; an MPI job runs in the background under its launcher"
        );
    }
    if args.detach {
        return super::detach::fit_detached(&args);
    }
    let name = run_name(&args);
    emberfit::run::fingerprint::check_run_name(&name).map_err(anyhow::Error::msg)?;
    // A resumed run keeps the thread count it started with unless given another.
    let stored_threads = args
        .resume
        .then(|| emberfit::run::fingerprint::stored_threads(&args.runs_dir.join(&name)))
        .flatten();
    let threads = args.threads.or(stored_threads).unwrap_or_else(|| {
        std::thread::available_parallelism()
            .map_or(1, |n| n.get().min(emberfit::limits::max_threads()))
    });
    let threads = emberfit::limits::check_threads(threads).map_err(anyhow::Error::msg)?;
    rayon::ThreadPoolBuilder::new()
        .num_threads(threads)
        .build_global()
        .context("starting the worker threads")?;
    if cluster.is_worker() {
        return Ok(cluster.serve_fit(&args.job)?);
    }
    let time_budget_s = match &args.time {
        Some(text) => Some(
            humantime::parse_duration(text)
                .with_context(|| {
                    format!("--time `{text}` is not a duration like 90s, 20min or 8h")
                })?
                .as_secs_f64(),
        ),
        None => None,
    };
    let signals = FitSignals::install()?;
    let options = emberfit::run::RunOptions {
        runs_root: args.runs_dir.clone(),
        name: Some(name.clone()),
        resume: args.resume,
        threads,
        time_budget_s,
        max_evaluations: args.max_evaluations,
        seed: args.seed,
    };
    let job = args.job.clone();
    let worker_stop = Arc::clone(&signals.stop);
    let worker_pause = Arc::clone(&signals.pause);
    let evaluator = cluster.evaluator();
    let worker = std::thread::spawn(move || {
        emberfit::run::run_fit_on(&job, &options, worker_stop, worker_pause, &evaluator)
    });
    let directory = RunDirectory::new(&args.runs_dir.join(&name));
    if !args.headless && std::io::stdout().is_terminal() {
        let is_worker_finished = || worker.is_finished();
        let control = emberfit::tui::FitControl {
            stop: &signals.stop,
            pause: &signals.pause,
            hangup: &signals.hangup,
            is_worker_finished: &is_worker_finished,
        };
        match emberfit::tui::attach(&directory.root, &control) {
            Ok(emberfit::tui::ViewerEnd::Left) => {
                let report = join_fit(worker)?;
                print!("{}", fit_summary_table(&report.summary, &report.labels));
                println!("run directory: {}", report.directory.display());
                return Ok(());
            }
            Ok(emberfit::tui::ViewerEnd::TerminalLost)
                if signals.terminated.load(Ordering::SeqCst) =>
            {
                // SIGTERM (or SIGHUP without a terminal): the interface has left, the fit
                // writes its outputs, and the process ends.
                let report = join_fit(worker)?;
                tell(&fit_summary_table(&report.summary, &report.labels));
                tell(&format!("run directory: {}", report.directory.display()));
                return Ok(());
            }
            Ok(emberfit::tui::ViewerEnd::TerminalLost) => {
                // Nobody is looking: wait for the fit (blocking, no polling) and say nothing
                // on the terminal; the run directory holds everything.
                return match join_fit(worker) {
                    Ok(_) => Ok(()),
                    Err(err) => {
                        tell(&format!("error: {err:#}"));
                        std::process::exit(1);
                    }
                };
            }
            Err(err) => tell(&format!(
                "note: no terminal interface ({err:#}); printing progress lines instead"
            )),
        }
    }
    // Skip what an earlier process already printed on a resumed run; only new events show.
    let mut follow = emberfit::headless::Follow::new(&directory.progress(), args.resume);
    tell(&format!("run directory: {}", directory.root.display()));
    if cluster.size() > 1 {
        tell(&format!(
            "MPI job: {} ranks × {threads} threads each; stop cleanly with kill -INT {}",
            cluster.size(),
            std::process::id()
        ));
    }
    follow.print_while(|| !worker.is_finished(), tell);
    let report = join_fit(worker)?;
    for line in follow.lines(std::time::Instant::now(), true) {
        tell(&line);
    }
    {
        use std::io::Write;
        let mut out = std::io::stdout();
        let _ = write!(
            out,
            "{}",
            fit_summary_table(&report.summary, &report.labels)
        );
        let _ = writeln!(out, "run directory: {}", report.directory.display());
    }
    Ok(())
}

fn join_fit(worker: std::thread::JoinHandle<Result<FitReport, RunError>>) -> Result<FitReport> {
    match worker.join() {
        Ok(result) => result.context("running the fit"),
        Err(_) => bail!(
            "the fit stopped unexpectedly (a worker thread panicked); the last checkpoint is kept"
        ),
    }
}

/// Prints the plausibility warnings on a job's test data before the fit starts (the
/// interface would hide them), and refuses them with `--strict`. A job that cannot be read is
/// left to the fit, which reports it the same way.
fn check_fit_data(args: &FitArgs) -> Result<()> {
    if let Ok(job) = emberfit::fit::job::load_job(&args.job) {
        refuse_warnings_when_strict(&job.warnings, args.strict)?;
        print_notices(&job.warnings);
    }
    Ok(())
}

/// What must hold before a fit starts, checked before anything is printed or shown: the job
/// reads and validates (so `fit nothere.toml` says only that), and a new run does not land in
/// an existing run directory (so no viewer replays the old run's log first).
fn check_before_start(args: &FitArgs) -> Result<()> {
    emberfit::fit::job::load_job(&args.job).context("reading the fit job")?;
    if let Some(name) = &args.name {
        refuse_existing_run(&RunDirectory::new(&args.runs_dir.join(name)), args.resume)?;
    }
    Ok(())
}

/// A new run (no `--resume`) may not start in a directory that holds another run.
pub(super) fn refuse_existing_run(directory: &RunDirectory, resume: bool) -> Result<()> {
    if !resume && directory.root.exists() && !directory.holds_only_the_log() {
        bail!(
            "run directory {} already exists; give --resume to continue it or --name to start another",
            directory.root.display()
        );
    }
    Ok(())
}

pub fn watch(args: WatchArgs) -> Result<()> {
    use std::io::IsTerminal;
    if !std::io::stdout().is_terminal() {
        bail!(
            "watch needs a terminal; without one, read {} or run `emberfit report {}`",
            RunDirectory::new(&args.run).progress().display(),
            args.run.display()
        );
    }
    emberfit::tui::watch(&args.run).context("watching the run")
}
