//! Derived nodal and cell fields of a Taylor–Hood flow field.
//!
//! Takes a mesh and a [`FlowField`]; returns per-node vectors (vorticity, speed, pressure at
//! all six nodes of every cell) and a per-cell vector (the local divergence error), ready for
//! the VTK writer.
//!
//! * Vorticity `ω = ∂v/∂x − ∂u/∂y` is discontinuous across cells for a P2 velocity. Its nodal
//!   value is the **area-weighted average** of the cell-wise values at that node over the
//!   cells sharing it (a lumped recovery). Where `ω` of the discrete field is continuous —
//!   e.g. when the velocity is one global quadratic — the average is exact at every node.
//! * Pressure at midpoints is the mean of the pressures at the edge's two vertices, i.e.
//!   the P1 pressure evaluated there; at vertices it is the vertex value.
//! * The divergence error of cell `T` is `‖div u_h‖_{L²(T)}` by a Dunavant degree-4 rule,
//!   exact because `div u_h` is linear on `T`.

use super::{PostError, cell_triangle, check_field, velocity_gradient};
use crate::fem::FlowField;
use crate::fem::quadrature::triangle_rule;
use crate::mesh::Mesh;

use crate::fem::shape::P2_NODE_BARYCENTRIC as NODE_BARY;

/// The cheap derived fields of one flow field, for the VTK writer (the stream function needs
/// a linear solve and is computed separately by [`stream_function`](super::stream_function)).
#[derive(Clone, Debug, PartialEq)]
pub struct DerivedFields {
    /// Per node: [`vorticity`].
    pub vorticity: Vec<f64>,
    /// Per node: [`speed`].
    pub speed: Vec<f64>,
    /// Per node: [`pressure_at_nodes`] (kinematic).
    pub pressure: Vec<f64>,
    /// Per cell: [`divergence_error`].
    pub divergence_error: Vec<f64>,
}

/// All of [`DerivedFields`] at once.
///
/// # Errors
/// [`PostError`] when the field does not match the mesh.
pub fn derived_fields(mesh: &Mesh, field: &FlowField) -> Result<DerivedFields, PostError> {
    Ok(DerivedFields {
        vorticity: vorticity(mesh, field)?,
        speed: speed(mesh, field)?,
        pressure: pressure_at_nodes(mesh, field)?,
        divergence_error: divergence_error(mesh, field)?,
    })
}

/// Nodal vorticity `ω = ∂v/∂x − ∂u/∂y` by area-weighted averaging of cell-wise values.
///
/// # Errors
/// [`PostError`] when the field does not match the mesh.
pub fn vorticity(mesh: &Mesh, field: &FlowField) -> Result<Vec<f64>, PostError> {
    check_field(mesh, field)?;
    let mut sum = vec![0.0; mesh.nodes.len()];
    let mut weight = vec![0.0; mesh.nodes.len()];
    for (c, nodes) in mesh.cells.iter().enumerate() {
        let tri = cell_triangle(mesh, c);
        for (k, &n) in nodes.iter().enumerate() {
            let g = velocity_gradient(&field.velocity, nodes, &tri, NODE_BARY[k]);
            sum[n] += tri.area * (g[1][0] - g[0][1]);
            weight[n] += tri.area;
        }
    }
    // Every node belongs to a cell of a valid mesh; a node of no cell gets 0, not NaN.
    Ok(sum.iter().zip(&weight).map(|(s, w)| if *w > 0.0 { s / w } else { 0.0 }).collect())
}

/// Speed `|u|` at every mesh node.
///
/// # Errors
/// [`PostError`] when the field does not match the mesh.
pub fn speed(mesh: &Mesh, field: &FlowField) -> Result<Vec<f64>, PostError> {
    check_field(mesh, field)?;
    Ok(field.velocity.iter().map(|u| u[0].hypot(u[1])).collect())
}

/// Kinematic pressure at every mesh node: vertex values, and the mean of the edge's two
/// vertex values at each midpoint (the P1 interpolant there).
///
/// # Errors
/// [`PostError`] when the field does not match the mesh.
pub fn pressure_at_nodes(mesh: &Mesh, field: &FlowField) -> Result<Vec<f64>, PostError> {
    check_field(mesh, field)?;
    let mut p = vec![0.0; mesh.nodes.len()];
    p[..mesh.n_vertices].copy_from_slice(&field.pressure);
    for nodes in &mesh.cells {
        for k in 0..3 {
            let (a, b) = (nodes[k], nodes[(k + 1) % 3]);
            p[nodes[3 + k]] = 0.5 * (field.pressure[a] + field.pressure[b]);
        }
    }
    Ok(p)
}

/// Per-cell divergence error `‖div u_h‖_{L²(T)} = (∫_T (∂u/∂x + ∂v/∂y)²)^{1/2}`.
///
/// # Errors
/// [`PostError`] when the field does not match the mesh.
pub fn divergence_error(mesh: &Mesh, field: &FlowField) -> Result<Vec<f64>, PostError> {
    check_field(mesh, field)?;
    let rule = triangle_rule(4);
    let errors = (0..mesh.n_cells())
        .map(|c| {
            let tri = cell_triangle(mesh, c);
            let nodes = &mesh.cells[c];
            let integral: f64 = rule
                .points
                .iter()
                .map(|&(l, w)| {
                    let g = velocity_gradient(&field.velocity, nodes, &tri, l);
                    w * (g[0][0] + g[1][1]).powi(2)
                })
                .sum();
            (integral * tri.area).sqrt()
        })
        .collect();
    Ok(errors)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::mesh::structured::rectangle;

    fn interpolate(
        mesh: &Mesh,
        u: impl Fn(f64, f64) -> [f64; 2],
        p: impl Fn(f64, f64) -> f64,
    ) -> FlowField {
        FlowField {
            velocity: mesh.nodes.iter().map(|x| u(x[0], x[1])).collect(),
            pressure: mesh.nodes[..mesh.n_vertices].iter().map(|x| p(x[0], x[1])).collect(),
        }
    }

    #[test]
    fn pressure_at_midpoints_is_the_linear_interpolant() {
        // A linear pressure is reproduced exactly at every node; values are at most 5, and
        // each is a few operations away from the exact one: 64 eps (common practice, no
        // source).
        let mesh = rectangle([0.0, 0.0], [2.0, 1.0], 5, 3, |_, _| [0.13, -0.07]).unwrap();
        let field = interpolate(&mesh, |_, _| [0.0, 0.0], |x, y| 1.0 + 2.0 * x - 3.0 * y);
        let p = pressure_at_nodes(&mesh, &field).unwrap();
        for (n, x) in mesh.nodes.iter().enumerate() {
            assert!((p[n] - (1.0 + 2.0 * x[0] - 3.0 * x[1])).abs() < 64.0 * f64::EPSILON);
        }
    }

    #[test]
    fn derived_fields_of_a_shear_flow_are_exact() {
        // Simple shear u = (y, 0), p = 2 − x: ω = −1, |u| = |y|, div u = 0 exactly (all
        // derivatives are constants; 1e-13 covers gradients formed over h ≈ 0.3).
        let mesh = rectangle([0.0, -1.0], [2.0, 1.0], 6, 6, |_, _| [0.1, 0.2]).unwrap();
        let field = interpolate(&mesh, |_, y| [y, 0.0], |x, _| 2.0 - x);
        let d = derived_fields(&mesh, &field).unwrap();
        for (n, x) in mesh.nodes.iter().enumerate() {
            assert!((d.vorticity[n] + 1.0).abs() < 1e-13, "node {n}: {}", d.vorticity[n]);
            assert!((d.speed[n] - x[1].abs()).abs() < 1e-15);
            assert!((d.pressure[n] - (2.0 - x[0])).abs() < 1e-14);
        }
        assert_eq!(d.divergence_error.len(), mesh.n_cells());
        assert!(d.divergence_error.iter().all(|&e| e < 1e-13));
    }

    #[test]
    fn speed_is_the_euclidean_norm() {
        let mesh = rectangle([0.0, 0.0], [1.0, 1.0], 2, 2, |_, _| [0.0, 0.0]).unwrap();
        let field = interpolate(&mesh, |_, _| [3.0, -4.0], |_, _| 0.0);
        assert!(speed(&mesh, &field).unwrap().iter().all(|s| (s - 5.0).abs() < 1e-15));
    }

    #[test]
    fn mismatched_field_is_a_typed_error() {
        let mesh = rectangle([0.0, 0.0], [1.0, 1.0], 2, 2, |_, _| [0.0, 0.0]).unwrap();
        let field = FlowField { velocity: vec![[0.0; 2]; 3], pressure: vec![0.0; 9] };
        assert!(matches!(
            vorticity(&mesh, &field),
            Err(PostError::FieldLength { what: "velocity", expected: 25, found: 3 })
        ));
    }
}
