//! Quadrature rules on triangles (barycentric points, weights summing to one) and on the
//! unit interval.
//!
//! # References
//! D.A. Dunavant, *High degree efficient symmetrical Gaussian quadrature rules for the
//! triangle*, Int. J. Numer. Meth. Eng. 21 (1985) 1129–1148 (rules of degree 2, 4, 5, 6).
//! Gauss–Legendre rules: Abramowitz & Stegun, *Handbook of Mathematical Functions*, 25.4.29.

/// A symmetric rule on a triangle: barycentric coordinates and weights that sum to 1, so
/// `∫_T f ≈ |T| Σ w_q f(x_q)`.
#[derive(Debug)]
pub struct TriangleRule {
    pub degree: usize,
    pub points: &'static [([f64; 3], f64)],
}

/// Dunavant degree 2, 3 points.
pub static DEGREE_2: TriangleRule = TriangleRule {
    degree: 2,
    points: &[
        ([2.0 / 3.0, 1.0 / 6.0, 1.0 / 6.0], 1.0 / 3.0),
        ([1.0 / 6.0, 2.0 / 3.0, 1.0 / 6.0], 1.0 / 3.0),
        ([1.0 / 6.0, 1.0 / 6.0, 2.0 / 3.0], 1.0 / 3.0),
    ],
};

const D4_A: f64 = 0.445_948_490_915_965;
const D4_B: f64 = 1.0 - 2.0 * D4_A;
const D4_C: f64 = 0.091_576_213_509_771;
const D4_D: f64 = 1.0 - 2.0 * D4_C;
const D4_WA: f64 = 0.223_381_589_678_011;
const D4_WC: f64 = 0.109_951_743_655_322;

/// Dunavant degree 4, 6 points.
pub static DEGREE_4: TriangleRule = TriangleRule {
    degree: 4,
    points: &[
        ([D4_B, D4_A, D4_A], D4_WA),
        ([D4_A, D4_B, D4_A], D4_WA),
        ([D4_A, D4_A, D4_B], D4_WA),
        ([D4_D, D4_C, D4_C], D4_WC),
        ([D4_C, D4_D, D4_C], D4_WC),
        ([D4_C, D4_C, D4_D], D4_WC),
    ],
};

const D5_A: f64 = 0.470_142_064_105_115;
const D5_B: f64 = 1.0 - 2.0 * D5_A;
const D5_C: f64 = 0.101_286_507_323_456;
const D5_D: f64 = 1.0 - 2.0 * D5_C;
const D5_WA: f64 = 0.132_394_152_788_506;
const D5_WC: f64 = 0.125_939_180_544_827;

/// Dunavant degree 5, 7 points.
pub static DEGREE_5: TriangleRule = TriangleRule {
    degree: 5,
    points: &[
        ([1.0 / 3.0, 1.0 / 3.0, 1.0 / 3.0], 0.225),
        ([D5_B, D5_A, D5_A], D5_WA),
        ([D5_A, D5_B, D5_A], D5_WA),
        ([D5_A, D5_A, D5_B], D5_WA),
        ([D5_D, D5_C, D5_C], D5_WC),
        ([D5_C, D5_D, D5_C], D5_WC),
        ([D5_C, D5_C, D5_D], D5_WC),
    ],
};

const D6_A: f64 = 0.249_286_745_170_910;
const D6_B: f64 = 1.0 - 2.0 * D6_A;
const D6_C: f64 = 0.063_089_014_491_502;
const D6_D: f64 = 1.0 - 2.0 * D6_C;
const D6_E: f64 = 0.053_145_049_844_817;
const D6_F: f64 = 0.310_352_451_033_784;
const D6_G: f64 = 1.0 - D6_E - D6_F;
const D6_WA: f64 = 0.116_786_275_726_379;
const D6_WC: f64 = 0.050_844_906_370_207;
const D6_WE: f64 = 0.082_851_075_618_374;

/// Dunavant degree 6, 12 points.
pub static DEGREE_6: TriangleRule = TriangleRule {
    degree: 6,
    points: &[
        ([D6_B, D6_A, D6_A], D6_WA),
        ([D6_A, D6_B, D6_A], D6_WA),
        ([D6_A, D6_A, D6_B], D6_WA),
        ([D6_D, D6_C, D6_C], D6_WC),
        ([D6_C, D6_D, D6_C], D6_WC),
        ([D6_C, D6_C, D6_D], D6_WC),
        ([D6_E, D6_F, D6_G], D6_WE),
        ([D6_E, D6_G, D6_F], D6_WE),
        ([D6_F, D6_E, D6_G], D6_WE),
        ([D6_F, D6_G, D6_E], D6_WE),
        ([D6_G, D6_E, D6_F], D6_WE),
        ([D6_G, D6_F, D6_E], D6_WE),
    ],
};

/// The cheapest rule of this module exact for polynomials of degree `degree` (at most 6).
///
/// # Panics
/// When `degree > 6` (a programming error: no caller needs more).
pub fn triangle_rule(degree: usize) -> &'static TriangleRule {
    match degree {
        0..=2 => &DEGREE_2,
        3..=4 => &DEGREE_4,
        5 => &DEGREE_5,
        6 => &DEGREE_6,
        _ => panic!("no triangle rule of degree {degree} (max 6)"),
    }
}

/// Gauss–Legendre points and weights on `[0, 1]` with 3 points (exact for degree 5).
pub fn gauss_legendre_unit_3() -> [(f64, f64); 3] {
    let a = (3.0_f64 / 5.0).sqrt() / 2.0;
    [(0.5 - a, 5.0 / 18.0), (0.5, 8.0 / 18.0), (0.5 + a, 5.0 / 18.0)]
}

#[cfg(test)]
mod tests {
    use super::*;

    /// ∫ over the reference triangle of L1^a L2^b = a! b! / (a + b + 2)!, so the mean value
    /// (divide by the area 1/2) is 2 a! b! / (a + b + 2)!.
    fn exact_mean(a: u32, b: u32) -> f64 {
        let fact = |n: u32| (1..=n).map(f64::from).product::<f64>();
        2.0 * fact(a) * fact(b) / fact(a + b + 2)
    }

    #[test]
    fn rules_integrate_monomials_up_to_their_degree() {
        for rule in [&DEGREE_2, &DEGREE_4, &DEGREE_5, &DEGREE_6] {
            let total: f64 = rule.points.iter().map(|p| p.1).sum();
            assert!(
                (total - 1.0).abs() < 1e-14,
                "weights of degree {} sum to {total}",
                rule.degree
            );
            for a in 0..=rule.degree as u32 {
                for b in 0..=(rule.degree as u32 - a) {
                    let q: f64 = rule
                        .points
                        .iter()
                        .map(|(l, w)| w * l[1].powi(a as i32) * l[2].powi(b as i32))
                        .sum();
                    let e = exact_mean(a, b);
                    assert!(
                        (q - e).abs() < 1e-14,
                        "degree {} rule on L1^{a} L2^{b}: {q} vs {e}",
                        rule.degree
                    );
                }
            }
        }
    }

    #[test]
    fn gauss3_is_exact_to_degree_5() {
        for k in 0..=5 {
            let q: f64 = gauss_legendre_unit_3().iter().map(|(s, w)| w * s.powi(k)).sum();
            assert!((q - 1.0 / f64::from(k + 1)).abs() < 1e-15);
        }
    }
}
