//! Running as one rank of an MPI job (docs/cluster.md). Built with `--features mpi` and started
//! by an MPI launcher (`mpirun -n N emberfit fit JOB.toml --headless`), the process joins the
//! job: rank 0 runs the command as usual and alone touches the run directory; it hands each
//! batch of evaluations to the other ranks through `ranks::Distributed`, while they load the
//! same job (or model) and serve batches until rank 0 says stop.
//!
//! Without the feature, or when no launcher started the process, `Cluster::join` gives the
//! single process of today and every batch is evaluated locally: this facade compiles no MPI.

#[cfg(feature = "mpi")]
pub mod ranks;

use std::path::Path;

use crate::fit::evaluator::{Evaluator, Local, Task};

/// Errors of joining or serving an MPI job.
#[derive(Debug, thiserror::Error)]
pub enum ClusterError {
    #[error(transparent)]
    Job(#[from] crate::case::CaseError),
    #[error("the MPI library offers thread level {offered}, and emberfit needs `serialized` or more (its fit runs in a thread of rank 0)")]
    Threading { offered: String },
    #[error("MPI is already initialised in this process")]
    AlreadyInitialised,
    #[error("rank {rank}: a message from rank 0 could not be read ({problem}); are all ranks the same emberfit build?")]
    Message { rank: usize, problem: String },
    #[error("rank {rank} was asked for a `{kind}` batch, which this command does not serve; are all ranks running the same command?")]
    UnexpectedTask { rank: usize, kind: String },
}

/// This process's place in the job.
pub struct Cluster {
    #[cfg(feature = "mpi")]
    ranks: Option<ranks::Ranks>,
}

impl Cluster {
    /// Joins the MPI job that started this process; a lone process (no launcher, or a build
    /// without the `mpi` feature) is a job of one.
    pub fn join() -> Result<Cluster, ClusterError> {
        Ok(Cluster {
            #[cfg(feature = "mpi")]
            ranks: ranks::Ranks::join()?,
        })
    }

    /// Number of ranks (1 for a lone process).
    pub fn size(&self) -> usize {
        #[cfg(feature = "mpi")]
        if let Some(ranks) = &self.ranks {
            return ranks.size();
        }
        1
    }

    /// True on every rank but 0: such a rank serves batches and writes nothing.
    pub fn is_worker(&self) -> bool {
        #[cfg(feature = "mpi")]
        if let Some(ranks) = &self.ranks {
            return ranks.rank() != 0;
        }
        false
    }

    /// The evaluator rank 0 hands its batches to (`Send`: it may move to the fit's thread).
    pub fn evaluator(&self) -> AnyEvaluator {
        #[cfg(feature = "mpi")]
        if let Some(ranks) = &self.ranks {
            if ranks.size() > 1 && ranks.rank() == 0 {
                return AnyEvaluator::Distributed(ranks.distributed());
            }
        }
        AnyEvaluator::Local(Local)
    }

    /// A worker rank's part of `fit`: loads the same job and serves its evaluations until
    /// rank 0 says stop. Does nothing on rank 0 or a lone process.
    pub fn serve_fit(&self, job_path: &Path) -> Result<(), ClusterError> {
        #[cfg(feature = "mpi")]
        if let Some(ranks) = &self.ranks {
            if ranks.rank() != 0 {
                return ranks.serve_fit(job_path);
            }
        }
        let _ = job_path;
        Ok(())
    }

    /// A worker rank's part of `predict --band`: serves the drawn sets until rank 0 says stop
    /// (`band` is `None` for a model without uncertainty: rank 0 then reports the error).
    pub fn serve_band(
        &self,
        band: Option<&crate::predict::BandDraw<'_>>,
    ) -> Result<(), ClusterError> {
        #[cfg(feature = "mpi")]
        if let Some(ranks) = &self.ranks {
            if ranks.rank() != 0 {
                let tasks: Vec<&dyn ranks::Served> =
                    band.into_iter().map(|b| b as &dyn ranks::Served).collect();
                return ranks.serve(&tasks);
            }
        }
        let _ = band;
        Ok(())
    }
}

/// This process's threads, or (rank 0 of an MPI job) all the ranks.
pub enum AnyEvaluator {
    Local(Local),
    #[cfg(feature = "mpi")]
    Distributed(ranks::Distributed),
}

impl Evaluator for AnyEvaluator {
    fn evaluate<T: Task>(&self, task: &T, points: &[Vec<f64>]) -> Vec<T::Output> {
        match self {
            AnyEvaluator::Local(local) => local.evaluate(task, points),
            #[cfg(feature = "mpi")]
            AnyEvaluator::Distributed(distributed) => distributed.evaluate(task, points),
        }
    }
}
