//! Progress lines for a fit without a terminal interface (`--headless`, pipes, logs): one
//! short line per event worth telling, made from the run directory's `progress.jsonl` alone.

use crate::run::progress::ProgressEvent;

/// `value` with `digits` significant digits, in plain notation between 1e-3 and 1e6 and in
/// scientific notation outside (Rust's formatter has no `%g`).
pub fn significant(value: f64, digits: usize) -> String {
    if value == 0.0 || !value.is_finite() {
        return format!("{value}");
    }
    let magnitude = value.abs().log10().floor() as i32;
    if !(-3..6).contains(&magnitude) {
        return format!("{:.*e}", digits.saturating_sub(1), value);
    }
    let decimals = (digits as i32 - 1 - magnitude).max(0) as usize;
    format!("{value:.decimals$}")
}

/// The line to print for an event, if any.
pub fn line(event: &ProgressEvent) -> Option<String> {
    match event {
        ProgressEvent::Started {
            title,
            seed,
            threads,
            parameters,
            cases,
            resumed_from,
            ..
        } => Some(match resumed_from {
            Some(iteration) => format!("resuming `{title}` from iteration {iteration} (seed {seed}, {threads} threads)"),
            None => format!(
                "fitting `{title}`: {} parameters, {} cases, seed {seed}, {threads} threads",
                parameters.len(),
                cases.len()
            ),
        }),
        ProgressEvent::Iteration {
            iter,
            phase,
            evaluations,
            elapsed_s,
            best_cost,
            parts,
            ..
        } => {
            let worst = parts
                .iter()
                .max_by(|a, b| a.cost.total_cmp(&b.cost))
                .map(|p| format!(", largest part {} / {} {}", p.case, p.signal, significant(p.cost, 4)))
                .unwrap_or_default();
            Some(format!(
                "[{phase:>6}] iter {iter:>4}  evals {evaluations:>6}  {elapsed_s:>7.1} s  best {}{worst}",
                significant(*best_cost, 6)
            ))
        }
        ProgressEvent::Failure { message, .. } => Some(format!("note: a candidate failed and was penalised: {message}")),
        ProgressEvent::Paused { .. } => Some("paused".into()),
        ProgressEvent::Resumed { .. } => Some("running again".into()),
        ProgressEvent::Finished {
            reason,
            best_cost,
            evaluations,
            elapsed_s,
        } => Some(format!(
            "finished: {reason}; best objective {} after {evaluations} evaluations, {elapsed_s:.1} s",
            significant(*best_cost, 6)
        )),
        ProgressEvent::Failed { message } => Some(format!("fit failed: {message}")),
        ProgressEvent::Checkpoint { .. } => None,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn an_iteration_line_names_the_largest_part() {
        let event = ProgressEvent::Iteration {
            iter: 7,
            phase: "global".into(),
            evaluations: 560,
            elapsed_s: 12.5,
            best_cost: 42.0,
            parts: vec![
                crate::run::progress::PartInfo {
                    case: "25 kW/m²".into(),
                    signal: "mlr".into(),
                    cost: 30.0,
                },
                crate::run::progress::PartInfo {
                    case: "50 kW/m²".into(),
                    signal: "hrr".into(),
                    cost: 12.0,
                },
            ],
            best_params: vec![0.2],
        };
        let text = line(&event).unwrap();
        assert!(
            text.contains("iter    7")
                && text.contains("best 42.0000")
                && text.contains("25 kW/m² / mlr 30.00"),
            "{text}"
        );
    }

    #[test]
    fn significant_digits_switch_to_scientific_far_from_one() {
        assert_eq!(significant(0.012345, 3), "0.0123");
        assert_eq!(significant(1234.5, 3), "1235");
        assert_eq!(significant(2.5e7, 2), "2.5e7");
    }
}
