//! What a viewer knows about a run, built only from the run directory's contents: the lines
//! of `progress.jsonl`, the text of `summary.json`, the `cases/*.csv` files and the times the
//! files were last written. No terminal, no clock (the caller passes `now`), no file access.
//!
//! Everything is read leniently, through the lenient readers of `run` (`run::progress`,
//! `run::summary`, `run::curves`): a line or field this version does not know is counted and
//! named in [`ViewerState::notes`] instead of stopping the viewer, and a file that does not
//! parse leaves the last good reading in place.
//!
//! **Invariant:** knows no file format: it folds what `run`'s readers return.

use std::collections::BTreeMap;
use std::time::{Duration, SystemTime};

use crate::run::curves::{curve_stem, older_curve_stem, parse_case_curve, split_stem};
pub use crate::run::curves::{CaseCurve, CurveEntryView, CurveIndexView};
use crate::run::progress::{
    read_line_lenient, LenientLine, ParameterInfo, PartInfo, ProgressEvent, FORMAT_VERSION,
};
pub use crate::run::summary::{SummaryParameterView, SummaryPart, SummaryView};

/// |r| at or above which two parameters count as strongly correlated; the threshold the fit's
/// identifiability analysis warns at (a unit test checks the two agree).
pub const STRONG_CORRELATION: f64 = 0.95;

/// A run with no new progress line for this long (and not paused or ended) is called stale,
/// unless its own iterations are slower (see [`ViewerState::stale_after`]).
pub const MIN_STALE_AFTER: Duration = Duration::from_secs(60);

/// One step of the posterior sample, as the log reported it.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PosteriorStep {
    pub step: usize,
    pub steps: usize,
    pub acceptance: f64,
    /// Steps dropped at the start; the acceptance counts only the moves after them.
    pub burn_in: usize,
    /// Seconds spent on the sample so far (over every process that worked on it).
    pub elapsed_s: f64,
}

impl PosteriorStep {
    /// The acceptance as a person reads it: a percentage, or "burn-in" before it has one.
    pub fn acceptance_text(&self) -> String {
        if self.step <= self.burn_in {
            format!("burn-in {}/{}", self.step, self.burn_in)
        } else {
            format!("{:.0} % accepted", 100.0 * self.acceptance)
        }
    }
}

/// The state of the fit as the run directory shows it.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Status {
    /// No progress line yet.
    Waiting,
    Running,
    Paused,
    /// A stop was requested from this viewer; the fit finishes its iteration and writes outputs.
    Stopping,
    Finished,
    Failed,
    /// No progress for a while although the run has not ended (its process may be gone).
    Stale,
}

impl Status {
    pub fn label(self) -> &'static str {
        match self {
            Status::Waiting => "WAITING",
            Status::Running => "RUNNING",
            Status::Paused => "PAUSED",
            Status::Stopping => "STOPPING",
            Status::Finished => "FINISHED",
            Status::Failed => "FAILED",
            Status::Stale => "STALE",
        }
    }
}

/// What the `started` line says about the run.
#[derive(Debug, Clone, PartialEq)]
pub struct RunInfo {
    pub title: String,
    pub format_version: u32,
    pub seed: u64,
    pub threads: usize,
    pub parameters: Vec<ParameterInfo>,
    /// Case name and its signals.
    pub cases: Vec<(String, Vec<String>)>,
    pub max_evaluations: u64,
    pub time_budget_s: Option<f64>,
    pub resumed_from: Option<u64>,
}

/// The latest `iteration` line.
#[derive(Debug, Clone, PartialEq)]
pub struct LatestIteration {
    pub iter: u64,
    pub phase: String,
    pub evaluations: u64,
    pub elapsed_s: f64,
    pub best_cost: f64,
    pub parts: Vec<PartInfo>,
    pub best_params: Vec<f64>,
}

/// The `finished` line.
#[derive(Debug, Clone, PartialEq)]
pub struct Ending {
    pub reason: String,
    pub best_cost: f64,
    pub evaluations: u64,
    pub elapsed_s: f64,
}

/// One point of the best-objective history.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct HistoryPoint {
    pub iter: u64,
    pub evaluations: u64,
    pub elapsed_s: f64,
    pub best_cost: f64,
}

/// A parameter as the Parameters view shows it.
#[derive(Debug, Clone, PartialEq)]
pub struct ParameterRow {
    pub name: String,
    /// Short label (`k(300 K) virgin`); the path when the run did not write one.
    pub label: String,
    /// What the number is; empty when the run did not say.
    pub meaning: String,
    pub unit: String,
    pub value: Option<f64>,
    pub lower: f64,
    pub upper: f64,
    pub log_scale: bool,
    pub interval_95: Option<(f64, f64)>,
    pub warnings: Vec<String>,
    pub is_at_bound: bool,
    pub is_strongly_correlated: bool,
    pub is_poorly_determined: bool,
}

/// A case's share of the objective.
#[derive(Debug, Clone, PartialEq)]
pub struct CaseShare {
    pub case: String,
    pub cost: f64,
    /// Fraction of the summed data parts, 0..1.
    pub share: f64,
}

/// Everything a viewer shows, folded from the run directory.
#[derive(Debug, Clone, Default)]
pub struct ViewerState {
    pub info: Option<RunInfo>,
    pub history: Vec<HistoryPoint>,
    pub latest: Option<LatestIteration>,
    pub is_paused: bool,
    /// The run logged that a stop was asked for (by any process).
    pub is_stopping: bool,
    /// The posterior sample's last step, while it runs after the fit.
    pub posterior: Option<PosteriorStep>,
    pub n_failures: u64,
    pub last_failure: Option<String>,
    /// Iteration, evaluations and elapsed seconds of the last `checkpoint` line.
    pub last_checkpoint: Option<(u64, u64, f64)>,
    pub finished: Option<Ending>,
    pub failed: Option<String>,
    pub summary: Option<SummaryView>,
    /// Curves by file stem (`<case slug>--<signal>`).
    pub curves: BTreeMap<String, CaseCurve>,
    /// `cases/curves.json`: units, σ sources and the stamp of the curves.
    pub curve_index: Option<CurveIndexView>,
    /// The pid in `run.lock` (the process running the fit), when there is one.
    pub holder_pid: Option<u32>,
    pub progress_modified: Option<SystemTime>,
    pub checkpoint_modified: Option<SystemTime>,
    /// What could not be read, by kind, with a count: shown so a user knows what is missing.
    unreadable_lines: BTreeMap<String, u64>,
    /// Files that could not be read the last time they changed, with the problem.
    pub file_problems: BTreeMap<String, String>,
    /// Fields missing from lines or files (older formats), e.g. "`iteration` lines: parts".
    missing_fields: BTreeMap<String, Vec<String>>,
}

impl ViewerState {
    /// Forgets everything read from `progress.jsonl` (it was rewritten, e.g. on resume).
    pub fn restart_progress(&mut self) {
        let summary = self.summary.take();
        let curves = std::mem::take(&mut self.curves);
        let file_problems = std::mem::take(&mut self.file_problems);
        let curve_index = self.curve_index.take();
        *self = ViewerState {
            summary,
            curves,
            file_problems,
            curve_index,
            holder_pid: self.holder_pid,
            ..ViewerState::default()
        };
    }

    /// Folds one complete line of `progress.jsonl` into the state, read leniently
    /// (`run::progress::read_line_lenient`): what cannot be read is counted, not fatal.
    pub fn apply_line(&mut self, line: &str) {
        match read_line_lenient(line) {
            LenientLine::Event {
                kind,
                event,
                missing,
            } => {
                self.note_missing(&format!("`{kind}` lines"), missing);
                self.apply(&event);
            }
            LenientLine::NotJson => self.count_unreadable("lines that are not JSON"),
            LenientLine::NoEventName => self.count_unreadable("lines without an event name"),
            LenientLine::Unknown(kind) => {
                self.count_unreadable(&format!("`{kind}` lines (unknown to this version)"))
            }
        }
    }

    fn count_unreadable(&mut self, kind: &str) {
        *self.unreadable_lines.entry(kind.to_string()).or_default() += 1;
    }

    fn note_missing(&mut self, what: &str, fields: Vec<&str>) {
        if fields.is_empty() {
            return;
        }
        let entry = self.missing_fields.entry(what.to_string()).or_default();
        for field in fields {
            if !entry.iter().any(|f| f == field) {
                entry.push(field.to_string());
            }
        }
    }

    /// Folds one event into the state.
    pub fn apply(&mut self, event: &ProgressEvent) {
        match event {
            ProgressEvent::Started {
                format_version,
                title,
                seed,
                threads,
                parameters,
                cases,
                max_evaluations,
                time_budget_s,
                resumed_from,
            } => {
                self.info = Some(RunInfo {
                    title: title.clone(),
                    format_version: *format_version,
                    seed: *seed,
                    threads: *threads,
                    parameters: parameters.clone(),
                    cases: cases.clone(),
                    max_evaluations: *max_evaluations,
                    time_budget_s: *time_budget_s,
                    resumed_from: *resumed_from,
                });
                self.finished = None;
                self.failed = None;
                self.is_paused = false;
                self.is_stopping = false;
            }
            ProgressEvent::Iteration {
                iter,
                phase,
                evaluations,
                elapsed_s,
                best_cost,
                parts,
                best_params,
            } => {
                self.history.push(HistoryPoint {
                    iter: *iter,
                    evaluations: *evaluations,
                    elapsed_s: *elapsed_s,
                    best_cost: *best_cost,
                });
                self.latest = Some(LatestIteration {
                    iter: *iter,
                    phase: phase.clone(),
                    evaluations: *evaluations,
                    elapsed_s: *elapsed_s,
                    best_cost: *best_cost,
                    parts: parts.clone(),
                    best_params: best_params.clone(),
                });
            }
            ProgressEvent::Failure { message, .. } => {
                self.n_failures += 1;
                self.last_failure = Some(message.clone());
            }
            ProgressEvent::Checkpoint {
                iter,
                evaluations,
                elapsed_s,
            } => self.last_checkpoint = Some((*iter, *evaluations, *elapsed_s)),
            ProgressEvent::Paused { .. } => self.is_paused = true,
            ProgressEvent::Resumed { .. } => self.is_paused = false,
            ProgressEvent::Stopping => self.is_stopping = true,
            ProgressEvent::Posterior {
                step,
                steps,
                burn_in,
                acceptance,
                elapsed_s,
            } => {
                self.posterior = Some(PosteriorStep {
                    step: *step,
                    steps: *steps,
                    acceptance: *acceptance,
                    burn_in: *burn_in,
                    elapsed_s: *elapsed_s,
                })
            }
            ProgressEvent::Finished {
                reason,
                best_cost,
                evaluations,
                elapsed_s,
            } => {
                self.is_paused = false;
                self.finished = Some(Ending {
                    reason: reason.clone(),
                    best_cost: *best_cost,
                    evaluations: *evaluations,
                    elapsed_s: *elapsed_s,
                });
            }
            ProgressEvent::Failed { message } => {
                self.is_paused = false;
                self.failed = Some(message.clone());
            }
        }
    }

    /// Reads `summary.json`. A file that does not parse (half-written by a process that does
    /// not write atomically, or damaged) keeps the last good reading and is noted.
    pub fn set_summary_text(&mut self, text: &str) {
        match SummaryView::from_json(text) {
            Ok((summary, missing)) => {
                self.file_problems.remove("summary.json");
                self.missing_fields.remove("summary.json");
                self.note_missing("summary.json", missing);
                self.summary = Some(summary);
            }
            Err(err) => {
                self.file_problems
                    .insert("summary.json".into(), format!("does not parse ({err})"));
            }
        }
    }

    /// Reads one `cases/<stem>.csv`; a file without `time_s` and `measured` columns is noted
    /// and the last good reading kept.
    pub fn set_case_curve_text(&mut self, stem: &str, text: &str) {
        let key = format!("cases/{stem}.csv");
        match parse_case_curve(text) {
            Ok((curve, missing)) => {
                self.file_problems.remove(&key);
                self.missing_fields.remove(&key);
                self.note_missing(&key, missing);
                self.curves.insert(stem.to_string(), curve);
            }
            Err(problem) => {
                self.file_problems.insert(key, problem);
            }
        }
    }

    /// Reads `cases/curves.json`; one that does not parse keeps the last good reading.
    pub fn set_curve_index_text(&mut self, text: &str) {
        let key = format!("cases/{}", crate::run::curves::INDEX_FILE);
        match CurveIndexView::from_json(text) {
            Ok(index) => {
                self.file_problems.remove(&key);
                self.curve_index = Some(index);
            }
            Err(err) => {
                self.file_problems
                    .insert(key, format!("does not parse ({err})"));
            }
        }
    }

    /// What the index says of a case's signal (unit, where σ came from).
    pub fn curve_entry(&self, case: &str, signal: &str) -> Option<&CurveEntryView> {
        self.curve_index
            .as_ref()?
            .curves
            .iter()
            .find(|e| e.case == case && e.signal == signal)
    }

    /// Whether the curves on file are the current best of a running fit (not the final ones).
    pub fn curves_are_live(&self) -> bool {
        !self.is_over()
            && self
                .curve_index
                .as_ref()
                .is_some_and(|i| i.is_final != Some(true))
    }

    /// The cases and their signals: from the `started` line, else from the summary, else from
    /// the curve files.
    pub fn cases(&self) -> Vec<(String, Vec<String>)> {
        if let Some(info) = self.info.as_ref().filter(|i| !i.cases.is_empty()) {
            return info.cases.clone();
        }
        let mut pairs: Vec<(String, String)> = Vec::new();
        if let Some(parts) = self.summary.as_ref().and_then(|s| s.parts.as_ref()) {
            pairs.extend(parts.iter().map(|p| (p.case.clone(), p.signal.clone())));
        }
        if pairs.is_empty() {
            pairs.extend(
                self.curves.keys().filter_map(|stem| {
                    split_stem(stem).map(|(c, s)| (c.to_string(), s.to_string()))
                }),
            );
        }
        let mut cases: Vec<(String, Vec<String>)> = Vec::new();
        for (case, signal) in pairs {
            match cases.iter_mut().find(|(c, _)| *c == case) {
                Some((_, signals)) => {
                    if !signals.contains(&signal) {
                        signals.push(signal);
                    }
                }
                None => cases.push((case, vec![signal])),
            }
        }
        cases
    }

    /// The curve of a case and signal, if its file has been read.
    pub fn curve(&self, case: &str, signal: &str) -> Option<&CaseCurve> {
        self.curves
            .get(&curve_stem(case, signal))
            .or_else(|| self.curves.get(&older_curve_stem(case, signal)))
    }

    /// Elapsed fitting time, s.
    pub fn elapsed_s(&self) -> Option<f64> {
        self.finished
            .as_ref()
            .map(|f| f.elapsed_s)
            .or(self.latest.as_ref().map(|l| l.elapsed_s))
            .filter(|v| v.is_finite())
    }

    /// Whether the iteration lines carry evaluation counts (an older format may not).
    pub fn has_evaluation_counts(&self) -> bool {
        !self
            .missing_fields
            .get("`iteration` lines")
            .is_some_and(|fields| fields.iter().any(|f| f == "evaluations"))
    }

    pub fn evaluations(&self) -> Option<u64> {
        if !self.has_evaluation_counts() {
            return None;
        }
        self.finished
            .as_ref()
            .map(|f| f.evaluations)
            .or(self.latest.as_ref().map(|l| l.evaluations))
    }

    pub fn best_cost(&self) -> Option<f64> {
        self.finished
            .as_ref()
            .map(|f| f.best_cost)
            .or(self.latest.as_ref().map(|l| l.best_cost))
            .filter(|v| v.is_finite())
    }

    /// Evaluations per second over the last (up to) ten iterations.
    pub fn evaluations_per_s(&self) -> Option<f64> {
        if !self.has_evaluation_counts() {
            return None;
        }
        let last = self.history.last()?;
        let first = self.history[self.history.len().saturating_sub(11)];
        let dt = last.elapsed_s - first.elapsed_s;
        (dt > 0.0).then(|| (last.evaluations.saturating_sub(first.evaluations)) as f64 / dt)
    }

    /// How long without a progress line makes this run stale: a minute, or five times its
    /// slowest iteration so far when that is longer.
    pub fn stale_after(&self) -> Duration {
        let slowest_s = self
            .history
            .windows(2)
            .map(|w| w[1].elapsed_s - w[0].elapsed_s)
            .filter(|d| d.is_finite())
            .fold(0.0_f64, f64::max);
        MIN_STALE_AFTER.max(Duration::from_secs_f64((5.0 * slowest_s).clamp(0.0, 1e6)))
    }

    /// The status at `now`. `is_stop_requested` is true when this viewer asked the fit to stop.
    pub fn status(&self, now: SystemTime, is_stop_requested: bool) -> Status {
        if self.failed.is_some() {
            return Status::Failed;
        }
        if self.finished.is_some() {
            return Status::Finished;
        }
        if is_stop_requested || self.is_stopping {
            return Status::Stopping;
        }
        if self.info.is_none() && self.latest.is_none() {
            return Status::Waiting;
        }
        if self.is_paused {
            return Status::Paused;
        }
        match self.since_progress(now) {
            Some(quiet) if quiet > self.stale_after() => Status::Stale,
            _ => Status::Running,
        }
    }

    /// Time since the last progress line was written.
    pub fn since_progress(&self, now: SystemTime) -> Option<Duration> {
        self.progress_modified
            .map(|t| now.duration_since(t).unwrap_or_default())
    }

    /// Time since the checkpoint was last written.
    pub fn since_checkpoint(&self, now: SystemTime) -> Option<Duration> {
        self.checkpoint_modified
            .map(|t| now.duration_since(t).unwrap_or_default())
    }

    /// Whether the run has ended (finished or failed).
    pub fn is_over(&self) -> bool {
        self.finished.is_some() || self.failed.is_some()
    }

    /// The parameters with their best values, and once the summary is there their intervals
    /// and warnings.
    pub fn parameter_rows(&self) -> Vec<ParameterRow> {
        let correlation = self.correlation();
        if let Some(parameters) = self.summary.as_ref().and_then(|s| s.parameters.as_ref()) {
            return parameters
                .iter()
                .enumerate()
                .map(|(i, p)| {
                    let lower = p.lower_bound.unwrap_or(f64::NAN);
                    let upper = p.upper_bound.unwrap_or(f64::NAN);
                    let log_scale = p.log_scale.unwrap_or(false);
                    let interval_95 = p.lower_95.zip(p.upper_95);
                    let (label, meaning) = self.label_of(&p.name);
                    ParameterRow {
                        name: p.name.clone(),
                        label,
                        meaning,
                        unit: p.unit.clone(),
                        value: p.value,
                        lower,
                        upper,
                        log_scale,
                        interval_95,
                        warnings: p.warnings.clone().unwrap_or_default(),
                        is_at_bound: p
                            .value
                            .is_some_and(|v| is_at_bound(v, lower, upper, log_scale)),
                        is_strongly_correlated: correlation.as_ref().is_some_and(|c| {
                            c.get(i).is_some_and(|row| {
                                row.iter().enumerate().any(|(j, r)| {
                                    j != i && r.is_some_and(|r| r.abs() >= STRONG_CORRELATION)
                                })
                            })
                        }),
                        is_poorly_determined: match interval_95 {
                            Some((a, b)) => a <= lower && b >= upper,
                            None => true,
                        },
                    }
                })
                .collect();
        }
        let Some(info) = &self.info else {
            return Vec::new();
        };
        let values = self.latest.as_ref().map(|l| &l.best_params);
        info.parameters
            .iter()
            .enumerate()
            .map(|(i, p)| {
                let value = values.and_then(|v| v.get(i).copied());
                let (label, meaning) = self.label_of(&p.name);
                ParameterRow {
                    name: p.name.clone(),
                    label,
                    meaning,
                    unit: p.unit.clone(),
                    value,
                    lower: p.lower,
                    upper: p.upper,
                    log_scale: p.log_scale,
                    interval_95: None,
                    warnings: Vec::new(),
                    is_at_bound: value
                        .is_some_and(|v| is_at_bound(v, p.lower, p.upper, p.log_scale)),
                    is_strongly_correlated: false,
                    is_poorly_determined: false,
                }
            })
            .collect()
    }

    /// A parameter's short label and meaning from the `started` line (the path and nothing
    /// for an older run).
    fn label_of(&self, name: &str) -> (String, String) {
        self.info
            .as_ref()
            .and_then(|i| i.parameters.iter().find(|p| p.name == name))
            .filter(|p| !p.label.is_empty())
            .map_or_else(
                || (name.to_string(), String::new()),
                |p| (p.label.clone(), p.meaning.clone()),
            )
    }

    /// The cost of each part of the objective: final from the summary, else the latest
    /// iteration's.
    pub fn part_cost(&self, case: &str, signal: &str) -> Option<f64> {
        if let Some(parts) = self.summary.as_ref().and_then(|s| s.parts.as_ref()) {
            return parts
                .iter()
                .find(|p| p.case == case && p.signal == signal)
                .and_then(|p| p.cost);
        }
        self.latest
            .as_ref()?
            .parts
            .iter()
            .find(|p| p.case == case && p.signal == signal)
            .map(|p| p.cost)
    }

    /// The posterior sample's last step while the sample runs (not once the run is over).
    pub fn running_sample(&self) -> Option<&PosteriorStep> {
        self.posterior.as_ref().filter(|_| !self.is_over())
    }

    /// Estimated seconds left in the posterior sample: the steps left at its mean time per
    /// step so far; `None` without a running sample or before its first step.
    pub fn sample_time_left_s(&self) -> Option<f64> {
        let sample = self.running_sample()?;
        (sample.step > 0 && sample.elapsed_s.is_finite()).then(|| {
            sample.elapsed_s / sample.step as f64 * sample.steps.saturating_sub(sample.step) as f64
        })
    }

    /// Estimated seconds left: in the posterior sample while it runs, else in the global
    /// search (rate and budget or time limit); `None` once the run is over, in the local
    /// phase, or without a rate.
    pub fn time_left_s(&self) -> Option<f64> {
        if self.is_over() || self.is_paused {
            return None;
        }
        if self.running_sample().is_some() {
            return self.sample_time_left_s();
        }
        let latest = self.latest.as_ref()?;
        if latest.phase != "global" {
            return None;
        }
        let info = self.info.as_ref()?;
        crate::headless::estimated_time_left_s(
            latest.evaluations,
            latest.elapsed_s,
            self.evaluations_per_s().unwrap_or(0.0),
            info.max_evaluations,
            info.time_budget_s,
        )
    }

    /// The correlation matrix of the summary, if it has one.
    pub fn correlation(&self) -> Option<Vec<Vec<Option<f64>>>> {
        self.summary
            .as_ref()
            .and_then(|s| s.correlation.clone())
            .filter(|c| !c.is_empty())
    }

    /// Each case's share of the data parts of the objective: final when the summary is there,
    /// else from the latest iteration.
    pub fn case_shares(&self) -> Vec<CaseShare> {
        let parts: Vec<(String, f64)> = match self.summary.as_ref().and_then(|s| s.parts.as_ref()) {
            Some(parts) => parts
                .iter()
                .map(|p| (p.case.clone(), p.cost.unwrap_or(f64::NAN)))
                .collect(),
            None => self
                .latest
                .as_ref()
                .map(|l| l.parts.iter().map(|p| (p.case.clone(), p.cost)).collect())
                .unwrap_or_default(),
        };
        let mut shares: Vec<CaseShare> = Vec::new();
        for (case, cost) in parts.into_iter().filter(|(_, c)| c.is_finite()) {
            match shares.iter_mut().find(|s| s.case == case) {
                Some(share) => share.cost += cost,
                None => shares.push(CaseShare {
                    case,
                    cost,
                    share: 0.0,
                }),
            }
        }
        let total: f64 = shares.iter().map(|s| s.cost).sum();
        for share in &mut shares {
            share.share = if total > 0.0 { share.cost / total } else { 0.0 };
        }
        shares
    }

    /// Sentences saying what this viewer could not read or show.
    pub fn notes(&self) -> Vec<String> {
        let mut notes = Vec::new();
        if let Some(info) = &self.info {
            if info.format_version > FORMAT_VERSION {
                notes.push(format!(
                    "written by a newer emberfit (progress format {}, this viewer reads {FORMAT_VERSION}): some things may not show",
                    info.format_version
                ));
            } else if info.format_version < FORMAT_VERSION {
                notes.push(format!(
                    "an older run (progress format {}): some things may not show",
                    info.format_version
                ));
            }
        }
        for (kind, n) in &self.unreadable_lines {
            notes.push(format!("skipped {n} {kind}"));
        }
        for (what, fields) in &self.missing_fields {
            notes.push(
                format!("{what} have no {}: not shown", fields.join(", "))
                    .replace("summary.json have", "summary.json has"),
            );
        }
        for (file, problem) in &self.file_problems {
            notes.push(format!("{file} {problem}; showing the last good reading"));
        }
        notes
    }
}

/// Where a value sits between its bounds, 0..1 (on the log of the value for a log-scale
/// parameter); `None` when the bounds are unusable.
pub fn position_between(value: f64, lower: f64, upper: f64, log_scale: bool) -> Option<f64> {
    let (v, a, b) = if log_scale {
        if value <= 0.0 || lower <= 0.0 || upper <= 0.0 {
            return None;
        }
        (value.log10(), lower.log10(), upper.log10())
    } else {
        (value, lower, upper)
    };
    let range = b - a;
    (range.is_finite() && range > 0.0 && v.is_finite()).then(|| ((v - a) / range).clamp(0.0, 1.0))
}

/// Within 1 % of the range from a bound (the rule of the fit's identifiability analysis).
fn is_at_bound(value: f64, lower: f64, upper: f64, log_scale: bool) -> bool {
    position_between(value, lower, upper, log_scale).is_some_and(|p| !(0.01..=0.99).contains(&p))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn iteration(evaluations: u64, elapsed_s: f64, best_cost: f64) -> ProgressEvent {
        ProgressEvent::Iteration {
            iter: evaluations / 10,
            phase: "global".into(),
            evaluations,
            elapsed_s,
            best_cost,
            parts: vec![
                PartInfo {
                    case: "a".into(),
                    signal: "mlr".into(),
                    cost: 3.0 * best_cost / 4.0,
                },
                PartInfo {
                    case: "b".into(),
                    signal: "hrr".into(),
                    cost: best_cost / 4.0,
                },
            ],
            best_params: vec![0.2],
        }
    }

    #[test]
    fn the_threshold_agrees_with_the_fits_warning() {
        assert_eq!(
            STRONG_CORRELATION,
            crate::fit::identifiability::STRONG_CORRELATION
        );
    }

    #[test]
    fn the_rate_comes_from_the_recent_iterations() {
        let mut state = ViewerState::default();
        state.apply(&iteration(10, 1.0, 5.0));
        state.apply(&iteration(30, 2.0, 4.0));
        state.apply(&iteration(50, 3.0, 3.0));
        assert_eq!(state.evaluations_per_s(), Some(20.0));
        assert_eq!(state.best_cost(), Some(3.0));
    }

    /// A `stopping` line in the log makes every viewer (a read-only `watch` too) say
    /// STOPPING until the run's `finished` line arrives.
    #[test]
    fn a_logged_stop_shows_as_stopping_in_any_viewer() {
        let now = SystemTime::UNIX_EPOCH + Duration::from_secs(1_000_000);
        let mut state = ViewerState::default();
        state.apply(&iteration(10, 1.0, 5.0));
        state.progress_modified = Some(now);
        state.apply(&ProgressEvent::Stopping);
        assert_eq!(state.status(now, false), Status::Stopping);
        state.apply(&ProgressEvent::Finished {
            reason: "stopped on request".into(),
            best_cost: 1.0,
            evaluations: 10,
            elapsed_s: 5.0,
        });
        assert_eq!(state.status(now, false), Status::Finished);
    }

    #[test]
    fn a_quiet_run_turns_stale_and_a_paused_one_does_not() {
        let start = SystemTime::UNIX_EPOCH + Duration::from_secs(1_000_000);
        let mut state = ViewerState::default();
        state.apply(&iteration(10, 1.0, 5.0));
        state.progress_modified = Some(start);
        assert_eq!(
            state.status(start + Duration::from_secs(5), false),
            Status::Running
        );
        assert_eq!(
            state.status(start + Duration::from_secs(61), false),
            Status::Stale
        );
        state.apply(&ProgressEvent::Paused { elapsed_s: 0.0 });
        assert_eq!(
            state.status(start + Duration::from_secs(600), false),
            Status::Paused
        );
        assert_eq!(state.status(start, true), Status::Stopping);
        state.apply(&ProgressEvent::Failed {
            message: "disk full".into(),
        });
        assert_eq!(state.status(start, true), Status::Failed);
    }

    #[test]
    fn slow_iterations_wait_longer_before_stale() {
        let mut state = ViewerState::default();
        state.apply(&iteration(10, 0.0, 5.0));
        state.apply(&iteration(20, 100.0, 4.0));
        assert_eq!(state.stale_after(), Duration::from_secs(500));
    }

    #[test]
    fn case_shares_add_the_signals_of_a_case() {
        let mut state = ViewerState::default();
        state.apply(&iteration(10, 1.0, 8.0));
        let shares = state.case_shares();
        assert_eq!(shares.len(), 2);
        assert_eq!((shares[0].case.as_str(), shares[0].share), ("a", 0.75));
        assert_eq!((shares[1].case.as_str(), shares[1].share), ("b", 0.25));
    }

    #[test]
    fn unknown_events_and_garbage_are_counted_not_fatal() {
        let mut state = ViewerState::default();
        state.apply_line(r#"{"event":"sparkle","level":3}"#);
        state.apply_line(r#"{"event":"sparkle","level":4}"#);
        state.apply_line("not json at all");
        state.apply_line(r#"{"event":"iteration","iter":2,"elapsed_s":1.5,"best_cost":0.25}"#);
        assert_eq!(state.best_cost(), Some(0.25));
        let notes = state.notes().join("\n");
        assert!(notes.contains("skipped 2 `sparkle` lines"), "{notes}");
        assert!(
            notes.contains("skipped 1 lines that are not JSON"),
            "{notes}"
        );
        assert!(
            notes.contains("`iteration` lines have no evaluations, parts, best_params"),
            "{notes}"
        );
    }

    #[test]
    fn a_summary_that_does_not_parse_keeps_the_last_good_one() {
        let mut state = ViewerState::default();
        state.set_summary_text(
            r#"{"objective": 2.5, "parameters": [], "parts": [], "correlation": []}"#,
        );
        state.set_summary_text(r#"{"objective": 3.5, "param"#);
        assert_eq!(state.summary.as_ref().and_then(|s| s.objective), Some(2.5));
        assert!(state
            .notes()
            .join(" ")
            .contains("summary.json does not parse"));
        state.set_summary_text(r#"{"objective": 3.5}"#);
        assert_eq!(state.summary.as_ref().and_then(|s| s.objective), Some(3.5));
        let notes = state.notes().join(" ");
        assert!(!notes.contains("does not parse"), "{notes}");
        assert!(
            notes.contains("summary.json has no parameters, correlation, parts"),
            "{notes}"
        );
    }

    #[test]
    fn a_case_file_without_its_key_columns_is_refused() {
        let mut state = ViewerState::default();
        state.set_case_curve_text("a--mlr", "time_s,measured,model\n1,2,3\n2,4,5\n");
        let curve = state.curve("a", "mlr").unwrap();
        assert_eq!(curve.measured, vec![2.0, 4.0]);
        assert_eq!(curve.model, vec![3.0, 5.0]);
        assert!(curve.sigma.is_empty());
        state.set_case_curve_text("a--mlr", "t,m\n1,2\n");
        assert_eq!(state.curve("a", "mlr").unwrap().measured, vec![2.0, 4.0]);
        assert!(state
            .notes()
            .join(" ")
            .contains("has no `time_s` and `measured`"));
    }

    #[test]
    fn positions_follow_the_scale() {
        assert_eq!(position_between(5.0, 0.0, 10.0, false), Some(0.5));
        let log = position_between(10.0, 1.0, 100.0, true).unwrap();
        assert!((log - 0.5).abs() < 1e-12);
        assert_eq!(position_between(1.0, 2.0, 2.0, false), None);
        assert!(is_at_bound(0.999, 0.0, 100.0, false));
        assert!(!is_at_bound(50.0, 0.0, 100.0, false));
    }
}
