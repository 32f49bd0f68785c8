//! How big a run a scenario asks for, estimated before it starts: output rows, memory of the
//! history, and the fewest solver steps. Past a limit the file is refused with the key to
//! change, instead of a run that fills the memory or never ends.

/// Most simulated time, s (11.6 days; a cone test lasts under two hours).
pub const MAX_DURATION_S: f64 = 1e6;
/// Most output rows of one run (a 1 s interval over 11.6 days).
pub const MAX_OUTPUT_ROWS: f64 = 1e6;
/// Most memory for the history of one run, bytes.
pub const MAX_HISTORY_BYTES: f64 = 512.0 * 1024.0 * 1024.0;
/// Most solver steps at the longest allowed step (`duration_s / max_step_s`).
pub const MAX_STEPS_AT_LONGEST: f64 = 1e7;

/// Which value makes the run too big.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Culprit {
    Duration,
    OutputInterval,
    MaxStep,
}

/// The estimate of a run, and what is wrong with it.
#[derive(Debug, Clone, PartialEq)]
pub struct SizeProblem {
    pub culprit: Culprit,
    pub problem: String,
}

/// Bytes one output row of the 1-D model takes (a `Sample` and its probe temperatures).
pub fn row_bytes(n_probes: usize) -> f64 {
    (std::mem::size_of::<crate::physics::Sample>() + 8 * n_probes) as f64
}

/// [`check_run_size`] of a 1-D scenario as it stands (after any override).
pub fn check_scenario_size(scenario: &crate::physics::Scenario) -> Result<(), SizeProblem> {
    check_run_size(
        scenario.duration_s,
        scenario.output_interval_s,
        row_bytes(scenario.probes.len()),
        Some(scenario.numerics.max_step_s),
    )
}

/// Checks a run's size: `duration_s` of simulated time written every `output_interval_s`
/// with `row_bytes` per row, and (for the 1-D model) steps no longer than `max_step_s`.
pub fn check_run_size(
    duration_s: f64,
    output_interval_s: f64,
    row_bytes: f64,
    max_step_s: Option<f64>,
) -> Result<(), SizeProblem> {
    if duration_s > MAX_DURATION_S {
        return Err(SizeProblem {
            culprit: Culprit::Duration,
            problem: format!(
                "asks for {duration_s:e} s of simulated time; at most {MAX_DURATION_S:e} s \
                 (11.6 days) is simulated"
            ),
        });
    }
    let rows = duration_s / output_interval_s + 1.0;
    let bytes = rows * row_bytes;
    if rows > MAX_OUTPUT_ROWS || bytes > MAX_HISTORY_BYTES {
        // The duration is at most 1e6 s here, so the interval is the value to change.
        return Err(SizeProblem {
            culprit: Culprit::OutputInterval,
            problem: format!(
                "gives {rows:.3e} output rows ({duration_s} s every {output_interval_s} s, about \
                 {:.0} MiB); at most {MAX_OUTPUT_ROWS:e} rows and {:.0} MiB: make \
                 `output_interval_s` at least {:.3e} s",
                bytes / 1048576.0,
                MAX_HISTORY_BYTES / 1048576.0,
                (duration_s / MAX_OUTPUT_ROWS).max(duration_s * row_bytes / MAX_HISTORY_BYTES)
            ),
        });
    }
    if let Some(max_step_s) = max_step_s {
        let steps = duration_s / max_step_s;
        if steps > MAX_STEPS_AT_LONGEST {
            return Err(SizeProblem {
                culprit: Culprit::MaxStep,
                problem: format!(
                    "needs at least {steps:.3e} solver steps ({duration_s} s at most \
                     {max_step_s} s each); at most {MAX_STEPS_AT_LONGEST:e}"
                ),
            });
        }
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_audit_values_are_refused_and_a_cone_test_is_not() {
        let row = row_bytes(2);
        assert!(check_run_size(1800.0, 1.0, row, Some(5.0)).is_ok());
        assert!(check_run_size(86_400.0, 0.1, row, Some(5.0)).is_ok());
        let tiny = check_run_size(1800.0, 1e-9, row, Some(5.0)).unwrap_err();
        assert_eq!(tiny.culprit, Culprit::OutputInterval);
        let long = check_run_size(1e12, 1.0, row, Some(5.0)).unwrap_err();
        assert!(long.problem.contains("1e12 s"), "{}", long.problem);
        assert_eq!(long.culprit, Culprit::Duration);
        let steps = check_run_size(1e5, 100.0, row, Some(1e-3)).unwrap_err();
        assert_eq!(steps.culprit, Culprit::MaxStep);
    }
}
