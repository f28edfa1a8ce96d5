//! Steady Stokes solver: boundary conditions, Taylor–Hood assembly and a sparse direct solve.
//!
//! Takes a [`Mesh`] and a [`StokesProblem`] (viscosity, boundary condition per part, body
//! force, viscous form, time for time-dependent data); returns the discrete [`FlowField`]
//! and a [`SolveInfo`] with sizes, stage timings and the achieved residual.
//!
//! Equations (kinematic form, `p` = pressure/ρ): `−ν Δu + ∇p = f`, `div u = 0`. Weak form:
//! find `u ∈ P2²`, `p ∈ P1` with `a(u, v) − (p, div v) = (f, v)` and `−(q, div u) = 0`, so
//! the matrix `[[A, Bᵀ], [B, 0]]` is symmetric. Dirichlet velocities are eliminated (rows
//! and columns) with their values moved to the right-hand side; slip nodes are rotated to
//! tangential coordinates (see [`boundary`]).
//!
//! Stages, each reusable by a later Navier–Stokes solver: [`resolve_boundary`] →
//! [`stokes_dof_map`] → [`SystemPattern::new`] → [`assemble_stokes`] (or
//! [`crate::fem::assembly::assemble`] with any kernel on the same pattern) →
//! [`SymbolicSystem::analyse`] (once per pattern) → [`SymbolicSystem::factorize`] →
//! [`SymbolicSystem::solve`].
//!
//! **Pressure level.** With no outflow part the pressure is determined up to a constant: one
//! interior pressure unknown is pinned to zero and the result is shifted to zero mean
//! ([`SolveInfo::pressure_fixed`] is then true). The prescribed velocities must then carry
//! no net flux, otherwise [`SolveError::IncompatibleFlux`].
//!
//! **Invariant:** no I/O; progress and measurements leave through [`SolveInfo`].

pub mod boundary;
pub mod krylov;
pub mod linear;
pub mod navier_stokes;
pub mod ordering;
pub mod split_ldlt;
pub mod supernodal;
#[cfg(test)]
mod test_grids;
pub mod unsteady;
pub mod vector_registers;

use std::time::{Duration, Instant};

use crate::case::{BoundaryCondition, ScalarExpr};
use crate::fem::assembly::{
    AssembledSystem, Parallelism, PatternError, SystemPattern, VelocityCoupling, assemble_into,
};
use crate::fem::dofs::DofMap;
use crate::fem::kernels::stokes_local_system;
use crate::fem::shape::AffineTriangle;
use crate::fem::{FlowField, ViscousForm};
use crate::mesh::Mesh;
use split_ldlt::Halves;

pub use boundary::{BoundaryConstraints, BoundaryFlux, boundary_flux, resolve_boundary};
pub use linear::{
    FillOrdering, GatheredMatrix, LinearParams, NonsymmetricSolver, NumericFactor, RefinementInfo,
    Regularization, SolverKind, SymbolicSystem,
};
pub use navier_stokes::{
    NewtonError, NewtonInfo, NewtonIteration, NewtonParams, solve_steady_navier_stokes,
};
pub use unsteady::{ImexParams, ImexStepper, StepError, StepInfo, UnsteadyProblem};

/// A steady Stokes problem on a mesh whose part ids index `conditions`.
#[derive(Clone, Copy, Debug)]
pub struct StokesProblem<'a> {
    /// Kinematic viscosity ν > 0.
    pub viscosity: f64,
    /// Boundary condition of every part, indexed by part id.
    pub conditions: &'a [BoundaryCondition],
    /// Body force `f = (f_x, f_y)` as expressions in `x, y, t`, or none.
    pub body_force: Option<&'a [ScalarExpr; 2]>,
    pub viscous_form: ViscousForm,
    /// Time at which time-dependent boundary data and forces are evaluated.
    pub time: f64,
}

impl<'a> StokesProblem<'a> {
    /// The steady problem of a case at `t = 0`: its viscosity, conditions, body force and
    /// viscous form.
    pub fn from_case(case: &'a crate::case::Case) -> Self {
        StokesProblem {
            viscosity: case.fluid.kinematic_viscosity,
            conditions: &case.conditions,
            body_force: case.body_force.as_ref(),
            viscous_form: case.model.viscous_form,
            time: 0.0,
        }
    }
}

/// The body force `f(x, y)` at time `time` as the closure the element kernels take (use
/// `.as_deref()`), or `None`. Boxed once per assembly, not per element.
pub(crate) type BodyForce<'a> = Box<dyn Fn(f64, f64) -> [f64; 2] + Sync + 'a>;

pub(crate) fn body_force_at(force: Option<&[ScalarExpr; 2]>, time: f64) -> Option<BodyForce<'_>> {
    let [fx, fy] = force?;
    Some(Box::new(move |x: f64, y: f64| [fx.eval(x, y, time), fy.eval(x, y, time)]))
}

/// Solver settings. Defaults: `LDLᵀ`, dynamic regularisation, rayon assembly, sequential
/// factorisation, relative residual target `1e-10`, at most 5 refinement steps, flux
/// tolerance `1e-3`.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct SolverParams {
    pub kind: SolverKind,
    /// Solver of the nonsymmetric Newton / Oseen systems.
    pub nonsymmetric: NonsymmetricSolver,
    /// Fill-reducing ordering of the `LDLᵀ`.
    pub ordering: FillOrdering,
    pub regularization: Regularization,
    /// Parallelism of the assembly of local matrices.
    pub parallelism: Parallelism,
    /// Parallelism of the factorisation and solves (`Serial` measured faster on 2 cores).
    pub factor_parallelism: Parallelism,
    /// Relative residual `‖b − A x‖₂ / ‖b‖₂` the refined solution must reach.
    pub residual_target: f64,
    pub max_refinement_steps: usize,
    /// In a closed domain, the largest accepted `|∮ u·n| / ∮ |u·n|` of the prescribed
    /// velocity. Interpolated data of a divergence-free field carry a mismatch of the order
    /// of the interpolation error (measured 3.7e-4 for Kovasznay data on a mesh of size 0.25,
    /// falling like h³), which the pinned pressure absorbs without loss of the convergence
    /// rate; data that really put fluid into a closed domain give a ratio of order one. The
    /// default `1e-3` separates the two (common practice, no source).
    pub flux_tolerance: f64,
}

impl Default for SolverParams {
    fn default() -> Self {
        let linear = LinearParams::default();
        SolverParams {
            kind: linear.kind,
            nonsymmetric: NonsymmetricSolver::default(),
            ordering: FillOrdering::default(),
            regularization: linear.regularization,
            parallelism: Parallelism::Rayon,
            factor_parallelism: Parallelism::Serial,
            residual_target: linear.residual_target,
            max_refinement_steps: linear.max_refinement_steps,
            flux_tolerance: 1e-3,
        }
    }
}

impl SolverParams {
    /// The settings of the linear-solve stage.
    pub fn linear(&self) -> LinearParams {
        LinearParams {
            kind: self.kind,
            regularization: self.regularization,
            parallelism: self.factor_parallelism,
            residual_target: self.residual_target,
            max_refinement_steps: self.max_refinement_steps,
        }
    }
}

/// Wall-clock time of each stage.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct StageTimings {
    /// Boundary resolution, dof numbering, pattern and position map (in [`solve_stokes`]
    /// also the nested-dissection ordering, computed alongside).
    pub pattern: Duration,
    /// Assembly; in [`solve_stokes`] with rayon it runs alongside the symbolic analysis, so
    /// the two overlap.
    pub assembly: Duration,
    pub symbolic: Duration,
    pub numeric: Duration,
    /// First solve plus refinement.
    pub solve: Duration,
}

/// What a Stokes solve did.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct SolveInfo {
    pub n_velocity_dofs: usize,
    pub n_pressure_dofs: usize,
    /// Stored entries of the (full, both triangles) system matrix.
    pub nnz: usize,
    /// Stored entries of the `LDLᵀ` factor (`None` with LU).
    pub factor_entries: Option<usize>,
    pub timings: StageTimings,
    pub refinement_steps: usize,
    pub relative_residual: f64,
    /// True when no part fixes the pressure level: one pressure was pinned and the result
    /// shifted to zero mean.
    pub pressure_fixed: bool,
    /// Net and absolute flux of the prescribed velocity (checked in closed domains).
    pub boundary_flux: BoundaryFlux,
}

/// Why a Stokes solve failed.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum SolveError {
    #[error("viscosity must be positive and finite, got {value}")]
    InvalidViscosity { value: f64 },
    #[error("the mesh has no cells")]
    EmptyMesh,
    #[error("boundary part `{part}` has no boundary condition")]
    MissingCondition { part: String },
    #[error(
        "slip part `{part}` is not straight (relative deviation {deviation:e}); slip is supported on straight parts only"
    )]
    SlipPartNotStraight { part: String, deviation: f64 },
    #[error("velocity on part `{part}` at ({x}, {y}) is not finite: {value:?}")]
    NonFiniteBoundaryValue { part: String, x: f64, y: f64, value: [f64; 2] },
    #[error("body force is not finite somewhere in the domain")]
    NonFiniteBodyForce,
    #[error(
        "prescribed velocities carry a net flux {flux:e} (∮|u·n| = {absolute:e}) through a closed domain; incompressible flow needs zero"
    )]
    IncompatibleFlux { flux: f64, absolute: f64 },
    #[error(transparent)]
    Pattern(#[from] PatternError),
    #[error(
        "{dropped} nonzero element entries have no slot in the sparsity pattern (viscous form and velocity coupling do not match)"
    )]
    PatternMismatch { dropped: usize },
    #[error("{stage} factorization failed: {reason}")]
    Factorization { stage: &'static str, reason: String },
    #[error("solution is not finite after {steps} refinement steps (numerically singular system)")]
    NonFiniteSolution { steps: usize },
    #[error(
        "relative residual {relative_residual:e} above target {target:e} after {steps} refinement steps"
    )]
    NotConverged { relative_residual: f64, target: f64, steps: usize },
}

/// Solves the steady Stokes problem on `mesh`.
///
/// With [`SolverParams::parallelism`] = [`Parallelism::Rayon`] the pattern is built while
/// the nested-dissection ordering is computed, and the system is assembled while the
/// pattern is analysed; [`StageTimings::assembly`] and [`StageTimings::symbolic`] then
/// overlap. Measured on the 1M-unknown default case: docs/performance.md.
///
/// # Errors
/// Any [`SolveError`]: invalid viscosity, empty mesh, missing or invalid boundary data,
/// incompatible flux in a closed domain, failed factorisation, non-finite solution or a
/// missed residual target.
///
/// # References
/// C. Taylor, P. Hood, Computers & Fluids 1 (1973) 73–100 (the element; from memory).
pub fn solve_stokes(
    mesh: &Mesh,
    problem: &StokesProblem,
    params: &SolverParams,
) -> Result<(FlowField, SolveInfo), SolveError> {
    let mut timings = StageTimings::default();
    let linear = params.linear();
    let join = params.parallelism;
    let start = Instant::now();
    let (dofs, flux) = number_unknowns(mesh, problem, params)?;
    let (pattern, dissection) = join.join(
        || full_pattern(mesh, dofs.clone()),
        || fill_permutation(mesh, &dofs, linear.kind, params.ordering),
    );
    let mut pattern = pattern?;
    timings.pattern = start.elapsed();

    let ((system, assembly_time), (symbolic, symbolic_time)) = join.join(
        || timed(|| assemble_stokes(&pattern, mesh, problem, params.parallelism)),
        || timed(|| analyse_with(&pattern, linear.kind, dissection.as_ref())),
    );
    let (system, symbolic) = (system?, symbolic?);
    timings.assembly = assembly_time;
    timings.symbolic = symbolic_time;
    // One assembly only: its pages go back before the factor's are touched, as do those of
    // the ordering (the analysis keeps its own).
    pattern.release_positions();
    drop(dissection);
    let nnz = pattern.nnz();

    let (x, refinement) = factorize_and_solve(&symbolic, pattern, system, &linear, &mut timings)?;
    let field = expand_field(mesh, &dofs, &x);
    let info = SolveInfo {
        n_velocity_dofs: dofs.n_velocity_dofs(),
        n_pressure_dofs: dofs.n_pressure_dofs(),
        nnz,
        factor_entries: symbolic.factor_entries(),
        timings,
        refinement_steps: refinement.steps,
        relative_residual: refinement.relative_residual,
        pressure_fixed: dofs.pinned_pressure().is_some(),
        boundary_flux: flux,
    };
    Ok((field, info))
}

/// The numeric factorisation and the refined solve of a one-shot steady system, timed into
/// `timings`. When the analysis lays the matrix out for its split `LDLᵀ`
/// ([`SymbolicSystem::gather`]), the pattern and the assembled values (about 16 bytes per
/// stored entry: 470 MB at 1M unknowns) are freed before the factor's pages are touched; on
/// a virtual machine the last of a process's fresh pages cost five times the first
/// (docs/performance.md).
fn factorize_and_solve(
    symbolic: &SymbolicSystem,
    pattern: SystemPattern,
    system: AssembledSystem,
    linear: &LinearParams,
    timings: &mut StageTimings,
) -> Result<(Vec<f64>, RefinementInfo), SolveError> {
    let start = Instant::now();
    let Some(matrix) = symbolic.gather(&pattern, &system.values, linear) else {
        let factor = symbolic.factorize(&pattern, &system.values, linear)?;
        timings.numeric = start.elapsed();
        let start = Instant::now();
        let solution = symbolic.solve(&pattern, &system.values, &factor, &system.rhs, linear)?;
        timings.solve = start.elapsed();
        return Ok(solution);
    };
    drop((pattern, system.values));
    let factor = symbolic.factorize_gathered(&matrix, linear)?;
    timings.numeric = start.elapsed();
    let start = Instant::now();
    let solution = symbolic.solve_gathered(&matrix, &factor, &system.rhs, linear)?;
    timings.solve = start.elapsed();
    Ok(solution)
}

/// The symbolic analysis of `pattern` for `kind`, with the `LDLᵀ` ordered by `ordering`
/// (nested dissection of `mesh`, or AMD).
///
/// # Errors
/// As [`SymbolicSystem::analyse`].
pub fn analyse_for_mesh(
    pattern: &SystemPattern,
    mesh: &Mesh,
    kind: SolverKind,
    ordering: FillOrdering,
) -> Result<SymbolicSystem, SolveError> {
    let dissection = fill_permutation(mesh, pattern.dofs(), kind, ordering);
    analyse_with(pattern, kind, dissection.as_ref())
}

/// The fill-reducing permutation [`SymbolicSystem::analyse_dissected`] is given, with the
/// halves of its top split: nested dissection of `mesh` for an `LDLᵀ` ordered so, `None`
/// (AMD, or COLAMD inside the LU) otherwise.
fn fill_permutation(
    mesh: &Mesh,
    dofs: &DofMap,
    kind: SolverKind,
    ordering: FillOrdering,
) -> Option<(Vec<usize>, Halves)> {
    let nested = kind == SolverKind::Ldlt && ordering == FillOrdering::NestedDissection;
    nested.then(|| ordering::nested_dissection_halves(mesh, dofs))
}

/// [`SymbolicSystem::analyse_dissected`] with the output of [`fill_permutation`].
fn analyse_with(
    pattern: &SystemPattern,
    kind: SolverKind,
    dissection: Option<&(Vec<usize>, Halves)>,
) -> Result<SymbolicSystem, SolveError> {
    let (perm, halves) = match dissection {
        Some((perm, halves)) => (Some(&perm[..]), Some(*halves)),
        None => (None, None),
    };
    SymbolicSystem::analyse_dissected(pattern, kind, perm, halves)
}

/// Validates the problem and builds the dof numbering and sparsity pattern (full velocity
/// coupling) from the boundary conditions at `problem.time`: the first stage of every solver.
///
/// # Errors
/// [`SolveError::InvalidViscosity`], [`SolveError::EmptyMesh`], the boundary errors of
/// [`resolve_boundary`], [`SolveError::IncompatibleFlux`] and [`SolveError::Pattern`].
pub fn build_pattern(
    mesh: &Mesh,
    problem: &StokesProblem,
    params: &SolverParams,
) -> Result<(SystemPattern, BoundaryFlux), SolveError> {
    let (dofs, flux) = number_unknowns(mesh, problem, params)?;
    Ok((full_pattern(mesh, dofs)?, flux))
}

/// The pattern of every solver: full velocity coupling even for the gradient form, measured
/// to give smaller `LDLᵀ` factors (see `VelocityCoupling`); Newton linearisations of
/// convection need it anyway.
fn full_pattern(mesh: &Mesh, dofs: DofMap) -> Result<SystemPattern, PatternError> {
    SystemPattern::new(mesh, dofs, VelocityCoupling::Full)
}

/// Validates the problem and numbers the unknowns (the part of [`build_pattern`] before
/// the sparsity pattern).
fn number_unknowns(
    mesh: &Mesh,
    problem: &StokesProblem,
    params: &SolverParams,
) -> Result<(DofMap, BoundaryFlux), SolveError> {
    if !(problem.viscosity > 0.0 && problem.viscosity.is_finite()) {
        return Err(SolveError::InvalidViscosity { value: problem.viscosity });
    }
    if mesh.cells.is_empty() {
        return Err(SolveError::EmptyMesh);
    }
    let constraints = resolve_boundary(mesh, problem.conditions, problem.time)?;
    stokes_dof_map(mesh, &constraints, params.flux_tolerance)
}

/// `f()` with its wall-clock time.
fn timed<T>(f: impl FnOnce() -> T) -> (T, Duration) {
    let start = Instant::now();
    let value = f();
    (value, start.elapsed())
}

/// The fewest velocity couplings the viscous form needs: like components only for the
/// gradient form (its `u`–`v` blocks vanish), all for the symmetric form. [`solve_stokes`]
/// uses [`VelocityCoupling::Full`] for both (smaller factors, see [`VelocityCoupling`]).
pub fn velocity_coupling(form: ViscousForm) -> VelocityCoupling {
    match form {
        ViscousForm::Gradient => VelocityCoupling::SameComponent,
        ViscousForm::Symmetric => VelocityCoupling::Full,
    }
}

/// Numbers the unknowns for the given constraints. In a closed domain (no outflow part) the
/// boundary flux is checked and one pressure unknown is pinned: the first vertex off the
/// boundary (vertex 0 if every vertex is on it).
///
/// # Errors
/// [`SolveError::IncompatibleFlux`] when `|∮ u·n| > flux_tolerance · ∮ |u·n|` in a closed
/// domain.
pub fn stokes_dof_map(
    mesh: &Mesh,
    constraints: &BoundaryConstraints,
    flux_tolerance: f64,
) -> Result<(DofMap, BoundaryFlux), SolveError> {
    let flux = boundary_flux(mesh, &constraints.nodes);
    if constraints.pressure_level_free {
        return Ok((DofMap::new(mesh, &constraints.nodes, None), flux));
    }
    if flux.net.abs() > flux_tolerance * flux.absolute {
        return Err(SolveError::IncompatibleFlux { flux: flux.net, absolute: flux.absolute });
    }
    let mut on_boundary = vec![false; mesh.n_vertices];
    for edge in &mesh.boundary_edges {
        on_boundary[edge.nodes[0]] = true;
        on_boundary[edge.nodes[1]] = true;
    }
    let pin = on_boundary.iter().position(|b| !b).unwrap_or(0);
    Ok((DofMap::new(mesh, &constraints.nodes, Some(pin)), flux))
}

/// Assembles the Stokes matrix and right-hand side on `pattern`.
///
/// # Errors
/// [`SolveError::NonFiniteBodyForce`] when the body force evaluates to NaN or ±∞ at a
/// quadrature point (the right-hand side is then not finite);
/// [`SolveError::PatternMismatch`] when the pattern lacks couplings the viscous form needs.
pub fn assemble_stokes(
    pattern: &SystemPattern,
    mesh: &Mesh,
    problem: &StokesProblem,
    parallelism: Parallelism,
) -> Result<AssembledSystem, SolveError> {
    let mut system = AssembledSystem { values: Vec::new(), rhs: Vec::new(), dropped_entries: 0 };
    assemble_stokes_into(pattern, mesh, problem, parallelism, &mut system)?;
    Ok(system)
}

/// Like [`assemble_stokes`], reusing the storage of `system`.
///
/// # Errors
/// [`SolveError::NonFiniteBodyForce`] as for [`assemble_stokes`];
/// [`SolveError::PatternMismatch`] when the pattern lacks couplings the viscous form needs
/// (see [`velocity_coupling`]).
pub fn assemble_stokes_into(
    pattern: &SystemPattern,
    mesh: &Mesh,
    problem: &StokesProblem,
    parallelism: Parallelism,
    system: &mut AssembledSystem,
) -> Result<(), SolveError> {
    let force_closure = body_force_at(problem.body_force, problem.time);
    let force = force_closure.as_deref();
    assemble_into(pattern, mesh, parallelism, system, |cell, local| {
        let tri = AffineTriangle::new(mesh.cell_vertices(cell));
        stokes_local_system(&tri, problem.viscosity, problem.viscous_form, force, local);
    });
    if system.dropped_entries > 0 {
        return Err(SolveError::PatternMismatch { dropped: system.dropped_entries });
    }
    if system.rhs.iter().any(|v| !v.is_finite()) {
        return Err(SolveError::NonFiniteBodyForce);
    }
    Ok(())
}

/// Builds the flow field from the solution vector; when the pressure was pinned, shifts it
/// to zero mean `∫ p = 0` (`PressureMean`).
pub fn expand_field(mesh: &Mesh, dofs: &DofMap, x: &[f64]) -> FlowField {
    let mean = dofs.pinned_pressure().map(|_| PressureMean::new(mesh));
    expand_field_with(dofs, x, mean.as_ref())
}

/// [`expand_field`] with the mean's weights built beforehand (`Some` exactly when the
/// pressure was pinned): for a time loop, which expands a field every step.
pub(crate) fn expand_field_with(
    dofs: &DofMap,
    x: &[f64],
    mean: Option<&PressureMean>,
) -> FlowField {
    let (velocity, mut pressure) = dofs.expand(x);
    if let Some(mean) = mean {
        let shift = mean.of(&pressure);
        pressure.iter_mut().for_each(|p| *p -= shift);
    }
    FlowField { velocity, pressure }
}

/// The mean `p̄ = ∫ p / |Ω|` of a P1 pressure on a mesh, through one weight per node:
/// `∫ p = Σ_T |T| (p_0 + p_1 + p_2) / 3 = Σ_v w_v p_v` with `w_v = Σ_{T ∋ v} |T| / 3` (exact
/// for the P1 interpolant).
#[derive(Clone, Debug)]
pub(crate) struct PressureMean {
    weights: Vec<f64>,
    area: f64,
}

impl PressureMean {
    /// The weights of `mesh`'s vertices.
    pub(crate) fn new(mesh: &Mesh) -> Self {
        let mut weights = vec![0.0; mesh.n_vertices];
        let mut area = 0.0;
        for (c, cell) in mesh.cells.iter().enumerate() {
            let a = AffineTriangle::new(mesh.cell_vertices(c)).area;
            for &v in &cell[..3] {
                weights[v] += a / 3.0;
            }
            area += a;
        }
        PressureMean { weights, area }
    }

    /// `p̄` of the vertex pressures `pressure`.
    pub(crate) fn of(&self, pressure: &[f64]) -> f64 {
        let integral: f64 = self.weights.iter().zip(pressure).map(|(w, p)| w * p).sum();
        integral / self.area
    }
}

/// Builds the pattern and assembles the Stokes matrix and right-hand side exactly as
/// [`solve_stokes`] does before it factorises: takes the mesh, the problem and the settings
/// (only `parallelism` and `flux_tolerance` matter here); returns the pattern (dof numbering,
/// CSC structure) and the assembled values and right-hand side on it. For exporting the
/// system or benchmarking the solver stages on it.
///
/// # Errors
/// As [`build_pattern`] and [`assemble_stokes`].
pub fn assemble_stokes_system(
    mesh: &Mesh,
    problem: &StokesProblem,
    params: &SolverParams,
) -> Result<(SystemPattern, AssembledSystem), SolveError> {
    let (pattern, _) = build_pattern(mesh, problem, params)?;
    let system = assemble_stokes(&pattern, mesh, problem, params.parallelism)?;
    Ok((pattern, system))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::mesh::structured::rectangle;

    /// The mean of a linear pressure is exact for the P1 weights: over `[0, 3] × [0, 2]`,
    /// `p = 1 + x + 2y` has mean `1 + 3/2 + 2 · 1 = 4.5` (midpoint of a linear function over
    /// a rectangle; calculus), on a jittered mesh so the cells differ in area.
    #[test]
    fn pressure_mean_of_a_linear_field_is_its_value_at_the_centroid() {
        let jitter =
            |i: usize, j: usize| [0.03 * ((i * 7 + j * 3) % 5) as f64, 0.02 * ((i + j) % 3) as f64];
        let mesh = rectangle([0.0, 0.0], [3.0, 2.0], 9, 7, jitter).unwrap();
        let mean = PressureMean::new(&mesh);
        let p: Vec<f64> =
            mesh.nodes[..mesh.n_vertices].iter().map(|v| 1.0 + v[0] + 2.0 * v[1]).collect();
        assert!((mean.area - 6.0).abs() < 1e-12, "area {}", mean.area);
        assert!((mean.of(&p) - 4.5).abs() < 1e-12, "mean {}", mean.of(&p));
    }
}
