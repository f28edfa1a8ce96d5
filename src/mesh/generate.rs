//! The unstructured mesher: constrained Delaunay triangulation and refinement of a
//! [`Domain`], lifted to six-node triangles.
//!
//! Takes a domain and [`MeshControls`]; returns a [`Mesh`] whose boundary edges carry their
//! part ids, with [`MeshStats`]. The stages are:
//!
//! 1. validate the domain and controls, estimate the triangle count and refuse above the cap;
//! 2. triangulate the input loops with spade's constrained Delaunay triangulation and refine
//!    it (Ruppert/Chew refinement with an angle limit and a global area cap);
//! 3. reach the local size field by inserting interior points into every triangle larger than
//!    `√3/4 · h(centroid)²` and refining again, until none is left;
//! 4. make refinement split every boundary edge longer than its part size (or 1.25 times the
//!    local field) by temporarily inserting points that encroach on it: spade splits
//!    constraint edges itself, which keeps the faces outside the domain well-shaped (boundary
//!    points computed outside spade are a rounding step off their line, and the slivers they
//!    leave outside the domain stop spade from splitting segments later);
//! 5. insert a point into every triangle whose three vertices lie on the boundary (a
//!    Taylor–Hood element needs an interior vertex), see `repair_boundary_triangles`;
//! 6. recover the part of every boundary edge by walking the chain of split constraint edges
//!    from each input segment's start to its end (split edges carry no data in spade);
//! 7. renumber vertices along a Morton (Z-order) curve for locality and lift to P2.
//!
//! **Invariant:** boundary parts are never inferred from coordinates: split points are
//! rounded and may lie one ulp off a wall.

use std::collections::HashSet;
use std::panic::{AssertUnwindSafe, catch_unwind};

use spade::handles::{FixedFaceHandle, InnerTag};
use spade::{
    AngleLimit, ConstrainedDelaunayTriangulation, Point2, PositionInTriangulation,
    RefinementParameters, Triangulation,
};

use super::quality::{MeshStats, stats};
use super::size::{self, EQUILATERAL_AREA, SizeField};
use super::validate::{check_controls, check_domain};
use super::{Mesh, MeshControls, MeshError};
use crate::geometry::{Circle, Domain, PartId, Point};

type Cdt = ConstrainedDelaunayTriangulation<Point2<f64>>;
type FaceSet = HashSet<FixedFaceHandle<InnerTag>>;

/// Calibration factor: triangles produced per equilateral triangle of side `h(x)` in the
/// domain, measured on this mesher (test `estimate_is_within_its_documented_accuracy` in
/// `tests/mesh_props.rs`): Delaunay refinement with an area cap leaves triangles at about
/// 0.6 of the cap.
pub const ESTIMATE_FACTOR: f64 = 1.62;

/// Extra triangles per boundary edge that is finer than the interior field requires (the
/// graded layer that refinement builds next to a finely split boundary part). Measured like
/// [`ESTIMATE_FACTOR`].
pub const ESTIMATE_BOUNDARY_FACTOR: f64 = 20.0;

/// Passes of the insert-and-refine loop for the local size field before giving up.
const MAX_SIZE_PASSES: usize = 60;

/// Boundary edges on a part without its own size are split when longer than this times the
/// local field `h`. The area criterion lets interior edges reach about 1.5 `h` as well, so
/// boundary edges up to 1.25 `h` are consistent with it, and the extra refinement passes
/// are skipped on uniform meshes (common practice, no source).
const FIELD_BOUNDARY_SLACK: f64 = 1.25;

/// Insert-and-refine passes of the boundary-triangle repair before it stops refining.
const MAX_BOUNDARY_PASSES: usize = 8;

/// Meshes `domain` with six-node triangles.
///
/// The target edge length is `h(x) = min(size, h_min + growth·r)` over the gradings; every
/// triangle has area at most `√3/4 · h(centroid)²` (an equilateral triangle of side `h`),
/// boundary segments are split to `min(part size, h)`. Part sizes finer than the field are
/// honoured on their part and graded into the interior by the refinement; coarser ones are
/// limited by the interior field, since interior refinement splits the segments it
/// encroaches. The minimum angle is `controls.min_angle_deg` except next to input corners
/// sharper than 60° (see [`MeshStats::min_angle_deg`]). No triangle has all three vertices
/// on the boundary. The same input gives the same mesh.
///
/// # Errors
/// - [`MeshError::InvalidControl`], [`MeshError::InvalidLoop`], [`MeshError::Intersection`],
///   [`MeshError::HoleOutside`] for bad input;
/// - [`MeshError::TooManyTriangles`] when [`estimate_triangles`] exceeds
///   `controls.max_triangles`;
/// - [`MeshError::Triangulation`], [`MeshError::RefinementIncomplete`],
///   [`MeshError::BoundaryTriangles`] when meshing fails.
///
/// # References
/// J. Ruppert, *A Delaunay refinement algorithm for quality 2-dimensional mesh generation*,
/// J. Algorithms 18 (1995) 548–585; J. R. Shewchuk, *Delaunay refinement algorithms for
/// triangular mesh generation*, Comput. Geom. 22 (2002) 21–74 (both as implemented in spade).
pub fn generate(domain: &Domain, controls: &MeshControls) -> Result<(Mesh, MeshStats), MeshError> {
    let estimate = checked_estimate(domain, controls)?;
    if estimate > controls.max_triangles as f64 {
        return Err(MeshError::TooManyTriangles { estimate, cap: controls.max_triangles });
    }
    let field = SizeField::new(controls);
    let input = raw_boundary(domain);
    let budget = vertex_budget(estimate, input.points.len());
    let linear = guarded(|| triangulate(&input, controls, &field, budget))??;
    let (vertices, triangles, segments) = renumber(linear);
    let mesh = Mesh::from_linear(
        vertices,
        &triangles,
        &segments,
        domain.part_names.clone(),
        part_circles(domain),
    )?;
    let mut st = stats(&mesh);
    st.estimated_triangles = Some(estimate);
    Ok((mesh, st))
}

/// Estimated number of triangles [`generate`] produces, computed before meshing:
/// `N ≈ 1.62 · ∫ dA / (√3/4 · h(x)²) + 20 · (boundary edges beyond what the field needs)`.
///
/// The integral is taken adaptively over a coarse triangulation of the domain. Returns NaN
/// when the domain or controls are invalid ([`generate`] reports why). Accuracy, measured
/// as actual / estimate: 0.96–1.00 for uniform sizes on the channel (4k–130k triangles) and
/// the unit square, 0.96–0.97 with part sizes 8–10× finer than the field, 1.24 for strong
/// grading toward a point (`h_min = size/25`, growth 0.2), where refinement cannot follow
/// the field exactly; the test accepts 0.8–1.4.
pub fn estimate_triangles(domain: &Domain, controls: &MeshControls) -> f64 {
    checked_estimate(domain, controls).unwrap_or(f64::NAN)
}

fn checked_estimate(domain: &Domain, controls: &MeshControls) -> Result<f64, MeshError> {
    check_controls(controls, domain.part_names.len())?;
    check_domain(domain)?;
    let field = SizeField::new(controls);
    let coarse = guarded(|| coarse_triangles(domain))??;
    let interior = size::equilateral_count(&coarse, &field);
    Ok(ESTIMATE_FACTOR * interior + ESTIMATE_BOUNDARY_FACTOR * excess_boundary(domain, controls))
}

/// Boundary pieces beyond what the interior field alone would cut (part sizes finer than `h`).
fn excess_boundary(domain: &Domain, controls: &MeshControls) -> f64 {
    let field = SizeField::new(controls);
    let mut excess = 0.0;
    for l in domain.loops() {
        for e in 0..l.n_edges() {
            let (a, b) = l.edge(e);
            let Some(ps) = part_size(controls, l.edge_parts[e]) else { continue };
            if controls.grading.is_empty() {
                // Constant field: both integrals are length / size.
                excess += size::dist(a, b) * (1.0 / ps.min(controls.size) - 1.0 / controls.size);
                continue;
            }
            let with_part = size::cumulative_inverse_size(a, b, Some(ps), &field);
            let without = size::cumulative_inverse_size(a, b, None, &field);
            let (np, nf) = (with_part[with_part.len() - 1], without[without.len() - 1]);
            excess += (np - nf).max(0.0);
        }
    }
    excess
}

/// The domain triangulated with its input vertices only (for the estimate's integral).
fn coarse_triangles(domain: &Domain) -> Result<Vec<[Point; 3]>, MeshError> {
    let input = raw_boundary(domain);
    let mut cdt = load(&input)?;
    let excluded = excluded_faces(&mut cdt);
    Ok(cdt
        .inner_faces()
        .filter(|f| !excluded.contains(&f.fix()))
        .map(|f| f.positions().map(|p| [p.x, p.y]))
        .collect())
}

/// Boundary vertices and segments (with parts) handed to spade.
struct BoundaryInput {
    points: Vec<Point>,
    segments: Vec<([usize; 2], PartId)>,
}

/// A linear triangulation: vertices, counter-clockwise triangles, tagged boundary edges.
type Linear = (Vec<Point>, Vec<[usize; 3]>, Vec<([usize; 2], PartId)>);

fn part_size(controls: &MeshControls, part: PartId) -> Option<f64> {
    controls.part_sizes.get(part).copied().flatten()
}

/// The input loops without splitting.
fn raw_boundary(domain: &Domain) -> BoundaryInput {
    let mut input = BoundaryInput { points: Vec::new(), segments: Vec::new() };
    for l in domain.loops() {
        let start = input.points.len();
        input.points.extend_from_slice(&l.points);
        let n = l.n_edges();
        input.segments.extend((0..n).map(|e| ([start + e, start + (e + 1) % n], l.edge_parts[e])));
    }
    input
}

/// Vertex budget for refinement: eight times the vertices the estimate implies (a mesh of
/// `N` triangles has about `N / 2` vertices), so only a runaway refinement hits it.
fn vertex_budget(estimate: f64, n_input: usize) -> usize {
    (4.0 * estimate).min(1e15) as usize + 10 * n_input + 10_000
}

/// Runs `f`, turning a panic inside spade (e.g. its precision-loss `expect`) into an error.
fn guarded<T>(f: impl FnOnce() -> T) -> Result<T, MeshError> {
    catch_unwind(AssertUnwindSafe(f)).map_err(|payload| {
        let msg = payload
            .downcast_ref::<&str>()
            .map(|s| s.to_string())
            .or_else(|| payload.downcast_ref::<String>().cloned())
            .unwrap_or_else(|| "unknown panic".to_string());
        MeshError::Triangulation(format!("spade failed: {msg}"))
    })
}

/// Bulk-loads the constrained triangulation and checks that spade kept the vertex order.
fn load(input: &BoundaryInput) -> Result<Cdt, MeshError> {
    let pts = input.points.iter().map(|p| Point2::new(p[0], p[1])).collect();
    let edges = input.segments.iter().map(|s| s.0).collect();
    let cdt = Cdt::bulk_load_cdt(pts, edges)
        .map_err(|e| MeshError::Triangulation(format!("spade rejected a boundary point: {e:?}")))?;
    let kept = cdt.num_vertices() == input.points.len()
        && cdt.vertices().zip(&input.points).all(|(v, p)| {
            let q = v.position();
            q.x == p[0] && q.y == p[1]
        });
    if !kept {
        return Err(MeshError::Triangulation(
            "spade merged or reordered boundary points (points too close together?)".into(),
        ));
    }
    Ok(cdt)
}

/// Steps 3–6 of the module documentation.
fn triangulate(
    input: &BoundaryInput,
    controls: &MeshControls,
    field: &SizeField,
    budget: usize,
) -> Result<Linear, MeshError> {
    let mut cdt = load(input)?;
    let n_input = input.points.len();
    let refiner = Refiner { angle: controls.min_angle_deg, n_input, budget };
    let cap = EQUILATERAL_AREA * field.size().powi(2);
    let mut excluded = refiner.run(&mut cdt, Some(cap))?;
    for pass in 0.. {
        let points = oversized_points(&cdt, &excluded, field);
        if points.is_empty() {
            break;
        }
        if pass == MAX_SIZE_PASSES {
            return Err(MeshError::RefinementIncomplete { budget });
        }
        insert_all(&mut cdt, &points)?;
        excluded = refiner.run(&mut cdt, None)?;
    }
    for _ in 0..MAX_SIZE_PASSES {
        let points = boundary_split_points(&cdt, &excluded, input, controls, field)?;
        if points.is_empty() {
            break;
        }
        split_by_encroachment(&mut cdt, &points, &refiner)?;
        excluded = refiner.run(&mut cdt, None)?;
    }
    excluded = repair_boundary_triangles(&mut cdt, excluded, &refiner)?;
    extract(&cdt, &excluded, input)
}

/// Parameters shared by every `refine` call.
#[derive(Clone, Copy)]
struct Refiner {
    angle: f64,
    n_input: usize,
    budget: usize,
}

impl Refiner {
    /// One spade refinement pass; returns the faces outside the domain (holes, exterior).
    fn run(&self, cdt: &mut Cdt, max_area: Option<f64>) -> Result<FaceSet, MeshError> {
        let used = cdt.num_vertices() - self.n_input;
        let left = self
            .budget
            .checked_sub(used)
            .ok_or(MeshError::RefinementIncomplete { budget: self.budget })?;
        let mut params = RefinementParameters::<f64>::new()
            .exclude_outer_faces(true)
            .with_angle_limit(AngleLimit::from_deg(self.angle))
            .with_max_additional_vertices(left);
        if let Some(a) = max_area {
            params = params.with_max_allowed_area(a);
        }
        let res = cdt.refine(params);
        if !res.refinement_complete {
            return Err(MeshError::RefinementIncomplete { budget: self.budget });
        }
        Ok(res.excluded_faces.into_iter().collect())
    }
}

fn insert_all(cdt: &mut Cdt, points: &[Point]) -> Result<(), MeshError> {
    for p in points {
        cdt.insert(Point2::new(p[0], p[1])).map_err(|e| {
            MeshError::Triangulation(format!("inserting a refinement point failed: {e:?}"))
        })?;
    }
    Ok(())
}

/// Interior points for every domain triangle larger than `√3/4 · h(centroid)²`: a
/// barycentric lattice of spacing about `max h` over the triangle, or the centroid when the
/// triangle is less than about four times too large.
fn oversized_points(cdt: &Cdt, excluded: &FaceSet, field: &SizeField) -> Vec<Point> {
    let mut out = Vec::new();
    for f in cdt.inner_faces().filter(|f| !excluded.contains(&f.fix())) {
        let t = f.positions().map(|p| [p.x, p.y]);
        let c = size::centroid(&t);
        let area = f.area();
        if area <= EQUILATERAL_AREA * field.at(c).powi(2) {
            continue;
        }
        let h_hi = t.iter().map(|&p| field.at(p)).fold(field.at(c), f64::max);
        let k = (area / (EQUILATERAL_AREA * h_hi * h_hi)).sqrt().ceil() as usize;
        if k <= 2 {
            out.push(c);
            continue;
        }
        for i in 1..k {
            for j in 1..k - i {
                let (wi, wj) = (i as f64 / k as f64, j as f64 / k as f64);
                let wl = 1.0 - wi - wj;
                out.push([
                    wi * t[0][0] + wj * t[1][0] + wl * t[2][0],
                    wi * t[0][1] + wj * t[1][1] + wl * t[2][1],
                ]);
            }
        }
    }
    out
}

/// Points that make refinement split every boundary edge longer than its target
/// `min(part size, 1.25 h(midpoint))`.
///
/// spade splits constraint edges only when a vertex encroaches on them (lies in their
/// diametral circle), and a split point computed outside spade is one rounding step off the
/// segment, so it cannot be inserted on it. Instead, for an edge of length `L` and target
/// `t`, `k = ⌈1.3 L / t⌉` points are placed along it at spacing `s = L / k`, at distance
/// `δ = 0.4 s` into the fluid. Every piece longer than `√(s² + 4δ²) ≈ 1.28 s ≤ 0.985 t` has
/// one of them in its diametral circle, and no piece shorter than `2δ = 0.8 s` has, so
/// refinement halves the edge until the pieces lie in about `[0.6 t, t]`. Points that do not
/// fall inside a fluid triangle are skipped; the caller removes them again.
fn boundary_split_points(
    cdt: &Cdt,
    excluded: &FaceSet,
    input: &BoundaryInput,
    controls: &MeshControls,
    field: &SizeField,
) -> Result<Vec<Point>, MeshError> {
    let vertices: Vec<Point> = cdt.vertices().map(|v| [v.position().x, v.position().y]).collect();
    let adjacency = constraint_adjacency(cdt);
    let mut out = Vec::new();
    for &([a, b], part) in &input.segments {
        for [u, v] in walk_chain(&adjacency, &vertices, a, b, input.points.len())? {
            let (pu, pv) = (vertices[u], vertices[v]);
            let len = size::dist(pu, pv);
            let slack = FIELD_BOUNDARY_SLACK * field.at(size::lerp(pu, pv, 0.5));
            let target = part_size(controls, part).map_or(slack, |ps| ps.min(slack));
            if len <= target {
                continue;
            }
            let k = (1.3 * len / target).ceil().min(1e6) as usize;
            let offset = 0.4 / k as f64;
            // Left normal times the length: the fluid lies on the left of u -> v.
            let normal = [-(pv[1] - pu[1]), pv[0] - pu[0]];
            for j in 0..k {
                let q = size::lerp(pu, pv, (j as f64 + 0.5) / k as f64);
                let q = [q[0] + offset * normal[0], q[1] + offset * normal[1]];
                if in_fluid(cdt, excluded, q) {
                    out.push(q);
                }
            }
        }
    }
    Ok(out)
}

/// Inserts the helper points, lets refinement split only the segments they encroach on
/// (angle limit 0, no area cap), then removes the helpers again, highest index first so
/// that the remaining handles stay valid (spade moves the last vertex into a removed slot).
fn split_by_encroachment(
    cdt: &mut Cdt,
    points: &[Point],
    refiner: &Refiner,
) -> Result<(), MeshError> {
    let mut helpers = Vec::with_capacity(points.len());
    for p in points {
        let h = cdt.insert(Point2::new(p[0], p[1])).map_err(|e| {
            MeshError::Triangulation(format!("inserting a boundary helper point failed: {e:?}"))
        })?;
        helpers.push(h);
    }
    let split_only = Refiner { angle: 0.0, ..*refiner };
    split_only.run(cdt, None)?;
    helpers.sort_unstable_by_key(|h| std::cmp::Reverse(h.index()));
    helpers.dedup();
    for h in helpers {
        cdt.remove(h);
    }
    Ok(())
}

fn in_fluid(cdt: &Cdt, excluded: &FaceSet, p: Point) -> bool {
    match cdt.locate(Point2::new(p[0], p[1])) {
        PositionInTriangulation::OnFace(f) => !excluded.contains(&f),
        _ => false,
    }
}

/// Removes every domain triangle with three boundary vertices.
///
/// Phase A inserts a point into each such triangle (see [`repair_point`]) and refines again,
/// for at most [`MAX_BOUNDARY_PASSES`] passes, leaving out triangles at *sharp* corners
/// (input angle below twice the angle limit): there refinement would split the walls again
/// and again (a point joined to the corner makes two triangles with the angle `α/2` below
/// the limit). Phase B then inserts a point into every remaining such triangle without
/// refining afterwards, first the repair point and then, for any triangle still left, the
/// centroid; every triangle a Delaunay insertion creates contains the new vertex, so none
/// is left. Triangles created in phase B next to sharp corners are input-angle-limited in
/// [`MeshStats`]; elsewhere (phase A did not converge) they may fall below the angle limit.
fn repair_boundary_triangles(
    cdt: &mut Cdt,
    mut excluded: FaceSet,
    refiner: &Refiner,
) -> Result<FaceSet, MeshError> {
    let sharp = 2.0 * refiner.angle;
    for _ in 0..MAX_BOUNDARY_PASSES {
        let faces = boundary_only_faces(cdt, &excluded);
        let other: Vec<_> = faces
            .into_iter()
            .filter(|&f| corner_angle_deg(cdt, f).is_none_or(|a| a >= sharp))
            .collect();
        if other.is_empty() {
            break;
        }
        let points: Vec<Point> = other.iter().map(|&f| repair_point(cdt, &excluded, f)).collect();
        insert_all(cdt, &points)?;
        excluded = refiner.run(cdt, None)?;
    }
    for use_centroid in [false, true] {
        let faces = boundary_only_faces(cdt, &excluded);
        if faces.is_empty() {
            return Ok(excluded);
        }
        let points: Vec<Point> = faces
            .iter()
            .map(|&f| {
                if use_centroid {
                    size::centroid(&cdt.face(f).positions().map(|p| [p.x, p.y]))
                } else {
                    repair_point(cdt, &excluded, f)
                }
            })
            .collect();
        insert_all(cdt, &points)?;
        excluded = excluded_faces(cdt);
    }
    let left = boundary_only_faces(cdt, &excluded).len();
    if left > 0 {
        return Err(MeshError::BoundaryTriangles { count: left, passes: MAX_BOUNDARY_PASSES });
    }
    Ok(excluded)
}

/// The faces outside the domain, recomputed without adding vertices (angle limit 0,
/// constraint edges kept, no area cap, no vertex budget).
fn excluded_faces(cdt: &mut Cdt) -> FaceSet {
    let res = cdt.refine(
        RefinementParameters::<f64>::new()
            .exclude_outer_faces(true)
            .keep_constraint_edges()
            .with_angle_limit(AngleLimit::from_deg(0.0))
            .with_max_additional_vertices(0),
    );
    res.excluded_faces.into_iter().collect()
}

fn boundary_only_faces(cdt: &Cdt, excluded: &FaceSet) -> Vec<FixedFaceHandle<InnerTag>> {
    let on_boundary = boundary_vertices(cdt);
    cdt.inner_faces()
        .filter(|f| !excluded.contains(&f.fix()))
        .filter(|f| f.vertices().iter().all(|v| on_boundary[v.fix().index()]))
        .map(|f| f.fix())
        .collect()
}

/// The angle in degrees at a vertex where two of the face's edges are boundary edges.
fn corner_angle_deg(cdt: &Cdt, face: FixedFaceHandle<InnerTag>) -> Option<f64> {
    let f = cdt.face(face);
    f.adjacent_edges()
        .into_iter()
        .find(|e| e.is_constraint_edge() && e.next().is_constraint_edge())
        .map(|e| {
            let (s1, c, s2) = (e.from().position(), e.to().position(), e.next().to().position());
            let t = [[c.x, c.y], [s2.x, s2.y], [s1.x, s1.y]];
            super::quality::angles_deg(t)[0]
        })
}

/// The point to insert into a triangle with three boundary vertices.
///
/// At a corner (two of the triangle's edges are boundary edges meeting at `c`), the point
/// on the bisector at distance `d = min(|c s1|, |c s2|)` from `c`: it sees each wall piece
/// `c s_i` under the angle `90° − α/4 < 90°`, so it encroaches on neither and refinement keeps
/// it; Delaunay then connects it to `c`. Elsewhere (a triangle spanning a thin passage), or
/// when the bisector point is not in the fluid, the centroid.
fn repair_point(cdt: &Cdt, excluded: &FaceSet, face: FixedFaceHandle<InnerTag>) -> Point {
    let f = cdt.face(face);
    let t = f.positions().map(|p| [p.x, p.y]);
    for edge in f.adjacent_edges() {
        let (e_in, e_out) = (edge, edge.next());
        if !(e_in.is_constraint_edge() && e_out.is_constraint_edge()) {
            continue;
        }
        let c = e_in.to().position();
        let (s1, s2) = (e_in.from().position(), e_out.to().position());
        let (u, v) = ([s1.x - c.x, s1.y - c.y], [s2.x - c.x, s2.y - c.y]);
        let (lu, lv) = (u[0].hypot(u[1]), v[0].hypot(v[1]));
        let b = [u[0] / lu + v[0] / lv, u[1] / lu + v[1] / lv];
        let (lb, d) = (b[0].hypot(b[1]), lu.min(lv));
        let g = [c.x + d * b[0] / lb, c.y + d * b[1] / lb];
        if lb > 0.0 && in_fluid(cdt, excluded, g) {
            return g;
        }
    }
    size::centroid(&t)
}

/// Marks the vertices on a constraint edge (the domain boundary).
fn boundary_vertices(cdt: &Cdt) -> Vec<bool> {
    let mut on = vec![false; cdt.num_vertices()];
    for e in cdt.undirected_edges().filter(|e| e.is_constraint_edge()) {
        for v in e.vertices() {
            on[v.fix().index()] = true;
        }
    }
    on
}

/// Vertices, domain triangles (counter-clockwise, as spade returns them) and the boundary
/// edges with their parts.
fn extract(cdt: &Cdt, excluded: &FaceSet, input: &BoundaryInput) -> Result<Linear, MeshError> {
    let vertices: Vec<Point> = cdt.vertices().map(|v| [v.position().x, v.position().y]).collect();
    let triangles: Vec<[usize; 3]> = cdt
        .inner_faces()
        .filter(|f| !excluded.contains(&f.fix()))
        .map(|f| f.vertices().map(|v| v.fix().index()))
        .collect();
    let adjacency = constraint_adjacency(cdt);
    let mut segments = Vec::with_capacity(input.segments.len());
    for &([a, b], part) in &input.segments {
        let chain = walk_chain(&adjacency, &vertices, a, b, input.points.len())?;
        segments.extend(chain.into_iter().map(|s| (s, part)));
    }
    Ok((vertices, triangles, segments))
}

fn constraint_adjacency(cdt: &Cdt) -> Vec<Vec<usize>> {
    let mut adj = vec![Vec::new(); cdt.num_vertices()];
    for e in cdt.undirected_edges().filter(|e| e.is_constraint_edge()) {
        let [a, b] = e.vertices().map(|v| v.fix().index());
        adj[a].push(b);
        adj[b].push(a);
    }
    adj
}

/// The constraint edges that replaced input segment `a -> b`, in order from `a` to `b`.
///
/// Between `a` and `b` only split points (index ≥ `n_input`) can occur; from `a` the walk
/// takes the constraint neighbour pointing most nearly toward `b`, after that the
/// neighbour it did not come from.
fn walk_chain(
    adj: &[Vec<usize>],
    pos: &[Point],
    a: usize,
    b: usize,
    n_input: usize,
) -> Result<Vec<[usize; 2]>, MeshError> {
    let mut chain = Vec::new();
    let (mut prev, mut cur) = (usize::MAX, a);
    for _ in 0..pos.len() {
        if adj[cur].contains(&b) {
            chain.push([cur, b]);
            return Ok(chain);
        }
        let toward = |v: usize| {
            let (d, e) = (sub(pos[v], pos[cur]), sub(pos[b], pos[cur]));
            (d[0] * e[0] + d[1] * e[1]) / (d[0].hypot(d[1]) * e[0].hypot(e[1]))
        };
        let next = adj[cur]
            .iter()
            .copied()
            .filter(|&v| v != prev && v >= n_input)
            .max_by(|&v, &w| toward(v).total_cmp(&toward(w)));
        let Some(next) = next else { break };
        chain.push([cur, next]);
        (prev, cur) = (cur, next);
    }
    Err(MeshError::Invariant(format!("lost the constraint chain of boundary segment ({a}, {b})")))
}

fn sub(a: Point, b: Point) -> Point {
    [a[0] - b[0], a[1] - b[1]]
}

/// Renumbers vertices along a Morton (Z-order) curve, drops unused ones, and sorts the
/// triangles by their smallest new vertex index (stable, so the result is deterministic).
fn renumber((vertices, triangles, segments): Linear) -> Linear {
    let keys = morton_keys(&vertices);
    let mut used = vec![false; vertices.len()];
    triangles.iter().flatten().for_each(|&v| used[v] = true);
    let mut order: Vec<usize> = (0..vertices.len()).filter(|&v| used[v]).collect();
    order.sort_by_key(|&v| (keys[v], v));
    let mut new_of = vec![usize::MAX; vertices.len()];
    for (new, &old) in order.iter().enumerate() {
        new_of[old] = new;
    }
    let new_vertices = order.iter().map(|&v| vertices[v]).collect();
    let mut new_tris: Vec<[usize; 3]> = triangles.iter().map(|t| t.map(|v| new_of[v])).collect();
    new_tris.sort_by_key(|t| *t.iter().min().unwrap_or(&0));
    let new_segs = segments.iter().map(|&(s, p)| (s.map(|v| new_of[v]), p)).collect();
    (new_vertices, new_tris, new_segs)
}

/// Z-order keys: coordinates scaled to 21-bit integers over the bounding box, bits interleaved.
fn morton_keys(points: &[Point]) -> Vec<u64> {
    let (mut lo, mut hi) = ([f64::MAX; 2], [f64::MIN; 2]);
    for p in points {
        for k in 0..2 {
            lo[k] = lo[k].min(p[k]);
            hi[k] = hi[k].max(p[k]);
        }
    }
    let scale = |k: usize, x: f64| {
        let span = (hi[k] - lo[k]).max(f64::MIN_POSITIVE);
        (((x - lo[k]) / span) * ((1u64 << 21) - 1) as f64) as u64
    };
    points.iter().map(|p| spread(scale(0, p[0])) | (spread(scale(1, p[1])) << 1)).collect()
}

/// Spreads the low 21 bits of `x` to the even bit positions (bit `i` moves to bit `2i`).
fn spread(x: u64) -> u64 {
    let mut x = x & 0x1f_ffff;
    x = (x | (x << 16)) & 0x0000_ffff_0000_ffff;
    x = (x | (x << 8)) & 0x00ff_00ff_00ff_00ff;
    x = (x | (x << 4)) & 0x0f0f_0f0f_0f0f_0f0f;
    x = (x | (x << 2)) & 0x3333_3333_3333_3333;
    x = (x | (x << 1)) & 0x5555_5555_5555_5555;
    x
}

/// Per part, the circle of the loop it lies on; `None` if a part is on no circle loop or on
/// loops with different circles (snapping would be ambiguous).
pub(crate) fn part_circles(domain: &Domain) -> Vec<Option<Circle>> {
    let mut seen: Vec<Option<Option<Circle>>> = vec![None; domain.part_names.len()];
    for l in domain.loops() {
        for &p in &l.edge_parts {
            seen[p] = match seen[p] {
                None => Some(l.circle),
                Some(c) if c == l.circle => Some(c),
                Some(_) => Some(None),
            };
        }
    }
    seen.into_iter().map(Option::flatten).collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn morton_spread_interleaves_bits() {
        assert_eq!(spread(0b1011), 0b100_0101);
        assert_eq!(spread((1 << 21) - 1), 0x1555_5555_5555_5555 & ((1u64 << 42) - 1));
    }

    #[test]
    fn morton_keys_follow_the_z_curve() {
        // Quadrants of the unit square in Z order: lower-left, lower-right, upper-left,
        // upper-right.
        let keys = morton_keys(&[[0.0, 0.0], [1.0, 0.0], [0.0, 1.0], [1.0, 1.0]]);
        assert!(keys.windows(2).all(|w| w[0] < w[1]), "{keys:?}");
    }
}
