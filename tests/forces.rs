//! Post-processing checks against closed-form flows: forces in both forms, coefficients, wall
//! distributions, derived fields, stream function and point evaluation.
//!
//! The fields are nodal interpolants of exact solutions that lie in the Taylor–Hood space
//! (quadratic velocity, linear pressure), so every quantity has a closed-form value and the
//! post-processors must reproduce it to rounding error.
//!
//! Main references: plane Poiseuille flow (wall shear `4μU/H`, `dp/dx = −8μU/H²`),
//! as restated with the Schäfer & Turek (1996) DFG benchmark channel (benchmarks.md §1.1 and
//! §6.2); force sign convention and coefficients from Schäfer & Turek (1996).

use cornerflow::fem::{FlowField, ViscousForm};
use cornerflow::geometry::Point;
use cornerflow::mesh::Mesh;
use cornerflow::mesh::structured::rectangle;
use cornerflow::post::{
    EndNodeRule, FluidProperties, PointLocator, PostError, ReferenceScales, VolumeForceTerms,
    WallReference, coefficients, divergence_error, locate, part_id, stream_function, surface_force,
    surface_force_on_parts, volume_force, volume_force_on_parts, vorticity, wall_distribution,
};

// DFG 2D-1 empty channel (Schäfer & Turek 1996): H = 0.41, U = 0.3, ν = 1e-3, ρ = 1.
const H: f64 = 0.41;
const LEN: f64 = 2.2;
const U: f64 = 0.3;
const NU: f64 = 1e-3;
const P0: f64 = 0.7;
const BOTH_FORMS: [ViscousForm; 2] = [ViscousForm::Gradient, ViscousForm::Symmetric];

/// Seeded splitmix64 generator: deterministic pseudo-random numbers in [0, 1).
struct Rng(u64);

impl Rng {
    fn next(&mut self) -> f64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        ((z ^ (z >> 31)) >> 11) as f64 / (1u64 << 53) as f64
    }
}

/// Deterministic jitter in [−0.25, 0.25] cell sizes (keeps every triangle valid).
fn jitter(i: usize, j: usize) -> [f64; 2] {
    let mut r = Rng((i as u64) << 32 | j as u64);
    [0.5 * r.next() - 0.25, 0.5 * r.next() - 0.25]
}

fn channel(nx: usize, ny: usize) -> Mesh {
    let mesh = rectangle([0.0, 0.0], [LEN, H], nx, ny, jitter).unwrap();
    mesh.check_invariants().unwrap();
    mesh
}

fn interpolate(mesh: &Mesh, u: impl Fn(Point) -> [f64; 2], p: impl Fn(Point) -> f64) -> FlowField {
    FlowField {
        velocity: mesh.nodes.iter().map(|&x| u(x)).collect(),
        pressure: mesh.nodes[..mesh.n_vertices].iter().map(|&x| p(x)).collect(),
    }
}

/// Plane Poiseuille flow u = 4U y(H − y)/H², v = 0, p = p0 − (8νU/H²) x (benchmarks.md §6.2).
fn poiseuille(mesh: &Mesh) -> FlowField {
    interpolate(
        mesh,
        |x| [4.0 * U * x[1] * (H - x[1]) / (H * H), 0.0],
        |x| P0 - 8.0 * NU * U / (H * H) * x[0],
    )
}

fn fluid(form: ViscousForm) -> FluidProperties {
    FluidProperties { density: 1.0, viscosity: NU, form }
}

/// Exact force of Poiseuille flow on the bottom (sign = −1) or top (sign = +1) wall:
/// x: the wall shear ρ·4νU/H times the length, downstream on both walls;
/// y: ρ ∫ p n_Ω dx = sign · ρ (p0 L − (8νU/H²) L²/2).
fn exact_wall_force(sign: f64) -> [f64; 2] {
    let mean_p = P0 - 8.0 * NU * U / (H * H) * LEN / 2.0;
    [4.0 * NU * U / H * LEN, sign * mean_p * LEN]
}

fn assert_close(got: [f64; 2], want: [f64; 2], tol: f64, what: &str) {
    assert_within(got, want, what, [tol, tol]);
}

fn assert_within(got: [f64; 2], want: [f64; 2], what: &str, tol: [f64; 2]) {
    for k in 0..2 {
        let tol = tol[k];
        assert!(
            (got[k] - want[k]).abs() <= tol,
            "{what}[{k}]: got {:e}, want {:e}, diff {:e} > {tol:e}",
            got[k],
            want[k],
            got[k] - want[k]
        );
    }
}

/// Per-component relative check, `|got_k − want_k| ≤ rel · |want_k|`.
fn assert_rel(got: [f64; 2], want: [f64; 2], rel: f64, what: &str) {
    assert_within(got, want, what, [rel * want[0].abs(), rel * want[1].abs()]);
}

// Tolerance for forces: the force is a sum of about 10³ products of values of order one
// (Gauss/Dunavant weights and nodal data) whose rule constants are given to about 1e-15;
// 1e-12 of the force scale leaves a factor of ten for cancellation.
// (Derived bound, common practice, no source.)
const FORCE_REL_TOL: f64 = 1e-12;

#[test]
fn poiseuille_wall_forces_are_exact_in_both_forms_and_stress_forms() {
    // Wall shear 4μU/H (= 0.00292683 for U = 0.3), Schäfer & Turek 1996 channel,
    // benchmarks.md §1.1. The symmetric form adds ν∇uᵀn_Ω, which is (−∂v/∂x, −∂v/∂y)·(±1)
    // on a horizontal wall and vanishes because v ≡ 0: both stress forms give one force.
    let mesh = channel(16, 6);
    let field = poiseuille(&mesh);
    let bottom = part_id(&mesh, "bottom").unwrap();
    let top = part_id(&mesh, "top").unwrap();
    for form in BOTH_FORMS {
        for (part, sign) in [(bottom, -1.0), (top, 1.0)] {
            let want = exact_wall_force(sign);
            let surf = surface_force(&mesh, &field, &fluid(form), part).unwrap();
            let vol = volume_force(&mesh, &field, &fluid(form), part, &VolumeForceTerms::default())
                .unwrap();
            // Measured relative errors: ≤ 6e-16 (surface form), ≤ 4e-15 (volume form).
            assert_rel(surf.total, want, FORCE_REL_TOL, "surface total");
            assert_rel(vol.total, want, FORCE_REL_TOL, "volume total");
            // Surface split: pressure acts only normal to the wall, shear only along it.
            let tol = want.map(|w| FORCE_REL_TOL * w.abs());
            assert_within(surf.pressure, [0.0, want[1]], "pressure part", [tol[0], tol[1]]);
            assert_within(surf.viscous, [want[0], 0.0], "viscous part", [tol[0], tol[0]]);
        }
    }
}

#[test]
fn wall_shear_value_matches_the_dfg_channel_figure() {
    // benchmarks.md §1.1: μ∂u/∂y|wall = 4μU/H = 0.00292683 for U = 0.3 (6 digits given, so
    // compare to half a unit in the last digit, 5e-9).
    let mesh = channel(8, 4);
    let field = poiseuille(&mesh);
    let f = surface_force(&mesh, &field, &fluid(ViscousForm::Gradient), 0).unwrap();
    assert!((f.total[0] / LEN - 0.00292683).abs() < 5e-9, "{}", f.total[0] / LEN);
}

#[test]
fn raw_end_node_rule_differs_by_the_predicted_corner_spill_over() {
    // With the raw rule, w_x = e_x ψ_S also lives on the first inflow and outflow edges next
    // to the bottom corners, where the x-traction (σ/ρ)n_Ω is p(0) (inflow, n = −e_x) and
    // −p(L) (outflow, n = +e_x). The trace of a P2 vertex function integrates to h/6 along an
    // edge, so F_raw,x = F_x − ρ (p(0) − p(L)) h_y/6 = F_x − ρ (8νU/H²) L (H/ny)/6.
    // (Derived here from the Poiseuille solution of benchmarks.md §6.2.)
    let (nx, ny) = (12, 5);
    let mesh = channel(nx, ny);
    let field = poiseuille(&mesh);
    let raw = VolumeForceTerms { end_nodes: EndNodeRule::Raw, ..Default::default() };
    let f = volume_force(&mesh, &field, &fluid(ViscousForm::Gradient), 0, &raw).unwrap();
    let spill = 8.0 * NU * U / (H * H) * LEN * (H / ny as f64) / 6.0;
    let want = exact_wall_force(-1.0)[0] - spill;
    assert!(spill > 0.01 * want, "the case must make the rule matter");
    assert!((f.total[0] - want).abs() < FORCE_REL_TOL * want, "{} vs {want}", f.total[0]);
}

/// Rotation by angle θ.
fn rotate(theta: f64, x: [f64; 2]) -> [f64; 2] {
    let (s, c) = theta.sin_cos();
    [c * x[0] - s * x[1], s * x[0] + c * x[1]]
}

#[test]
fn rotated_channel_force_is_the_rotated_force() {
    // Rotating the channel by 30° rotates the exact wall force by 30° (frame indifference);
    // catches mixed-up axes or normal components.
    let theta = 30f64.to_radians();
    let mut mesh = channel(12, 5);
    let base = poiseuille(&mesh);
    for x in &mut mesh.nodes {
        *x = rotate(theta, *x);
    }
    let field = FlowField {
        velocity: base.velocity.iter().map(|&u| rotate(theta, u)).collect(),
        pressure: base.pressure.clone(),
    };
    for form in BOTH_FORMS {
        for (part, sign) in [(0, -1.0), (2, 1.0)] {
            let want = rotate(theta, exact_wall_force(sign));
            let tol = FORCE_REL_TOL * P0 * LEN;
            let surf = surface_force(&mesh, &field, &fluid(form), part).unwrap();
            let vol = volume_force(&mesh, &field, &fluid(form), part, &Default::default()).unwrap();
            assert_close(surf.total, want, tol, "rotated surface");
            assert_close(vol.total, want, tol, "rotated volume");
        }
    }
}

/// An n×n grid of [0,1]² with the cells [3n/8, 5n/8)² removed: a square body (part 1,
/// "body") inside an outer boundary (part 0, "outer"). Vertices off both boundaries are
/// jittered.
fn square_body_mesh(n: usize) -> Mesh {
    let (lo, hi) = (3 * n / 8, 5 * n / 8);
    let in_hole = |i: usize, j: usize| (lo..hi).contains(&i) && (lo..hi).contains(&j);
    let on_body = |i: usize, j: usize| (lo..=hi).contains(&i) && (lo..=hi).contains(&j);
    let mut index = vec![usize::MAX; (n + 1) * (n + 1)];
    let mut vertices = Vec::new();
    for j in 0..=n {
        for i in 0..=n {
            if on_body(i, j) && !(i == lo || i == hi || j == lo || j == hi) {
                continue; // strictly inside the body: unused
            }
            let fixed = i == 0 || j == 0 || i == n || j == n || on_body(i, j);
            let d = if fixed { [0.0, 0.0] } else { jitter(i, j) };
            index[j * (n + 1) + i] = vertices.len();
            vertices.push([(i as f64 + d[0]) / n as f64, (j as f64 + d[1]) / n as f64]);
        }
    }
    let id = |i: usize, j: usize| index[j * (n + 1) + i];
    let mut triangles = Vec::new();
    for j in 0..n {
        for i in (0..n).filter(|&i| !in_hole(i, j)) {
            let (a, b, c, d) = (id(i, j), id(i + 1, j), id(i + 1, j + 1), id(i, j + 1));
            triangles.extend(if (i + j) % 2 == 0 {
                [[a, b, c], [a, c, d]]
            } else {
                [[a, b, d], [b, c, d]]
            });
        }
    }
    let mut segments = Vec::new();
    for k in 0..n {
        segments.extend([([id(k, 0), id(k + 1, 0)], 0), ([id(k, n), id(k + 1, n)], 0)]);
        segments.extend([([id(0, k), id(0, k + 1)], 0), ([id(n, k), id(n, k + 1)], 0)]);
    }
    for k in lo..hi {
        segments.extend([([id(k, lo), id(k + 1, lo)], 1), ([id(k, hi), id(k + 1, hi)], 1)]);
        segments.extend([([id(lo, k), id(lo, k + 1)], 1), ([id(hi, k), id(hi, k + 1)], 1)]);
    }
    let names = vec!["outer".to_string(), "body".to_string()];
    let mesh = Mesh::from_linear(vertices, &triangles, &segments, names, vec![None; 2]).unwrap();
    mesh.check_invariants().unwrap();
    mesh
}

// Coefficients of the general quadratic test velocity and linear pressure.
const A: [f64; 6] = [0.3, -0.8, 1.1, 0.9, -1.3, 0.4];
const B: [f64; 6] = [-0.2, 0.5, 0.7, -0.6, 1.2, 0.8];
const C: [f64; 3] = [0.25, 1.5, -0.75];

fn quad(c: &[f64; 6], x: Point) -> f64 {
    c[0] + c[1] * x[0] + c[2] * x[1] + c[3] * x[0] * x[0] + c[4] * x[0] * x[1] + c[5] * x[1] * x[1]
}

/// Gradient of `quad(c, ·)`.
fn quad_grad(c: &[f64; 6], x: Point) -> [f64; 2] {
    [c[1] + 2.0 * c[3] * x[0] + c[4] * x[1], c[2] + c[4] * x[0] + 2.0 * c[5] * x[1]]
}

/// Time derivative used in the unsteady term (any quadratic field will do).
fn dudt(x: Point) -> [f64; 2] {
    [x[0] * x[1] - 0.5, 1.0 - x[0] * x[0]]
}

/// Body force that makes (u, p) an exact solution of
/// ∂_t u + (u·∇)u − div(σ/ρ) = f: f = ∂_t u + (u·∇)u − νΔu − ν∇(div u)[symmetric] + ∇p.
fn body_force(form: ViscousForm, x: Point) -> [f64; 2] {
    let u = [quad(&A, x), quad(&B, x)];
    let (ga, gb) = (quad_grad(&A, x), quad_grad(&B, x));
    let lap = [2.0 * (A[3] + A[5]), 2.0 * (B[3] + B[5])];
    let grad_div = match form {
        ViscousForm::Symmetric => [2.0 * A[3] + B[4], A[4] + 2.0 * B[5]],
        _ => [0.0, 0.0],
    };
    let dt = dudt(x);
    let conv = [u[0] * ga[0] + u[1] * ga[1], u[0] * gb[0] + u[1] * gb[1]];
    [
        dt[0] + conv[0] - NU * (lap[0] + grad_div[0]) + C[1],
        dt[1] + conv[1] - NU * (lap[1] + grad_div[1]) + C[2],
    ]
}

#[test]
fn both_forms_agree_on_a_closed_square_body_with_all_terms() {
    // For a smooth (u, p) in the discrete space with f chosen so that the strong residual
    // vanishes, integration by parts is exact: R(w) = ∫_∂Ω (σ/ρ)n_Ω·w, and w = e_k on the
    // closed body and 0 on the outer boundary, so the volume form must equal the surface form
    // (John & Matthies 2001 derive the volume form from exactly this identity). The field is
    // not divergence-free, so the symmetric form is tested with a different f.
    let mesh = square_body_mesh(16);
    let field =
        interpolate(&mesh, |x| [quad(&A, x), quad(&B, x)], |x| C[0] + C[1] * x[0] + C[2] * x[1]);
    let dt: Vec<[f64; 2]> = mesh.nodes.iter().map(|&x| dudt(x)).collect();
    for form in BOTH_FORMS {
        let props = FluidProperties { density: 1.3, viscosity: NU, form };
        let f = move |x: Point| body_force(form, x);
        let terms = VolumeForceTerms {
            convecting_velocity: Some(&field.velocity),
            time_derivative: Some(&dt),
            body_force: Some(&f),
            ..Default::default()
        };
        let surf = surface_force(&mesh, &field, &props, 1).unwrap();
        let vol = volume_force(&mesh, &field, &props, 1, &terms).unwrap();
        let scale = surf.total[0].abs() + surf.total[1].abs();
        assert!(scale > 0.01, "force must not vanish trivially: {surf:?}");
        assert_close(vol.total, surf.total, FORCE_REL_TOL * scale.max(1.0), "closed body");
        // Leaving out the inertial terms must change the answer (the terms are used).
        let stokes = volume_force(&mesh, &field, &props, 1, &Default::default()).unwrap();
        assert!((stokes.total[0] - surf.total[0]).abs() > 1e-6);
    }
}

/// The square body with each side its own part (2: south, 3: east, 4: north, 5: west), so
/// the four body corners are end nodes shared between parts.
fn split_body_mesh(n: usize) -> Mesh {
    let mut mesh = square_body_mesh(n);
    let centre = [0.5, 0.5];
    for be in mesh.boundary_edges.iter_mut().filter(|e| e.part == 1) {
        let [a, b] = [mesh.nodes[be.nodes[0]], mesh.nodes[be.nodes[1]]];
        let mid = [0.5 * (a[0] + b[0]) - centre[0], 0.5 * (a[1] + b[1]) - centre[1]];
        be.part = if mid[1].abs() > mid[0].abs() {
            if mid[1] < 0.0 { 2 } else { 4 }
        } else if mid[0] > 0.0 {
            3
        } else {
            5
        };
    }
    mesh.part_names.extend(["south", "east", "north", "west"].map(String::from));
    mesh.part_circles = vec![None; mesh.part_names.len()];
    mesh.check_invariants().unwrap();
    mesh
}

#[test]
fn per_side_forces_agree_when_body_corners_are_shared_end_nodes() {
    // Same exact field as above. For each side S, R(w_S) = ∫_∂Ω (σ/ρ)n_Ω·w_S, where w_S
    // spills over onto the first edge of each neighbouring side; subtracting that spill-over
    // (the default end-node rule) leaves −ρ∫_S (σ/ρ)n_Ω exactly, i.e. the side's surface
    // force. The raw rule must differ, and the union of the sides must equal the whole body.
    let mesh = split_body_mesh(16);
    let field =
        interpolate(&mesh, |x| [quad(&A, x), quad(&B, x)], |x| C[0] + C[1] * x[0] + C[2] * x[1]);
    let props = FluidProperties { density: 1.0, viscosity: 0.1, form: ViscousForm::Gradient };
    // Steady Stokes with ν = 0.1: f = −νΔu + ∇p, a constant.
    let f = |_: Point| [-0.1 * 2.0 * (A[3] + A[5]) + C[1], -0.1 * 2.0 * (B[3] + B[5]) + C[2]];
    let terms = VolumeForceTerms { body_force: Some(&f), ..Default::default() };
    let raw = VolumeForceTerms { end_nodes: EndNodeRule::Raw, ..terms };
    let mut sum = [0.0; 2];
    for side in 2..6 {
        let surf = surface_force(&mesh, &field, &props, side).unwrap();
        let vol = volume_force(&mesh, &field, &props, side, &terms).unwrap();
        let vol_raw = volume_force(&mesh, &field, &props, side, &raw).unwrap();
        let scale = surf.total[0].abs() + surf.total[1].abs();
        assert_close(vol.total, surf.total, FORCE_REL_TOL * scale.max(1.0), "side");
        let gap =
            (vol_raw.total[0] - surf.total[0]).abs() + (vol_raw.total[1] - surf.total[1]).abs();
        assert!(gap > 1e-4 * scale, "raw rule should differ on side {side}: gap {gap:e}");
        sum = [sum[0] + surf.total[0], sum[1] + surf.total[1]];
    }
    let union = volume_force_on_parts(&mesh, &field, &props, &[2, 3, 4, 5], &raw).unwrap();
    let whole = surface_force_on_parts(&mesh, &field, &props, &[2, 3, 4, 5]).unwrap();
    let scale = whole.total[0].abs() + whole.total[1].abs();
    assert_close(union.total, whole.total, FORCE_REL_TOL * scale.max(1.0), "union");
    assert_close(sum, whole.total, FORCE_REL_TOL * scale.max(1.0), "sum of sides");
}

#[test]
fn uniform_pressure_gives_no_net_force_on_a_closed_body() {
    // Archimedes without gravity: ∮ p n dS = 0 for constant p (divergence theorem).
    let mesh = square_body_mesh(8);
    let field = interpolate(&mesh, |_| [0.0, 0.0], |_| 2.5);
    let props = fluid(ViscousForm::Gradient);
    let surf = surface_force(&mesh, &field, &props, 1).unwrap();
    let vol = volume_force(&mesh, &field, &props, 1, &Default::default()).unwrap();
    // Sums of ±2.5·h terms: a few rounding errors of 2.5 (common practice, no source).
    assert_close(surf.total, [0.0, 0.0], 1e-14, "surface");
    assert_close(vol.total, [0.0, 0.0], 1e-13, "volume");
}

#[test]
fn poiseuille_wall_coefficient_is_twelve_over_reynolds() {
    // Laminar plane channel: skin-friction coefficient c_f = τ_w/(½ρU_m²) = 12/Re with
    // Re = U_m H/ν and U_m = 2U/3 the mean velocity (handbook fact, e.g. F.M. White,
    // Viscous Fluid Flow, McGraw–Hill, §3-3; from memory). With the wall length as the
    // reference length, the drag coefficient of one wall is exactly c_f.
    let mesh = channel(10, 4);
    let field = poiseuille(&mesh);
    let force =
        volume_force(&mesh, &field, &fluid(ViscousForm::Gradient), 0, &Default::default()).unwrap();
    let u_mean = 2.0 * U / 3.0;
    let scales = ReferenceScales { density: 1.0, velocity: u_mean, length: LEN };
    let c = coefficients(&force, &scales).unwrap();
    let reynolds = u_mean * H / NU;
    assert!((c.drag - 12.0 / reynolds).abs() < 1e-11 * c.drag, "{} vs {}", c.drag, 12.0 / reynolds);
    // Scaling: c ∝ 1/(ρ U² L).
    let c2 = coefficients(
        &force,
        &ReferenceScales { density: 2.0, velocity: 2.0 * u_mean, length: LEN },
    )
    .unwrap();
    assert!((c2.drag * 8.0 - c.drag).abs() < 1e-14 * c.drag);
    assert!((c2.lift * 8.0 - c.lift).abs() < 1e-14 * c.lift.abs());
}

#[test]
fn invalid_reference_scales_are_typed_errors() {
    let force = cornerflow::post::Force::default();
    for bad in [0.0, -1.0, f64::NAN, f64::INFINITY] {
        let r = coefficients(&force, &ReferenceScales { density: 1.0, velocity: bad, length: 0.1 });
        assert!(matches!(r, Err(PostError::InvalidParameter { name: "reference velocity", .. })));
    }
}

#[test]
fn bad_inputs_are_typed_errors_not_panics() {
    let mesh = channel(4, 2);
    let field = poiseuille(&mesh);
    let props = fluid(ViscousForm::Gradient);
    assert!(matches!(
        surface_force(&mesh, &field, &props, 7),
        Err(PostError::UnknownPart { part: 7, n_parts: 4 })
    ));
    assert!(matches!(part_id(&mesh, "wing"), Err(PostError::UnknownPartName { .. })));
    let bad_rho = FluidProperties { density: -1.0, ..props };
    assert!(matches!(
        volume_force(&mesh, &field, &bad_rho, 0, &Default::default()),
        Err(PostError::InvalidParameter { name: "density", .. })
    ));
    let short = vec![[0.0; 2]; 3];
    let terms = VolumeForceTerms { time_derivative: Some(&short), ..Default::default() };
    assert!(matches!(
        volume_force(&mesh, &field, &props, 0, &terms),
        Err(PostError::FieldLength { what: "time derivative", .. })
    ));
    let mut nan = field.clone();
    nan.pressure[3] = f64::NAN;
    assert!(matches!(
        stream_function(&mesh, &nan),
        Err(PostError::NonFinite { what: "pressure", index: 3 })
    ));
}

#[test]
fn wall_distribution_of_poiseuille_flow_is_exact() {
    // Cp = (p − p_ref)/(½U²) with the exact linear pressure, τ = ±ρ·4νU/H (benchmarks.md
    // §6.2). On the bottom wall the chain runs in +x (fluid on the left) and τ > 0; on the
    // top wall it runs in −x, against the flow, so τ < 0.
    let (nx, ny) = (10, 4);
    let mesh = channel(nx, ny);
    let field = poiseuille(&mesh);
    let props = fluid(ViscousForm::Symmetric);
    let reference = WallReference { velocity: 2.0 * U / 3.0, pressure: 0.1 };
    let q = 0.5 * reference.velocity * reference.velocity;
    let tau = 4.0 * NU * U / H;
    for (part, sign, x_start) in [(0, 1.0, 0.0), (2, -1.0, LEN)] {
        let rows = wall_distribution(&mesh, &field, &props, part, &reference).unwrap();
        assert_eq!(rows.len(), 2 * nx + 1);
        for (i, r) in rows.iter().enumerate() {
            let s = i as f64 * LEN / (2 * nx) as f64;
            // Arc length and position are sums/means of O(1) coordinates: 1e-14.
            assert!((r.s - s).abs() < 1e-14 && (r.x - (x_start + sign * s)).abs() < 1e-14);
            let cp = (P0 - 8.0 * NU * U / (H * H) * r.x - reference.pressure) / q;
            // Cp is O(30) here: 30 · (a few eps) → 1e-13.
            assert!((r.pressure_coefficient - cp).abs() < 1e-13, "row {i}: {r:?}");
            // τ is a difference of nodal values divided by h: 1e-12 relative.
            assert!((r.wall_shear - sign * tau).abs() < 1e-12 * tau.max(1.0), "row {i}: {r:?}");
            assert!((r.traction[0] - tau).abs() < 1e-12, "row {i}: {r:?}");
        }
    }
}

#[test]
fn wall_distribution_closes_a_body_chain() {
    let mesh = square_body_mesh(16);
    let field = interpolate(&mesh, |_| [0.0, 0.0], |x| x[0]);
    let rows = wall_distribution(
        &mesh,
        &field,
        &fluid(ViscousForm::Gradient),
        1,
        &WallReference::new(1.0),
    )
    .unwrap();
    let n_edges = mesh.boundary_edges.iter().filter(|e| e.part == 1).count();
    assert_eq!(rows.len(), 2 * n_edges + 1);
    assert!(rows.iter().all(|r| r.chain == 0));
    let (first, last) = (&rows[0], &rows[rows.len() - 1]);
    assert_eq!((first.x, first.y), (last.x, last.y));
    // A closed chain starts at its first edge in boundary-edge order.
    let start = mesh.boundary_edges.iter().find(|e| e.part == 1).unwrap().nodes[0];
    assert_eq!([first.x, first.y], mesh.nodes[start]);
    // Perimeter of the 0.25 × 0.25 square body.
    assert!((last.s - 1.0).abs() < 1e-14);
    assert!(rows.windows(2).all(|w| w[1].s > w[0].s));
}

#[test]
fn vorticity_of_poiseuille_is_exact_at_every_node() {
    // ω = −∂u/∂y = −4U(H − 2y)/H²: linear, and the velocity is one global quadratic, so the
    // cell-wise values agree at shared nodes and the average is exact. Values are O(3);
    // 1e-12 allows for gradients formed as differences over h ≈ 0.1.
    let mesh = channel(12, 5);
    let omega = vorticity(&mesh, &poiseuille(&mesh)).unwrap();
    for (n, x) in mesh.nodes.iter().enumerate() {
        let want = -4.0 * U * (H - 2.0 * x[1]) / (H * H);
        assert!((omega[n] - want).abs() < 1e-12, "node {n}: {} vs {want}", omega[n]);
    }
}

#[test]
fn divergence_error_is_zero_for_poiseuille_and_exact_for_a_source_flow() {
    let mesh = rectangle([0.0, 0.0], [1.0, 1.0], 8, 8, jitter).unwrap();
    let div = divergence_error(&mesh, &poiseuille(&mesh)).unwrap();
    // div u = 0 exactly; rounding of ∂u/∂x ≈ (values ≈ 0.3)·eps/h → 1e-13.
    assert!(div.iter().all(|&d| d < 1e-13), "{:e}", div.iter().cloned().fold(0.0, f64::max));
    // u = (x², 0): div u = 2x, Σ_T ‖2x‖²_{L²(T)} = ∫_0^1 4x² dx = 4/3.
    let source = interpolate(&mesh, |x| [x[0] * x[0], 0.0], |_| 0.0);
    let total: f64 = divergence_error(&mesh, &source).unwrap().iter().map(|d| d * d).sum();
    assert!((total - 4.0 / 3.0).abs() < 1e-13, "{total}");
}

#[test]
fn stream_function_of_a_quadratic_stream_function_is_exact() {
    // Any quadratic ψ gives a linear, divergence-free u = (∂ψ/∂y, −∂ψ/∂x) whose stream
    // function lies in P2, so the least-squares ψ_h is exact up to the pinned constant.
    // Rigid rotation u = (−y, x) has ψ = −(x² + y²)/2; the general quadratic uses `A`.
    let mesh = rectangle([0.0, 0.0], [LEN, H], 12, 5, jitter).unwrap();
    let pin = mesh.boundary_edges[0].nodes[0];
    let rotation = |x: Point| (-(x[0] * x[0] + x[1] * x[1]) / 2.0, [-x[0], -x[1]]);
    let general = |x: Point| (quad(&A, x), quad_grad(&A, x));
    for exact in [&rotation as &dyn Fn(Point) -> (f64, [f64; 2]), &general] {
        let field = interpolate(&mesh, |x| [exact(x).1[1], -exact(x).1[0]], |_| 0.0);
        let psi = stream_function(&mesh, &field).unwrap();
        for (n, &x) in mesh.nodes.iter().enumerate() {
            let want = exact(x).0 - exact(mesh.nodes[pin]).0;
            // Values O(3); a sparse Cholesky solve of ≈ 300 unknowns with condition number
            // ≈ 1e3 (P2 Laplacian, h ≈ 0.08): 1e3 · 1e-15 · 10 → 1e-11 (common practice).
            assert!((psi[n] - want).abs() < 1e-11, "node {n}: {} vs {want}", psi[n]);
        }
    }
}

#[test]
fn stream_function_of_poiseuille_converges_at_third_order() {
    // Exact ψ = 4U(y²H/2 − y³/3)/H² (benchmarks.md §6.2 integrated in y) is cubic, so it is
    // not in P2 and the least-squares ψ_h carries an O(h³) nodal error (P2 best approximation
    // of a smooth function, e.g. Brenner & Scott, *The Mathematical Theory of Finite Element
    // Methods*, Springer 2008, Thm 4.4.20 — from memory). Halving h must cut the max error by
    // ≥ 2^2.5 (a margin of 2^0.5 below the ideal 8).
    let exact = |y: f64| 4.0 * U * (y * y * H / 2.0 - y * y * y / 3.0) / (H * H);
    let error = |nx: usize, ny: usize| {
        let mesh = rectangle([0.0, 0.0], [LEN, H], nx, ny, |_, _| [0.0, 0.0]).unwrap();
        let psi = stream_function(&mesh, &poiseuille(&mesh)).unwrap();
        let pin = mesh.boundary_edges[0].nodes[0];
        mesh.nodes
            .iter()
            .enumerate()
            .map(|(n, x)| (psi[n] - (exact(x[1]) - exact(mesh.nodes[pin][1]))).abs())
            .fold(0.0, f64::max)
    };
    let (coarse, fine) = (error(8, 4), error(16, 8));
    // Measured 4.1e-4, 5.6e-5, 7.4e-6 on 8×4, 16×8, 32×16 (ratios 7.3, 7.7). The coarse error
    // must also be a small fraction (1 %) of the channel flux ψ(H) − ψ(0) = 2UH/3.
    assert!(coarse > 0.0 && coarse < 0.01 * 2.0 * U * H / 3.0, "coarse error {coarse:e}");
    assert!(coarse / fine > 2f64.powf(2.5), "ratio {} ({coarse:e} -> {fine:e})", coarse / fine);
}

#[test]
fn locator_finds_random_points_and_evaluates_the_exact_field() {
    // Poiseuille flow is in the discrete space, so point values are exact (benchmarks.md
    // §6.2); seeded random probes, compared with the linear-scan `locate`.
    let mesh = channel(20, 8);
    let field = poiseuille(&mesh);
    let locator = PointLocator::new(&mesh).unwrap();
    let mut rng = Rng(20261202);
    let points: Vec<Point> = (0..500).map(|_| [LEN * rng.next(), H * rng.next()]).collect();
    let values = locator.probe(&field, &points).unwrap();
    for (x, v) in points.iter().zip(&values) {
        let v = v.as_ref().expect("every point of the rectangle is inside the mesh");
        let (cell, l) = locate(&mesh, *x).expect("linear scan agrees");
        let l_sum: f64 = l.iter().sum();
        assert!((l_sum - 1.0).abs() < 1e-14 && l.iter().all(|&li| li >= -1e-12), "{cell} {l:?}");
        // Values O(1): products and sums of a few terms, 1e-14.
        let u = 4.0 * U * x[1] * (H - x[1]) / (H * H);
        assert!((v.velocity[0] - u).abs() < 1e-14 && v.velocity[1].abs() < 1e-14);
        let p = P0 - 8.0 * NU * U / (H * H) * x[0];
        assert!((v.pressure - p).abs() < 1e-14, "{} vs {p}", v.pressure);
    }
    // Outside the channel, and non-finite probes, there is no value.
    let outside = [[-0.01, 0.2], [LEN + 1e-6, 0.2], [1.0, H + 1e-3], [f64::NAN, 0.1]];
    for v in locator.probe(&field, &outside).unwrap() {
        assert!(v.is_none());
    }
    assert!(locate(&mesh, [1.0, -1e-3]).is_none());
}

#[test]
fn dfg_style_pressure_difference_is_exact_for_poiseuille() {
    // Δp = p(x_front) − p(x_back) as in the DFG benchmark definition (Schäfer & Turek 1996),
    // here in the empty channel: Δp = (8νU/H²)(0.25 − 0.15) exactly (benchmarks.md §6.2).
    let mesh = channel(22, 6);
    let field = poiseuille(&mesh);
    let locator = PointLocator::new(&mesh).unwrap();
    let dp = locator.pressure_difference(&field, [0.15, 0.2], [0.25, 0.2]).unwrap();
    let want = 8.0 * NU * U / (H * H) * 0.1;
    // Pressures O(1), difference 1.4e-3: a few eps of the pressures, 1e-14.
    assert!((dp - want).abs() < 1e-14, "{dp} vs {want}");
    let outside = locator.pressure_difference(&field, [0.15, 0.2], [0.25, 0.5]);
    assert!(matches!(outside, Err(PostError::PointOutsideMesh { .. })));
}

/// Donea–Huerta manufactured Stokes solution on the unit square, ν = 1 (benchmarks.md §6.3;
/// attributed to J. Donea, A. Huerta, *Finite Element Methods for Flow Problems*, Wiley 2003,
/// from memory): u = x²(1−x)²(2y − 6y² + 4y³), v = −y²(1−y)²(2x − 6x² + 4x³),
/// p = x(1−x) − 1/6, f = −Δu + ∇p; here with `SLOPE·x` added to p (and `SLOPE` to f_x)
/// so that the pressure is not symmetric about x = ½.
fn donea_huerta(mesh: &Mesh) -> FlowField {
    let g = |t: f64| 2.0 * t - 6.0 * t * t + 4.0 * t * t * t;
    let q = |t: f64| t * t * (1.0 - t) * (1.0 - t);
    let p = |x: Point| x[0] * (1.0 - x[0]) - 1.0 / 6.0 + SLOPE * x[0];
    interpolate(mesh, |x| [q(x[0]) * g(x[1]), -q(x[1]) * g(x[0])], p)
}

const SLOPE: f64 = 1.0;

fn donea_huerta_force(x: Point) -> [f64; 2] {
    let (x, y) = (x[0], x[1]);
    let (x2, x3, x4, y2, y3, y4) =
        (x * x, x * x * x, x * x * x * x, y * y, y * y * y, y * y * y * y);
    [
        12.0 * x4 - 24.0 * x4 * y + 48.0 * x3 * y - 24.0 * x3 - 48.0 * x2 * y3 + 72.0 * x2 * y2
            - 48.0 * x2 * y
            + 12.0 * x2
            + 48.0 * x * y3
            - 72.0 * x * y2
            + 24.0 * x * y
            - 2.0 * x
            - 8.0 * y3
            + 12.0 * y2
            - 4.0 * y
            + 1.0
            + SLOPE,
        48.0 * x3 * y2 - 48.0 * x3 * y + 8.0 * x3 - 72.0 * x2 * y2 + 72.0 * x2 * y - 12.0 * x2
            + 24.0 * x * y4
            - 48.0 * x * y3
            + 48.0 * x * y2
            - 24.0 * x * y
            + 4.0 * x
            - 12.0 * y4
            + 24.0 * y3
            - 12.0 * y2,
    ]
}

#[test]
fn forces_of_a_smooth_stokes_solution_converge_and_the_end_correction_matters() {
    // Exact force on the bottom wall y = 0 (n_Ω = −e_y): F_x = ρν ∫ ∂u/∂y dx
    // = ∫ 2x²(1−x)² dx = 1/15, F_y = −∫ p dx = −SLOPE/2 (benchmarks.md §6.3 solution, plus
    // the pressure slope; derived here). The side walls carry the x-tractions p(0) = −1/6 and
    // −p(1) = 1/6 − SLOPE at the bottom corners, which do not cancel, so the raw volume form
    // has an O(h) spill-over error, SLOPE·h/6, while the corrected one does not.
    // Interpolants are not Galerkin solutions, so the volume form's superconvergence
    // (John & Matthies 2001) is not expected here: both forms inherit the O(h²) gradient
    // error of the P2 interpolant (Brenner & Scott 2008, Thm 4.4.20; from memory).
    let exact = [1.0 / 15.0, -SLOPE / 2.0];
    let props = FluidProperties { density: 1.0, viscosity: 1.0, form: ViscousForm::Gradient };
    let f = donea_huerta_force;
    let corrected = VolumeForceTerms { body_force: Some(&f), ..Default::default() };
    let raw = VolumeForceTerms { end_nodes: EndNodeRule::Raw, ..corrected };
    let errors = |n: usize| {
        let mesh = rectangle([0.0, 0.0], [1.0, 1.0], n, n, jitter).unwrap();
        let field = donea_huerta(&mesh);
        let err = |force: [f64; 2]| (force[0] - exact[0]).hypot(force[1] - exact[1]);
        [
            err(surface_force(&mesh, &field, &props, 0).unwrap().total),
            err(volume_force(&mesh, &field, &props, 0, &corrected).unwrap().total),
            err(volume_force(&mesh, &field, &props, 0, &raw).unwrap().total),
        ]
    };
    // Measured errors for n = 8, 16, 32: surface 2.9e-3, 7.9e-4, 2.1e-4; corrected volume
    // 2.6e-3, 6.6e-4, 1.7e-4; raw volume 2.1e-2, 1.0e-2, 5.2e-3.
    let (coarse, fine) = (errors(8), errors(16));
    let rate = |k: usize| (coarse[k] / fine[k]).log2();
    // Second order with a margin of 0.2 below the ideal 2.
    assert!(rate(0) > 1.8 && rate(1) > 1.8, "rates {} {}", rate(0), rate(1));
    // Raw = corrected − spill-over with spill-over ≈ SLOPE·h/6 (up to O(h³) from the side
    // walls' interpolated shear), so by the triangle inequality its error lies within the
    // corrected error of the spill-over; 5 % of it covers the O(h³) part.
    for (n, e) in [(8.0, coarse), (16.0, fine)] {
        let spill = SLOPE / (6.0 * n);
        assert!((e[2] - spill).abs() <= e[1] + 0.05 * spill, "n = {n}: raw error {}", e[2]);
    }
}
