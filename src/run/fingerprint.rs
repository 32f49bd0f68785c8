//! What makes a run the same run: its name (one path component under the runs folder), the
//! job it was started with (SHA-256 of the job file) and every command-line override, stored
//! in run.toml at the start and reused by `--resume`.

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

#[cfg(test)]
mod tests {
    use super::*;

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
