//! Shape functions of the Taylor–Hood pair on an affine triangle: continuous quadratic (P2,
//! six nodes) for velocity and continuous linear (P1, three vertices) for pressure.
//!
//! Node order `[v0, v1, v2, m01, m12, m20]`. With barycentric coordinates `L0, L1, L2`:
//! `φ_i = L_i (2 L_i − 1)` at the vertices, `φ_3 = 4 L0 L1`, `φ_4 = 4 L1 L2`, `φ_5 = 4 L2 L0`
//! at the edge midpoints; the P1 functions are the `L_i` themselves.

use crate::geometry::Point;

/// Geometry of a straight-sided triangle: area and the constant gradients of its barycentric
/// coordinates, `∇L_i = (y_{i+1} − y_{i+2}, x_{i+2} − x_{i+1}) / (2|T|)`.
#[derive(Clone, Copy, Debug)]
pub struct AffineTriangle {
    pub vertices: [Point; 3],
    /// Signed area (positive for counter-clockwise vertices).
    pub area: f64,
    pub grad_bary: [[f64; 2]; 3],
}

impl AffineTriangle {
    pub fn new(vertices: [Point; 3]) -> Self {
        let [a, b, c] = vertices;
        let area = 0.5 * ((b[0] - a[0]) * (c[1] - a[1]) - (c[0] - a[0]) * (b[1] - a[1]));
        let inv = 1.0 / (2.0 * area);
        let grad = |p: Point, q: Point| [(p[1] - q[1]) * inv, (q[0] - p[0]) * inv];
        AffineTriangle { vertices, area, grad_bary: [grad(b, c), grad(c, a), grad(a, b)] }
    }

    /// Barycentric coordinates of `p`: `L_i(p) = 1 + ∇L_i · (p − v_i)` (some negative when `p`
    /// lies outside).
    pub fn barycentric(&self, p: Point) -> [f64; 3] {
        std::array::from_fn(|i| {
            let (v, g) = (self.vertices[i], self.grad_bary[i]);
            1.0 + g[0] * (p[0] - v[0]) + g[1] * (p[1] - v[1])
        })
    }

    /// The physical point with barycentric coordinates `l`.
    pub fn point(&self, l: [f64; 3]) -> Point {
        let [a, b, c] = self.vertices;
        [l[0] * a[0] + l[1] * b[0] + l[2] * c[0], l[0] * a[1] + l[1] * b[1] + l[2] * c[1]]
    }
}

/// Barycentric coordinates of the six P2 nodes `[v0, v1, v2, m01, m12, m20]`.
pub const P2_NODE_BARYCENTRIC: [[f64; 3]; 6] = [
    [1.0, 0.0, 0.0],
    [0.0, 1.0, 0.0],
    [0.0, 0.0, 1.0],
    [0.5, 0.5, 0.0],
    [0.0, 0.5, 0.5],
    [0.5, 0.0, 0.5],
];

/// Values of the six P2 basis functions at barycentric point `l`.
pub fn p2_values(l: [f64; 3]) -> [f64; 6] {
    [
        l[0] * (2.0 * l[0] - 1.0),
        l[1] * (2.0 * l[1] - 1.0),
        l[2] * (2.0 * l[2] - 1.0),
        4.0 * l[0] * l[1],
        4.0 * l[1] * l[2],
        4.0 * l[2] * l[0],
    ]
}

/// Physical gradients of the six P2 basis functions at barycentric point `l`.
pub fn p2_gradients(l: [f64; 3], g: &[[f64; 2]; 3]) -> [[f64; 2]; 6] {
    let comb = |i: usize, j: usize| {
        [4.0 * (l[i] * g[j][0] + l[j] * g[i][0]), 4.0 * (l[i] * g[j][1] + l[j] * g[i][1])]
    };
    let vert = |i: usize| [(4.0 * l[i] - 1.0) * g[i][0], (4.0 * l[i] - 1.0) * g[i][1]];
    [vert(0), vert(1), vert(2), comb(0, 1), comb(1, 2), comb(2, 0)]
}

/// Values of the three P1 basis functions at barycentric point `l` (they are `l` itself).
pub fn p1_values(l: [f64; 3]) -> [f64; 3] {
    l
}

#[cfg(test)]
mod tests {
    use super::*;

    const NODES: [[f64; 3]; 6] = P2_NODE_BARYCENTRIC;

    #[test]
    fn p2_basis_is_nodal_and_sums_to_one() {
        for (i, l) in NODES.iter().enumerate() {
            let v = p2_values(*l);
            for (j, vj) in v.iter().enumerate() {
                assert!((vj - if i == j { 1.0 } else { 0.0 }).abs() < 1e-15);
            }
        }
        let v = p2_values([0.2, 0.3, 0.5]);
        assert!((v.iter().sum::<f64>() - 1.0).abs() < 1e-15);
    }

    #[test]
    fn barycentric_coordinates_of_the_vertices_are_unit_vectors() {
        let tri = AffineTriangle::new([[0.1, 0.2], [1.3, 0.4], [0.5, 1.1]]);
        for (i, v) in tri.vertices.iter().enumerate() {
            let l = tri.barycentric(*v);
            for (j, lj) in l.iter().enumerate() {
                assert!((lj - if i == j { 1.0 } else { 0.0 }).abs() < 1e-14);
            }
        }
        // And they reproduce the point they were taken at.
        let x = tri.point(tri.barycentric([0.4, 0.5]));
        assert!((x[0] - 0.4).abs() < 1e-14 && (x[1] - 0.5).abs() < 1e-14);
    }

    #[test]
    fn p2_gradients_reproduce_a_quadratic() {
        // f = x^2 + 3xy - y: interpolate at the nodes, compare the gradient at a point.
        let t = AffineTriangle::new([[0.1, 0.2], [1.3, 0.4], [0.5, 1.1]]);
        let f = |p: Point| p[0] * p[0] + 3.0 * p[0] * p[1] - p[1];
        let l = [0.2, 0.3, 0.5];
        let grads = p2_gradients(l, &t.grad_bary);
        let mut g = [0.0, 0.0];
        for (k, node) in NODES.iter().enumerate() {
            let fk = f(t.point(*node));
            g[0] += fk * grads[k][0];
            g[1] += fk * grads[k][1];
        }
        let p = t.point(l);
        assert!((g[0] - (2.0 * p[0] + 3.0 * p[1])).abs() < 1e-12);
        assert!((g[1] - (3.0 * p[0] - 1.0)).abs() < 1e-12);
    }
}
