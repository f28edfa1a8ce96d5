//! The sparse direct solver stages, one by one, on a Taylor–Hood system of the unit square
//! (structured mesh, parabolic inflow on the left, outflow on the right, no-slip walls,
//! ν = 0.01, gradient viscous form, full velocity coupling in the pattern):
//!
//! * `stokes_ldlt/symbolic`: AMD ordering and symbolic `LDLᵀ` analysis of the pattern;
//! * `stokes_ldlt/numeric`: numeric `LDLᵀ` factorisation with dynamic regularisation, into
//!   reused storage;
//! * `stokes_ldlt/solve`: one triangular solve pair plus iterative refinement to the default
//!   residual target `1e-10`;
//! * `newton_lu/symbolic`, `newton_lu/numeric`, `newton_lu/solve`: the same for the
//!   nonsymmetric Newton matrix (Stokes plus `add_linearised_convection` around the Stokes
//!   velocity, inflow speed 1, so Re = 1 / 0.01 = 100 on the unit length) factorised by LU on
//!   the same pattern.
//!
//! Factorisations and solves are sequential (`Par::Seq`, the CLI's setting). Run:
//! `cargo bench --bench solve`. The default mesh has 48 × 48 cells (4,608 triangles, about
//! 20k unknowns); set `CORNERFLOW_BENCH_SOLVE_CELLS=<cells per side>` to go bigger (e.g. 160
//! for about 230k unknowns; then expect minutes per group).

use std::hint::black_box;
use std::time::Duration;

use cornerflow::case::{BoundaryCondition, ScalarExpr};
use cornerflow::fem::ViscousForm;
use cornerflow::fem::assembly::{AssembledSystem, Parallelism, SystemPattern, assemble};
use cornerflow::fem::convection::{Linearisation, add_linearised_convection};
use cornerflow::fem::kernels::stokes_local_system;
use cornerflow::fem::shape::AffineTriangle;
use cornerflow::mesh::Mesh;
use cornerflow::mesh::structured::rectangle;
use cornerflow::solver::{
    LinearParams, SolverKind, SolverParams, StokesProblem, SymbolicSystem, assemble_stokes_system,
    expand_field,
};
use criterion::Criterion;

const VISCOSITY: f64 = 0.01;

fn cells_per_side() -> usize {
    std::env::var("CORNERFLOW_BENCH_SOLVE_CELLS")
        .ok()
        .and_then(|v| v.parse().ok())
        .filter(|&n: &usize| n >= 2)
        .unwrap_or(48)
}

/// Bottom, right, top, left: wall, outflow, wall, parabolic inflow of peak speed 1.
fn channel_conditions() -> Vec<BoundaryCondition> {
    let inflow = BoundaryCondition::Velocity {
        ux: ScalarExpr::parse("4*y*(1-y)").expect("valid expression"),
        uy: ScalarExpr::constant(0.0),
    };
    vec![BoundaryCondition::NoSlip, BoundaryCondition::Outflow, BoundaryCondition::NoSlip, inflow]
}

/// The Newton matrix around the nodal velocity `w` on `pattern` (Stokes blocks plus the
/// Newton linearisation of the convection term, with its load).
fn newton_system(pattern: &SystemPattern, mesh: &Mesh, w: &[[f64; 2]]) -> AssembledSystem {
    let system = assemble(pattern, mesh, Parallelism::Rayon, |cell, local| {
        let tri = AffineTriangle::new(mesh.cell_vertices(cell));
        stokes_local_system(&tri, VISCOSITY, ViscousForm::Gradient, None, local);
        let nodes = &mesh.cells[cell];
        let nodal: [[f64; 2]; 6] = std::array::from_fn(|k| w[nodes[k]]);
        add_linearised_convection(&tri, &nodal, Linearisation::Newton, local);
    });
    assert_eq!(system.dropped_entries, 0, "the Newton matrix fits the full-coupling pattern");
    system
}

/// Benchmarks symbolic analysis, numeric factorisation and one refined solve of `system`.
fn bench_stages(
    c: &mut Criterion,
    group_name: &str,
    pattern: &SystemPattern,
    system: &AssembledSystem,
    linear: &LinearParams,
) {
    let mut group = c.benchmark_group(group_name);
    group
        .sample_size(10)
        .warm_up_time(Duration::from_secs(1))
        .measurement_time(Duration::from_secs(10));
    group.bench_function("symbolic", |b| {
        b.iter(|| black_box(SymbolicSystem::analyse(pattern, linear.kind).expect("analysis")))
    });
    let symbolic = SymbolicSystem::analyse(pattern, linear.kind).expect("analysis");
    let mut factor = symbolic.factorize(pattern, &system.values, linear).expect("factorisation");
    group.bench_function("numeric", |b| {
        b.iter(|| {
            symbolic
                .refactorize(pattern, &system.values, linear, &mut factor)
                .expect("factorisation");
            black_box(&factor);
        })
    });
    let (_, info) =
        symbolic.solve(pattern, &system.values, &factor, &system.rhs, linear).expect("solve");
    println!(
        "{group_name}: {} refinement step(s), relative residual {:.1e}, factor entries {:?}",
        info.steps,
        info.relative_residual,
        symbolic.factor_entries()
    );
    group.bench_function("solve", |b| {
        b.iter(|| {
            black_box(
                symbolic
                    .solve(pattern, &system.values, &factor, &system.rhs, linear)
                    .expect("solve"),
            )
        })
    });
    group.finish();
}

fn main() {
    faer::set_global_parallelism(faer::Par::Seq);
    let n = cells_per_side();
    let mesh = rectangle([0.0, 0.0], [1.0, 1.0], n, n, |_, _| [0.0, 0.0]).expect("valid mesh");
    let conditions = channel_conditions();
    let problem = StokesProblem {
        viscosity: VISCOSITY,
        conditions: &conditions,
        body_force: None,
        viscous_form: ViscousForm::Gradient,
        time: 0.0,
    };
    let params = SolverParams::default();
    let (pattern, stokes) =
        assemble_stokes_system(&mesh, &problem, &params).expect("valid channel problem");
    println!(
        "solve benchmark: {n} x {n} cells, {} triangles, {} unknowns ({} velocity + {} pressure), nnz {}",
        mesh.n_cells(),
        pattern.n(),
        pattern.dofs().n_velocity_dofs(),
        pattern.dofs().n_pressure_dofs(),
        pattern.nnz()
    );
    let mut criterion = Criterion::default().configure_from_args();
    let ldlt = LinearParams { kind: SolverKind::Ldlt, ..params.linear() };
    bench_stages(&mut criterion, "stokes_ldlt", &pattern, &stokes, &ldlt);

    // The wind of the Newton matrix: the Stokes velocity of the same problem.
    let symbolic = SymbolicSystem::analyse(&pattern, SolverKind::Ldlt).expect("analysis");
    let factor = symbolic.factorize(&pattern, &stokes.values, &ldlt).expect("factorisation");
    let (x, _) =
        symbolic.solve(&pattern, &stokes.values, &factor, &stokes.rhs, &ldlt).expect("solve");
    drop(factor);
    let w = expand_field(&mesh, pattern.dofs(), &x).velocity;
    let newton = newton_system(&pattern, &mesh, &w);
    let lu = LinearParams { kind: SolverKind::Lu, ..params.linear() };
    bench_stages(&mut criterion, "newton_lu", &pattern, &newton, &lu);
    criterion.final_summary();
}
