//! `fit --detach`: the same fit, headless, in a background process with its own session (so a
//! closed terminal or a dropped SSH link sends it no hang-up), its output in `fit.log`.
//!
//! **Invariant:** the background process gets the user's own arguments, in order, less
//! `--detach`, plus `--headless` and the run's name: no flag is rebuilt by hand, so none can
//! be dropped (a unit test re-parses them).

use std::ffi::OsString;

use anyhow::{bail, Context, Result};

use emberfit::run::RunDirectory;

use super::fit::{refuse_existing_run, run_name};
use crate::cli::FitArgs;

/// The flag this module strips from the arguments it passes on.
const DETACH_FLAG: &str = "--detach";

pub(super) fn fit_detached(args: &FitArgs) -> Result<()> {
    use std::os::unix::process::CommandExt;
    use std::process::{Command as Process, Stdio};

    // Refuse a bad job here, where the user can see the message.
    emberfit::fit::job::load_job(&args.job).context("reading the fit job")?;
    let name = run_name(args);
    emberfit::run::fingerprint::check_run_name(&name).map_err(anyhow::Error::msg)?;
    if let Some(threads) = args.threads {
        emberfit::limits::check_threads(threads).map_err(anyhow::Error::msg)?;
    }
    let directory = RunDirectory::new(&args.runs_dir.join(&name));
    refuse_existing_run(&directory, args.resume)?;
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
    let original: Vec<OsString> = std::env::args_os().skip(1).collect();
    let mut command = Process::new(exe);
    command
        .args(detached_arguments(&original, args.name.is_none(), &name))
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

/// The background process's arguments from the user's (`original`, without the program
/// name): every one passed on in order but `--detach` (before a `--` that ends the options),
/// with `--headless` and, when the user gave no name (`add_name`), `--name NAME` put right
/// after the `fit` subcommand, so they stay options whatever follows.
fn detached_arguments(original: &[OsString], add_name: bool, name: &str) -> Vec<OsString> {
    let mut out = Vec::with_capacity(original.len() + 3);
    let mut is_past_options = false;
    let mut is_past_subcommand = false;
    for arg in original {
        if !is_past_options && arg == "--" {
            is_past_options = true;
        } else if !is_past_options && arg == DETACH_FLAG {
            continue;
        }
        out.push(arg.clone());
        if !is_past_subcommand && arg == "fit" {
            is_past_subcommand = true;
            out.push("--headless".into());
            if add_name {
                out.push("--name".into());
                out.push(name.into());
            }
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use clap::{CommandFactory, Parser};

    use crate::cli::{Cli, Command};

    fn fit_args(words: &[OsString]) -> FitArgs {
        let mut argv = vec![OsString::from("emberfit")];
        argv.extend(words.iter().cloned());
        match Cli::try_parse_from(argv).map(|cli| cli.command) {
            Ok(Command::Fit(args)) => args,
            other => panic!("not a fit command: {other:?}"),
        }
    }

    /// Every `fit` option is given here. A new option fails the first assertion until it is
    /// added, and then the round trip below shows whether the background process gets it.
    const EVERY_OPTION: [&str; 16] = [
        "fit",
        "jobs/panel.toml",
        "--name",
        "overnight",
        "--runs-dir",
        "elsewhere",
        "--resume",
        "--threads",
        "3",
        "--time",
        "2h",
        "--max-evaluations",
        "500",
        "--seed",
        "7",
        "--strict",
    ];

    #[test]
    fn the_background_fit_gets_every_option_the_user_gave() {
        let mut given: Vec<OsString> = EVERY_OPTION.iter().map(OsString::from).collect();
        given.insert(2, DETACH_FLAG.into());
        let mut argv = vec![OsString::from("emberfit")];
        argv.extend(given.iter().cloned());
        let matches = Cli::command().get_matches_from(argv);
        let (_, fit_matches) = matches.subcommand().expect("a subcommand");
        let fit_command = Cli::command();
        let fit_command = fit_command.find_subcommand("fit").expect("a fit command");
        for arg in fit_command.get_arguments() {
            let id = arg.get_id().as_str();
            // `--headless` conflicts with `--detach`: the background process is given it.
            if id == "headless" {
                continue;
            }
            assert_eq!(
                fit_matches.value_source(id),
                Some(clap::parser::ValueSource::CommandLine),
                "`{id}` is missing from EVERY_OPTION"
            );
        }
        let original = fit_args(&given);
        let passed = detached_arguments(&given, original.name.is_none(), "overnight");
        let child = fit_args(&passed);
        let expected = FitArgs {
            detach: false,
            headless: true,
            ..original
        };
        assert_eq!(format!("{child:?}"), format!("{expected:?}"));
    }

    #[test]
    fn an_unnamed_run_gets_the_name_the_parent_chose() {
        let given: Vec<OsString> = ["fit", "--detach", "--", "job.toml"]
            .iter()
            .map(OsString::from)
            .collect();
        let passed = detached_arguments(&given, true, "job-2");
        assert_eq!(
            passed,
            ["fit", "--headless", "--name", "job-2", "--", "job.toml"]
                .map(OsString::from)
                .to_vec()
        );
        let child = fit_args(&passed);
        assert_eq!(child.name.as_deref(), Some("job-2"));
        assert!(child.headless && !child.detach);
    }
}
