//! Element kernels of the Taylor–Hood P2–P1 Stokes discretisation on one affine triangle.
//!
//! Takes the triangle's corners, the viscosity, the viscous form and an optional body force;
//! returns the dense 15×15 local matrix (12 velocity + 3 pressure unknowns) and the local load.
//!
//! Local numbering: velocity unknown `2k + c` is component `c` of P2 node `k`
//! (`[v0, v1, v2, m01, m12, m20]`); pressure unknown `12 + q` is the P1 value at vertex `q`.
//! The local matrix is
//!
//! ```text
//! [ A  Bᵀ ]   A_(kc),(ld) = a(φ_l e_d, φ_k e_c),   B_q,(ld) = −(ψ_q, ∂_d φ_l)
//! [ B  0  ]
//! ```
//!
//! with `a(u, v) = ν (∇u, ∇v)` (gradient form) or `a(u, v) = 2ν (ε(u), ε(v))` (symmetric form,
//! `2 ε(φ_l e_d) : ε(φ_k e_c) = δ_cd ∇φ_k·∇φ_l + ∂_d φ_k ∂_c φ_l`).
//! Gradients of P2 functions are linear, so the degree-2 Dunavant rule integrates `A` and `B`
//! exactly; the load `(f, φ_k e_c)` uses the degree-6 rule (exact for `f` of degree ≤ 4).
//!
//! # References
//! C. Taylor, P. Hood, *A numerical solution of the Navier–Stokes equations using the finite
//! element technique*, Computers & Fluids 1 (1973) 73–100 (from memory).
//! J. Donea, A. Huerta, *Finite Element Methods for Flow Problems*, Wiley 2003, ch. 6 (weak
//! form of the Stokes problem; from memory).

use super::ViscousForm;
use super::quadrature::triangle_rule;
use super::shape::{AffineTriangle, p1_values, p2_gradients, p2_values};

/// Number of local unknowns: 12 velocity components plus 3 pressure values.
pub const LOCAL_SIZE: usize = 15;
/// Number of local velocity unknowns.
pub const LOCAL_VELOCITY: usize = 12;

/// A dense local system: matrix (row = test function, column = trial function) and load.
#[derive(Clone, Debug, PartialEq)]
pub struct LocalSystem {
    pub matrix: [[f64; LOCAL_SIZE]; LOCAL_SIZE],
    pub load: [f64; LOCAL_SIZE],
}

impl Default for LocalSystem {
    fn default() -> Self {
        LocalSystem { matrix: [[0.0; LOCAL_SIZE]; LOCAL_SIZE], load: [0.0; LOCAL_SIZE] }
    }
}

impl LocalSystem {
    /// Sets every entry to zero (reuse between elements).
    pub fn clear(&mut self) {
        *self = LocalSystem::default();
    }
}

/// Adds the viscous block `A` (12×12) of one triangle to `local.matrix`.
///
/// `viscosity` is the kinematic viscosity ν; the integrand is quadratic, so the degree-2
/// rule is exact.
#[allow(non_snake_case)]
pub fn add_viscous_block(
    tri: &AffineTriangle,
    viscosity: f64,
    form: ViscousForm,
    local: &mut LocalSystem,
) {
    let rule = triangle_rule(2);
    let A = &mut local.matrix;
    for &(l, w) in rule.points {
        let g = p2_gradients(l, &tri.grad_bary);
        let scale = viscosity * w * tri.area;
        for k in 0..6 {
            for m in 0..6 {
                let dot = g[k][0] * g[m][0] + g[k][1] * g[m][1];
                for c in 0..2 {
                    A[2 * k + c][2 * m + c] += scale * dot;
                    if form == ViscousForm::Symmetric {
                        for d in 0..2 {
                            A[2 * k + c][2 * m + d] += scale * g[k][d] * g[m][c];
                        }
                    }
                }
            }
        }
    }
}

/// Adds the divergence blocks `B` (rows 12..15) and `Bᵀ` (columns 12..15) of one triangle,
/// `B_q,(ld) = −∫ ψ_q ∂_d φ_l`; the integrand is quadratic, so the degree-2 rule is exact.
#[allow(non_snake_case)]
pub fn add_divergence_blocks(tri: &AffineTriangle, local: &mut LocalSystem) {
    let rule = triangle_rule(2);
    let M = &mut local.matrix;
    for &(l, w) in rule.points {
        let g = p2_gradients(l, &tri.grad_bary);
        let psi = p1_values(l);
        for q in 0..3 {
            for m in 0..6 {
                for d in 0..2 {
                    let b = -w * tri.area * psi[q] * g[m][d];
                    M[LOCAL_VELOCITY + q][2 * m + d] += b;
                    M[2 * m + d][LOCAL_VELOCITY + q] += b;
                }
            }
        }
    }
}

/// Adds the load `(f, φ_k e_c)` of a body force `f(x, y)` with the degree-6 rule.
pub fn add_body_force(
    tri: &AffineTriangle,
    force: &dyn Fn(f64, f64) -> [f64; 2],
    local: &mut LocalSystem,
) {
    let rule = triangle_rule(6);
    for &(l, w) in rule.points {
        let x = tri.point(l);
        let f = force(x[0], x[1]);
        let phi = p2_values(l);
        for (k, phi_k) in phi.iter().enumerate() {
            local.load[2 * k] += w * tri.area * f[0] * phi_k;
            local.load[2 * k + 1] += w * tri.area * f[1] * phi_k;
        }
    }
}

/// The complete Stokes local system of one triangle: viscous block, divergence blocks and,
/// when given, the body-force load. `local` is overwritten.
pub fn stokes_local_system(
    tri: &AffineTriangle,
    viscosity: f64,
    form: ViscousForm,
    force: Option<&(dyn Fn(f64, f64) -> [f64; 2] + Sync)>,
    local: &mut LocalSystem,
) {
    local.clear();
    add_viscous_block(tri, viscosity, form, local);
    add_divergence_blocks(tri, local);
    if let Some(f) = force {
        add_body_force(tri, f, local);
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn sample_triangle() -> AffineTriangle {
        AffineTriangle::new([[0.1, 0.2], [1.3, 0.4], [0.5, 1.1]])
    }

    /// Nodal values of a vector field at the six P2 nodes, in local velocity order.
    fn interpolate(tri: &AffineTriangle, u: impl Fn(f64, f64) -> [f64; 2]) -> [f64; 12] {
        let bary = crate::fem::shape::P2_NODE_BARYCENTRIC;
        let mut out = [0.0; 12];
        for (k, l) in bary.iter().enumerate() {
            let p = tri.point(*l);
            let v = u(p[0], p[1]);
            out[2 * k] = v[0];
            out[2 * k + 1] = v[1];
        }
        out
    }

    #[test]
    fn local_matrix_is_symmetric_for_both_forms() {
        for form in [ViscousForm::Gradient, ViscousForm::Symmetric] {
            let mut local = LocalSystem::default();
            stokes_local_system(&sample_triangle(), 0.7, form, None, &mut local);
            for i in 0..LOCAL_SIZE {
                for j in 0..LOCAL_SIZE {
                    // Symmetry is exact up to summation order: entries are O(1), so 1e-14.
                    assert!((local.matrix[i][j] - local.matrix[j][i]).abs() < 1e-14);
                }
            }
        }
    }

    #[test]
    fn rigid_motions_have_zero_viscous_energy() {
        // Translations are in the kernel of both forms; a rotation (−y, x) has ε = 0, so it is
        // in the kernel of the symmetric form only (standard linear-elasticity fact).
        let tri = sample_triangle();
        let energy = |form, u: [f64; 12]| {
            let mut local = LocalSystem::default();
            add_viscous_block(&tri, 1.0, form, &mut local);
            let au: Vec<f64> =
                (0..12).map(|i| (0..12).map(|j| local.matrix[i][j] * u[j]).sum()).collect();
            au.iter().map(|v| v.abs()).fold(0.0, f64::max)
        };
        let shift = interpolate(&tri, |_, _| [1.0, -2.0]);
        let rotation = interpolate(&tri, |x, y| [-y, x]);
        assert!(energy(ViscousForm::Gradient, shift) < 1e-13);
        assert!(energy(ViscousForm::Symmetric, shift) < 1e-13);
        assert!(energy(ViscousForm::Symmetric, rotation) < 1e-13);
        assert!(energy(ViscousForm::Gradient, rotation) > 0.1);
    }

    #[test]
    fn divergence_block_matches_exact_integral() {
        // u = (x², −2xy) has div u = 0, so B u = 0; u = (x, y) has div u = 2, so
        // (B u)_q = −2 ∫ ψ_q = −2 |T| / 3.
        let tri = sample_triangle();
        let mut local = LocalSystem::default();
        add_divergence_blocks(&tri, &mut local);
        let apply = |u: [f64; 12]| -> Vec<f64> {
            (12..15).map(|q| (0..12).map(|j| local.matrix[q][j] * u[j]).sum()).collect()
        };
        for v in apply(interpolate(&tri, |x, y| [x * x, -2.0 * x * y])) {
            assert!(v.abs() < 1e-14);
        }
        for v in apply(interpolate(&tri, |x, y| [x, y])) {
            assert!((v + 2.0 * tri.area / 3.0).abs() < 1e-14);
        }
    }

    #[test]
    fn body_force_load_sums_to_force_times_area() {
        // The P2 basis sums to one, so Σ_k (f, φ_k) = ∫ f; for f = (x, 1) that is
        // (|T| x̄, |T|) with x̄ the centroid abscissa.
        let tri = sample_triangle();
        let mut local = LocalSystem::default();
        add_body_force(&tri, &|x, _| [x, 1.0], &mut local);
        let sx: f64 = (0..6).map(|k| local.load[2 * k]).sum();
        let sy: f64 = (0..6).map(|k| local.load[2 * k + 1]).sum();
        let xbar = (0.1 + 1.3 + 0.5) / 3.0;
        assert!((sx - tri.area * xbar).abs() < 1e-14);
        assert!((sy - tri.area).abs() < 1e-14);
    }
}
