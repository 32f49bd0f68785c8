//! What makes a run the same run: its name (one path component under the runs folder), the
//! job it was started with (SHA-256 of the job file) and every command-line override, stored
//! in run.toml at the start and reused by `--resume`; and what makes a posterior sample the
//! same sample ([`SampleStart`], stored in its checkpoint).

use serde::{Deserialize, Serialize};

/// Checks a run name: one plain path component, so the run stays inside the runs folder.
pub fn check_run_name(name: &str) -> Result<(), String> {
    let problem = if name.is_empty() {
        Some("is empty")
    } else if name == "." || name == ".." {
        Some("is `.` or `..`, which name a folder, not a run")
    } else if name.contains('/') || name.contains('\\') {
        Some("contains a path separator; a run name is one folder name")
    } else if name.contains('\0') {
        Some("contains a NUL character")
    } else if name.trim() != name {
        Some("starts or ends with white space")
    } else {
        None
    };
    match problem {
        Some(problem) => Err(format!(
            "run name `{}` {problem} (use letters, digits, `-`, `_` or `.`, e.g. `overnight-2`)",
            name.escape_debug()
        )),
        None => Ok(()),
    }
}

/// The overrides given on the command line when the run started (`None`: not given, the
/// job's value applies). `--resume` uses them unless it is given a value of its own.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
pub struct Overrides {
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub max_evaluations: Option<u64>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub time_budget_s: Option<f64>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub threads: Option<usize>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub seed: Option<u64>,
}

impl Overrides {
    /// The overrides a resumed run uses: each one given now, else the one stored.
    pub fn merged_over(&self, stored: &Overrides) -> Overrides {
        Overrides {
            max_evaluations: self.max_evaluations.or(stored.max_evaluations),
            time_budget_s: self.time_budget_s.or(stored.time_budget_s),
            threads: self.threads.or(stored.threads),
            // The seed cannot change on resume: the run's own seed is in run.toml.
            seed: stored.seed,
        }
    }
}

/// The `--threads` a run was started with, from its run.toml (for `--resume` without one).
pub fn stored_threads(run_dir: &std::path::Path) -> Option<usize> {
    super::record::read_record_lenient(&super::RunDirectory::new(run_dir))?
        .overrides
        .threads
}

/// What a posterior sample starts from. Its checkpoint (`posterior-checkpoint.json`) is
/// continued only by a sample with the same start: the same job file, parameters, best
/// point, likelihood temperature and sampler settings (seed included).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SampleStart {
    /// SHA-256 of the job file the sample was drawn for.
    pub job_sha256: String,
    pub names: Vec<String>,
    /// The optimiser's best point, file units.
    pub best: Vec<f64>,
    pub temperature: f64,
    pub walkers: usize,
    pub steps: usize,
    pub burn_in: usize,
    pub seed: u64,
}

/// Checks that a saved sample may be continued by the sample about to start; the error names
/// every difference (stored value first).
pub fn check_sample_start(stored: &SampleStart, now: &SampleStart) -> Result<(), String> {
    let mut differences = Vec::new();
    if stored.job_sha256 != now.job_sha256 {
        differences.push(format!(
            "the job file (SHA-256 {:.12}… then, {:.12}… now)",
            stored.job_sha256, now.job_sha256
        ));
    }
    if stored.names != now.names {
        differences.push(format!(
            "the parameters ({} then, {} now)",
            stored.names.join(", "),
            now.names.join(", ")
        ));
    }
    // Bit for bit: a resumed sample must equal an uninterrupted one.
    let bits = |v: &[f64]| v.iter().map(|x| x.to_bits()).collect::<Vec<_>>();
    if bits(&stored.best) != bits(&now.best) {
        differences.push(format!(
            "the best point ({:?} then, {:?} now)",
            stored.best, now.best
        ));
    }
    if stored.temperature.to_bits() != now.temperature.to_bits() {
        differences.push(format!(
            "the likelihood temperature ({} then, {} now)",
            stored.temperature, now.temperature
        ));
    }
    for (name, then, current) in [
        ("walkers", stored.walkers, now.walkers),
        ("steps", stored.steps, now.steps),
        ("burn-in", stored.burn_in, now.burn_in),
    ] {
        if then != current {
            differences.push(format!("the {name} ({then} then, {current} now)"));
        }
    }
    if stored.seed != now.seed {
        differences.push(format!("the seed ({} then, {} now)", stored.seed, now.seed));
    }
    if differences.is_empty() {
        Ok(())
    } else {
        Err(differences.join("; "))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn start() -> SampleStart {
        SampleStart {
            job_sha256: "ab".repeat(32),
            names: vec!["k".into(), "h".into()],
            best: vec![0.17, 1100.0],
            temperature: 2.5,
            walkers: 8,
            steps: 120,
            burn_in: 40,
            seed: 3,
        }
    }

    #[test]
    fn a_sample_continues_only_from_the_same_start() {
        assert_eq!(check_sample_start(&start(), &start()), Ok(()));
        let other_job = SampleStart {
            job_sha256: "cd".repeat(32),
            ..start()
        };
        let problem = check_sample_start(&start(), &other_job).unwrap_err();
        assert!(problem.contains("the job file"), "{problem}");
        let moved = SampleStart {
            best: vec![0.17, 1100.0 + 1e-9],
            steps: 200,
            ..start()
        };
        let problem = check_sample_start(&start(), &moved).unwrap_err();
        assert!(problem.contains("the best point"), "{problem}");
        assert!(
            problem.contains("the steps (120 then, 200 now)"),
            "{problem}"
        );
        let reseeded = SampleStart { seed: 4, ..start() };
        assert!(check_sample_start(&start(), &reseeded).is_err());
    }

    #[test]
    fn names_that_leave_the_runs_folder_are_refused() {
        for bad in ["", ".", "..", "../x", "/tmp/x", "a/b/c", "a\\b", " x"] {
            assert!(check_run_name(bad).is_err(), "{bad:?} accepted");
        }
        for good in ["overnight", "fit-2", "pmma_50.v2"] {
            assert!(check_run_name(good).is_ok(), "{good:?} refused");
        }
    }

    #[test]
    fn a_resume_keeps_the_stored_overrides_unless_given_new_ones() {
        let stored = Overrides {
            max_evaluations: Some(500),
            time_budget_s: Some(60.0),
            threads: Some(2),
            seed: Some(3),
        };
        let now = Overrides {
            time_budget_s: Some(120.0),
            ..Default::default()
        };
        let merged = now.merged_over(&stored);
        assert_eq!(merged.max_evaluations, Some(500));
        assert_eq!(merged.time_budget_s, Some(120.0));
        assert_eq!(merged.threads, Some(2));
        assert_eq!(merged.seed, Some(3));
    }
}
