//! Built-in validation cases: the solver's numbers against published reference values.
//!
//! Takes a case name and a [`Level`] (`Full` for the tolerances of the published comparison,
//! `Quick` for coarse meshes and the relaxed tolerances stated per row, as run in CI); returns
//! one [`ValidationRow`] per compared quantity: our value, the published value, the relative
//! difference, the tolerance, pass or fail, and the source.
//!
//! Cases (each row names its source; see also `../shared/refs/benchmarks.md` of the project):
//! * `cylinder-steady`: 2D-1 of Schäfer & Turek (1996), Re = 20, steady Newton solve;
//!   reference values of Nabh (1998) / John & Matthies (2001) as listed by the benchmark.
//! * `cylinder-periodic`: 2D-2, Re = 100, IMEX BDF2; the 1996 intervals (their midpoints
//!   are the reference, the tolerance is the issue's; the interval is also printed).
//! * `cylinder-inflow`: 2D-3, time-dependent inflow; John (2004).
//! * `kovasznay`: Kovasznay (1948) exact solution, observed Taylor–Hood rates.
//! * `l-shape`: Verfürth's exact singular solution on the L-shaped domain; uniform rate
//!   against the corner exponent (Dauge 1989), graded rate against the optimal one.
//! * `step-stokes`: fitted local exponent at the re-entrant corner of a Stokes backward-facing
//!   step against the 270° no-slip exponent (Dauge 1989).
//! * `cavity-eddies`: Moffatt eddies in the bottom corners of the Stokes lid-driven cavity on
//!   strongly graded meshes; size and ψ ratios of successive eddies against the 90° root
//!   (Moffatt 1964), the first eddy's ψ (benchmarks.md §3.3) and the mirror symmetry.
//! * `cavity-100`, `cavity-1000`: lid-driven cavity (unregularised lid u = 1, as in the
//!   references), centreline velocities of Ghia, Ghia & Shin (1982); at Re = 1000 also the
//!   primary-vortex stream function of Botella & Peyret (1998).
//!
//! **Invariant:** no I/O besides the progress callback; the CLI prints the table.

mod cases;
mod eddies;

use std::path::Path;

pub use cases::{CASE_NAMES, dauge_exponent, l_shape_case_toml, run_case};

use crate::case::CaseError;
use crate::mesh::MeshError;
use crate::post::PostError;
use crate::solver::{NewtonError, SolveError, StepError};

/// How much of a validation case is run.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Level {
    /// The resolution and tolerances of the published comparison.
    Full,
    /// Coarse meshes, short runs and relaxed tolerances (stated per row): the CI subset.
    Quick,
}

/// How a value is compared with its reference.
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize)]
pub enum Tolerance {
    /// `|ours − reference| ≤ tol · |reference|`.
    Relative(f64),
    /// `|ours − reference| ≤ tol`.
    Absolute(f64),
    /// `ours ≥ bound` (observed convergence rates).
    AtLeast(f64),
    /// `ours ≤ bound` (spreads and ratios that must stay bounded).
    AtMost(f64),
}

impl Tolerance {
    fn holds(self, ours: f64, reference: f64) -> bool {
        match self {
            Tolerance::Relative(t) => (ours - reference).abs() <= t * reference.abs(),
            Tolerance::Absolute(t) => (ours - reference).abs() <= t,
            Tolerance::AtLeast(b) => ours >= b,
            Tolerance::AtMost(b) => ours <= b,
        }
    }

    /// Short text for a table: `0.2 %`, `± 0.01`, `≥ 2.8`.
    pub fn describe(self) -> String {
        match self {
            Tolerance::Relative(t) => format!("{} %", t * 100.0),
            Tolerance::Absolute(t) => format!("± {t}"),
            Tolerance::AtLeast(b) => format!("≥ {b}"),
            Tolerance::AtMost(b) => format!("≤ {b}"),
        }
    }
}

/// One compared quantity.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct ValidationRow {
    pub case: String,
    pub quantity: String,
    pub ours: f64,
    pub reference: f64,
    /// `(ours − reference) / |reference|` (0 when the reference is 0).
    pub relative_difference: f64,
    pub tolerance: Tolerance,
    pub passed: bool,
    pub source: String,
}

impl ValidationRow {
    fn new(
        case: &str,
        quantity: impl Into<String>,
        ours: f64,
        reference: f64,
        tolerance: Tolerance,
        source: &str,
    ) -> Self {
        let relative_difference =
            if reference == 0.0 { 0.0 } else { (ours - reference) / reference.abs() };
        ValidationRow {
            case: case.to_string(),
            quantity: quantity.into(),
            ours,
            reference,
            relative_difference,
            tolerance,
            passed: ours.is_finite() && tolerance.holds(ours, reference),
            source: source.to_string(),
        }
    }
}

/// Why a validation case could not be run.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum ValidationError {
    #[error("unknown validation case `{name}` (known: {known})")]
    UnknownCase { name: String, known: String },
    #[error(transparent)]
    Case(#[from] CaseError),
    #[error(transparent)]
    Mesh(#[from] MeshError),
    #[error(transparent)]
    Solve(#[from] SolveError),
    #[error(transparent)]
    Newton(#[from] NewtonError),
    #[error(transparent)]
    Step(#[from] StepError),
    #[error(transparent)]
    Post(#[from] PostError),
    #[error("{case}: {what}")]
    Failed { case: String, what: String },
}

/// Runs every case named in `names` (`all` expands to every case) at `level`, calling
/// `progress` with a line of text at each stage.
///
/// # Errors
/// The first [`ValidationError`] of a case that could not be run (a failed comparison is a
/// row with `passed = false`, not an error).
pub fn run_cases(
    names: &[String],
    level: Level,
    progress: &mut dyn FnMut(&str),
) -> Result<Vec<ValidationRow>, ValidationError> {
    let expanded: Vec<String> = if names.iter().any(|n| n == "all") {
        CASE_NAMES.iter().map(|s| s.to_string()).collect()
    } else {
        names.to_vec()
    };
    let mut rows = Vec::new();
    for name in &expanded {
        rows.extend(run_case(name, level, progress)?);
    }
    Ok(rows)
}

/// The origin shown in messages about a built-in validation case.
fn origin(name: &str) -> std::path::PathBuf {
    Path::new(&format!("<validation case {name}>")).to_path_buf()
}
