//! Errors of a discrete Taylor–Hood field against an exact solution.
//!
//! Takes a [`Mesh`], a [`FlowField`] and closures for the exact velocity, velocity gradient and
//! pressure; returns the L² velocity error, the H¹ velocity seminorm error and the L² pressure
//! error, all integrated with the degree-6 Dunavant rule on every triangle.
//!
//! **Invariant:** no I/O, no allocation proportional to the mesh.

use crate::fem::FlowField;
use crate::fem::quadrature::triangle_rule;
use crate::fem::shape::{AffineTriangle, p1_values, p2_gradients, p2_values};
use crate::mesh::Mesh;

/// Norms of the error `exact − discrete`.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct ErrorNorms {
    /// `‖u − u_h‖_{L²}`.
    pub velocity_l2: f64,
    /// `‖∇(u − u_h)‖_{L²}`.
    pub velocity_h1_semi: f64,
    /// `‖p − p_h − c‖_{L²}`, with `c` the mean of `p_h − p` when the pressure is only
    /// determined up to a constant, else `c = 0`.
    pub pressure_l2: f64,
}

/// Whether the discrete pressure is compared as is or after removing a constant.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum PressureComparison {
    /// Compare `p_h` with `p` directly.
    Absolute,
    /// Compare after subtracting the mean of `p_h − p` (pressure defined up to a constant).
    UpToConstant,
}

/// Computes the error norms of `field` on `mesh`.
///
/// `exact_grad_u(x, y)[c][d] = ∂u_c/∂x_d`. Triangles are straight-sided; the quadrature is
/// the degree-6 Dunavant rule, so the integrals of the discrete parts are exact and the
/// exact parts are integrated to O(h⁷) per unit area.
///
/// # Panics
/// When `field` does not have one velocity per mesh node and one pressure per vertex (a
/// programming error).
///
/// # References
/// D.A. Dunavant, Int. J. Numer. Meth. Eng. 21 (1985) 1129–1148 (quadrature rule).
pub fn error_norms(
    mesh: &Mesh,
    field: &FlowField,
    exact_u: impl Fn(f64, f64) -> [f64; 2],
    exact_grad_u: impl Fn(f64, f64) -> [[f64; 2]; 2],
    exact_p: impl Fn(f64, f64) -> f64,
    pressure: PressureComparison,
) -> ErrorNorms {
    assert_eq!(field.velocity.len(), mesh.nodes.len(), "one velocity per node");
    assert_eq!(field.pressure.len(), mesh.n_vertices, "one pressure per vertex");
    let shift = match pressure {
        PressureComparison::Absolute => 0.0,
        PressureComparison::UpToConstant => {
            let (integral, area) = integrate(mesh, field, |q| (q.p_h - exact_p(q.x, q.y), 1.0));
            integral / area
        }
    };
    let (l2, h1) = integrate(mesh, field, |q| {
        let u = exact_u(q.x, q.y);
        let g = exact_grad_u(q.x, q.y);
        let e0 = (u[0] - q.u_h[0]).powi(2) + (u[1] - q.u_h[1]).powi(2);
        let e1: f64 = (0..2)
            .flat_map(|c| (0..2).map(move |d| (c, d)))
            .map(|(c, d)| (g[c][d] - q.grad_u_h[c][d]).powi(2))
            .sum();
        (e0, e1)
    });
    let (pl2, _) = integrate(mesh, field, |q| ((q.p_h - shift - exact_p(q.x, q.y)).powi(2), 0.0));
    ErrorNorms { velocity_l2: l2.sqrt(), velocity_h1_semi: h1.sqrt(), pressure_l2: pl2.sqrt() }
}

/// Discrete field values at one quadrature point.
struct QuadPoint {
    x: f64,
    y: f64,
    u_h: [f64; 2],
    grad_u_h: [[f64; 2]; 2],
    p_h: f64,
}

/// Sums `integrand` (two values at once) over the mesh with the degree-6 rule.
fn integrate(
    mesh: &Mesh,
    field: &FlowField,
    integrand: impl Fn(&QuadPoint) -> (f64, f64),
) -> (f64, f64) {
    let rule = triangle_rule(6);
    let mut sum = (0.0, 0.0);
    for (c, cell) in mesh.cells.iter().enumerate() {
        let tri = AffineTriangle::new(mesh.cell_vertices(c));
        for &(l, w) in rule.points {
            let q = evaluate(&tri, cell, field, l);
            let (a, b) = integrand(&q);
            sum.0 += w * tri.area * a;
            sum.1 += w * tri.area * b;
        }
    }
    sum
}

fn evaluate(tri: &AffineTriangle, cell: &[usize; 6], field: &FlowField, l: [f64; 3]) -> QuadPoint {
    let phi = p2_values(l);
    let grad = p2_gradients(l, &tri.grad_bary);
    let psi = p1_values(l);
    let mut u_h = [0.0; 2];
    let mut grad_u_h = [[0.0; 2]; 2];
    for k in 0..6 {
        let v = field.velocity[cell[k]];
        for c in 0..2 {
            u_h[c] += phi[k] * v[c];
            for d in 0..2 {
                grad_u_h[c][d] += grad[k][d] * v[c];
            }
        }
    }
    let p_h = (0..3).map(|q| psi[q] * field.pressure[cell[q]]).sum();
    let [x, y] = tri.point(l);
    QuadPoint { x, y, u_h, grad_u_h, p_h }
}
