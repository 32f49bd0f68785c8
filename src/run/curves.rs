//! `cases/`: the best model against the data, one CSV per case and signal, and
//! `cases/curves.json`, which says what the CSVs hold (unit, where σ came from) and when they
//! were written. Written at checkpoints while the fit runs (the current best) and once more
//! at the end (the final model), every file through [`write_atomically`], so a viewer always
//! reads a whole set.
//!
//! **Invariant:** the only code that knows the names and columns of these files: the case
//! curve's file name is built by [`curve_stem`] alone, and every reader (the interface, the
//! report, `predict`'s calibration errors) parses them here.

use std::path::{Path, PathBuf};

use serde::{Deserialize, Serialize};

use crate::export::write_atomically;
use crate::fit::job::FitJob;
use crate::fit::model::CaseModel;

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

/// The file stem of a case's curve: the slug of the case name, two dashes, the signal.
pub fn curve_stem(case: &str, signal: &str) -> String {
    format!("{}--{signal}", slug(case))
}

/// The stem an older version wrote for a case's curve (the case name as it is), which a
/// viewer still looks for.
pub fn older_curve_stem(case: &str, signal: &str) -> String {
    format!("{case}--{signal}")
}

/// The file name of a case's curve in `cases/`.
pub fn curve_file(case: &str, signal: &str) -> String {
    format!("{}.csv", curve_stem(case, signal))
}

/// The case slug and the signal of a curve's file stem.
pub fn split_stem(stem: &str) -> Option<(&str, &str)> {
    stem.rsplit_once("--")
}

/// The curve CSVs in a run's `cases/`, sorted, each with its file stem; none when the folder
/// cannot be read.
pub fn case_curve_files(dir: &RunDirectory) -> Vec<(String, PathBuf)> {
    let Ok(entries) = std::fs::read_dir(dir.cases()) else {
        return Vec::new();
    };
    let mut paths: Vec<PathBuf> = entries
        .filter_map(|e| e.ok().map(|e| e.path()))
        .filter(|p| p.extension().is_some_and(|x| x == "csv"))
        .collect();
    paths.sort();
    paths
        .into_iter()
        .map(|path| {
            let stem = path
                .file_stem()
                .map(|s| s.to_string_lossy().into_owned())
                .unwrap_or_default();
            (stem, path)
        })
        .collect()
}

/// One `cases/<case>--<signal>.csv`: measured and model at the data times.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct CaseCurve {
    pub time_s: Vec<f64>,
    pub measured: Vec<f64>,
    /// The σ of each point (the spread of the repeats, or the job's noise level); empty when
    /// the file has no `sigma` column.
    pub sigma: Vec<f64>,
    pub model: Vec<f64>,
    /// Standardised residual (model − measured)/σ; empty when the file has no such column.
    pub residual: Vec<f64>,
}

/// The columns [`write_case_curves`] writes, in order.
const CURVE_COLUMNS: [&str; 5] = ["time_s", "measured", "sigma", "model", "residual"];

/// Reads a case CSV strictly: every row has the five columns this version writes (a cell
/// that is not a number is NaN); the error names the first row that has not.
pub fn parse_case_curve_strict(text: &str) -> Result<CaseCurve, String> {
    let mut curve = CaseCurve::default();
    for (line_idx, line) in text.lines().enumerate().skip(1) {
        let numbers: Vec<f64> = line
            .split(',')
            .map(|c| c.trim().parse::<f64>().unwrap_or(f64::NAN))
            .collect();
        if numbers.len() != CURVE_COLUMNS.len() {
            return Err(format!(
                "line {} has {} columns, expected {}",
                line_idx + 1,
                numbers.len(),
                CURVE_COLUMNS.len()
            ));
        }
        curve.time_s.push(numbers[0]);
        curve.measured.push(numbers[1]);
        curve.sigma.push(numbers[2]);
        curve.model.push(numbers[3]);
        curve.residual.push(numbers[4]);
    }
    Ok(curve)
}

/// Reads a case CSV leniently, by column name: `time_s` and `measured` must be there; the
/// optional columns it lacks are returned by name, and a damaged row is skipped.
pub fn parse_case_curve(text: &str) -> Result<(CaseCurve, Vec<&'static str>), String> {
    let mut reader = csv::ReaderBuilder::new()
        .flexible(true)
        .from_reader(text.as_bytes());
    let headers = reader
        .headers()
        .map_err(|e| format!("has no header row ({e})"))?
        .clone();
    let column = |name: &str| headers.iter().position(|h| h.trim() == name);
    let (Some(time_col), Some(measured_col)) = (column("time_s"), column("measured")) else {
        return Err("has no `time_s` and `measured` columns".into());
    };
    let optional = [
        ("sigma", column("sigma")),
        ("model", column("model")),
        ("residual", column("residual")),
    ];
    let missing = optional
        .iter()
        .filter(|(_, c)| c.is_none())
        .map(|(n, _)| *n)
        .collect();
    let mut curve = CaseCurve::default();
    for record in reader.records() {
        // A damaged row is skipped; the rest of the file is still worth showing.
        let Ok(record) = record else { continue };
        let cell = |col: usize| {
            record
                .get(col)
                .and_then(|c| c.trim().parse::<f64>().ok())
                .unwrap_or(f64::NAN)
        };
        curve.time_s.push(cell(time_col));
        curve.measured.push(cell(measured_col));
        for (name, col) in &optional {
            if let Some(col) = col {
                let target = match *name {
                    "sigma" => &mut curve.sigma,
                    "model" => &mut curve.model,
                    _ => &mut curve.residual,
                };
                target.push(cell(*col));
            }
        }
    }
    Ok((curve, missing))
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
            let mut text = format!("{}\n", CURVE_COLUMNS.join(","));
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

/// Reads `cases/curves.json` strictly; `None` when it is missing or does not parse.
pub fn read_index(path: &Path) -> Option<CurveIndex> {
    serde_json::from_slice(&crate::input::read_bytes(path, crate::input::InputKind::RunFile).ok()?)
        .ok()
}

/// `cases/curves.json` read leniently: what the case CSVs hold and when they were written.
#[derive(Debug, Clone, Default, PartialEq, Deserialize)]
#[serde(default)]
pub struct CurveIndexView {
    pub iteration: Option<u64>,
    pub evaluations: Option<u64>,
    pub objective: Option<f64>,
    pub is_final: Option<bool>,
    pub curves: Vec<CurveEntryView>,
}

/// One entry of `cases/curves.json`, read leniently.
#[derive(Debug, Clone, Default, PartialEq, Deserialize)]
#[serde(default)]
pub struct CurveEntryView {
    pub case: String,
    pub signal: String,
    pub unit: String,
    pub sigma_source: String,
}

impl CurveIndexView {
    /// Reads the text of a `cases/curves.json`.
    pub fn from_json(text: &str) -> Result<CurveIndexView, serde_json::Error> {
        serde_json::from_str(text)
    }
}
