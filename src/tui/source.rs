//! Reads a run directory into a [`ViewerState`], touching only the files that changed since
//! the last look (by size and modification time). The only file access of the viewer.

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::time::SystemTime;

use crate::run::progress::ProgressFollower;
use crate::run::RunDirectory;

use super::state::ViewerState;

/// Size and modification time: a file whose stamp is unchanged is not read again.
type Stamp = (u64, Option<SystemTime>);

fn stamp(path: &Path) -> Option<Stamp> {
    let metadata = std::fs::metadata(path).ok()?;
    Some((metadata.len(), metadata.modified().ok()))
}

/// Follows one run directory.
pub struct RunSource {
    dir: RunDirectory,
    follower: ProgressFollower,
    stamps: BTreeMap<PathBuf, Stamp>,
}

impl RunSource {
    pub fn new(root: &Path) -> Self {
        let dir = RunDirectory::new(root);
        RunSource {
            follower: ProgressFollower::new(&dir.progress()),
            dir,
            stamps: BTreeMap::new(),
        }
    }

    pub fn root(&self) -> &Path {
        &self.dir.root
    }

    /// Whether the file's stamp differs from the last one seen (and remembers the new one).
    fn has_changed(&mut self, path: &Path) -> Option<Stamp> {
        let now = stamp(path)?;
        match self.stamps.insert(path.to_path_buf(), now) {
            Some(before) if before == now => None,
            _ => Some(now),
        }
    }

    /// Brings `state` up to date; returns whether anything changed. Read errors of single
    /// files are noted in the state (the viewer keeps going); nothing here fails.
    pub fn refresh(&mut self, state: &mut ViewerState) -> bool {
        let mut is_changed = false;
        let progress = self.dir.progress();
        if let Some((_, modified)) = self.has_changed(&progress) {
            is_changed = true;
            state.progress_modified = modified;
            match self.follower.poll_lines() {
                Ok(new) => {
                    state.file_problems.remove("progress.jsonl");
                    if new.restarted {
                        state.restart_progress();
                        state.progress_modified = modified;
                    }
                    for line in &new.lines {
                        state.apply_line(line);
                    }
                }
                Err(err) => {
                    state
                        .file_problems
                        .insert("progress.jsonl".into(), format!("cannot be read ({err})"));
                }
            }
        }
        let checkpoint = self.dir.checkpoint();
        if let Some((_, modified)) = self.has_changed(&checkpoint) {
            is_changed = true;
            state.checkpoint_modified = modified;
        }
        let summary = self.dir.summary();
        if self.has_changed(&summary).is_some() {
            is_changed = true;
            match crate::input::read_text(&summary, crate::input::InputKind::RunFile) {
                Ok(text) => state.set_summary_text(&text),
                Err(err) => {
                    state
                        .file_problems
                        .insert("summary.json".into(), format!("cannot be read ({err})"));
                }
            }
        }
        let pid = crate::run::lock::holder_pid(&self.dir.root);
        if pid != state.holder_pid {
            is_changed = true;
            state.holder_pid = pid;
        }
        let index = self.dir.cases().join(crate::run::curves::INDEX_FILE);
        if self.has_changed(&index).is_some() {
            is_changed = true;
            match crate::input::read_text(&index, crate::input::InputKind::RunFile) {
                Ok(text) => state.set_curve_index_text(&text),
                Err(err) => {
                    state.file_problems.insert(
                        format!("cases/{}", crate::run::curves::INDEX_FILE),
                        format!("cannot be read ({err})"),
                    );
                }
            }
        }
        let cases = self.dir.cases();
        if let Ok(entries) = std::fs::read_dir(&cases) {
            let mut paths: Vec<PathBuf> = entries
                .filter_map(Result::ok)
                .map(|e| e.path())
                .filter(|p| p.extension().is_some_and(|e| e == "csv"))
                .collect();
            paths.sort();
            for path in paths {
                if self.has_changed(&path).is_none() {
                    continue;
                }
                is_changed = true;
                let stem = path
                    .file_stem()
                    .map(|s| s.to_string_lossy().into_owned())
                    .unwrap_or_default();
                match crate::input::read_text(&path, crate::input::InputKind::RunFile) {
                    Ok(text) => state.set_case_curve_text(&stem, &text),
                    Err(err) => {
                        state.file_problems.insert(
                            format!("cases/{stem}.csv"),
                            format!("cannot be read ({err})"),
                        );
                    }
                }
            }
        }
        is_changed
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::io::Write;

    fn scratch(name: &str) -> PathBuf {
        let dir = std::env::temp_dir().join(format!("emberfit-tui-{name}-{}", std::process::id()));
        let _ = std::fs::remove_dir_all(&dir);
        std::fs::create_dir_all(dir.join("cases")).unwrap();
        dir
    }

    #[test]
    fn a_torn_last_line_is_held_back_until_it_is_complete() {
        let dir = scratch("torn");
        let progress = dir.join("progress.jsonl");
        // The case name's "²" is split across the two writes, byte by byte.
        let line = r#"{"event":"iteration","iter":1,"phase":"global","evaluations":12,"elapsed_s":0.5,"best_cost":7.5,"parts":[{"case":"50 kW/m²","signal":"mlr","cost":7.5}],"best_params":[0.2]}"#;
        let split = line.find('²').unwrap() + 1;
        std::fs::write(&progress, &line.as_bytes()[..split]).unwrap();
        let mut source = RunSource::new(&dir);
        let mut state = ViewerState::default();
        source.refresh(&mut state);
        assert!(state.latest.is_none());
        assert!(state.notes().is_empty(), "{:?}", state.notes());
        let mut file = std::fs::OpenOptions::new()
            .append(true)
            .open(&progress)
            .unwrap();
        file.write_all(&line.as_bytes()[split..]).unwrap();
        file.write_all(b"\n").unwrap();
        assert!(source.refresh(&mut state));
        let latest = state.latest.as_ref().unwrap();
        assert_eq!(latest.best_cost, 7.5);
        assert_eq!(latest.parts[0].case, "50 kW/m²");
        std::fs::remove_dir_all(&dir).unwrap();
    }

    #[test]
    fn a_half_written_summary_keeps_the_last_good_one() {
        let dir = scratch("half");
        let summary = dir.join("summary.json");
        std::fs::write(&summary, r#"{"objective": 1.25, "parts": []}"#).unwrap();
        let mut source = RunSource::new(&dir);
        let mut state = ViewerState::default();
        source.refresh(&mut state);
        std::fs::write(&summary, r#"{"objective": 9.0, "pa"#).unwrap();
        assert!(source.refresh(&mut state));
        assert_eq!(state.summary.as_ref().and_then(|s| s.objective), Some(1.25));
        std::fs::remove_dir_all(&dir).unwrap();
    }

    #[test]
    fn a_progress_file_rewritten_shorter_is_read_again_from_its_start() {
        let dir = scratch("rewritten");
        let progress = dir.join("progress.jsonl");
        let line = |iter: u64, cost: f64| {
            format!("{{\"event\":\"iteration\",\"iter\":{iter},\"phase\":\"global\",\"evaluations\":{},\"elapsed_s\":{iter}.0,\"best_cost\":{cost},\"parts\":[],\"best_params\":[]}}\n", iter * 10)
        };
        std::fs::write(
            &progress,
            [line(1, 9.0), line(2, 8.0), line(3, 7.0)].concat(),
        )
        .unwrap();
        let mut source = RunSource::new(&dir);
        let mut state = ViewerState::default();
        source.refresh(&mut state);
        assert_eq!(state.history.len(), 3);
        // A resume trims the log back to its checkpoint (rewritten atomically, shorter).
        std::fs::write(&progress, line(1, 9.0)).unwrap();
        source.refresh(&mut state);
        assert_eq!(state.history.len(), 1);
        assert_eq!(state.best_cost(), Some(9.0));
        std::fs::remove_dir_all(&dir).unwrap();
    }

    #[test]
    fn unchanged_files_are_not_read_again() {
        let dir = scratch("unchanged");
        std::fs::write(
            dir.join("progress.jsonl"),
            "{\"event\":\"paused\",\"elapsed_s\":0}\n",
        )
        .unwrap();
        let mut source = RunSource::new(&dir);
        let mut state = ViewerState::default();
        assert!(source.refresh(&mut state));
        assert!(!source.refresh(&mut state));
        assert!(state.is_paused);
        std::fs::remove_dir_all(&dir).unwrap();
    }
}
