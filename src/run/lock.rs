//! The run directory's advisory lock, `run.lock`: one fit process writes a run at a time.
//!
//! The file's first line is the holder's process id as a decimal number; the next lines say
//! where and when it started (`host = ...`, `started = ...`), for people. It is made with
//! `create_new` (atomic on every local file system), removed when the fit ends, and left
//! behind by a killed process: a lock whose pid is not alive is stale and is taken over.

use std::io::Write;
use std::path::{Path, PathBuf};

/// The lock file of a run directory.
pub fn lock_path(run_dir: &Path) -> PathBuf {
    run_dir.join("run.lock")
}

/// Why the lock could not be taken.
#[derive(Debug, thiserror::Error)]
pub enum LockError {
    #[error(
        "run directory {} is in use by the fit with pid {pid} (its lock file {} says so); \
         stop it first (kill -INT {pid}) or watch it (emberfit watch {})",
        dir.display(), lock.display(), dir.display()
    )]
    Held {
        dir: PathBuf,
        lock: PathBuf,
        pid: u32,
    },
    #[error("cannot take the lock {}", path.display())]
    Io {
        path: PathBuf,
        #[source]
        source: std::io::Error,
    },
}

/// A held lock; dropping it removes the file (when it is still this process's).
#[derive(Debug)]
pub struct RunLock {
    path: PathBuf,
}

impl Drop for RunLock {
    fn drop(&mut self) {
        if read_pid(&self.path) == Some(std::process::id()) {
            let _ = std::fs::remove_file(&self.path);
        }
    }
}

/// The pid on the first line of a lock file, alive or not.
fn read_pid(path: &Path) -> Option<u32> {
    let text = crate::input::read_text(path, crate::input::InputKind::RunFile).ok()?;
    text.lines().next()?.trim().parse().ok()
}

/// Whether a process with this id exists (signal 0 checks without sending anything).
pub fn is_alive(pid: u32) -> bool {
    let Ok(pid) = libc::pid_t::try_from(pid) else {
        return false;
    };
    if pid <= 0 {
        return false;
    }
    // SAFETY: kill with signal 0 only checks that the process exists and may be signalled.
    let result = unsafe { libc::kill(pid, 0) };
    result == 0 || std::io::Error::last_os_error().raw_os_error() == Some(libc::EPERM)
}

/// The pid of the live process holding the run's lock, if one does (`None` for no lock, an
/// unreadable one, or a stale one whose process has ended).
pub fn holder_pid(run_dir: &Path) -> Option<u32> {
    read_pid(&lock_path(run_dir)).filter(|&pid| is_alive(pid))
}

/// Takes the run's lock. Returns the lock and, when a stale lock was taken over, a note that
/// says whose it was.
pub fn acquire(run_dir: &Path) -> Result<(RunLock, Option<String>), LockError> {
    let path = lock_path(run_dir);
    let io_error = |source| LockError::Io {
        path: path.clone(),
        source,
    };
    let mut note = None;
    for _ in 0..2 {
        match std::fs::OpenOptions::new()
            .write(true)
            .create_new(true)
            .open(&path)
        {
            Ok(mut file) => {
                let host = std::fs::read_to_string("/proc/sys/kernel/hostname")
                    .map(|h| h.trim().to_string())
                    .unwrap_or_default();
                let started = humantime::format_rfc3339_seconds(std::time::SystemTime::now());
                let text = format!(
                    "{}\nhost = {host}\nstarted = {started}\n",
                    std::process::id()
                );
                file.write_all(text.as_bytes())
                    .and_then(|()| file.sync_all())
                    .map_err(io_error)?;
                return Ok((RunLock { path }, note));
            }
            Err(err) if err.kind() == std::io::ErrorKind::AlreadyExists => match read_pid(&path) {
                Some(pid) if pid != std::process::id() && is_alive(pid) => {
                    return Err(LockError::Held {
                        dir: run_dir.to_path_buf(),
                        lock: path,
                        pid,
                    });
                }
                holder => {
                    note = Some(match holder {
                        Some(pid) => format!(
                            "took over the stale lock {} of pid {pid}, which is no longer \
                                 running",
                            path.display()
                        ),
                        None => format!(
                            "took over the unreadable lock {} (no pid on its first line)",
                            path.display()
                        ),
                    });
                    std::fs::remove_file(&path)
                        .or_else(|e| {
                            if e.kind() == std::io::ErrorKind::NotFound {
                                Ok(())
                            } else {
                                Err(e)
                            }
                        })
                        .map_err(io_error)?;
                }
            },
            Err(err) => return Err(io_error(err)),
        }
    }
    Err(io_error(std::io::Error::other(
        "another process took the lock at the same moment",
    )))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn scratch(name: &str) -> PathBuf {
        let dir = std::env::temp_dir().join(format!("emberfit-lock-{name}-{}", std::process::id()));
        let _ = std::fs::remove_dir_all(&dir);
        std::fs::create_dir_all(&dir).unwrap();
        dir
    }

    #[test]
    fn a_lock_is_held_while_alive_and_removed_on_drop() {
        let dir = scratch("held");
        let (lock, note) = acquire(&dir).unwrap();
        assert!(note.is_none());
        assert_eq!(holder_pid(&dir), Some(std::process::id()));
        let first = std::fs::read_to_string(lock_path(&dir)).unwrap();
        assert_eq!(
            first.lines().next(),
            Some(std::process::id().to_string().as_str())
        );
        drop(lock);
        assert!(!lock_path(&dir).exists());
        assert_eq!(holder_pid(&dir), None);
        std::fs::remove_dir_all(&dir).ok();
    }

    #[test]
    fn a_live_holder_refuses_and_a_stale_lock_is_taken_over() {
        let dir = scratch("stale");
        // pid 1 is always alive (init): the lock is held.
        std::fs::write(lock_path(&dir), "1\nhost = elsewhere\n").unwrap();
        let err = acquire(&dir).unwrap_err();
        assert!(err.to_string().contains("pid 1"), "{err}");
        // A pid far above the kernel's limit is never alive: stale.
        std::fs::write(lock_path(&dir), "4000000000\n").unwrap();
        assert_eq!(holder_pid(&dir), None);
        let (_lock, note) = acquire(&dir).unwrap();
        assert!(note.unwrap().contains("4000000000"));
        std::fs::remove_dir_all(&dir).ok();
    }
}
