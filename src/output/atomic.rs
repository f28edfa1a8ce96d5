//! Atomic file writes: the content goes to a temporary file in the destination folder, is
//! flushed to disk, and is then renamed over the destination. Readers see either the old file or
//! the complete new one.

use std::io::{BufWriter, Write};
use std::path::Path;

use super::OutputError;

/// Writes a file atomically through `fill`, creating the parent folder if needed.
///
/// # Errors
/// [`OutputError::Io`] naming `path` when the folder cannot be created, the temporary file
/// cannot be written or the rename fails; `fill`'s own errors are passed through.
pub fn write_atomic<F>(path: &Path, fill: F) -> Result<(), OutputError>
where
    F: FnOnce(&mut dyn Write) -> Result<(), OutputError>,
{
    let io_err = |source| OutputError::Io { path: path.to_path_buf(), source };
    let dir = match path.parent() {
        Some(p) if !p.as_os_str().is_empty() => p,
        _ => Path::new("."),
    };
    std::fs::create_dir_all(dir).map_err(io_err)?;
    let mut tmp = tempfile::Builder::new()
        .prefix(".cornerflow-")
        .suffix(".tmp")
        .tempfile_in(dir)
        .map_err(io_err)?;
    {
        let mut writer = BufWriter::new(tmp.as_file_mut());
        fill(&mut writer)?;
        writer.flush().map_err(io_err)?;
    }
    tmp.as_file().sync_all().map_err(io_err)?;
    make_readable(tmp.as_file()).map_err(io_err)?;
    tmp.persist(path).map_err(|e| io_err(e.error))?;
    Ok(())
}

/// Gives a result file the usual permissions `rw-r--r--` (the temporary file is created
/// `rw-------`, which would hide results from other users of a shared machine).
#[cfg(unix)]
fn make_readable(file: &std::fs::File) -> std::io::Result<()> {
    use std::os::unix::fs::PermissionsExt;
    file.set_permissions(std::fs::Permissions::from_mode(0o644))
}

#[cfg(not(unix))]
fn make_readable(_file: &std::fs::File) -> std::io::Result<()> {
    Ok(())
}

/// Writes `text` atomically to `path`.
///
/// # Errors
/// As [`write_atomic`].
pub fn write_text_atomic(path: &Path, text: &str) -> Result<(), OutputError> {
    write_atomic(path, |w| {
        w.write_all(text.as_bytes())
            .map_err(|source| OutputError::Io { path: path.to_path_buf(), source })
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    #[cfg(unix)]
    fn written_files_are_readable_by_everyone() {
        use std::os::unix::fs::PermissionsExt;
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("r.txt");
        write_text_atomic(&path, "x").unwrap();
        let mode = std::fs::metadata(&path).unwrap().permissions().mode() & 0o777;
        assert_eq!(mode, 0o644);
    }

    #[test]
    fn failed_fill_leaves_the_previous_file_intact() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("a.txt");
        write_text_atomic(&path, "first").unwrap();
        let result = write_atomic(&path, |w| {
            w.write_all(b"partial").unwrap();
            Err(OutputError::Json { path: path.clone(), reason: "simulated failure".into() })
        });
        assert!(result.is_err());
        assert_eq!(std::fs::read_to_string(&path).unwrap(), "first");
        // No temporary file is left behind.
        assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 1);
    }
}
