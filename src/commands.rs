//! One function per subcommand: the wiring between arguments, library and output.

use std::path::Path;

use anyhow::{bail, Context, Result};

use emberfit::case::load_scenario;
use emberfit::data::derivative::Smoothing;
use emberfit::data::description::{ColumnName, HrrFromMass};
use emberfit::data::ignition::{
    analyse, points_from_tests, IgnitionAnalysis, IgnitionList, IgnitionSettings,
    IgnitionTemperatureSource,
};
use emberfit::data::report::IgnitionSource;
use emberfit::data::{reduce as reduce_test, Notice, Reduced, TestDescription};
use emberfit::export::{curves::curves_csv, write_atomically};
use emberfit::physics::{simulate as run_simulation, History};

use crate::cli::{
    Cli, Command, CompareArgs, FitArgs, IgnitionArgs, PredictArgs, ReduceArgs, ReportArgs,
    SimulateArgs, SynthesizeArgs, WatchArgs,
};

pub fn run(cli: Cli) -> Result<()> {
    match cli.command {
        Command::Simulate(args) => simulate(args),
        Command::Synthesize(args) => synthesize(args),
        Command::Fit(args) => fit(args),
        Command::Watch(args) => watch(args),
        Command::Reduce(args) => reduce(*args),
        Command::Ignition(args) => ignition(args),
        Command::Isoconversional(args) => milligram::isoconversional(args),
        Command::Predict(args) => predict(args),
        Command::Compare(args) => compare(args),
        Command::Report(args) => report(args),
    }
}

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

fn predict(args: PredictArgs) -> Result<()> {
    use emberfit::predict::{
        load_prepared_scenario, predict_on, prediction_csv, quantities_csv, BandDraw,
        CalibratedModel, Conditions, PredictionSettings,
    };
    let cluster = emberfit::cluster::Cluster::join().context("joining the MPI job")?;
    start_threads(args.threads)?;
    let calibrated =
        CalibratedModel::load(&args.calibrated).context("reading the calibrated model")?;
    let conditions = Conditions {
        irradiance_kw_m2: args.flux,
        thickness_mm: args.thickness_mm,
        duration_s: args.duration,
    };
    let scenario = load_prepared_scenario(&calibrated, &args.scenario, &conditions)
        .context("preparing the scenario")?;
    let settings = PredictionSettings {
        band_percent: args.band,
        n_samples: args.samples,
        seed: args.seed,
    };
    if cluster.is_worker() {
        let band = BandDraw::new(&calibrated, &scenario);
        return Ok(cluster.serve_band(band.as_ref())?);
    }
    let prediction = predict_on(&calibrated, &scenario, &settings, &cluster.evaluator())
        .context("predicting")?;
    if let Some(out) = &args.out {
        write_atomically(out, prediction_csv(&prediction).as_bytes())
            .with_context(|| format!("writing {}", out.display()))?;
        if prediction.band_percent.is_some() {
            let stem = out
                .file_stem()
                .map_or_else(|| "prediction".into(), |s| s.to_string_lossy().into_owned());
            let quantities = out.with_file_name(format!("{stem}-quantities.csv"));
            write_atomically(&quantities, quantities_csv(&prediction).as_bytes())
                .with_context(|| format!("writing {}", quantities.display()))?;
        }
    }
    if args.json {
        let quantities: Vec<serde_json::Value> = prediction
            .quantities
            .iter()
            .map(|q| {
                let finite = |v: f64| v.is_finite().then_some(v);
                serde_json::json!({
                    "name": q.name, "unit": q.unit, "best": q.best,
                    "median": finite(q.median), "lower": finite(q.lower), "upper": finite(q.upper),
                    "mean": finite(q.mean), "standard_deviation": finite(q.standard_deviation),
                    "prediction_lower": finite(q.prediction_lower),
                    "prediction_upper": finite(q.prediction_upper),
                    "relative_test_scatter": finite(q.relative_test_scatter),
                    "relative_model_error": finite(q.relative_model_error),
                    "n_without": q.n_missing(),
                })
            })
            .collect();
        println!(
            "{}",
            serde_json::json!({
                "band_percent": prediction.band_percent,
                "n_samples": prediction.n_samples,
                "n_failed": prediction.n_failed,
                "n_rejected": prediction.n_rejected,
                "quantities": quantities,
                "notes": prediction.notes,
                "caution": emberfit::export::report::CAUTION,
            })
        );
        return Ok(());
    }
    for note in &prediction.notes {
        eprintln!("note: {note}");
    }
    match prediction.band_percent {
        Some(band) => println!(
            "{band} % band from {} drawn parameter sets ({} failed, {} outside the bounds redrawn)",
            prediction.n_samples, prediction.n_failed, prediction.n_rejected
        ),
        None => println!("best fit only (give --band 95 for an uncertainty band)"),
    }
    if prediction.band_percent.is_some() {
        println!(
            "  parameter band: the fitted parameters' uncertainty alone; prediction band (test \
             scatter and model error): also the repeats' scatter and the model's error at the \
             calibration conditions (docs/predictions.md)"
        );
    }
    println!(
        "  {:<28}{:>12}{:>12}{:>24}{:>26}",
        "quantity", "best fit", "median", "parameter band", "prediction band"
    );
    for q in &prediction.quantities {
        let show = |v: f64| {
            if v.is_finite() {
                format!("{v:.2}")
            } else {
                "-".into()
            }
        };
        println!(
            "  {:<28}{:>12}{:>12}{:>24}{:>26}",
            format!("{} ({})", q.name, q.unit),
            q.best
                .map_or_else(|| "no ignition".into(), |v| format!("{v:.2}")),
            show(q.median),
            if q.lower.is_finite() {
                format!("{} … {}", show(q.lower), show(q.upper))
            } else {
                "-".into()
            },
            if q.prediction_lower.is_finite() {
                format!(
                    "{} … {}",
                    show(q.prediction_lower),
                    show(q.prediction_upper)
                )
            } else {
                "-".into()
            }
        );
        if q.n_missing() > 0 {
            println!("    {} draws never ignite", q.n_missing());
        }
    }
    if let Some(out) = &args.out {
        println!(
            "curves written to {} ({} rows)",
            out.display(),
            prediction.time_s.len()
        );
    }
    println!("{}", emberfit::export::report::CAUTION);
    Ok(())
}

fn compare(args: CompareArgs) -> Result<()> {
    use emberfit::predict::compare::{compare_tests, scenario_of_job, scores_json, scores_table};
    use emberfit::predict::CalibratedModel;
    let calibrated =
        CalibratedModel::load(&args.calibrated).context("reading the calibrated model")?;
    let base = match &args.scenario {
        Some(path) => load_scenario(path).context("reading the scenario")?,
        None => match scenario_of_job(&calibrated) {
            Some(base) => base,
            None => bail!(
                "{} names no fit job that can be read from here; give the scenario the tests were run in with --scenario",
                args.calibrated.display()
            ),
        },
    };
    let scored = compare_tests(&calibrated, &base, &args.tests).context("scoring the tests")?;
    let scores: Vec<_> = scored.into_iter().map(|s| s.score).collect();
    if args.json {
        println!("{}", scores_json(&scores));
    } else {
        print!("{}", scores_table(&scores));
    }
    Ok(())
}

fn report(args: ReportArgs) -> Result<()> {
    use emberfit::export::report::{write_report, ReportOptions};
    start_threads(args.threads)?;
    if !(args.band > 0.0 && args.band < 100.0) {
        bail!(
            "--band must be a percentage between 0 and 100, got {}",
            args.band
        );
    }
    let options = ReportOptions {
        n_samples: args.samples,
        band_percent: args.band,
        held_out: args.tests.clone(),
    };
    let output = write_report(&args.run, &options)
        .with_context(|| format!("writing the report of {}", args.run.display()))?;
    for note in &output.notes {
        eprintln!("note: {note}");
    }
    println!(
        "report written to {} ({} plot files in {})",
        output.html.display(),
        output.plots.len(),
        args.run.join("plots").display()
    );
    Ok(())
}

/// The run directory's name: given, or the job's name made unique (a fresh user may run the
/// demo twice).
fn run_name(args: &FitArgs) -> String {
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

/// Writes a line to stderr, ignoring failure: after a hang-up the terminal is gone, and the
/// fit must keep running rather than panic on a failed write (as `eprintln!` would).
fn tell(line: &str) {
    use std::io::Write;
    let _ = writeln!(std::io::stderr(), "{line}");
}

fn fit(args: FitArgs) -> Result<()> {
    use std::io::IsTerminal;
    use std::sync::atomic::AtomicBool;
    use std::sync::Arc;

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
        return fit_detached(&args);
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
    let stop = Arc::new(AtomicBool::new(false));
    let pause = Arc::new(AtomicBool::new(false));
    let hangup = Arc::new(AtomicBool::new(false));
    let terminated = Arc::new(AtomicBool::new(false));
    // First SIGINT/SIGTERM: stop cleanly after this generation; a second one exits at once.
    // SIGHUP (a closed terminal or a dropped SSH link) does not stop the fit: it only tells
    // the interface that the terminal is gone.
    for signal in [signal_hook::consts::SIGINT, signal_hook::consts::SIGTERM] {
        signal_hook::flag::register_conditional_shutdown(signal, 1, Arc::clone(&stop))
            .context("installing the signal handlers")?;
        signal_hook::flag::register(signal, Arc::clone(&stop))
            .context("installing the signal handlers")?;
    }
    signal_hook::flag::register(signal_hook::consts::SIGHUP, Arc::clone(&hangup))
        .context("installing the signal handlers")?;
    // After the handlers above, so a first SIGTERM is not taken for a second one.
    install_end_signals(&stop, &hangup, &terminated)?;
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
    let worker_stop = Arc::clone(&stop);
    let worker_pause = Arc::clone(&pause);
    let evaluator = cluster.evaluator();
    let worker = std::thread::spawn(move || {
        emberfit::run::run_fit_on(&job, &options, worker_stop, worker_pause, &evaluator)
    });
    let directory = emberfit::run::RunDirectory::new(&args.runs_dir.join(&name));
    if !args.headless && std::io::stdout().is_terminal() {
        let is_worker_finished = || worker.is_finished();
        let control = emberfit::tui::FitControl {
            stop: &stop,
            pause: &pause,
            hangup: &hangup,
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
                if terminated.load(std::sync::atomic::Ordering::SeqCst) =>
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
    let mut follower = emberfit::run::progress::ProgressFollower::new(&directory.progress());
    if args.resume {
        // Skip what the earlier process already printed; only new events are shown.
        let _ = follower.poll();
    }
    tell(&format!("run directory: {}", directory.root.display()));
    if cluster.size() > 1 {
        tell(&format!(
            "MPI job: {} ranks × {threads} threads each; stop cleanly with kill -INT {}",
            cluster.size(),
            std::process::id()
        ));
    }
    let mut ticker = emberfit::headless::Ticker::new(std::time::Duration::from_secs(3));
    let mut print_events = |follower: &mut emberfit::run::progress::ProgressFollower,
                            is_last: bool| {
        if let Ok(events) = follower.poll() {
            for event in &events {
                if let Some(line) = ticker.line(event, std::time::Instant::now()) {
                    tell(&line);
                }
            }
        }
        if is_last {
            if let Some(line) = ticker.flush() {
                tell(&line);
            }
        }
    };
    while !worker.is_finished() {
        print_events(&mut follower, false);
        std::thread::sleep(std::time::Duration::from_millis(200));
    }
    let report = join_fit(worker)?;
    print_events(&mut follower, true);
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

fn join_fit(
    worker: std::thread::JoinHandle<Result<emberfit::run::FitReport, emberfit::run::RunError>>,
) -> Result<emberfit::run::FitReport> {
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
    if let Ok(job) = emberfit::case::job::load_job(&args.job) {
        refuse_warnings_when_strict(&job.warnings, args.strict)?;
        print_notices(&job.warnings);
    }
    Ok(())
}

/// SIGTERM, and SIGHUP when the process has no terminal (a service manager, `kill PID`, a
/// detached fit): stop after this iteration, write the outputs and end the process — also
/// when the interface is shown (its loop leaves on the `hangup` flag). SIGINT/SIGTERM twice
/// exits at once (installed with the other handlers in `fit`).
fn install_end_signals(
    stop: &std::sync::Arc<std::sync::atomic::AtomicBool>,
    hangup: &std::sync::Arc<std::sync::atomic::AtomicBool>,
    terminated: &std::sync::Arc<std::sync::atomic::AtomicBool>,
) -> Result<()> {
    use std::io::IsTerminal;
    use std::sync::Arc;
    let mut ending = vec![signal_hook::consts::SIGTERM];
    let has_terminal = std::io::stdin().is_terminal()
        || std::io::stdout().is_terminal()
        || std::io::stderr().is_terminal();
    if !has_terminal {
        ending.push(signal_hook::consts::SIGHUP);
    }
    for signal in ending {
        for flag in [stop, hangup, terminated] {
            signal_hook::flag::register(signal, Arc::clone(flag))
                .context("installing the signal handlers")?;
        }
    }
    Ok(())
}

/// `fit --detach`: the same fit, headless, in a background process with its own session (so
/// a closed terminal or a dropped SSH link sends it no hang-up), its output in `fit.log`.
fn fit_detached(args: &FitArgs) -> Result<()> {
    use std::os::unix::process::CommandExt;
    use std::process::{Command as Process, Stdio};

    // Refuse a bad job here, where the user can see the message.
    emberfit::case::job::load_job(&args.job).context("reading the fit job")?;
    let name = run_name(args);
    emberfit::run::fingerprint::check_run_name(&name).map_err(anyhow::Error::msg)?;
    if let Some(threads) = args.threads {
        emberfit::limits::check_threads(threads).map_err(anyhow::Error::msg)?;
    }
    let directory = emberfit::run::RunDirectory::new(&args.runs_dir.join(&name));
    if !args.resume && directory.root.exists() && !directory.holds_only_the_log() {
        bail!(
            "run directory {} already exists; give --resume to continue it or --name to start another",
            directory.root.display()
        );
    }
    std::fs::create_dir_all(&directory.root)
        .with_context(|| format!("creating {}", directory.root.display()))?;
    let log_path = directory.log();
    let log = std::fs::OpenOptions::new()
        .create(true)
        .append(true)
        .open(&log_path)
        .with_context(|| format!("opening {}", log_path.display()))?;
    let log_for_stderr = log
        .try_clone()
        .with_context(|| format!("opening {}", log_path.display()))?;
    let exe = std::env::current_exe().context("finding the emberfit program")?;
    let mut command = Process::new(exe);
    command
        .arg("fit")
        .arg(&args.job)
        .arg("--headless")
        .arg("--name")
        .arg(&name)
        .arg("--runs-dir")
        .arg(&args.runs_dir);
    if args.resume {
        command.arg("--resume");
    }
    if let Some(threads) = args.threads {
        command.arg("--threads").arg(threads.to_string());
    }
    if let Some(time) = &args.time {
        command.arg("--time").arg(time);
    }
    if let Some(n) = args.max_evaluations {
        command.arg("--max-evaluations").arg(n.to_string());
    }
    if let Some(seed) = args.seed {
        command.arg("--seed").arg(seed.to_string());
    }
    command
        .stdin(Stdio::null())
        .stdout(log)
        .stderr(log_for_stderr);
    // SAFETY: `setsid` is async-signal-safe and touches no memory of this process, which is
    // all that may happen between fork and exec.
    unsafe {
        command.pre_exec(|| {
            if libc::setsid() == -1 {
                return Err(std::io::Error::last_os_error());
            }
            Ok(())
        });
    }
    let mut child = command.spawn().context("starting the background fit")?;
    // A moment to catch a fit that cannot start (its message is in the log).
    std::thread::sleep(std::time::Duration::from_millis(500));
    if let Some(status) = child.try_wait().context("checking the background fit")? {
        if !status.success() {
            let log_text = std::fs::read_to_string(&log_path).unwrap_or_default();
            bail!(
                "the background fit stopped at once ({status}):\n{}",
                log_text.trim_end()
            );
        }
    }
    let pid = child.id();
    println!(
        "fitting in the background (pid {pid}); output in {}",
        log_path.display()
    );
    println!("run directory: {}", directory.root.display());
    println!("watch it:      emberfit watch {}", directory.root.display());
    println!("stop it:       kill -INT {pid}   (finishes the iteration, writes all outputs)");
    Ok(())
}

fn watch(args: WatchArgs) -> Result<()> {
    use std::io::IsTerminal;
    if !std::io::stdout().is_terminal() {
        bail!(
            "watch needs a terminal; without one, read {} or run `emberfit report {}`",
            args.run.join("progress.jsonl").display(),
            args.run.display()
        );
    }
    emberfit::tui::watch(&args.run).context("watching the run")
}

/// What must hold before a fit starts, checked before anything is printed or shown: the job
/// reads and validates (so `fit nothere.toml` says only that), and a new run does not land in
/// an existing run directory (so no viewer replays the old run's log first).
fn check_before_start(args: &FitArgs) -> Result<()> {
    emberfit::case::job::load_job(&args.job).context("reading the fit job")?;
    if let Some(name) = &args.name {
        let directory = emberfit::run::RunDirectory::new(&args.runs_dir.join(name));
        if !args.resume && directory.root.exists() && !directory.holds_only_the_log() {
            bail!(
                "run directory {} already exists; give --resume to continue it or --name to start another",
                directory.root.display()
            );
        }
    }
    Ok(())
}

/// The table printed after the fit: at most 80 columns (short labels; the full paths and what
/// each number is follow the table, wrapped).
fn fit_summary_table(
    summary: &emberfit::run::RunSummary,
    labels: &[emberfit::case::label::ParameterLabel],
) -> String {
    use emberfit::headless::{interval_text, significant};
    const WIDTH: usize = 80;
    let mut out = format!("\n{}\n", summary.title);
    for line in wrapped(
        &format!(
            "objective {} ({})",
            significant(summary.objective, 6),
            summary.reason
        ),
        WIDTH - 2,
    ) {
        out.push_str(&format!("  {line}\n"));
    }
    out.push_str(&format!("    {:<20} {:<22} {}\n", "case", "signal", "part"));
    for part in &summary.parts {
        out.push_str(&format!(
            "    {:<20} {:<22} {}\n",
            part.case,
            part.signal,
            significant(part.cost, 5)
        ));
    }
    let interval_heading = if summary.converged {
        "95 % interval"
    } else {
        "95 % (provisional)"
    };
    let label = |i: usize, name: &str| {
        labels
            .get(i)
            .map_or_else(|| name.to_string(), |l| l.short.clone())
    };
    let label_width = summary
        .parameters
        .iter()
        .enumerate()
        .map(|(i, p)| label(i, &p.name).chars().count())
        .max()
        .unwrap_or(9)
        .clamp(9, 22);
    out.push_str(&format!(
        "  {:<label_width$} {:>10} {:<9} {:<22} {}\n",
        "parameter", "value", "unit", interval_heading, "rank"
    ));
    for (i, p) in summary.parameters.iter().enumerate() {
        let interval = match (p.lower_95, p.upper_95) {
            (Some(a), Some(b)) => interval_text(a, b),
            _ => "undetermined".into(),
        };
        let rank = p
            .sensitivity_rank
            .map_or("–".to_string(), |r| r.to_string());
        out.push_str(&format!(
            "  {:<label_width$} {:>10} {:<9} {:<22} {rank}\n",
            label(i, &p.name),
            significant(p.value, 5),
            p.unit,
            interval
        ));
        for warning in &p.warnings {
            for line in wrapped(&format!("warning: {warning}"), WIDTH - 6) {
                out.push_str(&format!("      {line}\n"));
            }
        }
    }
    if let Some(reason) = &summary.not_converged_reason {
        let text = format!(
            "NOT CONVERGED ({reason}): the values and intervals are those of the best point so \
             far; resume the run or give a larger budget before relying on them"
        );
        for line in wrapped(&text, WIDTH - 2) {
            out.push_str(&format!("  {line}\n"));
        }
    }
    if let Some(problem) = &summary.identifiability_problem {
        for line in wrapped(&format!("intervals not computed: {problem}"), WIDTH - 2) {
            out.push_str(&format!("  {line}\n"));
        }
    } else {
        out.push_str("  rank: 1 = the parameter the data are most sensitive to\n");
    }
    if !labels.is_empty() {
        out.push_str("  what the labels are:\n");
        for (p, l) in summary.parameters.iter().zip(labels) {
            for line in wrapped(
                &format!("{} = {}: {}", l.short, p.name, l.meaning),
                WIDTH - 6,
            ) {
                out.push_str(&format!("    {line}\n"));
            }
        }
    }
    for line in wrapped(emberfit::export::report::CAUTION, WIDTH - 2) {
        out.push_str(&format!("  {line}\n"));
    }
    out
}

/// `text` in lines of at most `width` characters, broken at spaces.
fn wrapped(text: &str, width: usize) -> Vec<String> {
    emberfit::tui::draw::wrap_words(text, width)
}

fn synthesize(args: SynthesizeArgs) -> Result<()> {
    let mut loaded = load_scenario(&args.scenario).context("loading the scenario")?;
    if let Some(flux_kw_m2) = args.flux {
        check_flux(flux_kw_m2)?;
        loaded.set_constant_irradiance_w_m2(flux_kw_m2 * 1e3);
    }
    if let Some(duration_s) = args.duration {
        check_duration(duration_s)?;
        loaded.scenario.duration_s = duration_s;
        check_size_after_duration(&loaded.scenario)?;
    }
    for (name, value) in [
        ("--area-m2", args.area_m2),
        ("--mass-noise-g", args.mass_noise_g),
        ("--hrr-noise-kw-m2", args.hrr_noise_kw_m2),
        ("--time-jitter-s", args.time_jitter_s),
    ] {
        if !(value >= 0.0 && value.is_finite()) {
            bail!("{name} must be ≥ 0, got {value}");
        }
    }
    if args.area_m2 <= 0.0 {
        bail!("--area-m2 must be > 0, got {}", args.area_m2);
    }
    let history = run_simulation(&loaded.scenario)
        .with_context(|| format!("simulating {}", loaded.path.display()))?;
    let noise = emberfit::synthetic::NoiseModel {
        area_m2: args.area_m2,
        mass_noise_g: args.mass_noise_g,
        hrr_noise_kw_m2: args.hrr_noise_kw_m2,
        time_jitter_s: args.time_jitter_s,
        ..Default::default()
    };
    let test = emberfit::synthetic::synthesize(&history, &noise, args.seed);
    let bytes = emberfit::synthetic::synthetic_csv(&test).context("formatting the test data")?;
    write_atomically(&args.out, &bytes)
        .with_context(|| format!("writing {}", args.out.display()))?;
    println!(
        "{}: {} rows, initial mass {:.2} g, clock offset {:+.2} s, ignition {}",
        args.out.display(),
        test.time_s.len(),
        test.initial_mass_g,
        test.time_offset_s,
        test.ignition_time_s
            .map_or("none".into(), |t| format!("{t:.1} s (logged clock)"))
    );
    Ok(())
}

fn check_flux(flux_kw_m2: f64) -> Result<()> {
    if !(0.0..=500.0).contains(&flux_kw_m2) {
        bail!("--flux must be within 0..500 kW/m², got {flux_kw_m2}");
    }
    Ok(())
}

fn check_duration(duration_s: f64) -> Result<()> {
    if !(duration_s > 0.0 && duration_s.is_finite()) {
        bail!("--duration must be > 0 s, got {duration_s}");
    }
    let most = emberfit::case::budget::MAX_DURATION_S;
    if duration_s > most {
        bail!("--duration {duration_s} s is more than {most:e} s (11.6 days), the most simulated");
    }
    Ok(())
}

/// The size check of a scenario whose duration was set by `--duration`.
fn check_size_after_duration(scenario: &emberfit::physics::Scenario) -> Result<()> {
    emberfit::case::budget::check_scenario_size(scenario)
        .map_err(|size| anyhow::anyhow!("--duration {} s: {}", scenario.duration_s, size.problem))
}

fn simulate(args: SimulateArgs) -> Result<()> {
    if emberfit::microscale::is_milligram_scenario(&args.scenario) {
        return milligram::simulate(args);
    }
    let mut loaded = load_scenario(&args.scenario).context("loading the scenario")?;
    if let Some(material) = &args.material {
        let model = emberfit::case::load_material(material).context("loading the material")?;
        loaded
            .use_specimen_material(&model)
            .with_context(|| format!("using {} for the specimen", material.display()))?;
    }
    if let Some(flux_kw_m2) = args.flux {
        check_flux(flux_kw_m2)?;
        loaded.set_constant_irradiance_w_m2(flux_kw_m2 * 1e3);
    }
    if let Some(duration_s) = args.duration {
        check_duration(duration_s)?;
        loaded.scenario.duration_s = duration_s;
        check_size_after_duration(&loaded.scenario)?;
    }
    let history = run_simulation(&loaded.scenario)
        .with_context(|| format!("simulating {}", loaded.path.display()))?;
    let has_backing = loaded.scenario.layers.iter().any(|l| !l.is_specimen);
    if let Some(out) = &args.out {
        let bytes = curves_csv(&history, has_backing).context("formatting the curves")?;
        write_atomically(out, &bytes).with_context(|| format!("writing {}", out.display()))?;
    }
    if args.json {
        println!("{}", summary_json(&history));
    } else {
        let exposure = match &loaded.scenario.exposure.irradiance_w_m2 {
            emberfit::physics::scenario::Schedule::Constant(q) => format!("{:.1} kW/m²", q * 1e-3),
            emberfit::physics::scenario::Schedule::Table(points) => {
                format!("irradiance table of {} points", points.len())
            }
        };
        print!(
            "{}",
            summary_table(
                &format!(
                    "{} — {exposure}, {:.0} s",
                    loaded.title, loaded.scenario.duration_s
                ),
                &history
            )
        );
        if let Some(out) = &args.out {
            println!(
                "curves written to {} ({} rows)",
                out.display(),
                history.samples.len()
            );
        }
    }
    Ok(())
}

fn summary_json(history: &History) -> serde_json::Value {
    let s = &history.summary;
    serde_json::json!({
        "ignition_time_s": s.ignition_time_s,
        "flameout_time_s": s.flameout_time_s,
        "peak_hrr_kw_m2": s.peak_hrr_w_m2 * 1e-3,
        "time_to_peak_hrr_s": s.time_of_peak_hrr_s,
        "peak_mlr_g_m2s": s.peak_mlr_kg_m2_s * 1e3,
        "time_to_peak_mlr_s": s.time_of_peak_mlr_s,
        "total_heat_release_mj_m2": s.total_heat_release_j_m2 * 1e-6,
        "initial_mass_kg_m2": s.initial_mass_kg_m2,
        "mass_lost_kg_m2": s.mass_lost_kg_m2,
        "energy_balance_relative_residual": s.energy.relative_residual(),
        "mass_balance_relative_residual": s.mass.relative_residual(),
        "steps": s.n_steps,
        "rejected_steps": s.n_rejected_steps,
    })
}

fn summary_table(title: &str, history: &History) -> String {
    let s = &history.summary;
    let time = |t: Option<f64>| t.map_or("none".to_string(), |t| format!("{t:.1} s"));
    let mut out = String::new();
    out.push_str(&format!("{title}\n"));
    let rows = [
        ("ignition", time(s.ignition_time_s)),
        ("flame-out", time(s.flameout_time_s)),
        (
            "peak HRR",
            format!(
                "{:.1} kW/m² at {:.1} s",
                s.peak_hrr_w_m2 * 1e-3,
                s.time_of_peak_hrr_s
            ),
        ),
        (
            "peak MLR",
            format!(
                "{:.2} g/(m²·s) at {:.1} s",
                s.peak_mlr_kg_m2_s * 1e3,
                s.time_of_peak_mlr_s
            ),
        ),
        (
            "total heat release",
            format!("{:.2} MJ/m²", s.total_heat_release_j_m2 * 1e-6),
        ),
        (
            "mass lost",
            format!(
                "{:.3} of {:.3} kg/m² ({:.1} %)",
                s.mass_lost_kg_m2,
                s.initial_mass_kg_m2,
                100.0 * s.mass_lost_kg_m2 / s.initial_mass_kg_m2
            ),
        ),
        (
            "energy balance",
            format!("{:.1e} of absorbed energy", s.energy.relative_residual()),
        ),
        (
            "mass balance",
            format!("{:.1e} of initial mass", s.mass.relative_residual()),
        ),
        (
            "steps",
            format!(
                "{} accepted, {} retried shorter",
                s.n_steps, s.n_rejected_steps
            ),
        ),
    ];
    for (label, value) in rows {
        out.push_str(&format!("  {label:<20} {value}\n"));
    }
    out
}

fn reduce(args: ReduceArgs) -> Result<()> {
    let is_csv = args
        .input
        .extension()
        .and_then(|e| e.to_str())
        .is_some_and(|e| matches!(e.to_lowercase().as_str(), "csv" | "txt" | "tsv"));
    let test = if is_csv {
        description_from_flags(&args)?
    } else {
        let csv_only = [
            ("--area-m2", args.area_m2.is_some()),
            ("--flux-kw-m2", args.flux_kw_m2.is_some()),
            ("--time-column", args.time_column.is_some()),
            ("--mass-column", args.mass_column.is_some()),
            ("--hrr-column", args.hrr_column.is_some()),
            ("--time-unit", args.time_unit.is_some()),
            ("--mass-unit", args.mass_unit.is_some()),
            ("--hrr-unit", args.hrr_unit.is_some()),
            ("--ignition-time-s", args.ignition_time_s.is_some()),
            ("--time-offset-s", args.time_offset_s.is_some()),
            ("--not-tared", args.not_tared),
            (
                "--heat-of-combustion-mj-kg",
                args.heat_of_combustion_mj_kg.is_some(),
            ),
            (
                "--combustion-efficiency",
                args.combustion_efficiency.is_some(),
            ),
            ("--smooth", args.smooth.is_some()),
        ];
        if let Some((flag, _)) = csv_only.iter().find(|(_, given)| *given) {
            bail!(
                "{flag} applies to a CSV input only; with a TEST.toml set it in the file \
                 (see docs/test-files.md)"
            );
        }
        TestDescription::load(&args.input).context("loading the test description")?
    };
    let reduced =
        reduce_test(&test).with_context(|| format!("reducing {}", test.source.display()))?;
    refuse_warnings_when_strict(&reduced.notices, args.strict)?;
    if let Some(out) = &args.out {
        write_atomically(out, reduced_curves_csv(&reduced).as_bytes())
            .with_context(|| format!("writing {}", out.display()))?;
    }
    if args.json {
        println!("{}", report_json(&reduced));
    } else {
        print_notices(&reduced.notices);
        print!("{}", report_table(&reduced));
        if let Some(out) = &args.out {
            println!(
                "curves written to {} ({} rows)",
                out.display(),
                reduced.time_s.len()
            );
        }
    }
    Ok(())
}

/// The test description a bare CSV and the flags make.
fn description_from_flags(args: &ReduceArgs) -> Result<TestDescription> {
    let Some(area_m2) = args.area_m2 else {
        bail!("a CSV input needs --area-m2 (exposed area, e.g. 0.01 for a 100 mm square)");
    };
    let Some(flux_kw_m2) = args.flux_kw_m2 else {
        bail!("a CSV input needs --flux-kw-m2 (irradiance set on the heater, e.g. 50)");
    };
    if !(area_m2 > 0.0 && area_m2 <= 1.0) {
        bail!("--area-m2 must be > 0 and at most 1 m², got {area_m2}");
    }
    if !(0.0..=200.0).contains(&flux_kw_m2) {
        bail!("--flux-kw-m2 must be within 0..200 kW/m², got {flux_kw_m2}");
    }
    let mut test = TestDescription::for_csv(&args.input, area_m2, flux_kw_m2);
    let column = |given: &Option<String>, default: &str, unit: &Option<String>| {
        let name = given.clone().unwrap_or_else(|| default.to_string());
        (!name.eq_ignore_ascii_case("none")).then(|| ColumnName {
            name,
            unit: unit.clone(),
            // A column the user named must exist; the default names may be absent.
            is_required: given.is_some(),
        })
    };
    if let Some(time) = column(&args.time_column, "time", &args.time_unit) {
        test.columns.time = ColumnName {
            is_required: true,
            ..time
        };
    } else {
        bail!("--time-column cannot be `none`: every record needs a time");
    }
    test.columns.mass = column(&args.mass_column, "mass", &args.mass_unit);
    test.columns.hrr = column(&args.hrr_column, "hrr", &args.hrr_unit);
    test.ignition_time_s = args.ignition_time_s;
    if let Some(t) = args.ignition_time_s {
        if t.is_nan() || t < 0.0 {
            bail!("--ignition-time-s must be >= 0, got {t}");
        }
    }
    test.time_offset_s = args.time_offset_s.unwrap_or(0.0);
    test.is_mass_tared = !args.not_tared;
    if let Some(heat_mj_kg) = args.heat_of_combustion_mj_kg {
        let efficiency = args.combustion_efficiency.unwrap_or(1.0);
        if !(1.0..=60.0).contains(&heat_mj_kg) {
            bail!("--heat-of-combustion-mj-kg must be within 1..60 MJ/kg, got {heat_mj_kg}");
        }
        if !(efficiency > 0.0 && efficiency <= 1.0) {
            bail!("--combustion-efficiency must be > 0 and at most 1, got {efficiency}");
        }
        test.hrr_from_mass = Some(HrrFromMass {
            heat_of_combustion_mj_kg: heat_mj_kg,
            combustion_efficiency: efficiency,
        });
    } else if args.combustion_efficiency.is_some() {
        bail!("--combustion-efficiency needs --heat-of-combustion-mj-kg");
    }
    if let Some(points) = args.smooth {
        if points < 3 || points % 2 == 0 {
            bail!("--smooth must be an odd number of points, at least 3, got {points}");
        }
        test.smoothing = Some(Smoothing {
            window_points: points,
            degree: 2,
        });
    }
    Ok(test)
}

fn report_json(reduced: &Reduced) -> serde_json::Value {
    let r = &reduced.report;
    serde_json::json!({
        "source": reduced.source.display().to_string(),
        "irradiance_kw_m2": reduced.irradiance_kw_m2,
        "exposed_area_m2": reduced.exposed_area_m2,
        "ignition_time_s": r.ignition_time_s,
        "ignition_time_source": match r.ignition_source {
            IgnitionSource::Given => "given",
            IgnitionSource::Detected => "detected",
            IgnitionSource::Unknown => "unknown",
        },
        "peak_hrr_kw_m2": r.peak_hrr_kw_m2,
        "time_to_peak_hrr_s": r.time_to_peak_hrr_s,
        "total_heat_release_mj_m2": r.total_heat_release_mj_m2,
        "avg_hrr_60_kw_m2": r.avg_hrr_60_kw_m2,
        "avg_hrr_180_kw_m2": r.avg_hrr_180_kw_m2,
        "avg_hrr_300_kw_m2": r.avg_hrr_300_kw_m2,
        "initial_mass_g": r.initial_mass_g,
        "mass_lost_g": r.mass_lost_g,
        "avg_mlr_10_90_g_m2s": r.avg_mlr_10_90_g_m2s,
        "peak_mlr_g_m2s": r.peak_mlr_g_m2s,
        "effective_heat_of_combustion_mj_kg": r.effective_heat_of_combustion_mj_kg,
        "mean_extinction_coefficient_1_m": r.mean_extinction_coefficient_1_m,
        "avg_specific_extinction_area_m2_kg": r.avg_specific_extinction_area_m2_kg,
        "total_smoke_release_m2_m2": r.total_smoke_release_m2_m2,
        "orifice_constant": reduced.orifice_constant,
        "end_time_s": r.end_time_s,
        "n_samples": reduced.time_s.len(),
        "notices": reduced.notices.iter().map(|n| n.message.clone()).collect::<Vec<_>>(),
    })
}

fn report_table(reduced: &Reduced) -> String {
    let r = &reduced.report;
    let value = |v: Option<f64>, decimals: usize, unit: &str| match v {
        Some(v) => format!("{v:.decimals$} {unit}"),
        None => "-".to_string(),
    };
    let ignition_note = match r.ignition_source {
        IgnitionSource::Given => " (given)",
        IgnitionSource::Detected => " (detected: HRR held above 10 % of peak; see docs)",
        IgnitionSource::Unknown => "",
    };
    let mut rows = vec![
        (
            "time to ignition",
            format!("{}{ignition_note}", value(r.ignition_time_s, 1, "s")),
        ),
        ("peak HRR", value(r.peak_hrr_kw_m2, 1, "kW/m²")),
        ("time to peak HRR", value(r.time_to_peak_hrr_s, 1, "s")),
        (
            "total heat release",
            value(r.total_heat_release_mj_m2, 2, "MJ/m²"),
        ),
        ("average HRR, 60 s", value(r.avg_hrr_60_kw_m2, 1, "kW/m²")),
        ("average HRR, 180 s", value(r.avg_hrr_180_kw_m2, 1, "kW/m²")),
        ("average HRR, 300 s", value(r.avg_hrr_300_kw_m2, 1, "kW/m²")),
        ("initial mass", value(r.initial_mass_g, 2, "g")),
        ("mass lost", value(r.mass_lost_g, 2, "g")),
        (
            "average MLR, 10–90 %",
            value(r.avg_mlr_10_90_g_m2s, 2, "g/(m²·s)"),
        ),
        ("peak MLR", value(r.peak_mlr_g_m2s, 2, "g/(m²·s)")),
        (
            "effective heat of combustion",
            value(r.effective_heat_of_combustion_mj_kg, 2, "MJ/kg"),
        ),
    ];
    if r.mean_extinction_coefficient_1_m.is_some() {
        rows.push((
            "mean extinction coefficient",
            value(r.mean_extinction_coefficient_1_m, 3, "1/m"),
        ));
        rows.push((
            "average specific extinction area",
            value(r.avg_specific_extinction_area_m2_kg, 1, "m²/kg"),
        ));
        rows.push((
            "total smoke release",
            value(r.total_smoke_release_m2_m2, 1, "m²/m²"),
        ));
    }
    if let Some(c) = reduced.orifice_constant {
        rows.push(("orifice constant", format!("{c:.5} m^½·kg^½·K^½")));
    }
    let mut out = format!(
        "{}: {} kW/m², {} m², {} samples to {:.0} s\n",
        reduced.source.display(),
        reduced.irradiance_kw_m2,
        reduced.exposed_area_m2,
        reduced.time_s.len(),
        r.end_time_s
    );
    for (name, text) in rows {
        out.push_str(&format!("  {name:<34}{text}\n"));
    }
    out
}

/// The reduced curves as CSV: one row per sample, a column per signal the test has.
fn reduced_curves_csv(reduced: &Reduced) -> String {
    let mut columns: Vec<(&str, &Vec<f64>)> = vec![("time_s", &reduced.time_s)];
    let optional = [
        ("hrr_kw_m2", &reduced.hrr_kw_m2),
        ("mlr_g_m2s", &reduced.mlr_g_m2s),
        ("mass_g", &reduced.mass_g),
        ("hrr_from_mass_kw_m2", &reduced.hrr_from_mass_kw_m2),
        (
            "extinction_coefficient_1_m",
            &reduced.extinction_coefficient_1_m,
        ),
        ("smoke_production_m2_s", &reduced.smoke_production_m2_s),
    ];
    for (name, values) in optional {
        if let Some(values) = values {
            columns.push((name, values));
        }
    }
    let mut out = columns.iter().map(|c| c.0).collect::<Vec<_>>().join(",");
    out.push('\n');
    for idx in 0..reduced.time_s.len() {
        let row: Vec<String> = columns
            .iter()
            .map(|(_, values)| {
                let v = values[idx];
                if v.is_finite() {
                    format!("{v}")
                } else {
                    String::new()
                }
            })
            .collect();
        out.push_str(&row.join(","));
        out.push('\n');
    }
    out
}

fn ignition(args: IgnitionArgs) -> Result<()> {
    let is_list = args.inputs.len() == 1 && is_ignition_list(&args.inputs[0])?;
    let (mut points, notices, mut settings) = if is_list {
        let list = IgnitionList::load(&args.inputs[0]).context("loading the ignition list")?;
        let (mut points, notices) =
            points_from_tests(&list.tests).context("reducing the listed tests")?;
        points.extend(list.points);
        (points, notices, list.settings)
    } else {
        let (points, notices) = points_from_tests(&args.inputs).context("reducing the tests")?;
        (points, notices, IgnitionSettings::default())
    };
    refuse_warnings_when_strict(&notices, args.strict)?;
    points.sort_by(|a, b| a.irradiance_kw_m2.total_cmp(&b.irradiance_kw_m2));
    if let Some(t_c) = args.ignition_temperature_c {
        if !(50.0..=1500.0).contains(&t_c) {
            bail!("--ignition-temperature-c must be within 50..1500 °C, got {t_c}");
        }
        settings.ignition_temperature_k = Some(t_c + 273.15);
    }
    if let Some(t_c) = args.ambient_temperature_c {
        if !(-40.0..=60.0).contains(&t_c) {
            bail!("--ambient-temperature-c must be within -40..60 °C, got {t_c}");
        }
        settings.ambient_temperature_k = t_c + 273.15;
    }
    let analysis = analyse(&points, &settings).context("analysing the ignition times")?;
    if args.json {
        println!("{}", ignition_json(&analysis, &notices));
    } else {
        print_notices(&notices);
        print!("{}", ignition_table(&analysis));
    }
    Ok(())
}

/// Prints repairs as `note:` and plausibility warnings as `warning:` lines on stderr.
fn print_notices(notices: &[Notice]) {
    use std::io::Write;
    let mut err = std::io::stderr();
    for notice in notices {
        let _ = writeln!(err, "{}: {notice}", notice.label());
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

/// Whether a single input is an ignition list (a TOML without `data_file`) rather than a test.
fn is_ignition_list(path: &Path) -> Result<bool> {
    let text = emberfit::input::read_text(path, emberfit::input::InputKind::Toml)
        .with_context(|| format!("cannot read {}", path.display()))?;
    let table: toml::Table =
        toml::from_str(&text).with_context(|| format!("cannot parse {}", path.display()))?;
    Ok(!table.contains_key("data_file"))
}

fn ignition_json(analysis: &IgnitionAnalysis, notices: &[Notice]) -> serde_json::Value {
    let fits: Vec<serde_json::Value> = analysis
        .fits
        .iter()
        .map(|f| {
            serde_json::json!({
                "correlation": f.correlation.name(),
                "exponent": f.correlation.exponent(),
                "slope": f.slope,
                "intercept": f.intercept,
                "critical_heat_flux_kw_m2": f.critical_heat_flux_kw_m2,
                "critical_heat_flux_95_kw_m2": f.critical_heat_flux_95_kw_m2,
                "r_squared": f.r_squared,
            })
        })
        .collect();
    serde_json::json!({
        "points": analysis.points.iter().map(|p| serde_json::json!({
            "irradiance_kw_m2": p.irradiance_kw_m2,
            "ignition_time_s": p.ignition_time_s,
            "label": p.label,
        })).collect::<Vec<_>>(),
        "n_irradiances": analysis.n_irradiances,
        "fits": fits,
        "thermal_response_parameter_kw_s05_m2": analysis.thermal_response_parameter_kw_s05_m2,
        "ignition_temperature_k": analysis.ignition_temperature.map(|t| t.0),
        "ignition_temperature_source": analysis.ignition_temperature.map(|t| match t.1 {
            IgnitionTemperatureSource::Given => "given",
            IgnitionTemperatureSource::FromCriticalHeatFlux => "from_critical_heat_flux",
        }),
        "apparent_krhoc_thick_kw2_s_m4_k2": analysis.apparent_krhoc_thick_kw2_s_m4_k2,
        "apparent_krhoc_janssens_kw2_s_m4_k2": analysis.apparent_krhoc_janssens_kw2_s_m4_k2,
        "heat_capacity_per_area_thin_kj_m2_k": analysis.heat_capacity_per_area_thin_kj_m2_k,
        "critical_heat_flux_from_balance_kw_m2": analysis.critical_heat_flux_from_balance_kw_m2,
        "warnings": analysis.warnings.iter().map(|w| w.message.clone()).collect::<Vec<_>>(),
        "notices": notices.iter().map(|n| n.message.clone()).collect::<Vec<_>>(),
    })
}

fn ignition_table(analysis: &IgnitionAnalysis) -> String {
    let mut out = format!(
        "{} tests at {} irradiances\n\n  irradiance kW/m²  t_ig s  test\n",
        analysis.points.len(),
        analysis.n_irradiances
    );
    for p in &analysis.points {
        out.push_str(&format!(
            "  {:>16.1}  {:>6.1}  {}\n",
            p.irradiance_kw_m2, p.ignition_time_s, p.label
        ));
    }
    out.push_str(
        "\n  form              t_ig exponent  critical heat flux kW/m²  95 % interval        R²\n",
    );
    for f in &analysis.fits {
        let interval = match f.critical_heat_flux_95_kw_m2 {
            Some([low, high]) => format!("{low:.1} .. {high:.1}"),
            None => "–".to_string(),
        };
        out.push_str(&format!(
            "  {:<16}  {:>13.3}  {:>24.2}  {:<16}  {:>6.4}\n",
            f.correlation.name(),
            f.correlation.exponent(),
            f.critical_heat_flux_kw_m2,
            interval,
            f.r_squared
        ));
    }
    out.push_str(&format!(
        "\n  thermal response parameter (thick)   {:.1} kW·s^½/m²\n",
        analysis.thermal_response_parameter_kw_s05_m2
    ));
    if let Some((t, source)) = analysis.ignition_temperature {
        let how = match source {
            IgnitionTemperatureSource::Given => "given",
            IgnitionTemperatureSource::FromCriticalHeatFlux => {
                "from the surface balance at Janssens' critical heat flux"
            }
        };
        out.push_str(&format!(
            "  ignition temperature                 {:.0} K ({:.0} °C, {how})\n",
            t,
            t - 273.15
        ));
    }
    let optional = [
        (
            "apparent kρc (thick)",
            analysis.apparent_krhoc_thick_kw2_s_m4_k2,
            "kW²·s/(m⁴·K²)",
        ),
        (
            "apparent kρc (Janssens)",
            analysis.apparent_krhoc_janssens_kw2_s_m4_k2,
            "kW²·s/(m⁴·K²)",
        ),
        (
            "heat capacity per area (thin)",
            analysis.heat_capacity_per_area_thin_kj_m2_k,
            "kJ/(m²·K)",
        ),
        (
            "critical heat flux at T_ig (balance)",
            analysis.critical_heat_flux_from_balance_kw_m2,
            "kW/m²",
        ),
    ];
    for (name, v, unit) in optional {
        if let Some(v) = v {
            out.push_str(&format!("  {name:<37}{v:.3} {unit}\n"));
        }
    }
    for w in &analysis.warnings {
        out.push_str(&format!("warning: {w}\n"));
    }
    out
}

/// The milligram-scale commands: `simulate` on a scenario with a `[programme]`, and
/// `isoconversional`.
mod milligram {
    use anyhow::{bail, Context, Result};

    use emberfit::export::write_atomically;
    use emberfit::microscale::fit::predicted_peak_temperature_k;
    use emberfit::microscale::isoconversional::{analyse, IsoconversionalReport};
    use emberfit::microscale::{
        fit_single_step, load_milligram_scenario, read_thermogram, simulate_programme, zero_d_csv,
        ConversionRun, SingleStepFit,
    };
    use emberfit::physics::zero_d::ZeroDHistory;

    use crate::cli::{IsoconversionalArgs, SimulateArgs};

    pub fn simulate(args: SimulateArgs) -> Result<()> {
        if args.flux.is_some() {
            bail!(
                "--flux does not apply to {}: it is a milligram-scale scenario (a heating \
                 programme, no irradiance)",
                args.scenario.display()
            );
        }
        if args.duration.is_some() {
            bail!(
                "--duration does not apply to {}: the heating programme sets the duration",
                args.scenario.display()
            );
        }
        let mut scenario =
            load_milligram_scenario(&args.scenario).context("loading the scenario")?;
        if let Some(material) = &args.material {
            let model = emberfit::case::load_material(material).context("loading the material")?;
            scenario
                .use_material(material, model)
                .with_context(|| format!("using {} for the sample", material.display()))?;
        }
        let history = simulate_programme(&scenario)
            .with_context(|| format!("simulating {}", scenario.path.display()))?;
        if let Some(out) = &args.out {
            let bytes = zero_d_csv(&history).context("formatting the curves")?;
            write_atomically(out, &bytes).with_context(|| format!("writing {}", out.display()))?;
        }
        let summary = Summary::of(&history);
        if args.json {
            println!(
                "{}",
                serde_json::json!({
                    "peak_mlr_per_s": summary.peak_rate_per_s,
                    "peak_mlr_temperature_k": summary.peak_temperature_k,
                    "final_mass_fraction": summary.final_mass_fraction,
                    "dsc_heat_j_g": summary.dsc_j_g,
                    "mcc_heat_j_g": summary.mcc_j_g,
                    "steps": history.n_steps,
                })
            );
        } else {
            println!("{}", scenario.title);
            println!(
                "  {:<20} {:.3e} 1/s ({:.2} %/min) at {:.1} K",
                "peak mass-loss rate",
                summary.peak_rate_per_s,
                summary.peak_rate_per_s * 6000.0,
                summary.peak_temperature_k
            );
            println!(
                "  {:<20} {:.4}",
                "final mass fraction", summary.final_mass_fraction
            );
            println!("  {:<20} {:.1} J/g", "DSC heat", summary.dsc_j_g);
            println!(
                "  {:<20} {:.2} kJ/g",
                "MCC heat release",
                summary.mcc_j_g * 1e-3
            );
            println!("  {:<20} {}", "steps", history.n_steps);
            if let Some(out) = &args.out {
                println!(
                    "curves written to {} ({} rows)",
                    out.display(),
                    history.time_s.len()
                );
            }
        }
        Ok(())
    }

    struct Summary {
        peak_rate_per_s: f64,
        peak_temperature_k: f64,
        final_mass_fraction: f64,
        dsc_j_g: f64,
        mcc_j_g: f64,
    }

    impl Summary {
        fn of(history: &ZeroDHistory) -> Self {
            let (_, peak_temperature_k, peak_rate_per_s) = history
                .mass_loss_rate_peak()
                .unwrap_or((0.0, f64::NAN, 0.0));
            let integral = |values: &[f64]| -> f64 {
                history
                    .time_s
                    .windows(2)
                    .zip(values.windows(2))
                    .map(|(t, v)| 0.5 * (t[1] - t[0]) * (v[0] + v[1]))
                    .sum()
            };
            Summary {
                peak_rate_per_s,
                peak_temperature_k,
                final_mass_fraction: history.mass_fraction.last().copied().unwrap_or(1.0),
                dsc_j_g: integral(&history.dsc_w_g),
                mcc_j_g: integral(&history.mcc_w_g),
            }
        }
    }

    pub fn isoconversional(args: IsoconversionalArgs) -> Result<()> {
        let is_fraction = |v: f64| (0.0..=1.0).contains(&v);
        if !(is_fraction(args.from) && is_fraction(args.to) && args.from < args.to) {
            bail!(
                "--from and --to must satisfy 0 ≤ from < to ≤ 1, got {} and {}",
                args.from,
                args.to
            );
        }
        if !(args.step > 0.0 && args.step <= args.to - args.from) {
            bail!(
                "--step must be > 0 and at most to − from ({}), got {}",
                args.to - args.from,
                args.step
            );
        }
        if !(args.max_spread > 0.0 && args.max_spread.is_finite()) {
            bail!("--max-spread must be > 0 %, got {}", args.max_spread);
        }
        let n_steps = ((args.to - args.from) / args.step + 1e-9).floor() as usize;
        let conversions: Vec<f64> = (0..=n_steps)
            .map(|idx| args.from + idx as f64 * args.step)
            .collect();
        let mut runs = Vec::with_capacity(args.files.len());
        for path in &args.files {
            let thermogram = read_thermogram(path).context("reading a run")?;
            for notice in &thermogram.notices {
                eprintln!("note: {notice}");
            }
            runs.push(ConversionRun::from_thermogram(&thermogram).context("preparing a run")?);
        }
        let report = analyse(&runs, &conversions, args.max_spread / 100.0)
            .context("isoconversional analysis")?;
        let fit = if args.fit {
            Some(fit_single_step(&runs, true).context("fitting one reaction")?)
        } else {
            None
        };
        let mut predicted = Vec::new();
        if let Some(fit) = &fit {
            for run in &runs {
                predicted.push(
                    predicted_peak_temperature_k(fit, run.heating_rate_k_s)
                        .context("simulating the fitted reaction")?,
                );
            }
        }
        if let Some(out) = &args.out {
            write_atomically(out, profile_csv(&conversions, &report).as_bytes())
                .with_context(|| format!("writing {}", out.display()))?;
        }
        if args.json {
            println!("{}", report_json(&runs, &report, fit.as_ref(), &predicted));
        } else {
            print!("{}", report_table(&runs, &report, fit.as_ref(), &predicted));
        }
        for warning in &report.warnings {
            eprintln!("warning: {warning}");
        }
        Ok(())
    }

    fn report_json(
        runs: &[ConversionRun],
        report: &IsoconversionalReport,
        fit: Option<&SingleStepFit>,
        predicted: &[f64],
    ) -> serde_json::Value {
        let methods: serde_json::Map<String, serde_json::Value> = report
            .profiles
            .iter()
            .map(|(method, points)| {
                let rows: Vec<serde_json::Value> = points
                    .iter()
                    .map(|p| {
                        serde_json::json!({
                            "conversion": p.conversion,
                            "activation_energy_kj_mol": p.activation_energy_j_mol * 1e-3,
                            "standard_error_kj_mol": finite(p.standard_error_j_mol * 1e-3),
                            "r_squared": p.r_squared,
                            "runs": p.n_runs,
                        })
                    })
                    .collect();
                (method.name().to_string(), serde_json::Value::Array(rows))
            })
            .collect();
        let k = &report.kissinger;
        serde_json::json!({
            "runs": runs.iter().zip(&k.peaks).map(|(run, peak)| serde_json::json!({
                "file": run.label,
                "heating_rate_k_min": run.heating_rate_k_s * 60.0,
                "peak_temperature_k": peak.1,
            })).collect::<Vec<_>>(),
            "methods": methods,
            "kissinger": {
                "activation_energy_kj_mol": k.activation_energy_j_mol * 1e-3,
                "standard_error_kj_mol": finite(k.standard_error_j_mol * 1e-3),
                "pre_exponential_per_s": k.pre_exponential_per_s,
                "r_squared": k.r_squared,
            },
            "single_step_fit": fit.map(|f| serde_json::json!({
                "pre_exponential_per_s": f.pre_exponential_per_s,
                "activation_energy_kj_mol": f.activation_energy_j_mol * 1e-3,
                "order": f.order,
                "rms_conversion_error": f.rms_conversion_error,
                "predicted_peak_temperatures_k": predicted,
            })),
            "warnings": report.warnings,
        })
    }

    /// E against conversion as CSV: `conversion`, then `<method>_e_kj_mol`,
    /// `<method>_se_kj_mol`, `<method>_r2` for each method; blank where a method has no value.
    fn profile_csv(conversions: &[f64], report: &IsoconversionalReport) -> String {
        let mut out = String::from("conversion");
        for (method, _) in &report.profiles {
            let name = method.name();
            out.push_str(&format!(",{name}_e_kj_mol,{name}_se_kj_mol,{name}_r2"));
        }
        out.push('\n');
        let cell = |v: f64, decimals: usize| {
            if v.is_finite() {
                format!("{v:.decimals$}")
            } else {
                String::new()
            }
        };
        for &conversion in conversions {
            out.push_str(&format!("{conversion:.4}"));
            for (_, points) in &report.profiles {
                match points
                    .iter()
                    .find(|p| (p.conversion - conversion).abs() < 1e-12)
                {
                    Some(p) => out.push_str(&format!(
                        ",{},{},{}",
                        cell(p.activation_energy_j_mol * 1e-3, 3),
                        cell(p.standard_error_j_mol * 1e-3, 3),
                        cell(p.r_squared, 6)
                    )),
                    None => out.push_str(",,,"),
                }
            }
            out.push('\n');
        }
        out
    }

    /// JSON has no NaN: a standard error that two runs cannot give becomes null.
    fn finite(value: f64) -> Option<f64> {
        value.is_finite().then_some(value)
    }

    fn report_table(
        runs: &[ConversionRun],
        report: &IsoconversionalReport,
        fit: Option<&SingleStepFit>,
        predicted: &[f64],
    ) -> String {
        let mut out = String::new();
        out.push_str("runs\n");
        for (idx, (run, peak)) in runs.iter().zip(&report.kissinger.peaks).enumerate() {
            out.push_str(&format!(
                "  {:>2}  {:>7.2} K/min  peak {:>6.1} K  {}\n",
                idx + 1,
                run.heating_rate_k_s * 60.0,
                peak.1,
                run.label
            ));
        }
        let error = |se: f64| {
            if se.is_finite() {
                format!("{:>6.1}", se * 1e-3)
            } else {
                format!("{:>6}", "-")
            }
        };
        for (method, points) in &report.profiles {
            out.push_str(&format!(
                "\n{}: E against conversion (kJ/mol, ± standard error, R²)\n",
                method.name()
            ));
            out.push_str("   alpha       E     ±      R²  runs\n");
            for p in points {
                out.push_str(&format!(
                    "  {:>6.3} {:>7.1} {} {:>7.4} {:>5}\n",
                    p.conversion,
                    p.activation_energy_j_mol * 1e-3,
                    error(p.standard_error_j_mol),
                    p.r_squared,
                    p.n_runs
                ));
            }
        }
        let k = &report.kissinger;
        out.push_str(&format!(
            "\nkissinger (peak temperatures): E {:.1} ± {} kJ/mol, A {:.3e} 1/s, R² {:.4}\n",
            k.activation_energy_j_mol * 1e-3,
            error(k.standard_error_j_mol).trim(),
            k.pre_exponential_per_s,
            k.r_squared
        ));
        if let Some(fit) = fit {
            out.push_str(&format!(
                "single-step fit: A {:.4e} 1/s, E {:.2} kJ/mol, order {:.3}, rms conversion \
                 error {:.4}\n",
                fit.pre_exponential_per_s,
                fit.activation_energy_j_mol * 1e-3,
                fit.order,
                fit.rms_conversion_error
            ));
            out.push_str(&format!(
                "  as a [[reaction]] of a material file (docs/file-formats.md):\n    \
                 pre_exponential_per_s = {:.4e}\n    activation_energy_kj_mol = {:.2}\n    \
                 order = {:.3}\n",
                fit.pre_exponential_per_s,
                fit.activation_energy_j_mol * 1e-3,
                fit.order
            ));
            for ((run, peak), model_k) in runs.iter().zip(&k.peaks).zip(predicted) {
                out.push_str(&format!(
                    "  {:>7.2} K/min  peak measured {:.1} K, model {:.1} K\n",
                    run.heating_rate_k_s * 60.0,
                    peak.1,
                    model_k
                ));
            }
        }
        out
    }
}
