//! Validation of a [`Domain`] and [`MeshControls`] before meshing.
//!
//! Takes the user's domain and controls; returns `Ok(())` or the first problem found as a
//! [`MeshError`] that names the loop, edge or control key. Nothing here panics on bad input:
//! the mesher relies on these checks to hand spade only simple, non-touching polygons.

use super::{MeshControls, MeshError};
use crate::geometry::{BoundaryLoop, Domain, Point};

/// Largest accepted `min_angle_deg`. Delaunay refinement is only guaranteed to terminate
/// for limits up to about 20.7° (Ruppert) and works in practice up to about 33–34°
/// (spade's documentation warns about non-termination above 30°).
const MAX_ANGLE_LIMIT_DEG: f64 = 34.0;

/// Checks the controls against the domain's part count.
///
/// # Errors
/// [`MeshError::InvalidControl`] naming the key (`size`, `part_sizes[i]`, `grading[i].h_min`,
/// `grading[i].growth`, `grading[i].point`, `min_angle_deg`).
pub(crate) fn check_controls(controls: &MeshControls, n_parts: usize) -> Result<(), MeshError> {
    positive("size", controls.size)?;
    if controls.part_sizes.len() > n_parts {
        return Err(invalid(
            "part_sizes",
            controls.part_sizes.len() as f64,
            "more entries than the domain has boundary parts",
        ));
    }
    for (i, s) in controls.part_sizes.iter().enumerate() {
        if let Some(s) = s {
            positive(&format!("part_sizes[{i}]"), *s)?;
        }
    }
    for (i, g) in controls.grading.iter().enumerate() {
        positive(&format!("grading[{i}].h_min"), g.h_min)?;
        if !(g.growth.is_finite() && g.growth >= 0.0) {
            return Err(invalid(
                &format!("grading[{i}].growth"),
                g.growth,
                "must be finite and ≥ 0",
            ));
        }
        if let Some(&c) = g.point.iter().find(|c| !c.is_finite()) {
            return Err(invalid(&format!("grading[{i}].point"), c, "coordinates must be finite"));
        }
    }
    let a = controls.min_angle_deg;
    if !(a.is_finite() && (0.0..=MAX_ANGLE_LIMIT_DEG).contains(&a)) {
        return Err(invalid("min_angle_deg", a, "must lie in [0, 34] degrees"));
    }
    Ok(())
}

/// Checks that every loop is a simple polygon with valid part ids and the right
/// orientation, that no two loops touch, and that every hole lies inside the outer loop and
/// outside the other holes.
///
/// # Errors
/// [`MeshError::InvalidLoop`], [`MeshError::Intersection`] or [`MeshError::HoleOutside`].
pub(crate) fn check_domain(domain: &Domain) -> Result<(), MeshError> {
    check_loop(&domain.outer, true, domain.part_names.len())?;
    for hole in &domain.holes {
        check_loop(hole, false, domain.part_names.len())?;
    }
    check_intersections(domain)?;
    for (k, hole) in domain.holes.iter().enumerate() {
        let p = hole.points[0];
        let in_other = domain.holes.iter().enumerate().any(|(j, h)| j != k && inside(p, &h.points));
        if !inside(p, &domain.outer.points) || in_other {
            return Err(MeshError::HoleOutside { hole: hole.name.clone() });
        }
    }
    Ok(())
}

fn check_loop(l: &BoundaryLoop, outer: bool, n_parts: usize) -> Result<(), MeshError> {
    let bad = |reason: String| MeshError::InvalidLoop { loop_name: l.name.clone(), reason };
    let n = l.points.len();
    if n < 3 {
        return Err(bad(format!("has {n} points, a polygon needs at least 3")));
    }
    if l.edge_parts.len() != n {
        return Err(bad(format!("has {n} points but {} edge parts", l.edge_parts.len())));
    }
    if let Some(i) = l.points.iter().position(|p| !(p[0].is_finite() && p[1].is_finite())) {
        return Err(bad(format!("point {i} has a non-finite coordinate")));
    }
    if let Some((i, &p)) = l.edge_parts.iter().enumerate().find(|(_, p)| **p >= n_parts) {
        return Err(bad(format!("edge {i} has part id {p} but the domain has {n_parts} parts")));
    }
    if let Some(i) = (0..n).find(|&i| l.edge(i).0 == l.edge(i).1) {
        return Err(bad(format!("edge {i} has zero length (repeated point)")));
    }
    let area = l.signed_area();
    if outer && area.partial_cmp(&0.0) != Some(std::cmp::Ordering::Greater) {
        return Err(bad(format!("outer loop must be counter-clockwise (signed area {area:e})")));
    }
    if !outer && area.partial_cmp(&0.0) != Some(std::cmp::Ordering::Less) {
        return Err(bad(format!("hole loop must be clockwise (signed area {area:e})")));
    }
    Ok(())
}

/// One polygon edge for the sweep: loop index, edge index, end points.
struct SweepEdge {
    loop_idx: usize,
    edge: usize,
    a: Point,
    b: Point,
}

/// Sweep over edges sorted by their smallest x; only pairs whose x-ranges overlap are tested.
fn check_intersections(domain: &Domain) -> Result<(), MeshError> {
    let loops: Vec<&BoundaryLoop> = domain.loops().collect();
    let mut edges: Vec<SweepEdge> = Vec::new();
    for (li, l) in loops.iter().enumerate() {
        for e in 0..l.n_edges() {
            let (a, b) = l.edge(e);
            edges.push(SweepEdge { loop_idx: li, edge: e, a, b });
        }
    }
    edges.sort_by(|p, q| p.a[0].min(p.b[0]).total_cmp(&q.a[0].min(q.b[0])));
    for (i, e) in edges.iter().enumerate() {
        let x_max = e.a[0].max(e.b[0]);
        for f in edges[i + 1..].iter().take_while(|f| f.a[0].min(f.b[0]) <= x_max) {
            if edges_conflict(e, f, &loops) {
                return Err(MeshError::Intersection {
                    loop_a: loops[e.loop_idx].name.clone(),
                    edge_a: e.edge,
                    loop_b: loops[f.loop_idx].name.clone(),
                    edge_b: f.edge,
                });
            }
        }
    }
    Ok(())
}

/// Adjacent edges of one loop conflict only when they fold back onto each other; all other
/// pairs conflict when they share any point.
fn edges_conflict(e: &SweepEdge, f: &SweepEdge, loops: &[&BoundaryLoop]) -> bool {
    if e.loop_idx == f.loop_idx {
        let n = loops[e.loop_idx].n_edges();
        let (first, second) = if (e.edge + 1) % n == f.edge {
            (e, f)
        } else if (f.edge + 1) % n == e.edge {
            (f, e)
        } else {
            return segments_touch(e.a, e.b, f.a, f.b);
        };
        // `first.b == second.a`: a fold-back is a zero turn with opposite directions.
        let (u, v) = (sub(first.b, first.a), sub(second.b, second.a));
        return cross(u, v) == 0.0 && dot(u, v) < 0.0;
    }
    segments_touch(e.a, e.b, f.a, f.b)
}

/// Closed-segment intersection test with orientation signs (collinear overlaps included).
fn segments_touch(p1: Point, p2: Point, q1: Point, q2: Point) -> bool {
    let d1 = orient(q1, q2, p1);
    let d2 = orient(q1, q2, p2);
    let d3 = orient(p1, p2, q1);
    let d4 = orient(p1, p2, q2);
    if ((d1 > 0.0 && d2 < 0.0) || (d1 < 0.0 && d2 > 0.0))
        && ((d3 > 0.0 && d4 < 0.0) || (d3 < 0.0 && d4 > 0.0))
    {
        return true;
    }
    (d1 == 0.0 && on_box(q1, q2, p1))
        || (d2 == 0.0 && on_box(q1, q2, p2))
        || (d3 == 0.0 && on_box(p1, p2, q1))
        || (d4 == 0.0 && on_box(p1, p2, q2))
}

fn on_box(a: Point, b: Point, p: Point) -> bool {
    p[0] >= a[0].min(b[0])
        && p[0] <= a[0].max(b[0])
        && p[1] >= a[1].min(b[1])
        && p[1] <= a[1].max(b[1])
}

/// Even-odd ray casting: is `p` strictly inside the closed polygon?
pub(crate) fn inside(p: Point, poly: &[Point]) -> bool {
    let n = poly.len();
    let mut odd = false;
    for i in 0..n {
        let (a, b) = (poly[i], poly[(i + 1) % n]);
        if (a[1] > p[1]) != (b[1] > p[1]) {
            let x = a[0] + (p[1] - a[1]) * (b[0] - a[0]) / (b[1] - a[1]);
            if p[0] < x {
                odd = !odd;
            }
        }
    }
    odd
}

fn orient(a: Point, b: Point, c: Point) -> f64 {
    cross(sub(b, a), sub(c, a))
}

fn sub(a: Point, b: Point) -> Point {
    [a[0] - b[0], a[1] - b[1]]
}

fn cross(u: Point, v: Point) -> f64 {
    u[0] * v[1] - u[1] * v[0]
}

fn dot(u: Point, v: Point) -> f64 {
    u[0] * v[0] + u[1] * v[1]
}

fn invalid(key: &str, value: f64, reason: &'static str) -> MeshError {
    MeshError::InvalidControl { key: key.to_string(), value, reason }
}

fn positive(key: &str, value: f64) -> Result<(), MeshError> {
    if value.is_finite() && value > 0.0 {
        Ok(())
    } else {
        Err(invalid(key, value, "must be positive and finite"))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn segment_contacts() {
        assert!(segments_touch([0.0, 0.0], [1.0, 1.0], [0.0, 1.0], [1.0, 0.0]), "crossing");
        assert!(segments_touch([0.0, 0.0], [1.0, 0.0], [0.5, 0.0], [0.5, 1.0]), "T-contact");
        assert!(segments_touch([0.0, 0.0], [1.0, 0.0], [0.5, 0.0], [2.0, 0.0]), "overlap");
        assert!(!segments_touch([0.0, 0.0], [1.0, 0.0], [0.0, 0.1], [1.0, 0.1]), "parallel");
        assert!(!segments_touch([0.0, 0.0], [1.0, 0.0], [1.5, 0.0], [2.0, 0.0]), "collinear gap");
    }

    #[test]
    fn ray_casting_inside() {
        let sq = [[0.0, 0.0], [1.0, 0.0], [1.0, 1.0], [0.0, 1.0]];
        assert!(inside([0.5, 0.5], &sq));
        assert!(!inside([1.5, 0.5], &sq));
    }

    #[test]
    fn fold_back_is_rejected() {
        let l = BoundaryLoop {
            name: "outer".into(),
            points: vec![[0.0, 0.0], [2.0, 0.0], [1.0, 0.0], [1.0, 1.0]],
            edge_parts: vec![0; 4],
            circle: None,
        };
        let d = Domain { outer: l, holes: vec![], part_names: vec!["p".into()] };
        assert!(check_domain(&d).is_err());
    }
}
