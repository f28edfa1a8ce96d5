//! Sparse direct solution of the assembled saddle-point system with iterative refinement.
//!
//! Takes a [`SystemPattern`] (analysed once: fill-reducing ordering and symbolic
//! factorisation) and, per solve, the matrix values and right-hand side; returns the solution
//! of the free unknowns with the number of refinement steps and the achieved relative
//! residual `‖b − A x‖₂ / ‖b‖₂`, always measured against the unregularised matrix.
//!
//! Two factorisations are offered:
//! * [`SolverKind::Ldlt`] (default): faer's sparse `LDLᵀ` with AMD ordering for the symmetric
//!   quasi-definite Stokes matrix, stabilised by dynamic regularisation (expected pivot signs
//!   `+1` velocity / `−1` pressure) or a static `−δ I` on the pressure block.
//! * [`SolverKind::Lu`]: faer's sparse LU (COLAMD + partial pivoting); needed for
//!   nonsymmetric (Oseen / Newton) matrices on the same pattern.
//!
//! faer does not report numerical singularity, so the result is checked for finiteness and
//! for the residual target.
//!
//! # References
//! N.J. Higham, *Accuracy and Stability of Numerical Algorithms*, 2nd ed., SIAM 2002, ch. 12
//! (iterative refinement; from memory). R.J. Vanderbei, *Symmetric quasidefinite matrices*,
//! SIAM J. Optim. 5 (1995) 100–113 (stable `LDLᵀ` of regularised saddle points; from memory).

use std::borrow::Cow;

use faer::dyn_stack::{MemBuffer, MemStack};
use faer::perm::PermRef;
use faer::sparse::SparseColMatRef;
use faer::sparse::linalg::cholesky::{
    CholeskySymbolicParams, SymbolicCholesky, SymbolicCholeskyRaw, SymmetricOrdering,
    factorize_symbolic_cholesky,
};
use faer::sparse::linalg::lu::{
    LuRef, LuSymbolicParams, NumericLu, SymbolicLu, factorize_symbolic_lu,
};
use faer::{Conj, MatMut, Par, Side};

use crate::fem::assembly::{CompactMatrix, Parallelism, SystemPattern};

use super::SolveError;
use super::split_ldlt::{
    HalfThreads, Halves, PivotRegularization, SPLIT_MIN_HALF, SplitFactor, SplitSymbolic,
    SplitValues, faer_regularization,
};
use super::supernodal::{SweepSplit, packed_pointers, solve_ldlt_in_place, sweep_split};
use super::vector_registers::reset_after_faer;

/// Which sparse factorisation is used.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub enum SolverKind {
    /// Symmetric indefinite `LDLᵀ` (symmetric matrices only).
    #[default]
    Ldlt,
    /// General LU (any nonsingular matrix).
    Lu,
}

/// The fill-reducing ordering of the `LDLᵀ` factorisation.
///
/// [`FillOrdering::NestedDissection`] (default) orders by the mesh geometry
/// ([`super::ordering`]): measured smaller factors and faster analysis than AMD on the
/// default case (docs/performance.md). [`FillOrdering::Amd`] is faer's approximate minimum
/// degree on the matrix graph (no mesh needed).
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub enum FillOrdering {
    #[default]
    NestedDissection,
    Amd,
}

/// How nonsymmetric (Newton / Oseen) systems are solved ([`super::navier_stokes`]).
///
/// * [`NonsymmetricSolver::GmresReusedLu`] (default): GMRES preconditioned by the LU of an
///   earlier Newton matrix; the current matrix is factorised only when GMRES misses its
///   target within a small iteration budget. Near convergence the Jacobian barely changes,
///   so most Newton steps cost a few triangular solves instead of a factorisation.
/// * [`NonsymmetricSolver::Lu`]: faer's LU (COLAMD + partial pivoting) of every matrix.
/// * [`NonsymmetricSolver::GmresStokes`]: GMRES preconditioned by the regularised `LDLᵀ`
///   of the Stokes matrix (factorised once per viscosity; a third of the LU's memory), for
///   slow flows. Its iteration count grows with the Reynolds number of the whole domain:
///   76–80 iterations per Newton step on the DFG cylinder at Re = 20 (38k unknowns).
///
/// Measurements: docs/performance.md.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub enum NonsymmetricSolver {
    #[default]
    GmresReusedLu,
    Lu,
    GmresStokes,
}

/// How the `LDLᵀ` factorisation is kept away from zero pivots. Values are relative to the
/// pressure pivot scale `max |B_ij|² / max |A_ii|` (about `h²/ν`).
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Regularization {
    /// Pivots of the wrong sign or below `epsilon` are replaced by `±delta` (signs `+1` for
    /// velocity, `−1` for pressure); refinement removes the perturbation.
    Dynamic { delta: f64, epsilon: f64 },
    /// `−delta` is added to every pressure diagonal entry before factorising.
    Static { delta: f64 },
}

impl Default for Regularization {
    /// Dynamic, `delta = 1e-8`, `epsilon = 1e-11` (the settings measured in
    /// `refs/solver-peers.md`, "Extra measurements").
    fn default() -> Self {
        Regularization::Dynamic { delta: 1e-8, epsilon: 1e-11 }
    }
}

/// Settings of the linear solve.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct LinearParams {
    pub kind: SolverKind,
    pub regularization: Regularization,
    /// Threads of the factorisation and triangular solves (`Serial` is faster on 2 cores).
    pub parallelism: Parallelism,
    /// Relative residual `‖b − A x‖₂ / ‖b‖₂` to reach.
    pub residual_target: f64,
    /// Most refinement steps after the first solve.
    pub max_refinement_steps: usize,
}

impl Default for LinearParams {
    fn default() -> Self {
        LinearParams {
            kind: SolverKind::Ldlt,
            regularization: Regularization::default(),
            parallelism: Parallelism::Serial,
            residual_target: 1e-10,
            max_refinement_steps: 5,
        }
    }
}

/// Outcome of one refined solve.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct RefinementInfo {
    /// Refinement steps after the first solve.
    pub steps: usize,
    /// Final `‖b − A x‖₂ / ‖b‖₂` (0 when `b = 0`).
    pub relative_residual: f64,
}

/// Symbolic analysis of a pattern: done once, reused by every numeric factorisation.
#[derive(Debug)]
pub struct SymbolicSystem {
    kind: SymbolicKind,
    /// Expected pivot signs per unknown: `+1` velocity, `−1` pressure.
    signs: Vec<i8>,
    /// Where a supernodal `LDLᵀ`'s triangular solves split over two threads.
    sweep_split: Option<SweepSplit>,
    /// Whether a split `LDLᵀ`'s factors are packed ([`SymbolicSystem::for_repeated_solves`]).
    pack: bool,
}

#[derive(Debug)]
enum SymbolicKind {
    Ldlt(SymbolicCholesky<usize>),
    /// `LDLᵀ` with the halves of a nested dissection factorised on two threads.
    SplitLdlt(Box<SplitSymbolic>),
    Lu(SymbolicLu<usize>),
}

/// A numeric factorisation of one set of matrix values.
#[derive(Debug)]
pub struct NumericFactor {
    kind: NumericKind,
}

impl NumericFactor {
    /// Empty storage, to be filled by [`SymbolicSystem::refactorize`] (of either kind).
    pub fn placeholder() -> Self {
        NumericFactor { kind: NumericKind::Ldlt(Vec::new()) }
    }
}

/// A symmetric system's matrix laid out for its split `LDLᵀ`, with the pivot regularisation
/// it is factorised with ([`SymbolicSystem::gather`]): enough to factorise and to refine, so
/// that a one-shot solve frees the assembled values and the pattern once it has this, before
/// the factor's pages are touched (docs/performance.md).
#[derive(Debug)]
pub struct GatheredMatrix {
    values: SplitValues,
    pivots: PivotRegularization,
}

#[derive(Debug)]
enum NumericKind {
    Ldlt(Vec<f64>),
    SplitLdlt(SplitFactor),
    Lu(Box<NumericLu<usize, f64>>),
}

impl NumericKind {
    /// Empty storage of the kind `symbolic` produces.
    fn empty_for(symbolic: &SymbolicKind) -> Self {
        match symbolic {
            SymbolicKind::Ldlt(_) => NumericKind::Ldlt(Vec::new()),
            SymbolicKind::SplitLdlt(_) => NumericKind::SplitLdlt(SplitFactor::default()),
            SymbolicKind::Lu(_) => NumericKind::Lu(Box::default()),
        }
    }
}

fn faer_par(parallelism: Parallelism) -> Par {
    match parallelism {
        Parallelism::Serial => Par::Seq,
        Parallelism::Rayon => Par::rayon(0),
    }
}

impl SymbolicSystem {
    /// Orders and analyses `pattern` for `kind`.
    ///
    /// # Errors
    /// [`SolveError::Factorization`] when faer's symbolic phase fails (out of memory or a
    /// structurally singular pattern).
    pub fn analyse(pattern: &SystemPattern, kind: SolverKind) -> Result<Self, SolveError> {
        Self::analyse_ordered(pattern, kind, None)
    }

    /// Like [`SymbolicSystem::analyse`], with the fill-reducing permutation of the `LDLᵀ`
    /// given (`perm[k]` = the unknown eliminated `k`-th, e.g. from
    /// [`super::ordering::nested_dissection_halves`]) instead of AMD; the LU ignores it (faer's LU
    /// always orders with COLAMD).
    ///
    /// # Errors
    /// As [`SymbolicSystem::analyse`]; [`SolveError::Factorization`] when `perm` is not a
    /// permutation of the unknowns.
    pub fn analyse_ordered(
        pattern: &SystemPattern,
        kind: SolverKind,
        perm: Option<&[usize]>,
    ) -> Result<Self, SolveError> {
        Self::analyse_dissected(pattern, kind, perm, None)
    }

    /// Like [`SymbolicSystem::analyse_ordered`]; when `halves` gives the two halves that
    /// `perm` numbers first (a nested dissection's top split,
    /// [`super::ordering::nested_dissection_halves`]) and each has at least
    /// `SPLIT_MIN_HALF` (500) unknowns, the `LDLᵀ` factorises them on two threads
    /// ([`super::split_ldlt`]); otherwise, or when the halves turn out coupled, as one.
    ///
    /// # Errors
    /// As [`SymbolicSystem::analyse_ordered`].
    pub fn analyse_dissected(
        pattern: &SystemPattern,
        kind: SolverKind,
        perm: Option<&[usize]>,
        halves: Option<Halves>,
    ) -> Result<Self, SolveError> {
        let inverse = match perm {
            Some(p) => Some(inverse_permutation(p, pattern.n())?),
            None => None,
        };
        let dofs = pattern.dofs();
        let signs: Vec<i8> =
            (0..pattern.n()).map(|d| if dofs.is_pressure(d) { -1 } else { 1 }).collect();
        let fail = |e: faer::sparse::FaerError| SolveError::Factorization {
            stage: "symbolic",
            reason: format!("{e:?}"),
        };
        let big_halves = halves.filter(|h| h.first.min(h.second) >= SPLIT_MIN_HALF);
        if let (SolverKind::Ldlt, Some(fwd), Some(inv), Some(halves)) =
            (kind, perm, &inverse, big_halves)
            && let Some(split) =
                SplitSymbolic::analyse(pattern.symbolic(), fwd, inv, halves, &signs)
                    .map_err(fail)?
        {
            let kind = SymbolicKind::SplitLdlt(Box::new(split));
            return Ok(SymbolicSystem { kind, signs, sweep_split: None, pack: false });
        }
        let ordering = match (perm, &inverse) {
            (Some(fwd), Some(inv)) => {
                SymmetricOrdering::Custom(PermRef::new_checked(fwd, inv, fwd.len()))
            }
            _ => SymmetricOrdering::Amd,
        };
        let kind = match kind {
            SolverKind::Ldlt => SymbolicKind::Ldlt(
                factorize_symbolic_cholesky(
                    pattern.symbolic(),
                    Side::Lower,
                    ordering,
                    CholeskySymbolicParams::default(),
                )
                .map_err(fail)?,
            ),
            SolverKind::Lu => SymbolicKind::Lu(
                factorize_symbolic_lu(pattern.symbolic(), LuSymbolicParams::default())
                    .map_err(fail)?,
            ),
        };
        let sweep_split = match &kind {
            SymbolicKind::Ldlt(sym) => sweep_split(sym),
            _ => None,
        };
        Ok(SymbolicSystem { kind, signs, sweep_split, pack: false })
    }

    /// Whether the `LDLᵀ` factorises the two halves of a nested dissection on two threads
    /// ([`super::split_ldlt`]).
    pub fn splits_halves(&self) -> bool {
        matches!(self.kind, SymbolicKind::SplitLdlt(_))
    }

    /// Number of stored factor entries (`L` of `LDLᵀ`; `None` for LU, whose size is known
    /// only after the numeric factorisation).
    pub fn factor_entries(&self) -> Option<usize> {
        match &self.kind {
            SymbolicKind::Ldlt(sym) => Some(sym.len_val()),
            SymbolicKind::SplitLdlt(split) => Some(split.factor_entries()),
            SymbolicKind::Lu(_) => None,
        }
    }

    /// Nonzeros of `L` of `LDLᵀ` (lower triangle with the diagonal): the values one
    /// triangular solve reads. `None` for LU.
    pub fn factor_nonzeros(&self) -> Option<usize> {
        match &self.kind {
            SymbolicKind::Ldlt(sym) => Some(match sym.raw() {
                // The packed layout holds exactly the lower triangles.
                SymbolicCholeskyRaw::Supernodal(raw) => *packed_pointers(raw).last().unwrap_or(&0),
                SymbolicCholeskyRaw::Simplicial(_) => sym.len_val(),
            }),
            SymbolicKind::SplitLdlt(split) => Some(split.factor_nonzeros()),
            SymbolicKind::Lu(_) => None,
        }
    }

    /// Factorises the matrix with `values` on `pattern` (the analysed one).
    ///
    /// # Errors
    /// [`SolveError::Factorization`] when faer reports a zero pivot or a singular matrix.
    pub fn factorize(
        &self,
        pattern: &SystemPattern,
        values: &[f64],
        params: &LinearParams,
    ) -> Result<NumericFactor, SolveError> {
        let mut factor = NumericFactor { kind: NumericKind::empty_for(&self.kind) };
        self.refactorize(pattern, values, params, &mut factor)?;
        Ok(factor)
    }

    /// Factorises new `values` on the same pattern into the storage of `factor` (no new
    /// allocation of the factor in time or Newton loops), then resets the vector registers
    /// of every thread faer may have run on ([`reset_after_faer`]).
    ///
    /// # Errors
    /// [`SolveError::Factorization`] when faer reports a zero pivot or a singular matrix.
    pub fn refactorize(
        &self,
        pattern: &SystemPattern,
        values: &[f64],
        params: &LinearParams,
        factor: &mut NumericFactor,
    ) -> Result<(), SolveError> {
        let result = self.factorize_into(pattern, values, params, factor);
        reset_after_faer();
        result
    }

    /// [`SymbolicSystem::refactorize`] without the register reset.
    fn factorize_into(
        &self,
        pattern: &SystemPattern,
        values: &[f64],
        params: &LinearParams,
        factor: &mut NumericFactor,
    ) -> Result<(), SolveError> {
        let par = faer_par(params.parallelism);
        match (&self.kind, &mut factor.kind) {
            (SymbolicKind::Ldlt(sym), NumericKind::Ldlt(l_values)) => {
                l_values.resize(sym.len_val(), 0.0);
                let target = LdltTarget::Whole(sym, l_values);
                self.factorize_ldlt(target, pattern, values, params.regularization, par)
            }
            (SymbolicKind::SplitLdlt(split), NumericKind::SplitLdlt(split_factor)) => {
                let target = LdltTarget::Split(split, &mut *split_factor);
                self.factorize_ldlt(target, pattern, values, params.regularization, par)?;
                if self.pack {
                    split.pack(split_factor);
                }
                Ok(())
            }
            (SymbolicKind::Lu(sym), NumericKind::Lu(numeric)) => {
                let matrix = SparseColMatRef::new(pattern.symbolic(), values);
                let scratch = sym.factorize_numeric_lu_scratch::<f64>(par, Default::default());
                let mut buf = MemBuffer::new(scratch);
                sym.factorize_numeric_lu(
                    numeric,
                    matrix,
                    par,
                    MemStack::new(&mut buf),
                    Default::default(),
                )
                .map(|_| ())
                .map_err(|e| numeric_failure(format!("{e:?}")))
            }
            (_, kind) => {
                // A factor of the other kind: start from empty storage of the right kind.
                *kind = NumericKind::empty_for(&self.kind);
                self.factorize_into(pattern, values, params, factor)
            }
        }
    }

    /// Regularised `LDLᵀ` of `values` into `target` (see [`Regularization`]).
    fn factorize_ldlt(
        &self,
        target: LdltTarget<'_>,
        pattern: &SystemPattern,
        values: &[f64],
        regularization: Regularization,
        par: Par,
    ) -> Result<(), SolveError> {
        let scale = pressure_scale(pattern, values);
        let (values, pivots) = match regularization {
            Regularization::Dynamic { delta, epsilon } => {
                (Cow::Borrowed(values), Some(scaled_pivots(delta, epsilon, scale)))
            }
            Regularization::Static { delta } => {
                (Cow::Owned(shift_pressure_diagonal(pattern, values, -delta * scale)), None)
            }
        };
        match target {
            LdltTarget::Split(split, factor) => {
                let gathered = split.gather(&values);
                split.factorize(&gathered, pivots, par, factor).map_err(numeric_failure)
            }
            LdltTarget::Whole(sym, l_values) => {
                let regularization = faer_regularization(pivots, &self.signs);
                let matrix = SparseColMatRef::new(pattern.symbolic(), &values);
                let scratch = sym.factorize_numeric_ldlt_scratch::<f64>(par, Default::default());
                let mut buf = MemBuffer::new(scratch);
                sym.factorize_numeric_ldlt(
                    l_values,
                    matrix,
                    Side::Lower,
                    regularization,
                    par,
                    MemStack::new(&mut buf),
                    Default::default(),
                )
                .map(|_| ())
                .map_err(|e| numeric_failure(format!("{e:?}")))
            }
        }
    }

    /// `values` on `pattern` laid out for a split `LDLᵀ` with dynamic regularisation, the
    /// default for a large Stokes system ([`GatheredMatrix`]); `None` for other
    /// factorisations and for static regularisation, which keep to
    /// [`SymbolicSystem::factorize`] and [`SymbolicSystem::solve`].
    pub fn gather(
        &self,
        pattern: &SystemPattern,
        values: &[f64],
        params: &LinearParams,
    ) -> Option<GatheredMatrix> {
        let SymbolicKind::SplitLdlt(split) = &self.kind else { return None };
        let Regularization::Dynamic { delta, epsilon } = params.regularization else {
            return None;
        };
        let scale = pressure_scale(pattern, values);
        Some(GatheredMatrix {
            values: split.gather(values),
            pivots: scaled_pivots(delta, epsilon, scale),
        })
    }

    /// [`SymbolicSystem::factorize`] of a [`GatheredMatrix`].
    ///
    /// # Errors
    /// As [`SymbolicSystem::factorize`].
    ///
    /// # Panics
    /// When `matrix` was not gathered by this symbolic system (a programming error).
    pub fn factorize_gathered(
        &self,
        matrix: &GatheredMatrix,
        params: &LinearParams,
    ) -> Result<NumericFactor, SolveError> {
        let split = self.gathering_split();
        let mut factor = SplitFactor::default();
        let par = faer_par(params.parallelism);
        let result = split.factorize(&matrix.values, Some(matrix.pivots), par, &mut factor);
        reset_after_faer();
        result.map_err(numeric_failure)?;
        if self.pack {
            split.pack(&mut factor);
        }
        Ok(NumericFactor { kind: NumericKind::SplitLdlt(factor) })
    }

    /// [`SymbolicSystem::solve`] of a [`GatheredMatrix`]: the residual reads the gathered
    /// values only.
    ///
    /// # Errors
    /// As [`SymbolicSystem::solve`].
    ///
    /// # Panics
    /// When `matrix` or `factor` do not belong to this symbolic system (a programming error).
    pub fn solve_gathered(
        &self,
        matrix: &GatheredMatrix,
        factor: &NumericFactor,
        rhs: &[f64],
        params: &LinearParams,
    ) -> Result<(Vec<f64>, RefinementInfo), SolveError> {
        let split = self.gathering_split();
        let residual = |x: &[f64], r: &mut [f64]| split.residual(&matrix.values, x, rhs, r);
        self.solve_refined(residual, factor, rhs, params)
    }

    /// The split analysis a [`GatheredMatrix`] belongs to.
    fn gathering_split(&self) -> &SplitSymbolic {
        match &self.kind {
            SymbolicKind::SplitLdlt(split) => split,
            _ => unreachable!("a gathered matrix is only produced by a split analysis"),
        }
    }

    /// Sets up the analysis for factors that serve many solves (a time loop): a split
    /// `LDLᵀ` then factorises its halves on threads of their own ([`HalfThreads::Own`])
    /// and every factorisation packs its values for faster triangular solves
    /// ([`SplitSymbolic::pack`]). Other kinds are unchanged.
    pub fn for_repeated_solves(mut self) -> Self {
        if let SymbolicKind::SplitLdlt(split) = &mut self.kind {
            split.set_half_threads(HalfThreads::Own);
            self.pack = true;
        }
        self
    }

    /// Solves `A x = b` with the factor, then refines against the exact `values` until the
    /// relative residual reaches the target or the step budget is spent.
    ///
    /// # Errors
    /// [`SolveError::NonFiniteSolution`] when the solution has NaN/∞ (numerically singular
    /// matrix); [`SolveError::NotConverged`] when the residual target is missed.
    ///
    /// # Panics
    /// When `factor` was not produced by this symbolic system (a programming error).
    pub fn solve(
        &self,
        pattern: &SystemPattern,
        values: &[f64],
        factor: &NumericFactor,
        rhs: &[f64],
        params: &LinearParams,
    ) -> Result<(Vec<f64>, RefinementInfo), SolveError> {
        let residual = |x: &[f64], r: &mut [f64]| match self.kind {
            SymbolicKind::Lu(_) => {
                pattern.multiply(values, x, r);
                r.iter_mut().zip(rhs).for_each(|(r, b)| *r = b - *r);
                r.iter().map(|r| r * r).sum()
            }
            _ => pattern.symmetric_residual(values, x, rhs, r),
        };
        self.solve_refined(residual, factor, rhs, params)
    }

    /// [`SymbolicSystem::solve`] for a symmetric matrix given by its nonzero entries (a time
    /// loop's step matrix, whose residual every step checks): the residual reads `matrix`
    /// only, whichever factorisation this is.
    ///
    /// # Errors
    /// As [`SymbolicSystem::solve`].
    ///
    /// # Panics
    /// As [`SymbolicSystem::solve`].
    pub fn solve_symmetric(
        &self,
        matrix: &CompactMatrix,
        factor: &NumericFactor,
        rhs: &[f64],
        params: &LinearParams,
    ) -> Result<(Vec<f64>, RefinementInfo), SolveError> {
        let residual = |x: &[f64], r: &mut [f64]| matrix.symmetric_residual(x, rhs, r);
        self.solve_refined(residual, factor, rhs, params)
    }

    /// The refinement loop of [`SymbolicSystem::solve`]: `residual(x, r)` writes `r = b − A x`
    /// and returns `‖r‖₂²`.
    fn solve_refined(
        &self,
        residual: impl Fn(&[f64], &mut [f64]) -> f64,
        factor: &NumericFactor,
        rhs: &[f64],
        params: &LinearParams,
    ) -> Result<(Vec<f64>, RefinementInfo), SolveError> {
        let norm_b = norm(rhs);
        if norm_b == 0.0 {
            return Ok((vec![0.0; rhs.len()], RefinementInfo { steps: 0, relative_residual: 0.0 }));
        }
        // x₀ = A⁻¹ b straight from the factor; each refinement step adds A⁻¹ r.
        let mut x = rhs.to_vec();
        self.apply_inverse(factor, &mut x, params.parallelism);
        let mut r = vec![0.0; rhs.len()];
        let mut steps = 0;
        loop {
            let squares = residual(&x, &mut r);
            // A non-finite x makes the residual non-finite too (each unknown's column holds
            // its diagonal slot, and 0 · ∞ is NaN).
            let relative = squares.sqrt() / norm_b;
            if !relative.is_finite() {
                return Err(SolveError::NonFiniteSolution { steps });
            }
            if relative <= params.residual_target {
                return Ok((x, RefinementInfo { steps, relative_residual: relative }));
            }
            if steps == params.max_refinement_steps {
                return Err(SolveError::NotConverged {
                    relative_residual: relative,
                    target: params.residual_target,
                    steps,
                });
            }
            steps += 1;
            self.apply_inverse(factor, &mut r, params.parallelism);
            x.iter_mut().zip(&r).for_each(|(xi, di)| *xi += di);
        }
    }

    /// Overwrites `rhs` with `A⁻¹ rhs` using the factor (one solve, no refinement).
    ///
    /// # Panics
    /// When `factor` was not produced by this symbolic system (a programming error).
    pub fn apply_inverse(&self, factor: &NumericFactor, rhs: &mut [f64], parallelism: Parallelism) {
        let par = faer_par(parallelism);
        let n = rhs.len();
        match (&self.kind, &factor.kind) {
            (SymbolicKind::Ldlt(sym), NumericKind::Ldlt(l_values)) => {
                // Two threads where the tree splits: measured faster than one (docs/performance.md,
                // "Memory bandwidth and the IMEX step").
                solve_ldlt_in_place(sym, l_values, self.sweep_split.as_ref(), rhs);
            }
            (SymbolicKind::SplitLdlt(split), NumericKind::SplitLdlt(factor)) => {
                split.solve_in_place(factor, rhs);
            }
            (SymbolicKind::Lu(sym), NumericKind::Lu(numeric)) => {
                let rhs = MatMut::from_column_major_slice_mut(rhs, n, 1);
                let mut buf = MemBuffer::new(sym.solve_in_place_scratch::<f64>(1, par));
                LuRef::new_unchecked(sym, numeric).solve_in_place_with_conj(
                    Conj::No,
                    rhs,
                    par,
                    MemStack::new(&mut buf),
                );
                reset_after_faer();
            }
            _ => unreachable!("a factor is only produced by its own symbolic system"),
        }
    }
}

/// Where [`SymbolicSystem::factorize_ldlt`] writes: one faer factor, or the split one.
enum LdltTarget<'a> {
    Whole(&'a SymbolicCholesky<usize>, &'a mut [f64]),
    Split(&'a SplitSymbolic, &'a mut SplitFactor),
}

/// Scale of the pressure Schur complement `B A⁻¹ Bᵀ`, estimated as
/// `max |B_ij|² / max |A_ii|` (about `h² / ν` on a quasi-uniform mesh): the size of the
/// pressure pivots, hence the scale of the regularisation. 1 when there is no coupling.
fn pressure_scale(pattern: &SystemPattern, values: &[f64]) -> f64 {
    let dofs = pattern.dofs();
    let n_velocity = dofs.n_velocity_dofs();
    let a_max =
        (0..n_velocity).map(|d| values[pattern.diagonal_position(d)].abs()).fold(0.0, f64::max);
    let (col_ptr, row_idx) = (pattern.col_ptr(), pattern.row_idx());
    let b_max = (n_velocity..dofs.n_dofs())
        .flat_map(|col| col_ptr[col]..col_ptr[col + 1])
        .filter(|&k| row_idx[k] < n_velocity)
        .map(|k| values[k].abs())
        .fold(0.0, f64::max);
    if a_max > 0.0 && b_max > 0.0 { b_max * b_max / a_max } else { 1.0 }
}

/// Dynamic regularisation of the pivots for a system whose pressure pivots have the size
/// `scale` ([`pressure_scale`]).
fn scaled_pivots(delta: f64, epsilon: f64, scale: f64) -> PivotRegularization {
    PivotRegularization { delta: delta * scale, epsilon: epsilon * scale }
}

fn shift_pressure_diagonal(pattern: &SystemPattern, values: &[f64], shift: f64) -> Vec<f64> {
    let mut out = values.to_vec();
    let dofs = pattern.dofs();
    for d in dofs.n_velocity_dofs()..dofs.n_dofs() {
        out[pattern.diagonal_position(d)] += shift;
    }
    out
}

/// The inverse of the permutation `perm` of `0..n`.
fn inverse_permutation(perm: &[usize], n: usize) -> Result<Vec<usize>, SolveError> {
    let bad = || SolveError::Factorization {
        stage: "symbolic",
        reason: format!("the ordering is not a permutation of the {n} unknowns"),
    };
    if perm.len() != n {
        return Err(bad());
    }
    let mut inverse = vec![usize::MAX; n];
    for (k, &p) in perm.iter().enumerate() {
        if p >= n || inverse[p] != usize::MAX {
            return Err(bad());
        }
        inverse[p] = k;
    }
    Ok(inverse)
}

fn numeric_failure(reason: String) -> SolveError {
    SolveError::Factorization { stage: "numeric", reason }
}

fn norm(v: &[f64]) -> f64 {
    v.iter().map(|x| x * x).sum::<f64>().sqrt()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::solver::test_grids::{faer_factor, faer_solve, grid_dissection, grid_matrix};
    use faer::sparse::linalg::SupernodalThreshold;

    /// Our supernodal sweeps (one thread and two) against faer's own `LDLᵀ` solve on the same
    /// factor (faer as the reference library), with a nested-dissection permutation.
    #[test]
    fn supernodal_sweeps_match_faer_solve_on_one_and_two_threads() {
        let m = 48;
        let a = grid_matrix(m, -1.0);
        let n = m * m;
        let mut perm = Vec::new();
        grid_dissection(0..m, 0..m, m, &mut perm);
        let params = CholeskySymbolicParams {
            supernodal_flop_ratio_threshold: SupernodalThreshold::FORCE_SUPERNODAL,
            ..Default::default()
        };
        let (sym, values) = faer_factor(&a, &perm, params);
        let split = sweep_split(&sym);
        assert!(split.is_some(), "the dissected grid's tree splits in two");
        let rhs: Vec<f64> = (0..n).map(|k| ((k * 37) % 101) as f64 / 50.0 - 1.0).collect();
        let reference = faer_solve(&sym, &values, &rhs);
        let scale = reference.iter().fold(0.0f64, |s, v| s.max(v.abs()));
        for split in [None, split.as_ref()] {
            let mut ours = rhs.clone();
            let pool = rayon::ThreadPoolBuilder::new().num_threads(2).build().unwrap();
            pool.install(|| solve_ldlt_in_place(&sym, &values, split, &mut ours));
            let diff = ours.iter().zip(&reference).fold(0.0f64, |s, (a, b)| s.max((a - b).abs()));
            assert!(diff <= 1e-12 * scale, "split {}: max difference {diff:e}", split.is_some());
        }
    }
}
