//! The run's advisory lock file `<run dir>/run.lock`; its first line is the holder's pid in
//! decimal. (Only the reader lives here on this branch; the lock itself comes with the
//! hardening work.)

use std::path::Path;

/// The pid written in `<run dir>/run.lock`, if the file is there and its first line is a pid.
pub fn holder_pid(run_dir: &Path) -> Option<u32> {
    let text = std::fs::read_to_string(run_dir.join("run.lock")).ok()?;
    text.lines().next()?.trim().parse().ok()
}
