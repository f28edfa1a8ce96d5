//! NACA 4-digit profiles with a sharp (closed) trailing edge.
//!
//! Takes the four digits `MPTT`, a chord, an incidence, a position and a point count, and
//! returns the closed profile as a counter-clockwise point list starting at the trailing edge.
//!
//! Maths (Jacobs, Ward & Pinkerton, NACA Report 460, 1933; Abbott & von Doenhoff, *Theory of
//! Wing Sections*, 1959, §6.4), with `x` in chords, `m = M/100`, `p = P/10`, `t = TT/100`:
//!
//! * thickness `y_t = 5t (0.2969 √x − 0.1260 x − 0.3516 x² + 0.2843 x³ − 0.1036 x⁴)`; the last
//!   coefficient is the closed-trailing-edge variant of the published −0.1015, chosen so the
//!   five coefficients sum to zero and `y_t(1) = 0` exactly in exact arithmetic;
//! * camber `y_c = m/p² (2px − x²)` for `x < p` and `m/(1−p)² (1 − 2p + 2px − x²)` for `x ≥ p`;
//! * surfaces `x_u = x − y_t sin θ`, `y_u = y_c + y_t cos θ`, `x_l = x + y_t sin θ`,
//!   `y_l = y_c − y_t cos θ`, with `θ = atan(dy_c/dx)`.
//!
//! Stations use cosine spacing `x_i = (1 − cos β_i)/2`, `β_i = iπ/(n−1)`, which clusters points
//! at both the leading and the trailing edge.

use super::Point;

/// Thickness coefficients of the closed-trailing-edge NACA 4-digit section, `[a0, a1, a2, a3, a4]`.
pub const THICKNESS_COEFFICIENTS: [f64; 5] = [0.2969, -0.1260, -0.3516, 0.2843, -0.1036];

/// The smallest accepted number of stations per surface.
pub const MIN_POINTS_PER_SIDE: usize = 5;
/// The largest accepted number of stations per surface.
pub const MAX_POINTS_PER_SIDE: usize = 100_000;

/// A NACA 4-digit profile placed in the plane.
#[derive(Clone, Debug, PartialEq)]
pub struct NacaProfile {
    /// Maximum camber as a fraction of the chord (`M/100`).
    pub max_camber: f64,
    /// Chordwise position of maximum camber as a fraction of the chord (`P/10`).
    pub camber_position: f64,
    /// Maximum thickness as a fraction of the chord (`TT/100`).
    pub thickness: f64,
    /// Chord length.
    pub chord: f64,
    /// Incidence in degrees; positive is nose-up, i.e. a clockwise rotation about `pivot`.
    pub incidence_deg: f64,
    /// Where the leading edge sits before the rotation.
    pub leading_edge: Point,
    /// Centre of the rotation (absolute coordinates).
    pub pivot: Point,
    /// Number of stations on each surface, leading and trailing edge included.
    pub points_per_side: usize,
}

/// Why a NACA designation or profile was rejected.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum NacaError {
    #[error("`{0}` is not a NACA 4-digit designation (expected four digits such as \"2412\")")]
    BadDigits(String),
    #[error("a cambered section needs camber position P between 1 and 9, got 0 in `{0}`")]
    CamberWithoutPosition(String),
    #[error("thickness must be between 1 and 99 percent of the chord, got `{0}`")]
    BadThickness(String),
    #[error(
        "points_per_side = {0} is out of range ({MIN_POINTS_PER_SIDE} to {MAX_POINTS_PER_SIDE})"
    )]
    PointCount(usize),
    #[error("chord must be positive and finite, got {0}")]
    BadChord(f64),
}

/// Splits a designation such as `"2412"` into `(m, p, t)` as chord fractions.
///
/// # Errors
/// [`NacaError`] when the text is not four digits, has camber without a position, or zero thickness.
pub fn parse_designation(digits: &str) -> Result<(f64, f64, f64), NacaError> {
    let d: Vec<u32> = digits.trim().chars().filter_map(|c| c.to_digit(10)).collect();
    if d.len() != 4 || digits.trim().chars().count() != 4 {
        return Err(NacaError::BadDigits(digits.to_string()));
    }
    let (m, p, t) = (d[0] as f64 / 100.0, d[1] as f64 / 10.0, (10 * d[2] + d[3]) as f64 / 100.0);
    if m > 0.0 && p == 0.0 {
        return Err(NacaError::CamberWithoutPosition(digits.to_string()));
    }
    if t == 0.0 {
        return Err(NacaError::BadThickness(digits.to_string()));
    }
    Ok((m, p, t))
}

/// Half-thickness `y_t(x)` of the closed-trailing-edge section of thickness ratio `t`, for `x` in chords.
///
/// # References
/// E. N. Jacobs, K. E. Ward, R. M. Pinkerton, NACA Report 460 (1933), with the trailing-edge
/// coefficient changed from −0.1015 to −0.1036 so that `y_t(1) = 0`.
pub fn half_thickness(t: f64, x: f64) -> f64 {
    let [a0, a1, a2, a3, a4] = THICKNESS_COEFFICIENTS;
    5.0 * t * (a0 * x.sqrt() + x * (a1 + x * (a2 + x * (a3 + x * a4))))
}

/// Camber line `y_c(x)` and its slope `dy_c/dx` for maximum camber `m` at position `p`.
pub fn camber(m: f64, p: f64, x: f64) -> (f64, f64) {
    if m == 0.0 || p <= 0.0 {
        return (0.0, 0.0);
    }
    if x < p {
        (m / (p * p) * (2.0 * p * x - x * x), 2.0 * m / (p * p) * (p - x))
    } else {
        let q = (1.0 - p) * (1.0 - p);
        (m / q * (1.0 - 2.0 * p + 2.0 * p * x - x * x), 2.0 * m / q * (p - x))
    }
}

impl NacaProfile {
    /// The profile as a counter-clockwise loop: trailing edge first, then the upper surface
    /// toward the leading edge, then the lower surface back. Exactly one point sits at the
    /// trailing edge and one at the leading edge; `2 (points_per_side − 1)` points in all.
    ///
    /// # Errors
    /// [`NacaError::PointCount`] or [`NacaError::BadChord`].
    ///
    /// # References
    /// Surface construction perpendicular to the camber line: I. H. Abbott, A. E. von Doenhoff,
    /// *Theory of Wing Sections*, Dover 1959, §6.4.
    pub fn points(&self) -> Result<Vec<Point>, NacaError> {
        let n = self.points_per_side;
        if !(MIN_POINTS_PER_SIDE..=MAX_POINTS_PER_SIDE).contains(&n) {
            return Err(NacaError::PointCount(n));
        }
        if !(self.chord.is_finite() && self.chord > 0.0) {
            return Err(NacaError::BadChord(self.chord));
        }
        let station =
            |i: usize| 0.5 * (1.0 - (std::f64::consts::PI * i as f64 / (n - 1) as f64).cos());
        let mut local = Vec::with_capacity(2 * n - 2);
        // The trailing edge: on the camber line, where y_t vanishes.
        local.push([1.0, camber(self.max_camber, self.camber_position, 1.0).0]);
        for i in (1..n - 1).rev() {
            local.push(self.surface_point(station(i), 1.0));
        }
        local.push([0.0, 0.0]);
        for i in 1..n - 1 {
            local.push(self.surface_point(station(i), -1.0));
        }
        Ok(local.into_iter().map(|q| self.place(q)).collect())
    }

    /// The trailing-edge point in the plane (the first point of [`NacaProfile::points`]).
    pub fn trailing_edge(&self) -> Point {
        self.place([1.0, camber(self.max_camber, self.camber_position, 1.0).0])
    }

    /// Point on the upper (`side = 1`) or lower (`side = −1`) surface at station `x`, in chords.
    fn surface_point(&self, x: f64, side: f64) -> Point {
        let (yc, slope) = camber(self.max_camber, self.camber_position, x);
        let theta = slope.atan();
        let yt = half_thickness(self.thickness, x);
        [x - side * yt * theta.sin(), yc + side * yt * theta.cos()]
    }

    /// Scales a chord-unit point, moves it to the leading edge and rotates it clockwise by the incidence.
    fn place(&self, q: Point) -> Point {
        let p =
            [self.leading_edge[0] + self.chord * q[0], self.leading_edge[1] + self.chord * q[1]];
        let (s, c) = (-self.incidence_deg.to_radians()).sin_cos();
        let (dx, dy) = (p[0] - self.pivot[0], p[1] - self.pivot[1]);
        [self.pivot[0] + c * dx - s * dy, self.pivot[1] + s * dx + c * dy]
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::geometry::signed_area;

    fn profile(digits: &str, n: usize) -> NacaProfile {
        let (m, p, t) = parse_designation(digits).unwrap();
        NacaProfile {
            max_camber: m,
            camber_position: p,
            thickness: t,
            chord: 1.0,
            incidence_deg: 0.0,
            leading_edge: [0.0, 0.0],
            pivot: [0.25, 0.0],
            points_per_side: n,
        }
    }

    #[test]
    fn closed_coefficients_sum_to_zero_so_the_trailing_edge_is_sharp() {
        // Five coefficients of magnitude < 0.36, summed: round-off below 5 * 0.5 ulp(0.36) < 1e-16.
        let y = half_thickness(0.12, 1.0);
        assert!(y.abs() < 5.0 * 0.6 * 1e-16 * 5.0, "y_t(1) = {y:e}");
    }

    #[test]
    fn designation_parsing_rejects_malformed_text() {
        assert_eq!(parse_designation("2412").unwrap(), (0.02, 0.4, 0.12));
        assert!(matches!(parse_designation("241"), Err(NacaError::BadDigits(_))));
        assert!(matches!(parse_designation("24a2"), Err(NacaError::BadDigits(_))));
        assert!(matches!(parse_designation("2012"), Err(NacaError::CamberWithoutPosition(_))));
        assert!(matches!(parse_designation("0000"), Err(NacaError::BadThickness(_))));
    }

    #[test]
    fn profile_is_counter_clockwise_with_one_trailing_edge_point() {
        let pts = profile("2412", 41).points().unwrap();
        assert_eq!(pts.len(), 80);
        assert!(signed_area(&pts) > 0.0);
        // Only the first point lies at x = 1.
        assert_eq!(pts.iter().filter(|p| (p[0] - 1.0).abs() < 1e-12).count(), 1);
    }

    #[test]
    fn incidence_rotates_nose_up_about_the_pivot() {
        let mut prof = profile("0012", 21);
        prof.incidence_deg = 90.0;
        let te = prof.trailing_edge();
        // Nose-up by 90°: the trailing edge (0.75 behind the pivot) swings straight down.
        // Tolerance: cos(π/2) in floating point is 6.1e-17; times a lever of 0.75.
        assert!((te[0] - 0.25).abs() < 1e-15 && (te[1] + 0.75).abs() < 1e-15, "{te:?}");
    }

    #[test]
    fn thickness_at_thirty_percent_chord_is_the_nominal_thickness() {
        // Outside fact (common knowledge of the NACA 4-digit family, e.g. Abbott & von Doenhoff
        // 1959, §6.4): the maximum thickness t of a 00xx section sits at x ≈ 0.30 c.
        // Tolerance: the published coefficients are rounded to 4 decimals (±5e-5 each); the
        // full thickness 2·5t·Σ|δa_k| x^k at x = 0.3 then varies by at most
        // 10t·5e-5·(√0.3 + 0.3 + 0.09 + 0.027 + 0.0081) = 4.9e-4 t; the closed-edge coefficient
        // −0.1036 instead of −0.1015 shifts it by 10t·0.0021·0.3⁴ = 1.7e-4 t. Sum: 6.6e-4 t.
        for t in [0.06, 0.12, 0.21] {
            let full = 2.0 * half_thickness(t, 0.3);
            assert!((full - t).abs() <= 6.6e-4 * t, "t = {t}: thickness {full}");
        }
    }

    #[test]
    fn trailing_edge_closes_to_round_off_on_the_generated_profile() {
        let pts = profile("0012", 101).points().unwrap();
        // Last lower-surface point and the first upper one straddle the TE; the TE itself
        // is a single point at (1, 0): its y equals the camber (0) exactly by construction.
        assert_eq!(pts[0], [1.0, 0.0]);
        // The neighbours close in on it: y_t(x) ≈ 5t·Σa_k·(x−1)… vanishes linearly, so at the
        // first station (1 − x ≈ (π/100)²/4 = 2.5e-4) the half-thickness is below
        // 5t·|y_t'(1)|·2.5e-4 with |y_t'(1)| ≤ 0.5·0.2969 + 0.1260 + 0.7032 + 0.8529 + 0.4144 < 2.3.
        let bound = 5.0 * 0.12 * 2.3 * 2.5e-4;
        assert!(pts[1][1].abs() < bound && pts[pts.len() - 1][1].abs() < bound);
    }

    #[test]
    fn profile_area_converges_to_the_known_naca_0012_area() {
        // From memory (mark: not retrieved): the standard NACA 0012 encloses ≈ 0.0822 c²
        // (0.685 t c). The closed-edge coefficient removes 2·5t·0.0021/5 c² = 0.0042 t c²
        // = 5.04e-4 c², so the closed section should enclose 0.0822 − 0.0005 = 0.0817 c²;
        // 5e-5 is the rounding of the remembered value.
        let exact_closed = 0.0822 - 0.0042 * 0.12;
        let mut errors = Vec::new();
        for n in [21, 41, 81, 161] {
            let area = signed_area(&profile("0012", n).points().unwrap());
            errors.push((area - exact_closed).abs());
        }
        assert!(errors[3] < 5e-5, "errors {errors:?}");
        // The inscribed polygon misses area between stations, so the error shrinks with refinement.
        assert!(errors[0] > errors[1] && errors[1] > errors[2], "errors {errors:?}");
    }

    #[test]
    fn common_sections_give_simple_loops_at_any_resolution() {
        use crate::geometry::validate::check_loop;
        for digits in ["0006", "0012", "0021", "2412", "4412", "4415", "6409", "2424"] {
            for n in [5, 11, 41, 161, 1001] {
                let pts = profile(digits, n).points().unwrap();
                // Tolerance 1e-10 chord: the one the case builder uses (relative to the domain).
                assert_eq!(check_loop(&pts, 1e-10), Ok(()), "NACA {digits}, {n} per side");
            }
        }
    }
}
