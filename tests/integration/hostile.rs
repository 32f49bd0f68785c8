//! Hostile input (issue 15): every broken or extreme input ends in a clear error naming file,
//! line and key, signals and closed pipes end the process cleanly, and no run is lost.
//!
//! `every_bad_input_fixture_is_run_and_gives_its_stated_message` LISTS tests/bad-input: each
//! file either carries its own expectation in its first comment lines, or is named by a file
//! that does (a material, a data file), or by one of the older tests that keep their own
//! lists (cli.rs, data.rs, milligram_fit.rs). A new fixture with none of these fails the test.
//!
//! The header of a fixture (comment lines at the top):
//!   `# run: reduce {file} --strict`  the command (default by folder: `simulate {file}` at the
//!                                     top, `reduce` in data/, `fit --headless` in fit/);
//!                                     `{runs}` is a scratch runs folder
//!   `# exit: 0`                       the expected exit code (default 1)
//!   `# expect: TEXT`                  a fragment the output must contain (one or more)

use std::io::Read;
use std::path::{Path, PathBuf};
use std::process::{Command, Output, Stdio};
use std::time::{Duration, Instant};

fn manifest() -> &'static Path {
    Path::new(env!("CARGO_MANIFEST_DIR"))
}

fn emberfit() -> Command {
    let mut command = Command::new(env!("CARGO_BIN_EXE_emberfit"));
    command.current_dir(manifest());
    command
}

fn run(args: &[&str]) -> Output {
    emberfit()
        .args(args)
        .output()
        .expect("the emberfit binary runs")
}

fn scratch(name: &str) -> PathBuf {
    let dir = std::env::temp_dir().join(format!("emberfit-hostile-{name}-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&dir);
    std::fs::create_dir_all(&dir).expect("temp dir");
    dir
}

fn files_under(dir: &Path, out: &mut Vec<PathBuf>) {
    let mut entries: Vec<PathBuf> = std::fs::read_dir(dir)
        .expect("tests/bad-input lists")
        .filter_map(Result::ok)
        .map(|e| e.path())
        .collect();
    entries.sort();
    for path in entries {
        if path.is_dir() {
            files_under(&path, out);
        } else {
            out.push(path);
        }
    }
}

struct Expectation {
    args: Vec<String>,
    exit: i32,
    fragments: Vec<String>,
}

fn expectation(path: &Path, relative: &str, runs: &Path) -> Option<Expectation> {
    let text = std::fs::read_to_string(path).ok()?;
    let mut command = None;
    let mut exit = 1;
    let mut fragments = Vec::new();
    for line in text.lines().take_while(|l| l.starts_with('#')) {
        if let Some(rest) = line.strip_prefix("# run:") {
            command = Some(rest.trim().to_string());
        } else if let Some(rest) = line.strip_prefix("# exit:") {
            exit = rest.trim().parse().expect("`# exit:` holds a number");
        } else if let Some(rest) = line.strip_prefix("# expect:") {
            fragments.push(rest.trim().to_string());
        }
    }
    if fragments.is_empty() {
        return None;
    }
    let command = command.unwrap_or_else(|| {
        if relative.contains("/data/") {
            "reduce {file}".into()
        } else if relative.contains("/fit/") {
            "fit {file} --headless --runs-dir {runs}".into()
        } else {
            "simulate {file}".into()
        }
    });
    let args = command
        .split_whitespace()
        .map(|word| {
            word.replace("{file}", relative)
                .replace("{runs}", &runs.display().to_string())
        })
        .collect();
    Some(Expectation {
        args,
        exit,
        fragments,
    })
}

/// Every file in tests/bad-input is run (or named by a file or test that runs it), exits as
/// stated, never panics, and its message holds the stated file:line: `key` fragments.
#[test]
fn every_bad_input_fixture_is_run_and_gives_its_stated_message() {
    let root = manifest().join("tests/bad-input");
    let runs = scratch("fixtures-runs");
    let mut files = Vec::new();
    files_under(&root, &mut files);
    let older_tests: String = ["cli.rs", "data.rs", "milligram_fit.rs"]
        .iter()
        .map(|f| {
            std::fs::read_to_string(manifest().join("tests/integration").join(f))
                .expect("the older test lists read")
        })
        .collect();
    let mut run_count = 0;
    let mut claimed_by_runs = String::new();
    let mut unclaimed = Vec::new();
    let mut failures = Vec::new();
    for path in &files {
        let relative = path
            .strip_prefix(manifest())
            .expect("inside the repository")
            .display()
            .to_string();
        let Some(expect) = expectation(path, &relative, &runs) else {
            continue;
        };
        run_count += 1;
        claimed_by_runs.push_str(&std::fs::read_to_string(path).unwrap_or_default());
        let output = emberfit()
            .args(&expect.args)
            .output()
            .expect("emberfit runs");
        let all = format!(
            "{}{}",
            String::from_utf8_lossy(&output.stdout),
            String::from_utf8_lossy(&output.stderr)
        );
        if output.status.code() != Some(expect.exit) {
            failures.push(format!(
                "{relative}: exit {:?}, expected {}:\n{all}",
                output.status.code(),
                expect.exit
            ));
        }
        if all.contains("panicked") {
            failures.push(format!("{relative}: panicked:\n{all}"));
        }
        for fragment in &expect.fragments {
            if !all.contains(fragment.as_str()) {
                failures.push(format!("{relative}: expected `{fragment}` in:\n{all}"));
            }
        }
    }
    // Claimed: a file with its own expectation, or named by an older test, or named by a
    // claimed file (a material or data file of a claimed fixture), to a fixed point.
    let name_of = |path: &PathBuf| path.file_name().unwrap().to_string_lossy().to_string();
    let mut claimed: Vec<bool> = files
        .iter()
        .map(|path| {
            let relative = path.strip_prefix(manifest()).unwrap().display().to_string();
            expectation(path, &relative, &runs).is_some()
                || older_tests.contains(&name_of(path))
                || name_of(path) == "README.md"
        })
        .collect();
    loop {
        let claimed_text: String = files
            .iter()
            .zip(&claimed)
            .filter(|(_, c)| **c)
            .map(|(p, _)| std::fs::read_to_string(p).unwrap_or_default())
            .collect();
        let mut changed = false;
        for (path, c) in files.iter().zip(claimed.iter_mut()) {
            if !*c && claimed_text.contains(&name_of(path)) {
                *c = true;
                changed = true;
            }
        }
        if !changed {
            break;
        }
    }
    let _ = &claimed_by_runs;
    for (path, c) in files.iter().zip(&claimed) {
        if !c {
            unclaimed.push(path.strip_prefix(manifest()).unwrap().display().to_string());
        }
    }
    assert!(
        unclaimed.is_empty(),
        "fixtures no test runs (give each a `# expect:` header): {unclaimed:?}"
    );
    assert!(failures.is_empty(), "{}", failures.join("\n\n"));
    assert!(
        run_count >= 25,
        "only {run_count} fixtures carry expectations"
    );
    // A fixture that was refused left no run behind.
    assert_eq!(std::fs::read_dir(&runs).map(|d| d.count()).unwrap_or(0), 0);
    std::fs::remove_dir_all(&runs).ok();
}

/// Non-regular files are refused before they are opened: a FIFO would block for ever and
/// /dev/zero would fill the memory; a directory is no file.
#[test]
fn a_fifo_a_device_and_a_directory_are_refused_at_once() {
    let dir = scratch("non-regular");
    let fifo = dir.join("data.csv");
    let c_path = std::ffi::CString::new(fifo.to_string_lossy().as_bytes()).unwrap();
    // SAFETY: a valid NUL-terminated path.
    assert_eq!(unsafe { libc::mkfifo(c_path.as_ptr(), 0o600) }, 0);
    std::fs::write(
        dir.join("test.toml"),
        "data_file = \"data.csv\"\nirradiance_kw_m2 = 50\nexposed_area_m2 = 0.01\n\
         [columns]\ntime = \"Time\"\nmass = \"Mass\"\n",
    )
    .unwrap();
    let fifo_scenario = dir.join("material.toml");
    let c_material = std::ffi::CString::new(fifo_scenario.to_string_lossy().as_bytes()).unwrap();
    // SAFETY: as above.
    assert_eq!(unsafe { libc::mkfifo(c_material.as_ptr(), 0o600) }, 0);
    std::fs::write(
        dir.join("scenario.toml"),
        "title = \"t\"\nduration_s = 10.0\n[[layer]]\nmaterial = \"material.toml\"\n\
         thickness_mm = 6.0\n[exposure]\nirradiance_kw_m2 = 50.0\n",
    )
    .unwrap();
    let test = dir.join("test.toml");
    let scenario = dir.join("scenario.toml");
    let cases: [(Vec<&str>, &str); 5] = [
        (
            vec!["reduce", test.to_str().unwrap()],
            "data.csv: it is a named pipe (FIFO); expected a data table",
        ),
        (
            vec!["simulate", scenario.to_str().unwrap()],
            "material.toml: it is a named pipe (FIFO); expected a TOML file",
        ),
        (
            vec!["simulate", "/dev/zero"],
            "cannot read /dev/zero: it is a character device",
        ),
        (vec!["reduce", "/dev/zero"], "it is a character device"),
        (vec!["simulate", "tests"], "it is a directory"),
    ];
    for (args, expected) in cases {
        let started = Instant::now();
        let output = run(&args);
        let stderr = String::from_utf8_lossy(&output.stderr);
        assert_eq!(output.status.code(), Some(1), "{args:?}: {stderr}");
        assert!(
            stderr.contains(expected),
            "{args:?}: expected `{expected}` in {stderr}"
        );
        assert!(!stderr.contains("panicked"), "{stderr}");
        assert!(
            started.elapsed() < Duration::from_secs(20),
            "{args:?} took too long"
        );
    }
    std::fs::remove_dir_all(&dir).ok();
}

/// Command-line values: thread counts are bounded, run names stay inside the runs folder, a
/// negative number after a space is a value, and `--duration` is bounded like the file key.
#[test]
fn command_line_values_are_bounded_and_named() {
    let runs = scratch("cli-runs");
    let runs_arg = runs.to_str().unwrap();
    let job = "demo-cases/ridgeline-panel/fit.toml";
    let cases: [(Vec<&str>, &str); 8] = [
        (
            vec![
                "fit",
                job,
                "--headless",
                "--threads",
                "10000",
                "--runs-dir",
                runs_arg,
            ],
            "--threads 10000 is more than",
        ),
        (
            vec![
                "fit",
                job,
                "--headless",
                "--name",
                "../x",
                "--runs-dir",
                runs_arg,
            ],
            "run name `../x` contains a path separator",
        ),
        (
            vec![
                "fit",
                job,
                "--headless",
                "--name",
                "/tmp/x",
                "--runs-dir",
                runs_arg,
            ],
            "run name `/tmp/x` contains a path separator",
        ),
        (
            vec![
                "fit",
                job,
                "--headless",
                "--name",
                "a/b/c",
                "--runs-dir",
                runs_arg,
            ],
            "contains a path separator",
        ),
        (
            vec![
                "fit",
                job,
                "--headless",
                "--name",
                "",
                "--runs-dir",
                runs_arg,
            ],
            "run name `` is empty",
        ),
        (
            vec![
                "simulate",
                "demo-cases/ridgeline-panel/scenario.toml",
                "--flux",
                "-5",
            ],
            "--flux must be within 0..500 kW/m², got -5",
        ),
        (
            vec![
                "simulate",
                "demo-cases/ridgeline-panel/scenario.toml",
                "--duration",
                "1e12",
            ],
            "--duration 1000000000000 s is more than 1e6 s",
        ),
        (
            vec![
                "predict",
                "models/thermoplastic.toml",
                "demo-cases/ridgeline-panel/scenario.toml",
                "--threads",
                "100000",
            ],
            "--threads 100000 is more than",
        ),
    ];
    for (args, expected) in cases {
        let output = run(&args);
        let stderr = String::from_utf8_lossy(&output.stderr);
        assert_eq!(output.status.code(), Some(1), "{args:?}: {stderr}");
        assert!(
            stderr.contains(expected),
            "{args:?}: expected `{expected}` in {stderr}"
        );
        assert!(!stderr.contains("panicked"), "{stderr}");
    }
    assert_eq!(std::fs::read_dir(&runs).map(|d| d.count()).unwrap_or(0), 0);
    std::fs::remove_dir_all(&runs).ok();
}

/// A closed pipe ends a command quietly (no panic, no exit 101): `emberfit ... | head -1`.
#[test]
fn a_closed_pipe_is_a_quiet_exit() {
    for args in [
        vec![
            "simulate",
            "demo-cases/ridgeline-panel/scenario.toml",
            "--duration",
            "60",
        ],
        vec!["reduce", "demo-cases/ridgeline-panel/harbour-lab-50kw.toml"],
        vec!["--help"],
    ] {
        let mut child = emberfit()
            .args(&args)
            .stdout(Stdio::piped())
            .stderr(Stdio::piped())
            .spawn()
            .expect("emberfit starts");
        // Read nothing: close our end at once, as `head` does after its lines.
        drop(child.stdout.take());
        let mut stderr = String::new();
        child
            .stderr
            .take()
            .unwrap()
            .read_to_string(&mut stderr)
            .unwrap();
        let status = child.wait().unwrap();
        assert_ne!(status.code(), Some(101), "{args:?}: {stderr}");
        assert!(!stderr.contains("panicked"), "{args:?}: {stderr}");
    }
}

/// A fit whose stdout and stderr go to a pipe closed after the first line (`2>&1 | head -1`)
/// still ends cleanly with all its outputs.
#[test]
fn a_fit_into_a_closed_pipe_still_writes_its_outputs() {
    let runs = scratch("epipe-runs");
    let mut child = emberfit()
        .args([
            "fit",
            "demo-cases/ridgeline-panel/fit.toml",
            "--headless",
            "--threads",
            "1",
            "--max-evals",
            "40",
            "--name",
            "piped",
            "--runs-dir",
        ])
        .arg(&runs)
        .stdout(Stdio::null())
        .stderr(Stdio::piped())
        .spawn()
        .expect("emberfit starts");
    let mut stderr = child.stderr.take().unwrap();
    let mut first = [0u8; 16];
    let _ = stderr.read(&mut first);
    drop(stderr);
    let status = child.wait().unwrap();
    assert_eq!(status.code(), Some(0), "{status}");
    for file in ["summary.json", "best.toml", "parameters.csv"] {
        assert!(runs.join("piped").join(file).is_file(), "{file} missing");
    }
    assert!(
        !runs.join("piped/run.lock").exists(),
        "the lock is left behind"
    );
    std::fs::remove_dir_all(&runs).ok();
}

fn start_fit(runs: &Path, name: &str, extra: &[&str]) -> std::process::Child {
    emberfit()
        .args([
            "fit",
            "demo-cases/ridgeline-panel/fit.toml",
            "--headless",
            "--threads",
            "1",
            "--name",
            name,
            "--runs-dir",
        ])
        .arg(runs)
        .args(extra)
        .stdin(Stdio::null())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("emberfit starts")
}

fn wait_for(path: &Path, within: Duration) -> bool {
    let started = Instant::now();
    while started.elapsed() < within {
        if path.exists() {
            return true;
        }
        std::thread::sleep(Duration::from_millis(50));
    }
    false
}

/// SIGTERM ends a headless fit after it writes its outputs; while it runs, its run.lock names
/// its pid and refuses a concurrent `--resume`; a stale lock is taken over; a resume keeps
/// the `--max-evals` given at the start; a resume with another job is refused, naming both.
#[test]
fn sigterm_lock_and_fingerprint_keep_the_run() {
    let runs = scratch("lock-runs");
    let dir = runs.join("held");
    let mut fit = start_fit(&runs, "held", &["--max-evals", "100000"]);
    assert!(
        wait_for(&dir.join("checkpoint.json"), Duration::from_secs(60)),
        "the fit wrote no checkpoint"
    );
    let lock = std::fs::read_to_string(dir.join("run.lock")).expect("run.lock exists");
    assert_eq!(lock.lines().next(), Some(fit.id().to_string().as_str()));
    assert_eq!(emberfit::run::lock::holder_pid(&dir), Some(fit.id()));

    // A second process on the same run is refused, naming the holder.
    let second = run(&[
        "fit",
        "demo-cases/ridgeline-panel/fit.toml",
        "--headless",
        "--resume",
        "--name",
        "held",
        "--runs-dir",
        runs.to_str().unwrap(),
    ]);
    let stderr = String::from_utf8_lossy(&second.stderr);
    assert_eq!(second.status.code(), Some(1), "{stderr}");
    assert!(
        stderr.contains(&format!("in use by the fit with pid {}", fit.id())),
        "{stderr}"
    );

    // SIGTERM: the fit stops after its iteration, writes everything and exits by itself.
    // SAFETY: signalling our own child.
    unsafe {
        libc::kill(fit.id() as libc::pid_t, libc::SIGTERM);
    }
    let started = Instant::now();
    let status = loop {
        if let Some(status) = fit.try_wait().unwrap() {
            break status;
        }
        assert!(
            started.elapsed() < Duration::from_secs(120),
            "the fit did not exit after SIGTERM"
        );
        std::thread::sleep(Duration::from_millis(100));
    };
    assert_eq!(status.code(), Some(0));
    assert!(dir.join("summary.json").is_file());
    assert!(!dir.join("run.lock").exists());
    let summary: serde_json::Value =
        serde_json::from_slice(&std::fs::read(dir.join("summary.json")).unwrap()).unwrap();
    assert_eq!(summary["reason"], "stopped on request");
    let record = std::fs::read_to_string(dir.join("run.toml")).unwrap();
    assert!(record.contains("max_evaluations = 100000"), "{record}");
    assert!(record.contains("job_sha256"), "{record}");

    // A stale lock (a pid that is not alive) is taken over with a note in the log, and the
    // resumed run keeps the budget given at the start: it is not the job's 4000.
    std::fs::write(dir.join("run.lock"), "4000000000\nhost = gone\n").unwrap();
    let mut resumed = start_fit(&runs, "held", &["--resume", "--time", "2s"]);
    let status = resumed.wait().unwrap();
    let mut err = String::new();
    resumed
        .stderr
        .take()
        .unwrap()
        .read_to_string(&mut err)
        .unwrap();
    assert_eq!(status.code(), Some(0), "{err}");
    let log = std::fs::read_to_string(dir.join("fit.log")).unwrap_or_default();
    assert!(log.contains("took over the stale lock"), "{log}");
    let progress = std::fs::read_to_string(dir.join("progress.jsonl")).unwrap();
    let last_start = progress
        .lines()
        .rfind(|l| l.contains("\"started\""))
        .unwrap();
    assert!(
        last_start.contains("\"max_evaluations\":100000"),
        "{last_start}"
    );

    // Another job file on the same run is refused, naming both.
    let other = runs.join("other-job.toml");
    let text = std::fs::read_to_string(manifest().join("demo-cases/ridgeline-panel/fit.toml"))
        .unwrap()
        .replace(
            "../../models/",
            &format!("{}/models/", manifest().display()),
        )
        .replace(
            "harbour-lab-",
            &format!(
                "{}/demo-cases/ridgeline-panel/harbour-lab-",
                manifest().display()
            ),
        )
        .replace(
            "scenario.toml",
            &format!(
                "{}/demo-cases/ridgeline-panel/scenario.toml",
                manifest().display()
            ),
        );
    std::fs::write(&other, format!("{text}\n# changed\n")).unwrap();
    let refused = run(&[
        "fit",
        other.to_str().unwrap(),
        "--headless",
        "--resume",
        "--name",
        "held",
        "--runs-dir",
        runs.to_str().unwrap(),
    ]);
    let stderr = String::from_utf8_lossy(&refused.stderr);
    assert_eq!(refused.status.code(), Some(1), "{stderr}");
    assert!(
        stderr.contains("was started with the job demo-cases/ridgeline-panel/fit.toml")
            && stderr.contains("other-job.toml, whose content differs"),
        "{stderr}"
    );
    std::fs::remove_dir_all(&runs).ok();
}

/// `--time` running out in the global stage ends the run with its summary (it was a
/// Nelder–Mead panic), and a run directory without run.toml says so, not "no checkpoint".
#[test]
fn a_time_budget_in_the_global_stage_ends_with_a_summary() {
    let runs = scratch("time-runs");
    let output = run(&[
        "fit",
        "demo-cases/ridgeline-panel/fit.toml",
        "--headless",
        "--threads",
        "1",
        "--time",
        "1s",
        "--name",
        "short",
        "--runs-dir",
        runs.to_str().unwrap(),
    ]);
    let all = format!(
        "{}{}",
        String::from_utf8_lossy(&output.stdout),
        String::from_utf8_lossy(&output.stderr)
    );
    assert_eq!(output.status.code(), Some(0), "{all}");
    assert!(!all.contains("panicked"), "{all}");
    let summary: serde_json::Value = serde_json::from_slice(
        &std::fs::read(runs.join("short/summary.json")).expect("summary.json written"),
    )
    .unwrap();
    assert!(
        summary["reason"].as_str().unwrap().contains("time budget"),
        "{summary}"
    );

    std::fs::remove_file(runs.join("short/run.toml")).unwrap();
    let output = run(&[
        "fit",
        "demo-cases/ridgeline-panel/fit.toml",
        "--headless",
        "--resume",
        "--name",
        "short",
        "--runs-dir",
        runs.to_str().unwrap(),
    ]);
    let stderr = String::from_utf8_lossy(&output.stderr);
    assert_eq!(output.status.code(), Some(1), "{stderr}");
    assert!(stderr.contains("has no run.toml"), "{stderr}");
    std::fs::remove_dir_all(&runs).ok();
}

/// SIGTERM to a fit that shows the terminal interface (in tmux): the fit writes its outputs
/// and the process ends by itself (it waited for `q` for ever). Skipped without tmux.
#[test]
fn sigterm_ends_a_fit_that_shows_the_interface() {
    if !crate::util::tmux_available("sigterm_ends_a_fit_that_shows_the_interface") {
        return;
    }
    let runs = scratch("tui-sigterm");
    let socket = format!("emberfit-hostile-{}", std::process::id());
    let tmux = |args: &[&str]| -> String {
        let output = Command::new("tmux")
            .args(["-L", &socket, "-f", "/dev/null"])
            .args(args)
            .output()
            .expect("tmux runs");
        String::from_utf8_lossy(&output.stdout).into_owned()
    };
    let command = format!(
        "exec {} fit {}/demo-cases/ridgeline-panel/fit.toml --threads 1 --max-evals 100000 \
         --name shown --runs-dir {}",
        env!("CARGO_BIN_EXE_emberfit"),
        manifest().display(),
        runs.display()
    );
    tmux(&[
        "new-session",
        "-d",
        "-s",
        "fit",
        "-x",
        "100",
        "-y",
        "30",
        &command,
    ]);
    let pid: u32 = tmux(&["display-message", "-p", "-t", "fit", "#{pane_pid}"])
        .trim()
        .parse()
        .expect("a pane pid");
    let run_dir = runs.join("shown");
    let shown = wait_for(&run_dir.join("checkpoint.json"), Duration::from_secs(60));
    let screen = tmux(&["capture-pane", "-p", "-t", "fit"]);
    // SAFETY: signalling the fit this test started.
    unsafe {
        libc::kill(pid as libc::pid_t, libc::SIGTERM);
    }
    let started = Instant::now();
    let mut ended = false;
    while started.elapsed() < Duration::from_secs(120) {
        // A zombie has finished too.
        let alive = std::fs::read_to_string(format!("/proc/{pid}/stat")).is_ok_and(|stat| {
            stat.rsplit(')')
                .next()
                .is_some_and(|rest| !rest.trim_start().starts_with('Z'))
        });
        if !alive {
            ended = true;
            break;
        }
        std::thread::sleep(Duration::from_millis(200));
    }
    tmux(&["kill-server"]);
    assert!(shown, "the fit wrote no checkpoint; screen:\n{screen}");
    assert!(
        ended,
        "the fit with its interface did not end after SIGTERM"
    );
    assert!(run_dir.join("summary.json").is_file(), "no summary.json");
    assert!(run_dir.join("best.toml").is_file(), "no best.toml");
    assert!(
        !run_dir.join("run.lock").exists(),
        "the lock is left behind"
    );
    std::fs::remove_dir_all(&runs).ok();
}

/// SIGHUP to a fit without a terminal (stdin, stdout and stderr are pipes, as under a service
/// manager) ends it after it writes its outputs, like SIGTERM.
#[test]
fn sighup_without_a_terminal_ends_the_fit_with_its_outputs() {
    let runs = scratch("sighup-runs");
    let dir = runs.join("hup");
    let mut fit = start_fit(&runs, "hup", &["--max-evals", "100000"]);
    assert!(
        wait_for(&dir.join("checkpoint.json"), Duration::from_secs(60)),
        "the fit wrote no checkpoint"
    );
    // SAFETY: signalling our own child.
    unsafe {
        libc::kill(fit.id() as libc::pid_t, libc::SIGHUP);
    }
    let started = Instant::now();
    let status = loop {
        if let Some(status) = fit.try_wait().unwrap() {
            break status;
        }
        assert!(
            started.elapsed() < Duration::from_secs(120),
            "the fit did not exit after SIGHUP"
        );
        std::thread::sleep(Duration::from_millis(100));
    };
    assert_eq!(status.code(), Some(0));
    assert!(dir.join("summary.json").is_file());
    assert!(!dir.join("run.lock").exists());
    std::fs::remove_dir_all(&runs).ok();
}
