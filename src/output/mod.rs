//! Output: VTK XML unstructured grids (`.vtu`) of the mesh and of flow fields, `.pvd`
//! collections, CSV tables, JSON summaries and Matrix Market files of assembled systems — every file written atomically (a temporary
//! file in the target folder, renamed into place), so a crash never leaves a half-written file.
//!
//! **Invariant:** output only formats what the other stages computed; it never computes a
//! physical quantity itself.

pub mod atomic;
pub mod matrix_market;
pub mod table;
pub mod vtu;
mod vtu_stream;

pub use atomic::write_atomic;
pub use vtu::{CellField, PointField, VtuOptions, write_pvd, write_vtu};

use std::path::PathBuf;

/// Errors from writing output files; each names the file.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum OutputError {
    #[error("cannot write {path}: {source}")]
    Io { path: PathBuf, source: std::io::Error },
    #[error("cannot encode {path} as VTK XML: {reason}")]
    Vtk { path: PathBuf, reason: String },
    #[error("cannot encode {path} as JSON: {reason}")]
    Json { path: PathBuf, reason: String },
    #[error("cannot write {path} as Matrix Market: {reason}")]
    Matrix { path: PathBuf, reason: String },
    #[error("field `{name}` for {path} has {got} values, expected {expected}")]
    FieldLength { path: PathBuf, name: String, got: usize, expected: usize },
}
