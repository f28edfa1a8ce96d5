//! Verification of the Taylor–Hood Stokes solver against exact solutions from the literature:
//! plane Poiseuille flow, a smooth manufactured solution, Verfürth's singular L-shape
//! solution; plus assembly, boundary-condition and error-path properties.

use cornerflow::case::{BoundaryCondition, ScalarExpr};
use cornerflow::fem::assembly::{Parallelism, SystemPattern};
use cornerflow::fem::dofs::NodeConstraint;
use cornerflow::fem::norms::{ErrorNorms, PressureComparison, error_norms};
use cornerflow::fem::shape::{AffineTriangle, p2_gradients};
use cornerflow::fem::{FlowField, ViscousForm};
use cornerflow::mesh::Mesh;
use cornerflow::mesh::structured::rectangle;
use cornerflow::solver::{
    BoundaryConstraints, SolveError, SolveInfo, SolverKind, SolverParams, StokesProblem,
    SymbolicSystem, assemble_stokes, expand_field, solve_stokes, stokes_dof_map,
};

// ---------------------------------------------------------------------------------------
// Helpers

/// SplitMix64 (Steele, Lea & Flood, OOPSLA 2014): a seeded generator for mesh jitter.
struct SplitMix(u64);

impl SplitMix {
    fn next_f64(&mut self) -> f64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        ((z ^ (z >> 31)) >> 11) as f64 / (1u64 << 53) as f64
    }
}

/// A rectangle mesh whose interior vertices move by up to `amplitude` cell sizes in each
/// direction (seeded, so reproducible).
fn jittered_rectangle(
    min: [f64; 2],
    max: [f64; 2],
    nx: usize,
    ny: usize,
    amplitude: f64,
    seed: u64,
) -> Mesh {
    let offsets: Vec<[f64; 2]> = {
        let mut rng = SplitMix(seed);
        (0..(nx + 1) * (ny + 1))
            .map(|_| {
                [amplitude * (2.0 * rng.next_f64() - 1.0), amplitude * (2.0 * rng.next_f64() - 1.0)]
            })
            .collect()
    };
    let mesh = rectangle(min, max, nx, ny, |i, j| offsets[j * (nx + 1) + i]).unwrap();
    mesh.check_invariants().unwrap();
    mesh
}

fn expr(s: &str) -> ScalarExpr {
    ScalarExpr::parse(s).unwrap()
}

fn velocity(ux: &str, uy: &str) -> BoundaryCondition {
    BoundaryCondition::Velocity { ux: expr(ux), uy: expr(uy) }
}

fn problem<'a>(
    viscosity: f64,
    conditions: &'a [BoundaryCondition],
    form: ViscousForm,
) -> StokesProblem<'a> {
    StokesProblem { viscosity, conditions, body_force: None, viscous_form: form, time: 0.0 }
}

/// Velocity gradient `[[∂u/∂x, ∂u/∂y], [∂v/∂x, ∂v/∂y]]` of the discrete field in `cell` at
/// barycentric point `l`.
fn discrete_gradient(mesh: &Mesh, field: &FlowField, cell: usize, l: [f64; 3]) -> [[f64; 2]; 2] {
    let tri = AffineTriangle::new(mesh.cell_vertices(cell));
    let g = p2_gradients(l, &tri.grad_bary);
    let mut out = [[0.0; 2]; 2];
    for (k, &node) in mesh.cells[cell].iter().enumerate() {
        for c in 0..2 {
            for d in 0..2 {
                out[c][d] += g[k][d] * field.velocity[node][c];
            }
        }
    }
    out
}

/// Barycentric coordinates in `cell` of the point at fraction `s` along local edge `a -> b`.
fn edge_point_bary(mesh: &Mesh, cell: usize, a: usize, b: usize, s: f64) -> [f64; 3] {
    let mut l = [0.0; 3];
    for (k, &v) in mesh.cells[cell][..3].iter().enumerate() {
        if v == a {
            l[k] = 1.0 - s;
        }
        if v == b {
            l[k] = s;
        }
    }
    l
}

/// Least-squares slope of `log e` against `log h` (the observed convergence order).
fn fitted_rate(h: &[f64], e: &[f64]) -> f64 {
    let x: Vec<f64> = h.iter().map(|v| v.ln()).collect();
    let y: Vec<f64> = e.iter().map(|v| v.ln()).collect();
    let n = x.len() as f64;
    let (mx, my) = (x.iter().sum::<f64>() / n, y.iter().sum::<f64>() / n);
    let sxy: f64 = x.iter().zip(&y).map(|(a, b)| (a - mx) * (b - my)).sum();
    let sxx: f64 = x.iter().map(|a| (a - mx).powi(2)).sum();
    sxy / sxx
}

fn mean_pressure(mesh: &Mesh, field: &FlowField) -> f64 {
    let (mut integral, mut area) = (0.0, 0.0);
    for (c, cell) in mesh.cells.iter().enumerate() {
        let a = AffineTriangle::new(mesh.cell_vertices(c)).area;
        integral += a * cell[..3].iter().map(|&v| field.pressure[v]).sum::<f64>() / 3.0;
        area += a;
    }
    integral / area
}

// ---------------------------------------------------------------------------------------
// Plane Poiseuille flow. Source: exact solution u = 4U y(H−y)/H², v = 0,
// p = p₀ − 8μU x/H² (e.g. F.M. White, *Viscous Fluid Flow*, 3rd ed., McGraw-Hill 2006,
// §3-3, from memory; benchmarks.md §6.2). Kinematic form with ρ = 1, so μ = ν.
// Taylor–Hood reproduces it exactly (quadratic u ∈ P2, linear p ∈ P1), so the only error is
// round-off: the 1e-10 relative bound is the residual target of the solver times a
// condition-number margin (κ ≈ 1e3 on these meshes gives ≈1e-13 from round-off).

const CHANNEL_LENGTH: f64 = 3.0;
const CHANNEL_HEIGHT: f64 = 1.0;
const INFLOW_PEAK: f64 = 1.5;
const CHANNEL_VISCOSITY: f64 = 0.05;

fn poiseuille_u(y: f64) -> f64 {
    4.0 * INFLOW_PEAK * y * (CHANNEL_HEIGHT - y) / (CHANNEL_HEIGHT * CHANNEL_HEIGHT)
}

/// Pressure with the do-nothing condition `ν ∂u/∂n − p n = 0` at the outlet, i.e. p = 0 at x = L.
fn poiseuille_p(x: f64) -> f64 {
    8.0 * CHANNEL_VISCOSITY * INFLOW_PEAK * (CHANNEL_LENGTH - x) / (CHANNEL_HEIGHT * CHANNEL_HEIGHT)
}

fn channel_mesh() -> Mesh {
    jittered_rectangle([0.0, 0.0], [CHANNEL_LENGTH, CHANNEL_HEIGHT], 18, 6, 0.3, 0x5EED_0001)
}

fn inflow() -> BoundaryCondition {
    velocity(&format!("4*{INFLOW_PEAK}*y*(1-y)"), "0")
}

fn max_errors(mesh: &Mesh, field: &FlowField, p_exact: impl Fn(f64) -> f64) -> (f64, f64) {
    let eu = mesh
        .nodes
        .iter()
        .zip(&field.velocity)
        .map(|(x, u)| (u[0] - poiseuille_u(x[1])).abs().max(u[1].abs()))
        .fold(0.0, f64::max);
    let ep = (0..mesh.n_vertices)
        .map(|v| (field.pressure[v] - p_exact(mesh.nodes[v][0])).abs())
        .fold(0.0, f64::max);
    (eu, ep)
}

fn solve_open_channel(params: &SolverParams) -> (Mesh, FlowField, SolveInfo) {
    let mesh = channel_mesh();
    // Parts: bottom, right, top, left.
    let conditions = [
        BoundaryCondition::NoSlip,
        BoundaryCondition::Outflow,
        BoundaryCondition::NoSlip,
        inflow(),
    ];
    let (field, info) = solve_stokes(
        &mesh,
        &problem(CHANNEL_VISCOSITY, &conditions, ViscousForm::Gradient),
        params,
    )
    .unwrap();
    (mesh, field, info)
}

#[test]
fn poiseuille_flow_is_reproduced_to_round_off_on_a_jittered_mesh() {
    let (mesh, field, info) = solve_open_channel(&SolverParams::default());
    let (eu, ep) = max_errors(&mesh, &field, poiseuille_p);
    let dp = poiseuille_p(0.0);
    assert!(eu / INFLOW_PEAK <= 1e-10, "velocity error {eu:e}");
    assert!(ep / dp <= 1e-10, "pressure error {ep:e}");
    assert!(!info.pressure_fixed, "an outflow part fixes the pressure level");
    assert!(info.relative_residual <= 1e-10);
}

#[test]
fn poiseuille_wall_shear_and_pressure_drop_match_closed_form() {
    let (mesh, field, _) = solve_open_channel(&SolverParams::default());
    // Wall shear stress τ = μ ∂u/∂y at y = 0 equals 4μU/H (benchmarks.md §6.2), sampled at
    // three points of every bottom-wall edge.
    let tau_exact = 4.0 * CHANNEL_VISCOSITY * INFLOW_PEAK / CHANNEL_HEIGHT;
    let mut samples = 0;
    for edge in mesh.boundary_edges.iter().filter(|e| e.part == 0) {
        for s in [0.1, 0.5, 0.9] {
            let l = edge_point_bary(&mesh, edge.cell, edge.nodes[0], edge.nodes[1], s);
            let tau = CHANNEL_VISCOSITY * discrete_gradient(&mesh, &field, edge.cell, l)[0][1];
            assert!((tau - tau_exact).abs() <= 1e-9 * tau_exact, "wall shear {tau} vs {tau_exact}");
            samples += 1;
        }
    }
    assert_eq!(samples, 3 * 18);
    // Pressure drop over the length: 8μU L / H².
    let drop_exact =
        8.0 * CHANNEL_VISCOSITY * INFLOW_PEAK * CHANNEL_LENGTH / CHANNEL_HEIGHT.powi(2);
    let side_mean = |part: usize| {
        let vs: Vec<usize> =
            mesh.boundary_edges.iter().filter(|e| e.part == part).map(|e| e.nodes[0]).collect();
        vs.iter().map(|&v| field.pressure[v]).sum::<f64>() / vs.len() as f64
    };
    let drop = side_mean(3) - side_mean(1);
    assert!(
        (drop - drop_exact).abs() <= 1e-10 * drop_exact,
        "pressure drop {drop} vs {drop_exact}"
    );
}

#[test]
fn lu_and_static_regularisation_give_the_same_poiseuille_solution() {
    for params in [
        SolverParams { kind: SolverKind::Lu, ..Default::default() },
        SolverParams {
            regularization: cornerflow::solver::Regularization::Static { delta: 1e-8 },
            ..Default::default()
        },
    ] {
        let (mesh, field, info) = solve_open_channel(&params);
        let (eu, ep) = max_errors(&mesh, &field, poiseuille_p);
        assert!(
            eu / INFLOW_PEAK <= 1e-10 && ep / poiseuille_p(0.0) <= 1e-10,
            "{params:?}: {eu:e} {ep:e}"
        );
        assert!(info.relative_residual <= 1e-10);
    }
}

#[test]
fn closed_channel_with_symmetric_form_fixes_the_pressure_mean() {
    // Both ends prescribed: a closed domain whose data carry zero net flux. The symmetric
    // form has the same Poiseuille solution (div u = 0 makes div 2ε(u) = Δu), pressure up to
    // a constant; the solver pins it and shifts it to zero mean.
    let mesh = channel_mesh();
    let conditions = [BoundaryCondition::NoSlip, inflow(), BoundaryCondition::NoSlip, inflow()];
    let (field, info) = solve_stokes(
        &mesh,
        &problem(CHANNEL_VISCOSITY, &conditions, ViscousForm::Symmetric),
        &SolverParams::default(),
    )
    .unwrap();
    assert!(info.pressure_fixed);
    let p_mean_exact = poiseuille_p(CHANNEL_LENGTH / 2.0);
    let (eu, ep) = max_errors(&mesh, &field, |x| poiseuille_p(x) - p_mean_exact);
    assert!(eu / INFLOW_PEAK <= 1e-10, "velocity error {eu:e}");
    assert!(ep / poiseuille_p(0.0) <= 1e-10, "pressure error {ep:e}");
    // Mean of the P1 pressure: zero up to round-off of the area-weighted sum (1e-13 · Δp).
    assert!(mean_pressure(&mesh, &field).abs() <= 1e-13 * poiseuille_p(0.0));
}

// ---------------------------------------------------------------------------------------
// Smooth manufactured solution on the unit square, ν = 1, u = 0 on the boundary.
// Source: stream function ψ = x²(1−x)² y²(1−y)², the Stokes example of J. Donea, A. Huerta,
// *Finite Element Methods for Flow Problems*, Wiley 2003 (attribution from memory;
// benchmarks.md §6.3 for the formulas and the body force). Expected Taylor–Hood orders
// h³ (velocity L²), h² (velocity H¹), h² (pressure L²) (benchmarks.md §7.1; e.g. Boffi,
// Brezzi & Fortin, *Mixed Finite Element Methods and Applications*, Springer 2013, from
// memory). Thresholds 2.8 / 1.8 / 1.8 leave 0.2 for pre-asymptotic effects on these meshes.

const FORCE_X: &str = "12*x^4 - 24*x^4*y + 48*x^3*y - 24*x^3 - 48*x^2*y^3 + 72*x^2*y^2 - 48*x^2*y + 12*x^2 + 48*x*y^3 - 72*x*y^2 + 24*x*y - 2*x - 8*y^3 + 12*y^2 - 4*y + 1";
const FORCE_Y: &str = "48*x^3*y^2 - 48*x^3*y + 8*x^3 - 72*x^2*y^2 + 72*x^2*y - 12*x^2 + 24*x*y^4 - 48*x*y^3 + 48*x*y^2 - 24*x*y + 4*x - 12*y^4 + 24*y^3 - 12*y^2";

fn manufactured_u(x: f64, y: f64) -> [f64; 2] {
    let gx = x * x * (1.0 - x).powi(2);
    let gy = y * y * (1.0 - y).powi(2);
    let dgx = 2.0 * x - 6.0 * x * x + 4.0 * x.powi(3);
    let dgy = 2.0 * y - 6.0 * y * y + 4.0 * y.powi(3);
    [gx * dgy, -gy * dgx]
}

fn manufactured_grad(x: f64, y: f64) -> [[f64; 2]; 2] {
    let gx = x * x * (1.0 - x).powi(2);
    let gy = y * y * (1.0 - y).powi(2);
    let dgx = 2.0 * x - 6.0 * x * x + 4.0 * x.powi(3);
    let dgy = 2.0 * y - 6.0 * y * y + 4.0 * y.powi(3);
    let ddgx = 2.0 - 12.0 * x + 12.0 * x * x;
    let ddgy = 2.0 - 12.0 * y + 12.0 * y * y;
    [[dgx * dgy, gx * ddgy], [-gy * ddgx, -dgy * dgx]]
}

fn manufactured_p(x: f64, _y: f64) -> f64 {
    x * (1.0 - x) - 1.0 / 6.0
}

fn manufactured_errors(mesh: &Mesh) -> ErrorNorms {
    let conditions = [
        BoundaryCondition::NoSlip,
        BoundaryCondition::NoSlip,
        BoundaryCondition::NoSlip,
        BoundaryCondition::NoSlip,
    ];
    let force = [expr(FORCE_X), expr(FORCE_Y)];
    let problem = StokesProblem {
        body_force: Some(&force),
        ..problem(1.0, &conditions, ViscousForm::Gradient)
    };
    let (field, info) = solve_stokes(mesh, &problem, &SolverParams::default()).unwrap();
    assert!(info.pressure_fixed);
    error_norms(
        mesh,
        &field,
        manufactured_u,
        manufactured_grad,
        manufactured_p,
        PressureComparison::UpToConstant,
    )
}

fn check_manufactured_rates(jitter: f64) {
    let levels = [4usize, 8, 16, 32, 64];
    let h: Vec<f64> = levels.iter().map(|&n| 1.0 / n as f64).collect();
    let errors: Vec<ErrorNorms> = levels
        .iter()
        .map(|&n| {
            manufactured_errors(&jittered_rectangle(
                [0.0, 0.0],
                [1.0, 1.0],
                n,
                n,
                jitter,
                0xC0FFEE + n as u64,
            ))
        })
        .collect();
    // Fit over the last three levels (16, 32, 64): the asymptotic range.
    let fit = |f: fn(&ErrorNorms) -> f64| {
        let e: Vec<f64> = errors.iter().map(f).collect();
        fitted_rate(&h[2..], &e[2..])
    };
    let (r_l2, r_h1, r_p) =
        (fit(|e| e.velocity_l2), fit(|e| e.velocity_h1_semi), fit(|e| e.pressure_l2));
    eprintln!(
        "manufactured, jitter {jitter}: rates L2 {r_l2:.3} H1 {r_h1:.3} p {r_p:.3}; errors {errors:?}"
    );
    assert!(r_l2 >= 2.8, "velocity L2 rate {r_l2} (jitter {jitter}), errors {errors:?}");
    assert!(r_h1 >= 1.8, "velocity H1 rate {r_h1} (jitter {jitter})");
    assert!(r_p >= 1.8, "pressure L2 rate {r_p} (jitter {jitter})");
}

#[test]
fn manufactured_solution_converges_at_taylor_hood_rates_on_structured_meshes() {
    check_manufactured_rates(0.0);
}

#[test]
fn manufactured_solution_converges_at_taylor_hood_rates_on_jittered_meshes() {
    check_manufactured_rates(0.25);
}
