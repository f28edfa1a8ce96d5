//! `cornerflow run --export-system DIR`: writes the assembled steady Stokes system as Matrix
//! Market files, so that other sparse solvers can be timed on exactly the matrix cornerflow
//! factorises (`benches/peers.py`).
//!
//! Takes the case, its mesh, the linear-solver choice and the [`SolveInfo`] of the solve that
//! just ran; re-assembles the same system (assembly is deterministic: local systems are
//! scattered in cell order) and writes `DIR/matrix.mtx` (coordinate real general, both
//! triangles, explicit zeros of the pressure diagonal kept), `DIR/rhs.mtx` (array) and
//! `DIR/info.json` (sizes, unknown layout, and the solver's own timings and residual).

use std::path::Path;

use anyhow::Context;
use cornerflow::case::{Case, Equations};
use cornerflow::mesh::Mesh;
use cornerflow::output::matrix_market::{CscView, write_matrix, write_vector};
use cornerflow::output::table::write_json;
use cornerflow::solver::{SolveInfo, SolverKind, SolverParams, assemble_stokes_system};
use serde_json::json;

use super::BadInput;
use super::args::LinearSolver;
use super::progress::Stage;
use super::run::{solve_error, solver_kind};

/// Refuses `--export-system` for cases that are not steady Stokes (the only path that
/// exports); takes the option's value and the case, returns bad input otherwise.
pub fn check_supported(dir: Option<&Path>, case: &Case) -> anyhow::Result<()> {
    if dir.is_some() && (case.model.equations != Equations::Stokes || case.model.time.is_some()) {
        return Err(anyhow::Error::new(BadInput(format!(
            "{}: --export-system is supported for steady Stokes cases only",
            case.source.display()
        ))));
    }
    Ok(())
}

/// Writes `matrix.mtx`, `rhs.mtx` and `info.json` into `dir` (created if needed) for the
/// steady Stokes system of `case` on `mesh`, with the timings and residual of `info` (the
/// solve of that same system with `linear_solver`).
///
/// # Errors
/// Assembly errors (as for the solve itself) and file errors naming the file.
pub fn export_system(
    dir: &Path,
    case: &Case,
    mesh: &Mesh,
    linear_solver: LinearSolver,
    info: &SolveInfo,
) -> anyhow::Result<()> {
    let stage = Stage::start("export", "assembled Stokes system as Matrix Market");
    let kind = solver_kind(linear_solver);
    let params = SolverParams { kind, ..SolverParams::default() };
    let (pattern, system) =
        assemble_stokes_system(mesh, &cornerflow::solver::StokesProblem::from_case(case), &params)
            .map_err(|e| solve_error(case, e))?;
    let n = pattern.n();
    let comment = format!(
        "steady Stokes system of {} (Taylor-Hood P2-P1), written by cornerflow {}\n\
         unknowns 0..{} velocity, {}..{} pressure (0-based); Dirichlet values eliminated",
        case.name,
        env!("CARGO_PKG_VERSION"),
        info.n_velocity_dofs,
        info.n_velocity_dofs,
        n
    );
    let matrix = CscView::from_pattern(&pattern, &system.values);
    write_matrix(&dir.join("matrix.mtx"), &matrix, &comment)?;
    write_vector(&dir.join("rhs.mtx"), &system.rhs, &comment)?;
    let t = &info.timings;
    let factor = t.symbolic + t.numeric;
    let summary = json!({
        "case": case.name,
        "source": case.source.display().to_string(),
        "matrix": "matrix.mtx",
        "rhs": "rhs.mtx",
        "n": n,
        "nnz": pattern.nnz(),
        "velocity_unknowns": info.n_velocity_dofs,
        "pressure_unknowns": info.n_pressure_dofs,
        "pressure_pinned": info.pressure_fixed,
        "symmetric": true,
        "cornerflow": {
            "solver": if kind == SolverKind::Lu { "lu" } else { "ldlt" },
            "threads": "sequential factorisation and solves",
            "factor_entries": info.factor_entries,
            "refinement_steps": info.refinement_steps,
            "relative_residual": info.relative_residual,
            "times_s": {
                "assembly": t.assembly.as_secs_f64(),
                "symbolic": t.symbolic.as_secs_f64(),
                "numeric": t.numeric.as_secs_f64(),
                "factor": factor.as_secs_f64(),
                "solve": t.solve.as_secs_f64(),
                "factor_and_solve": (factor + t.solve).as_secs_f64(),
            },
        },
    });
    write_json(&dir.join("info.json"), &summary)
        .with_context(|| format!("exporting the system to {}", dir.display()))?;
    stage.done(&format!("{n} unknowns, {} nonzeros in {}", pattern.nnz(), dir.display()));
    Ok(())
}
