//! Element kernels of the Navier–Stokes terms on one affine triangle: the mass matrix, the
//! convective term linearised by Newton's or Picard's method, and the explicit convection
//! load of a time stepper.
//!
//! Takes the triangle and the nodal values of a velocity `w` (six P2 nodes, local order
//! `[v0, v1, v2, m01, m12, m20]`); adds to a [`LocalSystem`] in the local numbering of
//! [`super::kernels`] (velocity unknown `2k + c` is component `c` of node `k`).
//!
//! With `N(u) = (u·∇)u`, the convective form is `n(u, v) = ((u·∇)u, v)`. Its derivative at
//! `w` in the direction `δ` is `n'(w)δ = ((w·∇)δ, v) + ((δ·∇)w, v)`, so for the basis
//! function `φ_l e_d` (trial) and `φ_k e_c` (test)
//!
//! ```text
//! Newton:  J_(kc),(ld) = ∫ φ_k [ δ_cd (w·∇φ_l) + φ_l ∂_d w_c ]
//! Picard:  J_(kc),(ld) = ∫ φ_k   δ_cd (w·∇φ_l)
//! ```
//!
//! Newton's step solves `[K + n'(w)] u = f + N(w)` for the new iterate `u` (since
//! `n'(w) w = 2 N(w)`), so [`add_newton_convection`] also adds the load `(N(w), φ_k e_c)`.
//! The integrands are of degree 5 (`w` quadratic, `∇φ` linear, `φ` quadratic), so the
//! degree-5 Dunavant rule integrates them exactly; the mass matrix (degree 4) likewise.
//!
//! # References
//! J. Donea, A. Huerta, *Finite Element Methods for Flow Problems*, Wiley 2003, ch. 6
//! (Newton linearisation of the convective term; from memory). D.A. Dunavant, Int. J. Numer.
//! Meth. Eng. 21 (1985) 1129–1148 (the quadrature rules).

use super::kernels::{LOCAL_VELOCITY, LocalSystem};
use super::quadrature::triangle_rule;
use super::shape::{AffineTriangle, p2_gradients, p2_values};

/// Velocity `w` and its gradient `G[c][d] = ∂_d w_c` at one point, from nodal values.
fn velocity_and_gradient(
    phi: &[f64; 6],
    grad: &[[f64; 2]; 6],
    nodal: &[[f64; 2]; 6],
) -> ([f64; 2], [[f64; 2]; 2]) {
    let mut w = [0.0; 2];
    let mut g = [[0.0; 2]; 2];
    for k in 0..6 {
        for c in 0..2 {
            w[c] += phi[k] * nodal[k][c];
            for d in 0..2 {
                g[c][d] += grad[k][d] * nodal[k][c];
            }
        }
    }
    (w, g)
}

/// Adds `scale · ∫ φ_k φ_l` to the like-component velocity entries (the mass matrix times
/// `scale`, e.g. `3/(2Δt)` for BDF2).
#[allow(non_snake_case)]
pub fn add_mass_block(tri: &AffineTriangle, scale: f64, local: &mut LocalSystem) {
    let rule = triangle_rule(4);
    let M = &mut local.matrix;
    for &(l, w) in rule.points {
        let phi = p2_values(l);
        let s = scale * w * tri.area;
        for k in 0..6 {
            for m in 0..6 {
                let v = s * phi[k] * phi[m];
                M[2 * k][2 * m] += v;
                M[2 * k + 1][2 * m + 1] += v;
            }
        }
    }
}

/// How the convective term is linearised around the current iterate.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Linearisation {
    /// Fixed-point (Oseen) step: `((w·∇)u, v)`, load unchanged.
    Picard,
    /// Newton step: `((w·∇)u, v) + ((u·∇)w, v)`, load `+ (N(w), v)`.
    Newton,
}

/// Adds the linearised convection of `w` (nodal values) to the velocity block of `local`,
/// and for [`Linearisation::Newton`] the load `(N(w), φ_k e_c)` (see the module docs).
#[allow(non_snake_case)]
pub fn add_linearised_convection(
    tri: &AffineTriangle,
    nodal: &[[f64; 2]; 6],
    linearisation: Linearisation,
    local: &mut LocalSystem,
) {
    let rule = triangle_rule(5);
    let newton = linearisation == Linearisation::Newton;
    for &(l, wq) in rule.points {
        let phi = p2_values(l);
        let grad = p2_gradients(l, &tri.grad_bary);
        let (w, G) = velocity_and_gradient(&phi, &grad, nodal);
        let s = wq * tri.area;
        let advect: [f64; 6] = std::array::from_fn(|m| w[0] * grad[m][0] + w[1] * grad[m][1]);
        let J = &mut local.matrix;
        for k in 0..6 {
            let sk = s * phi[k];
            for m in 0..6 {
                let a = sk * advect[m];
                J[2 * k][2 * m] += a;
                J[2 * k + 1][2 * m + 1] += a;
                if newton {
                    let b = sk * phi[m];
                    for c in 0..2 {
                        for d in 0..2 {
                            J[2 * k + c][2 * m + d] += b * G[c][d];
                        }
                    }
                }
            }
        }
        if newton {
            let n = [w[0] * G[0][0] + w[1] * G[0][1], w[0] * G[1][0] + w[1] * G[1][1]];
            for (k, phi_k) in phi.iter().enumerate() {
                local.load[2 * k] += s * phi_k * n[0];
                local.load[2 * k + 1] += s * phi_k * n[1];
            }
        }
    }
}

/// Adds the load of one explicit time step to `load` (velocity entries only):
/// `∫ φ_k [ h_c − ((e·∇)e)_c + f_c ]`, where `h` is the mass-weighted history (nodal values,
/// e.g. `(4uⁿ − uⁿ⁻¹)/(2Δt)` for BDF2), `e` the extrapolated convecting velocity (nodal values,
/// `2uⁿ − uⁿ⁻¹`) and `f` the body force. Degree-5 rule: exact for the history and convection
/// terms.
pub fn add_explicit_step_load(
    tri: &AffineTriangle,
    history: &[[f64; 2]; 6],
    extrapolated: &[[f64; 2]; 6],
    force: Option<&(dyn Fn(f64, f64) -> [f64; 2] + Sync)>,
    load: &mut [f64],
) {
    let rule = triangle_rule(5);
    for &(l, wq) in rule.points {
        let phi = p2_values(l);
        let grad = p2_gradients(l, &tri.grad_bary);
        let (e, g) = velocity_and_gradient(&phi, &grad, extrapolated);
        let mut h = [0.0; 2];
        for k in 0..6 {
            h[0] += phi[k] * history[k][0];
            h[1] += phi[k] * history[k][1];
        }
        let f = force.map_or([0.0; 2], |f| {
            let x = tri.point(l);
            f(x[0], x[1])
        });
        let value = [
            h[0] - (e[0] * g[0][0] + e[1] * g[0][1]) + f[0],
            h[1] - (e[0] * g[1][0] + e[1] * g[1][1]) + f[1],
        ];
        let s = wq * tri.area;
        for k in 0..6 {
            load[2 * k] += s * phi[k] * value[0];
            load[2 * k + 1] += s * phi[k] * value[1];
        }
    }
    debug_assert!(load.len() >= LOCAL_VELOCITY);
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::fem::shape::P2_NODE_BARYCENTRIC;

    fn sample_triangle() -> AffineTriangle {
        AffineTriangle::new([[0.1, 0.2], [1.3, 0.4], [0.5, 1.1]])
    }

    fn nodal(tri: &AffineTriangle, u: impl Fn(f64, f64) -> [f64; 2]) -> [[f64; 2]; 6] {
        std::array::from_fn(|k| {
            let p = tri.point(P2_NODE_BARYCENTRIC[k]);
            u(p[0], p[1])
        })
    }

    fn flatten(v: &[[f64; 2]; 6]) -> [f64; 12] {
        std::array::from_fn(|i| v[i / 2][i % 2])
    }

    fn apply(local: &LocalSystem, x: &[f64; 12]) -> [f64; 12] {
        std::array::from_fn(|i| (0..12).map(|j| local.matrix[i][j] * x[j]).sum())
    }

    #[test]
    fn mass_matrix_integrates_constants_to_the_area() {
        // 1ᵀ M 1 = ∫ 1 = |T| for each component (the P2 basis sums to one).
        let tri = sample_triangle();
        let mut local = LocalSystem::default();
        add_mass_block(&tri, 1.0, &mut local);
        let ones = flatten(&[[1.0, 0.0]; 6]);
        let total: f64 = apply(&local, &ones).iter().sum();
        assert!((total - tri.area).abs() < 1e-14);
    }

    #[test]
    fn newton_jacobian_applied_to_w_is_twice_the_convection_load() {
        // n'(w) w = 2 N(w) exactly (bilinearity of the convective form), for a quadratic w.
        let tri = sample_triangle();
        let w = nodal(&tri, |x, y| [x * x - y, 0.3 * x * y + 1.0]);
        let mut local = LocalSystem::default();
        add_linearised_convection(&tri, &w, Linearisation::Newton, &mut local);
        let jw = apply(&local, &flatten(&w));
        for (i, (a, b)) in jw.iter().zip(&local.load).enumerate() {
            assert!((a - 2.0 * b).abs() < 1e-13, "entry {i}");
        }
    }

    #[test]
    fn newton_jacobian_matches_a_difference_quotient_of_the_load() {
        // J(w) δ ≈ [N(w + εδ) − N(w − εδ)] / (2ε); N is quadratic, so the central difference is
        // exact up to round-off.
        let tri = sample_triangle();
        let w = nodal(&tri, |x, y| [x * y, 1.0 - x]);
        let delta = nodal(&tri, |x, y| [y * y, x + 0.5 * y]);
        let load_at = |s: f64| {
            let v: [[f64; 2]; 6] =
                std::array::from_fn(|k| [w[k][0] + s * delta[k][0], w[k][1] + s * delta[k][1]]);
            let mut local = LocalSystem::default();
            add_linearised_convection(&tri, &v, Linearisation::Newton, &mut local);
            local.load
        };
        let eps = 1e-3;
        let (plus, minus) = (load_at(eps), load_at(-eps));
        let mut local = LocalSystem::default();
        add_linearised_convection(&tri, &w, Linearisation::Newton, &mut local);
        let jd = apply(&local, &flatten(&delta));
        for i in 0..12 {
            let fd = (plus[i] - minus[i]) / (2.0 * eps);
            assert!((jd[i] - fd).abs() < 1e-10, "entry {i}: {} vs {fd}", jd[i]);
        }
    }

    #[test]
    fn explicit_load_equals_minus_the_convection_load_without_history() {
        let tri = sample_triangle();
        let w = nodal(&tri, |x, y| [x * x - y, 0.3 * x * y + 1.0]);
        let mut local = LocalSystem::default();
        add_linearised_convection(&tri, &w, Linearisation::Newton, &mut local);
        let mut load = [0.0; 15];
        add_explicit_step_load(&tri, &[[0.0; 2]; 6], &w, None, &mut load);
        for (a, b) in load.iter().zip(&local.load).take(12) {
            assert!((a + b).abs() < 1e-14);
        }
    }
}
