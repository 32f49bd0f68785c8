//! The `emberfit` binary on the demo case and on broken files: what a user sees.

use std::path::{Path, PathBuf};
use std::process::{Command, Output};

fn emberfit(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_emberfit"))
        .args(args)
        .current_dir(env!("CARGO_MANIFEST_DIR"))
        .output()
        .expect("the emberfit binary runs")
}

fn scratch_dir(name: &str) -> PathBuf {
    let dir = std::env::temp_dir().join(format!("emberfit-cli-{name}-{}", std::process::id()));
    std::fs::create_dir_all(&dir).expect("temp dir");
    dir
}

/// The demo case runs as it is and writes the documented columns (issue 2's CSV contract).
#[test]
fn simulate_runs_the_demo_case_and_writes_the_documented_columns() {
    let out = scratch_dir("demo").join("curves.csv");
    let output = emberfit(&[
        "simulate",
        "demo-cases/ridgeline-panel/scenario.toml",
        "--flux",
        "35",
        "--duration",
        "300",
        "--out",
        out.to_str().unwrap(),
    ]);
    let stdout = String::from_utf8_lossy(&output.stdout);
    assert!(
        output.status.success(),
        "{stdout}{}",
        String::from_utf8_lossy(&output.stderr)
    );
    assert!(
        stdout.contains("ignition") && stdout.contains("peak HRR"),
        "{stdout}"
    );
    let text = std::fs::read_to_string(&out).unwrap();
    let header = text.lines().next().unwrap();
    assert!(header.starts_with(
        "time_s,mass_kg_m2,mlr_g_m2s,fuel_mlr_g_m2s,hrr_kw_m2,surface_temp_k,back_temp_k,thickness_mm"
    ));
    assert!(header.ends_with("temp_mid_depth_k"), "{header}");
    // 0..300 s at 1 s: 301 rows plus the header.
    assert_eq!(text.lines().count(), 302);
}

#[test]
fn simulate_json_summary_has_the_figures() {
    let output = emberfit(&[
        "simulate",
        "demo-cases/ridgeline-panel/scenario.toml",
        "--json",
        "--duration",
        "120",
    ]);
    assert!(output.status.success());
    let value: serde_json::Value = serde_json::from_slice(&output.stdout).unwrap();
    assert!(value["ignition_time_s"].as_f64().unwrap() > 0.0);
    assert!(value["energy_balance_relative_residual"].as_f64().unwrap() < 1e-6);
}

/// Every file in tests/bad-input gives an error naming the file and saying what is wrong,
/// never a panic (the expected words are listed per file).
#[test]
fn broken_files_give_errors_that_name_file_line_and_key() {
    let cases = [
        (
            "negative-density.toml",
            "negative-density.material.toml:7: `component[0].density_kg_m3` must be > 0, got -1190",
        ),
        (
            "yield-above-one.toml",
            "yield-above-one.material.toml:22: `reaction[0].yield` must be within 0..1, got 1.4",
        ),
        (
            "zero-thickness.toml",
            "zero-thickness.toml:7: `layer[0].thickness_mm` must be > 0, got 0",
        ),
        ("misspelt-key.toml", "unknown field `irradiance_kw_m`"),
        (
            "missing-material.toml",
            "missing-material.toml:6: `layer[0].material` cannot read",
        ),
        (
            "composition-sum.toml",
            "composition-sum.toml:8: `layer[0].composition` mass fractions must sum to 1, got 1.2",
        ),
        (
            "probe-too-deep.toml",
            "probe-too-deep.toml:14: `probe[0].depth_mm` is deeper than the stack",
        ),
        (
            "negative-irradiance.toml",
            "negative-irradiance.toml:10: `exposure.irradiance_kw_m2` must be ≥ 0, got -50",
        ),
        ("unknown-ignition-rule.toml", "unknown variant `spark`"),
    ];
    for (file, expected) in cases {
        let path = Path::new("tests/bad-input").join(file);
        let output = emberfit(&["simulate", path.to_str().unwrap()]);
        let stderr = String::from_utf8_lossy(&output.stderr);
        assert_eq!(output.status.code(), Some(1), "{file}: {stderr}");
        assert!(
            stderr.contains(expected),
            "{file}: expected `{expected}` in:\n{stderr}"
        );
        assert!(!stderr.contains("panicked"), "{file}: {stderr}");
    }
}

#[test]
fn misspelt_key_error_gives_the_line() {
    let output = emberfit(&["simulate", "tests/bad-input/misspelt-key.toml"]);
    let stderr = String::from_utf8_lossy(&output.stderr);
    assert!(stderr.contains("line 10"), "{stderr}");
}

#[test]
fn help_teaches_the_simulate_command() {
    let output = emberfit(&["simulate", "--help"]);
    let stdout = String::from_utf8_lossy(&output.stdout);
    assert!(
        stdout.contains("--flux") && stdout.contains("Example"),
        "{stdout}"
    );
}

/// Each broken fit job gives an error naming file, line and key (issue 4's bad-job list).
#[test]
fn broken_fit_jobs_give_errors_that_name_file_line_and_key() {
    let runs = scratch_dir("bad-jobs");
    let cases = [
        ("unknown-path.toml", "unknown-path.toml:7: `parameter[0].path` `component.virgin.thermal_diffusivity` is not a parameter path"),
        ("bounds-reversed.toml", "bounds-reversed.toml:9: `parameter[0].max` must be above min (0.5), got 0.1"),
        ("start-outside.toml", "start-outside.toml:10: `parameter[0].start` 0.9 lies outside the bounds 0.1..0.5"),
        ("missing-data.toml", "missing-data.toml:13: `case[0].tests` cannot use tests/bad-input/fit/no-such-test.toml: cannot read"),
        ("depth-on-mlr.toml", "depth-on-mlr.toml:14: `case[0].signals[0].depth_mm` belongs to `in_depth_temperature` signals only, not `mlr`"),
        ("no-temperature-data.toml", "no-temperature-data.toml:14: `case[0].signals[0].signal` `back_temperature`: the test data of case `50 kW/m²` have no back temperature column"),
    ];
    for (file, expected) in cases {
        let path = Path::new("tests/bad-input/fit").join(file);
        let output = emberfit(&[
            "fit",
            path.to_str().unwrap(),
            "--headless",
            "--runs-dir",
            runs.to_str().unwrap(),
        ]);
        let stderr = String::from_utf8_lossy(&output.stderr);
        assert_eq!(output.status.code(), Some(1), "{file}: {stderr}");
        assert!(
            stderr.contains(expected),
            "{file}: expected `{expected}` in:\n{stderr}"
        );
    }
    // Nothing half-made is left behind by a job that never started.
    assert_eq!(std::fs::read_dir(&runs).map(|d| d.count()).unwrap_or(0), 0);
}

/// The examples in `--help` name files that exist and run as shown from the repository's root
/// (issue 17). Examples that write files (`--out`, `>`) or need a finished fit (`runs/`) are
/// left out; the rest must succeed.
#[test]
fn help_examples_run_as_shown_from_the_repository_root() {
    let mut n_run = 0;
    for command in ["reduce", "ignition", "isoconversional"] {
        let help = String::from_utf8_lossy(&emberfit(&[command, "--help"]).stdout).into_owned();
        let lines: Vec<&str> = help.lines().collect();
        for (i, line) in lines.iter().enumerate() {
            let Some(example) = line.trim().strip_prefix("emberfit ") else {
                continue;
            };
            // A continuation line (indented further, no `emberfit`) belongs to the example.
            let mut text = example.to_string();
            if let Some(next) = lines.get(i + 1) {
                if next.starts_with("      ") && !next.trim().starts_with("emberfit ") {
                    text.push(' ');
                    text.push_str(next.trim());
                }
            }
            if text.contains("--out") || text.contains('>') || text.contains("runs/") {
                continue;
            }
            // The shell would expand the globs; do it here the same way.
            let mut args: Vec<String> = Vec::new();
            for word in text.split_whitespace() {
                match word.split_once('*') {
                    Some((head, tail)) => {
                        let dir = Path::new(env!("CARGO_MANIFEST_DIR"))
                            .join(Path::new(head).parent().unwrap_or(Path::new("")));
                        let prefix = Path::new(head)
                            .file_name()
                            .map_or(String::new(), |f| f.to_string_lossy().into_owned());
                        let mut matches: Vec<String> = std::fs::read_dir(&dir)
                            .unwrap()
                            .filter_map(|e| e.ok())
                            .map(|e| e.file_name().to_string_lossy().into_owned())
                            .filter(|f| f.starts_with(&prefix) && f.ends_with(tail))
                            .map(|f| {
                                Path::new(head)
                                    .parent()
                                    .unwrap_or(Path::new(""))
                                    .join(f)
                                    .display()
                                    .to_string()
                            })
                            .collect();
                        matches.sort();
                        assert!(!matches.is_empty(), "`{word}` matches no file");
                        args.extend(matches);
                    }
                    None => args.push(word.to_string()),
                }
            }
            let refs: Vec<&str> = args.iter().map(String::as_str).collect();
            let output = emberfit(&refs);
            assert!(
                output.status.success(),
                "`emberfit {text}` failed: {}",
                String::from_utf8_lossy(&output.stderr)
            );
            n_run += 1;
        }
    }
    assert!(n_run >= 7, "only {n_run} examples ran");
}

/// A fit says what is wrong before anything else (issue 17): a missing job gives the read
/// error and no "run directory" line; a new run into an existing name says "already exists"
/// and nothing from the old run's log. The table after a fit fits 80 columns.
#[test]
fn fit_messages_come_first_and_the_final_table_fits_80_columns() {
    let dir = scratch_dir("fit-messages");
    let runs = dir.join("runs");
    let runs_text = runs.display().to_string();
    let output = emberfit(&[
        "fit",
        "nothere.toml",
        "--headless",
        "--runs-dir",
        &runs_text,
    ]);
    let stderr = String::from_utf8_lossy(&output.stderr);
    assert!(!output.status.success());
    assert!(stderr.contains("reading the fit job"), "{stderr}");
    assert!(!stderr.contains("run directory"), "{stderr}");
    assert!(!runs.exists(), "a missing job made a run directory");

    let args = [
        "fit",
        "tests/cases/twin-fit.toml",
        "--headless",
        "--runs-dir",
        &runs_text,
        "--name",
        "once",
        "--max-evaluations",
        "24",
        "--threads",
        "1",
    ];
    let output = emberfit(&args);
    let stdout = String::from_utf8_lossy(&output.stdout);
    assert!(
        output.status.success(),
        "{}",
        String::from_utf8_lossy(&output.stderr)
    );
    assert!(stdout.contains("what the labels are:"), "{stdout}");
    for line in stdout.lines() {
        // The run directory's path is the user's; every other line fits 80 columns.
        if !line.starts_with("run directory:") {
            assert!(
                line.chars().count() <= 80,
                "{} columns: {line}",
                line.chars().count()
            );
        }
    }
    let output = emberfit(&args);
    let stderr = String::from_utf8_lossy(&output.stderr);
    assert!(!output.status.success());
    assert_eq!(
        output.stdout.len(),
        0,
        "{}",
        String::from_utf8_lossy(&output.stdout)
    );
    let lines: Vec<&str> = stderr.lines().collect();
    assert_eq!(lines.len(), 1, "{stderr}");
    assert!(lines[0].contains("already exists"), "{stderr}");
    let _ = std::fs::remove_dir_all(&dir);
}
