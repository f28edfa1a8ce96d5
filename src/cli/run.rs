//! `cornerflow run [CASE]`: mesh, solve (steady Stokes, steady Navier–Stokes by Newton, or
//! a time-dependent run, see [`super::unsteady`]), post-process and write everything into the
//! output folder — `mesh.vtu`, `solution.vtu`, `wall-<part>.csv` per force part,
//! `summary.json`.

use std::path::Path;
use std::time::Instant;

use anyhow::Context;
use cornerflow::case::{Case, Equations};
use cornerflow::corners::{
    AnalysisParams, EddyParams, MeasuredExponent, measure_eddies, measure_singular_corners,
    try_analyse_corners,
};
use cornerflow::fem::FlowField;
use cornerflow::mesh::Mesh;
use cornerflow::output::table::{write_csv, write_json};
use cornerflow::output::vtu::{
    CellField, PointField, VtuOptions, boundary_part_per_node, write_vtu,
};
use cornerflow::post::{self, FluidProperties, ReferenceScales, VolumeForceTerms, WallReference};
use cornerflow::solver::{
    FillOrdering, NewtonError, NewtonInfo, NewtonParams, NonsymmetricSolver, SolveError, SolveInfo,
    SolverKind, SolverParams, StageTimings, StokesProblem, solve_steady_navier_stokes,
    solve_stokes,
};
use serde_json::{Value, json};

use super::args::{LinearSolver, NewtonSolver, Ordering, RunArgs};
use super::mesh::{check_memory, mesh_case, output_dir, print_summary, write_mesh_vtu};
use super::progress::Stage;
use super::unsteady::{UnsteadySetup, run_unsteady};
use super::{BadInput, load_case};

/// Runs `cornerflow run`.
pub fn run(args: &RunArgs) -> anyhow::Result<()> {
    configure_threads(args.threads)?;
    let case = match &args.case {
        Some(path) => load_case(path)?,
        None => {
            eprintln!(
                "no case given: running the built-in default case (examples/profile-channel.toml)"
            );
            Case::default_case()
        }
    };
    super::export::check_supported(args.export_system.as_deref(), &case)?;
    let started = Instant::now();
    let out = output_dir(&case, &args.meshing);
    let corners = try_analyse_corners(
        &case.domain,
        &case.conditions,
        case.model.viscous_form,
        &AnalysisParams::default(),
    )
    .with_context(|| format!("corner analysis of {}", case.source.display()))?;
    check_memory(&case, &args.meshing)?;
    let clock = Instant::now();
    let (mesh, stats) = mesh_case(&case, &args.meshing)?;
    let mesh_time = clock.elapsed();
    print_summary(&case, &stats);
    if case.output.mesh {
        write_mesh_vtu(&out.join("mesh.vtu"), &mesh, case.output.compress)?;
    }
    if case.model.time.is_some() {
        let setup = UnsteadySetup { args, out: &out, stats: &stats, corners: &corners, started };
        return run_unsteady(&case, &mesh, &setup);
    }
    let clock = Instant::now();
    let (field, solver) = match case.model.equations {
        Equations::Stokes => {
            let (field, info) = solve_steady_stokes(&case, &mesh, args)?;
            if let Some(dir) = &args.export_system {
                super::export::export_system(dir, &case, &mesh, args.linear_solver, &info)?;
            }
            (field, solver_json(&info))
        }
        Equations::NavierStokes => solve_steady_navier_stokes_stage(&case, &mesh, &out, args)?,
    };
    let solve_time = clock.elapsed();
    let clock = Instant::now();
    let measured = measure_singular_corners(&case.domain, &mesh, &field, &corners.reports);
    let eddies =
        measure_eddies(&case.domain, &mesh, &field, &corners.reports, &EddyParams::default());
    let convecting =
        (case.model.equations == Equations::NavierStokes).then_some(&field.velocity[..]);
    let forces = report_forces(&case, &mesh, &field, convecting, &out)?;
    let post_time = clock.elapsed();
    let clock = Instant::now();
    write_solution(&case, &mesh, &field, &out)?;
    let output_time = clock.elapsed();
    let summary = json!({
        "case": case.name,
        "source": case.source.display().to_string(),
        "model": model_name(&case),
        "reynolds_number": case.fluid.reynolds_number(),
        "mesh": mesh_json(&stats),
        "solver": solver,
        "forces": forces,
        "probes": probes_json(&case, &mesh, &field)?,
        "corners": serde_json::to_value(&corners.reports)?,
        "measured_exponents": measured_json(&measured),
        "eddies": super::eddies::eddies_json(&eddies),
        "stage_timings_s": {
            "mesh": mesh_time.as_secs_f64(),
            "solve": solve_time.as_secs_f64(),
            "post_processing": post_time.as_secs_f64(),
            "output": output_time.as_secs_f64(),
        },
        "wall_time_s": started.elapsed().as_secs_f64(),
        "peak_memory_bytes": peak_memory_bytes(),
    });
    write_json(&out.join("summary.json"), &summary)?;
    println!("\ncorners of the domain:\n{}", corners.table());
    print_measured(&measured);
    super::eddies::print_eddies(&eddies);
    eprintln!("results in {}", out.display());
    Ok(())
}

/// The model's name in summaries: `stokes`, `navier-stokes`, with `unsteady-` when timed.
pub fn model_name(case: &Case) -> String {
    let equations = match case.model.equations {
        Equations::Stokes => "stokes",
        Equations::NavierStokes => "navier-stokes",
    };
    if case.model.time.is_some() { format!("unsteady-{equations}") } else { equations.into() }
}

/// Solves the steady Navier–Stokes problem by Newton's method. When the iteration does not
/// converge, the last iterate is written as `solution-unconverged.vtu` before the error.
fn solve_steady_navier_stokes_stage(
    case: &Case,
    mesh: &Mesh,
    out: &Path,
    args: &RunArgs,
) -> anyhow::Result<(FlowField, Value)> {
    let stage = Stage::start(
        "solve",
        &format!(
            "steady Navier–Stokes (Re = {:.4}), Newton's method on Taylor–Hood P2–P1, {}",
            case.fluid.reynolds_number(),
            match args.newton_solver {
                NewtonSolver::ReuseLu => "GMRES preconditioned by a reused sparse LU",
                NewtonSolver::Lu => "sparse LU",
                NewtonSolver::StokesGmres => "GMRES preconditioned by the Stokes LDLᵀ",
            }
        ),
    );
    let problem = StokesProblem::from_case(case);
    let nonsymmetric = match args.newton_solver {
        NewtonSolver::ReuseLu => NonsymmetricSolver::GmresReusedLu,
        NewtonSolver::Lu => NonsymmetricSolver::Lu,
        NewtonSolver::StokesGmres => NonsymmetricSolver::GmresStokes,
    };
    let params = SolverParams {
        kind: solver_kind(args.linear_solver),
        nonsymmetric,
        ordering: fill_ordering(args.ordering),
        ..SolverParams::default()
    };
    match solve_steady_navier_stokes(
        mesh,
        &problem,
        &params,
        &NewtonParams::from_controls(&case.model.nonlinear),
    ) {
        Ok((field, info)) => {
            for (k, it) in info.iterations.iter().enumerate() {
                eprintln!(
                    "[solve]   step {k:>2} {}: residual {:.3e}, update {:.3e}, ν = {:.4e}{}",
                    if it.newton { "Newton" } else { "Picard" },
                    it.residual,
                    it.update,
                    it.viscosity,
                    if it.linear_iterations > 0 {
                        format!(", {} GMRES iterations", it.linear_iterations)
                    } else {
                        String::new()
                    }
                );
            }
            stage.done(&format!(
                "{} unknowns, converged in {} step(s), relative residual {:.2e}",
                info.n_velocity_dofs + info.n_pressure_dofs,
                info.iterations.len(),
                info.final_residual
            ));
            Ok((field, newton_json(&info)))
        }
        Err(NewtonError::NotConverged { iterations, viscosity, info, last }) => {
            let path = out.join("solution-unconverged.vtu");
            write_field_vtu(case, mesh, &last, &path)?;
            let err = NewtonError::NotConverged { iterations, viscosity, info, last };
            Err(anyhow::Error::new(err).context(format!(
                "solving {} failed; the last iterate (not a solution) is in {}",
                case.source.display(),
                path.display()
            )))
        }
        Err(NewtonError::Solve(e)) => Err(solve_error(case, e)),
        Err(e) => Err(anyhow::Error::new(e)),
    }
}

fn newton_json(info: &NewtonInfo) -> Value {
    json!({
        "method": "newton",
        "velocity_dofs": info.n_velocity_dofs,
        "pressure_dofs": info.n_pressure_dofs,
        "nonzeros": info.nnz,
        "iterations": info.iterations,
        "final_relative_residual": info.final_residual,
        "pressure_fixed_to_zero_mean": info.pressure_fixed,
        "timings_s": timings_json(&info.timings),
    })
}

/// Stage times of a solve in seconds.
fn timings_json(t: &StageTimings) -> Value {
    json!({
        "pattern": t.pattern.as_secs_f64(),
        "assembly": t.assembly.as_secs_f64(),
        "symbolic": t.symbolic.as_secs_f64(),
        "numeric": t.numeric.as_secs_f64(),
        "solve": t.solve.as_secs_f64(),
    })
}

pub fn solver_kind(choice: LinearSolver) -> SolverKind {
    match choice {
        LinearSolver::Ldlt => SolverKind::Ldlt,
        LinearSolver::Lu => SolverKind::Lu,
    }
}

pub fn fill_ordering(choice: Ordering) -> FillOrdering {
    match choice {
        Ordering::NestedDissection => FillOrdering::NestedDissection,
        Ordering::Amd => FillOrdering::Amd,
    }
}

fn configure_threads(threads: Option<usize>) -> anyhow::Result<()> {
    if let Some(n) = threads {
        if n == 0 {
            return Err(anyhow::Error::new(BadInput("--threads must be at least 1".into())));
        }
        rayon::ThreadPoolBuilder::new().num_threads(n).build_global()?;
    }
    Ok(())
}

fn solve_steady_stokes(
    case: &Case,
    mesh: &Mesh,
    args: &RunArgs,
) -> anyhow::Result<(FlowField, SolveInfo)> {
    let kind = solver_kind(args.linear_solver);
    let ordering = fill_ordering(args.ordering);
    let name = if kind == SolverKind::Lu { "LU" } else { "LDLᵀ" };
    let stage = Stage::start("solve", &format!("steady Stokes, Taylor–Hood P2–P1, sparse {name}"));
    let problem = StokesProblem::from_case(case);
    let params = SolverParams { kind, ordering, ..SolverParams::default() };
    let (field, info) = solve_stokes(mesh, &problem, &params).map_err(|e| solve_error(case, e))?;
    stage.done(&format!(
        "{} unknowns, relative residual {:.1e} after {} refinement step(s){}",
        info.n_velocity_dofs + info.n_pressure_dofs,
        info.relative_residual,
        info.refinement_steps,
        if info.pressure_fixed { ", pressure fixed to zero mean (no outflow part)" } else { "" }
    ));
    Ok((field, info))
}

/// Classifies solver errors: those caused by the case's boundary data exit with code 2.
pub fn solve_error(case: &Case, err: SolveError) -> anyhow::Error {
    let file = case.source.display();
    match err {
        e @ (SolveError::InvalidViscosity { .. }
        | SolveError::MissingCondition { .. }
        | SolveError::SlipPartNotStraight { .. }
        | SolveError::NonFiniteBoundaryValue { .. }
        | SolveError::IncompatibleFlux { .. }) => {
            anyhow::Error::new(BadInput(format!("{file}: {e}")))
        }
        e => anyhow::Error::new(e).context(format!("solving {file} failed")),
    }
}

/// Forces on every reported part by both formulas, with coefficients; writes the wall
/// distribution of each part as CSV.
fn report_forces(
    case: &Case,
    mesh: &Mesh,
    field: &FlowField,
    convecting: Option<&[[f64; 2]]>,
    out: &Path,
) -> anyhow::Result<Value> {
    let stage = Stage::start("forces", "surface traction and weak-residual forces");
    let fluid = FluidProperties::of_case(case);
    let scales = ReferenceScales::of_case(case);
    let body_force = post::case_body_force(case, 0.0);
    let terms = VolumeForceTerms {
        body_force: body_force.as_deref(),
        convecting_velocity: convecting,
        ..VolumeForceTerms::default()
    };
    let mut parts = Vec::new();
    for &part in &case.forces {
        let surface = post::surface_force(mesh, field, &fluid, part)?;
        let volume = post::volume_force(mesh, field, &fluid, part, &terms)?;
        let rows = post::wall_distribution(
            mesh,
            field,
            &fluid,
            part,
            &WallReference::new(scales.velocity),
        )?;
        let name = case.part_name(part);
        let table: Vec<Vec<f64>> = rows
            .iter()
            .map(|r| vec![r.s, r.x, r.y, r.pressure_coefficient, r.wall_shear])
            .collect();
        write_csv(
            &out.join(format!("wall-{name}.csv")),
            &["s", "x", "y", "cp", "wall_shear"],
            &table,
        )?;
        parts.push(json!({
            "part": name,
            "surface": { "force": surface, "coefficients": post::coefficients(&surface, &scales)? },
            "volume": { "force": volume, "coefficients": post::coefficients(&volume, &scales)? },
        }));
        println!(
            "force on {name}: volume form c_D = {:.6}, c_L = {:.6}; surface form c_D = {:.6}, c_L = {:.6}",
            post::coefficients(&volume, &scales)?.drag,
            post::coefficients(&volume, &scales)?.lift,
            post::coefficients(&surface, &scales)?.drag,
            post::coefficients(&surface, &scales)?.lift,
        );
    }
    stage.done(&format!("{} part(s)", parts.len()));
    Ok(Value::Array(parts))
}

/// Writes `solution.vtu` with the derived fields (see [`write_field_vtu`]).
fn write_solution(case: &Case, mesh: &Mesh, field: &FlowField, out: &Path) -> anyhow::Result<()> {
    if !case.output.solution {
        return Ok(());
    }
    let stage = Stage::start("output", "derived fields and solution.vtu");
    let path = out.join("solution.vtu");
    write_field_vtu(case, mesh, field, &path)?;
    stage.done(&format!("wrote {}", path.display()));
    Ok(())
}

/// Writes a flow field with its derived fields (speed, vorticity, stream function, pressure
/// at all six nodes in physical units, per-cell divergence error) to `path`.
pub fn write_field_vtu(
    case: &Case,
    mesh: &Mesh,
    field: &FlowField,
    path: &Path,
) -> anyhow::Result<()> {
    write_field_vtu_with(case, mesh, field, path, &[])
}

/// [`write_field_vtu`] with extra per-triangle fields (a study's estimator and local rates).
pub fn write_field_vtu_with(
    case: &Case,
    mesh: &Mesh,
    field: &FlowField,
    path: &Path,
    extra_cell_fields: &[CellField],
) -> anyhow::Result<()> {
    let psi = post::stream_function(mesh, field)?;
    write_vtu_with_psi(case, mesh, field, &psi, path, extra_cell_fields)
}

/// [`write_field_vtu_with`] for a stream function computed by the caller.
pub fn write_vtu_with_psi(
    case: &Case,
    mesh: &Mesh,
    field: &FlowField,
    psi: &[f64],
    path: &Path,
    extra_cell_fields: &[CellField],
) -> anyhow::Result<()> {
    let derived = post::derived_fields(mesh, field)?;
    let density = case.fluid.density;
    let pressure: Vec<f64> = derived.pressure.iter().map(|p| p * density).collect();
    let tags = boundary_part_per_node(mesh);
    let quality = cornerflow::mesh::cell_quality(mesh);
    write_vtu(
        path,
        mesh,
        &[
            PointField::Vector("velocity", &field.velocity),
            PointField::Scalar("pressure", &pressure),
            PointField::Scalar("speed", &derived.speed),
            PointField::Scalar("vorticity", &derived.vorticity),
            PointField::Scalar("stream_function", psi),
            PointField::Integer("boundary_part", &tags),
        ],
        &[
            &[
                CellField::Scalar("divergence_error", &derived.divergence_error),
                CellField::Scalar("quality_min_angle_deg", &quality),
            ],
            extra_cell_fields,
        ]
        .concat(),
        VtuOptions { compress: case.output.compress, boundary_edges: false },
    )?;
    Ok(())
}

pub fn probes_json(case: &Case, mesh: &Mesh, field: &FlowField) -> anyhow::Result<Value> {
    if case.probes.is_empty() && case.pressure_difference.is_none() {
        return Ok(Value::Null);
    }
    let locator = post::PointLocator::new(mesh)?;
    let points: Vec<[f64; 2]> = case.probes.iter().map(|p| p.point).collect();
    let values = locator.probe(field, &points)?;
    let probes: Vec<Value> = case
        .probes
        .iter()
        .zip(&values)
        .map(|(probe, value)| match value {
            Some(v) => json!({ "name": probe.name, "point": probe.point, "velocity": v.velocity,
                               "pressure": v.pressure * case.fluid.density }),
            None => json!({ "name": probe.name, "point": probe.point, "outside_mesh": true }),
        })
        .collect();
    let difference = match &case.pressure_difference {
        Some(pd) => {
            json!(locator.pressure_difference(field, pd.first, pd.second)? * case.fluid.density)
        }
        None => Value::Null,
    };
    Ok(json!({ "points": probes, "pressure_difference": difference }))
}

pub fn mesh_json(stats: &cornerflow::mesh::MeshStats) -> Value {
    json!({
        "vertices": stats.n_vertices,
        "triangles": stats.n_triangles,
        "nodes": stats.n_nodes,
        "min_angle_deg": stats.min_angle_deg,
        "mean_angle_deg": stats.mean_angle_deg,
        "max_angle_deg": stats.max_angle_deg,
        "area": stats.area,
        "edges_per_part": stats.edges_per_part,
    })
}

fn solver_json(info: &SolveInfo) -> Value {
    json!({
        "velocity_dofs": info.n_velocity_dofs,
        "pressure_dofs": info.n_pressure_dofs,
        "nonzeros": info.nnz,
        "factor_entries": info.factor_entries,
        "relative_residual": info.relative_residual,
        "refinement_steps": info.refinement_steps,
        "pressure_fixed_to_zero_mean": info.pressure_fixed,
        "timings_s": timings_json(&info.timings),
    })
}

pub fn measured_json(measured: &[MeasuredExponent]) -> Value {
    let rows: Vec<Value> = measured
        .iter()
        .map(|m| match &m.fit {
            Ok(fit) => {
                json!({ "corner": m.corner, "location": m.location, "predicted": m.predicted,
                               "fitted": fit.lambda, "band": [fit.band.0, fit.band.1],
                               "radii": [fit.r_range.0, fit.r_range.1],
                               "closest_predicted": m.closest_predicted })
            }
            Err(why) => {
                json!({ "corner": m.corner, "location": m.location, "predicted": m.predicted,
                                "fitted": null, "reason": why })
            }
        })
        .collect();
    Value::Array(rows)
}

/// Prints predicted against fitted exponents of the singular corners.
pub fn print_measured(measured: &[MeasuredExponent]) {
    if measured.is_empty() {
        return;
    }
    println!("local exponents at singular corners (fit of the gradient energy E(r) ~ r^(2λ)):");
    for m in measured {
        let [x, y] = m.location;
        match &m.fit {
            Ok(f) => {
                println!(
                    "  ({x:.4}, {y:.4}): predicted λ₁ = {:.4}, fitted {:.4} [{:.4}, {:.4}] over r in [{:.3e}, {:.3e}]",
                    m.predicted, f.lambda, f.band.0, f.band.1, f.r_range.0, f.r_range.1
                );
                if let Some(next) = m.closest_predicted.filter(|c| (c - m.predicted).abs() > 1e-6) {
                    println!(
                        "    the fit is closest to the next predicted exponent {next:.4}: the leading mode is weak here"
                    );
                }
            }
            Err(why) => {
                println!("  ({x:.4}, {y:.4}): predicted λ₁ = {:.4}, no fit: {why}", m.predicted)
            }
        }
    }
}

/// Peak resident memory of this process (Linux `VmHWM`), or null where it cannot be read.
pub fn peak_memory_bytes() -> Value {
    let status = std::fs::read_to_string("/proc/self/status").unwrap_or_default();
    status
        .lines()
        .find_map(|l| l.strip_prefix("VmHWM:"))
        .and_then(|v| v.trim().trim_end_matches("kB").trim().parse::<u64>().ok())
        .map_or(Value::Null, |kb| json!(kb * 1024))
}
