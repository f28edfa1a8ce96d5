//! Local refinement by newest-vertex bisection with conforming closure.
//!
//! Takes a [`Mesh`] and a set of marked triangles; returns a conforming mesh in which every
//! marked triangle has been bisected at least once, together with the parent (in the input
//! mesh) of every new triangle, so the meshes of an adaptive sequence are nested.
//!
//! **Convention.** In a cell `[v0, v1, v2, …]` the *refinement edge* is `v0 v1` and `v2` is
//! the newest vertex. Bisecting it at the midpoint `m` of `v0 v1` gives the children
//! `[v2, v0, m]` and `[v1, v2, m]`: each child's refinement edge is the edge opposite its
//! newest vertex `m`, and both keep the counter-clockwise orientation. Start a sequence with
//! [`Mesh::with_longest_edge_first`], which puts every triangle's longest edge first: with
//! that initial labelling the closure terminates (a chain of forced bisections crosses edges
//! of strictly growing length) and, since the children of a triangle fall into at most four
//! similarity classes, the minimum angle stays bounded below by a fixed fraction of the
//! initial one (Mitchell 1991; Sewell 1972; Binev, Dahmen & DeVore 2004; from memory).
//!
//! **Closure.** A triangle whose edge carries a new vertex is bisected (at its refinement
//! edge) until no edge of any triangle carries one; this is the recursive completion of
//! newest-vertex bisection, done with a worklist so the cost is linear in the number of
//! bisections.
//!
//! **Boundary.** Every boundary edge keeps its part: a split boundary edge becomes two edges of
//! the same part and orientation. New boundary vertices on a part with a declared circle are
//! moved radially onto the circle, unless that would invert a triangle (then the vertex stays
//! on the chord), and so are the quadratic midpoints of such parts.

use super::refine::{lift_children, project_onto_circle};
use super::{EdgeMap, Mesh, MeshError, edge_key as key, triangle_area};
use crate::geometry::Point;

/// A locally refined mesh and the parent of each of its cells.
#[derive(Clone, Debug, PartialEq)]
pub struct BisectedMesh {
    pub mesh: Mesh,
    /// `parent[c]`: the cell of the input mesh that contains cell `c`.
    pub parent: Vec<usize>,
}

/// Bisections allowed per input triangle before the closure is declared runaway (it needs a
/// handful per triangle in practice; the bound only guards against an invalid labelling).
const BISECTIONS_PER_CELL: usize = 64;

impl Mesh {
    /// The same mesh with every cell's vertices rotated (keeping orientation and the
    /// midpoints matched) so that its longest edge is `v0 v1`: the initial labelling for
    /// [`Mesh::refine_marked`].
    pub fn with_longest_edge_first(&self) -> Mesh {
        let mut out = self.clone();
        for (c, cell) in out.cells.iter_mut().enumerate() {
            let v = self.cell_vertices(c);
            let len = |i: usize| distance(v[i], v[(i + 1) % 3]);
            let k = (0..3).max_by(|&a, &b| len(a).total_cmp(&len(b))).unwrap_or(0);
            let c0 = *cell;
            *cell =
                std::array::from_fn(|i| if i < 3 { c0[(i + k) % 3] } else { c0[3 + (i + k) % 3] });
        }
        out
    }

    /// Bisects every cell with `marked[c]` once at its refinement edge (`v0 v1`), then
    /// bisects further cells until the mesh is conforming (see the module notes).
    ///
    /// # Errors
    /// [`MeshError::Invariant`] when `marked` does not have one entry per cell or the closure
    /// runs away (a labelling that is not the one of [`Mesh::with_longest_edge_first`] or of
    /// an earlier bisection).
    pub fn refine_marked(
        &self,
        marked: &[bool],
        snap_to_circles: bool,
    ) -> Result<BisectedMesh, MeshError> {
        if marked.len() != self.n_cells() {
            return Err(MeshError::Invariant(format!(
                "{} marks for {} triangles",
                marked.len(),
                self.n_cells()
            )));
        }
        let mut work = Bisector::new(self);
        work.refine(marked)?;
        let boundary = work.boundary_halves(self);
        let (vertices, children, parent) = work.finish();
        let vertices = if snap_to_circles {
            snap_boundary_vertices(self, vertices, &children, &boundary)
        } else {
            vertices
        };
        let mesh = lift_children(vertices, &children, &boundary, self, snap_to_circles);
        Ok(BisectedMesh { mesh, parent })
    }
}

fn distance(a: Point, b: Point) -> f64 {
    (a[0] - b[0]).hypot(a[1] - b[1])
}

/// No triangle on this side of an edge.
const NONE: usize = usize::MAX;

/// Linear triangles under bisection: `tris[t] = [v0, v1, v2]` with refinement edge `v0 v1`.
struct Bisector {
    vertices: Vec<Point>,
    tris: Vec<[usize; 3]>,
    parent: Vec<usize>,
    /// The (at most two) triangles on each edge of the current triangulation.
    edge_cells: EdgeMap<[usize; 2]>,
    /// The new vertex on each split edge.
    midpoint: EdgeMap<usize>,
    worklist: Vec<usize>,
    budget: usize,
}

impl Bisector {
    fn new(mesh: &Mesh) -> Self {
        let tris: Vec<[usize; 3]> = mesh.cells.iter().map(|c| [c[0], c[1], c[2]]).collect();
        let mut edge_cells: EdgeMap<[usize; 2]> =
            EdgeMap::with_capacity_and_hasher(3 * tris.len() / 2 + 8, Default::default());
        for (t, tri) in tris.iter().enumerate() {
            for k in 0..3 {
                add_cell(&mut edge_cells, key(tri[k], tri[(k + 1) % 3]), t);
            }
        }
        Bisector {
            vertices: mesh.nodes[..mesh.n_vertices].to_vec(),
            parent: (0..tris.len()).collect(),
            budget: BISECTIONS_PER_CELL * tris.len().max(1),
            tris,
            edge_cells,
            midpoint: EdgeMap::default(),
            worklist: Vec::new(),
        }
    }

    fn refine(&mut self, marked: &[bool]) -> Result<(), MeshError> {
        for (t, _) in marked.iter().enumerate().filter(|(_, m)| **m) {
            self.bisect(t)?;
        }
        while let Some(t) = self.worklist.pop() {
            let [a, b, c] = self.tris[t];
            let hanging = [(a, b), (b, c), (c, a)]
                .iter()
                .any(|&(p, q)| self.midpoint.contains_key(&key(p, q)));
            if hanging {
                self.bisect(t)?;
            }
        }
        Ok(())
    }

    /// Bisects triangle `t` at its refinement edge; child 1 keeps the slot `t`.
    fn bisect(&mut self, t: usize) -> Result<(), MeshError> {
        if self.budget == 0 {
            return Err(MeshError::Invariant(
                "bisection closure did not terminate (refinement edges not labelled by \
                 Mesh::with_longest_edge_first)"
                    .into(),
            ));
        }
        self.budget -= 1;
        let [a, b, c] = self.tris[t];
        let m = self.split_edge(a, b);
        let t2 = self.tris.len();
        self.tris[t] = [c, a, m];
        self.tris.push([b, c, m]);
        self.parent.push(self.parent[t]);
        remove_cell(&mut self.edge_cells, key(a, b), t);
        add_cell(&mut self.edge_cells, key(a, m), t);
        add_cell(&mut self.edge_cells, key(m, b), t2);
        remove_cell(&mut self.edge_cells, key(b, c), t);
        add_cell(&mut self.edge_cells, key(b, c), t2);
        add_cell(&mut self.edge_cells, key(c, m), t);
        add_cell(&mut self.edge_cells, key(c, m), t2);
        self.worklist.extend([t, t2]);
        Ok(())
    }

    /// The vertex at the midpoint of edge `a b`, created (and the neighbour across the edge
    /// queued for the closure) on first use.
    fn split_edge(&mut self, a: usize, b: usize) -> usize {
        if let Some(&m) = self.midpoint.get(&key(a, b)) {
            return m;
        }
        let (pa, pb) = (self.vertices[a], self.vertices[b]);
        self.vertices.push([0.5 * (pa[0] + pb[0]), 0.5 * (pa[1] + pb[1])]);
        let m = self.vertices.len() - 1;
        self.midpoint.insert(key(a, b), m);
        if let Some(cells) = self.edge_cells.get(&key(a, b)) {
            self.worklist.extend(cells.iter().copied().filter(|&c| c != NONE));
        }
        m
    }

    /// The boundary edges of the refined mesh as `(parent edge, [from, to, cell], part)`:
    /// each input boundary edge split recursively through the new midpoints, in order.
    fn boundary_halves(&self, mesh: &Mesh) -> Vec<(usize, [usize; 3], usize)> {
        let mut out = Vec::with_capacity(mesh.boundary_edges.len() + self.midpoint.len() / 4);
        for (i, be) in mesh.boundary_edges.iter().enumerate() {
            let mut stack = vec![(be.nodes[0], be.nodes[1])];
            while let Some((a, b)) = stack.pop() {
                match self.midpoint.get(&key(a, b)) {
                    // Push the second half first so halves come out in boundary order.
                    Some(&m) => stack.extend([(m, b), (a, m)]),
                    None => {
                        let cell = self.edge_cells.get(&key(a, b)).map_or(0, |c| c[0]);
                        out.push((i, [a, b, cell], be.part));
                    }
                }
            }
        }
        out
    }

    fn finish(self) -> (Vec<Point>, Vec<[usize; 3]>, Vec<usize>) {
        (self.vertices, self.tris, self.parent)
    }
}

fn add_cell(map: &mut EdgeMap<[usize; 2]>, edge: (usize, usize), t: usize) {
    let slot = map.entry(edge).or_insert([NONE; 2]);
    if slot[0] == NONE {
        slot[0] = t;
    } else {
        slot[1] = t;
    }
}

fn remove_cell(map: &mut EdgeMap<[usize; 2]>, edge: (usize, usize), t: usize) {
    if let Some(slot) = map.get_mut(&edge) {
        if slot[0] == t {
            *slot = [slot[1], NONE];
        } else if slot[1] == t {
            slot[1] = NONE;
        }
        if slot[0] == NONE {
            map.remove(&edge);
        }
    }
}

/// Moves the new boundary vertices of parts with a circle radially onto it; a triangle that
/// would be inverted gets its vertices back on the chord.
fn snap_boundary_vertices(
    mesh: &Mesh,
    mut vertices: Vec<Point>,
    tris: &[[usize; 3]],
    boundary: &[(usize, [usize; 3], usize)],
) -> Vec<Point> {
    let chord = vertices.clone();
    for &(_, [a, _, _], part) in boundary {
        if let Some(circle) = mesh.part_circles.get(part).copied().flatten()
            && a >= mesh.n_vertices
        {
            vertices[a] = project_onto_circle(chord[a], circle);
        }
    }
    // Reverting a triangle's vertices can only fix it; a few passes settle mixed neighbours.
    for _ in 0..4 {
        let mut reverted = false;
        for t in tris {
            let area = triangle_area(vertices[t[0]], vertices[t[1]], vertices[t[2]]);
            if area <= 0.0 && t.iter().any(|&v| vertices[v] != chord[v]) {
                t.iter().for_each(|&v| vertices[v] = chord[v]);
                reverted = true;
            }
        }
        if !reverted {
            break;
        }
    }
    vertices
}

#[cfg(test)]
mod tests {
    use crate::mesh::structured::rectangle;

    #[test]
    fn marked_corner_cell_refines_conformingly_and_keeps_area_and_tags() {
        let m = rectangle([0.0, 0.0], [2.0, 1.0], 4, 2, |_, _| [0.0, 0.0])
            .unwrap()
            .with_longest_edge_first();
        m.check_invariants().unwrap();
        let mut marked = vec![false; m.n_cells()];
        marked[0] = true;
        let mut current = m.clone();
        let mut marks = marked;
        for _ in 0..6 {
            let out = current.refine_marked(&marks, false).unwrap();
            out.mesh.check_invariants().unwrap();
            assert!((out.mesh.area() - 2.0).abs() < 1e-13);
            assert!(out.mesh.n_cells() > current.n_cells());
            assert_eq!(out.parent.len(), out.mesh.n_cells());
            // Refine the cell touching the origin again.
            marks = (0..out.mesh.n_cells())
                .map(|c| out.mesh.cells[c][..3].iter().any(|&v| out.mesh.nodes[v] == [0.0, 0.0]))
                .collect();
            current = out.mesh;
        }
        // Boundary length is unchanged and every boundary edge is a straight half.
        let length: f64 = current
            .boundary_edges
            .iter()
            .map(|e| super::distance(current.nodes[e.nodes[0]], current.nodes[e.nodes[1]]))
            .sum();
        assert!((length - 6.0).abs() < 1e-12);
    }
}
