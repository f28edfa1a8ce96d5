//! Matrix Market export of assembled systems, so that other sparse solvers can be timed on
//! exactly the matrix cornerflow factorises.
//!
//! Takes a compressed-column (CSC) matrix — `col_ptr`, `row_idx`, `values`, as held by
//! [`crate::fem::assembly::SystemPattern`] plus an [`crate::fem::assembly::AssembledSystem`] —
//! or a dense vector; writes it atomically in the Matrix Market exchange format of the
//! NIST Matrix Market (`coordinate real general` for matrices, one 1-based `row column value`
//! line per stored entry in column order, explicit zeros included so the pattern is kept;
//! `array real general` for vectors, one value per line). Values are written in Rust's
//! shortest round-trip scientific notation, so reading them back gives the identical `f64`.
//!
//! **Invariant:** only formats what it is given; inconsistent CSC arrays or non-finite values
//! (which the format cannot carry portably) are reported as [`OutputError::Matrix`], never a
//! panic, and no file is written then.
//!
//! # References
//! R.F. Boisvert, R. Pozo, K.A. Remington, *The Matrix Market exchange formats: initial
//! design*, NIST Interagency Report 5935, 1996 (from memory).

use std::io::Write;
use std::path::Path;

use super::{OutputError, write_atomic};
use crate::fem::assembly::SystemPattern;

/// A borrowed sparse matrix in compressed-column form: column `j` holds the entries
/// `k ∈ col_ptr[j]..col_ptr[j + 1]` at rows `row_idx[k]` with values `values[k]`.
#[derive(Clone, Copy, Debug)]
pub struct CscView<'a> {
    pub n_rows: usize,
    pub n_cols: usize,
    pub col_ptr: &'a [usize],
    pub row_idx: &'a [usize],
    pub values: &'a [f64],
}

impl<'a> CscView<'a> {
    /// The square system matrix with `values` on `pattern`.
    pub fn from_pattern(pattern: &'a SystemPattern, values: &'a [f64]) -> Self {
        CscView {
            n_rows: pattern.n(),
            n_cols: pattern.n(),
            col_ptr: pattern.col_ptr(),
            row_idx: pattern.row_idx(),
            values,
        }
    }

    /// Checks that the arrays form a valid CSC matrix with finite values; returns the reason
    /// otherwise.
    fn check(&self) -> Result<(), String> {
        if self.col_ptr.len() != self.n_cols + 1 {
            return Err(format!(
                "col_ptr has {} entries, expected {} (columns + 1)",
                self.col_ptr.len(),
                self.n_cols + 1
            ));
        }
        let nnz = self.row_idx.len();
        if self.values.len() != nnz {
            return Err(format!("{} values for {nnz} row indices", self.values.len()));
        }
        if self.col_ptr[0] != 0 || self.col_ptr[self.n_cols] != nnz {
            return Err(format!(
                "col_ptr runs from {} to {}, expected 0 to {nnz}",
                self.col_ptr[0], self.col_ptr[self.n_cols]
            ));
        }
        if let Some(j) = self.col_ptr.windows(2).position(|w| w[0] > w[1]) {
            return Err(format!("col_ptr decreases at column {j}"));
        }
        if let Some(k) = self.row_idx.iter().position(|&r| r >= self.n_rows) {
            return Err(format!(
                "row index {} at entry {k} is not below {}",
                self.row_idx[k], self.n_rows
            ));
        }
        if let Some(k) = self.values.iter().position(|v| !v.is_finite()) {
            return Err(format!("value at entry {k} is not finite ({})", self.values[k]));
        }
        Ok(())
    }
}

/// Writes `matrix` to `path` as `%%MatrixMarket matrix coordinate real general`, with
/// `comment` (may be empty or several lines) as `%` comment lines after the header.
///
/// # Errors
/// [`OutputError::Matrix`] when the CSC arrays are inconsistent or a value is not finite;
/// [`OutputError::Io`] naming the file when writing fails.
pub fn write_matrix(path: &Path, matrix: &CscView, comment: &str) -> Result<(), OutputError> {
    matrix.check().map_err(|reason| OutputError::Matrix { path: path.to_path_buf(), reason })?;
    let io = |source| OutputError::Io { path: path.to_path_buf(), source };
    write_atomic(path, |w| {
        writeln!(w, "%%MatrixMarket matrix coordinate real general").map_err(io)?;
        write_comment(w, comment).map_err(io)?;
        writeln!(w, "{} {} {}", matrix.n_rows, matrix.n_cols, matrix.row_idx.len()).map_err(io)?;
        for col in 0..matrix.n_cols {
            for k in matrix.col_ptr[col]..matrix.col_ptr[col + 1] {
                writeln!(w, "{} {} {:e}", matrix.row_idx[k] + 1, col + 1, matrix.values[k])
                    .map_err(io)?;
            }
        }
        Ok(())
    })
}

/// Writes `values` to `path` as a one-column `%%MatrixMarket matrix array real general`, with
/// `comment` as `%` comment lines after the header.
///
/// # Errors
/// [`OutputError::Matrix`] when a value is not finite; [`OutputError::Io`] naming the file
/// when writing fails.
pub fn write_vector(path: &Path, values: &[f64], comment: &str) -> Result<(), OutputError> {
    if let Some(k) = values.iter().position(|v| !v.is_finite()) {
        let reason = format!("value at entry {k} is not finite ({})", values[k]);
        return Err(OutputError::Matrix { path: path.to_path_buf(), reason });
    }
    let io = |source| OutputError::Io { path: path.to_path_buf(), source };
    write_atomic(path, |w| {
        writeln!(w, "%%MatrixMarket matrix array real general").map_err(io)?;
        write_comment(w, comment).map_err(io)?;
        writeln!(w, "{} 1", values.len()).map_err(io)?;
        for v in values {
            writeln!(w, "{v:e}").map_err(io)?;
        }
        Ok(())
    })
}

fn write_comment(w: &mut dyn Write, comment: &str) -> std::io::Result<()> {
    for line in comment.lines() {
        writeln!(w, "% {line}")?;
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A minimal reader of the two layouts written above: header, `%` comments, size line,
    /// entries. Returns (rows, cols, entries as (row, col, value) with 0-based indices).
    fn read_back(text: &str) -> (usize, usize, Vec<(usize, usize, f64)>) {
        let mut lines = text.lines();
        let header = lines.next().unwrap();
        let mut data = lines.filter(|l| !l.starts_with('%'));
        let size: Vec<usize> =
            data.next().unwrap().split_whitespace().map(|t| t.parse().unwrap()).collect();
        let mut entries = Vec::new();
        if header.contains("coordinate") {
            for line in data {
                let t: Vec<&str> = line.split_whitespace().collect();
                let (i, j): (usize, usize) = (t[0].parse().unwrap(), t[1].parse().unwrap());
                entries.push((i - 1, j - 1, t[2].parse().unwrap()));
            }
            assert_eq!(entries.len(), size[2]);
        } else {
            for (k, line) in data.enumerate() {
                entries.push((k % size[0], k / size[0], line.trim().parse().unwrap()));
            }
            assert_eq!(entries.len(), size[0] * size[1]);
        }
        (size[0], size[1], entries)
    }

    #[test]
    fn matrix_round_trips_bit_for_bit_including_explicit_zeros() {
        // [[1/3, 0, -2e-300], [0, 0 (stored), 0], [7.5e12, 0, 1]] with one stored zero.
        let col_ptr = [0, 2, 3, 5];
        let row_idx = [0, 2, 1, 0, 2];
        let values = [1.0 / 3.0, 7.5e12, 0.0, -2e-300, 1.0];
        let m =
            CscView { n_rows: 3, n_cols: 3, col_ptr: &col_ptr, row_idx: &row_idx, values: &values };
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("a.mtx");
        write_matrix(&path, &m, "test matrix\nsecond line").unwrap();
        let text = std::fs::read_to_string(&path).unwrap();
        assert!(text.starts_with(
            "%%MatrixMarket matrix coordinate real general\n% test matrix\n% second line\n3 3 5\n"
        ));
        let (rows, cols, entries) = read_back(&text);
        assert_eq!((rows, cols), (3, 3));
        let mut k = 0;
        for col in 0..3 {
            for p in col_ptr[col]..col_ptr[col + 1] {
                assert_eq!(entries[k].0, row_idx[p]);
                assert_eq!(entries[k].1, col);
                // Shortest round-trip formatting: the value read back is the same f64.
                assert_eq!(entries[k].2.to_bits(), values[p].to_bits());
                k += 1;
            }
        }
    }

    #[test]
    fn vector_has_the_exact_array_layout() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("b.mtx");
        write_vector(&path, &[1.0, -0.25, 3e-7], "").unwrap();
        let text = std::fs::read_to_string(&path).unwrap();
        assert_eq!(text, "%%MatrixMarket matrix array real general\n3 1\n1e0\n-2.5e-1\n3e-7\n");
        let (rows, cols, entries) = read_back(&text);
        assert_eq!((rows, cols), (3, 1));
        assert_eq!(entries[1], (1, 0, -0.25));
    }

    #[test]
    fn inconsistent_arrays_and_non_finite_values_are_errors_and_write_nothing() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("c.mtx");
        let bad_ptr =
            CscView { n_rows: 2, n_cols: 2, col_ptr: &[0, 1], row_idx: &[0], values: &[1.0] };
        let bad_row =
            CscView { n_rows: 2, n_cols: 2, col_ptr: &[0, 1, 1], row_idx: &[2], values: &[1.0] };
        let nan = CscView {
            n_rows: 2,
            n_cols: 2,
            col_ptr: &[0, 1, 1],
            row_idx: &[0],
            values: &[f64::NAN],
        };
        let short =
            CscView { n_rows: 2, n_cols: 2, col_ptr: &[0, 1, 2], row_idx: &[0, 1], values: &[1.0] };
        for m in [bad_ptr, bad_row, nan, short] {
            assert!(matches!(write_matrix(&path, &m, ""), Err(OutputError::Matrix { .. })));
        }
        assert!(matches!(
            write_vector(&path, &[1.0, f64::INFINITY], ""),
            Err(OutputError::Matrix { .. })
        ));
        assert!(!path.exists());
    }
}
