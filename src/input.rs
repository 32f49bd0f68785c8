//! The one guard every reader of a user's file goes through: refuse what is not a regular file
//! before opening it (a FIFO would block, `/dev/zero` never ends, a directory is no file), and
//! read at most a fixed number of bytes. Rows and columns of a table are bounded by
//! [`MAX_TABLE_ROWS`] and [`MAX_TABLE_COLUMNS`] in `data::table`.
//!
//! The errors are `std::io::Error`s, so every reader's existing `Read { path, source }`
//! variant carries them with the file's name; the message says what was expected.

use std::io::{Error, ErrorKind, Read};
use std::path::Path;

/// What kind of file is read; decides the size cap.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum InputKind {
    /// A TOML file written by hand: material, scenario, fit job, test description, ignition
    /// list.
    Toml,
    /// A data table exported by a lab instrument (CSV-like).
    Table,
    /// A file the program wrote itself (run.toml, checkpoint.json, summary.json).
    RunFile,
}

/// Largest TOML file read, bytes (4 MiB: a hand-written file is a few kB).
pub const MAX_TOML_BYTES: u64 = 4 << 20;
/// Largest data table read, bytes (256 MiB: a 1 Hz cone test of an hour with 40 columns is
/// about 2 MB; a 10 Hz milligram-scale run of a day is about 30 MB).
pub const MAX_TABLE_BYTES: u64 = 256 << 20;
/// Largest file of a run directory read, bytes (a checkpoint of a large population is a few
/// MB).
pub const MAX_RUN_FILE_BYTES: u64 = 256 << 20;
/// Most data rows read from a table.
pub const MAX_TABLE_ROWS: usize = 5_000_000;
/// Most columns in a table row.
pub const MAX_TABLE_COLUMNS: usize = 1_000;

impl InputKind {
    /// The size cap, bytes.
    pub fn max_bytes(self) -> u64 {
        match self {
            InputKind::Toml => MAX_TOML_BYTES,
            InputKind::Table => MAX_TABLE_BYTES,
            InputKind::RunFile => MAX_RUN_FILE_BYTES,
        }
    }

    fn words(self) -> &'static str {
        match self {
            InputKind::Toml => "a TOML file",
            InputKind::Table => "a data table",
            InputKind::RunFile => "a run file",
        }
    }
}

fn file_type_words(metadata: &std::fs::Metadata) -> &'static str {
    use std::os::unix::fs::FileTypeExt;
    let kind = metadata.file_type();
    if kind.is_dir() {
        "a directory"
    } else if kind.is_fifo() {
        "a named pipe (FIFO)"
    } else if kind.is_char_device() {
        "a character device"
    } else if kind.is_block_device() {
        "a block device"
    } else if kind.is_socket() {
        "a socket"
    } else {
        "not a regular file"
    }
}

/// The metadata of `path` when it is a regular file; an error saying what it is otherwise.
fn regular_metadata(path: &Path, kind: InputKind) -> std::io::Result<std::fs::Metadata> {
    // `metadata` follows symbolic links and does not open the file, so a FIFO is seen
    // before anything blocks on it.
    let metadata = std::fs::metadata(path)?;
    if !metadata.is_file() {
        return Err(Error::new(
            ErrorKind::InvalidInput,
            format!(
                "it is {}; expected {} (a regular file)",
                file_type_words(&metadata),
                kind.words()
            ),
        ));
    }
    Ok(metadata)
}

/// Opens a regular file for a reader that streams it (a followed progress log), refusing a
/// FIFO, device or directory before anything can block on it.
pub fn open_regular(path: &Path, kind: InputKind) -> std::io::Result<std::fs::File> {
    regular_metadata(path, kind)?;
    std::fs::File::open(path)
}

/// Reads a whole file as bytes through the guard.
pub fn read_bytes(path: &Path, kind: InputKind) -> std::io::Result<Vec<u8>> {
    let metadata = regular_metadata(path, kind)?;
    let limit = kind.max_bytes();
    if metadata.len() > limit {
        return Err(too_large(kind, limit));
    }
    let file = std::fs::File::open(path)?;
    // The file may have grown or been swapped since `metadata`: read one byte past the cap.
    let mut bytes = Vec::with_capacity(metadata.len() as usize);
    file.take(limit + 1).read_to_end(&mut bytes)?;
    if bytes.len() as u64 > limit {
        return Err(too_large(kind, limit));
    }
    Ok(bytes)
}

/// Reads a whole file as UTF-8 text through the guard.
pub fn read_text(path: &Path, kind: InputKind) -> std::io::Result<String> {
    let bytes = read_bytes(path, kind)?;
    String::from_utf8(bytes).map_err(|err| {
        Error::new(
            ErrorKind::InvalidData,
            format!(
                "not UTF-8 text (first bad byte at offset {})",
                err.utf8_error().valid_up_to()
            ),
        )
    })
}

fn too_large(kind: InputKind, limit: u64) -> Error {
    Error::new(
        ErrorKind::InvalidInput,
        format!(
            "larger than {} MiB, the most read for {}",
            limit >> 20,
            kind.words()
        ),
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_directory_and_a_device_are_refused_before_reading() {
        let dir = std::env::temp_dir();
        let err = read_bytes(&dir, InputKind::Toml).unwrap_err();
        assert!(err.to_string().contains("a directory"), "{err}");
        let err = read_bytes(Path::new("/dev/zero"), InputKind::Table).unwrap_err();
        assert!(err.to_string().contains("character device"), "{err}");
    }

    #[test]
    fn a_fifo_is_refused_without_blocking() {
        let path = std::env::temp_dir().join(format!("emberfit-fifo-{}", std::process::id()));
        let _ = std::fs::remove_file(&path);
        let c_path = std::ffi::CString::new(path.to_string_lossy().as_bytes()).unwrap();
        // SAFETY: a valid NUL-terminated path; mkfifo touches no memory of ours.
        let made = unsafe { libc::mkfifo(c_path.as_ptr(), 0o600) };
        assert_eq!(made, 0, "mkfifo failed");
        let err = read_bytes(&path, InputKind::Table).unwrap_err();
        let _ = std::fs::remove_file(&path);
        assert!(err.to_string().contains("FIFO"), "{err}");
    }

    #[test]
    fn a_file_over_the_cap_is_refused() {
        let path = std::env::temp_dir().join(format!("emberfit-big-{}.toml", std::process::id()));
        let file = std::fs::File::create(&path).unwrap();
        file.set_len(MAX_TOML_BYTES + 1).unwrap();
        let err = read_text(&path, InputKind::Toml).unwrap_err();
        let _ = std::fs::remove_file(&path);
        assert!(err.to_string().contains("larger than 4 MiB"), "{err}");
    }
}
