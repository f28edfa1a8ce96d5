//! Steady Navier–Stokes solver: Newton's method on the Taylor–Hood system, started from the
//! Stokes solution, with optional Picard (Oseen) steps and continuation in the viscosity.
//!
//! Takes a [`Mesh`] and a [`StokesProblem`] (its viscosity is the target one); returns the
//! discrete [`FlowField`] and a [`NewtonInfo`] with one [`NewtonIteration`] per nonlinear
//! step (residual, update, kind) and the stage timings.
//!
//! Equations (kinematic form): `(u·∇)u − ν Δu + ∇p = f`, `div u = 0`. Each step assembles
//! the linearised system around the current iterate `w` (see [`crate::fem::convection`]):
//! Newton `[K + n'(w)] u = f + N(w)`, Picard `[K + n(w; ·)] u = f`, both solved for the new
//! iterate `u` directly, with Dirichlet values eliminated as in the Stokes solver. The matrix
//! is nonsymmetric: by default it is solved by GMRES preconditioned with the `LDLᵀ` of the
//! Stokes matrix of the same viscosity (factorised once per viscosity), started from the
//! current iterate ([`super::krylov`]); the LU override
//! ([`NonsymmetricSolver::Lu`]) factorises it directly. Either way the symbolic analysis is
//! done once for the pattern and the numeric factor storage is reused by every step.
//!
//! **Stopping test.** The nonlinear residual of the iterate `w` on the free unknowns is
//! `R(w) = J(w) w − b(w)` from the system assembled at `w` (both linearisations give the true
//! residual `K w + N(w) − f` there, since `n'(w) w = 2 N(w)`). The iteration stops when
//! `‖R(w)‖₂ ≤ residual_tolerance · ‖b₀‖₂`, with `b₀` the right-hand side of the Stokes
//! system (body force plus lifted boundary data, the natural scale of the problem). With
//! continuation, intermediate viscosities stop at `continuation_tolerance` instead.
//! Non-convergence within `max_iterations` returns [`NewtonError::NotConverged`] carrying the
//! residual history and the last iterate, so the caller can write it (marked unconverged).
//!
//! # References
//! J. Donea, A. Huerta, *Finite Element Methods for Flow Problems*, Wiley 2003, ch. 6 (Newton
//! and Picard linearisations; from memory). H.C. Elman, D.J. Silvester, A.J. Wathen, *Finite
//! Elements and Fast Iterative Solvers*, 2nd ed., OUP 2014, ch. 8 (the same, and the relative
//! residual stopping test; from memory).

use std::time::Instant;

use crate::fem::FlowField;
use crate::fem::assembly::{AssembledSystem, Parallelism, SystemPattern, assemble_into};
use crate::fem::convection::{Linearisation, add_linearised_convection};
use crate::fem::kernels::stokes_local_system;
use crate::fem::shape::AffineTriangle;
use crate::mesh::Mesh;

use super::krylov::{GmresParams, PreconditionedGmres};
use super::linear::{
    FillOrdering, LinearParams, NonsymmetricSolver, NumericFactor, SolverKind, SymbolicSystem,
};
use super::{
    PressureMean, SolveError, SolverParams, StageTimings, StokesProblem, build_pattern,
    expand_field_with,
};

/// Forcing term of the inexact Newton steps with GMRES: the linear residual is at most this
/// fraction of the nonlinear residual (keeps the quadratic phase down to `FORCING`; see
/// S.C. Eisenstat, H.F. Walker, SIAM J. Sci. Comput. 17 (1996) 16–32, from memory).
const FORCING: f64 = 1e-4;

/// Settings of the nonlinear iteration. Defaults: no Picard steps, at most 30 iterations,
/// residual tolerance `1e-10`, no continuation (intermediate tolerance `1e-4`).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct NewtonParams {
    /// Picard (Oseen) steps before switching to Newton (robust far from the solution).
    pub picard_steps: usize,
    /// Most nonlinear iterations per viscosity (Picard steps included).
    pub max_iterations: usize,
    /// Relative residual `‖R‖ / ‖b₀‖` that ends the iteration at the target viscosity.
    pub residual_tolerance: f64,
    /// Number of intermediate viscosities before the target one (0: none). They are
    /// `ν · c^(1 − j/m)`, `j = 0 … m − 1`, with `c = continuation_factor`: the Reynolds
    /// number grows geometrically from `Re/c` to `Re`.
    pub continuation_steps: usize,
    /// Ratio of the first continuation viscosity to the target one (> 1).
    pub continuation_factor: f64,
    /// Relative residual that ends an intermediate continuation stage.
    pub continuation_tolerance: f64,
}

impl Default for NewtonParams {
    fn default() -> Self {
        NewtonParams {
            picard_steps: 0,
            max_iterations: 30,
            residual_tolerance: 1e-10,
            continuation_steps: 0,
            continuation_factor: 10.0,
            continuation_tolerance: 1e-4,
        }
    }
}

impl NewtonParams {
    /// The settings of a case's `[model.nonlinear]` table.
    pub fn from_controls(n: &crate::case::NonlinearControls) -> Self {
        NewtonParams {
            picard_steps: n.picard_steps,
            max_iterations: n.max_iterations,
            residual_tolerance: n.tolerance,
            continuation_steps: n.continuation_steps,
            continuation_factor: n.continuation_factor,
            ..NewtonParams::default()
        }
    }
}

/// One nonlinear step.
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize)]
pub struct NewtonIteration {
    /// Kinematic viscosity of this step (differs from the target during continuation).
    pub viscosity: f64,
    /// `true` for a Newton step, `false` for a Picard step.
    pub newton: bool,
    /// `‖R(w)‖₂ / ‖b₀‖₂` of the iterate the step started from.
    pub residual: f64,
    /// `‖u − w‖₂ / ‖u‖₂` of the step's update (free unknowns).
    pub update: f64,
    /// GMRES iterations of the step's linear solve (0 with the LU).
    pub linear_iterations: usize,
}

/// What a steady Navier–Stokes solve did.
#[derive(Clone, Debug, PartialEq)]
pub struct NewtonInfo {
    pub n_velocity_dofs: usize,
    pub n_pressure_dofs: usize,
    pub nnz: usize,
    /// Every nonlinear step in order (continuation stages included).
    pub iterations: Vec<NewtonIteration>,
    /// Relative residual `‖R‖ / ‖b₀‖` of the returned field.
    pub final_residual: f64,
    /// Stage times summed over the iterations (`solve` includes refinement).
    pub timings: StageTimings,
    pub pressure_fixed: bool,
}

/// Why a steady Navier–Stokes solve failed.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum NewtonError {
    #[error(transparent)]
    Solve(#[from] SolveError),
    #[error(
        "Newton iteration did not converge in {iterations} steps at viscosity {viscosity:e}: last relative residuals {}",
        last_residuals(&info.iterations)
    )]
    NotConverged {
        iterations: usize,
        viscosity: f64,
        /// The iterations so far and the last iterate (not a solution).
        info: Box<NewtonInfo>,
        last: Box<FlowField>,
    },
}

fn last_residuals(iterations: &[NewtonIteration]) -> String {
    let start = iterations.len().saturating_sub(4);
    iterations[start..].iter().map(|i| format!("{:.2e}", i.residual)).collect::<Vec<_>>().join(", ")
}

/// The sequence of viscosities: continuation stages, then the target.
fn viscosity_schedule(target: f64, params: &NewtonParams) -> Vec<f64> {
    let m = params.continuation_steps;
    let c = params.continuation_factor.max(1.0);
    let mut out: Vec<f64> = (0..m).map(|j| target * c.powf(1.0 - j as f64 / m as f64)).collect();
    out.push(target);
    out
}

/// Solves the steady Navier–Stokes problem on `mesh`.
///
/// # Errors
/// [`NewtonError::Solve`] for every failure of the Stokes stages (boundary data, pattern,
/// factorisation, linear residual); [`NewtonError::NotConverged`] when the residual target is
/// not met within `newton.max_iterations` at some viscosity.
///
/// # References
/// See the module docs.
pub fn solve_steady_navier_stokes(
    mesh: &Mesh,
    problem: &StokesProblem,
    params: &SolverParams,
    newton: &NewtonParams,
) -> Result<(FlowField, NewtonInfo), NewtonError> {
    let mut timings = StageTimings::default();
    let start = Instant::now();
    let (pattern, _flux) = build_pattern(mesh, problem, params)?;
    timings.pattern = start.elapsed();
    let start = Instant::now();
    let method = NewtonLinear::analyse(&pattern, params)?;
    timings.symbolic = start.elapsed();

    let mut solver = NewtonSolver {
        mesh,
        problem,
        pattern: &pattern,
        method,
        parallelism: params.parallelism,
        ordering: params.ordering,
        system: AssembledSystem { values: Vec::new(), rhs: Vec::new(), dropped_entries: 0 },
        timings,
        linear_iterations: 0,
        viscosity: problem.viscosity,
        convecting: false,
    };
    let mut x = solver.linear_step(problem.viscosity, None, Linearisation::Picard)?;
    let scale = norm(&solver.system.rhs).max(f64::MIN_POSITIVE);
    let mut info = NewtonInfo {
        n_velocity_dofs: pattern.dofs().n_velocity_dofs(),
        n_pressure_dofs: pattern.dofs().n_pressure_dofs(),
        nnz: pattern.nnz(),
        iterations: Vec::new(),
        final_residual: f64::NAN,
        timings: StageTimings::default(),
        pressure_fixed: pattern.dofs().pinned_pressure().is_some(),
    };
    // The pressure-mean weights once for every iterate, not once per Newton step.
    let pressure_mean = pattern.dofs().pinned_pressure().map(|_| PressureMean::new(mesh));
    let expand = |x: &[f64]| expand_field_with(pattern.dofs(), x, pressure_mean.as_ref());
    let schedule = viscosity_schedule(problem.viscosity, newton);
    for (stage, &viscosity) in schedule.iter().enumerate() {
        let last_stage = stage + 1 == schedule.len();
        let tolerance =
            if last_stage { newton.residual_tolerance } else { newton.continuation_tolerance };
        let mut converged = false;
        for k in 0..=newton.max_iterations {
            let kind =
                if k < newton.picard_steps { Linearisation::Picard } else { Linearisation::Newton };
            let w = expand(&x);
            solver.assemble(viscosity, Some(&w), kind)?;
            let residual = solver.residual_norm(&x) / scale;
            info.final_residual = residual;
            if residual <= tolerance {
                converged = true;
                break;
            }
            if k == newton.max_iterations || !residual.is_finite() {
                break;
            }
            // Inexact Newton: the linear residual need only be a small fraction of the
            // nonlinear one, but well below the final tolerance so it never limits it.
            let linear_target = (FORCING * residual).max(0.01 * newton.residual_tolerance) * scale;
            let x_new = solver.factor_and_solve(&x, linear_target)?;
            let update = distance(&x_new, &x) / norm(&x_new).max(f64::MIN_POSITIVE);
            info.iterations.push(NewtonIteration {
                viscosity,
                newton: kind == Linearisation::Newton,
                residual,
                update,
                linear_iterations: solver.linear_iterations,
            });
            x = x_new;
        }
        if !converged {
            info.timings = solver.timings;
            let iterations = info.iterations.len();
            return Err(NewtonError::NotConverged {
                iterations,
                viscosity,
                last: Box::new(expand(&x)),
                info: Box::new(info),
            });
        }
    }
    info.timings = solver.timings;
    Ok((expand(&x), info))
}

/// The linear solver of the Newton steps, analysed once for the pattern.
enum NewtonLinear {
    /// LU of every matrix.
    Lu { symbolic: Box<SymbolicSystem>, factor: Option<NumericFactor>, linear: LinearParams },
    /// GMRES around a factorisation of an earlier matrix (see [`NonsymmetricSolver`]).
    Krylov { solver: Box<PreconditionedGmres>, linear: LinearParams, kind: Preconditioner },
}

/// What the GMRES preconditioner of [`NewtonLinear::Krylov`] factorises.
enum Preconditioner {
    /// The LU of the last matrix that GMRES could not solve within [`REUSE_BUDGET`]
    /// iterations; `current` is false while the factor is the Stokes matrix's of the first
    /// step (then the next matrix is factorised straight away).
    ReusedLu { current: bool },
    /// The `LDLᵀ` of the Stokes matrix at `viscosity`, assembled into `stokes`.
    Stokes { viscosity: Option<f64>, stokes: AssembledSystem },
}

/// GMRES iterations tried with a reused LU before the current matrix is factorised.
const REUSE_BUDGET: usize = 12;

impl NewtonLinear {
    fn analyse(pattern: &SystemPattern, params: &SolverParams) -> Result<Self, SolveError> {
        let lu = LinearParams { kind: SolverKind::Lu, ..params.linear() };
        Ok(match params.nonsymmetric {
            NonsymmetricSolver::Lu => NewtonLinear::Lu {
                symbolic: Box::new(SymbolicSystem::analyse(pattern, SolverKind::Lu)?),
                factor: None,
                linear: lu,
            },
            NonsymmetricSolver::GmresReusedLu => NewtonLinear::Krylov {
                solver: Box::new(PreconditionedGmres::analyse(pattern, SolverKind::Lu)?),
                linear: lu,
                kind: Preconditioner::ReusedLu { current: false },
            },
            NonsymmetricSolver::GmresStokes => NewtonLinear::Krylov {
                solver: Box::new(PreconditionedGmres::analyse(pattern, SolverKind::Ldlt)?),
                linear: LinearParams { kind: SolverKind::Ldlt, ..params.linear() },
                kind: Preconditioner::Stokes {
                    viscosity: None,
                    stokes: AssembledSystem {
                        values: Vec::new(),
                        rhs: Vec::new(),
                        dropped_entries: 0,
                    },
                },
            },
        })
    }
}

/// The state shared by the linear steps of one nonlinear solve.
struct NewtonSolver<'a> {
    mesh: &'a Mesh,
    problem: &'a StokesProblem<'a>,
    pattern: &'a SystemPattern,
    method: NewtonLinear,
    parallelism: Parallelism,
    /// Ordering of the `LDLᵀ` of the Stokes start.
    ordering: FillOrdering,
    system: AssembledSystem,
    timings: StageTimings,
    /// GMRES iterations of the last linear solve.
    linear_iterations: usize,
    /// Viscosity of the assembled system.
    viscosity: f64,
    /// Whether the assembled system has a convecting field (false for the Stokes start).
    convecting: bool,
}

impl NewtonSolver<'_> {
    /// Assembles the system linearised around `w` (the Stokes system when `w` is `None`).
    fn assemble(
        &mut self,
        viscosity: f64,
        w: Option<&FlowField>,
        kind: Linearisation,
    ) -> Result<(), SolveError> {
        let start = Instant::now();
        assemble_linearised(
            self.pattern,
            self.mesh,
            self.problem,
            self.parallelism,
            viscosity,
            w,
            kind,
            &mut self.system,
        )?;
        self.timings.assembly += start.elapsed();
        self.viscosity = viscosity;
        self.convecting = w.is_some();
        Ok(())
    }

    /// Assembles around `w` and solves for the next iterate (from zero).
    fn linear_step(
        &mut self,
        viscosity: f64,
        w: Option<&FlowField>,
        kind: Linearisation,
    ) -> Result<Vec<f64>, SolveError> {
        self.assemble(viscosity, w, kind)?;
        let reused_lu = matches!(
            self.method,
            NewtonLinear::Krylov { kind: Preconditioner::ReusedLu { .. }, .. }
        );
        if w.is_none() && reused_lu {
            return self.symmetric_solve();
        }
        let start = vec![0.0; self.pattern.n()];
        let target = self.linear_target_of_rhs();
        self.factor_and_solve(&start, target)
    }

    /// Solves the assembled symmetric (Stokes) system by the ordered `LDLᵀ`, whose factor is
    /// dropped afterwards: cheaper than an LU of the Stokes matrix that GMRES around a reused
    /// LU would never use again.
    fn symmetric_solve(&mut self) -> Result<Vec<f64>, SolveError> {
        let NewtonLinear::Krylov { linear, .. } = &self.method else {
            unreachable!("called for the Krylov method only")
        };
        let linear = LinearParams { kind: SolverKind::Ldlt, ..*linear };
        let (pattern, values, rhs) = (self.pattern, &self.system.values, &self.system.rhs);
        let start = Instant::now();
        let symbolic =
            super::analyse_for_mesh(pattern, self.mesh, SolverKind::Ldlt, self.ordering)?;
        self.timings.symbolic += start.elapsed();
        let start = Instant::now();
        let factor = symbolic.factorize(pattern, values, &linear)?;
        self.timings.numeric += start.elapsed();
        let start = Instant::now();
        let (x, _) = symbolic.solve(pattern, values, &factor, rhs, &linear)?;
        self.timings.solve += start.elapsed();
        self.linear_iterations = 0;
        Ok(x)
    }

    /// `residual_target · ‖b‖`: the direct solvers' target for the assembled system.
    fn linear_target_of_rhs(&self) -> f64 {
        let linear = match &self.method {
            NewtonLinear::Lu { linear, .. } | NewtonLinear::Krylov { linear, .. } => linear,
        };
        linear.residual_target * norm(&self.system.rhs)
    }

    /// Solves the assembled system: LU (factor storage reused, refined to the relative
    /// residual target), or GMRES started from `guess` (the current iterate) with the
    /// Stokes preconditioner until `‖b − J x‖₂ ≤ target`.
    fn factor_and_solve(&mut self, guess: &[f64], target: f64) -> Result<Vec<f64>, SolveError> {
        let (values, rhs) = (&self.system.values, &self.system.rhs);
        match &mut self.method {
            NewtonLinear::Lu { symbolic, factor, linear } => {
                let start = Instant::now();
                match factor {
                    Some(f) => symbolic.refactorize(self.pattern, values, linear, f)?,
                    None => *factor = Some(symbolic.factorize(self.pattern, values, linear)?),
                }
                self.timings.numeric += start.elapsed();
                let start = Instant::now();
                let f = factor.as_ref().expect("factorised above");
                let (x, _) = symbolic.solve(self.pattern, values, f, rhs, linear)?;
                self.timings.solve += start.elapsed();
                self.linear_iterations = 0;
                Ok(x)
            }
            NewtonLinear::Krylov { .. } => self.gmres_solve(guess, target),
        }
    }

    /// GMRES on the assembled system from `guess` until `‖b − J x‖₂ ≤ target`, with the
    /// preconditioner refreshed as [`Preconditioner`] describes.
    fn gmres_solve(&mut self, guess: &[f64], target: f64) -> Result<Vec<f64>, SolveError> {
        let NewtonLinear::Krylov { solver, linear, kind } = &mut self.method else {
            unreachable!("called for the Krylov method only")
        };
        let (pattern, values, rhs) = (self.pattern, &self.system.values, &self.system.rhs);
        let norm_b = norm(rhs).max(f64::MIN_POSITIVE);
        let full = GmresParams { relative_tolerance: target / norm_b, ..GmresParams::default() };
        let mut x = guess.to_vec();
        let mut numeric = std::time::Duration::ZERO;
        let mut iterations;
        let start = Instant::now();
        match kind {
            Preconditioner::ReusedLu { current } => {
                let stale = !*current || !solver.has_factor();
                let reused = if stale {
                    None
                } else {
                    let budget = GmresParams { max_iterations: REUSE_BUDGET, ..full };
                    Some(solver.solve(pattern, values, rhs, &mut x, &budget, linear.parallelism))
                };
                match reused {
                    Some(Ok(info)) => iterations = info.iterations,
                    Some(Err(SolveError::NotConverged { .. })) | None => {
                        iterations = reused.map_or(0, |_| REUSE_BUDGET);
                        let clock = Instant::now();
                        solver.factorize_preconditioner(pattern, values, linear)?;
                        numeric = clock.elapsed();
                        let info = solver.solve(
                            pattern,
                            values,
                            rhs,
                            &mut x,
                            &full,
                            linear.parallelism,
                        )?;
                        iterations += info.iterations;
                        // The factor of the Stokes system (no convecting field yet) is not
                        // worth trying on the first Newton matrix.
                        *current = self.convecting;
                    }
                    Some(Err(e)) => return Err(e),
                }
            }
            Preconditioner::Stokes { viscosity, stokes } => {
                if *viscosity != Some(self.viscosity) {
                    let clock = Instant::now();
                    let (mesh, problem, par) = (self.mesh, self.problem, self.parallelism);
                    let pic = Linearisation::Picard;
                    assemble_linearised(
                        pattern,
                        mesh,
                        problem,
                        par,
                        self.viscosity,
                        None,
                        pic,
                        stokes,
                    )?;
                    solver.factorize_preconditioner(pattern, &stokes.values, linear)?;
                    numeric = clock.elapsed();
                    *viscosity = Some(self.viscosity);
                }
                iterations = solver
                    .solve(pattern, values, rhs, &mut x, &full, linear.parallelism)?
                    .iterations;
            }
        }
        self.timings.numeric += numeric;
        self.timings.solve += start.elapsed() - numeric;
        self.linear_iterations = iterations;
        Ok(x)
    }

    /// `‖J x − b‖₂` of the assembled system.
    fn residual_norm(&self, x: &[f64]) -> f64 {
        let mut ax = vec![0.0; x.len()];
        self.pattern.multiply(&self.system.values, x, &mut ax);
        ax.iter().zip(&self.system.rhs).map(|(a, b)| (a - b) * (a - b)).sum::<f64>().sqrt()
    }
}

/// Assembles into `system` the Navier–Stokes system at `viscosity` linearised around `w`
/// (the Stokes system when `w` is `None`).
#[allow(clippy::too_many_arguments)]
fn assemble_linearised(
    pattern: &SystemPattern,
    mesh: &Mesh,
    problem: &StokesProblem,
    parallelism: Parallelism,
    viscosity: f64,
    w: Option<&FlowField>,
    kind: Linearisation,
    system: &mut AssembledSystem,
) -> Result<(), SolveError> {
    let force_closure = super::body_force_at(problem.body_force, problem.time);
    let force = force_closure.as_deref();
    assemble_into(pattern, mesh, parallelism, system, |cell, local| {
        let tri = AffineTriangle::new(mesh.cell_vertices(cell));
        stokes_local_system(&tri, viscosity, problem.viscous_form, force, local);
        if let Some(w) = w {
            let nodes = &mesh.cells[cell];
            let nodal: [[f64; 2]; 6] = std::array::from_fn(|k| w.velocity[nodes[k]]);
            add_linearised_convection(&tri, &nodal, kind, local);
        }
    });
    if system.dropped_entries > 0 {
        return Err(SolveError::PatternMismatch { dropped: system.dropped_entries });
    }
    if system.rhs.iter().any(|v| !v.is_finite()) {
        return Err(SolveError::NonFiniteBodyForce);
    }
    Ok(())
}

fn norm(v: &[f64]) -> f64 {
    v.iter().map(|x| x * x).sum::<f64>().sqrt()
}

fn distance(a: &[f64], b: &[f64]) -> f64 {
    a.iter().zip(b).map(|(x, y)| (x - y) * (x - y)).sum::<f64>().sqrt()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn continuation_schedule_ends_at_the_target_viscosity() {
        let params = NewtonParams { continuation_steps: 2, ..NewtonParams::default() };
        let s = viscosity_schedule(1e-3, &params);
        assert_eq!(s.len(), 3);
        assert!((s[0] - 1e-2).abs() < 1e-15);
        assert!((s[1] - 1e-3 * 10f64.sqrt()).abs() < 1e-15);
        assert_eq!(s[2], 1e-3);
        assert_eq!(viscosity_schedule(0.5, &NewtonParams::default()), vec![0.5]);
    }
}
