//! The terminal interface end to end: the real binary in tmux (send-keys, capture-pane). A fit
//! on the invented twin case runs in one tmux session; its views are switched, its terminal
//! is closed (the fit must carry on), a read-only `watch` follows it from a second session,
//! SIGINT stops it, and the run directory must be complete. Also `fit --detach`, and `q` in a
//! foreground fit. Skipped, with a message, when tmux is not installed (a failure under CI=true).

use std::path::{Path, PathBuf};
use std::process::Command;
use std::time::{Duration, Instant};

use emberfit::run::RunSummary;

const BIN: &str = env!("CARGO_BIN_EXE_emberfit");

/// A private tmux server for this test (its own socket), killed when dropped.
struct Tmux {
    socket: String,
}

impl Tmux {
    fn start(name: &str) -> Option<Tmux> {
        if !crate::util::tmux_available(name) {
            return None;
        }
        Some(Tmux {
            socket: format!("emberfit-test-{name}-{}", std::process::id()),
        })
    }

    fn run(&self, args: &[&str]) -> String {
        let output = Command::new("tmux")
            .args(["-L", &self.socket, "-f", "/dev/null"])
            .args(args)
            .output()
            .expect("tmux runs");
        String::from_utf8_lossy(&output.stdout).into_owned()
    }

    fn new_session(&self, name: &str, command: &str) {
        self.run(&[
            "new-session",
            "-d",
            "-s",
            name,
            "-x",
            "100",
            "-y",
            "30",
            command,
        ]);
    }

    fn capture(&self, name: &str) -> String {
        self.run(&["capture-pane", "-p", "-t", name])
    }

    fn keys(&self, name: &str, keys: &str) {
        self.run(&["send-keys", "-t", name, keys]);
    }

    fn pane_pid(&self, name: &str) -> u32 {
        self.run(&["display-message", "-p", "-t", name, "#{pane_pid}"])
            .trim()
            .parse()
            .expect("a pane pid")
    }

    /// Waits until the pane shows every one of `texts`; panics with the screen after `limit`.
    fn wait_for(&self, name: &str, texts: &[&str], limit: Duration) -> String {
        let start = Instant::now();
        loop {
            let screen = self.capture(name);
            if texts.iter().all(|t| screen.contains(t)) {
                return screen;
            }
            assert!(
                start.elapsed() < limit,
                "`{name}` did not show {texts:?} within {limit:?}; it shows:\n{screen}"
            );
            std::thread::sleep(Duration::from_millis(200));
        }
    }
}

impl Drop for Tmux {
    fn drop(&mut self) {
        self.run(&["kill-server"]);
    }
}

/// Kills a fit that outlives its terminal when the test ends early (a failed assertion), so an
/// endless fit is never left running.
struct KillOnDrop(u32);

impl Drop for KillOnDrop {
    fn drop(&mut self) {
        if is_alive(self.0) {
            let _ = Command::new("kill")
                .args(["-KILL", &self.0.to_string()])
                .status();
        }
    }
}

fn scratch(name: &str) -> PathBuf {
    let dir = std::env::temp_dir().join(format!("emberfit-tui-{name}-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&dir);
    std::fs::create_dir_all(&dir).expect("temp dir");
    dir
}

/// The twin job with absolute paths and a budget it never reaches, so it runs until stopped.
fn endless_job(dir: &Path) -> PathBuf {
    let manifest = Path::new(env!("CARGO_MANIFEST_DIR"));
    let text = std::fs::read_to_string(manifest.join("tests/cases/twin-fit.toml"))
        .expect("twin job")
        .replace("../../", &format!("{}/", manifest.display()))
        .replace("max_evaluations = 480", "max_evaluations = 10000000")
        .replace(
            "stagnation_generations = 10",
            "stagnation_generations = 100000",
        );
    let path = dir.join("endless.toml");
    std::fs::write(&path, text).expect("job written");
    path
}

fn is_alive(pid: u32) -> bool {
    // A zombie has finished: count it as gone.
    std::fs::read_to_string(format!("/proc/{pid}/stat")).is_ok_and(|stat| {
        stat.rsplit(')')
            .next()
            .is_some_and(|rest| !rest.trim_start().starts_with('Z'))
    })
}

fn wait_until_gone(pid: u32, limit: Duration) {
    let start = Instant::now();
    while is_alive(pid) {
        assert!(
            start.elapsed() < limit,
            "process {pid} still runs after {limit:?}"
        );
        std::thread::sleep(Duration::from_millis(200));
    }
}

fn progress_lines(run: &Path) -> usize {
    std::fs::read_to_string(run.join("progress.jsonl"))
        .map(|t| t.lines().count())
        .unwrap_or(0)
}

/// CPU seconds (user + system) of one thread, from /proc.
fn thread_cpu_s(pid: u32, tid: u32) -> f64 {
    let stat = std::fs::read_to_string(format!("/proc/{pid}/task/{tid}/stat")).unwrap_or_default();
    let fields: Vec<&str> = stat
        .rsplit(')')
        .next()
        .unwrap_or("")
        .split_whitespace()
        .collect();
    let ticks: f64 = [11, 12]
        .iter()
        .filter_map(|i| fields.get(*i).and_then(|f| f.parse::<f64>().ok()))
        .sum();
    ticks / 100.0
}

fn assert_complete(run: &Path) -> RunSummary {
    for file in [
        "summary.json",
        "best.toml",
        "checkpoint.json",
        "parameters.csv",
        "progress.jsonl",
    ] {
        assert!(run.join(file).is_file(), "{} has no {file}", run.display());
    }
    for signal in ["mlr", "hrr"] {
        let curve = run.join(format!("cases/50-kw-m2--{signal}.csv"));
        let text = std::fs::read_to_string(&curve).unwrap_or_default();
        assert!(
            text.starts_with("time_s,measured,sigma,model,residual") && text.lines().count() > 100,
            "{}",
            curve.display()
        );
    }
    let progress = std::fs::read_to_string(run.join("progress.jsonl")).unwrap_or_default();
    assert!(
        progress
            .lines()
            .last()
            .unwrap_or("")
            .contains("\"event\":\"finished\""),
        "{progress}"
    );
    serde_json::from_slice(&std::fs::read(run.join("summary.json")).expect("summary"))
        .expect("summary parses")
}

#[test]
fn the_interface_follows_a_fit_that_outlives_its_terminal_and_a_watch_sees_it_end() {
    let Some(tmux) = Tmux::start("live") else {
        return;
    };
    let dir = scratch("live");
    let job = endless_job(&dir);
    let runs = dir.join("runs");
    let run = runs.join("live");

    // A foreground fit with the interface.
    tmux.new_session(
        "fit",
        &format!(
            "exec {BIN} fit {} --runs-dir {} --name live --threads 1",
            job.display(),
            runs.display()
        ),
    );
    let pid = tmux.pane_pid("fit");
    let _reaper = KillOnDrop(pid);
    tmux.wait_for(
        "fit",
        &["[RUNNING]", "[1 Progress]", "evaluations/s", "q stop+exit"],
        Duration::from_secs(60),
    );
    tmux.keys("fit", "2");
    tmux.wait_for(
        "fit",
        &["[2 Parameters]", "component.virgin.conductivity_w_m_k", "●"],
        Duration::from_secs(10),
    );
    // The live fit view (issue 17): the best model so far against the data, from the curves the
    // fit writes at its checkpoints, while the fit is still running (its budget is endless).
    tmux.keys("fit", "3");
    let screen = tmux.wait_for(
        "fit",
        &[
            "[3 Residuals]",
            "[RUNNING]",
            "live: best at iter.",
            "share · part cost",
            "50 kW/m²",
            "50 kW/m² · mass loss rate (g/(m²·s))",
            "(model − measured)/σ",
            "time (s)",
        ],
        Duration::from_secs(60),
    );
    // The model is drawn (half blocks), not only the measured dots.
    assert!(
        screen.contains('▀') || screen.contains('▄') || screen.contains('█'),
        "no model curve on the live view:\n{screen}"
    );
    assert!(
        !run.join("summary.json").exists(),
        "the fit had already ended"
    );
    tmux.keys("fit", "Down");
    tmux.wait_for(
        "fit",
        &["50 kW/m² · heat release rate (kW/m²)", "[RUNNING]"],
        Duration::from_secs(10),
    );
    tmux.keys("fit", "Tab");
    tmux.wait_for(
        "fit",
        &["[4 Summary]", "appear when the fit ends"],
        Duration::from_secs(10),
    );
    tmux.keys("fit", "?");
    tmux.wait_for(
        "fit",
        &["Keys", "Closing the terminal does not stop the fit"],
        Duration::from_secs(10),
    );
    tmux.keys("fit", "Escape");
    // The terminal goes away (as when SSH drops): the fit must keep running and writing.
    tmux.run(&["kill-session", "-t", "fit"]);
    std::thread::sleep(Duration::from_secs(1));
    assert!(is_alive(pid), "the fit died with its terminal");
    let before = progress_lines(&run);
    let cpu_before = thread_cpu_s(pid, pid);
    let start = Instant::now();
    while progress_lines(&run) <= before {
        assert!(
            start.elapsed() < Duration::from_secs(30),
            "no progress after the terminal closed"
        );
        std::thread::sleep(Duration::from_millis(200));
    }
    std::thread::sleep(Duration::from_secs(2));
    println!(
        "interface thread after the terminal closed: {:.2} CPU s in {:.1} s (should be ~0: it waits on the fit)",
        thread_cpu_s(pid, pid) - cpu_before,
        start.elapsed().as_secs_f64()
    );

    // A read-only viewer from another terminal.
    tmux.new_session("watch", &format!("exec {BIN} watch {}", run.display()));
    tmux.wait_for(
        "watch",
        &[
            "[RUNNING]",
            "(read-only)",
            "twin: three parameters",
            "q quit",
        ],
        Duration::from_secs(20),
    );
    tmux.keys("watch", "p");
    tmux.wait_for(
        "watch",
        &["read-only viewer: pause the fit in its own terminal; stop it with kill -INT"],
        Duration::from_secs(10),
    );
    tmux.keys("watch", "4");

    // Stop it as Ctrl-C would: the iteration ends, the checkpoint and all outputs are written.
    assert!(Command::new("kill")
        .args(["-INT", &pid.to_string()])
        .status()
        .expect("kill")
        .success());
    wait_until_gone(pid, Duration::from_secs(120));
    let summary = assert_complete(&run);
    assert!(summary.reason.contains("stop"), "{}", summary.reason);
    tmux.wait_for(
        "watch",
        &[
            "[FINISHED]",
            "[4 Summary]",
            "Correlation",
            "stopped on request",
        ],
        Duration::from_secs(20),
    );
    tmux.keys("watch", "q");
    let _ = std::fs::remove_dir_all(&dir);
}

#[test]
fn a_detached_fit_runs_in_its_own_session_and_q_in_a_foreground_fit_stops_it_cleanly() {
    let Some(tmux) = Tmux::start("detach") else {
        return;
    };
    let dir = scratch("detach");
    let job = endless_job(&dir);
    let runs = dir.join("runs");

    let output = Command::new(BIN)
        .args([
            "fit",
            &job.display().to_string(),
            "--detach",
            "--threads",
            "1",
            "--name",
            "bg",
        ])
        .arg("--runs-dir")
        .arg(&runs)
        .output()
        .expect("fit --detach runs");
    let stdout = String::from_utf8_lossy(&output.stdout);
    assert!(
        output.status.success(),
        "{stdout}{}",
        String::from_utf8_lossy(&output.stderr)
    );
    let run = runs.join("bg");
    assert!(
        stdout.contains(&format!("emberfit watch {}", run.display())),
        "{stdout}"
    );
    let pid: u32 = stdout
        .split("(pid ")
        .nth(1)
        .and_then(|rest| rest.split(')').next())
        .and_then(|n| n.parse().ok())
        .expect("the pid is printed");
    // Its own session: the session id (field 6 of /proc/PID/stat) is its pid.
    let stat = std::fs::read_to_string(format!("/proc/{pid}/stat")).expect("the fit runs");
    let session: u32 = stat
        .rsplit(')')
        .next()
        .and_then(|r| r.split_whitespace().nth(3))
        .and_then(|s| s.parse().ok())
        .expect("session id");
    assert_eq!(
        session, pid,
        "the detached fit shares a session with its starter"
    );
    tmux.new_session("watch", &format!("exec {BIN} watch {}", run.display()));
    tmux.wait_for(
        "watch",
        &["[RUNNING]", "(read-only)"],
        Duration::from_secs(60),
    );
    assert!(Command::new("kill")
        .args(["-INT", &pid.to_string()])
        .status()
        .expect("kill")
        .success());
    wait_until_gone(pid, Duration::from_secs(120));
    assert_complete(&run);
    let log = std::fs::read_to_string(run.join("fit.log")).unwrap_or_default();
    assert!(log.contains("finished: stopped on request"), "{log}");
    tmux.wait_for("watch", &["[FINISHED]"], Duration::from_secs(20));

    // q in a foreground fit: stop, write everything, exit with the summary table.
    tmux.run(&["set-option", "-g", "remain-on-exit", "on"]);
    tmux.new_session(
        "fg",
        &format!(
            "exec {BIN} fit {} --runs-dir {} --name fg --threads 1",
            job.display(),
            runs.display()
        ),
    );
    tmux.wait_for(
        "fg",
        &["[RUNNING]", "evaluations/s"],
        Duration::from_secs(60),
    );
    tmux.keys("fg", "q");
    let screen = tmux.wait_for(
        "fg",
        &["objective", "run directory:"],
        Duration::from_secs(120),
    );
    assert!(screen.contains("stopped on request"), "{screen}");
    assert_complete(&runs.join("fg"));
    let _ = std::fs::remove_dir_all(&dir);
}

/// `watch` names the fit's pid from `run.lock` in the stop command and asks before it sends
/// anything: the fixture live run's lock names pid 4242; `s` asks, any key but `y` cancels.
#[test]
fn watch_shows_the_stop_command_from_the_lock_and_asks_before_stopping() {
    let Some(tmux) = Tmux::start("lock") else {
        return;
    };
    // A copy of the live fixture whose run.lock names a live process of ours (a sleeping
    // child standing in for the fit), so the viewer offers to stop it and really does.
    let fixture = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/fixtures/tui/live-run");
    let dir = scratch("lock");
    let run = dir.join("live-run");
    copy_dir(&fixture, &run);
    let mut holder = Command::new("sleep")
        .arg("120")
        .spawn()
        .expect("sleep runs");
    let pid = holder.id();
    std::fs::write(run.join("run.lock"), format!("{pid}\nhost = \"test\"\n")).unwrap();
    tmux.new_session("watch", &format!("exec {BIN} watch {}", run.display()));
    tmux.wait_for(
        "watch",
        &[
            "(read-only)",
            "stop it",
            &format!("kill -INT {pid}"),
            "s stop fit",
        ],
        Duration::from_secs(20),
    );
    tmux.keys("watch", "s");
    tmux.wait_for(
        "watch",
        &[&format!("stop the fit? y sends kill -INT {pid}")],
        Duration::from_secs(10),
    );
    tmux.keys("watch", "n");
    tmux.wait_for("watch", &["not stopped"], Duration::from_secs(10));
    assert!(
        holder.try_wait().unwrap().is_none(),
        "stopped although the answer was no"
    );
    tmux.keys("watch", "s");
    tmux.wait_for(
        "watch",
        &[&format!("stop the fit? y sends kill -INT {pid}")],
        Duration::from_secs(10),
    );
    tmux.keys("watch", "y");
    let start = Instant::now();
    let status = loop {
        if let Some(status) = holder.try_wait().unwrap() {
            break status;
        }
        if start.elapsed() > Duration::from_secs(10) {
            let _ = holder.kill();
            panic!("y did not send the interrupt to the lock's holder");
        }
        std::thread::sleep(Duration::from_millis(100));
    };
    use std::os::unix::process::ExitStatusExt;
    assert_eq!(status.signal(), Some(libc::SIGINT), "{status:?}");
    tmux.keys("watch", "q");
    let _ = std::fs::remove_dir_all(&dir);
}

fn copy_dir(from: &Path, to: &Path) {
    std::fs::create_dir_all(to).unwrap();
    for entry in std::fs::read_dir(from).unwrap() {
        let entry = entry.unwrap();
        let target = to.join(entry.file_name());
        if entry.file_type().unwrap().is_dir() {
            copy_dir(&entry.path(), &target);
        } else {
            std::fs::copy(entry.path(), target).unwrap();
        }
    }
}

#[test]
fn watch_refuses_a_directory_that_is_not_a_run_and_a_pipe_for_a_screen() {
    let dir = scratch("refuse");
    let output = Command::new(BIN)
        .arg("watch")
        .arg(dir.join("nothing-here"))
        .output()
        .expect("watch runs");
    let stderr = String::from_utf8_lossy(&output.stderr);
    assert!(!output.status.success());
    // Standard output is a pipe here, so the terminal check speaks first.
    assert!(stderr.contains("watch needs a terminal"), "{stderr}");
    let fixture = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/fixtures/tui/finished-run");
    let output = Command::new(BIN)
        .arg("watch")
        .arg(&fixture)
        .output()
        .expect("watch runs");
    let stderr = String::from_utf8_lossy(&output.stderr);
    assert!(stderr.contains("emberfit report"), "{stderr}");
    if let Some(tmux) = Tmux::start("refuse") {
        // The pane stays a while after the viewer has refused, so its message can be read.
        tmux.new_session(
            "watch",
            &format!(
                "{BIN} watch {}; sleep 30",
                dir.join("nothing-here").display()
            ),
        );
        tmux.wait_for(
            "watch",
            &["error: watching the run", "is not a run directory"],
            Duration::from_secs(10),
        );
    }
    let _ = std::fs::remove_dir_all(&dir);
}

#[test]
fn fit_detach_refuses_a_bad_job_where_the_user_sees_it() {
    let dir = scratch("bad-job");
    let output = Command::new(BIN)
        .arg("fit")
        .arg(dir.join("missing.toml"))
        .arg("--detach")
        .arg("--runs-dir")
        .arg(dir.join("runs"))
        .output()
        .expect("fit runs");
    let stderr = String::from_utf8_lossy(&output.stderr);
    assert!(!output.status.success());
    assert!(stderr.contains("reading the fit job"), "{stderr}");
    assert!(
        !dir.join("runs").exists(),
        "a refused job left a run directory"
    );
    let _ = std::fs::remove_dir_all(&dir);
}

/// The terminal is given back after a panic: a `watch` of the finished fixture run panics
/// right after its first draw (a test seam of debug builds), and afterwards the pane has left
/// the alternate screen and the terminal is out of raw mode (`stty -a` shows `icanon` and
/// `echo` set again), with the panic message readable on the normal screen.
#[test]
fn a_panic_in_the_viewer_gives_the_terminal_back() {
    let Some(tmux) = Tmux::start("panic") else {
        return;
    };
    let dir = scratch("panic");
    let stty = dir.join("stty.txt");
    let fixture = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/fixtures/tui/finished-run");
    tmux.new_session(
        "viewer",
        &format!(
            "sh -c 'EMBERFIT_TEST_PANIC_AFTER_DRAW=1 {BIN} watch {}; stty -a > {}; echo viewer-exited; sleep 30'",
            fixture.display(),
            stty.display()
        ),
    );
    let screen = tmux.wait_for("viewer", &["viewer-exited"], Duration::from_secs(20));
    assert!(
        screen.contains("test panic after the first draw"),
        "{screen}"
    );
    let alternate = tmux.run(&["display-message", "-p", "-t", "viewer", "#{alternate_on}"]);
    assert_eq!(
        alternate.trim(),
        "0",
        "the pane is still on the alternate screen"
    );
    let modes = std::fs::read_to_string(&stty).expect("stty ran after the viewer");
    let flags: Vec<&str> = modes.split_whitespace().collect();
    assert!(
        flags.contains(&"icanon") && flags.contains(&"echo"),
        "{modes}"
    );
    let _ = std::fs::remove_dir_all(&dir);
}
