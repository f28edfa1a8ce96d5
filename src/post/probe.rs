//! Point location and point evaluation of a flow field (probes, pressure differences).
//!
//! Takes a mesh and query points; returns the containing cell with the point's barycentric
//! coordinates, and the P2 velocity and P1 pressure there.
//!
//! [`PointLocator`] sorts the cells into a uniform bucket grid over the mesh's bounding box
//! (about one bucket per cell; each cell is listed in every bucket its bounding box
//! overlaps), so a query tests only the few cells of one bucket. [`locate`] is the
//! one-off linear scan for a single probe. A point counts as inside a cell when all its
//! barycentric coordinates are ≥ −1e-12; among several such cells (points on shared edges)
//! the one where the point lies deepest inside is returned.

use super::{PostError, cell_triangle, check_field, pressure_at, velocity_at};
use crate::fem::FlowField;
use crate::geometry::Point;
use crate::mesh::Mesh;

/// Barycentric tolerance for "inside": a few hundred rounding errors of coordinates of
/// order 1 relative to the cell size (common practice, no source).
const INSIDE_TOL: f64 = 1e-12;

/// Velocity and kinematic pressure at a point.
#[derive(Clone, Debug, PartialEq)]
pub struct PointValue {
    pub cell: usize,
    pub barycentric: [f64; 3],
    pub velocity: [f64; 2],
    /// Kinematic pressure `p/ρ`.
    pub pressure: f64,
}

/// A bucket grid for fast point location in one mesh.
#[derive(Clone, Debug)]
pub struct PointLocator<'m> {
    mesh: &'m Mesh,
    origin: Point,
    bucket_size: [f64; 2],
    shape: [usize; 2],
    buckets: Vec<Vec<usize>>,
}

/// Finds the cell containing `point` by a linear scan over all cells (O(number of cells);
/// use [`PointLocator`] for many probes). Returns the cell and the barycentric coordinates,
/// or `None` outside the mesh or for a non-finite point.
pub fn locate(mesh: &Mesh, point: Point) -> Option<(usize, [f64; 3])> {
    best_cell(mesh, 0..mesh.n_cells(), point)
}

/// Velocity and pressure of `field` in `cell` at barycentric coordinates `bary`.
///
/// Only the lengths of the field are checked here (O(1)); use [`check_field`](super::check_field)
/// once for finiteness.
///
/// # Errors
/// [`PostError::FieldLength`] when the field does not match the mesh, and
/// [`PostError::InvalidParameter`] when `cell` is out of range.
pub fn evaluate_in_cell(
    mesh: &Mesh,
    field: &FlowField,
    cell: usize,
    bary: [f64; 3],
) -> Result<PointValue, PostError> {
    if field.velocity.len() != mesh.nodes.len() {
        let (expected, found) = (mesh.nodes.len(), field.velocity.len());
        return Err(PostError::FieldLength { what: "velocity", expected, found });
    }
    if field.pressure.len() != mesh.n_vertices {
        let (expected, found) = (mesh.n_vertices, field.pressure.len());
        return Err(PostError::FieldLength { what: "pressure", expected, found });
    }
    let nodes = mesh.cells.get(cell).ok_or(PostError::InvalidParameter {
        name: "cell",
        value: cell as f64,
        reason: "no such cell in the mesh",
    })?;
    Ok(PointValue {
        cell,
        barycentric: bary,
        velocity: velocity_at(&field.velocity, nodes, bary),
        pressure: pressure_at(&field.pressure, nodes, bary),
    })
}

impl<'m> PointLocator<'m> {
    /// Builds the bucket grid of `mesh`.
    ///
    /// # Errors
    /// [`PostError::EmptyMesh`] when the mesh has no cells.
    pub fn new(mesh: &'m Mesh) -> Result<Self, PostError> {
        if mesh.cells.is_empty() {
            return Err(PostError::EmptyMesh);
        }
        let (lo, hi) = bounding_box(&mesh.nodes[..mesh.n_vertices]);
        let extent =
            [(hi[0] - lo[0]).max(f64::MIN_POSITIVE), (hi[1] - lo[1]).max(f64::MIN_POSITIVE)];
        let n = mesh.n_cells() as f64;
        let nx = ((n * extent[0] / extent[1]).sqrt().ceil() as usize).clamp(1, 4096);
        let ny = ((n / nx as f64).ceil() as usize).clamp(1, 4096);
        let mut locator = PointLocator {
            mesh,
            origin: lo,
            bucket_size: [extent[0] / nx as f64, extent[1] / ny as f64],
            shape: [nx, ny],
            buckets: vec![Vec::new(); nx * ny],
        };
        for c in 0..mesh.n_cells() {
            let (clo, chi) = bounding_box(&mesh.cell_vertices(c));
            let (i0, j0) = locator.bucket_of(clo);
            let (i1, j1) = locator.bucket_of(chi);
            for j in j0..=j1 {
                for i in i0..=i1 {
                    locator.buckets[j * nx + i].push(c);
                }
            }
        }
        Ok(locator)
    }

    /// The cell containing `point` and its barycentric coordinates, or `None` outside the
    /// mesh (or for a non-finite point).
    pub fn locate(&self, point: Point) -> Option<(usize, [f64; 3])> {
        if !(point[0].is_finite() && point[1].is_finite()) {
            return None;
        }
        let (i, j) = self.bucket_of(point);
        best_cell(self.mesh, self.buckets[j * self.shape[0] + i].iter().copied(), point)
    }

    /// Velocity and pressure of `field` at each point (`None` for points outside the mesh).
    ///
    /// # Errors
    /// [`PostError`] when the field does not match the mesh.
    pub fn probe(
        &self,
        field: &FlowField,
        points: &[Point],
    ) -> Result<Vec<Option<PointValue>>, PostError> {
        check_field(self.mesh, field)?;
        points
            .iter()
            .map(|&x| match self.locate(x) {
                Some((c, l)) => evaluate_in_cell(self.mesh, field, c, l).map(Some),
                None => Ok(None),
            })
            .collect()
    }

    /// Kinematic pressure difference `p(front) − p(back)` (multiply by `ρ` for a pressure),
    /// as in the DFG benchmark's `Δp = p(0.15, 0.2) − p(0.25, 0.2)`.
    ///
    /// # Errors
    /// [`PostError`] when the field does not match the mesh, or
    /// [`PostError::PointOutsideMesh`] when a point lies outside the mesh.
    ///
    /// # References
    /// Schäfer & Turek (1996), definition of `Δp`.
    pub fn pressure_difference(
        &self,
        field: &FlowField,
        front: Point,
        back: Point,
    ) -> Result<f64, PostError> {
        let values = self.probe(field, &[front, back])?;
        let value = |v: &Option<PointValue>, x: Point| {
            v.as_ref().map(|v| v.pressure).ok_or(PostError::PointOutsideMesh { x: x[0], y: x[1] })
        };
        Ok(value(&values[0], front)? - value(&values[1], back)?)
    }

    /// Bucket indices of a point, clamped to the grid (points outside fall in a border
    /// bucket and are then rejected by the barycentric test).
    fn bucket_of(&self, p: Point) -> (usize, usize) {
        let index = |d: usize| {
            let t = ((p[d] - self.origin[d]) / self.bucket_size[d]).floor();
            // `as` saturates (NaN gives 0), so the clamp keeps the index in range.
            (t.max(0.0) as usize).min(self.shape[d] - 1)
        };
        (index(0), index(1))
    }
}

/// Barycentric coordinates of `p` in cell `c`.
fn barycentric(mesh: &Mesh, c: usize, p: Point) -> [f64; 3] {
    cell_triangle(mesh, c).barycentric(p)
}

/// Among `cells`, the one in which `p` lies deepest (largest minimum barycentric
/// coordinate), if that minimum is ≥ −[`INSIDE_TOL`].
fn best_cell(
    mesh: &Mesh,
    cells: impl Iterator<Item = usize>,
    p: Point,
) -> Option<(usize, [f64; 3])> {
    if !(p[0].is_finite() && p[1].is_finite()) {
        return None;
    }
    let mut best: Option<(usize, [f64; 3], f64)> = None;
    for c in cells {
        let l = barycentric(mesh, c, p);
        let depth = l[0].min(l[1]).min(l[2]);
        if depth >= -INSIDE_TOL && best.is_none_or(|b| depth > b.2) {
            best = Some((c, l, depth));
        }
    }
    best.map(|(c, l, _)| (c, l))
}

/// Axis-aligned bounding box `(min, max)` of a non-empty point set.
fn bounding_box(points: &[Point]) -> (Point, Point) {
    points.iter().fold(
        ([f64::INFINITY, f64::INFINITY], [f64::NEG_INFINITY, f64::NEG_INFINITY]),
        |(lo, hi), p| ([lo[0].min(p[0]), lo[1].min(p[1])], [hi[0].max(p[0]), hi[1].max(p[1])]),
    )
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::mesh::structured::rectangle;

    #[test]
    fn vertices_and_far_points_are_handled() {
        let mesh = rectangle([0.0, 0.0], [2.0, 1.0], 4, 3, |_, _| [0.1, -0.1]).unwrap();
        let locator = PointLocator::new(&mesh).unwrap();
        // Every mesh node lies in (the closure of) some cell, with a barycentric coordinate
        // equal to 1 at vertices; the tolerance is a few rounding errors (1e-14).
        for (n, &x) in mesh.nodes.iter().enumerate() {
            let (c, l) = locator.locate(x).unwrap_or_else(|| panic!("node {n} not found"));
            let back = cell_triangle(&mesh, c).point(l);
            assert!((back[0] - x[0]).abs() < 1e-14 && (back[1] - x[1]).abs() < 1e-14);
        }
        for far in [[1e300, 0.5], [-1e300, -1e300], [f64::INFINITY, 0.0]] {
            assert!(locator.locate(far).is_none());
        }
    }

    #[test]
    fn out_of_range_cell_is_a_typed_error() {
        let mesh = rectangle([0.0, 0.0], [1.0, 1.0], 2, 2, |_, _| [0.0, 0.0]).unwrap();
        let field = FlowField {
            velocity: vec![[0.0; 2]; mesh.nodes.len()],
            pressure: vec![0.0; mesh.n_vertices],
        };
        let r = evaluate_in_cell(&mesh, &field, 99, [1.0, 0.0, 0.0]);
        assert!(matches!(r, Err(PostError::InvalidParameter { name: "cell", .. })));
    }
}
