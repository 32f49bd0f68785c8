//! Fits and band predictions on the ranks of an MPI job (`cargo test --features mpi --test
//! mpi`; docs/cluster.md). The reference is the program itself run as one plain process: the
//! same seed must give the same numbers bit for bit on any number of ranks and threads, a
//! killed rank must end the job with a clear message, and `--resume` on another number of
//! ranks must end exactly where an uninterrupted run does.
//!
//! Needs `mpirun` (Open MPI from the distribution's packages; .ci/run installs it). Compiled
//! only with the feature; a missing `mpirun` fails these tests, it never skips them.
#![cfg(feature = "mpi")]

use std::path::{Path, PathBuf};
use std::process::{Command, Output, Stdio};
use std::time::{Duration, Instant};

const JOB: &str = "tests/cases/twin-fit.toml";
const SCENARIO: &str = "demo-cases/ridgeline-panel/scenario.toml";

fn manifest() -> &'static Path {
    Path::new(env!("CARGO_MANIFEST_DIR"))
}

fn scratch(name: &str) -> PathBuf {
    let dir = std::env::temp_dir().join(format!("emberfit-mpi-{name}-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&dir);
    std::fs::create_dir_all(&dir).expect("temp dir");
    dir
}

/// The program as one plain process.
fn plain(args: &[&str]) -> Command {
    let mut command = Command::new(env!("CARGO_BIN_EXE_emberfit"));
    command.current_dir(manifest()).args(args);
    command
}

/// The program on `ranks` ranks of an MPI job on this machine (oversubscribed: it has two
/// cores; allowed as root, which CI is).
fn on_ranks(ranks: usize, args: &[&str]) -> Command {
    let mut command = Command::new("mpirun");
    command
        .current_dir(manifest())
        .env("OMPI_ALLOW_RUN_AS_ROOT", "1")
        .env("OMPI_ALLOW_RUN_AS_ROOT_CONFIRM", "1")
        .args(["-n", &ranks.to_string(), "--oversubscribe"])
        .arg(env!("CARGO_BIN_EXE_emberfit"))
        .args(args);
    command
}

fn run(mut command: Command) -> Output {
    let output = command.output().unwrap_or_else(|e| {
        panic!("cannot start {command:?}: {e} (the MPI tests need mpirun: apt-get install openmpi-bin libopenmpi-dev)")
    });
    assert!(
        output.status.success(),
        "{command:?} failed ({}):\n{}{}",
        output.status,
        String::from_utf8_lossy(&output.stdout),
        String::from_utf8_lossy(&output.stderr)
    );
    output
}

fn fit_args<'a>(runs: &'a str, name: &'a str, threads: &'a str, budget: &'a str) -> Vec<&'a str> {
    vec![
        "fit",
        JOB,
        "--headless",
        "--runs-dir",
        runs,
        "--name",
        name,
        "--threads",
        threads,
        "--max-evaluations",
        budget,
    ]
}

/// A run's results as text: summary.json without the wall-clock time, best.toml without its
/// date, parameters.csv and the case curves. JSON and TOML floats are written in their
/// shortest round-trip form, so equal text is equal bits.
fn results(run_dir: &Path) -> String {
    let mut summary: serde_json::Value =
        serde_json::from_slice(&std::fs::read(run_dir.join("summary.json")).expect("summary"))
            .expect("summary.json parses");
    let elapsed = summary
        .as_object_mut()
        .and_then(|o| o.remove("elapsed_s"))
        .expect("summary.json has elapsed_s");
    assert!(elapsed.as_f64().is_some_and(|s| s > 0.0));
    let best = std::fs::read_to_string(run_dir.join("best.toml")).expect("best.toml");
    let best: Vec<&str> = best.lines().filter(|l| !l.starts_with("date = ")).collect();
    let mut text = format!("{summary}\n{}\n", best.join("\n"));
    text.push_str(&std::fs::read_to_string(run_dir.join("parameters.csv")).expect("csv"));
    let mut cases: Vec<PathBuf> = std::fs::read_dir(run_dir.join("cases"))
        .expect("cases/")
        .map(|e| e.expect("entry").path())
        .collect();
    cases.sort();
    assert!(!cases.is_empty());
    for case in cases {
        text.push_str(&std::fs::read_to_string(case).expect("case csv"));
    }
    text
}

/// One process with two threads, and 1, 2 and 3 ranks with one or two threads each, give the
/// same fit: the shares are gathered in population order whatever the rank count.
#[test]
fn a_fit_gives_the_same_bits_on_any_number_of_ranks_and_threads() {
    let runs = scratch("same");
    let runs_text = runs.to_string_lossy().into_owned();
    run(plain(&fit_args(&runs_text, "plain", "2", "48")));
    let reference = results(&runs.join("plain"));
    assert!(reference.contains("\"evaluations\""));
    for (ranks, threads) in [(1, "1"), (2, "1"), (3, "2")] {
        let name = format!("ranks-{ranks}");
        let output = run(on_ranks(ranks, &fit_args(&runs_text, &name, threads, "48")));
        let stderr = String::from_utf8_lossy(&output.stderr);
        if ranks > 1 {
            assert!(
                stderr.contains(&format!("MPI job: {ranks} ranks")),
                "{stderr}"
            );
        }
        // Rank 0 alone wrote: one run directory, one summary table on stdout.
        let stdout = String::from_utf8_lossy(&output.stdout);
        assert_eq!(stdout.matches("run directory:").count(), 1, "{stdout}");
        assert_eq!(
            results(&runs.join(&name)),
            reference,
            "{ranks} ranks × {threads} threads differ from one process"
        );
    }
    let _ = std::fs::remove_dir_all(&runs);
}

/// The process ids of `rank` of the job whose command line names `marker`.
fn rank_pid(marker: &str, rank: usize) -> Option<u32> {
    for entry in std::fs::read_dir("/proc").ok()?.flatten() {
        let Ok(pid) = entry.file_name().to_string_lossy().parse::<u32>() else {
            continue;
        };
        let cmdline = std::fs::read(entry.path().join("cmdline")).unwrap_or_default();
        let environ = std::fs::read(entry.path().join("environ")).unwrap_or_default();
        let has =
            |bytes: &[u8], text: &str| bytes.split(|b| *b == 0).any(|part| part == text.as_bytes());
        let is_emberfit = cmdline
            .split(|b| *b == 0)
            .next()
            .is_some_and(|exe| exe.ends_with(b"emberfit"));
        if is_emberfit
            && has(&cmdline, marker)
            && has(&environ, &format!("OMPI_COMM_WORLD_RANK={rank}"))
        {
            return Some(pid);
        }
    }
    None
}

fn checkpoints(progress: &Path) -> usize {
    std::fs::read_to_string(progress)
        .unwrap_or_default()
        .matches("\"event\":\"checkpoint\"")
        .count()
}

/// A worker rank killed with SIGKILL mid-fit ends the whole job with a message naming it;
/// the checkpoint rank 0 wrote resumes on three ranks to exactly the uninterrupted result.
#[test]
fn a_killed_rank_ends_the_job_and_the_fit_resumes_on_another_number_of_ranks() {
    let runs = scratch("killed");
    let runs_text = runs.to_string_lossy().into_owned();
    let budget = "600";
    run(plain(&fit_args(&runs_text, "whole", "1", budget)));
    let reference = results(&runs.join("whole"));

    let mut job = on_ranks(2, &fit_args(&runs_text, "killed", "1", budget));
    let mut child = job
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("mpirun starts (apt-get install openmpi-bin libopenmpi-dev)");
    let progress = runs.join("killed/progress.jsonl");
    let started = Instant::now();
    while checkpoints(&progress) < 3 {
        assert!(
            started.elapsed() < Duration::from_secs(60),
            "no checkpoints from the MPI fit"
        );
        assert!(
            child.try_wait().expect("wait").is_none(),
            "the fit ended early"
        );
        std::thread::sleep(Duration::from_millis(10));
    }
    let worker = rank_pid(&runs_text, 1).expect("rank 1 of the job is running");
    let status = Command::new("kill")
        .args(["-KILL", &worker.to_string()])
        .status()
        .expect("kill");
    assert!(status.success());
    let output = child.wait_with_output().expect("mpirun ends");
    let said = format!(
        "{}{}",
        String::from_utf8_lossy(&output.stdout),
        String::from_utf8_lossy(&output.stderr)
    );
    assert!(!output.status.success(), "the job must fail:\n{said}");
    assert!(said.contains("rank 1"), "the dead rank is named:\n{said}");
    assert!(
        !runs.join("killed/summary.json").exists(),
        "the killed run did not finish"
    );
    let checkpoint: serde_json::Value = serde_json::from_slice(
        &std::fs::read(runs.join("killed/checkpoint.json")).expect("a checkpoint was kept"),
    )
    .expect("the checkpoint is whole");
    assert!(checkpoint["iteration"].as_u64().is_some_and(|i| i >= 2));
    assert_eq!(
        checkpoint["phase"], "global",
        "killed during the generations"
    );

    // mpirun may return before the aborted rank 0 has gone; a resume while it still holds the
    // run's lock is (rightly) refused, so wait for the holder to end, as a user would.
    let lock = runs.join("killed/run.lock");
    let waiting = Instant::now();
    while let Some(pid) = std::fs::read_to_string(&lock).ok().and_then(|text| {
        text.lines()
            .next()
            .and_then(|l| l.trim().parse::<u32>().ok())
    }) {
        if !Path::new(&format!("/proc/{pid}")).exists() {
            break;
        }
        assert!(
            waiting.elapsed() < Duration::from_secs(30),
            "the aborted rank 0 (pid {pid}) did not end"
        );
        std::thread::sleep(Duration::from_millis(50));
    }
    let mut resume = fit_args(&runs_text, "killed", "2", budget);
    resume.push("--resume");
    run(on_ranks(3, &resume));
    assert_eq!(
        results(&runs.join("killed")),
        reference,
        "resumed on 3 ranks differs from an uninterrupted single process"
    );
    let _ = std::fs::remove_dir_all(&runs);
}

/// `predict --band` on three ranks writes the same curves and per-draw quantities as one
/// process.
#[test]
fn band_draws_on_ranks_match_one_process() {
    let runs = scratch("band");
    let runs_text = runs.to_string_lossy().into_owned();
    run(plain(&fit_args(&runs_text, "fit", "2", "48")));
    let best = runs.join("fit/best.toml");
    let predict = |out: &Path| -> Vec<String> {
        [
            "predict",
            best.to_str().expect("path"),
            SCENARIO,
            "--band",
            "90",
            "--samples",
            "12",
            "--duration",
            "300",
            "--threads",
            "1",
            "--out",
            out.to_str().expect("path"),
        ]
        .iter()
        .map(|s| s.to_string())
        .collect()
    };
    let one = predict(&runs.join("one.csv"));
    run(plain(&one.iter().map(String::as_str).collect::<Vec<_>>()));
    let three = predict(&runs.join("three.csv"));
    let output = run(on_ranks(
        3,
        &three.iter().map(String::as_str).collect::<Vec<_>>(),
    ));
    let stdout = String::from_utf8_lossy(&output.stdout);
    assert!(stdout.contains("90 % band from 12"), "{stdout}");
    for (a, b) in [
        ("one.csv", "three.csv"),
        ("one-quantities.csv", "three-quantities.csv"),
    ] {
        let a_text = std::fs::read_to_string(runs.join(a)).expect("plain output");
        assert!(a_text.lines().count() > 10);
        assert_eq!(
            a_text,
            std::fs::read_to_string(runs.join(b)).expect("MPI output"),
            "{b} differs from {a}"
        );
    }
    let _ = std::fs::remove_dir_all(&runs);
}

/// The fixed partition of a batch: the shares cover 0..n once, in rank order, and differ in
/// size by one at most, for any n and N.
#[test]
fn shares_cover_the_batch_in_order() {
    use emberfit::cluster::ranks::share;
    for size in 1..6 {
        for n in 0..40 {
            let ranges: Vec<_> = (0..size).map(|r| share(r, size, n)).collect();
            assert_eq!(ranges[0].start, 0);
            assert_eq!(ranges[size - 1].end, n);
            for pair in ranges.windows(2) {
                assert_eq!(pair[0].end, pair[1].start);
            }
            let longest = ranges.iter().map(|r| r.len()).max().unwrap_or(0);
            let shortest = ranges.iter().map(|r| r.len()).min().unwrap_or(0);
            assert!(longest - shortest <= 1, "n {n}, N {size}: {ranges:?}");
        }
    }
}
