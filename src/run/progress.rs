//! `progress.jsonl`: one JSON object per line, append-only, flushed after every line so any
//! number of readers can follow it while it grows. Readers hold back a trailing line without
//! its newline (it is still being written).
//!
//! Two readings: strict ([`read_all`]: every line an event of this version, or an error
//! naming the line) and lenient ([`read_all_lenient`], [`ProgressFollower`] and
//! [`read_line_lenient`]: a torn last line is held back, a line of another version's layout
//! is read with neutral values for what it lacks, anything else is reported, never fatal).
//! The interface and the report read through the lenient one.
//!
//! **Invariant:** the only code that knows progress.jsonl's format.

use std::fs::{File, OpenOptions};
use std::io::{BufRead, BufReader, Read, Seek, SeekFrom, Write};
use std::path::{Path, PathBuf};

use serde::{Deserialize, Serialize};
use serde_json::Value;

/// Version of the progress format; readers refuse a newer one.
pub const FORMAT_VERSION: u32 = 1;

/// A free parameter as the viewers see it.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ParameterInfo {
    pub name: String,
    pub unit: String,
    pub lower: f64,
    pub upper: f64,
    pub log_scale: bool,
    /// A short name that tells it apart (`k(300 K) virgin`); empty in older runs.
    #[serde(default, skip_serializing_if = "String::is_empty")]
    pub label: String,
    /// What the number is (quantity, of what, at what temperature); empty in older runs.
    #[serde(default, skip_serializing_if = "String::is_empty")]
    pub meaning: String,
}

/// One part of the objective.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PartInfo {
    pub case: String,
    pub signal: String,
    pub cost: f64,
}

/// One line of `progress.jsonl`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(tag = "event", rename_all = "snake_case")]
pub enum ProgressEvent {
    Started {
        format_version: u32,
        title: String,
        seed: u64,
        threads: usize,
        parameters: Vec<ParameterInfo>,
        /// Case name and its signals.
        cases: Vec<(String, Vec<String>)>,
        max_evaluations: u64,
        time_budget_s: Option<f64>,
        /// Iteration the run resumed from, when it did.
        resumed_from: Option<u64>,
    },
    Iteration {
        iter: u64,
        phase: String,
        evaluations: u64,
        elapsed_s: f64,
        best_cost: f64,
        parts: Vec<PartInfo>,
        best_params: Vec<f64>,
    },
    /// A candidate the model could not simulate (it was given the penalty cost).
    Failure {
        evaluations: u64,
        message: String,
    },
    Checkpoint {
        iter: u64,
        evaluations: u64,
        elapsed_s: f64,
    },
    Paused {
        elapsed_s: f64,
    },
    Resumed {
        elapsed_s: f64,
    },
    /// A stop was asked for (signal or key): the run finishes its iteration, writes its
    /// outputs and ends with `finished`. Lets every viewer say "stopping".
    Stopping,
    /// One step of the posterior sample after the fit (`fit::posterior`): `acceptance` counts
    /// the moves after the burn-in (0 within it); `elapsed_s` is the sample's own time.
    Posterior {
        step: usize,
        steps: usize,
        /// Steps dropped at the start (absent in logs written before it was recorded).
        #[serde(default)]
        burn_in: usize,
        acceptance: f64,
        elapsed_s: f64,
    },
    Finished {
        reason: String,
        best_cost: f64,
        evaluations: u64,
        elapsed_s: f64,
    },
    Failed {
        message: String,
    },
}

impl ProgressEvent {
    /// The `event` tag of the line.
    pub fn kind(&self) -> &'static str {
        match self {
            ProgressEvent::Started { .. } => "started",
            ProgressEvent::Iteration { .. } => "iteration",
            ProgressEvent::Failure { .. } => "failure",
            ProgressEvent::Checkpoint { .. } => "checkpoint",
            ProgressEvent::Paused { .. } => "paused",
            ProgressEvent::Resumed { .. } => "resumed",
            ProgressEvent::Stopping => "stopping",
            ProgressEvent::Posterior { .. } => "posterior",
            ProgressEvent::Finished { .. } => "finished",
            ProgressEvent::Failed { .. } => "failed",
        }
    }

    /// The iteration an event belongs to, for trimming the log back to a checkpoint.
    pub fn iteration(&self) -> Option<u64> {
        match self {
            ProgressEvent::Iteration { iter, .. } | ProgressEvent::Checkpoint { iter, .. } => {
                Some(*iter)
            }
            _ => None,
        }
    }
}

/// Appends events, one flushed line each.
pub struct ProgressWriter {
    file: File,
}

impl ProgressWriter {
    pub fn append_to(path: &Path) -> std::io::Result<Self> {
        let file = OpenOptions::new().create(true).append(true).open(path)?;
        Ok(ProgressWriter { file })
    }

    pub fn write(&mut self, event: &ProgressEvent) -> std::io::Result<()> {
        let mut line = serde_json::to_string(event).map_err(std::io::Error::other)?;
        line.push('\n');
        self.file.write_all(line.as_bytes())?;
        self.file.flush()
    }
}

/// Reads a growing `progress.jsonl` incrementally.
pub struct ProgressFollower {
    path: PathBuf,
    offset: u64,
    pending_bytes: Vec<u8>,
}

impl ProgressFollower {
    pub fn new(path: &Path) -> Self {
        ProgressFollower {
            path: path.to_path_buf(),
            offset: 0,
            pending_bytes: Vec::new(),
        }
    }

    /// Events completed since the last call. A file that does not exist yet gives none; a
    /// file that shrank (rewritten on resume) is read again from the start. A line this
    /// version cannot read (a newer event) is skipped, not fatal.
    pub fn poll(&mut self) -> std::io::Result<Vec<ProgressEvent>> {
        Ok(self
            .poll_lines()?
            .lines
            .iter()
            .filter_map(|line| serde_json::from_str(line).ok())
            .collect())
    }

    /// The complete, non-empty lines written since the last call, for readers that want to
    /// say what they could not read. `restarted` is true when the file shrank and was read
    /// again from its start (the reader should forget what it had).
    pub fn poll_lines(&mut self) -> std::io::Result<NewLines> {
        let mut file =
            match crate::input::open_regular(&self.path, crate::input::InputKind::RunFile) {
                Ok(file) => file,
                Err(err) if err.kind() == std::io::ErrorKind::NotFound => {
                    return Ok(NewLines::default())
                }
                Err(err) => return Err(err),
            };
        let length = file.metadata()?.len();
        let restarted = length < self.offset;
        if restarted {
            self.offset = 0;
            self.pending_bytes.clear();
        }
        file.seek(SeekFrom::Start(self.offset))?;
        let mut bytes = Vec::new();
        let read = file.read_to_end(&mut bytes)?;
        self.offset += read as u64;
        // A multi-byte character split across two reads is completed by the next one, so
        // only whole lines are decoded.
        self.pending_bytes.extend_from_slice(&bytes);
        let mut lines = Vec::new();
        while let Some(newline) = self.pending_bytes.iter().position(|&b| b == b'\n') {
            let line: Vec<u8> = self.pending_bytes.drain(..=newline).collect();
            let line = String::from_utf8_lossy(&line);
            let line = line.trim();
            if !line.is_empty() {
                lines.push(line.to_string());
            }
        }
        Ok(NewLines { lines, restarted })
    }
}

/// What [`ProgressFollower::poll_lines`] found.
#[derive(Debug, Default, Clone, PartialEq)]
pub struct NewLines {
    pub lines: Vec<String>,
    pub restarted: bool,
}

/// Every event of a progress file, strictly: each non-empty line, the last one included,
/// must be a whole event of this version; otherwise the error names the line.
pub fn read_all(path: &Path) -> Result<Vec<ProgressEvent>, super::RunError> {
    let file = crate::input::open_regular(path, crate::input::InputKind::RunFile)
        .map_err(super::io("cannot read", path))?;
    let mut events = Vec::new();
    for (idx, line) in BufReader::new(file).lines().enumerate() {
        let line = line.map_err(super::io("cannot read", path))?;
        if line.trim().is_empty() {
            continue;
        }
        let event = serde_json::from_str(line.trim()).map_err(|e| super::RunError::Corrupt {
            path: path.to_path_buf(),
            problem: format!("line {}: {e}", idx + 1),
        })?;
        events.push(event);
    }
    Ok(events)
}

/// Every event a viewer can read from a progress file: a torn last line is held back, a
/// line of another version's layout is read leniently ([`read_line_lenient`]), anything
/// else is skipped. A file that cannot be read gives none.
pub fn read_all_lenient(path: &Path) -> Vec<ProgressEvent> {
    let mut follower = ProgressFollower::new(path);
    let Ok(new) = follower.poll_lines() else {
        return Vec::new();
    };
    new.lines
        .iter()
        .filter_map(|line| match read_line_lenient(line) {
            LenientLine::Event { event, .. } => Some(event),
            _ => None,
        })
        .collect()
}

/// Keeps the lines up to `iteration` (the checkpoint's) and the posterior sample's lines up
/// to `sample_step` (its checkpoint's; 0: none saved), and drops a `finished` line: a killed
/// process may have written a few more that the resumed run writes again. A half-written
/// last line is dropped too.
pub fn trim_to_iteration(
    path: &Path,
    iteration: u64,
    sample_step: usize,
) -> Result<(), super::RunError> {
    let text = crate::input::read_text(path, crate::input::InputKind::RunFile).unwrap_or_default();
    let mut kept = String::new();
    for line in text.lines() {
        let Ok(event) = serde_json::from_str::<ProgressEvent>(line) else {
            continue; // a half-written last line
        };
        if event.iteration().is_some_and(|i| i > iteration)
            || matches!(event, ProgressEvent::Posterior { step, .. } if step > sample_step)
            || matches!(event, ProgressEvent::Finished { .. })
        {
            continue;
        }
        kept.push_str(line);
        kept.push('\n');
    }
    crate::export::write_atomically(path, kept.as_bytes())
        .map_err(super::io("cannot rewrite", path))
}

/// What the lenient reading made of one line.
#[derive(Debug, Clone, PartialEq)]
pub enum LenientLine {
    /// An event: of this version (`missing` empty), or of another version's layout with
    /// neutral values for the fields it lacks (named in `missing`). `kind` is its tag.
    Event {
        kind: String,
        event: ProgressEvent,
        missing: Vec<&'static str>,
    },
    /// Not JSON at all (damage).
    NotJson,
    /// JSON without an `event` name.
    NoEventName,
    /// An event this version does not know (a newer one), by name.
    Unknown(String),
}

/// Reads one complete line leniently (see [`LenientLine`]).
pub fn read_line_lenient(line: &str) -> LenientLine {
    if let Ok(event) = serde_json::from_str::<ProgressEvent>(line) {
        return LenientLine::Event {
            kind: event.kind().to_string(),
            event,
            missing: Vec::new(),
        };
    }
    let Ok(value) = serde_json::from_str::<Value>(line) else {
        return LenientLine::NotJson;
    };
    let kind = value.get("event").and_then(Value::as_str).unwrap_or("");
    match lenient_event(kind, &value) {
        Some((event, missing)) => LenientLine::Event {
            kind: kind.to_string(),
            event,
            missing,
        },
        None if kind.is_empty() => LenientLine::NoEventName,
        None => LenientLine::Unknown(kind.to_string()),
    }
}

/// A known event from a line whose layout differs from this version's (older or newer):
/// missing fields take neutral values and are named.
fn lenient_event(kind: &str, value: &Value) -> Option<(ProgressEvent, Vec<&'static str>)> {
    let mut missing = Vec::new();
    let mut number = |key: &'static str| match value.get(key).and_then(Value::as_f64) {
        Some(v) => v,
        None => {
            missing.push(key);
            f64::NAN
        }
    };
    let event = match kind {
        "started" => {
            let parameters = value
                .get("parameters")
                .and_then(Value::as_array)
                .map(|list| list.iter().map(lenient_parameter).collect())
                .unwrap_or_default();
            let cases = value
                .get("cases")
                .and_then(|c| serde_json::from_value(c.clone()).ok())
                .unwrap_or_default();
            let event = ProgressEvent::Started {
                format_version: value
                    .get("format_version")
                    .and_then(Value::as_u64)
                    .unwrap_or(0) as u32,
                title: text(value, "title").unwrap_or_else(|| "(untitled run)".into()),
                seed: value.get("seed").and_then(Value::as_u64).unwrap_or(0),
                threads: value.get("threads").and_then(Value::as_u64).unwrap_or(0) as usize,
                parameters,
                cases,
                max_evaluations: value
                    .get("max_evaluations")
                    .and_then(Value::as_u64)
                    .unwrap_or(0),
                time_budget_s: value.get("time_budget_s").and_then(Value::as_f64),
                resumed_from: value.get("resumed_from").and_then(Value::as_u64),
            };
            for key in ["parameters", "cases", "max_evaluations"] {
                if value.get(key).is_none() {
                    missing.push(key);
                }
            }
            event
        }
        "iteration" => {
            let event = ProgressEvent::Iteration {
                iter: value.get("iter").and_then(Value::as_u64).unwrap_or(0),
                phase: text(value, "phase").unwrap_or_default(),
                evaluations: value
                    .get("evaluations")
                    .and_then(Value::as_u64)
                    .unwrap_or(0),
                elapsed_s: number("elapsed_s"),
                best_cost: number("best_cost"),
                parts: value
                    .get("parts")
                    .and_then(|p| serde_json::from_value(p.clone()).ok())
                    .unwrap_or_default(),
                best_params: value
                    .get("best_params")
                    .and_then(|p| serde_json::from_value(p.clone()).ok())
                    .unwrap_or_default(),
            };
            for key in ["evaluations", "parts", "best_params"] {
                if value.get(key).is_none() {
                    missing.push(key);
                }
            }
            event
        }
        "checkpoint" => ProgressEvent::Checkpoint {
            iter: value.get("iter").and_then(Value::as_u64).unwrap_or(0),
            evaluations: value
                .get("evaluations")
                .and_then(Value::as_u64)
                .unwrap_or(0),
            elapsed_s: number("elapsed_s"),
        },
        "finished" => ProgressEvent::Finished {
            reason: text(value, "reason").unwrap_or_else(|| "finished".into()),
            best_cost: number("best_cost"),
            evaluations: value
                .get("evaluations")
                .and_then(Value::as_u64)
                .unwrap_or(0),
            elapsed_s: number("elapsed_s"),
        },
        "failed" => ProgressEvent::Failed {
            message: text(value, "message").unwrap_or_else(|| "(no message)".into()),
        },
        "failure" => ProgressEvent::Failure {
            evaluations: 0,
            message: text(value, "message").unwrap_or_default(),
        },
        "paused" => ProgressEvent::Paused { elapsed_s: 0.0 },
        "resumed" => ProgressEvent::Resumed { elapsed_s: 0.0 },
        "stopping" => ProgressEvent::Stopping,
        "posterior" => ProgressEvent::Posterior {
            step: value.get("step").and_then(Value::as_u64).unwrap_or(0) as usize,
            steps: value.get("steps").and_then(Value::as_u64).unwrap_or(0) as usize,
            burn_in: value.get("burn_in").and_then(Value::as_u64).unwrap_or(0) as usize,
            acceptance: number("acceptance"),
            elapsed_s: number("elapsed_s"),
        },
        _ => return None,
    };
    Some((event, missing))
}

fn text(value: &Value, key: &str) -> Option<String> {
    value.get(key).and_then(Value::as_str).map(str::to_string)
}

fn lenient_parameter(value: &Value) -> ParameterInfo {
    ParameterInfo {
        name: text(value, "name").unwrap_or_else(|| "?".into()),
        unit: text(value, "unit").unwrap_or_default(),
        lower: value
            .get("lower")
            .and_then(Value::as_f64)
            .unwrap_or(f64::NAN),
        upper: value
            .get("upper")
            .and_then(Value::as_f64)
            .unwrap_or(f64::NAN),
        log_scale: value
            .get("log_scale")
            .and_then(Value::as_bool)
            .unwrap_or(false),
        label: text(value, "label").unwrap_or_default(),
        meaning: text(value, "meaning").unwrap_or_default(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn scratch_file(name: &str, text: &str) -> PathBuf {
        let dir =
            std::env::temp_dir().join(format!("emberfit-progress-{name}-{}", std::process::id()));
        std::fs::create_dir_all(&dir).unwrap();
        let path = dir.join("progress.jsonl");
        std::fs::write(&path, text).unwrap();
        path
    }

    #[test]
    fn the_strict_reader_names_a_torn_line_and_the_lenient_one_holds_it_back() {
        let path = scratch_file(
            "torn",
            "{\"event\":\"stopping\"}\n{\"event\":\"paused\",\"elapsed_s\":1.0}\n{\"event\":\"resu",
        );
        let err = read_all(&path).unwrap_err().to_string();
        assert!(err.contains("line 3"), "{err}");
        assert_eq!(
            read_all_lenient(&path),
            vec![
                ProgressEvent::Stopping,
                ProgressEvent::Paused { elapsed_s: 1.0 }
            ]
        );
        std::fs::remove_dir_all(path.parent().unwrap()).unwrap();
    }

    #[test]
    fn an_older_line_is_read_with_its_missing_fields_named() {
        match read_line_lenient(r#"{"event":"finished","reason":"budget"}"#) {
            LenientLine::Event {
                kind,
                event:
                    ProgressEvent::Finished {
                        reason, best_cost, ..
                    },
                missing,
            } => {
                assert_eq!(kind, "finished");
                assert_eq!(reason, "budget");
                assert!(best_cost.is_nan());
                assert_eq!(missing, ["best_cost", "elapsed_s"]);
            }
            other => panic!("not a finished event: {other:?}"),
        }
        assert_eq!(read_line_lenient("not json"), LenientLine::NotJson);
        assert_eq!(read_line_lenient("{}"), LenientLine::NoEventName);
        assert_eq!(
            read_line_lenient(r#"{"event":"warp"}"#),
            LenientLine::Unknown("warp".into())
        );
    }

    #[test]
    fn events_are_tagged_json_lines() {
        let event = ProgressEvent::Checkpoint {
            iter: 3,
            evaluations: 120,
            elapsed_s: 1.5,
        };
        let line = serde_json::to_string(&event).unwrap();
        assert_eq!(
            line,
            r#"{"event":"checkpoint","iter":3,"evaluations":120,"elapsed_s":1.5}"#
        );
        let stopping = serde_json::to_string(&ProgressEvent::Stopping).unwrap();
        assert_eq!(stopping, r#"{"event":"stopping"}"#);
        let back: ProgressEvent = serde_json::from_str(&stopping).unwrap();
        assert_eq!(back, ProgressEvent::Stopping);
    }

    #[test]
    fn follower_holds_back_a_line_without_its_newline() {
        let dir = std::env::temp_dir().join(format!("emberfit-follow-{}", std::process::id()));
        std::fs::create_dir_all(&dir).unwrap();
        let path = dir.join("progress.jsonl");
        std::fs::write(
            &path,
            "{\"event\":\"paused\",\"elapsed_s\":1.0}\n{\"event\":\"resu",
        )
        .unwrap();
        let mut follower = ProgressFollower::new(&path);
        assert_eq!(follower.poll().unwrap().len(), 1);
        let mut file = OpenOptions::new().append(true).open(&path).unwrap();
        file.write_all(b"med\",\"elapsed_s\":2.0}\n").unwrap();
        assert_eq!(
            follower.poll().unwrap(),
            vec![ProgressEvent::Resumed { elapsed_s: 2.0 }]
        );
        std::fs::remove_dir_all(&dir).unwrap();
    }
}
