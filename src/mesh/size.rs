//! The mesh-size field and the triangle-count integrals it drives.
//!
//! Takes [`MeshControls`]; returns target edge lengths
//! `h(x) = min(size, min_g (h_min,g + growth_g · |x − p_g|))`, the integral
//! `∫ dA / (√3/4 · h(x)²)` (the number of equilateral triangles of side `h` that tile the
//! domain) over a set of triangles, and `∫ ds / h` along boundary segments.

use super::{Grading, MeshControls};
use crate::geometry::Point;

/// `√3/4`: area of the equilateral triangle with unit side.
pub(crate) const EQUILATERAL_AREA: f64 = 0.433_012_701_892_219_3;

/// Upper limit on the samples used to equidistribute points along one segment.
const MAX_SEGMENT_SAMPLES: usize = 1 << 20;

/// Adaptive cells are split until `h` varies by at most this factor across them.
const MAX_SIZE_RATIO_PER_CELL: f64 = 1.5;

/// Recursion limit of the adaptive integral (cells shrink by 2^-40 at most).
const MAX_DEPTH: u32 = 40;

/// Target edge length `h(x) = min(size, min_g (h_min + growth · r_g))`.
pub(crate) struct SizeField<'a> {
    size: f64,
    grading: &'a [Grading],
}

impl<'a> SizeField<'a> {
    pub(crate) fn new(controls: &'a MeshControls) -> Self {
        SizeField { size: controls.size, grading: &controls.grading }
    }

    /// The global (largest) target size.
    pub(crate) fn size(&self) -> f64 {
        self.size
    }

    /// `h(p)`.
    pub(crate) fn at(&self, p: Point) -> f64 {
        self.grading.iter().fold(self.size, |h, g| h.min(g.h_min + g.growth * dist(p, g.point)))
    }

    /// Exact lower bound of `h` over the segment `[a, b]` (distance to the closest point).
    pub(crate) fn min_on_segment(&self, a: Point, b: Point) -> f64 {
        self.grading
            .iter()
            .fold(self.size, |h, g| h.min(g.h_min + g.growth * dist_to_segment(g.point, a, b)))
    }

    /// Upper bound of `h` over the closed triangle `t`: each grading term is largest at the
    /// vertex farthest from its point (distance is convex), and the minimum of the terms is
    /// at most the minimum of their maxima. Tight where one grading dominates the triangle
    /// (a global Lipschitz bound instead made the count integral split far-field cells of
    /// steeply graded meshes for minutes).
    fn max_on_triangle(&self, t: &[Point; 3]) -> f64 {
        self.grading.iter().fold(self.size, |h, g| {
            let d = t.iter().map(|&v| dist(v, g.point)).fold(0.0, f64::max);
            h.min(g.h_min + g.growth * d)
        })
    }

    /// Exact lower bound of `h` over the closed triangle `t`.
    fn min_on_triangle(&self, t: &[Point; 3]) -> f64 {
        self.grading.iter().fold(self.size, |h, g| {
            let d = if contains(t, g.point) {
                0.0
            } else {
                (0..3)
                    .map(|k| dist_to_segment(g.point, t[k], t[(k + 1) % 3]))
                    .fold(f64::MAX, f64::min)
            };
            h.min(g.h_min + g.growth * d)
        })
    }
}

/// Target length along a boundary part: the field, capped by the part's own size if set.
pub(crate) fn boundary_size(field: &SizeField, part_size: Option<f64>, p: Point) -> f64 {
    part_size.map_or(field.at(p), |s| s.min(field.at(p)))
}

/// Cumulative `∫ ds / h(s)` along `[a, b]` on a uniform sample grid (trapezoidal rule).
///
/// The grid has at least 16 and about `4 L / h_min` intervals, so `h` changes little within
/// one interval; returns the cumulative values at the `m + 1` grid points.
pub(crate) fn cumulative_inverse_size(
    a: Point,
    b: Point,
    part_size: Option<f64>,
    field: &SizeField,
) -> Vec<f64> {
    let len = dist(a, b);
    let h_lo = part_size.map_or(f64::INFINITY, |s| s).min(field.min_on_segment(a, b));
    let m = ((4.0 * len / h_lo).ceil().min(MAX_SEGMENT_SAMPLES as f64) as usize).max(16);
    let inv = |k: usize| 1.0 / boundary_size(field, part_size, lerp(a, b, k as f64 / m as f64));
    let mut cum = Vec::with_capacity(m + 1);
    cum.push(0.0);
    let (mut prev, step) = (inv(0), len / m as f64);
    for k in 1..=m {
        let next = inv(k);
        cum.push(cum[k - 1] + 0.5 * (prev + next) * step);
        prev = next;
    }
    cum
}

/// `∫_T dA / (√3/4 · h²)` summed over the triangles, by adaptive subdivision: a cell is
/// split into four until `h` varies by at most 20 % over it, then a 3-point rule of degree 2
/// is applied. Cells shrink geometrically toward grading points, so the cost depends on the
/// number of grading points and the ratio `size / h_min`, not on the mesh size.
pub(crate) fn equilateral_count(triangles: &[[Point; 3]], field: &SizeField) -> f64 {
    triangles.iter().map(|t| adaptive(t, field, 0)).sum()
}

fn adaptive(t: &[Point; 3], field: &SizeField, depth: u32) -> f64 {
    let h_hi = field.max_on_triangle(t);
    let h_lo = field.min_on_triangle(t);
    if depth >= MAX_DEPTH || h_hi <= MAX_SIZE_RATIO_PER_CELL * h_lo {
        let area = 0.5
            * ((t[1][0] - t[0][0]) * (t[2][1] - t[0][1])
                - (t[2][0] - t[0][0]) * (t[1][1] - t[0][1]))
                .abs();
        // Degree-2 rule with points at barycentric (2/3, 1/6, 1/6) and permutations.
        let q: f64 = (0..3)
            .map(|k| {
                let (p, r, s) = (t[k], t[(k + 1) % 3], t[(k + 2) % 3]);
                let x = [(4.0 * p[0] + r[0] + s[0]) / 6.0, (4.0 * p[1] + r[1] + s[1]) / 6.0];
                1.0 / field.at(x).powi(2)
            })
            .sum::<f64>()
            / 3.0;
        return area * q / EQUILATERAL_AREA;
    }
    let m = [mid(t[0], t[1]), mid(t[1], t[2]), mid(t[2], t[0])];
    [[t[0], m[0], m[2]], [m[0], t[1], m[1]], [m[2], m[1], t[2]], [m[0], m[1], m[2]]]
        .iter()
        .map(|s| adaptive(s, field, depth + 1))
        .sum()
}

/// Euclidean distance by `sqrt(dx² + dy²)`: several times faster than `hypot`, which
/// dominated the count integral, and safe for mesh coordinates (no overflow below 1e150).
pub(crate) fn dist(a: Point, b: Point) -> f64 {
    let (dx, dy) = (a[0] - b[0], a[1] - b[1]);
    (dx * dx + dy * dy).sqrt()
}

pub(crate) fn lerp(a: Point, b: Point, t: f64) -> Point {
    [a[0] + t * (b[0] - a[0]), a[1] + t * (b[1] - a[1])]
}

fn mid(a: Point, b: Point) -> Point {
    [0.5 * (a[0] + b[0]), 0.5 * (a[1] + b[1])]
}

pub(crate) fn centroid(t: &[Point; 3]) -> Point {
    [(t[0][0] + t[1][0] + t[2][0]) / 3.0, (t[0][1] + t[1][1] + t[2][1]) / 3.0]
}

/// Euclidean distance from `p` to the closed segment `[a, b]`.
pub(crate) fn dist_to_segment(p: Point, a: Point, b: Point) -> f64 {
    let (dx, dy) = (b[0] - a[0], b[1] - a[1]);
    let len2 = dx * dx + dy * dy;
    let t = if len2 > 0.0 {
        (((p[0] - a[0]) * dx + (p[1] - a[1]) * dy) / len2).clamp(0.0, 1.0)
    } else {
        0.0
    };
    dist(p, [a[0] + t * dx, a[1] + t * dy])
}

/// Is `p` in the closed triangle `t` (either orientation)?
fn contains(t: &[Point; 3], p: Point) -> bool {
    let s = |a: Point, b: Point| (b[0] - a[0]) * (p[1] - a[1]) - (b[1] - a[1]) * (p[0] - a[0]);
    let (d0, d1, d2) = (s(t[0], t[1]), s(t[1], t[2]), s(t[2], t[0]));
    (d0 >= 0.0 && d1 >= 0.0 && d2 >= 0.0) || (d0 <= 0.0 && d1 <= 0.0 && d2 <= 0.0)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn controls(size: f64, grading: Vec<Grading>) -> MeshControls {
        MeshControls { size, part_sizes: vec![], grading, min_angle_deg: 30.0, max_triangles: 1 }
    }

    #[test]
    fn uniform_field_counts_area_over_equilateral_area() {
        let ctl = controls(0.1, vec![]);
        let field = SizeField::new(&ctl);
        let t = [[0.0, 0.0], [1.0, 0.0], [0.0, 1.0]];
        let n = equilateral_count(&[t], &field);
        // Exact: 0.5 / (√3/4 · 0.01); only rounding (a few ulps) separates them.
        assert!((n - 0.5 / (EQUILATERAL_AREA * 0.01)).abs() < 1e-12 * n, "{n}");
    }

    #[test]
    fn graded_integral_matches_the_closed_form_over_a_disc() {
        // h = h0 + g r with no cap inside the disc of radius R around the grading point:
        // ∫ dA / (√3/4 h²) = 2π/(√3/4 g²) · [ln((h0 + gR)/h0) + h0/(h0 + gR) − 1]
        // (elementary integration of r/(h0 + g r)²).
        let (h0, g, radius) = (1e-3, 0.3, 1.0);
        let ctl = controls(10.0, vec![Grading { point: [0.0, 0.0], h_min: h0, growth: g }]);
        let field = SizeField::new(&ctl);
        let n = 1024;
        let fan: Vec<[Point; 3]> = (0..n)
            .map(|k| {
                let p = |k: usize| {
                    let t = 2.0 * std::f64::consts::PI * k as f64 / n as f64;
                    [radius * t.cos(), radius * t.sin()]
                };
                [[0.0, 0.0], p(k), p(k + 1)]
            })
            .collect();
        let hr = h0 + g * radius;
        let exact = 2.0 * std::f64::consts::PI / (EQUILATERAL_AREA * g * g)
            * ((hr / h0).ln() + h0 / hr - 1.0);
        let got = equilateral_count(&fan, &field);
        // Tolerance: the degree-2 rule misses the cubic Taylor term of 1/h² over cells where
        // h varies by ≤ 20 %, about 0.2³ ≈ 0.8 % in the worst cell; the 1024-gon misses
        // (2π/1024)²/6 ≈ 6e-6 of the disc. 1 % bounds both.
        assert!((got - exact).abs() < 0.01 * exact, "{got} vs {exact}");
    }

    #[test]
    fn boundary_integral_is_length_over_size_when_uniform() {
        let ctl = controls(0.1, vec![]);
        let field = SizeField::new(&ctl);
        let cum = cumulative_inverse_size([0.0, 0.0], [2.2, 0.0], None, &field);
        // ∫ ds / h = 2.2 / 0.1 = 22, up to the rounding of a sum of ≥ 16 terms.
        assert!((cum[cum.len() - 1] - 22.0).abs() < 1e-12);
        let cum = cumulative_inverse_size([0.0, 0.0], [2.2, 0.0], Some(0.01), &field);
        assert!((cum[cum.len() - 1] - 220.0).abs() < 1e-10);
    }

    #[test]
    fn lower_bounds_never_exceed_point_values() {
        let g = Grading { point: [0.3, 0.1], h_min: 0.01, growth: 0.5 };
        let ctl = controls(0.2, vec![g]);
        let field = SizeField::new(&ctl);
        let t = [[0.0, 0.0], [1.0, 0.2], [0.4, 0.9]];
        let lo = field.min_on_triangle(&t);
        assert_eq!(lo, 0.01, "the grading point lies inside the triangle");
        for (a, b) in [(0.2, 0.3), (0.5, 0.1), (0.3, 0.6)] {
            let p = [
                a * t[0][0] + b * t[1][0] + (1.0 - a - b) * t[2][0],
                a * t[0][1] + b * t[1][1] + (1.0 - a - b) * t[2][1],
            ];
            assert!(field.at(p) >= lo);
        }
        assert!(field.min_on_segment(t[0], t[1]) <= field.at(t[0]).min(field.at(t[1])));
    }
}
