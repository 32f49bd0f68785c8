//! `progress.jsonl`: one JSON object per line, append-only, flushed after every line so any
//! number of readers can follow it while it grows. Readers hold back a trailing line without
//! its newline (it is still being written).

use std::fs::{File, OpenOptions};
use std::io::{BufRead, BufReader, Read, Seek, SeekFrom, Write};
use std::path::{Path, PathBuf};

use serde::{Deserialize, Serialize};

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
    /// One step of the posterior sample after the fit (`fit::posterior`).
    Posterior {
        step: usize,
        steps: usize,
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

/// Every complete event of a progress file.
pub fn read_all(path: &Path) -> std::io::Result<Vec<ProgressEvent>> {
    let file = crate::input::open_regular(path, crate::input::InputKind::RunFile)?;
    let mut events = Vec::new();
    for line in BufReader::new(file).lines() {
        let line = line?;
        if let Ok(event) = serde_json::from_str(line.trim()) {
            events.push(event);
        }
    }
    Ok(events)
}

#[cfg(test)]
mod tests {
    use super::*;

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
