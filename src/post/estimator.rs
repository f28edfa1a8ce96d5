//! Verfürth's residual a-posteriori error estimator for the Taylor–Hood discretisation of
//! `−ν Δu + (u·∇)u + ∇p = f`, `div u = 0` (kinematic pressure; the convection term only for
//! Navier–Stokes).
//!
//! For every triangle `K`, with `h_K` its longest edge and `h_E` the length of edge `E`:
//!
//! ```text
//! η_K² = (h_K² / ν) ‖f + ν Δu_h − (u_h·∇)u_h − ∇p_h‖²_K          (element residual)
//!      +  ν ‖div u_h‖²_K                                           (mass residual)
//!      +  Σ_{E ⊂ ∂K interior} ½ (h_E / ν) ‖[σ_h n]_E‖²_E           (traction jumps)
//!      +  Σ_{E ⊂ ∂K natural}      (h_E / ν) ‖R_E(σ_h n)‖²_E        (boundary traction)
//! ```
//!
//! where `σ_h = ν ∇u_h − p_h I` (gradient form; `ν(∇u_h + ∇u_hᵀ) − p_h I` in the symmetric
//! form, whose element operator is `ν(Δu_h + ∇ div u_h)`), `[·]` the jump across the edge,
//! and `R_E` the whole traction on outflow (natural) edges and its tangential part on slip
//! edges; Dirichlet edges carry no boundary term. `η = (Σ_K η_K²)^{1/2}` bounds the error in
//! the norm `(ν |u − u_h|²_{H¹} + ν⁻¹ ‖p − p_h‖²_{L²})^{1/2}` from above and, locally, from
//! below, up to constants that depend only on the shape regularity of the mesh (and, for
//! Navier–Stokes, on the solution's stability): it is reliable and efficient. Second
//! derivatives of the P2 velocity are constant on each triangle, `∂²φ_i = 4 ∇L_i ∇L_iᵀ` at
//! vertex `i` and `4(∇L_i ∇L_jᵀ + ∇L_j ∇L_iᵀ)` at the midpoint of edge `ij`.
//!
//! Integrals: degree-6 rule on triangles, 3-point Gauss on edges (the traction is linear on an
//! edge, so the edge integrals are exact).
//!
//! **Invariant:** no I/O; the per-triangle values are computed in parallel and independently
//! (each interior edge is integrated from both sides).
//!
//! # References
//! R. Verfürth, *A posteriori error estimators for the Stokes equations*, Numer. Math. 55
//! (1989) 309–325; R. Verfürth, *A Review of A Posteriori Error Estimation and Adaptive
//! Mesh-Refinement Techniques*, Wiley–Teubner 1996, §2.2 and §4 (from memory).

use rayon::prelude::*;

use crate::fem::quadrature::{gauss_legendre_unit_3, triangle_rule};
use crate::fem::shape::{AffineTriangle, p2_gradients, p2_values};
use crate::fem::{FlowField, ViscousForm};
use crate::geometry::Point;
use crate::mesh::{Mesh, edge_key as key};

/// The boundary term a part contributes to the estimator.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum BoundaryResidual {
    /// Velocity prescribed (no-slip, inflow): no term.
    None,
    /// Natural outflow: the whole traction `σ_h n` should vanish.
    Traction,
    /// Slip wall: the tangential traction `t·σ_h n` should vanish.
    TangentialTraction,
}

/// What the estimator needs besides the mesh and field.
pub struct EstimatorInputs<'a> {
    /// Kinematic viscosity `ν > 0`.
    pub viscosity: f64,
    pub viscous_form: ViscousForm,
    /// Body force per unit mass, if any.
    pub body_force: Option<&'a (dyn Fn(Point) -> [f64; 2] + Sync)>,
    /// Include `(u_h·∇)u_h` in the element residual (Navier–Stokes).
    pub convection: bool,
    /// Per boundary part id: the term its edges contribute.
    pub boundary: &'a [BoundaryResidual],
}

/// Per-triangle indicators and their total.
#[derive(Clone, Debug, PartialEq)]
pub struct ErrorEstimate {
    /// `η_K` per triangle.
    pub cells: Vec<f64>,
    /// `η = (Σ η_K²)^{1/2}`.
    pub total: f64,
}

/// Computes [`ErrorEstimate`] of `field` on `mesh` (see the module notes for the formula).
///
/// # Panics
/// When the field does not match the mesh (a programming error; [`super::check_field`]
/// checks this for callers with user data).
pub fn residual_estimate(
    mesh: &Mesh,
    field: &FlowField,
    inputs: &EstimatorInputs,
) -> ErrorEstimate {
    assert_eq!(field.velocity.len(), mesh.nodes.len(), "one velocity per node");
    let faces = EdgeNeighbours::new(mesh);
    let cells: Vec<f64> = (0..mesh.n_cells())
        .into_par_iter()
        .map(|c| {
            let local = LocalField::new(mesh, field, c, inputs.viscous_form);
            let volume = element_terms(&local, inputs);
            let edges = edge_terms(mesh, field, &faces, &local, c, inputs);
            (volume + edges).sqrt()
        })
        .collect();
    let total = cells.iter().map(|e| e * e).sum::<f64>().sqrt();
    ErrorEstimate { cells, total }
}

/// The P2/P1 field on one triangle, with the constant parts of its residual.
struct LocalField {
    tri: AffineTriangle,
    u: [[f64; 2]; 6],
    p: [f64; 3],
    form: ViscousForm,
    /// `ν`-free viscous operator (`Δu_h`, plus `∇ div u_h` in the symmetric form): constant.
    viscous: [f64; 2],
    grad_p: [f64; 2],
}

impl LocalField {
    fn new(mesh: &Mesh, field: &FlowField, c: usize, form: ViscousForm) -> Self {
        let tri = AffineTriangle::new(mesh.cell_vertices(c));
        let nodes = mesh.cells[c];
        let u: [[f64; 2]; 6] = std::array::from_fn(|k| field.velocity[nodes[k]]);
        let p: [f64; 3] = std::array::from_fn(|k| field.pressure[nodes[k]]);
        let g = tri.grad_bary;
        let hessians = p2_hessians(&g);
        let mut viscous = [0.0; 2];
        for (k, h) in hessians.iter().enumerate() {
            let laplacian = h[0][0] + h[1][1];
            for comp in 0..2 {
                viscous[comp] += u[k][comp] * laplacian;
                if form == ViscousForm::Symmetric {
                    // (∇ div u)_a = Σ_k (u_x^k ∂_a∂_x φ_k + u_y^k ∂_a∂_y φ_k).
                    viscous[comp] += u[k][0] * h[comp][0] + u[k][1] * h[comp][1];
                }
            }
        }
        let grad_p = [(0..3).map(|i| p[i] * g[i][0]).sum(), (0..3).map(|i| p[i] * g[i][1]).sum()];
        LocalField { tri, u, p, form, viscous, grad_p }
    }

    /// Velocity and its gradient (`[c][d] = ∂u_c/∂x_d`) at barycentric point `l`.
    fn velocity(&self, l: [f64; 3]) -> ([f64; 2], [[f64; 2]; 2]) {
        let phi = p2_values(l);
        let dphi = p2_gradients(l, &self.tri.grad_bary);
        let mut u = [0.0; 2];
        let mut grad = [[0.0; 2]; 2];
        for k in 0..6 {
            for c in 0..2 {
                u[c] += phi[k] * self.u[k][c];
                grad[c][0] += dphi[k][0] * self.u[k][c];
                grad[c][1] += dphi[k][1] * self.u[k][c];
            }
        }
        (u, grad)
    }

    /// The traction `σ_h n` at barycentric point `l` for the unit normal `n`.
    fn traction(&self, l: [f64; 3], n: [f64; 2], nu: f64) -> [f64; 2] {
        let (_, g) = self.velocity(l);
        let p: f64 = (0..3).map(|i| l[i] * self.p[i]).sum();
        std::array::from_fn(|c| {
            let mut t = nu * (g[c][0] * n[0] + g[c][1] * n[1]) - p * n[c];
            if self.form == ViscousForm::Symmetric {
                t += nu * (g[0][c] * n[0] + g[1][c] * n[1]);
            }
            t
        })
    }
}

/// Constant Hessians `[a][b] = ∂_a ∂_b φ_k` of the six P2 basis functions.
fn p2_hessians(g: &[[f64; 2]; 3]) -> [[[f64; 2]; 2]; 6] {
    let outer = |i: usize, j: usize| -> [[f64; 2]; 2] {
        std::array::from_fn(|a| {
            std::array::from_fn(|b| 4.0 * (g[i][a] * g[j][b] + g[j][a] * g[i][b]))
        })
    };
    let vertex = |i: usize| -> [[f64; 2]; 2] {
        std::array::from_fn(|a| std::array::from_fn(|b| 4.0 * g[i][a] * g[i][b]))
    };
    [vertex(0), vertex(1), vertex(2), outer(0, 1), outer(1, 2), outer(2, 0)]
}

/// Element and mass residual terms of `η_K²`.
fn element_terms(local: &LocalField, inputs: &EstimatorInputs) -> f64 {
    let nu = inputs.viscosity;
    let h2 = longest_edge_sq(&local.tri);
    let (mut residual, mut divergence) = (0.0, 0.0);
    for &(l, w) in triangle_rule(6).points {
        let (u, g) = local.velocity(l);
        let f = inputs.body_force.map_or([0.0; 2], |f| f(local.tri.point(l)));
        let r: [f64; 2] = std::array::from_fn(|c| {
            let convection = if inputs.convection { u[0] * g[c][0] + u[1] * g[c][1] } else { 0.0 };
            f[c] + nu * local.viscous[c] - local.grad_p[c] - convection
        });
        residual += w * (r[0] * r[0] + r[1] * r[1]);
        divergence += w * (g[0][0] + g[1][1]).powi(2);
    }
    let area = local.tri.area;
    area * (h2 / nu * residual + nu * divergence)
}

fn longest_edge_sq(tri: &AffineTriangle) -> f64 {
    let v = tri.vertices;
    (0..3)
        .map(|i| {
            let (a, b) = (v[i], v[(i + 1) % 3]);
            (a[0] - b[0]).powi(2) + (a[1] - b[1]).powi(2)
        })
        .fold(0.0, f64::max)
}

/// For each vertex pair of an edge: the cells on it, or the boundary part.
struct EdgeNeighbours {
    cells: crate::mesh::EdgeCells,
    part: crate::mesh::EdgeMap<usize>,
}

impl EdgeNeighbours {
    fn new(mesh: &Mesh) -> Self {
        let part =
            mesh.boundary_edges.iter().map(|e| (key(e.nodes[0], e.nodes[1]), e.part)).collect();
        EdgeNeighbours { cells: mesh.edge_cells(), part }
    }
}

/// Traction-jump and boundary terms of `η_K²`.
fn edge_terms(
    mesh: &Mesh,
    field: &FlowField,
    faces: &EdgeNeighbours,
    local: &LocalField,
    c: usize,
    inputs: &EstimatorInputs,
) -> f64 {
    let nu = inputs.viscosity;
    let cell = mesh.cells[c];
    let mut total = 0.0;
    for k in 0..3 {
        let (a, b) = (cell[k], cell[(k + 1) % 3]);
        let (pa, pb) = (mesh.nodes[a], mesh.nodes[b]);
        let length = (pb[0] - pa[0]).hypot(pb[1] - pa[1]);
        // Outward normal of the counter-clockwise triangle: right normal of a -> b.
        let n = [(pb[1] - pa[1]) / length, (pa[0] - pb[0]) / length];
        let bary = |s: f64| {
            let mut l = [0.0; 3];
            l[k] = 1.0 - s;
            l[(k + 1) % 3] = s;
            l
        };
        let neighbour = faces
            .cells
            .get(&key(a, b))
            .and_then(|cs| cs.iter().copied().find(|&o| o != c && o != usize::MAX));
        let integral: f64 = match neighbour {
            Some(other) => {
                let outer = LocalField::new(mesh, field, other, inputs.viscous_form);
                0.5 * edge_integral(|s| {
                    let l = bary(s);
                    let t_in = local.traction(l, n, nu);
                    let t_out = outer.traction(outer.tri.barycentric(local.tri.point(l)), n, nu);
                    [t_in[0] - t_out[0], t_in[1] - t_out[1]]
                })
            }
            None => {
                let kind = faces
                    .part
                    .get(&key(a, b))
                    .and_then(|&part| inputs.boundary.get(part).copied())
                    .unwrap_or(BoundaryResidual::None);
                match kind {
                    BoundaryResidual::None => 0.0,
                    BoundaryResidual::Traction => edge_integral(|s| local.traction(bary(s), n, nu)),
                    BoundaryResidual::TangentialTraction => edge_integral(|s| {
                        let t = local.traction(bary(s), n, nu);
                        let tangential = -t[0] * n[1] + t[1] * n[0];
                        [tangential, 0.0]
                    }),
                }
            }
        };
        total += length / nu * length * integral;
    }
    total
}

/// `(1/|E|) ∫_E |v|²` by 3-point Gauss in the edge parameter `s ∈ [0, 1]`.
fn edge_integral(v: impl Fn(f64) -> [f64; 2]) -> f64 {
    gauss_legendre_unit_3()
        .iter()
        .map(|&(s, w)| {
            let x = v(s);
            w * (x[0] * x[0] + x[1] * x[1])
        })
        .sum()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::mesh::structured::rectangle;

    fn inputs(boundary: &[BoundaryResidual]) -> EstimatorInputs<'_> {
        EstimatorInputs {
            viscosity: 1.0,
            viscous_form: ViscousForm::Gradient,
            body_force: None,
            convection: false,
            boundary,
        }
    }

    #[test]
    fn an_exact_discrete_stokes_solution_has_zero_estimate() {
        // Poiseuille flow u = (y(1 − y), 0), p = −2x solves −Δu + ∇p = 0 and lies in P2/P1,
        // so every residual vanishes (elementary calculus).
        let mesh = rectangle([0.0, 0.0], [2.0, 1.0], 4, 3, |_, _| [0.0, 0.0]).unwrap();
        let velocity = mesh.nodes.iter().map(|p| [p[1] * (1.0 - p[1]), 0.0]).collect();
        let pressure = mesh.nodes[..mesh.n_vertices].iter().map(|p| -2.0 * p[0]).collect();
        let field = FlowField { velocity, pressure };
        let boundary = vec![BoundaryResidual::None; mesh.part_names.len()];
        let e = residual_estimate(&mesh, &field, &inputs(&boundary));
        assert!(e.total < 1e-12, "{}", e.total);
    }

    #[test]
    fn a_wrong_pressure_shows_in_the_element_residual() {
        // Same velocity, p = 0: residual −Δu = (2, 0) on every triangle, so
        // Σ_K h_K² ‖(2, 0)‖²_K = 4 Σ h_K² |K| with no jumps (p continuous, ∇u continuous).
        let mesh = rectangle([0.0, 0.0], [2.0, 1.0], 4, 3, |_, _| [0.0, 0.0]).unwrap();
        let velocity = mesh.nodes.iter().map(|p| [p[1] * (1.0 - p[1]), 0.0]).collect();
        let field = FlowField { velocity, pressure: vec![0.0; mesh.n_vertices] };
        let boundary = vec![BoundaryResidual::None; mesh.part_names.len()];
        let e = residual_estimate(&mesh, &field, &inputs(&boundary));
        let expected: f64 = (0..mesh.n_cells())
            .map(|c| {
                let t = AffineTriangle::new(mesh.cell_vertices(c));
                4.0 * longest_edge_sq(&t) * t.area
            })
            .sum();
        assert!((e.total.powi(2) - expected).abs() < 1e-10 * expected);
    }
}
