//! `posterior.json`: the posterior sample of a run (`fit::posterior::Posterior`, its serde
//! form), written once after the fit when the job asks for one; and
//! `posterior-checkpoint.json`, the sampler's state while it samples, from which `--resume`
//! continues the sample to the same bits.
//!
//! **Invariant:** the only code that reads or writes these two files; both are replaced
//! atomically.

use std::path::Path;

use serde::{Deserialize, Serialize};

use super::fingerprint::SampleStart;
use super::{io, RunDirectory, RunError};
use crate::export::write_atomically;
use crate::fit::posterior::{Posterior, SamplerState};

/// Writes `posterior.json` atomically.
pub fn write_posterior(dir: &RunDirectory, sample: &Posterior) -> Result<(), RunError> {
    let path = dir.posterior();
    let bytes = serde_json::to_vec(sample).map_err(|e| RunError::Corrupt {
        path: path.clone(),
        problem: e.to_string(),
    })?;
    write_atomically(&path, &bytes).map_err(io("cannot write", &path))
}

/// Reads a run's `posterior.json`.
pub fn read_posterior(path: &Path) -> Result<Posterior, RunError> {
    let bytes = crate::input::read_bytes(path, crate::input::InputKind::RunFile)
        .map_err(io("cannot read", path))?;
    serde_json::from_slice(&bytes).map_err(|e| RunError::Corrupt {
        path: path.to_path_buf(),
        problem: e.to_string(),
    })
}

/// `posterior-checkpoint.json`: what the sample started from, and the sampler's state (fit
/// space) after its last saved step, field for field in the order of [`SamplerState`].
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
struct SampleCheckpointOnDisk {
    start: SampleStart,
    step: usize,
    elapsed_s: f64,
    positions: Vec<Vec<f64>>,
    costs: Vec<f64>,
    samples: Vec<Vec<f64>>,
    kept_costs: Vec<f64>,
    accepted: usize,
    proposed: usize,
    lowest_cost: f64,
    lowest_point: Vec<f64>,
    /// A decimal string: JSON numbers do not hold a u128 everywhere.
    rng_word_pos: String,
}

/// A saved posterior sample: its start and its state.
#[derive(Debug, Clone, PartialEq)]
pub struct SampleCheckpoint {
    pub start: SampleStart,
    pub state: SamplerState,
}

/// The bytes of `posterior-checkpoint.json` for `start` and `state`.
pub fn sample_checkpoint_bytes(
    start: &SampleStart,
    state: &SamplerState,
) -> Result<Vec<u8>, serde_json::Error> {
    serde_json::to_vec(&SampleCheckpointOnDisk {
        start: start.clone(),
        step: state.step,
        elapsed_s: state.elapsed_s,
        positions: state.positions.clone(),
        costs: state.costs.clone(),
        samples: state.samples.clone(),
        kept_costs: state.kept_costs.clone(),
        accepted: state.accepted,
        proposed: state.proposed,
        lowest_cost: state.lowest_cost,
        lowest_point: state.lowest_point.clone(),
        rng_word_pos: state.rng_word_pos.to_string(),
    })
}

/// The checkpoint in the bytes of a `posterior-checkpoint.json`.
pub fn sample_checkpoint_from_bytes(bytes: &[u8]) -> Result<SampleCheckpoint, String> {
    let disk: SampleCheckpointOnDisk = serde_json::from_slice(bytes).map_err(|e| e.to_string())?;
    let rng_word_pos = disk.rng_word_pos.parse::<u128>().map_err(|_| {
        format!(
            "`rng_word_pos` is not a whole number: {:?}",
            disk.rng_word_pos
        )
    })?;
    Ok(SampleCheckpoint {
        start: disk.start,
        state: SamplerState {
            step: disk.step,
            positions: disk.positions,
            costs: disk.costs,
            samples: disk.samples,
            kept_costs: disk.kept_costs,
            accepted: disk.accepted,
            proposed: disk.proposed,
            lowest_cost: disk.lowest_cost,
            lowest_point: disk.lowest_point,
            rng_word_pos,
            elapsed_s: disk.elapsed_s,
        },
    })
}

/// Replaces `posterior-checkpoint.json` atomically.
pub fn write_sample_checkpoint(
    dir: &RunDirectory,
    start: &SampleStart,
    state: &SamplerState,
) -> Result<(), RunError> {
    let path = dir.posterior_checkpoint();
    let bytes = sample_checkpoint_bytes(start, state).map_err(|e| RunError::Corrupt {
        path: path.clone(),
        problem: e.to_string(),
    })?;
    write_atomically(&path, &bytes).map_err(io("cannot write", &path))
}

/// Reads `posterior-checkpoint.json`: `None` when there is none (no sample was saved yet),
/// [`RunError::Corrupt`] when it does not parse.
pub fn read_sample_checkpoint(dir: &RunDirectory) -> Result<Option<SampleCheckpoint>, RunError> {
    let path = dir.posterior_checkpoint();
    if !path.exists() {
        return Ok(None);
    }
    let bytes = crate::input::read_bytes(&path, crate::input::InputKind::RunFile)
        .map_err(io("cannot read", &path))?;
    sample_checkpoint_from_bytes(&bytes)
        .map(Some)
        .map_err(|problem| RunError::Corrupt { path, problem })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_sample_checkpoint_reads_back_bit_for_bit() {
        let start = SampleStart {
            job_sha256: "0f".repeat(32),
            names: vec!["a".into(), "b".into()],
            best: vec![0.1 + 0.2, 1.0 / 3.0],
            temperature: std::f64::consts::PI,
            walkers: 6,
            steps: 10,
            burn_in: 3,
            seed: 5,
        };
        let state = SamplerState {
            step: 4,
            positions: vec![vec![1e-300, -0.0], vec![f64::MAX, 2.0f64.sqrt()]],
            costs: vec![0.7, 12.25],
            samples: vec![vec![0.3, 0.4]],
            kept_costs: vec![1.0 / 7.0],
            accepted: 2,
            proposed: 6,
            lowest_cost: 0.5,
            lowest_point: vec![0.25, 0.125],
            // Past 2^64: the stream position of a long sample does not fit a u64 cast.
            rng_word_pos: (1u128 << 70) + 3,
            elapsed_s: 12.5,
        };
        let bytes = sample_checkpoint_bytes(&start, &state).unwrap();
        let back = sample_checkpoint_from_bytes(&bytes).unwrap();
        assert_eq!(back.start, start);
        assert_eq!(back.state, state);
        assert_eq!(back.state.positions[0][1].to_bits(), (-0.0f64).to_bits());
        let damaged = String::from_utf8(bytes)
            .unwrap()
            .replace("\"1180591620717411303427\"", "\"many\"");
        assert!(sample_checkpoint_from_bytes(damaged.as_bytes())
            .unwrap_err()
            .contains("rng_word_pos"));
    }
}
