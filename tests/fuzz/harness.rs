//! A fuzz harness on stable Rust over the TOML and CSV readers (issue 15), shared by the
//! short run in the test suite (tests/integration/fuzz.rs) and the long one
//! (benches/fuzz.rs).
//!
//! Inputs are arbitrary bytes and mutations of the repository's own files (demo cases,
//! models, test cases, bad-input fixtures) made by a small seeded mutator: bit flips, byte
//! insertions and deletions, a line spliced in from another file, a line repeated or dropped,
//! a number replaced by an extreme (0, −1, 1e308, 1e-308, 1e30, NaN, inf, 2^32 ...), a cut.
//! Each input runs on a worker thread under `catch_unwind`, and the caller waits at most a
//! time limit for it: a panic or a hang is counted and reported, never fatal to the run.

use std::panic::AssertUnwindSafe;
use std::path::{Path, PathBuf};
use std::sync::mpsc;
use std::time::{Duration, Instant};

use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;

/// A reader under test: its name and what it does with one input's text, given the path the
/// text stands for (written there first when the reader reads files).
pub struct Reader {
    pub name: &'static str,
    /// Seed files (paths relative to the repository).
    pub seeds: Vec<PathBuf>,
    /// Writes the input to disk before reading (readers that follow relative paths).
    pub writes_file: bool,
    pub read: fn(&Path, &str) -> bool,
}

/// What one reader did with its inputs.
#[derive(Debug, Default, Clone)]
pub struct Counts {
    pub inputs: u64,
    pub accepted: u64,
    pub refused: u64,
    pub panics: Vec<String>,
    pub hangs: Vec<String>,
    pub slowest: Duration,
}

fn manifest() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

fn files_with(dir: &Path, suffix: &str, out: &mut Vec<PathBuf>) {
    let Ok(entries) = std::fs::read_dir(dir) else {
        return;
    };
    let mut paths: Vec<PathBuf> = entries.filter_map(Result::ok).map(|e| e.path()).collect();
    paths.sort();
    for path in paths {
        if path.is_dir() {
            files_with(&path, suffix, out);
        } else if path.to_string_lossy().ends_with(suffix) {
            out.push(path.strip_prefix(manifest()).unwrap_or(&path).to_path_buf());
        }
    }
}

fn seeds(dirs: &[&str], suffix: &str, filter: fn(&str) -> bool) -> Vec<PathBuf> {
    let mut out = Vec::new();
    for dir in dirs {
        files_with(&manifest().join(dir), suffix, &mut out);
    }
    out.retain(|p| {
        let text = std::fs::read_to_string(manifest().join(p)).unwrap_or_default();
        filter(&text)
    });
    out
}

/// The readers: every TOML format and both CSV readers.
pub fn readers() -> Vec<Reader> {
    use emberfit::data::table::{parse_table, ColumnRequest, Quantity};
    let all = ["models", "demo-cases", "tests/cases", "tests/bad-input"];
    vec![
        Reader {
            name: "material TOML",
            seeds: seeds(&all, ".toml", |t| t.contains("[[component]]")),
            writes_file: false,
            read: |path, text| emberfit::case::material::material_from_str(path, text).is_ok(),
        },
        Reader {
            name: "scenario TOML",
            seeds: seeds(&all, ".toml", |t| t.contains("[[layer]]")),
            writes_file: true,
            read: |path, _| emberfit::case::load_scenario(path).is_ok(),
        },
        Reader {
            name: "milligram scenario TOML",
            seeds: seeds(&all, ".toml", |t| t.contains("[programme]")),
            writes_file: false,
            read: |path, text| {
                emberfit::microscale::scenario::milligram_scenario_from_str(path, text).is_ok()
            },
        },
        Reader {
            name: "test description TOML (and its reduction)",
            seeds: seeds(&all, ".toml", |t| t.contains("data_file")),
            writes_file: false,
            read: |path, text| match emberfit::data::TestDescription::parse(path, text) {
                Ok(test) => emberfit::data::reduce(&test).is_ok(),
                Err(_) => false,
            },
        },
        Reader {
            name: "fit job TOML",
            seeds: seeds(&all, ".toml", |t| t.contains("[[parameter]]")),
            writes_file: true,
            read: |path, _| emberfit::case::job::load_job(path).is_ok(),
        },
        Reader {
            name: "cone CSV (data::table)",
            seeds: seeds(&["demo-cases", "tests/bad-input"], ".csv", |t| {
                t.to_lowercase().contains("mass")
            }),
            writes_file: false,
            read: |path, text| {
                let requests = [
                    ColumnRequest::required("time_s", Quantity::Time),
                    ColumnRequest {
                        is_required: false,
                        ..ColumnRequest::required("mass_g", Quantity::Mass)
                    },
                    ColumnRequest {
                        is_required: false,
                        ..ColumnRequest::required("hrr_kw_m2", Quantity::HeatReleaseRate)
                    },
                    ColumnRequest {
                        is_required: false,
                        ..ColumnRequest::required("Mass", Quantity::Mass)
                    },
                ];
                parse_table(path, text, &requests).is_ok()
            },
        },
        Reader {
            name: "TGA/DSC/MCC CSV (microscale::files)",
            seeds: seeds(&["demo-cases"], ".csv", |t| {
                t.contains('K') || t.contains("°C")
            }),
            writes_file: false,
            read: |path, text| emberfit::microscale::files::parse_thermogram(path, text).is_ok(),
        },
    ]
}

const EXTREMES: [&str; 14] = [
    "0",
    "-0",
    "-1",
    "1e308",
    "-1e308",
    "1e-308",
    "1e30",
    "nan",
    "inf",
    "-inf",
    "4294967296",
    "18446744073709551617",
    "1e-9",
    "0.0000000000000000000000000000001",
];

/// Seed text, cut to its first 200 lines (long data files add time, not new paths).
fn seed_text(path: &Path) -> Vec<u8> {
    let bytes = std::fs::read(manifest().join(path)).unwrap_or_default();
    let mut lines = 0;
    for (i, b) in bytes.iter().enumerate() {
        if *b == b'\n' {
            lines += 1;
            if lines == 200 {
                return bytes[..=i].to_vec();
            }
        }
    }
    bytes
}

/// One input: arbitrary bytes (1 in 16), or seed `base` with 1–4 mutations.
pub fn make_input(rng: &mut ChaCha8Rng, seeds: &[Vec<u8>], base: usize) -> Vec<u8> {
    if seeds.is_empty() || rng.gen_range(0..16) == 0 {
        let n = rng.gen_range(0..512);
        return (0..n).map(|_| rng.gen()).collect();
    }
    let mut data = seeds[base % seeds.len()].clone();
    for _ in 0..rng.gen_range(1..=4) {
        mutate(rng, &mut data, seeds);
    }
    data
}

fn line_starts(data: &[u8]) -> Vec<usize> {
    std::iter::once(0)
        .chain(
            data.iter()
                .enumerate()
                .filter(|(_, b)| **b == b'\n')
                .map(|(i, _)| i + 1),
        )
        .filter(|&i| i < data.len())
        .collect()
}

fn line_at(data: &[u8], start: usize) -> &[u8] {
    let end = data[start..]
        .iter()
        .position(|b| *b == b'\n')
        .map_or(data.len(), |p| start + p + 1);
    &data[start..end]
}

fn mutate(rng: &mut ChaCha8Rng, data: &mut Vec<u8>, seeds: &[Vec<u8>]) {
    let len = data.len();
    match rng.gen_range(0..8) {
        0 if len > 0 => {
            let i = rng.gen_range(0..len);
            data[i] ^= 1 << rng.gen_range(0..8);
        }
        1 => {
            let i = rng.gen_range(0..=len);
            let byte = if rng.gen_bool(0.5) {
                *b",;\t\n\"=[]{}.-#e"
                    .get(rng.gen_range(0..15))
                    .unwrap_or(&b',')
            } else {
                rng.gen()
            };
            data.insert(i, byte);
        }
        2 if len > 0 => {
            let i = rng.gen_range(0..len);
            let n = rng.gen_range(1..=16.min(len - i));
            data.drain(i..i + n);
        }
        3 => {
            // Splice a line from another seed (or this one) in at a line start.
            let donor = &seeds[rng.gen_range(0..seeds.len())];
            let starts = line_starts(donor);
            if let (false, Some(&from)) = (
                starts.is_empty(),
                starts.get(rng.gen_range(0..starts.len().max(1))),
            ) {
                let line = line_at(donor, from).to_vec();
                let here = line_starts(data);
                let at = here
                    .get(rng.gen_range(0..here.len().max(1)))
                    .copied()
                    .unwrap_or(0);
                data.splice(at..at, line);
            }
        }
        4 => {
            // Repeat or drop a line.
            let starts = line_starts(data);
            if !starts.is_empty() {
                let at = starts[rng.gen_range(0..starts.len())];
                let line = line_at(data, at).to_vec();
                if rng.gen_bool(0.5) {
                    data.splice(at..at, line);
                } else {
                    data.drain(at..at + line.len());
                }
            }
        }
        5 | 6 => {
            // Replace a number by an extreme value.
            let digits: Vec<usize> = data
                .iter()
                .enumerate()
                .filter(|(_, b)| b.is_ascii_digit())
                .map(|(i, _)| i)
                .collect();
            if !digits.is_empty() {
                let mut start = digits[rng.gen_range(0..digits.len())];
                while start > 0 && (data[start - 1].is_ascii_digit() || data[start - 1] == b'.') {
                    start -= 1;
                }
                let mut end = start;
                while end < data.len()
                    && (data[end].is_ascii_digit() || b".eE+-".contains(&data[end]))
                {
                    end += 1;
                }
                let value = EXTREMES[rng.gen_range(0..EXTREMES.len())];
                data.splice(start..end, value.bytes());
            }
        }
        7 if len > 0 => {
            data.truncate(rng.gen_range(0..len));
        }
        _ => {}
    }
}

/// The folder the file-reading readers write into: a mirror of the seed folders (real
/// folders, each file a symbolic link to the repository's), so relative paths in a mutated
/// file resolve as in the original.
fn mirror(root: &Path) -> std::io::Result<()> {
    for dir in ["models", "demo-cases", "tests/cases", "tests/bad-input"] {
        mirror_dir(&manifest().join(dir), &root.join(dir))?;
    }
    Ok(())
}

fn mirror_dir(from: &Path, to: &Path) -> std::io::Result<()> {
    std::fs::create_dir_all(to)?;
    for entry in std::fs::read_dir(from)? {
        let entry = entry?;
        let target = to.join(entry.file_name());
        if entry.path().is_dir() {
            mirror_dir(&entry.path(), &target)?;
        } else if !target.exists() {
            std::os::unix::fs::symlink(entry.path(), &target)?;
        }
    }
    Ok(())
}

type Job = (PathBuf, Vec<u8>);
/// Name of the worker threads; their panics are counted, not printed.
const WORKER_NAME: &str = "emberfit-fuzz-worker";
type Outcome = std::thread::Result<bool>;

fn start_worker(read: fn(&Path, &str) -> bool) -> (mpsc::Sender<Job>, mpsc::Receiver<Outcome>) {
    let (job_tx, job_rx) = mpsc::channel::<Job>();
    let (out_tx, out_rx) = mpsc::channel::<Outcome>();
    let spawned = std::thread::Builder::new()
        .name(WORKER_NAME.into())
        .spawn(move || {
            for (path, bytes) in job_rx {
                let text = String::from_utf8_lossy(&bytes).into_owned();
                let outcome = std::panic::catch_unwind(AssertUnwindSafe(|| read(&path, &text)));
                if out_tx.send(outcome).is_err() {
                    break;
                }
            }
        });
    drop(spawned);
    (job_tx, out_rx)
}

/// Runs `n` inputs through one reader with a per-input time limit.
pub fn fuzz_reader(reader: &Reader, n: u64, seed: u64, limit: Duration, scratch: &Path) -> Counts {
    let seeds: Vec<Vec<u8>> = reader.seeds.iter().map(|p| seed_text(p)).collect();
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let mut counts = Counts::default();
    let (mut jobs, mut outcomes) = start_worker(reader.read);
    for index in 0..n {
        let base = rng.gen_range(0..reader.seeds.len().max(1));
        let input = make_input(&mut rng, &seeds, base);
        // Where the input stands: beside its seed, so its relative paths resolve.
        let folder = match reader.seeds.get(base) {
            Some(seed) => scratch.join(seed.parent().unwrap_or(Path::new(""))),
            None => scratch.to_path_buf(),
        };
        let path = folder.join(format!("zz-fuzz-input-{}.toml", reader.name.len()));
        if reader.writes_file && std::fs::write(&path, &input).is_err() {
            continue;
        }
        counts.inputs += 1;
        let started = Instant::now();
        if jobs.send((path.clone(), input.clone())).is_err() {
            (jobs, outcomes) = start_worker(reader.read);
            continue;
        }
        match outcomes.recv_timeout(limit) {
            Ok(Ok(true)) => counts.accepted += 1,
            Ok(Ok(false)) => counts.refused += 1,
            Ok(Err(payload)) => {
                let message = payload
                    .downcast_ref::<String>()
                    .cloned()
                    .or_else(|| payload.downcast_ref::<&str>().map(|s| s.to_string()))
                    .unwrap_or_default();
                counts.panics.push(format!(
                    "input {index}: {message}\n{}",
                    String::from_utf8_lossy(&input)
                ));
                (jobs, outcomes) = start_worker(reader.read);
            }
            Err(_) => {
                counts.hangs.push(format!(
                    "input {index}: no answer within {limit:?}\n{}",
                    String::from_utf8_lossy(&input)
                ));
                // The stuck worker is abandoned; a new one takes the next input.
                (jobs, outcomes) = start_worker(reader.read);
            }
        }
        counts.slowest = counts.slowest.max(started.elapsed());
    }
    counts
}

/// Runs every reader; returns (reader name, counts).
pub fn fuzz_all(n_per_reader: u64, seed: u64, limit: Duration) -> Vec<(&'static str, Counts)> {
    let scratch = std::env::temp_dir().join(format!("emberfit-fuzz-{}-{seed}", std::process::id()));
    let _ = std::fs::remove_dir_all(&scratch);
    mirror(&scratch).expect("the fuzz folder is made");
    // The workers' panics are counted, not printed; other threads' are printed as before.
    let hook = std::sync::Arc::new(std::panic::take_hook());
    let previous = std::sync::Arc::clone(&hook);
    std::panic::set_hook(Box::new(move |info| {
        if std::thread::current().name() != Some(WORKER_NAME) {
            previous(info);
        }
    }));
    let results = readers()
        .iter()
        .enumerate()
        .map(|(i, reader)| {
            (
                reader.name,
                fuzz_reader(reader, n_per_reader, seed + i as u64, limit, &scratch),
            )
        })
        .collect();
    let _ = std::panic::take_hook();
    if let Ok(hook) = std::sync::Arc::try_unwrap(hook) {
        std::panic::set_hook(hook);
    }
    let _ = std::fs::remove_dir_all(&scratch);
    results
}
