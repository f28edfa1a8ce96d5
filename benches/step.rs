//! One step of each time-dependent or nonlinear solver on a structured channel
//! `[0, 4] × [0, 1]` (4n × n cells, parabolic inflow of peak speed 1 on the left, outflow on
//! the right, no-slip walls, ν = 0.01, so Re = 100 on the channel height):
//!
//! * `step/imex_bdf2`: one `ImexStepper::step` in the BDF2 regime (after the backward-Euler
//!   first step and the one refactorisation for BDF2, both outside the measurement): one
//!   vector assembly (history, explicit convection, lifted boundary data) and one refined
//!   `LDLᵀ` solve with the stored factor; Δt gives a Courant number of about 0.2;
//! * `step/newton`: one Newton step around the Stokes velocity: assembly of the Newton
//!   matrix and load (Stokes plus `add_linearised_convection`), numeric LU refactorisation
//!   into reused storage (symbolic analysis done once, outside), and one refined solve.
//!
//! Run: `cargo bench --bench step`. The default has n = 24 (96 × 24 cells, 4,608 triangles,
//! about 20k unknowns); set `CORNERFLOW_BENCH_STEP_CELLS=<n>` to go bigger.

use std::hint::black_box;
use std::time::Duration;

use cornerflow::case::{BoundaryCondition, ScalarExpr};
use cornerflow::fem::ViscousForm;
use cornerflow::fem::assembly::{AssembledSystem, Parallelism, assemble_into};
use cornerflow::fem::convection::{Linearisation, add_linearised_convection};
use cornerflow::fem::kernels::stokes_local_system;
use cornerflow::fem::shape::AffineTriangle;
use cornerflow::mesh::Mesh;
use cornerflow::mesh::structured::rectangle;
use cornerflow::solver::{
    ImexParams, ImexStepper, LinearParams, NumericFactor, SolverKind, SolverParams, StokesProblem,
    SymbolicSystem, UnsteadyProblem, assemble_stokes_system, expand_field,
};
use criterion::Criterion;

const VISCOSITY: f64 = 0.01;

fn cells() -> usize {
    std::env::var("CORNERFLOW_BENCH_STEP_CELLS")
        .ok()
        .and_then(|v| v.parse().ok())
        .filter(|&n: &usize| n >= 2)
        .unwrap_or(24)
}

/// Bottom, right, top, left: wall, outflow, wall, parabolic inflow of peak speed 1.
fn channel_conditions() -> Vec<BoundaryCondition> {
    let inflow = BoundaryCondition::Velocity {
        ux: ScalarExpr::parse("4*y*(1-y)").expect("valid expression"),
        uy: ScalarExpr::constant(0.0),
    };
    vec![BoundaryCondition::NoSlip, BoundaryCondition::Outflow, BoundaryCondition::NoSlip, inflow]
}

fn bench_imex(c: &mut Criterion, mesh: &Mesh, conditions: &[BoundaryCondition], n: usize) {
    let problem = UnsteadyProblem {
        viscosity: VISCOSITY,
        conditions,
        body_force: None,
        viscous_form: ViscousForm::Gradient,
        convection: true,
    };
    // Courant number |u| Δt / h ≈ 0.2 with peak speed 1 and h = 1 / n (cell side).
    let dt = 0.2 / n as f64;
    let mut stepper = ImexStepper::new(mesh, problem, ImexParams::new(dt)).expect("stepper");
    for _ in 0..2 {
        stepper.step().expect("first steps");
    }
    println!("imex: {} unknowns, dt {dt:.3e}", stepper.n_unknowns());
    c.benchmark_group("step")
        .sample_size(20)
        .warm_up_time(Duration::from_secs(1))
        .bench_function("imex_bdf2", |b| b.iter(|| black_box(stepper.step().expect("step"))));
}

fn bench_newton(c: &mut Criterion, mesh: &Mesh, conditions: &[BoundaryCondition]) {
    let problem = StokesProblem {
        viscosity: VISCOSITY,
        conditions,
        body_force: None,
        viscous_form: ViscousForm::Gradient,
        time: 0.0,
    };
    let params = SolverParams::default();
    let (pattern, mut system) =
        assemble_stokes_system(mesh, &problem, &params).expect("valid channel problem");
    let ldlt = LinearParams { kind: SolverKind::Ldlt, ..params.linear() };
    let symbolic = SymbolicSystem::analyse(&pattern, SolverKind::Ldlt).expect("analysis");
    let factor = symbolic.factorize(&pattern, &system.values, &ldlt).expect("factorisation");
    let (x, _) =
        symbolic.solve(&pattern, &system.values, &factor, &system.rhs, &ldlt).expect("solve");
    drop((factor, symbolic));
    let w = expand_field(mesh, pattern.dofs(), &x).velocity;

    let lu = LinearParams { kind: SolverKind::Lu, ..params.linear() };
    let symbolic = SymbolicSystem::analyse(&pattern, SolverKind::Lu).expect("analysis");
    let mut factor = NumericFactor::placeholder();
    let mut newton_step = |system: &mut AssembledSystem| {
        assemble_into(&pattern, mesh, Parallelism::Rayon, system, |cell, local| {
            let tri = AffineTriangle::new(mesh.cell_vertices(cell));
            stokes_local_system(&tri, VISCOSITY, ViscousForm::Gradient, None, local);
            let nodes = &mesh.cells[cell];
            let nodal: [[f64; 2]; 6] = std::array::from_fn(|k| w[nodes[k]]);
            add_linearised_convection(&tri, &nodal, Linearisation::Newton, local);
        });
        symbolic.refactorize(&pattern, &system.values, &lu, &mut factor).expect("factorisation");
        symbolic.solve(&pattern, &system.values, &factor, &system.rhs, &lu).expect("solve")
    };
    let (_, info) = newton_step(&mut system);
    println!(
        "newton: {} unknowns, {} refinement step(s), relative residual {:.1e}",
        pattern.n(),
        info.steps,
        info.relative_residual
    );
    c.benchmark_group("step")
        .sample_size(10)
        .warm_up_time(Duration::from_secs(1))
        .measurement_time(Duration::from_secs(10))
        .bench_function("newton", |b| b.iter(|| black_box(newton_step(&mut system))));
}

fn main() {
    faer::set_global_parallelism(faer::Par::Seq);
    let n = cells();
    let mesh = rectangle([0.0, 0.0], [4.0, 1.0], 4 * n, n, |_, _| [0.0, 0.0]).expect("valid mesh");
    println!("step benchmark: {} x {n} cells, {} triangles", 4 * n, mesh.n_cells());
    let conditions = channel_conditions();
    let mut criterion = Criterion::default().configure_from_args();
    bench_imex(&mut criterion, &mesh, &conditions, n);
    bench_newton(&mut criterion, &mesh, &conditions);
    criterion.final_summary();
}
