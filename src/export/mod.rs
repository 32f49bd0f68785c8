//! Writers for what emberfit hands to people and other programs: curve CSVs and atomic file
//! replacement. Formats are chosen here, not in the physics.

pub mod curves;
pub mod material;
pub mod plots;
pub mod report;

use std::io::Write;
use std::path::Path;

/// Writes `bytes` to `path` atomically: a temporary file in the same directory, flushed to
/// disk, then renamed over the target, so a reader or a crash never sees half a file.
pub fn write_atomically(path: &Path, bytes: &[u8]) -> std::io::Result<()> {
    let directory = match path.parent() {
        Some(parent) if !parent.as_os_str().is_empty() => parent,
        _ => Path::new("."),
    };
    let file_name = path.file_name().ok_or_else(|| {
        std::io::Error::new(std::io::ErrorKind::InvalidInput, "path has no file name")
    })?;
    let temporary = directory.join(format!(
        ".{}.tmp-{}",
        file_name.to_string_lossy(),
        std::process::id()
    ));
    let result = (|| {
        let mut file = std::fs::File::create(&temporary)?;
        file.write_all(bytes)?;
        file.sync_all()?;
        std::fs::rename(&temporary, path)
    })();
    if result.is_err() {
        let _ = std::fs::remove_file(&temporary);
    }
    result
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn atomic_write_replaces_the_whole_file_and_leaves_no_temporary() {
        let directory =
            std::env::temp_dir().join(format!("emberfit-atomic-{}", std::process::id()));
        std::fs::create_dir_all(&directory).unwrap();
        let path = directory.join("out.csv");
        write_atomically(&path, b"first version, longer").unwrap();
        write_atomically(&path, b"second").unwrap();
        assert_eq!(std::fs::read_to_string(&path).unwrap(), "second");
        let leftovers = std::fs::read_dir(&directory).unwrap().count();
        assert_eq!(leftovers, 1);
        std::fs::remove_dir_all(&directory).unwrap();
    }
}
