//! Validity checks for boundary loops and their arrangement.
//!
//! Takes point lists (one loop, or an outer loop and holes) and a length tolerance, and returns
//! `Ok(())` or a defect found, with the indices involved. Edge pairs are found by a sweep over
//! the edges sorted by their left end, O(n log n + k) for k pairs with overlapping x-extents
//! (O(n²) only in the worst case of many edges spanning the same x-range).

use super::Point;

/// What is wrong with a single loop.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum LoopDefect {
    #[error("has {0} distinct points, a closed loop needs at least 3")]
    TooFewPoints(usize),
    #[error("has a non-finite coordinate at point {0}")]
    NonFinite(usize),
    #[error("edge {edge} from point {edge} to the next has zero length")]
    ZeroLengthEdge { edge: usize },
    #[error("points {first} and {second} coincide ({x}, {y})")]
    RepeatedPoint { first: usize, second: usize, x: f64, y: f64 },
    #[error("edges {first} and {second} intersect or touch near ({x}, {y})")]
    SelfIntersection { first: usize, second: usize, x: f64, y: f64 },
    #[error("encloses zero area")]
    ZeroArea,
}

/// How two loops are arranged when they must not be.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Arrangement {
    /// Edges of the two loops cross or come closer than the tolerance.
    Touching,
    /// One loop lies (partly) inside the other / outside the outer loop.
    Containing,
}

/// Checks that `points` form a simple closed polygon (the closing edge is implicit).
///
/// # Errors
/// The first [`LoopDefect`]: too few points, non-finite coordinates, zero-length edges, points
/// closer than `tol`, edges of the loop that meet except at their shared vertex.
pub fn check_loop(points: &[Point], tol: f64) -> Result<(), LoopDefect> {
    let n = points.len();
    if let Some(i) = points.iter().position(|p| !(p[0].is_finite() && p[1].is_finite())) {
        return Err(LoopDefect::NonFinite(i));
    }
    if n < 3 {
        return Err(LoopDefect::TooFewPoints(n));
    }
    for i in 0..n {
        if dist(points[i], points[(i + 1) % n]) <= tol {
            return Err(LoopDefect::ZeroLengthEdge { edge: i });
        }
    }
    check_repeated(points, tol)?;
    check_crossings(points, tol)?;
    if super::signed_area(points).abs() <= tol * tol {
        return Err(LoopDefect::ZeroArea);
    }
    Ok(())
}

/// Checks that `inner` lies strictly inside `outer`, at least `tol` away from its edges.
///
/// # Errors
/// [`Arrangement::Containing`] when a vertex of `inner` lies outside `outer`,
/// [`Arrangement::Touching`] when the edges cross or come within `tol`.
pub fn check_inside(outer: &[Point], inner: &[Point], tol: f64) -> Result<(), Arrangement> {
    if loops_touch(outer, inner, tol) {
        return Err(Arrangement::Touching);
    }
    if inner.iter().any(|&p| !point_in_polygon(p, outer)) {
        return Err(Arrangement::Containing);
    }
    Ok(())
}

/// Checks that the regions bounded by `a` and `b` are disjoint and at least `tol` apart.
///
/// # Errors
/// [`Arrangement::Touching`] when the edges cross or come within `tol`,
/// [`Arrangement::Containing`] when one loop lies inside the other.
pub fn check_disjoint(a: &[Point], b: &[Point], tol: f64) -> Result<(), Arrangement> {
    if loops_touch(a, b, tol) {
        return Err(Arrangement::Touching);
    }
    if point_in_polygon(a[0], b) || point_in_polygon(b[0], a) {
        return Err(Arrangement::Containing);
    }
    Ok(())
}

/// Even-odd (crossing-number) test: true when `p` lies inside the closed polygon.
pub fn point_in_polygon(p: Point, poly: &[Point]) -> bool {
    let n = poly.len();
    let mut inside = false;
    for i in 0..n {
        let (a, b) = (poly[i], poly[(i + 1) % n]);
        if (a[1] > p[1]) != (b[1] > p[1]) {
            let x = a[0] + (p[1] - a[1]) * (b[0] - a[0]) / (b[1] - a[1]);
            if p[0] < x {
                inside = !inside;
            }
        }
    }
    inside
}

/// Distance between the closed segments `[a, b]` and `[c, d]` (zero when they intersect).
pub fn segment_distance(a: Point, b: Point, c: Point, d: Point) -> f64 {
    let (o1, o2) = (cross(a, b, c), cross(a, b, d));
    let (o3, o4) = (cross(c, d, a), cross(c, d, b));
    if o1 * o2 < 0.0 && o3 * o4 < 0.0 {
        return 0.0;
    }
    point_segment_distance(a, c, d)
        .min(point_segment_distance(b, c, d))
        .min(point_segment_distance(c, a, b))
        .min(point_segment_distance(d, a, b))
}

/// Distance from `p` to the closed segment `[a, b]`.
pub fn point_segment_distance(p: Point, a: Point, b: Point) -> f64 {
    let (ex, ey) = (b[0] - a[0], b[1] - a[1]);
    let len2 = ex * ex + ey * ey;
    let s = if len2 > 0.0 {
        (((p[0] - a[0]) * ex + (p[1] - a[1]) * ey) / len2).clamp(0.0, 1.0)
    } else {
        0.0
    };
    dist(p, [a[0] + s * ex, a[1] + s * ey])
}

fn check_repeated(points: &[Point], tol: f64) -> Result<(), LoopDefect> {
    let mut order: Vec<usize> = (0..points.len()).collect();
    order.sort_by(|&i, &j| points[i][0].total_cmp(&points[j][0]));
    for (k, &i) in order.iter().enumerate() {
        for &j in &order[k + 1..] {
            if points[j][0] - points[i][0] > tol {
                break;
            }
            if dist(points[i], points[j]) <= tol {
                let (first, second) = (i.min(j), i.max(j));
                let [x, y] = points[first];
                return Err(LoopDefect::RepeatedPoint { first, second, x, y });
            }
        }
    }
    Ok(())
}

fn check_crossings(points: &[Point], tol: f64) -> Result<(), LoopDefect> {
    let n = points.len();
    let edges: Vec<[Point; 2]> = (0..n).map(|i| [points[i], points[(i + 1) % n]]).collect();
    let mut found = None;
    sweep_pairs(&edges, tol, |p, q| {
        let (i, j) = (p.min(q), p.max(q));
        let ([a, b], [c, d]) = (edges[i], edges[j]);
        let adjacent = j == i + 1 || (i == 0 && j == n - 1);
        let hit =
            if adjacent { folds_back([a, b, c, d], j == i + 1) } else { near(a, b, c, d, tol) };
        if hit {
            let [x, y] = if adjacent && j == i + 1 { b } else { a };
            found = Some(LoopDefect::SelfIntersection { first: i, second: j, x, y });
        }
        hit
    });
    found.map_or(Ok(()), Err)
}

/// Calls `visit(i, j)` for every pair of segments whose x-extents overlap within `tol`, by a
/// sweep over the segments sorted by their left end: O(n log n + number of pairs visited).
/// Stops as soon as `visit` returns true; returns whether it did.
fn sweep_pairs(
    segments: &[[Point; 2]],
    tol: f64,
    mut visit: impl FnMut(usize, usize) -> bool,
) -> bool {
    let lo = |s: &[Point; 2]| s[0][0].min(s[1][0]);
    let hi = |s: &[Point; 2]| s[0][0].max(s[1][0]);
    let mut order: Vec<usize> = (0..segments.len()).collect();
    order.sort_by(|&i, &j| lo(&segments[i]).total_cmp(&lo(&segments[j])));
    for (k, &i) in order.iter().enumerate() {
        let reach = hi(&segments[i]) + tol;
        for &j in &order[k + 1..] {
            if lo(&segments[j]) > reach {
                break;
            }
            if visit(i, j) {
                return true;
            }
        }
    }
    false
}

/// Adjacent edges meet at their shared vertex; they are defective only when they overlap,
/// i.e. the loop turns back by 180° along the same line.
fn folds_back([a, b, c, d]: [Point; 4], consecutive: bool) -> bool {
    // Edges (i, i + 1) share b == c; edges (0, n − 1) share a == d.
    let (p, q, r) = if consecutive { (a, b, d) } else { (c, a, b) };
    let (u, v) = ([p[0] - q[0], p[1] - q[1]], [r[0] - q[0], r[1] - q[1]]);
    let crossp = u[0] * v[1] - u[1] * v[0];
    let dot = u[0] * v[0] + u[1] * v[1];
    let scale = (u[0].hypot(u[1])) * (v[0].hypot(v[1]));
    dot > 0.0 && crossp.abs() <= 1e-12 * scale
}

fn loops_touch(a: &[Point], b: &[Point], tol: f64) -> bool {
    let edges = |pts: &[Point]| -> Vec<[Point; 2]> {
        (0..pts.len()).map(|i| [pts[i], pts[(i + 1) % pts.len()]]).collect()
    };
    let mut all = edges(a);
    let na = all.len();
    all.extend(edges(b));
    sweep_pairs(&all, tol, |i, j| {
        let ([p, q], [r, s]) = (all[i], all[j]);
        (i < na) != (j < na) && near(p, q, r, s, tol)
    })
}

/// True when the segments `[a, b]` and `[c, d]` come within `tol` (bounding boxes first).
fn near(a: Point, b: Point, c: Point, d: Point, tol: f64) -> bool {
    let apart = a[0].min(b[0]) > c[0].max(d[0]) + tol
        || c[0].min(d[0]) > a[0].max(b[0]) + tol
        || a[1].min(b[1]) > c[1].max(d[1]) + tol
        || c[1].min(d[1]) > a[1].max(b[1]) + tol;
    !apart && segment_distance(a, b, c, d) <= tol
}

fn cross(o: Point, a: Point, b: Point) -> f64 {
    (a[0] - o[0]) * (b[1] - o[1]) - (a[1] - o[1]) * (b[0] - o[0])
}

fn dist(p: Point, q: Point) -> f64 {
    (p[0] - q[0]).hypot(p[1] - q[1])
}

#[cfg(test)]
mod tests {
    use super::*;

    const TOL: f64 = 1e-10;

    #[test]
    fn accepts_a_simple_polygon_and_rejects_a_bow_tie() {
        let square = [[0.0, 0.0], [1.0, 0.0], [1.0, 1.0], [0.0, 1.0]];
        assert_eq!(check_loop(&square, TOL), Ok(()));
        let bow = [[0.0, 0.0], [1.0, 1.0], [1.0, 0.0], [0.0, 1.0]];
        assert!(matches!(check_loop(&bow, TOL), Err(LoopDefect::SelfIntersection { .. })));
    }

    #[test]
    fn finds_repeats_zero_edges_and_fold_backs() {
        let rep = [[0.0, 0.0], [1.0, 0.0], [0.5, 0.5], [1.0, 0.0], [0.0, 1.0]];
        assert!(matches!(
            check_loop(&rep, TOL),
            Err(LoopDefect::RepeatedPoint { first: 1, second: 3, .. })
        ));
        let zero = [[0.0, 0.0], [1.0, 0.0], [1.0, 0.0], [0.0, 1.0]];
        assert_eq!(check_loop(&zero, TOL), Err(LoopDefect::ZeroLengthEdge { edge: 1 }));
        let fold = [[0.0, 0.0], [2.0, 0.0], [1.0, 0.0], [1.0, 1.0]];
        assert!(matches!(check_loop(&fold, TOL), Err(LoopDefect::SelfIntersection { .. })));
        assert_eq!(check_loop(&[[0.0, 0.0], [1.0, 0.0]], TOL), Err(LoopDefect::TooFewPoints(2)));
    }

    #[test]
    fn classifies_hole_arrangements() {
        let outer = [[0.0, 0.0], [4.0, 0.0], [4.0, 4.0], [0.0, 4.0]];
        let inside = [[1.0, 1.0], [2.0, 1.0], [2.0, 2.0]];
        let crossing = [[3.0, 1.0], [5.0, 1.0], [5.0, 2.0]];
        let touching = [[1.0, 0.0], [2.0, 1.0], [1.0, 1.0]];
        let outside = [[5.0, 1.0], [6.0, 1.0], [6.0, 2.0]];
        assert_eq!(check_inside(&outer, &inside, TOL), Ok(()));
        assert_eq!(check_inside(&outer, &crossing, TOL), Err(Arrangement::Touching));
        assert_eq!(check_inside(&outer, &touching, TOL), Err(Arrangement::Touching));
        assert_eq!(check_inside(&outer, &outside, TOL), Err(Arrangement::Containing));
        let big = [[0.5, 0.5], [3.0, 0.5], [3.0, 3.0], [0.5, 3.0]];
        assert_eq!(check_disjoint(&inside, &big, TOL), Err(Arrangement::Containing));
        assert_eq!(check_disjoint(&inside, &crossing, TOL), Ok(()));
    }

    /// Brute-force reference: any non-adjacent edge pair within `tol`, or a fold-back.
    fn crosses_brute_force(points: &[Point], tol: f64) -> bool {
        let n = points.len();
        (0..n).any(|i| {
            (i + 1..n).any(|j| {
                let (a, b, c, d) = (points[i], points[(i + 1) % n], points[j], points[(j + 1) % n]);
                let adjacent = j == i + 1 || (i == 0 && j == n - 1);
                if adjacent { folds_back([a, b, c, d], j == i + 1) } else { near(a, b, c, d, tol) }
            })
        })
    }

    #[test]
    fn sweep_finds_the_same_crossings_as_brute_force() {
        // Seeded xorshift so the test is reproducible; random polygons are mostly non-simple.
        let mut state: u64 = 0x9E37_79B9_7F4A_7C15;
        let mut next = || {
            state ^= state << 13;
            state ^= state >> 7;
            state ^= state << 17;
            (state >> 11) as f64 / (1u64 << 53) as f64
        };
        let (mut simple, mut crossing) = (0, 0);
        for trial in 0..400 {
            let n = 4 + trial % 9;
            let pts: Vec<Point> = (0..n).map(|_| [next(), next()]).collect();
            let expected = crosses_brute_force(&pts, TOL);
            assert_eq!(check_crossings(&pts, TOL).is_err(), expected, "trial {trial}: {pts:?}");
            if expected { crossing += 1 } else { simple += 1 }
        }
        // Both outcomes must be exercised for the comparison to mean anything.
        assert!(simple > 10 && crossing > 10, "simple {simple}, crossing {crossing}");
    }
}
