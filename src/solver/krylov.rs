//! Restarted GMRES, right-preconditioned, and its use for nonsymmetric (Newton / Oseen)
//! saddle-point systems with a symmetric `LDLᵀ` factorisation as preconditioner.
//!
//! [`gmres`] takes the action of a matrix `A`, the action of a preconditioner `M⁻¹`, a
//! right-hand side `b` and a start vector; it returns `x` with `‖b − A x‖₂ ≤ tol · ‖b‖₂`
//! (true residual, checked at every restart) and a [`GmresInfo`]. Right preconditioning
//! solves `A M⁻¹ y = b`, `x = M⁻¹ y`, so the residual GMRES minimises is the one of the
//! original system.
//!
//! [`PreconditionedGmres`] applies it to a Newton or Oseen matrix `J` on a
//! [`SystemPattern`] with the Stokes matrix `M = [[ν K, Bᵀ], [B, 0]]` of the same viscosity
//! as preconditioner, factorised by the regularised `LDLᵀ` of [`super::linear`] (symbolic
//! analysis once, numeric storage reused). `M` is the symmetric part of the Oseen operator up
//! to the outflow term `½ ∫ (w·n) u·v` and `½ (div w) u·v`, so GMRES only has to resolve the
//! convection; `‖M⁻¹ (J − M)‖` grows with the Reynolds number but not with mesh refinement.
//! The symmetric part of the *Newton* matrix is not used: its strain-rate reaction term
//! `½ (∇w + ∇wᵀ)` makes the velocity block indefinite already at Re = 20 on the DFG cylinder
//! (measured: the `LDLᵀ` overflowed to a non-finite pivot), and a factor of the Stokes matrix
//! stays valid for every Newton step at one viscosity, so it is factorised once.
//!
//! # References
//! Y. Saad, M.H. Schultz, *GMRES: a generalized minimal residual algorithm for solving
//! nonsymmetric linear systems*, SIAM J. Sci. Stat. Comput. 7 (1986) 856–869. Y. Saad,
//! *Iterative Methods for Sparse Linear Systems*, 2nd ed., SIAM 2003, §6.5 and §9.3 (right
//! preconditioning, Givens rotations). P. Concus, G.H. Golub, *A generalized conjugate
//! gradient method for nonsymmetric systems of linear equations*, 1976 (the symmetric part as
//! preconditioner). All from memory.

use super::SolveError;
use super::linear::{LinearParams, NumericFactor, SolverKind, SymbolicSystem};
use crate::fem::assembly::{Parallelism, SystemPattern};

/// Settings of [`gmres`]. Defaults: restart length 40, at most 400 iterations, relative
/// residual `1e-10`.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct GmresParams {
    /// Krylov vectors kept before a restart (memory: `restart + 1` vectors of length `n`).
    pub restart: usize,
    /// Most matrix–vector products in total.
    pub max_iterations: usize,
    /// Target of `‖b − A x‖₂ / ‖b‖₂`.
    pub relative_tolerance: f64,
}

impl Default for GmresParams {
    fn default() -> Self {
        GmresParams { restart: 40, max_iterations: 400, relative_tolerance: 1e-10 }
    }
}

/// What [`gmres`] did.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct GmresInfo {
    /// Matrix–vector products (one per Krylov step).
    pub iterations: usize,
    /// Final true `‖b − A x‖₂ / ‖b‖₂` (0 when `b = 0`).
    pub relative_residual: f64,
}

/// Why [`gmres`] failed.
#[derive(Clone, Copy, Debug, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum GmresError {
    #[error(
        "GMRES did not reach {target:e} in {iterations} iterations (relative residual {relative_residual:e})"
    )]
    NotConverged { iterations: usize, relative_residual: f64, target: f64 },
    #[error("GMRES produced a non-finite residual after {iterations} iterations")]
    NonFinite { iterations: usize },
}

/// Solves `A x = b` by restarted, right-preconditioned GMRES(m) from the start vector `x`
/// (overwritten by the solution). `apply_a(v, out)` writes `out = A v`; `apply_m_inv(v)`
/// overwrites `v` with `M⁻¹ v`.
///
/// # Errors
/// [`GmresError::NotConverged`] when the tolerance is not met within `max_iterations`
/// (`x` then holds the last iterate); [`GmresError::NonFinite`] on NaN/∞.
pub fn gmres(
    mut apply_a: impl FnMut(&[f64], &mut [f64]),
    mut apply_m_inv: impl FnMut(&mut [f64]),
    b: &[f64],
    x: &mut [f64],
    params: &GmresParams,
) -> Result<GmresInfo, GmresError> {
    let n = b.len();
    let norm_b = norm(b);
    if norm_b == 0.0 {
        x.iter_mut().for_each(|v| *v = 0.0);
        return Ok(GmresInfo { iterations: 0, relative_residual: 0.0 });
    }
    let target = params.relative_tolerance * norm_b;
    let m = params.restart.max(1);
    let mut basis: Vec<Vec<f64>> = Vec::with_capacity(m + 1);
    let mut work = vec![0.0; n];
    let mut iterations = 0;
    loop {
        let mut r = residual(&mut apply_a, b, x, &mut work);
        let beta = norm(&r);
        if !beta.is_finite() {
            return Err(GmresError::NonFinite { iterations });
        }
        if beta <= target {
            return Ok(GmresInfo { iterations, relative_residual: beta / norm_b });
        }
        if iterations >= params.max_iterations {
            return Err(GmresError::NotConverged {
                iterations,
                relative_residual: beta / norm_b,
                target: params.relative_tolerance,
            });
        }
        r.iter_mut().for_each(|v| *v /= beta);
        basis.clear();
        basis.push(r);
        let budget = m.min(params.max_iterations - iterations);
        let mut arnoldi = Arnoldi::new(beta, budget);
        for _ in 0..budget {
            let mut z = basis.last().expect("basis starts with r").clone();
            apply_m_inv(&mut z);
            let mut w = vec![0.0; n];
            apply_a(&z, &mut w);
            iterations += 1;
            let estimate = arnoldi.step(&mut basis, w);
            if !estimate.is_finite() {
                return Err(GmresError::NonFinite { iterations });
            }
            if estimate <= target || arnoldi.breakdown {
                break;
            }
        }
        let mut update = arnoldi.combination(&basis);
        apply_m_inv(&mut update);
        x.iter_mut().zip(&update).for_each(|(xi, u)| *xi += u);
    }
}

/// `b − A x`, using `work` for `A x`.
fn residual(
    apply_a: &mut impl FnMut(&[f64], &mut [f64]),
    b: &[f64],
    x: &[f64],
    work: &mut [f64],
) -> Vec<f64> {
    apply_a(x, work);
    b.iter().zip(work.iter()).map(|(bi, ai)| bi - ai).collect()
}

/// The Hessenberg least-squares problem of one GMRES cycle, kept upper triangular by Givens
/// rotations: after `k` steps `‖g[k]‖` is the residual norm of the best combination.
struct Arnoldi {
    /// Column `j` of the rotated Hessenberg matrix (`j + 1` entries).
    columns: Vec<Vec<f64>>,
    rotations: Vec<(f64, f64)>,
    g: Vec<f64>,
    /// The new Krylov vector vanished: the space is invariant and the solution exact.
    breakdown: bool,
}

impl Arnoldi {
    fn new(beta: f64, capacity: usize) -> Self {
        let mut g = Vec::with_capacity(capacity + 1);
        g.push(beta);
        Arnoldi {
            columns: Vec::with_capacity(capacity),
            rotations: Vec::with_capacity(capacity),
            g,
            breakdown: false,
        }
    }

    /// Orthogonalises `w` against `basis` (modified Gram–Schmidt), appends it, updates the
    /// least-squares problem and returns the residual estimate `|g[k+1]|`.
    fn step(&mut self, basis: &mut Vec<Vec<f64>>, mut w: Vec<f64>) -> f64 {
        let mut h: Vec<f64> = Vec::with_capacity(basis.len() + 1);
        for v in basis.iter() {
            let hij = dot(&w, v);
            w.iter_mut().zip(v).for_each(|(wi, vi)| *wi -= hij * vi);
            h.push(hij);
        }
        let h_next = norm(&w);
        for (i, &(c, s)) in self.rotations.iter().enumerate() {
            let (a, b) = (h[i], h[i + 1]);
            h[i] = c * a + s * b;
            h[i + 1] = -s * a + c * b;
        }
        let j = h.len() - 1;
        let (c, s) = givens(h[j], h_next);
        h[j] = c * h[j] + s * h_next;
        self.rotations.push((c, s));
        let gj = self.g[j];
        self.g[j] = c * gj;
        self.g.push(-s * gj);
        self.columns.push(h);
        // Breakdown below the level of rounding: the residual estimate is then exact.
        self.breakdown = h_next <= f64::EPSILON * self.columns[j][j].abs();
        if !self.breakdown {
            w.iter_mut().for_each(|v| *v /= h_next);
            basis.push(w);
        }
        self.g[j + 1].abs()
    }

    /// `V y` with `y` solving the triangular system `R y = g` of the steps done.
    fn combination(&self, basis: &[Vec<f64>]) -> Vec<f64> {
        let k = self.columns.len();
        let mut y = self.g[..k].to_vec();
        for i in (0..k).rev() {
            let later: f64 = (i + 1..k).map(|j| self.columns[j][i] * y[j]).sum();
            y[i] = (y[i] - later) / self.columns[i][i];
        }
        let mut out = vec![0.0; basis[0].len()];
        for (v, &yi) in basis.iter().zip(&y) {
            out.iter_mut().zip(v).for_each(|(o, vi)| *o += yi * vi);
        }
        out
    }
}

/// Rotation `(c, s)` with `[c s; −s c] [a; b] = [r; 0]`.
fn givens(a: f64, b: f64) -> (f64, f64) {
    if b == 0.0 {
        return (1.0, 0.0);
    }
    let r = a.hypot(b);
    (a / r, b / r)
}

fn dot(a: &[f64], b: &[f64]) -> f64 {
    a.iter().zip(b).map(|(x, y)| x * y).sum()
}

fn norm(v: &[f64]) -> f64 {
    dot(v, v).sqrt()
}

/// GMRES on `J x = b` preconditioned by a factorisation of a matrix `M` on the same pattern:
/// the `LDLᵀ` of the Stokes matrix, or the LU of an earlier Newton matrix (see the module
/// docs). Symbolic analysis once per pattern; the factor storage is reused when `M` changes.
#[derive(Debug)]
pub struct PreconditionedGmres {
    symbolic: SymbolicSystem,
    factor: Option<NumericFactor>,
}

impl PreconditionedGmres {
    /// Analyses `pattern` for the factorisation `kind` of the preconditioner (`LDLᵀ` for a
    /// symmetric one, LU for an earlier nonsymmetric matrix).
    ///
    /// # Errors
    /// [`SolveError::Factorization`] when the symbolic phase fails.
    pub fn analyse(pattern: &SystemPattern, kind: SolverKind) -> Result<Self, SolveError> {
        let symbolic = SymbolicSystem::analyse(pattern, kind)?;
        Ok(PreconditionedGmres { symbolic, factor: None })
    }

    /// Whether a preconditioner has been factorised.
    pub fn has_factor(&self) -> bool {
        self.factor.is_some()
    }

    /// Factorises the preconditioner `M` with `values` on `pattern`.
    ///
    /// # Errors
    /// [`SolveError::Factorization`] when faer reports a zero or non-finite pivot.
    pub fn factorize_preconditioner(
        &mut self,
        pattern: &SystemPattern,
        values: &[f64],
        linear: &LinearParams,
    ) -> Result<(), SolveError> {
        match &mut self.factor {
            Some(f) => self.symbolic.refactorize(pattern, values, linear, f),
            None => {
                self.factor = Some(self.symbolic.factorize(pattern, values, linear)?);
                Ok(())
            }
        }
    }

    /// Solves `J x = b` for the matrix `values` on `pattern`, starting from `x`.
    ///
    /// # Errors
    /// [`SolveError::NotConverged`] or [`SolveError::NonFiniteSolution`] when GMRES fails
    /// (`steps` then counts GMRES iterations); [`SolveError::Factorization`] when no
    /// preconditioner was factorised.
    pub fn solve(
        &self,
        pattern: &SystemPattern,
        values: &[f64],
        rhs: &[f64],
        x: &mut [f64],
        params: &GmresParams,
        parallelism: Parallelism,
    ) -> Result<GmresInfo, SolveError> {
        let Some(factor) = self.factor.as_ref() else {
            return Err(SolveError::Factorization {
                stage: "numeric",
                reason: "no preconditioner factorised".into(),
            });
        };
        gmres(
            |v, out| pattern.multiply(values, v, out),
            |v| self.symbolic.apply_inverse(factor, v, parallelism),
            rhs,
            x,
            params,
        )
        .map_err(|e| match e {
            GmresError::NotConverged { iterations, relative_residual, target } => {
                SolveError::NotConverged { relative_residual, target, steps: iterations }
            }
            GmresError::NonFinite { iterations } => {
                SolveError::NonFiniteSolution { steps: iterations }
            }
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A nonsymmetric tridiagonal matrix `tridiag(−1 − c, 2 + s, −1 + c)` (convection–
    /// diffusion with central differences), applied densely enough for a unit test.
    fn convection_diffusion(n: usize, c: f64, v: &[f64], out: &mut [f64]) {
        for i in 0..n {
            let mut s = 2.5 * v[i];
            if i > 0 {
                s += (-1.0 - c) * v[i - 1];
            }
            if i + 1 < n {
                s += (-1.0 + c) * v[i + 1];
            }
            out[i] = s;
        }
    }

    #[test]
    fn gmres_without_preconditioner_meets_the_true_residual_target() {
        let n = 200;
        let b: Vec<f64> = (0..n).map(|i| ((i * 7) % 13) as f64 - 6.0).collect();
        let mut x = vec![0.0; n];
        let params = GmresParams { restart: 15, max_iterations: 2000, relative_tolerance: 1e-12 };
        let info =
            gmres(|v, o| convection_diffusion(n, 0.4, v, o), |_| {}, &b, &mut x, &params).unwrap();
        let mut ax = vec![0.0; n];
        convection_diffusion(n, 0.4, &x, &mut ax);
        let r = ax.iter().zip(&b).map(|(a, b)| (a - b) * (a - b)).sum::<f64>().sqrt();
        // The true residual is recomputed at every restart, so the target holds exactly.
        assert!(r <= 1e-12 * norm(&b), "residual {r}");
        assert!((info.relative_residual - r / norm(&b)).abs() < 1e-14);
        assert!(info.iterations > 15, "restarts were exercised: {}", info.iterations);
    }

    #[test]
    fn exact_preconditioner_converges_in_one_step() {
        // M = A (diagonal): A M⁻¹ = I, so one Krylov step is exact.
        let d: Vec<f64> = (1..=50).map(|i| i as f64).collect();
        let b = vec![1.0; 50];
        let mut x = vec![0.0; 50];
        let info = gmres(
            |v, o| o.iter_mut().zip(v.iter().zip(&d)).for_each(|(o, (v, d))| *o = d * v),
            |v| v.iter_mut().zip(&d).for_each(|(v, d)| *v /= d),
            &b,
            &mut x,
            &GmresParams::default(),
        )
        .unwrap();
        assert_eq!(info.iterations, 1);
        assert!(x.iter().zip(&d).all(|(x, d)| (x * d - 1.0).abs() < 1e-14));
    }

    #[test]
    fn budget_exhaustion_is_reported_not_hidden() {
        let n = 100;
        let b = vec![1.0; n];
        let mut x = vec![0.0; n];
        let params = GmresParams { restart: 2, max_iterations: 4, relative_tolerance: 1e-14 };
        let err = gmres(|v, o| convection_diffusion(n, 0.9, v, o), |_| {}, &b, &mut x, &params)
            .unwrap_err();
        assert!(matches!(err, GmresError::NotConverged { iterations: 4, .. }), "{err:?}");
    }
}
