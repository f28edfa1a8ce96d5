//! Structured triangulations of a rectangle, for verification tests and convergence studies
//! that want a mesh family independent of the Delaunay mesher.

use super::{Mesh, MeshError};
use crate::geometry::{PartId, Point};

/// Part ids of the four sides of a structured rectangle: bottom, right, top, left.
pub const RECTANGLE_SIDES: [&str; 4] = ["bottom", "right", "top", "left"];

/// Triangulates `[x0, x1] × [y0, y1]` with `nx × ny` cells, each split along the diagonal
/// that points toward the nearest rectangle corner, so no triangle has three boundary
/// vertices when `nx, ny ≥ 2`. Interior vertices are moved by `jitter(i, j)` (a fraction of the cell
/// size, e.g. for unstructured-like tests). Sides get parts `bottom, right, top, left`.
///
/// # Errors
/// A [`MeshError`] if the jitter inverts a triangle.
pub fn rectangle(
    corner_min: Point,
    corner_max: Point,
    nx: usize,
    ny: usize,
    jitter: impl Fn(usize, usize) -> [f64; 2],
) -> Result<Mesh, MeshError> {
    let (hx, hy) =
        ((corner_max[0] - corner_min[0]) / nx as f64, (corner_max[1] - corner_min[1]) / ny as f64);
    let id = |i: usize, j: usize| j * (nx + 1) + i;
    let mut vertices = Vec::with_capacity((nx + 1) * (ny + 1));
    for j in 0..=ny {
        for i in 0..=nx {
            let interior = i > 0 && i < nx && j > 0 && j < ny;
            let d = if interior { jitter(i, j) } else { [0.0, 0.0] };
            let x = if i == nx { corner_max[0] } else { corner_min[0] + (i as f64 + d[0]) * hx };
            let y = if j == ny { corner_max[1] } else { corner_min[1] + (j as f64 + d[1]) * hy };
            vertices.push([x, y]);
        }
    }
    let mut triangles = Vec::with_capacity(2 * nx * ny);
    for j in 0..ny {
        for i in 0..nx {
            let (a, b, c, d) = (id(i, j), id(i + 1, j), id(i + 1, j + 1), id(i, j + 1));
            // Diagonals point toward the rectangle's corners (a quadrant-wise "Union Jack"
            // pattern), so every corner cell is cut through its corner vertex and no
            // triangle has three boundary vertices.
            if (2 * i < nx) == (2 * j < ny) {
                triangles.push([a, b, c]);
                triangles.push([a, c, d]);
            } else {
                triangles.push([a, b, d]);
                triangles.push([b, c, d]);
            }
        }
    }
    let mut segments: Vec<([usize; 2], PartId)> = Vec::new();
    segments.extend((0..nx).map(|i| ([id(i, 0), id(i + 1, 0)], 0)));
    segments.extend((0..ny).map(|j| ([id(nx, j), id(nx, j + 1)], 1)));
    segments.extend((0..nx).map(|i| ([id(i + 1, ny), id(i, ny)], 2)));
    segments.extend((0..ny).map(|j| ([id(0, j + 1), id(0, j)], 3)));
    let names = RECTANGLE_SIDES.iter().map(|s| s.to_string()).collect();
    Mesh::from_linear(vertices, &triangles, &segments, names, vec![None; 4])
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn structured_rectangle_is_valid_and_has_exact_area() {
        let m = rectangle([0.0, 0.0], [2.0, 1.0], 6, 4, |_, _| [0.0, 0.0]).unwrap();
        m.check_invariants().unwrap();
        assert_eq!(m.n_cells(), 48);
        assert!((m.area() - 2.0).abs() < 1e-14);
        assert_eq!(m.boundary_edges.len(), 2 * (6 + 4));
        // P2 node count: vertices + edges (horizontal 6·5, vertical 7·4, one diagonal per cell).
        assert_eq!(m.nodes.len(), 35 + 6 * 5 + 7 * 4 + 24);
    }

    #[test]
    fn jittered_rectangle_keeps_invariants() {
        let m = rectangle([0.0, 0.0], [1.0, 1.0], 8, 8, |i, j| {
            [
                0.2 * ((i * 7 + j * 3) % 5) as f64 / 5.0 - 0.1,
                0.2 * ((i * 2 + j * 5) % 7) as f64 / 7.0 - 0.1,
            ]
        })
        .unwrap();
        m.check_invariants().unwrap();
        assert!((m.area() - 1.0).abs() < 1e-13);
    }
}
