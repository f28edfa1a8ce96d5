//! Triangular meshes of a [`Domain`](crate::geometry::Domain): linear triangles from spade's
//! constrained Delaunay triangulation, lifted to six-node (quadratic) triangles.
//!
//! Takes a domain and [`MeshControls`]; returns a [`Mesh`] whose boundary edges carry the
//! id of the boundary part they lie on.
//!
//! **Invariant:** the mesh module never sees boundary-condition values or fluid properties;
//! it knows parts only by their id and name.

pub mod bisect;
pub mod dissection;
pub mod generate;
pub mod quality;
pub mod refine;
mod size;
pub mod structured;
mod validate;

use std::collections::HashMap;
use std::hash::{BuildHasherDefault, Hasher};

pub use generate::{estimate_triangles, generate};
pub use quality::{MeshStats, cell_quality, stats};

use crate::geometry::{Circle, PartId, Point};

/// Grading toward a point: target edge length `h(r) = min(h_max, h_min + growth * r)`,
/// with `r` the distance to `point`.
#[derive(Clone, Debug, PartialEq)]
pub struct Grading {
    pub point: Point,
    pub h_min: f64,
    pub growth: f64,
}

/// Mesh-size and quality controls.
#[derive(Clone, Debug, PartialEq)]
pub struct MeshControls {
    /// Global target edge length `h_max`.
    pub size: f64,
    /// Target edge length along each boundary part (indexed by [`PartId`]); `None` uses `size`.
    pub part_sizes: Vec<Option<f64>>,
    /// Local refinement toward points (corners, trailing edges).
    pub grading: Vec<Grading>,
    /// Minimum interior angle in degrees that refinement aims for (≤ 30 for guaranteed termination).
    pub min_angle_deg: f64,
    /// Refuse to mesh when the estimated triangle count exceeds this.
    pub max_triangles: usize,
}

/// A boundary edge of the quadratic mesh: end nodes `a`, `b` and midpoint node `m`
/// (`nodes = [a, b, m]`), oriented so that the fluid lies on the left of `a -> b`.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct BoundaryEdge {
    pub nodes: [usize; 3],
    pub part: PartId,
    /// The triangle the edge belongs to.
    pub cell: usize,
}

/// A conforming mesh of six-node triangles.
///
/// Node numbering: the first `n_vertices` nodes are triangle corners, the remaining ones are
/// edge midpoints. Cells list `[v0, v1, v2, m01, m12, m20]` (VTK quadratic-triangle order),
/// counter-clockwise.
#[derive(Clone, Debug, PartialEq)]
pub struct Mesh {
    pub nodes: Vec<Point>,
    pub n_vertices: usize,
    pub cells: Vec<[usize; 6]>,
    pub boundary_edges: Vec<BoundaryEdge>,
    pub part_names: Vec<String>,
    /// Per part: the circle it approximates, if declared (for snapping on refinement).
    pub part_circles: Vec<Option<Circle>>,
}

/// Errors from mesh construction.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum MeshError {
    #[error("triangle {cell} has non-positive area {area:e} (vertices not counter-clockwise)")]
    InvertedTriangle { cell: usize, area: f64 },
    #[error("edge ({a}, {b}) is on the mesh boundary but belongs to no boundary part")]
    UntaggedBoundaryEdge { a: usize, b: usize },
    #[error("tagged boundary segment ({a}, {b}) is not an edge on the mesh boundary")]
    TaggedInteriorEdge { a: usize, b: usize },
    #[error("edge ({a}, {b}) is shared by more than two triangles")]
    NonManifoldEdge { a: usize, b: usize },
    #[error("mesh invariant violated: {0}")]
    Invariant(String),
    #[error(
        "the mesh would have about {estimate:.0} triangles, more than the cap of {cap}; \
         coarsen the mesh controls or raise the cap"
    )]
    TooManyTriangles { estimate: f64, cap: usize },
    #[error("mesh control `{key}` = {value}: {reason}")]
    InvalidControl { key: String, value: f64, reason: &'static str },
    #[error("boundary loop `{loop_name}`: {reason}")]
    InvalidLoop { loop_name: String, reason: String },
    #[error(
        "boundary loop `{loop_a}` edge {edge_a} intersects or touches loop `{loop_b}` edge {edge_b}"
    )]
    Intersection { loop_a: String, edge_a: usize, loop_b: String, edge_b: usize },
    #[error("hole `{hole}` is not inside the outer loop or lies inside another hole")]
    HoleOutside { hole: String },
    #[error("triangulation failed: {0}")]
    Triangulation(String),
    #[error(
        "refinement stopped at its budget of {budget} added vertices before reaching the \
         requested size and angle; lower `min_angle_deg` or coarsen the mesh"
    )]
    RefinementIncomplete { budget: usize },
    #[error(
        "{count} triangles still have all three vertices on the boundary after {passes} passes; \
         use a smaller mesh size"
    )]
    BoundaryTriangles { count: usize, passes: usize },
}

impl Mesh {
    /// Lifts a linear triangulation to six-node triangles.
    ///
    /// `triangles` must be counter-clockwise; `boundary_segments` lists every edge on the
    /// domain boundary once, with its part. Midpoint nodes are shared between neighbours and
    /// appended after the vertices in order of first appearance (deterministic).
    ///
    /// # Errors
    /// A [`MeshError`] when a triangle is inverted, a boundary edge is untagged, a tagged
    /// segment is not on the boundary, or an edge has more than two triangles.
    pub fn from_linear(
        vertices: Vec<Point>,
        triangles: &[[usize; 3]],
        boundary_segments: &[([usize; 2], PartId)],
        part_names: Vec<String>,
        part_circles: Vec<Option<Circle>>,
    ) -> Result<Mesh, MeshError> {
        let n_vertices = vertices.len();
        let mut nodes = vertices;
        // Edge key (min, max) -> (midpoint node, number of triangles, first cell, oriented a->b in first cell).
        let mut edges: EdgeMap<EdgeUse> =
            EdgeMap::with_capacity_and_hasher(triangles.len() * 2, Default::default());
        let mut cells = Vec::with_capacity(triangles.len());
        for (cell, t) in triangles.iter().enumerate() {
            let area = triangle_area(nodes[t[0]], nodes[t[1]], nodes[t[2]]);
            if area <= 0.0 {
                return Err(MeshError::InvertedTriangle { cell, area });
            }
            let mut mids = [0usize; 3];
            for k in 0..3 {
                let (a, b) = (t[k], t[(k + 1) % 3]);
                let key = (a.min(b), a.max(b));
                let entry = edges.entry(key).or_insert_with(|| {
                    let (pa, pb) = (nodes[a], nodes[b]);
                    nodes.push([0.5 * (pa[0] + pb[0]), 0.5 * (pa[1] + pb[1])]);
                    EdgeUse { mid: nodes.len() - 1, count: 0, cell, from: a }
                });
                entry.count += 1;
                if entry.count > 2 {
                    return Err(MeshError::NonManifoldEdge { a, b });
                }
                mids[k] = entry.mid;
            }
            cells.push([t[0], t[1], t[2], mids[0], mids[1], mids[2]]);
        }
        let boundary_edges = tag_boundary(&edges, boundary_segments)?;
        Ok(Mesh { nodes, n_vertices, cells, boundary_edges, part_names, part_circles })
    }

    /// Number of six-node triangles.
    /// The (one or two) cells on each vertex-pair edge, keyed by `(min, max)` vertex index;
    /// `usize::MAX` marks the missing second cell of a boundary edge.
    pub(crate) fn edge_cells(&self) -> EdgeCells {
        let mut map: EdgeCells =
            EdgeMap::with_capacity_and_hasher(3 * self.cells.len() / 2 + 8, Default::default());
        for (c, cell) in self.cells.iter().enumerate() {
            for k in 0..3 {
                let (a, b) = (cell[k], cell[(k + 1) % 3]);
                let slot = map.entry(edge_key(a, b)).or_insert([usize::MAX; 2]);
                slot[usize::from(slot[0] != usize::MAX)] = c;
            }
        }
        map
    }

    pub fn n_cells(&self) -> usize {
        self.cells.len()
    }

    /// Corner coordinates of cell `c`.
    pub fn cell_vertices(&self, c: usize) -> [Point; 3] {
        let t = &self.cells[c];
        [self.nodes[t[0]], self.nodes[t[1]], self.nodes[t[2]]]
    }

    /// Length of the longest edge of cell `c` (its diameter).
    pub fn longest_edge(&self, c: usize) -> f64 {
        let [a, b, d] = self.cell_vertices(c);
        let len = |p: Point, q: Point| (p[0] - q[0]).hypot(p[1] - q[1]);
        len(a, b).max(len(b, d)).max(len(d, a))
    }

    /// Total area of the triangles (straight-sided).
    pub fn area(&self) -> f64 {
        (0..self.cells.len())
            .map(|c| {
                let [a, b, d] = self.cell_vertices(c);
                triangle_area(a, b, d)
            })
            .sum()
    }

    /// Checks the structural invariants: positive areas, shared midpoints, every topological
    /// boundary edge tagged exactly once and oriented with the fluid on its left, midpoints at
    /// edge centres (or on the declared circle), and node indices in range.
    ///
    /// # Errors
    /// The first violated invariant.
    pub fn check_invariants(&self) -> Result<(), MeshError> {
        let mut edges: HashMap<(usize, usize), (usize, usize, usize)> = HashMap::new();
        for (c, cell) in self.cells.iter().enumerate() {
            if cell.iter().any(|&n| n >= self.nodes.len()) {
                return Err(MeshError::Invariant(format!("cell {c} has a node out of range")));
            }
            if cell[..3].iter().any(|&v| v >= self.n_vertices)
                || cell[3..].iter().any(|&m| m < self.n_vertices)
            {
                return Err(MeshError::Invariant(format!(
                    "cell {c} mixes vertex and midpoint slots"
                )));
            }
            let area = triangle_area(self.nodes[cell[0]], self.nodes[cell[1]], self.nodes[cell[2]]);
            if area <= 0.0 {
                return Err(MeshError::InvertedTriangle { cell: c, area });
            }
            for k in 0..3 {
                let (a, b, m) = (cell[k], cell[(k + 1) % 3], cell[3 + k]);
                let e = edges.entry((a.min(b), a.max(b))).or_insert((m, 0, a));
                if e.0 != m {
                    return Err(MeshError::Invariant(format!("edge ({a}, {b}) has two midpoints")));
                }
                e.1 += 1;
                if e.1 > 2 {
                    return Err(MeshError::NonManifoldEdge { a, b });
                }
            }
        }
        let mut tagged: HashMap<(usize, usize), usize> = HashMap::new();
        for be in &self.boundary_edges {
            let [a, b, m] = be.nodes;
            if be.part >= self.part_names.len() {
                return Err(MeshError::Invariant(format!(
                    "boundary edge ({a}, {b}) has unknown part {}",
                    be.part
                )));
            }
            match edges.get(&(a.min(b), a.max(b))) {
                Some(&(mid, 1, from)) if mid == m && from == a => {}
                Some(&(_, 1, _)) => {
                    return Err(MeshError::Invariant(format!(
                        "boundary edge ({a}, {b}) is misoriented or has the wrong midpoint"
                    )));
                }
                _ => return Err(MeshError::TaggedInteriorEdge { a, b }),
            }
            *tagged.entry((a.min(b), a.max(b))).or_insert(0) += 1;
        }
        for (&(a, b), &(_, count, _)) in &edges {
            let n_tags = tagged.get(&(a, b)).copied().unwrap_or(0);
            if count == 1 && n_tags != 1 {
                return Err(MeshError::UntaggedBoundaryEdge { a, b });
            }
        }
        Ok(())
    }
}

/// Hash map keyed by vertex-index pairs with a fixed multiplicative hash: deterministic and
/// several times faster than the default SipHash on the millions of edges of a large mesh
/// (keys are small integers from the mesher, not adversarial input).
/// The key of the edge between vertices `a` and `b` in an [`EdgeMap`]: `(min, max)`.
pub(crate) fn edge_key(a: usize, b: usize) -> (usize, usize) {
    (a.min(b), a.max(b))
}

/// Cells per edge (see [`Mesh::edge_cells`]).
pub(crate) type EdgeCells = EdgeMap<[usize; 2]>;
pub(crate) type EdgeMap<V> = HashMap<(usize, usize), V, BuildHasherDefault<EdgeHasher>>;

/// Multiply-rotate hasher for integer keys (the scheme of the Firefox/rustc "Fx" hash).
#[derive(Default)]
pub(crate) struct EdgeHasher(u64);

impl Hasher for EdgeHasher {
    fn finish(&self) -> u64 {
        self.0
    }

    fn write(&mut self, bytes: &[u8]) {
        bytes.iter().for_each(|&b| self.write_u64(u64::from(b)));
    }

    fn write_u64(&mut self, i: u64) {
        self.0 = (self.0.rotate_left(5) ^ i).wrapping_mul(0x51_7c_c1_b7_27_22_0a_95);
    }

    fn write_usize(&mut self, i: usize) {
        self.write_u64(i as u64);
    }
}

struct EdgeUse {
    mid: usize,
    count: usize,
    cell: usize,
    /// First vertex of the edge as traversed counter-clockwise by `cell`.
    from: usize,
}

fn tag_boundary(
    edges: &EdgeMap<EdgeUse>,
    boundary_segments: &[([usize; 2], PartId)],
) -> Result<Vec<BoundaryEdge>, MeshError> {
    let mut tagged = HashMap::with_capacity(boundary_segments.len());
    let mut out = Vec::with_capacity(boundary_segments.len());
    for &([a, b], part) in boundary_segments {
        let key = (a.min(b), a.max(b));
        match edges.get(&key) {
            Some(e) if e.count == 1 => {
                let (from, to) = if e.from == key.0 { (key.0, key.1) } else { (key.1, key.0) };
                tagged.insert(key, part);
                out.push(BoundaryEdge { nodes: [from, to, e.mid], part, cell: e.cell });
            }
            _ => return Err(MeshError::TaggedInteriorEdge { a, b }),
        }
    }
    // Every topological boundary edge must carry a tag. Sort for a deterministic error.
    let mut untagged: Vec<_> = edges
        .iter()
        .filter(|(k, e)| e.count == 1 && !tagged.contains_key(k))
        .map(|(k, _)| *k)
        .collect();
    untagged.sort_unstable();
    if let Some(&(a, b)) = untagged.first() {
        return Err(MeshError::UntaggedBoundaryEdge { a, b });
    }
    Ok(out)
}

/// Signed area of the triangle `(a, b, c)`: positive when counter-clockwise.
pub fn triangle_area(a: Point, b: Point, c: Point) -> f64 {
    0.5 * ((b[0] - a[0]) * (c[1] - a[1]) - (c[0] - a[0]) * (b[1] - a[1]))
}
