//! Polygonal geometry of the fluid domain: boundary loops with a named part per edge.
//!
//! Takes point lists (from the case file, a coordinate file, a NACA 4-digit profile or a
//! regular n-gon) and returns a [`Domain`]: one outer loop and any number of hole loops,
//! oriented so that the fluid always lies on the **left** of every edge (outer loop
//! counter-clockwise, holes clockwise).
//!
//! **Invariant:** the geometry module never sees mesh sizes or boundary-condition values.

pub mod naca;
pub mod shapes;
pub mod validate;

/// A point in the plane, `[x, y]`.
pub type Point = [f64; 2];

/// Index of a named boundary part in [`Domain::part_names`].
pub type PartId = usize;

/// A circle that a polygonal loop approximates; used to snap new boundary nodes on refinement.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Circle {
    pub center: Point,
    pub radius: f64,
}

/// A closed polygonal boundary loop. Edge `i` runs from `points[i]` to `points[(i + 1) % n]`
/// and belongs to the boundary part `edge_parts[i]`.
#[derive(Clone, Debug, PartialEq)]
pub struct BoundaryLoop {
    /// Human-readable name of the loop (`"outer"` or the body's name), used in messages.
    pub name: String,
    pub points: Vec<Point>,
    pub edge_parts: Vec<PartId>,
    /// Set when the loop is a regular n-gon declared as a circle.
    pub circle: Option<Circle>,
}

/// The fluid domain: the outer loop (counter-clockwise) minus the holes (clockwise).
#[derive(Clone, Debug, PartialEq)]
pub struct Domain {
    pub outer: BoundaryLoop,
    pub holes: Vec<BoundaryLoop>,
    /// Names of the boundary parts; a [`PartId`] indexes this list.
    pub part_names: Vec<String>,
}

impl BoundaryLoop {
    /// Signed area by the shoelace formula: positive for counter-clockwise loops.
    pub fn signed_area(&self) -> f64 {
        signed_area(&self.points)
    }

    /// Number of edges (equal to the number of points of the closed loop).
    pub fn n_edges(&self) -> usize {
        self.points.len()
    }

    /// End points of edge `i`.
    pub fn edge(&self, i: usize) -> (Point, Point) {
        (self.points[i], self.points[(i + 1) % self.points.len()])
    }
}

impl Domain {
    /// Fluid area: outer area minus the hole areas.
    pub fn area(&self) -> f64 {
        self.outer.signed_area().abs()
            - self.holes.iter().map(|h| h.signed_area().abs()).sum::<f64>()
    }

    /// All loops, outer first.
    pub fn loops(&self) -> impl Iterator<Item = &BoundaryLoop> {
        std::iter::once(&self.outer).chain(self.holes.iter())
    }

    /// Id of the part called `name`, if any.
    pub fn part_id(&self, name: &str) -> Option<PartId> {
        self.part_names.iter().position(|n| n == name)
    }
}

/// Signed area of a closed polygon (shoelace formula), positive when counter-clockwise.
pub fn signed_area(points: &[Point]) -> f64 {
    let n = points.len();
    let twice: f64 = (0..n)
        .map(|i| {
            let (a, b) = (points[i], points[(i + 1) % n]);
            a[0] * b[1] - b[0] * a[1]
        })
        .sum();
    0.5 * twice
}
