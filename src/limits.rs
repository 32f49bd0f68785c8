//! Limits on what the command line may ask for, checked before any work starts.

/// Most worker threads allowed: four per available core, and never more than 256. More
/// threads than that only add scheduling cost (the fit's work is one simulation per member),
/// and thousands of threads exhaust the process's memory maps before doing anything.
pub fn max_threads() -> usize {
    let cores = std::thread::available_parallelism().map_or(1, |n| n.get());
    (4 * cores).min(256)
}

/// Checks a `--threads` value: at least 1, at most [`max_threads`].
pub fn check_threads(threads: usize) -> Result<usize, String> {
    let most = max_threads();
    if threads == 0 {
        Err("--threads must be at least 1".to_string())
    } else if threads > most {
        Err(format!(
            "--threads {threads} is more than {most} (4 per available core, at most 256); \
             give at most {most}"
        ))
    } else {
        Ok(threads)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn threads_are_bounded_on_both_sides() {
        assert!(check_threads(0).is_err());
        assert_eq!(check_threads(1), Ok(1));
        let err = check_threads(10_000).unwrap_err();
        assert!(err.contains("--threads 10000"), "{err}");
    }
}
