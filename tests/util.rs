//! Shared helpers of the integration tests: temporary folders, running the binary, and
//! reading files back through independent general-purpose readers (Python's meshio).

#![allow(dead_code)]

use std::path::{Path, PathBuf};
use std::process::{Command, Output};

/// Runs the `cornerflow` binary with `args` in `dir`.
pub fn run_cli(dir: &Path, args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_cornerflow"))
        .args(args)
        .current_dir(dir)
        .output()
        .expect("the cornerflow binary runs")
}

/// The repository root (where `Cargo.toml` lives).
pub fn repo_root() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

/// Reads a `.vtu` with meshio (an independent reader; installed by `tests/requirements.txt`)
/// and returns its content as JSON: `points`, `cells` (list of `{type, data}`),
/// `point_data` and `cell_data` (name -> list of blocks).
///
/// # Panics
/// When Python or meshio is missing (install with `python3 -m pip install -r
/// tests/requirements.txt`) or the reader rejects the file.
pub fn read_vtu_with_meshio(path: &Path) -> serde_json::Value {
    const SCRIPT: &str = r#"
import json, sys
import meshio
m = meshio.read(sys.argv[1])
def tolist(a):
    return [[None if x != x else x for x in row] if hasattr(row, '__len__') else (None if row != row else row) for row in a.tolist()]
out = {
  "points": m.points.tolist(),
  # meshio 5.3 hands connectivity back as float64; check it is integral before converting.
  "cells": [{"type": c.type, "data": c.data.astype("int64").tolist()} for c in m.cells
            if (c.data == c.data.astype("int64")).all()],
  "point_data": {k: tolist(v) for k, v in m.point_data.items()},
  "cell_data": {k: [tolist(b) for b in v] for k, v in m.cell_data.items()},
}
print(json.dumps(out))
"#;
    let output = Command::new("python3")
        .args(["-c", SCRIPT])
        .arg(path)
        .output()
        .expect("python3 runs (install Python 3 to run the VTK round-trip tests)");
    assert!(
        output.status.success(),
        "meshio could not read {} (install it with `python3 -m pip install -r tests/requirements.txt`): {}",
        path.display(),
        String::from_utf8_lossy(&output.stderr)
    );
    serde_json::from_slice(&output.stdout).expect("the reader script prints JSON")
}

/// The values of a JSON array of numbers (null, meshio's NaN, becomes NaN).
pub fn floats(v: &serde_json::Value) -> Vec<f64> {
    v.as_array().expect("a JSON array").iter().map(|x| x.as_f64().unwrap_or(f64::NAN)).collect()
}
