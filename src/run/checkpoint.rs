//! `checkpoint.json`: the engine's state after a generation, from which `--resume` continues
//! the run to the same bits. The engine's `EngineState` knows nothing of files or serde; this
//! module mirrors it field for field and converts both ways.
//!
//! **Invariant:** the only code that knows checkpoint.json's format (field names, the phase
//! spelt `global`/`local`/`done`, compact JSON), written atomically.

use serde::{Deserialize, Serialize};

use super::{io, RunDirectory, RunError};
use crate::export::write_atomically;
use crate::fit::engine::{EngineState, Phase};

/// The phase as the file spells it.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
enum PhaseOnDisk {
    Global,
    Local,
    Done,
}

/// `checkpoint.json`, field for field in the order of [`EngineState`].
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
struct CheckpointOnDisk {
    phase: PhaseOnDisk,
    iteration: u64,
    generation: u64,
    evaluations: u64,
    elapsed_s: f64,
    population: Vec<Vec<f64>>,
    costs: Vec<f64>,
    generations_since_improvement: u64,
    best_unit: Vec<f64>,
    best_cost: f64,
    /// Absent in checkpoints written before the local stage kept its start.
    #[serde(default)]
    global_best: Option<(Vec<f64>, f64)>,
    stop_reason: Option<String>,
}

impl From<&EngineState> for CheckpointOnDisk {
    fn from(state: &EngineState) -> Self {
        CheckpointOnDisk {
            phase: match state.phase {
                Phase::Global => PhaseOnDisk::Global,
                Phase::Local => PhaseOnDisk::Local,
                Phase::Done => PhaseOnDisk::Done,
            },
            iteration: state.iteration,
            generation: state.generation,
            evaluations: state.evaluations,
            elapsed_s: state.elapsed_s,
            population: state.population.clone(),
            costs: state.costs.clone(),
            generations_since_improvement: state.generations_since_improvement,
            best_unit: state.best_unit.clone(),
            best_cost: state.best_cost,
            global_best: state.global_best.clone(),
            stop_reason: state.stop_reason.clone(),
        }
    }
}

impl From<CheckpointOnDisk> for EngineState {
    fn from(disk: CheckpointOnDisk) -> Self {
        EngineState {
            phase: match disk.phase {
                PhaseOnDisk::Global => Phase::Global,
                PhaseOnDisk::Local => Phase::Local,
                PhaseOnDisk::Done => Phase::Done,
            },
            iteration: disk.iteration,
            generation: disk.generation,
            evaluations: disk.evaluations,
            elapsed_s: disk.elapsed_s,
            population: disk.population,
            costs: disk.costs,
            generations_since_improvement: disk.generations_since_improvement,
            best_unit: disk.best_unit,
            best_cost: disk.best_cost,
            global_best: disk.global_best,
            stop_reason: disk.stop_reason,
        }
    }
}

/// The file's bytes for `state`.
pub fn checkpoint_bytes(state: &EngineState) -> Result<Vec<u8>, serde_json::Error> {
    serde_json::to_vec(&CheckpointOnDisk::from(state))
}

/// The state in a checkpoint's bytes.
pub fn state_from_bytes(bytes: &[u8]) -> Result<EngineState, serde_json::Error> {
    serde_json::from_slice::<CheckpointOnDisk>(bytes).map(EngineState::from)
}

/// Replaces `checkpoint.json` atomically.
pub fn write_checkpoint(dir: &RunDirectory, state: &EngineState) -> Result<(), RunError> {
    let path = dir.checkpoint();
    let bytes = checkpoint_bytes(state).map_err(|e| RunError::Corrupt {
        path: path.clone(),
        problem: e.to_string(),
    })?;
    write_atomically(&path, &bytes).map_err(io("cannot write", &path))
}

/// Reads `checkpoint.json`: a missing file is [`RunError::NoCheckpoint`], one that does not
/// parse [`RunError::Corrupt`].
pub fn read_checkpoint(dir: &RunDirectory) -> Result<EngineState, RunError> {
    let bytes = crate::input::read_bytes(&dir.checkpoint(), crate::input::InputKind::RunFile)
        .map_err(|_| RunError::NoCheckpoint(dir.root.clone()))?;
    state_from_bytes(&bytes).map_err(|e| RunError::Corrupt {
        path: dir.checkpoint(),
        problem: e.to_string(),
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A checkpoint as written by the version before this module (its derive on the engine's
    /// type): the bytes must come back unchanged.
    const WRITTEN_BEFORE: &str = r#"{"phase":"local","iteration":12,"generation":9,"evaluations":480,"elapsed_s":3.25,"population":[[0.1,0.9],[0.5,0.5]],"costs":[2.0,1.5],"generations_since_improvement":2,"best_unit":[0.5,0.5],"best_cost":1.5,"global_best":[[0.5,0.5],1.5],"stop_reason":null}"#;

    #[test]
    fn a_checkpoint_reads_and_writes_back_byte_for_byte() {
        let state = state_from_bytes(WRITTEN_BEFORE.as_bytes()).unwrap();
        assert_eq!(state.phase, Phase::Local);
        assert_eq!(state.global_best, Some((vec![0.5, 0.5], 1.5)));
        assert_eq!(
            String::from_utf8(checkpoint_bytes(&state).unwrap()).unwrap(),
            WRITTEN_BEFORE
        );
    }

    #[test]
    fn an_older_checkpoint_without_the_global_best_still_reads() {
        let older = WRITTEN_BEFORE.replace(r#""global_best":[[0.5,0.5],1.5],"#, "");
        let state = state_from_bytes(older.as_bytes()).unwrap();
        assert_eq!(state.global_best, None);
        assert_eq!(state.phase, Phase::Local);
    }
}
