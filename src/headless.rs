//! Progress lines for a fit without a terminal interface (`--headless`, pipes, logs): one
//! short line per event worth telling, made from the run directory's `progress.jsonl` alone.
//!
//! **Invariant:** reads the run directory only (through `run::progress`), never calls the fit
//! or the physics; the number formats every screen shares (`significant`, `interval_text`)
//! live here.

use std::path::Path;
use std::time::{Duration, Instant};

use crate::run::progress::{ProgressEvent, ProgressFollower};

/// How often the poll loop of [`Follow::print_while`] looks at the log.
const POLL_EVERY: Duration = Duration::from_millis(200);

/// Follows a run's `progress.jsonl` and makes its progress lines: the loop of `fit
/// --headless` (and of a fit whose interface could not start).
pub struct Follow {
    follower: ProgressFollower,
    ticker: Ticker,
}

impl Follow {
    /// A follower of `progress`; `skip_existing` skips what the file holds already (a
    /// resumed run: the earlier process printed it).
    pub fn new(progress: &Path, skip_existing: bool) -> Self {
        let mut follower = ProgressFollower::new(progress);
        if skip_existing {
            let _ = follower.poll();
        }
        Follow {
            follower,
            ticker: Ticker::new(Duration::from_secs(3)),
        }
    }

    /// The lines due for the events written since the last call; `is_last` adds the
    /// held-back iteration line (the fit has ended). A log that cannot be read gives none.
    pub fn lines(&mut self, now: Instant, is_last: bool) -> Vec<String> {
        let mut lines = Vec::new();
        if let Ok(events) = self.follower.poll() {
            for event in &events {
                lines.extend(self.ticker.line(event, now));
            }
        }
        if is_last {
            lines.extend(self.ticker.flush());
        }
        lines
    }

    /// Hands each line to `tell` while `is_running` holds, looking every 200 ms.
    pub fn print_while(&mut self, is_running: impl Fn() -> bool, mut tell: impl FnMut(&str)) {
        while is_running() {
            for line in self.lines(Instant::now(), false) {
                tell(&line);
            }
            std::thread::sleep(POLL_EVERY);
        }
    }
}

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
        let eta = match phase.as_str() {
            "global" => estimated_time_left_s(
                *evaluations,
                *elapsed_s,
                rate,
                self.max_evaluations,
                self.time_budget_s,
            )
            .map_or_else(String::new, |s| format!("  ≈ {} to go", duration_words(s))),
            _ => String::new(),
        };
        Some(format!(
            "[{phase:>6}] iter {iter:>4}  evals {evaluations:>6} ({rate:.1}/s)  best {}  elapsed {elapsed_s:.1} s  left {}{eta}",
            significant(*best_cost, 6),
            remaining.join(" or ")
        ))
    }
}

/// Estimated seconds left in the global search: the evaluations left at the current rate, or
/// the time limit's remainder if that comes first. `None` without a rate or a budget. (The
/// local refinement that may follow has its own, smaller budget and is not included.)
pub fn estimated_time_left_s(
    evaluations: u64,
    elapsed_s: f64,
    evaluations_per_s: f64,
    max_evaluations: u64,
    time_budget_s: Option<f64>,
) -> Option<f64> {
    let by_budget =
        (max_evaluations > 0 && evaluations_per_s > 0.0 && evaluations_per_s.is_finite())
            .then(|| max_evaluations.saturating_sub(evaluations) as f64 / evaluations_per_s);
    let by_time = time_budget_s.map(|limit| (limit - elapsed_s).max(0.0));
    match (by_budget, by_time) {
        (Some(a), Some(b)) => Some(a.min(b)),
        (a, b) => a.or(b),
    }
}

/// "s" unless there is exactly one.
fn plural(n: usize) -> &'static str {
    if n == 1 {
        ""
    } else {
        "s"
    }
}

/// A duration in words: 4.2 s, 12 min 05 s, 3 h 07 min.
pub fn duration_words(seconds: f64) -> String {
    if !seconds.is_finite() || seconds < 0.0 {
        return "-".into();
    }
    let total = seconds.round() as u64;
    match total {
        0..=59 => format!("{seconds:.1} s"),
        60..=3599 => format!("{} min {:02} s", total / 60, total % 60),
        _ => format!("{} h {:02} min", total / 3600, (total % 3600) / 60),
    }
}

/// An interval `a … b`, both ends with the decimals that show the width to two significant
/// digits (`187.96 … 188.04`, not `188.0 … 188.0`); scientific notation far from 1 as in
/// [`significant`].
pub fn interval_text(a: f64, b: f64) -> String {
    if !(a.is_finite() && b.is_finite()) {
        return format!("{} … {}", significant(a, 4), significant(b, 4));
    }
    let width = (b - a).abs();
    let largest = a.abs().max(b.abs());
    if width == 0.0 || largest == 0.0 {
        return format!("{} … {}", significant(a, 4), significant(b, 4));
    }
    let width_magnitude = width.log10().floor() as i32;
    let magnitude = largest.log10().floor() as i32;
    // Digits of the larger end needed for the width's first two digits (at least 3).
    let digits = (magnitude - width_magnitude + 2).clamp(3, 12) as usize;
    format!("{} … {}", significant(a, digits), significant(b, digits))
}

/// `value` with `digits` significant digits, in plain notation between 1e-3 and 1e6 and in
/// scientific notation outside (Rust's formatter has no `%g`).
pub fn significant(value: f64, digits: usize) -> String {
    if value == 0.0 {
        // Never "-0".
        return "0".into();
    }
    if !value.is_finite() {
        return format!("{value}");
    }
    let magnitude = value.abs().log10().floor() as i32;
    let text = if !(-3..6).contains(&magnitude) {
        format!("{:.*e}", digits.saturating_sub(1), value)
    } else {
        let decimals = (digits as i32 - 1 - magnitude).max(0) as usize;
        format!("{value:.decimals$}")
    };
    // A value that rounds to zero is written without its sign.
    match text.strip_prefix('-') {
        Some(rest) if rest.chars().all(|c| c == '0' || c == '.') => rest.to_string(),
        _ => text,
    }
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
            Some(iteration) => format!("resuming `{title}` from iteration {iteration} (seed {seed}, {threads} thread{})", plural(*threads)),
            None => format!(
                "fitting `{title}`: {} parameters, {} cases, seed {seed}, {threads} thread{}",
                parameters.len(),
                cases.len(),
                plural(*threads)
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
            "stopping: finishing the iteration (or step of the posterior sample), then writing \
             the checkpoint and outputs"
                .into(),
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
        // About ten lines over the sample.
        ProgressEvent::Posterior {
            step,
            steps,
            burn_in,
            acceptance,
            elapsed_s,
        } => (*step == 1 || *step == *steps || step % (steps / 10).max(1) == 0).then(|| {
            // The steps left at the mean time per step so far.
            let left_s = elapsed_s / (*step).max(1) as f64 * steps.saturating_sub(*step) as f64;
            let accepted = if step <= burn_in {
                format!("burn-in {step}/{burn_in}")
            } else {
                format!("accepted {:.0} %", 100.0 * acceptance)
            };
            format!(
                "[posterior] step {step:>5}/{steps}  {elapsed_s:>7.1} s  {accepted}  left ≈ {}",
                duration_words(left_s)
            )
        }),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_follower_skips_an_earlier_process_lines_and_flushes_at_the_end() {
        let dir =
            std::env::temp_dir().join(format!("emberfit-follow-lines-{}", std::process::id()));
        std::fs::create_dir_all(&dir).unwrap();
        let path = dir.join("progress.jsonl");
        std::fs::write(&path, "{\"event\":\"stopping\"}\n").unwrap();
        let mut fresh = Follow::new(&path, false);
        let mut resumed = Follow::new(&path, true);
        let now = Instant::now();
        assert_eq!(
            fresh.lines(now, false),
            [line(&ProgressEvent::Stopping).unwrap()]
        );
        assert!(resumed.lines(now, false).is_empty());
        let iteration = ProgressEvent::Iteration {
            iter: 1,
            phase: "global".into(),
            evaluations: 10,
            elapsed_s: 1.0,
            best_cost: 2.0,
            parts: vec![],
            best_params: vec![],
        };
        let text = format!("{}\n", serde_json::to_string(&iteration).unwrap());
        std::fs::write(&path, format!("{{\"event\":\"stopping\"}}\n{text}")).unwrap();
        // The first iteration is due at once; a second within 3 s is held until the end.
        assert_eq!(resumed.lines(now, false).len(), 1);
        let mut file = std::fs::OpenOptions::new()
            .append(true)
            .open(&path)
            .unwrap();
        std::io::Write::write_all(&mut file, text.as_bytes()).unwrap();
        assert!(resumed.lines(now, false).is_empty());
        assert_eq!(resumed.lines(now, true).len(), 1);
        std::fs::remove_dir_all(&dir).unwrap();
    }

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
    fn intervals_show_their_width_and_zero_has_no_sign() {
        // The interval of issue 17 read "188.0 .. 188.0".
        assert_eq!(interval_text(187.93, 188.07), "187.93 … 188.07");
        assert_eq!(interval_text(0.22884, 0.23431), "0.2288 … 0.2343");
        assert_eq!(interval_text(12.0, 30.0), "12.0 … 30.0");
        assert_eq!(interval_text(1.0e11, 1.2e11), "1.00e11 … 1.20e11");
        assert_eq!(significant(-0.0, 3), "0");
        assert_eq!(significant(-0.00001, 2), "-1.0e-5");
        assert_eq!(significant(-0.0004, 1), "-4e-4");
    }

    #[test]
    fn the_time_left_comes_from_the_rate_or_the_time_limit() {
        assert_eq!(
            estimated_time_left_s(100, 10.0, 10.0, 400, None),
            Some(30.0)
        );
        assert_eq!(
            estimated_time_left_s(100, 10.0, 10.0, 400, Some(20.0)),
            Some(10.0)
        );
        assert_eq!(estimated_time_left_s(100, 10.0, 0.0, 400, None), None);
        assert_eq!(duration_words(125.0), "2 min 05 s");
    }

    #[test]
    fn significant_digits_switch_to_scientific_far_from_one() {
        assert_eq!(significant(0.012345, 3), "0.0123");
        assert_eq!(significant(1234.7, 3), "1235");
        assert_eq!(significant(2.5e7, 2), "2.5e7");
    }
}
