//! `cases/`: the best model against the data, one CSV per case and signal, and
//! `cases/curves.json`, which says what the CSVs hold (unit, where σ came from) and when they
//! were written. Written at checkpoints while the fit runs (the current best) and once more
//! at the end (the final model), every file through [`write_atomically`], so a viewer always
//! reads a whole set.

use std::path::Path;

use serde::{Deserialize, Serialize};

use crate::case::job::FitJob;
use crate::case::model::CaseModel;
use crate::export::write_atomically;

use super::{io, slug, RunDirectory, RunError};

/// The name of the index file in `cases/`.
pub const INDEX_FILE: &str = "curves.json";

/// When a set of curves was written.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct CurveStamp {
    /// The iteration of the checkpoint (the last one for the final curves).
    pub iteration: u64,
    pub evaluations: u64,
    /// The objective of the model the curves show.
    pub objective: f64,
    /// True once the fit has ended: the curves of the final model.
    pub is_final: bool,
}

/// One CSV of the set.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct CurveEntry {
    pub case: String,
    pub signal: String,
    /// The file name in `cases/`.
    pub file: String,
    /// Unit of `measured`, `sigma` and `model`.
    pub unit: String,
    /// Where σ came from: `repeats` (the spread of repeated tests) or `sigma` (a noise stated
    /// in the job) are measurement spreads; `peak` and `rise` are scales of a single test.
    pub sigma_source: String,
}

/// `cases/curves.json`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct CurveIndex {
    #[serde(flatten)]
    pub stamp: CurveStamp,
    pub curves: Vec<CurveEntry>,
}

/// Whether σ of this source is a measurement's spread (and so worth drawing as a band).
pub fn is_measurement_spread(sigma_source: &str) -> bool {
    matches!(sigma_source, "repeats" | "sigma")
}

/// The file name of a case's curve: the slug of the case name, two dashes, the signal.
pub fn curve_file(case: &str, signal: &str) -> String {
    format!("{}--{signal}.csv", slug(case))
}

/// Simulates the model at `values` and writes one CSV per case and signal (time, measured, σ,
/// model, standardised residual), then the index. A case whose simulation fails is left out
/// of this set (its older file, if any, stays).
pub fn write_case_curves(
    dir: &RunDirectory,
    job: &FitJob,
    model: &CaseModel<'_>,
    values: &[f64],
    stamp: CurveStamp,
) -> Result<(), RunError> {
    std::fs::create_dir_all(dir.cases()).map_err(io("cannot create", &dir.cases()))?;
    let mut entries = Vec::new();
    for case in &job.cases {
        let Ok(curves) = model.predict_case(case, values) else {
            continue;
        };
        for (signal, curve) in case.signals.iter().zip(&curves) {
            let modelled = &curve.values;
            let mut text = String::from("time_s,measured,sigma,model,residual\n");
            for (((time_s, measured), sigma), model) in signal
                .time_s
                .iter()
                .zip(&signal.value)
                .zip(&signal.sigma)
                .zip(modelled)
            {
                let residual = (model - measured) / sigma;
                text.push_str(&format!(
                    "{time_s:.3},{measured:.6},{sigma:.6},{model:.6},{residual:.6}\n"
                ));
            }
            let file = curve_file(&case.name, &signal.label());
            let path = dir.cases().join(&file);
            write_atomically(&path, text.as_bytes()).map_err(io("cannot write", &path))?;
            entries.push(CurveEntry {
                case: case.name.clone(),
                signal: signal.label(),
                file,
                unit: signal.kind.unit().to_string(),
                sigma_source: signal.sigma_source.to_string(),
            });
        }
    }
    let index = CurveIndex {
        stamp,
        curves: entries,
    };
    let path = dir.cases().join(INDEX_FILE);
    let bytes = serde_json::to_vec_pretty(&index).map_err(|e| RunError::Corrupt {
        path: path.clone(),
        problem: e.to_string(),
    })?;
    write_atomically(&path, &bytes).map_err(io("cannot write", &path))
}

/// Reads `cases/curves.json` (a viewer reads it leniently through its own copy of the fields).
pub fn read_index(path: &Path) -> Option<CurveIndex> {
    serde_json::from_slice(&crate::input::read_bytes(path, crate::input::InputKind::RunFile).ok()?)
        .ok()
}
