//! Simple shape builders and loop orientation.
//!
//! Takes shape parameters (rectangle corners, n-gon centre/radius/sides) or a loop, and returns
//! point lists; [`orient`] reverses a loop (and its edge parts) to the requested orientation.

use super::{BoundaryLoop, Point, signed_area};

/// Orientation of a closed loop.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Orientation {
    CounterClockwise,
    Clockwise,
}

/// The corners of the axis-parallel rectangle `[x0, x1] × [y0, y1]`, counter-clockwise from
/// `(x0, y0)`, so edges 0..4 are bottom, right, top and left.
pub fn rectangle(x0: f64, y0: f64, x1: f64, y1: f64) -> Vec<Point> {
    vec![[x0, y0], [x1, y0], [x1, y1], [x0, y1]]
}

/// Vertices of the regular `sides`-gon inscribed in the circle of `radius` about `center`,
/// counter-clockwise, the first vertex at angle `start_deg` (degrees from the +x axis).
pub fn regular_polygon(center: Point, radius: f64, sides: usize, start_deg: f64) -> Vec<Point> {
    let start = start_deg.to_radians();
    (0..sides)
        .map(|k| {
            let a = start + std::f64::consts::TAU * k as f64 / sides as f64;
            [center[0] + radius * a.cos(), center[1] + radius * a.sin()]
        })
        .collect()
}

/// Reverses `lp` in place when its orientation differs from `want`; returns true if it did.
///
/// Reversal keeps the first point: `[p0, p1, …, p_{n−1}]` becomes `[p0, p_{n−1}, …, p1]`, so the
/// new edge `k` is the old edge `n − 1 − k` and the edge-part list is simply reversed.
pub fn orient(lp: &mut BoundaryLoop, want: Orientation) -> bool {
    let ccw = signed_area(&lp.points) > 0.0;
    if ccw == (want == Orientation::CounterClockwise) {
        return false;
    }
    lp.points[1..].reverse();
    lp.edge_parts.reverse();
    true
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn regular_polygon_area_matches_the_inscribed_polygon_formula() {
        // Area of a regular n-gon of circumradius r: (n/2) r² sin(2π/n) (elementary geometry:
        // n isosceles triangles of apex angle 2π/n). Tolerance: shoelace round-off ~ n·eps·r².
        for &(n, r) in &[(3usize, 1.0), (4, 2.5), (7, 0.3), (128, 0.05)] {
            let pts = regular_polygon([0.2, -1.0], r, n, 10.0);
            let exact = 0.5 * n as f64 * r * r * (std::f64::consts::TAU / n as f64).sin();
            let tol = 16.0 * n as f64 * f64::EPSILON * r * r * 10.0;
            assert!((signed_area(&pts) - exact).abs() < tol, "n = {n}");
        }
    }

    #[test]
    fn orient_reverses_points_and_parts_consistently() {
        let mut lp = BoundaryLoop {
            name: "b".into(),
            points: rectangle(0.0, 0.0, 2.0, 1.0),
            edge_parts: vec![0, 1, 2, 3],
            circle: None,
        };
        assert!(orient(&mut lp, Orientation::Clockwise));
        assert!(lp.signed_area() < 0.0);
        // Old edge 3 (left, (0,1)->(0,0)) is new edge 0 ((0,0)->(0,1)).
        assert_eq!(lp.edge(0), ([0.0, 0.0], [0.0, 1.0]));
        assert_eq!(lp.edge_parts, vec![3, 2, 1, 0]);
        assert!(!orient(&mut lp, Orientation::Clockwise));
    }
}
