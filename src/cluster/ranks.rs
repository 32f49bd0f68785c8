//! The MPI side (rsmpi over the system's MPI library): the batch protocol between rank 0 and
//! the worker ranks.
//!
//! Rank 0 splits a batch of n points by a fixed rule — rank r gets points ⌊r·n/N⌋ up to
//! ⌊(r+1)·n/N⌋ — sends each worker its share (a `Request`, encoded with postcard: floats as
//! their IEEE bits), evaluates share 0 on its own threads, then receives the workers' results
//! in rank order. A worker receives requests until `Request::Stop`, evaluating each share on
//! its own rayon threads. Every point is computed by the same code from the same job on
//! whichever rank, so the gathered results equal a single process's bit for bit.
//!
//! Waiting polls (with a short sleep) instead of blocking inside MPI, so idle ranks leave the
//! cores to the ones computing, and rank 0 notices when the job is being ended while it waits.

use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::Arc;
use std::time::Duration;

use mpi::environment::Universe;
use mpi::point_to_point::{Destination, MatchedReceiveVec, Source};
use mpi::topology::{Communicator, SimpleCommunicator};
use mpi::Threading;
use serde::{Deserialize, Serialize};

use super::ClusterError;
use crate::case::job::load_job;
use crate::case::model::CaseModel;
use crate::fit::evaluator::{Costs, Evaluator, Local, Residuals, Task, TaskKind};
use crate::fit::objective::Objective;

/// Message tags: rank 0 → worker, worker → rank 0.
const REQUEST: i32 = 1;
const REPLY: i32 = 2;
/// Polls that only yield the core before the waits start to sleep (a reply that comes within
/// microseconds is taken at once), and the longest sleep between two polls after that.
const YIELDING_POLLS: u32 = 200;
const LONGEST_POLL: Duration = Duration::from_millis(1);

/// What rank 0 sends a worker.
#[derive(Debug, Serialize, Deserialize)]
enum Request {
    Batch {
        kind: TaskKind,
        points: Vec<Vec<f64>>,
    },
    Stop,
}

/// Environment variables by which the usual launchers tell a process it is one of a job's
/// ranks (Open MPI's mpirun; the PMI and PMIx process managers of MPICH and of schedulers).
const LAUNCHER_VARIABLES: [&str; 3] = ["OMPI_COMM_WORLD_SIZE", "PMI_SIZE", "PMIX_RANK"];

/// Membership of an MPI job; finalises MPI when dropped, after rank 0 has stopped the workers.
pub struct Ranks {
    rank: usize,
    size: usize,
    /// Raised by SIGTERM on rank 0: the launcher or the scheduler is ending the job.
    ending: Arc<AtomicBool>,
    universe: Option<Universe>,
}

impl Ranks {
    /// Initialises MPI when a launcher started this process; `None` otherwise.
    pub fn join() -> Result<Option<Ranks>, ClusterError> {
        if !LAUNCHER_VARIABLES
            .iter()
            .any(|v| std::env::var_os(v).is_some())
        {
            return Ok(None);
        }
        let (universe, offered) = mpi::initialize_with_threading(Threading::Serialized)
            .ok_or(ClusterError::AlreadyInitialised)?;
        if offered < Threading::Serialized {
            return Err(ClusterError::Threading {
                offered: format!("{offered:?}").to_lowercase(),
            });
        }
        let world = universe.world();
        let (rank, size) = (world.rank() as usize, world.size() as usize);
        let ending = Arc::new(AtomicBool::new(false));
        if rank == 0 && size > 1 {
            // Alongside the command's own handler (a clean stop after the generation): while
            // rank 0 waits for other ranks, this one says the job is going away.
            let _ = signal_hook::flag::register(signal_hook::consts::SIGTERM, Arc::clone(&ending));
        }
        if rank != 0 {
            install_worker_panic_hook(rank);
        }
        Ok(Some(Ranks {
            rank,
            size,
            ending,
            universe: Some(universe),
        }))
    }

    pub fn rank(&self) -> usize {
        self.rank
    }

    pub fn size(&self) -> usize {
        self.size
    }

    /// Rank 0's evaluator over all the ranks.
    pub fn distributed(&self) -> Distributed {
        Distributed {
            size: self.size,
            ending: Arc::clone(&self.ending),
        }
    }

    /// A worker's part of `fit`: the job's objective, served until rank 0 says stop.
    pub fn serve_fit(&self, job_path: &std::path::Path) -> Result<(), ClusterError> {
        let job = load_job(job_path)?;
        let model = CaseModel::new(&job);
        let objective = Objective::new(&model);
        let costs = Costs(&objective);
        let residuals = Residuals(&objective);
        self.serve(&[&costs, &residuals])
    }

    /// Receives batches from rank 0 and answers them, until `Request::Stop`.
    pub fn serve(&self, tasks: &[&dyn Served]) -> Result<(), ClusterError> {
        let world = SimpleCommunicator::world();
        let root = world.process_at_rank(0);
        loop {
            let bytes = wait_for(&root, REQUEST, || false);
            let request: Request =
                postcard::from_bytes(&bytes).map_err(|e| ClusterError::Message {
                    rank: self.rank,
                    problem: e.to_string(),
                })?;
            let (kind, points) = match request {
                Request::Stop => return Ok(()),
                Request::Batch { kind, points } => (kind, points),
            };
            let task = tasks.iter().find(|t| t.kind() == kind).ok_or_else(|| {
                ClusterError::UnexpectedTask {
                    rank: self.rank,
                    kind: format!("{kind:?}"),
                }
            })?;
            let reply = task.answer(&points).map_err(|e| ClusterError::Message {
                rank: self.rank,
                problem: e.to_string(),
            })?;
            root.send_with_tag(&reply[..], REPLY);
        }
    }
}

impl Drop for Ranks {
    fn drop(&mut self) {
        if self.rank == 0 {
            // However rank 0 ends (done, stopped, or an error), the workers are released.
            if let Ok(stop) = postcard::to_stdvec(&Request::Stop) {
                let world = SimpleCommunicator::world();
                for worker in 1..self.size {
                    world
                        .process_at_rank(worker as i32)
                        .send_with_tag(&stop[..], REQUEST);
                }
            }
        }
        // Finalises MPI.
        drop(self.universe.take());
    }
}

/// A task as a worker serves it: points in, the encoded results out.
pub trait Served: Sync {
    fn kind(&self) -> TaskKind;
    fn answer(&self, points: &[Vec<f64>]) -> Result<Vec<u8>, postcard::Error>;
}

impl<T: Task> Served for T {
    fn kind(&self) -> TaskKind {
        T::KIND
    }
    fn answer(&self, points: &[Vec<f64>]) -> Result<Vec<u8>, postcard::Error> {
        postcard::to_stdvec(&Local.evaluate(self, points))
    }
}

/// Rank 0's evaluator over all the ranks (holds no MPI handle, so it may move to a thread).
pub struct Distributed {
    size: usize,
    ending: Arc<AtomicBool>,
}

/// Rank r's share of n points: ⌊r·n/N⌋ up to ⌊(r+1)·n/N⌋.
pub fn share(rank: usize, size: usize, n: usize) -> std::ops::Range<usize> {
    (rank * n / size)..((rank + 1) * n / size)
}

impl Evaluator for Distributed {
    fn evaluate<T: Task>(&self, task: &T, points: &[Vec<f64>]) -> Vec<T::Output> {
        let world = SimpleCommunicator::world();
        for worker in 1..self.size {
            let request = Request::Batch {
                kind: T::KIND,
                points: points[share(worker, self.size, points.len())].to_vec(),
            };
            let bytes = postcard::to_stdvec(&request)
                .unwrap_or_else(|e| end_job(&world, &format!("cannot encode a batch: {e}")));
            world
                .process_at_rank(worker as i32)
                .send_with_tag(&bytes[..], REQUEST);
        }
        let mut results = Local.evaluate(task, &points[share(0, self.size, points.len())]);
        for worker in 1..self.size {
            let expected = share(worker, self.size, points.len()).len();
            let bytes = wait_for(&world.process_at_rank(worker as i32), REPLY, || {
                self.ending.load(Ordering::SeqCst)
            });
            let part: Vec<T::Output> = postcard::from_bytes(&bytes).unwrap_or_else(|e| {
                end_job(
                    &world,
                    &format!("the results from rank {worker} could not be read ({e})"),
                )
            });
            if part.len() != expected {
                end_job(
                    &world,
                    &format!(
                        "rank {worker} returned {} results for {expected} points",
                        part.len()
                    ),
                );
            }
            results.extend(part);
        }
        results
    }
}

/// Waits for a message with `tag` from `source` and returns its bytes. While rank 0 waits and
/// `job_ending` turns true, the job is going away under it (a rank died, or the launcher or
/// the scheduler is cancelling): it says so and exits; the checkpoint of the last whole
/// generation is on disk.
fn wait_for(
    source: &mpi::topology::Process<'_>,
    tag: i32,
    job_ending: impl Fn() -> bool,
) -> Vec<u8> {
    let mut pause = Duration::from_micros(20);
    let mut polls = 0;
    loop {
        if let Some(found) = source.immediate_matched_probe_with_tag(tag) {
            let (bytes, _status) = found.matched_receive_vec::<u8>();
            return bytes;
        }
        if job_ending() {
            eprintln!(
                "emberfit: the MPI job is being ended while rank {} evaluates its share (a rank \
                 died, or the job was cancelled). A fit's run directory keeps the checkpoint of \
                 its last whole generation: continue it on any number of ranks with `--resume`.",
                source.rank()
            );
            std::process::exit(1);
        }
        polls += 1;
        if polls < YIELDING_POLLS {
            std::thread::yield_now();
        } else {
            std::thread::sleep(pause);
            pause = (pause * 2).min(LONGEST_POLL);
        }
    }
}

/// Says what went wrong and ends every rank of the job.
fn end_job(world: &SimpleCommunicator, message: &str) -> ! {
    eprintln!(
        "emberfit (rank {}): {message}; ending the MPI job",
        world.rank()
    );
    world.abort(1)
}

/// A panic on a worker rank (a bug, or memory running out) ends the whole job at once with
/// the rank named, rather than leaving rank 0 waiting for results that never come.
fn install_worker_panic_hook(rank: usize) {
    let default = std::panic::take_hook();
    std::panic::set_hook(Box::new(move |info| {
        default(info);
        eprintln!(
            "emberfit (rank {rank}): this rank failed; ending the MPI job. Rank 0's run \
             directory keeps the last checkpoint: continue with `--resume` on any number of ranks."
        );
        SimpleCommunicator::world().abort(1);
    }));
}
