//! Uniform (red) refinement of a six-node mesh.
//!
//! Takes a [`Mesh`]; returns a mesh with four times as many triangles whose vertices are the
//! old vertices plus the old edge midpoints, with every boundary edge split into two edges
//! of the same part and orientation. Optionally, new boundary vertices and midpoints on a
//! part that approximates a circle are moved radially onto the circle, so a refinement
//! sequence converges to the curved boundary rather than to the initial polygon.

use super::{BoundaryEdge, EdgeMap, Mesh, triangle_area};
use crate::geometry::{Circle, Point};

impl Mesh {
    /// Splits every triangle into four through its edge midpoints.
    ///
    /// Child `j < 3` of cell `[v0, v1, v2, m01, m12, m20]` is the corner triangle at `v_j`;
    /// child 3 is `[m01, m12, m20]`. All keep the parent's counter-clockwise orientation.
    /// Without snapping the total area is unchanged (up to rounding). With
    /// `snap_to_circles`, each new boundary vertex of a part with a circle is projected
    /// radially onto it, unless that would invert one of its three triangles (then it stays
    /// on the chord); the new boundary midpoints of such parts are projected as well.
    ///
    /// # Panics
    /// Only on a mesh whose node indices are out of range (one that fails
    /// [`Mesh::check_invariants`]).
    pub fn refine_uniform(&self, snap_to_circles: bool) -> Mesh {
        let mut vertices: Vec<Point> = self.nodes.clone();
        let children: Vec<[usize; 3]> = self.cells.iter().flat_map(child_cells).collect();
        let halves = self.split_boundary_edges();
        if snap_to_circles {
            for be in &self.boundary_edges {
                if let Some(circle) = self.part_circles.get(be.part).copied().flatten() {
                    let family = &children[4 * be.cell..4 * be.cell + 4];
                    snap_vertex(&mut vertices, family, be.nodes[2], circle);
                }
            }
        }
        lift_children(vertices, &children, &halves, self, snap_to_circles)
    }

    /// For every boundary edge `[a, b, m]` of cell `c` (local edge `k`): the halves
    /// `[a, m]` in child `4c + k` and `[m, b]` in child `4c + (k + 1) % 3`, as
    /// `(parent edge index, [from, to, child], part)`.
    fn split_boundary_edges(&self) -> Vec<(usize, [usize; 3], usize)> {
        let mut out = Vec::with_capacity(2 * self.boundary_edges.len());
        for (i, be) in self.boundary_edges.iter().enumerate() {
            let [a, b, m] = be.nodes;
            let cell = &self.cells[be.cell];
            let k = (0..3).find(|&k| cell[k] == a && cell[(k + 1) % 3] == b).unwrap_or(0);
            out.push((i, [a, m, 4 * be.cell + k], be.part));
            out.push((i, [m, b, 4 * be.cell + (k + 1) % 3], be.part));
        }
        out
    }
}

/// The four children of a six-node cell, counter-clockwise.
fn child_cells(c: &[usize; 6]) -> [[usize; 3]; 4] {
    let [v0, v1, v2, m01, m12, m20] = *c;
    [[v0, m01, m20], [m01, v1, m12], [m20, m12, v2], [m01, m12, m20]]
}

/// Moves vertex `v` (the midpoint of a parent boundary edge) onto `circle` when the
/// children of that parent (`family`) all stay positively oriented.
fn snap_vertex(vertices: &mut [Point], family: &[[usize; 3]], v: usize, circle: Circle) {
    let old = vertices[v];
    vertices[v] = project_onto_circle(old, circle);
    if !family.iter().all(|t| triangle_area(vertices[t[0]], vertices[t[1]], vertices[t[2]]) > 0.0) {
        vertices[v] = old;
    }
}

/// Radial projection of `p` onto the circle (the centre itself stays put).
pub(super) fn project_onto_circle(p: Point, circle: Circle) -> Point {
    let (dx, dy) = (p[0] - circle.center[0], p[1] - circle.center[1]);
    let r = dx.hypot(dy);
    if r == 0.0 {
        return p;
    }
    let s = circle.radius / r;
    [circle.center[0] + s * dx, circle.center[1] + s * dy]
}

/// [`lift`], then (with `snap_to_circles`) the quadratic midpoints of boundary edges on parts
/// with a circle moved radially onto it.
pub(super) fn lift_children(
    vertices: Vec<Point>,
    children: &[[usize; 3]],
    halves: &[(usize, [usize; 3], usize)],
    parent: &Mesh,
    snap_to_circles: bool,
) -> Mesh {
    let mut out = lift(vertices, children, halves, parent);
    if snap_to_circles {
        for be in &out.boundary_edges {
            if let Some(circle) = out.part_circles.get(be.part).copied().flatten() {
                let m = be.nodes[2];
                out.nodes[m] = project_onto_circle(out.nodes[m], circle);
            }
        }
    }
    out
}

/// Builds the six-node mesh from the children without re-validation: midpoints are shared
/// through an edge map in cell order (deterministic), boundary halves keep their parts.
fn lift(
    vertices: Vec<Point>,
    children: &[[usize; 3]],
    halves: &[(usize, [usize; 3], usize)],
    parent: &Mesh,
) -> Mesh {
    let n_vertices = vertices.len();
    let mut nodes = vertices;
    let mut mid_of: EdgeMap<usize> =
        EdgeMap::with_capacity_and_hasher(3 * children.len(), Default::default());
    let mut cells = Vec::with_capacity(children.len());
    for t in children {
        let mut m = [0; 3];
        for k in 0..3 {
            let (a, b) = (t[k], t[(k + 1) % 3]);
            m[k] = *mid_of.entry((a.min(b), a.max(b))).or_insert_with(|| {
                let (pa, pb) = (nodes[a], nodes[b]);
                nodes.push([0.5 * (pa[0] + pb[0]), 0.5 * (pa[1] + pb[1])]);
                nodes.len() - 1
            });
        }
        cells.push([t[0], t[1], t[2], m[0], m[1], m[2]]);
    }
    let boundary_edges = halves
        .iter()
        .map(|&(_, [a, b, cell], part)| BoundaryEdge {
            nodes: [a, b, mid_of.get(&(a.min(b), a.max(b))).copied().unwrap_or(a)],
            part,
            cell,
        })
        .collect();
    Mesh {
        nodes,
        n_vertices,
        cells,
        boundary_edges,
        part_names: parent.part_names.clone(),
        part_circles: parent.part_circles.clone(),
    }
}

#[cfg(test)]
mod tests {
    use crate::mesh::structured::rectangle;

    #[test]
    fn red_refinement_of_a_structured_rectangle() {
        let m = rectangle([0.0, 0.0], [3.0, 2.0], 3, 2, |_, _| [0.0, 0.0]).unwrap();
        let f = m.refine_uniform(false);
        f.check_invariants().unwrap();
        assert_eq!(f.n_cells(), 4 * m.n_cells());
        assert_eq!(f.boundary_edges.len(), 2 * m.boundary_edges.len());
        // Exact: 6; the sum of 48 triangle areas carries a few ulps of rounding.
        assert!((f.area() - 6.0).abs() < 1e-13);
        // Vertices of the fine mesh: old vertices and old midpoints (elementary count).
        assert_eq!(f.n_vertices, m.nodes.len());
        for be in &f.boundary_edges {
            let [a, b, c] = be.nodes.map(|n| f.nodes[n]);
            assert_eq!(c, [0.5 * (a[0] + b[0]), 0.5 * (a[1] + b[1])]);
        }
    }
}
