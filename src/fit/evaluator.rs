//! The seam between the code that needs many independent evaluations (the population of each
//! generation, the Jacobian of the uncertainty step, the drawn sets of a prediction band) and
//! whatever carries them out: a batch of points in, one result per point out, in input order.
//!
//! `Local` evaluates a batch on this process's rayon threads. With the `mpi` feature,
//! `crate::cluster::Distributed` spreads it over the ranks of an MPI job (docs/cluster.md).
//! Either way every point is computed by the same code from the same inputs, and the results
//! come back in input order, so everything decided from them is the same bit for bit.

use rayon::prelude::*;
use serde::de::DeserializeOwned;
use serde::{Deserialize, Serialize};

use super::model::Model;
use super::objective::{Evaluation, Objective};

/// Names a task in a message between processes. Every process builds its tasks from the same
/// job or model files, so the kind and the points say everything a worker needs.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
pub enum TaskKind {
    /// The objective at parameter values (`Costs`).
    Cost,
    /// The standardised residual vector at parameter values (`Residuals`).
    Residuals,
    /// One drawn parameter set of a prediction band, simulated (`predict`).
    BandDraw,
}

/// One kind of evaluation, applied point by point.
pub trait Task: Sync {
    /// What one point gives; serialisable so that another process can send it back.
    type Output: Serialize + DeserializeOwned + Send;
    const KIND: TaskKind;
    fn run(&self, point: &[f64]) -> Self::Output;
}

/// Evaluates batches; the results are in the order of `points`.
pub trait Evaluator {
    fn evaluate<T: Task>(&self, task: &T, points: &[Vec<f64>]) -> Vec<T::Output>;
}

/// This process's threads (rayon; its ordered `collect` keeps input order).
#[derive(Debug, Clone, Copy, Default)]
pub struct Local;

impl Evaluator for Local {
    fn evaluate<T: Task>(&self, task: &T, points: &[Vec<f64>]) -> Vec<T::Output> {
        points.par_iter().map(|point| task.run(point)).collect()
    }
}

/// The objective at parameter values (file units).
pub struct Costs<'o, 'a, M: Model>(pub &'o Objective<'a, M>);

impl<M: Model> Task for Costs<'_, '_, M> {
    type Output = Evaluation;
    const KIND: TaskKind = TaskKind::Cost;
    fn run(&self, values: &[f64]) -> Evaluation {
        self.0.evaluate(values)
    }
}

/// The standardised residuals at parameter values (file units), or why the model failed.
pub struct Residuals<'o, 'a, M: Model>(pub &'o Objective<'a, M>);

impl<M: Model> Task for Residuals<'_, '_, M> {
    type Output = Result<Vec<f64>, String>;
    const KIND: TaskKind = TaskKind::Residuals;
    fn run(&self, values: &[f64]) -> Result<Vec<f64>, String> {
        self.0.residuals(values)
    }
}
