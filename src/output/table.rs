//! CSV tables and JSON documents, written atomically.

use std::path::Path;

use super::{OutputError, write_atomic};

/// Writes a CSV file with a header row and numeric rows (shortest round-trip formatting).
///
/// # Errors
/// [`OutputError::Io`] naming the file; [`OutputError::FieldLength`] when a row's length
/// differs from the header's.
pub fn write_csv(path: &Path, header: &[&str], rows: &[Vec<f64>]) -> Result<(), OutputError> {
    if let Some(bad) = rows.iter().find(|r| r.len() != header.len()) {
        return Err(OutputError::FieldLength {
            path: path.to_path_buf(),
            name: "csv row".into(),
            got: bad.len(),
            expected: header.len(),
        });
    }
    let io = |source| OutputError::Io { path: path.to_path_buf(), source };
    write_atomic(path, |w| {
        writeln!(w, "{}", header.join(",")).map_err(io)?;
        for row in rows {
            let cells: Vec<String> = row.iter().map(|v| format!("{v}")).collect();
            writeln!(w, "{}", cells.join(",")).map_err(io)?;
        }
        Ok(())
    })
}

/// Writes `value` as pretty-printed JSON.
///
/// # Errors
/// [`OutputError::Json`] when the value cannot be encoded; [`OutputError::Io`] naming the file.
pub fn write_json<T: serde::Serialize>(path: &Path, value: &T) -> Result<(), OutputError> {
    let text = serde_json::to_string_pretty(value)
        .map_err(|e| OutputError::Json { path: path.to_path_buf(), reason: e.to_string() })?;
    super::atomic::write_text_atomic(path, &(text + "\n"))
}
