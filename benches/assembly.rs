//! Throughput of the Taylor–Hood Stokes assembly (elements per second), serial and rayon, on
//! a structured mesh of about 250k triangles; before the criterion runs, one steady Stokes
//! solve is timed stage by stage (pattern, assembly, symbolic, numeric, solve).
//!
//! A third group compares building the sparsity pattern directly (node-to-cell adjacency,
//! column by column; what `SystemPattern::new` does) with the general COO → CSC route of
//! nalgebra-sparse (every element pair pushed, duplicates summed).
//!
//! Run: `cargo bench --bench assembly`. Set `CORNERFLOW_BENCH_SOLVE_N=<cells per side>` to
//! change the size of the timed solve (default 160, about 230k unknowns; 0 skips it) and
//! `CORNERFLOW_BENCH_SOLVE_FORM=symmetric` to time it with the symmetric viscous form (full
//! velocity coupling in the pattern).

use std::hint::black_box;

use cornerflow::case::{BoundaryCondition, ScalarExpr};
use cornerflow::fem::ViscousForm;
use cornerflow::fem::assembly::{Parallelism, SystemPattern, VelocityCoupling};
use cornerflow::mesh::Mesh;
use cornerflow::mesh::structured::rectangle;
use cornerflow::solver::{
    SolverParams, StokesProblem, assemble_stokes, assemble_stokes_into, resolve_boundary,
    solve_stokes, stokes_dof_map,
};
use criterion::{Criterion, Throughput};

/// Cells per side of the assembly benchmark mesh: 2·354² = 250,632 triangles.
const ASSEMBLY_CELLS: usize = 354;

fn channel_conditions() -> Vec<BoundaryCondition> {
    let inflow = BoundaryCondition::Velocity {
        ux: ScalarExpr::parse("4*y*(1-y)").expect("valid expression"),
        uy: ScalarExpr::constant(0.0),
    };
    vec![BoundaryCondition::NoSlip, BoundaryCondition::Outflow, BoundaryCondition::NoSlip, inflow]
}

fn unit_square(n: usize) -> Mesh {
    rectangle([0.0, 0.0], [1.0, 1.0], n, n, |_, _| [0.0, 0.0]).expect("structured mesh is valid")
}

fn bench_assembly(c: &mut Criterion) {
    let mesh = unit_square(ASSEMBLY_CELLS);
    let conditions = channel_conditions();
    let problem = StokesProblem {
        viscosity: 1e-3,
        conditions: &conditions,
        body_force: None,
        viscous_form: ViscousForm::Gradient,
        time: 0.0,
    };
    let constraints = resolve_boundary(&mesh, &conditions, 0.0).expect("valid conditions");
    let (dofs, _) = stokes_dof_map(&mesh, &constraints, 1e-8).expect("open channel");
    let pattern = SystemPattern::new(&mesh, dofs, VelocityCoupling::Full).expect("pattern fits");
    let mut group = c.benchmark_group("stokes_assembly");
    group.sample_size(10);
    group.throughput(Throughput::Elements(mesh.n_cells() as u64));
    // Repeated assembly into reused storage (the time-loop case): first-touch page faults of
    // the value array are paid once, outside the measurement.
    let mut system =
        assemble_stokes(&pattern, &mesh, &problem, Parallelism::Serial).expect("finite");
    println!(
        "assembly benchmark: {} triangles, {} unknowns, nnz {}",
        mesh.n_cells(),
        pattern.n(),
        pattern.nnz()
    );
    for (name, parallelism) in [("serial", Parallelism::Serial), ("rayon", Parallelism::Rayon)] {
        group.bench_function(name, |b| {
            b.iter(|| {
                assemble_stokes_into(&pattern, &mesh, &problem, parallelism, &mut system)
                    .expect("finite");
                black_box(&system);
            })
        });
    }
    group.finish();
}

/// Pattern construction: direct against nalgebra-sparse's COO → CSC with duplicate summation.
fn bench_pattern(c: &mut Criterion) {
    use cornerflow::fem::dofs::ComponentDof;
    let mesh = unit_square(ASSEMBLY_CELLS / 2);
    let conditions = channel_conditions();
    let constraints = resolve_boundary(&mesh, &conditions, 0.0).expect("valid conditions");
    let (dofs, _) = stokes_dof_map(&mesh, &constraints, 1e-8).expect("open channel");
    let mut group = c.benchmark_group("stokes_pattern");
    group.sample_size(10);
    group.bench_function("direct", |b| {
        b.iter(|| {
            black_box(SystemPattern::new(&mesh, dofs.clone(), VelocityCoupling::Full).unwrap())
        })
    });
    group.bench_function("nalgebra_sparse_coo", |b| {
        b.iter(|| {
            let n = dofs.n_dofs();
            let mut coo = nalgebra_sparse::CooMatrix::new(n, n);
            for cell in &mesh.cells {
                let free: Vec<usize> = dofs
                    .cell_dofs(cell)
                    .into_iter()
                    .filter_map(|d| match d {
                        ComponentDof::Free { dof, .. } => Some(dof),
                        ComponentDof::Fixed(_) => None,
                    })
                    .collect();
                for &r in &free {
                    for &col in &free {
                        coo.push(r, col, 1.0);
                    }
                }
            }
            black_box(nalgebra_sparse::CscMatrix::from(&coo))
        })
    });
    group.finish();
}

/// One steady solve of the channel problem, timings per stage printed once.
fn report_solve_stages() {
    let n =
        std::env::var("CORNERFLOW_BENCH_SOLVE_N").ok().and_then(|v| v.parse().ok()).unwrap_or(160);
    if n == 0 {
        return;
    }
    let mesh = unit_square(n);
    let conditions = channel_conditions();
    let problem = StokesProblem {
        viscosity: 1e-3,
        conditions: &conditions,
        body_force: None,
        viscous_form: if std::env::var("CORNERFLOW_BENCH_SOLVE_FORM")
            .is_ok_and(|f| f == "symmetric")
        {
            ViscousForm::Symmetric
        } else {
            ViscousForm::Gradient
        },
        time: 0.0,
    };
    match solve_stokes(&mesh, &problem, &SolverParams::default()) {
        Ok((_, info)) => println!(
            "steady Stokes solve ({:?} form), {} triangles, {} unknowns ({} velocity + {} pressure), nnz {}, \
             factor entries {:?}: \
             pattern {:.3} s, assembly {:.3} s, symbolic {:.3} s, numeric {:.3} s, solve {:.3} s \
             ({} refinement steps, relative residual {:.1e})",
            problem.viscous_form,
            mesh.n_cells(),
            info.n_velocity_dofs + info.n_pressure_dofs,
            info.n_velocity_dofs,
            info.n_pressure_dofs,
            info.nnz,
            info.factor_entries,
            info.timings.pattern.as_secs_f64(),
            info.timings.assembly.as_secs_f64(),
            info.timings.symbolic.as_secs_f64(),
            info.timings.numeric.as_secs_f64(),
            info.timings.solve.as_secs_f64(),
            info.refinement_steps,
            info.relative_residual,
        ),
        Err(e) => println!("steady Stokes solve failed: {e}"),
    }
}

fn main() {
    report_solve_stages();
    let mut criterion = Criterion::default().configure_from_args();
    bench_assembly(&mut criterion);
    bench_pattern(&mut criterion);
    criterion.final_summary();
}
