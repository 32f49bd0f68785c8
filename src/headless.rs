//! Progress lines for a fit without a terminal interface (`--headless`, pipes, logs): one
//! short line per event worth telling, made from the run directory's `progress.jsonl` alone.

use std::time::{Duration, Instant};

use crate::run::progress::ProgressEvent;

/// Turns the event stream into one progress line every few seconds (plus every event worth
/// telling at once), with evaluations per second and the remaining budget.
pub struct Ticker {
    every: Duration,
    last_printed: Option<Instant>,
    pending: Option<ProgressEvent>,
    max_evaluations: u64,
    time_budget_s: Option<f64>,
    /// (evaluations, elapsed s) at the last printed line, for the rate.
    last_point: (u64, f64),
}

impl Ticker {
    pub fn new(every: Duration) -> Self {
        Ticker {
            every,
            last_printed: None,
            pending: None,
            max_evaluations: 0,
            time_budget_s: None,
            last_point: (0, 0.0),
        }
    }

    /// The line to print now for `event`, if any: iterations are held back and printed at
    /// most once per interval; other events pass through.
    pub fn line(&mut self, event: &ProgressEvent, now: Instant) -> Option<String> {
        match event {
            ProgressEvent::Started {
                max_evaluations,
                time_budget_s,
                ..
            } => {
                self.max_evaluations = *max_evaluations;
                self.time_budget_s = *time_budget_s;
                line(event)
            }
            ProgressEvent::Iteration { .. } => {
                self.pending = Some(event.clone());
                let due = self
                    .last_printed
                    .is_none_or(|t| now.duration_since(t) >= self.every);
                if due {
                    self.last_printed = Some(now);
                    self.flush()
                } else {
                    None
                }
            }
            ProgressEvent::Finished { .. } => {
                let held = self.flush();
                let end = line(event);
                match (held, end) {
                    (Some(a), Some(b)) => Some(format!("{a}\n{b}")),
                    (a, b) => a.or(b),
                }
            }
            _ => line(event),
        }
    }

    /// The held-back iteration line, if there is one.
    pub fn flush(&mut self) -> Option<String> {
        let event = self.pending.take()?;
        let ProgressEvent::Iteration {
            iter,
            phase,
            evaluations,
            elapsed_s,
            best_cost,
            ..
        } = &event
        else {
            return None;
        };
        let (last_evaluations, last_elapsed_s) = self.last_point;
        let rate = if *elapsed_s > last_elapsed_s {
            (*evaluations as f64 - last_evaluations as f64) / (elapsed_s - last_elapsed_s)
        } else {
            0.0
        };
        self.last_point = (*evaluations, *elapsed_s);
        let mut remaining = vec![format!(
            "{} evals",
            self.max_evaluations.saturating_sub(*evaluations)
        )];
        if let Some(budget) = self.time_budget_s {
            remaining.push(format!("{:.0} s", (budget - elapsed_s).max(0.0)));
        }
        Some(format!(
            "[{phase:>6}] iter {iter:>4}  evals {evaluations:>6} ({rate:.1}/s)  best {}  elapsed {elapsed_s:.1} s  left {}",
            significant(*best_cost, 6),
            remaining.join(" or ")
        ))
    }
}

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
        ProgressEvent::Stopping => Some(
            "stopping: finishing the iteration, then writing the checkpoint and outputs".into(),
        ),
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
    fn the_ticker_prints_an_iteration_at_most_once_per_interval() {
        let iteration = |iter: u64, evaluations: u64, elapsed_s: f64| ProgressEvent::Iteration {
            iter,
            phase: "global".into(),
            evaluations,
            elapsed_s,
            best_cost: 1.0,
            parts: vec![],
            best_params: vec![],
        };
        let start = Instant::now();
        let mut ticker = Ticker::new(Duration::from_secs(3));
        assert!(ticker.line(&iteration(1, 10, 1.0), start).is_some());
        assert!(ticker
            .line(&iteration(2, 20, 2.0), start + Duration::from_secs(1))
            .is_none());
        let line = ticker
            .line(&iteration(3, 40, 4.0), start + Duration::from_secs(4))
            .unwrap();
        // 30 evaluations in 3 s since the last printed line.
        assert!(
            line.contains("(10.0/s)") && line.contains("iter    3"),
            "{line}"
        );
    }

    #[test]
    fn significant_digits_switch_to_scientific_far_from_one() {
        assert_eq!(significant(0.012345, 3), "0.0123");
        assert_eq!(significant(1234.7, 3), "1235");
        assert_eq!(significant(2.5e7, 2), "2.5e7");
    }
}
