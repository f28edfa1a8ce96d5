//! Mesh quality and summary statistics.
//!
//! Takes a [`Mesh`]; returns per-cell quality (the smallest interior angle in degrees) and a
//! [`MeshStats`] summary: counts, angle extremes, area, edge lengths, boundary edges per part.
//!
//! Triangles next to a sharp input corner cannot be made well-shaped without changing the
//! geometry, so the headline minimum angle leaves them out. A boundary vertex is a *sharp
//! corner* when the fluid-side angle between its two boundary edges is below 60°; its
//! *runs* are the straight boundary stretches that start at it. A triangle is
//! *input-angle-limited* when it shares a vertex with a triangle that contains a sharp
//! corner, or has an edge joining the two runs of one sharp corner.

use super::Mesh;
use crate::geometry::Point;

/// Fluid-side corner angle below which Delaunay refinement cannot guarantee its angle bound
/// near the corner. From memory: Shewchuk (2002), *Delaunay refinement algorithms for
/// triangular mesh generation*, Comput. Geom. 22, proves termination for input angles ≥ 60°.
pub const SHARP_CORNER_DEG: f64 = 60.0;

/// Relative collinearity tolerance for following a straight boundary run. Split points lie
/// on their segment to within a few ulps, so `1e-9` of the edge length is ample.
const COLLINEAR_TOL: f64 = 1e-9;

/// Summary of a mesh. Angles in degrees; edge lengths over the straight triangle edges.
#[derive(Clone, Debug, PartialEq)]
pub struct MeshStats {
    pub n_vertices: usize,
    pub n_triangles: usize,
    /// Vertices plus edge midpoints.
    pub n_nodes: usize,
    /// Smallest interior angle over the triangles that are not input-angle-limited.
    pub min_angle_deg: f64,
    /// Smallest interior angle over all triangles.
    pub min_angle_all_deg: f64,
    /// Number of input-angle-limited triangles (next to corners sharper than 60°).
    pub n_angle_limited: usize,
    /// Mean over the triangles of their smallest angle.
    pub mean_angle_deg: f64,
    /// Largest interior angle over all triangles.
    pub max_angle_deg: f64,
    /// Total (straight-sided) area.
    pub area: f64,
    pub min_edge: f64,
    pub max_edge: f64,
    /// Number of boundary edges per part id.
    pub edges_per_part: Vec<usize>,
    /// Triangles whose three vertices lie on the boundary (0 for meshes from
    /// [`generate`](fn@super::generate)).
    pub n_boundary_triangles: usize,
    /// The triangle count estimated before meshing, when the mesh came from
    /// [`generate`](fn@super::generate).
    pub estimated_triangles: Option<f64>,
}

/// Per-cell quality: the smallest interior angle of each (straight-sided) triangle, in
/// degrees; 60 for an equilateral triangle, near 0 for a sliver.
pub fn cell_quality(mesh: &Mesh) -> Vec<f64> {
    (0..mesh.n_cells())
        .map(|c| angles_deg(mesh.cell_vertices(c)).into_iter().fold(180.0, f64::min))
        .collect()
}

/// Statistics of `mesh` (see [`MeshStats`]). An empty mesh gives NaN angles and edges.
pub fn stats(mesh: &Mesh) -> MeshStats {
    let limited = angle_limited_cells(mesh);
    let on_boundary = boundary_vertex_mask(mesh);
    let (mut min_ok, mut min_all, mut max_all, mut sum_min) = (f64::NAN, f64::NAN, f64::NAN, 0.0);
    let (mut min_edge, mut max_edge) = (f64::NAN, f64::NAN);
    let mut n_boundary_triangles = 0;
    for (c, &is_limited) in limited.iter().enumerate() {
        let v = mesh.cell_vertices(c);
        let ang = angles_deg(v);
        let lo = ang.iter().copied().fold(180.0, f64::min);
        min_all = min_all.min(lo);
        max_all = max_all.max(ang.iter().copied().fold(0.0, f64::max));
        sum_min += lo;
        if !is_limited {
            min_ok = min_ok.min(lo);
        }
        for k in 0..3 {
            let len = dist(v[k], v[(k + 1) % 3]);
            (min_edge, max_edge) = (min_edge.min(len), max_edge.max(len));
        }
        n_boundary_triangles += usize::from(mesh.cells[c][..3].iter().all(|&n| on_boundary[n]));
    }
    let mut edges_per_part = vec![0; mesh.part_names.len()];
    for be in &mesh.boundary_edges {
        if let Some(n) = edges_per_part.get_mut(be.part) {
            *n += 1;
        }
    }
    MeshStats {
        n_vertices: mesh.n_vertices,
        n_triangles: mesh.n_cells(),
        n_nodes: mesh.nodes.len(),
        min_angle_deg: min_ok,
        min_angle_all_deg: min_all,
        n_angle_limited: limited.iter().filter(|&&l| l).count(),
        mean_angle_deg: sum_min / mesh.n_cells() as f64,
        max_angle_deg: max_all,
        area: mesh.area(),
        min_edge,
        max_edge,
        edges_per_part,
        n_boundary_triangles,
        estimated_triangles: None,
    }
}

/// Interior angles of a triangle in degrees, from `atan2(|cross|, dot)` at each corner
/// (accurate for small and large angles alike).
pub fn angles_deg(t: [Point; 3]) -> [f64; 3] {
    std::array::from_fn(|k| {
        let (a, b, c) = (t[k], t[(k + 1) % 3], t[(k + 2) % 3]);
        let (u, v) = ([b[0] - a[0], b[1] - a[1]], [c[0] - a[0], c[1] - a[1]]);
        (u[0] * v[1] - u[1] * v[0]).abs().atan2(u[0] * v[0] + u[1] * v[1]).to_degrees()
    })
}

/// Marks vertices that are an end of a boundary edge.
pub(crate) fn boundary_vertex_mask(mesh: &Mesh) -> Vec<bool> {
    let mut on = vec![false; mesh.nodes.len()];
    for be in &mesh.boundary_edges {
        on[be.nodes[0]] = true;
        on[be.nodes[1]] = true;
    }
    on
}

/// Corner membership of a vertex: `(corner vertex, +1 forward run / −1 backward run / 0 the
/// corner itself)`; a vertex can be on the runs of two corners.
type RunMark = [(usize, i8); 2];

/// Flags the input-angle-limited cells (see the module documentation).
fn angle_limited_cells(mesh: &Mesh) -> Vec<bool> {
    let marks = corner_runs(mesh);
    let joins = |a: usize, b: usize| {
        marks[a].iter().any(|&(ca, sa)| {
            ca != usize::MAX && marks[b].iter().any(|&(cb, sb)| cb == ca && sa * sb == -1)
        })
    };
    let is_corner = |v: usize| marks[v].iter().any(|&(c, s)| c != usize::MAX && s == 0);
    // Vertices of the triangles at a sharp corner: their whole neighbourhood is shaped by
    // the corner (the mesher's corner repair inserts a point there without refining again).
    let mut near_corner = vec![false; mesh.nodes.len()];
    for t in mesh.cells.iter().filter(|t| t[..3].iter().any(|&v| is_corner(v))) {
        t[..3].iter().for_each(|&v| near_corner[v] = true);
    }
    mesh.cells
        .iter()
        .map(|t| (0..3).any(|k| near_corner[t[k]] || joins(t[k], t[(k + 1) % 3])))
        .collect()
}

/// Marks every sharp corner and the straight boundary runs leaving it in both directions.
fn corner_runs(mesh: &Mesh) -> Vec<RunMark> {
    let n = mesh.nodes.len();
    let (mut next, mut prev) = (vec![usize::MAX; n], vec![usize::MAX; n]);
    for be in &mesh.boundary_edges {
        let [a, b, _] = be.nodes;
        next[a] = b;
        prev[b] = a;
    }
    let mut marks: Vec<RunMark> = vec![[(usize::MAX, 0); 2]; n];
    let mut mark = |v: usize, m: (usize, i8)| {
        let slot = if marks[v][0].0 == usize::MAX { 0 } else { 1 };
        marks[v][slot] = m;
    };
    for c in 0..n {
        if next[c] == usize::MAX || prev[c] == usize::MAX {
            continue;
        }
        let p = &mesh.nodes;
        if fluid_angle_deg(p[prev[c]], p[c], p[next[c]]) >= SHARP_CORNER_DEG {
            continue;
        }
        mark(c, (c, 0));
        for (dir, links) in [(1i8, &next), (-1i8, &prev)] {
            for v in straight_run(p, links, c) {
                mark(v, (c, dir));
            }
        }
    }
    marks
}

/// Vertices after `c` along `links` while the boundary stays on the line of its first edge.
fn straight_run(p: &[Point], links: &[usize], c: usize) -> Vec<usize> {
    let first = links[c];
    let d = [p[first][0] - p[c][0], p[first][1] - p[c][1]];
    let len = d[0].hypot(d[1]);
    let mut run = vec![first];
    let mut v = first;
    while links[v] != usize::MAX && links[v] != c && run.len() < p.len() {
        let w = links[v];
        let e = [p[w][0] - p[c][0], p[w][1] - p[c][1]];
        let off_line = (d[0] * e[1] - d[1] * e[0]).abs() / len;
        if off_line > COLLINEAR_TOL * e[0].hypot(e[1]) || d[0] * e[0] + d[1] * e[1] <= 0.0 {
            break;
        }
        run.push(w);
        v = w;
    }
    run
}

/// Angle on the fluid (left) side at `v` between the boundary edges `u -> v` and `v -> w`,
/// in degrees in `(0, 360)`.
fn fluid_angle_deg(u: Point, v: Point, w: Point) -> f64 {
    let (d1, d2) = ([w[0] - v[0], w[1] - v[1]], [u[0] - v[0], u[1] - v[1]]);
    let a = (d1[0] * d2[1] - d1[1] * d2[0]).atan2(d1[0] * d2[0] + d1[1] * d2[1]).to_degrees();
    if a < 0.0 { a + 360.0 } else { a }
}

fn dist(a: Point, b: Point) -> f64 {
    (a[0] - b[0]).hypot(a[1] - b[1])
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::mesh::structured::rectangle;

    #[test]
    fn angles_of_reference_triangles() {
        let eq = angles_deg([[0.0, 0.0], [1.0, 0.0], [0.5, 3f64.sqrt() / 2.0]]);
        // Equilateral: 60° each, to rounding of atan2 (1e-12 degrees is ~1e4 ulps of 60).
        assert!(eq.iter().all(|a| (a - 60.0).abs() < 1e-12), "{eq:?}");
        let right = angles_deg([[0.0, 0.0], [1.0, 0.0], [0.0, 1.0]]);
        assert!((right[0] - 90.0).abs() < 1e-12 && (right[1] - 45.0).abs() < 1e-12);
    }

    #[test]
    fn structured_rectangle_statistics() {
        let m = rectangle([0.0, 0.0], [2.0, 1.0], 4, 2, |_, _| [0.0, 0.0]).unwrap();
        let st = stats(&m);
        // Cells are halves of 0.5 × 0.5 squares: right isosceles triangles.
        assert!((st.min_angle_all_deg - 45.0).abs() < 1e-12);
        assert!((st.max_angle_deg - 90.0).abs() < 1e-12);
        assert_eq!(st.n_angle_limited, 0, "no corner is sharper than 60°");
        assert_eq!(st.edges_per_part, vec![4, 2, 4, 2]);
        assert_eq!(st.n_boundary_triangles, 0);
        assert!((st.area - 2.0).abs() < 1e-14);
        assert_eq!(cell_quality(&m).len(), 16);
    }
}
