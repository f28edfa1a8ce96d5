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
    BoundaryConstraints, FillOrdering, SolveError, SolveInfo, SolverKind, SolverParams,
    StokesProblem, SymbolicSystem, analyse_for_mesh, assemble_stokes, build_pattern, expand_field,
    solve_stokes, stokes_dof_map, velocity_coupling,
};
use cornerflow::study::fitted_rate;

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
        for (c, row) in out.iter_mut().enumerate() {
            for (d, entry) in row.iter_mut().enumerate() {
                *entry += g[k][d] * field.velocity[node][c];
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
    eprintln!("Poiseuille: max relative errors u {:.1e}, p {:.1e}", eu / INFLOW_PEAK, ep / dp);
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

/// The `LDLᵀ` split over the halves of the nested dissection (the default on a mesh this
/// size) and the one-piece factor (AMD ordering) both reproduce plane Poiseuille flow, which
/// P2–P1 represents exactly (closed form, benchmarks.md §6.2), and agree to round-off.
#[test]
fn split_and_whole_factorisations_both_reproduce_poiseuille() {
    let mesh = jittered_rectangle([0.0, 0.0], [CHANNEL_LENGTH, CHANNEL_HEIGHT], 72, 24, 0.3, 7);
    let conditions = [
        BoundaryCondition::NoSlip,
        BoundaryCondition::Outflow,
        BoundaryCondition::NoSlip,
        inflow(),
    ];
    let problem = problem(CHANNEL_VISCOSITY, &conditions, ViscousForm::Gradient);
    let mut fields = Vec::new();
    for (ordering, split) in [(FillOrdering::NestedDissection, true), (FillOrdering::Amd, false)] {
        let params = SolverParams { ordering, ..Default::default() };
        let (pattern, _) = build_pattern(&mesh, &problem, &params).unwrap();
        let symbolic = analyse_for_mesh(&pattern, &mesh, SolverKind::Ldlt, ordering).unwrap();
        assert_eq!(symbolic.splits_halves(), split, "{ordering:?}");
        let (field, info) = solve_stokes(&mesh, &problem, &params).unwrap();
        let (eu, ep) = max_errors(&mesh, &field, poiseuille_p);
        assert!(eu / INFLOW_PEAK <= 1e-10, "{ordering:?}: velocity error {eu:e}");
        assert!(ep / poiseuille_p(0.0) <= 1e-10, "{ordering:?}: pressure error {ep:e}");
        assert!(info.relative_residual <= 1e-10);
        fields.push(field);
    }
    let gap = fields[0]
        .velocity
        .iter()
        .zip(&fields[1].velocity)
        .map(|(a, b)| (a[0] - b[0]).abs().max((a[1] - b[1]).abs()))
        .fold(0.0, f64::max);
    assert!(gap <= 1e-10 * INFLOW_PEAK, "split and whole factors differ by {gap:e}");
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

// ---------------------------------------------------------------------------------------
// Verfürth's singular Stokes solution on the L-shaped domain (−1,1)² \ ([0,1) × (−1,0]).
// Source: R. Verfürth, *A Review of A Posteriori Error Estimation and Adaptive
// Mesh-Refinement Techniques*, Wiley–Teubner 1996, Stokes example (location from memory;
// formula as in benchmarks.md §6.4, including the minus sign of p). The exponent α is the
// root of sin(αω) = α for ω = 3π/2, α = 0.5444837367... (M. Dauge, *Stationary Stokes and
// Navier–Stokes systems on two- or three-dimensional domains with corners*, SIAM J. Math.
// Anal. 20 (1989) 74–97, from memory). With u ∈ H^{1+α−ε} the H¹ error of uniform
// refinement decays like h^α (benchmarks.md §7.2).

const OMEGA: f64 = 1.5 * std::f64::consts::PI;

/// The root of sin(αω) = α near 0.5445 by Newton's method (converges in a few steps).
pub(crate) fn dauge_exponent() -> f64 {
    let mut a: f64 = 0.54;
    for _ in 0..50 {
        let step = ((a * OMEGA).sin() - a) / (OMEGA * (a * OMEGA).cos() - 1.0);
        a -= step;
        if step.abs() < 1e-16 {
            break;
        }
    }
    a
}

/// ψ and its first three derivatives at θ.
fn verfurth_psi(alpha: f64, theta: f64) -> [f64; 4] {
    let c = (alpha * OMEGA).cos();
    let (p, m) = (1.0 + alpha, 1.0 - alpha);
    let (sp, cp, sm, cm) =
        ((p * theta).sin(), (p * theta).cos(), (m * theta).sin(), (m * theta).cos());
    [
        sp * c / p - cp - sm * c / m + cm,
        cp * c + p * sp - cm * c - m * sm,
        -p * sp * c + p * p * cp + m * sm * c - m * m * cm,
        -p * p * cp * c - p.powi(3) * sp + m * m * cm * c + m.powi(3) * sm,
    ]
}

fn polar(x: f64, y: f64) -> (f64, f64) {
    let theta = y.atan2(x);
    (x.hypot(y), if theta < 0.0 { theta + 2.0 * std::f64::consts::PI } else { theta })
}

/// r^α F(θ) with F = ((1+α) sin θ ψ + cos θ ψ′, sin θ ψ′ − (1+α) cos θ ψ); also F′(θ).
fn verfurth_f(alpha: f64, theta: f64) -> ([f64; 2], [f64; 2]) {
    let [psi, d1, d2, _] = verfurth_psi(alpha, theta);
    let (s, c, p) = (theta.sin(), theta.cos(), 1.0 + alpha);
    let f = [p * s * psi + c * d1, s * d1 - p * c * psi];
    let df = [p * (c * psi + s * d1) - s * d1 + c * d2, c * d1 + s * d2 - p * (-s * psi + c * d1)];
    (f, df)
}

pub(crate) fn verfurth_u(alpha: f64, x: f64, y: f64) -> [f64; 2] {
    let (r, theta) = polar(x, y);
    let (f, _) = verfurth_f(alpha, theta);
    [r.powf(alpha) * f[0], r.powf(alpha) * f[1]]
}

/// ∂u_c/∂x = cos θ ∂_r u_c − sin θ / r ∂_θ u_c, ∂u_c/∂y = sin θ ∂_r u_c + cos θ / r ∂_θ u_c.
fn verfurth_grad(alpha: f64, x: f64, y: f64) -> [[f64; 2]; 2] {
    let (r, theta) = polar(x, y);
    let (f, df) = verfurth_f(alpha, theta);
    let (s, c) = (theta.sin(), theta.cos());
    let ra = r.powf(alpha - 1.0);
    let row = |k: usize| {
        let (dr, dt) = (alpha * ra * f[k], ra * df[k]);
        [c * dr - s * dt, s * dr + c * dt]
    };
    [row(0), row(1)]
}

pub(crate) fn verfurth_p(alpha: f64, x: f64, y: f64) -> f64 {
    let (r, theta) = polar(x, y);
    let [_, d1, _, d3] = verfurth_psi(alpha, theta);
    -r.powf(alpha - 1.0) * ((1.0 + alpha).powi(2) * d1 + d3) / (1.0 - alpha)
}

/// Uniform mesh of the L-shape with `n` cells per unit length. Each square cell is split along
/// a diagonal that avoids triangles with three boundary vertices (a Taylor–Hood stability
/// condition, benchmarks.md §7.1).
fn l_shape_mesh(n: usize) -> Mesh {
    let m = 2 * n;
    let inside = |i: usize, j: usize| !(i > n && j < n);
    let on_boundary = |i: usize, j: usize| {
        i == 0 || i == m || j == 0 || j == m || (j == n && i >= n) || (i == n && j <= n)
    };
    let mut index = vec![usize::MAX; (m + 1) * (m + 1)];
    let mut vertices = Vec::new();
    for j in 0..=m {
        for i in 0..=m {
            if inside(i, j) {
                index[j * (m + 1) + i] = vertices.len();
                vertices.push([-1.0 + i as f64 / n as f64, -1.0 + j as f64 / n as f64]);
            }
        }
    }
    let id = |i: usize, j: usize| index[j * (m + 1) + i];
    let all_boundary = |t: &[(usize, usize); 3]| t.iter().all(|&(i, j)| on_boundary(i, j));
    let mut triangles = Vec::new();
    for j in 0..m {
        for i in 0..m {
            if i >= n && j < n {
                continue;
            }
            let (a, b, c, d) = ((i, j), (i + 1, j), (i + 1, j + 1), (i, j + 1));
            let slash = [[a, b, c], [a, c, d]];
            let tris = if slash.iter().any(all_boundary) { [[a, b, d], [b, c, d]] } else { slash };
            assert!(!tris.iter().any(all_boundary), "cell ({i}, {j}) cannot be split");
            triangles.extend(tris.iter().map(|t| t.map(|(i, j)| id(i, j))));
        }
    }
    let mut segments = Vec::new();
    for &[a, b, c] in &triangles {
        for (p, q) in [(a, b), (b, c), (c, a)] {
            segments.push((p.min(q), p.max(q)));
        }
    }
    segments.sort_unstable();
    let boundary: Vec<([usize; 2], usize)> = segments
        .chunk_by(|x, y| x == y)
        .filter(|g| g.len() == 1)
        .map(|g| ([g[0].0, g[0].1], 0))
        .collect();
    let mesh = Mesh::from_linear(vertices, &triangles, &boundary, vec!["wall".into()], vec![None])
        .unwrap();
    mesh.check_invariants().unwrap();
    mesh
}

fn verfurth_errors(n: usize, alpha: f64) -> ErrorNorms {
    let mesh = l_shape_mesh(n);
    let mut nodes = vec![NodeConstraint::Free; mesh.nodes.len()];
    for edge in &mesh.boundary_edges {
        for &k in &edge.nodes {
            let [x, y] = mesh.nodes[k];
            nodes[k] = NodeConstraint::Fixed(verfurth_u(alpha, x, y));
        }
    }
    let constraints = BoundaryConstraints { nodes, pressure_level_free: false };
    let params = SolverParams::default();
    let (dofs, _) = stokes_dof_map(&mesh, &constraints, params.flux_tolerance).unwrap();
    let pattern =
        SystemPattern::new(&mesh, dofs, velocity_coupling(ViscousForm::Gradient)).unwrap();
    let problem = problem(1.0, &[], ViscousForm::Gradient);
    let system = assemble_stokes(&pattern, &mesh, &problem, Parallelism::Rayon).unwrap();
    let linear = params.linear();
    let symbolic = SymbolicSystem::analyse(&pattern, linear.kind).unwrap();
    let factor = symbolic.factorize(&pattern, &system.values, &linear).unwrap();
    let (x, _) = symbolic.solve(&pattern, &system.values, &factor, &system.rhs, &linear).unwrap();
    let field = expand_field(&mesh, pattern.dofs(), &x);
    error_norms(
        &mesh,
        &field,
        |x, y| verfurth_u(alpha, x, y),
        |x, y| verfurth_grad(alpha, x, y),
        |x, y| verfurth_p(alpha, x, y),
        PressureComparison::UpToConstant,
    )
}

#[test]
fn verfurth_exact_solution_is_consistent() {
    // Guards the test's own formulas: α solves sin(αω) = α (Dauge 1989), div u = 0 (trace of
    // the gradient), and the gradient matches central differences (step 1e-6: truncation
    // O(1e-12) plus cancellation O(1e-10) at r ≈ 0.5).
    let alpha = dauge_exponent();
    assert!(((alpha * OMEGA).sin() - alpha).abs() < 1e-15);
    assert!((alpha - 0.544_483_736_782).abs() < 1e-11, "α = {alpha}");
    for &(x, y) in &[(0.3, 0.4), (-0.5, 0.2), (-0.4, -0.7), (0.6, 0.9)] {
        let g = verfurth_grad(alpha, x, y);
        assert!((g[0][0] + g[1][1]).abs() < 1e-12, "div u = {}", g[0][0] + g[1][1]);
        let eps = 1e-6;
        for (d, (dx, dy)) in [(eps, 0.0), (0.0, eps)].into_iter().enumerate() {
            let (up, um) = (verfurth_u(alpha, x + dx, y + dy), verfurth_u(alpha, x - dx, y - dy));
            for (c, row) in g.iter().enumerate() {
                let fd = (up[c] - um[c]) / (2.0 * eps);
                assert!((fd - row[d]).abs() < 1e-8, "∂u{c}/∂x{d}: {fd} vs {}", row[d]);
            }
        }
    }
    // u vanishes on both edges of the re-entrant corner (θ = 0 and θ = 3π/2).
    let u0 = verfurth_u(alpha, 0.5, 0.0);
    let u1 = verfurth_u(alpha, 0.0, -0.5);
    assert!(u0[0].hypot(u0[1]) < 1e-14 && u1[0].hypot(u1[1]) < 1e-14);
}

#[test]
fn l_shape_velocity_h1_error_decays_at_the_corner_exponent() {
    let alpha = dauge_exponent();
    let levels = [8usize, 16, 32, 64];
    let results: Vec<_> = levels.iter().map(|&n| verfurth_errors(n, alpha)).collect();
    let h: Vec<f64> = levels.iter().map(|&n| 1.0 / n as f64).collect();
    let e: Vec<f64> = results.iter().map(|r| r.velocity_h1_semi).collect();
    // Fit over the last three levels (n = 16, 32, 64 cells per unit length).
    let rate = fitted_rate(&h[1..], &e[1..]);
    eprintln!("L-shape: H1 rate {rate:.4}, errors {e:?}");
    // Expected 0.5444837 (Dauge 1989); 0.05 allows for the pre-asymptotic regular part.
    assert!((rate - 0.544_483_7).abs() <= 0.05, "H1 rate {rate}, errors {e:?}");
}

// ---------------------------------------------------------------------------------------
// Assembly, pressure level, boundary conditions and error paths.

#[test]
fn parallel_assembly_equals_serial_assembly() {
    let mesh = jittered_rectangle([0.0, 0.0], [1.0, 1.0], 40, 40, 0.25, 7);
    let conditions = [
        BoundaryCondition::NoSlip,
        BoundaryCondition::Outflow,
        velocity("y", "x*x"),
        BoundaryCondition::Slip,
    ];
    let force = [expr("sin(3*x)*y"), expr("x - y^2")];
    for form in [ViscousForm::Gradient, ViscousForm::Symmetric] {
        let problem = StokesProblem { body_force: Some(&force), ..problem(0.3, &conditions, form) };
        let constraints = cornerflow::solver::resolve_boundary(&mesh, &conditions, 0.0).unwrap();
        let (dofs, _) = stokes_dof_map(&mesh, &constraints, 1e-8).unwrap();
        let pattern = SystemPattern::new(&mesh, dofs, velocity_coupling(form)).unwrap();
        let serial = assemble_stokes(&pattern, &mesh, &problem, Parallelism::Serial).unwrap();
        let rayon = assemble_stokes(&pattern, &mesh, &problem, Parallelism::Rayon).unwrap();
        // Both modes scatter in element order, so the sums agree to round-off (n·eps of the
        // largest entry; here in fact bit for bit).
        let scale = serial.values.iter().fold(0.0_f64, |m, v| m.max(v.abs()));
        let dv =
            serial.values.iter().zip(&rayon.values).fold(0.0_f64, |m, (a, b)| m.max((a - b).abs()));
        let db = serial.rhs.iter().zip(&rayon.rhs).fold(0.0_f64, |m, (a, b)| m.max((a - b).abs()));
        assert!(dv <= 1e-14 * scale && db <= 1e-14 * scale, "{form:?}: {dv:e} {db:e}");
        // The assembled matrix is symmetric (the weak form's sign choice): check by CSC lookup.
        let (cp, ri) = (pattern.col_ptr(), pattern.row_idx());
        for col in (0..pattern.n()).step_by(97) {
            for k in cp[col]..cp[col + 1] {
                let row = ri[k];
                let t = cp[row] + ri[cp[row]..cp[row + 1]].binary_search(&col).unwrap();
                assert!((serial.values[k] - serial.values[t]).abs() <= 1e-14 * scale);
            }
        }
    }
}

#[test]
fn closed_lid_driven_cavity_reports_the_fixed_pressure_mean() {
    // Stokes cavity (benchmarks.md §3.3): all walls no-slip, lid u = (1, 0). The pressure is
    // determined up to a constant; the solver pins it and shifts to zero mean.
    let mesh = jittered_rectangle([0.0, 0.0], [1.0, 1.0], 16, 16, 0.2, 11);
    let conditions = [
        BoundaryCondition::NoSlip,
        BoundaryCondition::NoSlip,
        velocity("1", "0"),
        BoundaryCondition::NoSlip,
    ];
    let (field, info) = solve_stokes(
        &mesh,
        &problem(1.0, &conditions, ViscousForm::Gradient),
        &SolverParams::default(),
    )
    .unwrap();
    assert!(info.pressure_fixed);
    assert!(
        info.boundary_flux.net.abs() <= 1e-15,
        "lid is tangential, flux {:?}",
        info.boundary_flux
    );
    let p_scale = field.pressure.iter().fold(0.0_f64, |m, p| m.max(p.abs()));
    // Zero mean up to round-off of the area-weighted sum.
    assert!(mean_pressure(&mesh, &field).abs() <= 1e-13 * p_scale);
    // Corner rule: no-slip wins over the lid velocity at the two top corners.
    for corner in [[0.0, 1.0], [1.0, 1.0]] {
        let k = mesh.nodes.iter().position(|x| *x == corner).unwrap();
        assert_eq!(field.velocity[k], [0.0, 0.0]);
    }
    // The lid drives a clockwise vortex, so the flow returns (u < 0) in the lower half
    // (common practice, no source). Sample at the node nearest (0.5, 0.25).
    let dist = |x: &[f64; 2]| (x[0] - 0.5).hypot(x[1] - 0.25);
    let k = (0..mesh.nodes.len())
        .min_by(|&a, &b| dist(&mesh.nodes[a]).total_cmp(&dist(&mesh.nodes[b])))
        .unwrap();
    assert!(field.velocity[k][0] < 0.0, "u = {:?} at {:?}", field.velocity[k], mesh.nodes[k]);
}

#[test]
fn net_inflow_into_a_closed_domain_is_refused() {
    // Inlet u = 4y(1−y) through the left side and walls elsewhere: ∮ u·n = −∫₀¹ 4y(1−y) dy
    // = −2/3 (outward normal (−1, 0)); the Gauss rule is exact for this quadratic trace.
    let mesh = channel_mesh();
    let conditions = [
        BoundaryCondition::NoSlip,
        BoundaryCondition::NoSlip,
        BoundaryCondition::NoSlip,
        velocity("4*y*(1-y)", "0"),
    ];
    let err = solve_stokes(
        &mesh,
        &problem(1.0, &conditions, ViscousForm::Gradient),
        &SolverParams::default(),
    )
    .unwrap_err();
    match err {
        SolveError::IncompatibleFlux { flux, absolute } => {
            assert!((flux + 2.0 / 3.0).abs() < 1e-14, "flux {flux}");
            assert!((absolute - 2.0 / 3.0).abs() < 1e-14);
        }
        other => panic!("expected IncompatibleFlux, got {other:?}"),
    }
}

/// Uniform flow U·(cos β, sin β) in a channel rotated by β with slip walls is an exact
/// Stokes solution with constant pressure (zero stress), so P2–P1 reproduces it to round-off.
fn uniform_flow_with_slip_walls(angle: f64, form: ViscousForm) {
    let mut mesh = jittered_rectangle([0.0, 0.0], [2.0, 1.0], 12, 6, 0.25, 3);
    let (s, c) = angle.sin_cos();
    for x in &mut mesh.nodes {
        *x = [c * x[0] - s * x[1], s * x[0] + c * x[1]];
    }
    let conditions = [
        BoundaryCondition::Slip,
        BoundaryCondition::Outflow,
        BoundaryCondition::Slip,
        velocity(&format!("{c}"), &format!("{s}")),
    ];
    let (field, info) =
        solve_stokes(&mesh, &problem(0.1, &conditions, form), &SolverParams::default()).unwrap();
    assert!(!info.pressure_fixed);
    let eu =
        field.velocity.iter().map(|u| (u[0] - c).abs().max((u[1] - s).abs())).fold(0.0, f64::max);
    let ep = field.pressure.iter().fold(0.0_f64, |m, p| m.max(p.abs()));
    // Exact reproduction: round-off times the conditioning margin, as for Poiseuille.
    assert!(eu <= 1e-10 && ep <= 1e-10, "angle {angle}, {form:?}: {eu:e} {ep:e}");
}

#[test]
fn slip_walls_parallel_to_an_axis_carry_uniform_flow() {
    uniform_flow_with_slip_walls(0.0, ViscousForm::Gradient);
    uniform_flow_with_slip_walls(0.0, ViscousForm::Symmetric);
}

#[test]
fn oblique_straight_slip_walls_carry_uniform_flow() {
    uniform_flow_with_slip_walls(0.5, ViscousForm::Gradient);
    uniform_flow_with_slip_walls(-1.1, ViscousForm::Symmetric);
}

#[test]
fn bent_slip_part_is_refused() {
    let mut mesh = channel_mesh();
    for x in &mut mesh.nodes {
        x[1] += 0.05 * x[0] * x[0];
    }
    let conditions =
        [BoundaryCondition::Slip, BoundaryCondition::Outflow, BoundaryCondition::NoSlip, inflow()];
    let err = solve_stokes(
        &mesh,
        &problem(1.0, &conditions, ViscousForm::Gradient),
        &SolverParams::default(),
    )
    .unwrap_err();
    assert!(
        matches!(&err, SolveError::SlipPartNotStraight { part, .. } if part == "bottom"),
        "{err:?}"
    );
    assert!(err.to_string().contains("bottom"));
}

#[test]
fn bad_problem_data_give_typed_errors() {
    let mesh = channel_mesh();
    let params = SolverParams::default();
    let short = [BoundaryCondition::NoSlip, BoundaryCondition::Outflow];
    let err =
        solve_stokes(&mesh, &problem(1.0, &short, ViscousForm::Gradient), &params).unwrap_err();
    assert!(matches!(&err, SolveError::MissingCondition { part } if part == "top"), "{err:?}");
    let ok = [
        BoundaryCondition::NoSlip,
        BoundaryCondition::Outflow,
        BoundaryCondition::NoSlip,
        inflow(),
    ];
    for nu in [0.0, -1.0, f64::NAN] {
        let err =
            solve_stokes(&mesh, &problem(nu, &ok, ViscousForm::Gradient), &params).unwrap_err();
        assert!(matches!(err, SolveError::InvalidViscosity { .. }));
    }
    let bad_inflow = [
        BoundaryCondition::NoSlip,
        BoundaryCondition::Outflow,
        BoundaryCondition::NoSlip,
        velocity("1", "ln(y-2)"),
    ];
    let err = solve_stokes(&mesh, &problem(1.0, &bad_inflow, ViscousForm::Gradient), &params)
        .unwrap_err();
    assert!(
        matches!(&err, SolveError::NonFiniteBoundaryValue { part, .. } if part == "left"),
        "{err:?}"
    );
    let force = [expr("ln(x - 10)"), expr("0")];
    let p = StokesProblem { body_force: Some(&force), ..problem(1.0, &ok, ViscousForm::Gradient) };
    assert!(matches!(solve_stokes(&mesh, &p, &params), Err(SolveError::NonFiniteBodyForce)));
}

#[test]
fn solve_info_reports_sizes_and_refinement() {
    let (mesh, _, info) = solve_open_channel(&SolverParams::default());
    // Free velocity unknowns: all nodes minus the Dirichlet nodes of walls and inlet, ×2.
    let mut fixed = vec![false; mesh.nodes.len()];
    for e in mesh.boundary_edges.iter().filter(|e| e.part != 1) {
        e.nodes.iter().for_each(|&k| fixed[k] = true);
    }
    let free = fixed.iter().filter(|f| !**f).count();
    assert_eq!(info.n_velocity_dofs, 2 * free);
    assert_eq!(info.n_pressure_dofs, mesh.n_vertices);
    assert!(info.nnz > info.n_velocity_dofs + info.n_pressure_dofs);
    assert!(info.refinement_steps <= SolverParams::default().max_refinement_steps);
}

#[test]
fn refactorization_reuses_the_analysis_for_scaled_values() {
    // Scaling the whole matrix by 2 halves the solution (linearity); both factorisation kinds
    // refactor into existing storage on one symbolic analysis. Tolerance: residual target
    // 1e-10 times a conditioning margin of 100.
    let mesh = channel_mesh();
    let conditions = [
        BoundaryCondition::NoSlip,
        BoundaryCondition::Outflow,
        BoundaryCondition::NoSlip,
        inflow(),
    ];
    let constraints = cornerflow::solver::resolve_boundary(&mesh, &conditions, 0.0).unwrap();
    let (dofs, _) = stokes_dof_map(&mesh, &constraints, 1e-8).unwrap();
    let pattern =
        SystemPattern::new(&mesh, dofs, velocity_coupling(ViscousForm::Gradient)).unwrap();
    let system = assemble_stokes(
        &pattern,
        &mesh,
        &problem(0.2, &conditions, ViscousForm::Gradient),
        Parallelism::Serial,
    )
    .unwrap();
    let doubled: Vec<f64> = system.values.iter().map(|v| 2.0 * v).collect();
    for kind in [SolverKind::Ldlt, SolverKind::Lu] {
        let linear = SolverParams { kind, ..Default::default() }.linear();
        let symbolic = SymbolicSystem::analyse(&pattern, kind).unwrap();
        let mut factor = symbolic.factorize(&pattern, &system.values, &linear).unwrap();
        let (x1, _) =
            symbolic.solve(&pattern, &system.values, &factor, &system.rhs, &linear).unwrap();
        symbolic.refactorize(&pattern, &doubled, &linear, &mut factor).unwrap();
        let (x2, info) = symbolic.solve(&pattern, &doubled, &factor, &system.rhs, &linear).unwrap();
        let scale = x1.iter().fold(0.0_f64, |m, v| m.max(v.abs()));
        let diff = x1.iter().zip(&x2).fold(0.0_f64, |m, (a, b)| m.max((a - 2.0 * b).abs()));
        assert!(diff <= 1e-8 * scale, "{kind:?}: {diff:e}");
        assert!(info.relative_residual <= 1e-10);
    }
}

#[test]
fn reduced_velocity_coupling_fits_the_gradient_form_only() {
    // The gradient form has no u–v coupling, so the SameComponent pattern holds it exactly
    // (same solution as the full pattern, fewer nonzeros); the symmetric form does not fit
    // and is refused instead of silently dropping entries.
    use cornerflow::fem::assembly::VelocityCoupling;
    let mesh = channel_mesh();
    let conditions = [
        BoundaryCondition::NoSlip,
        BoundaryCondition::Outflow,
        BoundaryCondition::NoSlip,
        inflow(),
    ];
    let constraints = cornerflow::solver::resolve_boundary(&mesh, &conditions, 0.0).unwrap();
    let solve = |coupling, form| {
        let (dofs, _) = stokes_dof_map(&mesh, &constraints, 1e-8).unwrap();
        let pattern = SystemPattern::new(&mesh, dofs, coupling).unwrap();
        let system = assemble_stokes(
            &pattern,
            &mesh,
            &problem(0.2, &conditions, form),
            Parallelism::Serial,
        )?;
        let linear = SolverParams::default().linear();
        let symbolic = SymbolicSystem::analyse(&pattern, linear.kind)?;
        let factor = symbolic.factorize(&pattern, &system.values, &linear)?;
        let (x, _) = symbolic.solve(&pattern, &system.values, &factor, &system.rhs, &linear)?;
        Ok::<_, SolveError>((x, pattern.nnz()))
    };
    let (full, nnz_full) = solve(VelocityCoupling::Full, ViscousForm::Gradient).unwrap();
    let (reduced, nnz_reduced) =
        solve(VelocityCoupling::SameComponent, ViscousForm::Gradient).unwrap();
    assert!(nnz_reduced < nnz_full, "{nnz_reduced} vs {nnz_full}");
    let scale = full.iter().fold(0.0_f64, |m, v| m.max(v.abs()));
    // Both solve the same system to the residual target 1e-10 (margin 100 for conditioning).
    assert!(full.iter().zip(&reduced).all(|(a, b)| (a - b).abs() <= 1e-8 * scale));
    let err = solve(VelocityCoupling::SameComponent, ViscousForm::Symmetric).unwrap_err();
    assert!(matches!(err, SolveError::PatternMismatch { dropped } if dropped > 0), "{err:?}");
}
