//! Unsteady Navier–Stokes (or Stokes) flow by an implicit–explicit BDF2 scheme with a
//! factorisation that is computed once.
//!
//! Takes a [`Mesh`], an [`UnsteadyProblem`] and [`ImexParams`]; [`ImexStepper::new`] starts
//! from the steady Stokes solution for the boundary data at `t = 0` (divergence-free and
//! consistent with the data; the fluid at rest when the data vanish), and each
//! [`ImexStepper::step`] advances one time step and returns a [`StepInfo`]. The time loop, its
//! output and its progress display belong to the caller.
//!
//! **Scheme.** With `u* = 2uⁿ − uⁿ⁻¹` (second-order extrapolation),
//!
//! ```text
//! (3uⁿ⁺¹ − 4uⁿ + uⁿ⁻¹)/(2Δt) − ν Δuⁿ⁺¹ + ∇pⁿ⁺¹ = fⁿ⁺¹ − (u*·∇)u*,   div uⁿ⁺¹ = 0,
//! ```
//!
//! viscous and pressure terms implicit, convection explicit. The first step uses backward
//! Euler with `u* = u⁰`. The step matrix `[[3/(2Δt) M + A, Bᵀ], [B, 0]]` is symmetric and does
//! not change between steps, so it is factorised once by the regularised `LDLᵀ` (once more
//! for the first, backward-Euler step) and every step costs one vector assembly (history,
//! explicit convection, body force, lifting of the boundary data at `tⁿ⁺¹`) and a pair of
//! triangular solves with iterative refinement. Time-dependent boundary data change only
//! the eliminated values, never the pattern.
//!
//! **Stability monitor.** The scheme is conditionally stable (explicit convection): each step
//! reports the Courant number `max_T max_nodes |u| Δt / h_T` (`h_T` the longest edge), and
//! fails with [`StepError::BlowUp`] when the solution is not finite or its largest nodal
//! speed exceeds `blow_up_factor · max(speed_scale, largest boundary speed)`. The stepper
//! then still holds the last good state.
//!
//! # References
//! U.M. Ascher, S.J. Ruuth, B.T.R. Wetton, *Implicit-explicit methods for time-dependent
//! partial differential equations*, SIAM J. Numer. Anal. 32 (1995) 797–823 (the SBDF2
//! scheme; from memory). V. John, *Finite Element Methods for Incompressible Flow Problems*,
//! Springer 2016, ch. 7 (time stepping for Navier–Stokes; from memory).

use std::time::{Duration, Instant};

use rayon::prelude::*;

use crate::case::{BoundaryCondition, ScalarExpr};
use crate::fem::assembly::{
    AssembledSystem, CompactMatrix, LoadGather, SystemPattern, assemble_into, assemble_vector_into,
};
use crate::fem::convection::{
    ExplicitCell, add_explicit_step_load, add_mass_block, explicit_step_loads,
};
use crate::fem::dofs::ComponentDof;
use crate::fem::kernels::{LOCAL_SIZE, LOCAL_VELOCITY, LocalSystem, stokes_local_system};
use crate::fem::shape::AffineTriangle;
use crate::fem::{FlowField, ViscousForm};
use crate::mesh::Mesh;

use super::linear::{LinearParams, NumericFactor, SymbolicSystem};
use super::{
    PressureMean, SolveError, SolverParams, StokesProblem, build_pattern, expand_field,
    expand_field_with, resolve_boundary,
};

/// An unsteady problem: the data of a Stokes problem, evaluated at each step's time, plus
/// whether the convective term is present.
#[derive(Clone, Copy, Debug)]
pub struct UnsteadyProblem<'a> {
    /// Kinematic viscosity ν > 0.
    pub viscosity: f64,
    /// Boundary condition of every part (expressions may use `t`).
    pub conditions: &'a [BoundaryCondition],
    /// Body force per unit mass in `x, y, t`, or none.
    pub body_force: Option<&'a [ScalarExpr; 2]>,
    pub viscous_form: ViscousForm,
    /// `true` for Navier–Stokes, `false` for unsteady Stokes.
    pub convection: bool,
}

/// Settings of the time stepper. Defaults: rayon assembly, the linear settings of
/// [`SolverParams::default`] (regularised `LDLᵀ`) except a relative residual target of
/// `1e-8` per step, blow-up factor 100, speed scale 1.
///
/// The residual target is relative to the step's right-hand side, which is dominated by the
/// history term `M uⁿ/Δt`; `1e-8` is far below the time-discretisation error and lets the
/// first regularised solve pass without refinement (measured on the 2D-2 cylinder case:
/// 1.00 refinement steps per solve at `1e-10`, 0 at `1e-8`).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct ImexParams {
    /// Time step Δt > 0.
    pub dt: f64,
    /// Assembly and linear-solve settings (`kind` must be `Ldlt` or `Lu`; both work, the step
    /// matrix is symmetric).
    pub solver: SolverParams,
    /// A step fails when its largest nodal speed exceeds this factor times
    /// `max(speed_scale, largest boundary speed)`. Common practice, no source: a bounded flow
    /// does not accelerate to a hundred times its driving speed.
    pub blow_up_factor: f64,
    /// Characteristic speed of the flow (the case's reference velocity).
    pub speed_scale: f64,
}

impl ImexParams {
    /// Default settings for time step `dt`.
    pub fn new(dt: f64) -> Self {
        let solver = SolverParams { residual_target: 1e-8, ..SolverParams::default() };
        ImexParams { dt, solver, blow_up_factor: 100.0, speed_scale: 1.0 }
    }
}

/// What one step did.
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize)]
pub struct StepInfo {
    /// Index of the step (1 for the first).
    pub step: usize,
    /// Time reached, `tⁿ⁺¹`.
    pub time: f64,
    /// Order of the BDF formula used (1 for the first step, then 2).
    pub order: usize,
    /// Courant number `max_T max |u| Δt / h_T` of the new state.
    pub courant: f64,
    /// Largest nodal speed of the new state.
    pub max_speed: f64,
    /// Relative residual of the linear solve.
    pub relative_residual: f64,
    pub refinement_steps: usize,
}

/// Wall-clock time spent in the stages, summed over the steps so far.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct StepTimings {
    /// Pattern, symbolic analysis, matrix assembly and factorisations (setup).
    pub setup: Duration,
    /// Boundary data at the new time and the right-hand-side assembly (explicit terms).
    pub rhs: Duration,
    /// Triangular solves with refinement.
    pub solve: Duration,
}

/// Why a time step failed.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum StepError {
    #[error(transparent)]
    Solve(#[from] SolveError),
    #[error(
        "initial field has {velocity} velocities and {pressure} pressures; the mesh has {nodes} nodes and {vertices} vertices"
    )]
    InitialField { velocity: usize, pressure: usize, nodes: usize, vertices: usize },
    #[error("time step must be positive and finite, got {dt}")]
    InvalidTimeStep { dt: f64 },
    #[error(
        "the boundary conditions at t = {time} fix other nodes than at t = 0 (the node layout must not change in time)"
    )]
    LayoutChanged { time: f64 },
    #[error(
        "the solution blew up at step {step} (t = {time}): largest speed {max_speed:e} above the limit {limit:e} (Courant number {courant:.3}); reduce the time step"
    )]
    BlowUp { step: usize, time: f64, max_speed: f64, limit: f64, courant: f64 },
}

/// The state of an IMEX BDF2 time integration.
pub struct ImexStepper<'a> {
    mesh: &'a Mesh,
    problem: UnsteadyProblem<'a>,
    params: ImexParams,
    pattern: SystemPattern,
    symbolic: SymbolicSystem,
    linear: LinearParams,
    factor: NumericFactor,
    matrix: AssembledSystem,
    /// The nonzero entries of `matrix`, which every step's residual reads (built with each
    /// factorisation).
    residual_matrix: CompactMatrix,
    /// Order of the formula `matrix` and `factor` hold.
    factored_order: usize,
    /// The step matrices of the cells with eliminated values, for lifting those values.
    lifting: LiftingCells,
    /// Whether a prescribed velocity uses `t` (otherwise the values resolved at the start
    /// hold for every step, and resolving them again each step would cost 5–8 ms at 607k
    /// unknowns).
    boundary_depends_on_time: bool,
    /// Largest prescribed speed of the boundary values in the pattern (updated with them).
    boundary_speed: f64,
    cell_diameter: Vec<f64>,
    /// Weights of the pressure's mean, when the pressure is pinned (closed domains): built
    /// once, not at every step's [`expand_field_with`].
    pressure_mean: Option<PressureMean>,
    step: usize,
    time: f64,
    current: FlowField,
    previous: Option<FlowField>,
    /// `a₀ uⁿ − b₁ uⁿ⁻¹ − b₂ uⁿ⁻²` of the last step.
    derivative: Vec<[f64; 2]>,
    rhs: Vec<f64>,
    /// Where each unknown's right-hand side is gathered from (built once).
    gather: LoadGather,
    /// Local loads of all cells (reused by every step).
    loads: Vec<[f64; LOCAL_SIZE]>,
    timings: StepTimings,
}

/// Cells whose explicit loads are computed together (vectorised across cells:
/// [`explicit_step_loads`]).
const EXPLICIT_BATCH: usize = 64;

/// Coefficients `(a₀, b₁, b₂)` of `∂_t u ≈ a₀ uⁿ⁺¹ − b₁ uⁿ − b₂ uⁿ⁻¹` for BDF of `order`.
fn bdf_coefficients(order: usize, dt: f64) -> (f64, f64, f64) {
    match order {
        1 => (1.0 / dt, 1.0 / dt, 0.0),
        _ => (1.5 / dt, 2.0 / dt, -0.5 / dt),
    }
}

impl<'a> ImexStepper<'a> {
    /// Sets up the stepper at `t = 0` from the steady Stokes solution of the data at `t = 0`
    /// and factorises the first step's matrix.
    ///
    /// # Errors
    /// [`StepError::InvalidTimeStep`]; [`StepError::Solve`] for invalid data, a failed
    /// factorisation or a missed residual target.
    pub fn new(
        mesh: &'a Mesh,
        problem: UnsteadyProblem<'a>,
        params: ImexParams,
    ) -> Result<Self, StepError> {
        Self::start(mesh, problem, params, None)
    }

    /// Like [`ImexStepper::new`], but starts from `initial` (velocity per mesh node, pressure
    /// per vertex) instead of the steady Stokes solution; `initial` should satisfy the
    /// boundary data at `t = 0`.
    ///
    /// # Errors
    /// As [`ImexStepper::new`], plus [`StepError::InitialField`] when `initial` does not
    /// match the mesh.
    pub fn with_initial_field(
        mesh: &'a Mesh,
        problem: UnsteadyProblem<'a>,
        params: ImexParams,
        initial: FlowField,
    ) -> Result<Self, StepError> {
        if initial.velocity.len() != mesh.nodes.len() || initial.pressure.len() != mesh.n_vertices {
            return Err(StepError::InitialField {
                velocity: initial.velocity.len(),
                pressure: initial.pressure.len(),
                nodes: mesh.nodes.len(),
                vertices: mesh.n_vertices,
            });
        }
        Self::start(mesh, problem, params, Some(initial))
    }

    fn start(
        mesh: &'a Mesh,
        problem: UnsteadyProblem<'a>,
        params: ImexParams,
        initial: Option<FlowField>,
    ) -> Result<Self, StepError> {
        if !(params.dt > 0.0 && params.dt.is_finite()) {
            return Err(StepError::InvalidTimeStep { dt: params.dt });
        }
        let start = Instant::now();
        let stokes = StokesProblem {
            viscosity: problem.viscosity,
            conditions: problem.conditions,
            body_force: problem.body_force,
            viscous_form: problem.viscous_form,
            time: 0.0,
        };
        let (pattern, _) = build_pattern(mesh, &stokes, &params.solver)?;
        let linear = params.solver.linear();
        // Every step solves with the step matrix's factor (measured: docs/performance.md, "Memory
        // bandwidth and the IMEX step").
        let symbolic =
            super::analyse_for_mesh(&pattern, mesh, linear.kind, params.solver.ordering)?
                .for_repeated_solves();
        let matrix = super::assemble_stokes(&pattern, mesh, &stokes, params.solver.parallelism)?;
        let (current, factor) = match initial {
            Some(field) => (field, NumericFactor::placeholder()),
            None => {
                let factor = symbolic.factorize(&pattern, &matrix.values, &linear)?;
                let rhs = &matrix.rhs;
                let (x, _) = symbolic.solve(&pattern, &matrix.values, &factor, rhs, &linear)?;
                (expand_field(mesh, pattern.dofs(), &x), factor)
            }
        };
        let gather = LoadGather::new(&pattern, mesh);
        let cell_diameter = (0..mesh.n_cells()).map(|c| mesh.longest_edge(c)).collect();
        let lifting = LiftingCells::new(mesh, &pattern);
        let pattern_pins_pressure = pattern.dofs().pinned_pressure().is_some();
        let boundary_speed = largest_fixed_speed(&pattern);
        let mut stepper = ImexStepper {
            mesh,
            problem,
            params,
            pattern,
            symbolic,
            linear,
            factor,
            matrix,
            residual_matrix: CompactMatrix::default(),
            factored_order: 0,
            lifting,
            boundary_depends_on_time: uses_time(problem.conditions),
            boundary_speed,
            cell_diameter,
            pressure_mean: pattern_pins_pressure.then(|| PressureMean::new(mesh)),
            step: 0,
            time: 0.0,
            derivative: vec![[0.0; 2]; current.velocity.len()],
            current,
            previous: None,
            rhs: Vec::new(),
            gather,
            loads: Vec::new(),
            timings: StepTimings::default(),
        };
        stepper.factor_step_matrix(1)?;
        stepper.timings.setup = start.elapsed();
        Ok(stepper)
    }

    /// The current state `uⁿ`, `pⁿ` (kinematic pressure).
    pub fn field(&self) -> &FlowField {
        &self.current
    }

    /// The current time `tⁿ`.
    pub fn time(&self) -> f64 {
        self.time
    }

    /// Steps taken so far.
    pub fn steps(&self) -> usize {
        self.step
    }

    /// Number of unknowns of the linear system.
    pub fn n_unknowns(&self) -> usize {
        self.pattern.n()
    }

    /// Stored entries of the `LDLᵀ` factor of the step matrix (`None` with LU).
    pub fn factor_entries(&self) -> Option<usize> {
        self.symbolic.factor_entries()
    }

    /// Nonzeros of the step matrix's `L` (see [`SymbolicSystem::factor_nonzeros`]).
    pub fn factor_nonzeros(&self) -> Option<usize> {
        self.symbolic.factor_nonzeros()
    }

    /// Time spent per stage so far.
    pub fn timings(&self) -> StepTimings {
        self.timings
    }

    /// The BDF approximation of `∂_t u` that the last step used, per mesh node (zero before
    /// the first step): the time derivative for the volume form of forces.
    pub fn time_derivative(&self) -> &[[f64; 2]] {
        &self.derivative
    }

    /// Advances one step, to `tⁿ⁺¹ = tⁿ + Δt`.
    ///
    /// # Errors
    /// [`StepError::LayoutChanged`] when the boundary conditions at the new time fix other
    /// nodes; [`StepError::Solve`] for non-finite data or a failed solve;
    /// [`StepError::BlowUp`] when the new state is not finite or too fast (the stepper then
    /// keeps the previous state).
    pub fn step(&mut self) -> Result<StepInfo, StepError> {
        let order = if self.step == 0 { 1 } else { 2 };
        if order != self.factored_order {
            let start = Instant::now();
            self.factor_step_matrix(order)?;
            self.timings.setup += start.elapsed();
        }
        let time = self.time + self.params.dt;
        let start = Instant::now();
        if self.boundary_depends_on_time {
            let constraints = resolve_boundary(self.mesh, self.problem.conditions, time)?;
            if !self.pattern.update_fixed_values(&constraints.nodes) {
                return Err(StepError::LayoutChanged { time });
            }
            self.boundary_speed = largest_fixed_speed(&self.pattern);
        }
        self.assemble_rhs(order, time)?;
        self.timings.rhs += start.elapsed();
        let start = Instant::now();
        let (x, refinement) = self.symbolic.solve_symmetric(
            &self.residual_matrix,
            &self.factor,
            &self.rhs,
            &self.linear,
        )?;
        self.timings.solve += start.elapsed();
        let next = expand_field_with(self.pattern.dofs(), &x, self.pressure_mean.as_ref());
        let (courant, max_speed) = self.courant(&next);
        let info = StepInfo {
            step: self.step + 1,
            time,
            order,
            courant,
            max_speed,
            relative_residual: refinement.relative_residual,
            refinement_steps: refinement.steps,
        };
        self.check_growth(&next, &info)?;
        self.update_derivative(order, &next);
        self.previous = Some(std::mem::replace(&mut self.current, next));
        self.step += 1;
        self.time = time;
        Ok(info)
    }

    /// Assembles the step matrix of BDF `order` and factorises it into the stepper's factor
    /// storage (that of the start-up Stokes solve, when there was one).
    fn factor_step_matrix(&mut self, order: usize) -> Result<(), SolveError> {
        let (a0, _, _) = bdf_coefficients(order, self.params.dt);
        let (mesh, problem) = (self.mesh, self.problem);
        assemble_into(
            &self.pattern,
            mesh,
            self.params.solver.parallelism,
            &mut self.matrix,
            |cell, local| step_local_matrix(mesh, problem, a0, cell, local),
        );
        self.lifting.assemble(mesh, problem, a0);
        if self.matrix.dropped_entries > 0 {
            return Err(SolveError::PatternMismatch { dropped: self.matrix.dropped_entries });
        }
        let values = &self.matrix.values;
        self.symbolic.refactorize(&self.pattern, values, &self.linear, &mut self.factor)?;
        self.residual_matrix = CompactMatrix::of(&self.pattern, values);
        self.factored_order = order;
        Ok(())
    }

    /// The right-hand side of the step to `time`: history, explicit convection, body force,
    /// minus the step matrix applied to the boundary values at `time`.
    fn assemble_rhs(&mut self, order: usize, time: f64) -> Result<(), SolveError> {
        let (_, b1, b2) = bdf_coefficients(order, self.params.dt);
        let current = &self.current.velocity;
        let force_closure = super::body_force_at(self.problem.body_force, time);
        let inputs = StepLoadInputs {
            mesh: self.mesh,
            pattern: &self.pattern,
            lifting: &self.lifting,
            current,
            previous: self.previous.as_ref().map_or(current, |p| &p.velocity),
            history: (b1, b2),
            extrapolation: self.problem.convection.then_some(match order {
                1 => (1.0, 0.0),
                _ => (2.0, -1.0),
            }),
            force: force_closure.as_deref(),
        };
        assemble_vector_into(
            &self.gather,
            self.mesh,
            self.params.solver.parallelism,
            &mut self.loads,
            &mut self.rhs,
            |first, loads| {
                let batches = loads.chunks_mut(EXPLICIT_BATCH).enumerate();
                batches.for_each(|(k, batch)| inputs.fill(first + k * EXPLICIT_BATCH, batch));
            },
        );
        if self.rhs.iter().any(|v| !v.is_finite()) {
            return Err(SolveError::NonFiniteBodyForce);
        }
        Ok(())
    }

    /// Stores the BDF derivative `a₀ uⁿ⁺¹ − b₁ uⁿ − b₂ uⁿ⁻¹` of the accepted state `next`.
    fn update_derivative(&mut self, order: usize, next: &FlowField) {
        let (a0, b1, b2) = bdf_coefficients(order, self.params.dt);
        let current = &self.current.velocity;
        let previous = self.previous.as_ref().map_or(current, |p| &p.velocity);
        self.derivative.par_iter_mut().with_min_len(4096).enumerate().for_each(|(n, d)| {
            for c in 0..2 {
                d[c] = a0 * next.velocity[n][c] - b1 * current[n][c] - b2 * previous[n][c];
            }
        });
    }

    /// Courant number and largest nodal speed of `field` (infinite when a velocity is not
    /// finite). Speeds as `√(u² + v²)`, once per cell; both are maxima, so the parallel
    /// reduction gives the serial result.
    fn courant(&self, field: &FlowField) -> (f64, f64) {
        let velocity = &field.velocity;
        if velocity.par_iter().any(|u| !(u[0].is_finite() && u[1].is_finite())) {
            return (f64::INFINITY, f64::INFINITY);
        }
        let dt = self.params.dt;
        self.mesh
            .cells
            .par_iter()
            .zip(&self.cell_diameter)
            .with_min_len(4096)
            .map(|(nodes, diameter)| {
                let squared = nodes
                    .iter()
                    .map(|&n| velocity[n][0] * velocity[n][0] + velocity[n][1] * velocity[n][1])
                    .fold(0.0, f64::max);
                let speed = squared.sqrt();
                (speed * dt / diameter, speed)
            })
            .reduce(|| (0.0, 0.0), |a, b| (a.0.max(b.0), a.1.max(b.1)))
    }

    /// Fails when the new state is not finite or faster than the blow-up limit.
    fn check_growth(&self, next: &FlowField, info: &StepInfo) -> Result<(), StepError> {
        let limit = self.params.blow_up_factor * self.params.speed_scale.max(self.boundary_speed);
        let finite = info.max_speed.is_finite() && next.pressure.iter().all(|p| p.is_finite());
        if !finite || info.max_speed > limit {
            return Err(StepError::BlowUp {
                step: info.step,
                time: info.time,
                max_speed: info.max_speed,
                limit,
                courant: info.courant,
            });
        }
        Ok(())
    }
}

/// The largest speed among the velocities the pattern prescribes (0 without any).
fn largest_fixed_speed(pattern: &SystemPattern) -> f64 {
    pattern.dofs().fixed_velocities().map(|v| v[0].hypot(v[1])).fold(0.0, f64::max)
}

/// Whether a prescribed velocity among `conditions` uses `t`.
fn uses_time(conditions: &[BoundaryCondition]) -> bool {
    conditions.iter().any(|c| match c {
        BoundaryCondition::Velocity { ux, uy } => ux.depends_on_time() || uy.depends_on_time(),
        BoundaryCondition::NoSlip | BoundaryCondition::Outflow | BoundaryCondition::Slip => false,
    })
}

/// The local step matrix `[[a₀ M + A, Bᵀ], [B, 0]]` of `cell` (no load).
fn step_local_matrix(
    mesh: &Mesh,
    problem: UnsteadyProblem,
    a0: f64,
    cell: usize,
    local: &mut LocalSystem,
) {
    let tri = AffineTriangle::new(mesh.cell_vertices(cell));
    stokes_local_system(&tri, problem.viscosity, problem.viscous_form, None, local);
    add_mass_block(&tri, a0, local);
}

/// What the local loads of one step's right-hand side are made of.
struct StepLoadInputs<'s> {
    mesh: &'s Mesh,
    pattern: &'s SystemPattern,
    lifting: &'s LiftingCells,
    /// Velocities `uⁿ` and `uⁿ⁻¹` per node.
    current: &'s [[f64; 2]],
    previous: &'s [[f64; 2]],
    /// `(b₁, b₂)`: the history is `b₁ uⁿ + b₂ uⁿ⁻¹`.
    history: (f64, f64),
    /// The convecting velocity `s₁ uⁿ + s₂ uⁿ⁻¹`, none without convection.
    extrapolation: Option<(f64, f64)>,
    force: Option<&'s (dyn Fn(f64, f64) -> [f64; 2] + Sync)>,
}

impl StepLoadInputs<'_> {
    /// Nodal values `s1 uⁿ + s2 uⁿ⁻¹` of the cell with `nodes`.
    fn combine(&self, nodes: &[usize; 6], (s1, s2): (f64, f64)) -> [[f64; 2]; 6] {
        std::array::from_fn(|k| {
            let (u, v) = (self.current[nodes[k]], self.previous[nodes[k]]);
            [s1 * u[0] + s2 * v[0], s1 * u[1] + s2 * v[1]]
        })
    }

    /// The inputs of the explicit load of `cell`.
    fn cell(&self, cell: usize) -> ExplicitCell {
        let nodes = &self.mesh.cells[cell];
        ExplicitCell {
            tri: AffineTriangle::new(self.mesh.cell_vertices(cell)),
            history: self.combine(nodes, self.history),
            extrapolated: self.extrapolation.map_or([[0.0; 2]; 6], |s| self.combine(nodes, s)),
        }
    }

    /// Overwrites `loads` (at most [`EXPLICIT_BATCH`]) with the lifted local loads of the
    /// cells from `first` on: vectorised across the cells without a body force, one cell at
    /// a time with one.
    fn fill(&self, first: usize, loads: &mut [[f64; LOCAL_SIZE]]) {
        let mut cells = [ExplicitCell::ZERO; EXPLICIT_BATCH];
        for (c, cell) in cells.iter_mut().zip(first..first + loads.len()) {
            *c = self.cell(cell);
        }
        let cells = &cells[..loads.len()];
        let mut velocity = [[0.0; LOCAL_VELOCITY]; EXPLICIT_BATCH];
        if self.force.is_none() {
            explicit_step_loads(cells, &mut velocity);
        }
        for ((cell, c), (load, v)) in (first..).zip(cells).zip(loads.iter_mut().zip(&velocity)) {
            *load = [0.0; LOCAL_SIZE];
            match self.force {
                None => load[..LOCAL_VELOCITY].copy_from_slice(v),
                Some(_) => {
                    add_explicit_step_load(&c.tri, &c.history, &c.extrapolated, self.force, load)
                }
            }
            if let Some(matrix) = self.lifting.matrix(cell) {
                let dofs = self.pattern.dofs().cell_dofs(&self.mesh.cells[cell]);
                lift_fixed_values(matrix, &dofs, load);
            }
        }
    }
}

/// The cells with eliminated (prescribed) values and their local step matrices, which lift
/// those values into every step's right-hand side. The matrices depend on the mesh and `a₀`
/// only, so they are computed with each factorisation instead of each step.
struct LiftingCells {
    /// Position in `matrices` of each cell's matrix; `u32::MAX` for a cell with no
    /// eliminated value.
    slot: Vec<u32>,
    cells: Vec<usize>,
    matrices: Vec<[[f64; LOCAL_SIZE]; LOCAL_SIZE]>,
}

impl LiftingCells {
    /// The cells of `mesh` with an eliminated value in `pattern`'s dof layout (matrices
    /// still to be assembled).
    fn new(mesh: &Mesh, pattern: &SystemPattern) -> Self {
        let mut slot = vec![u32::MAX; mesh.n_cells()];
        let mut cells = Vec::new();
        for (c, nodes) in mesh.cells.iter().enumerate() {
            let dofs = pattern.dofs().cell_dofs(nodes);
            if dofs.iter().any(|d| matches!(d, ComponentDof::Fixed(_))) {
                // Fits: LoadGather::new, built for the same mesh, asserts a smaller cell count.
                slot[c] = cells.len() as u32;
                cells.push(c);
            }
        }
        LiftingCells { slot, cells, matrices: Vec::new() }
    }

    /// Computes the step matrices of BDF coefficient `a0` (in parallel).
    fn assemble(&mut self, mesh: &Mesh, problem: UnsteadyProblem, a0: f64) {
        self.matrices = self
            .cells
            .par_iter()
            .map(|&c| {
                let mut local = LocalSystem::default();
                step_local_matrix(mesh, problem, a0, c, &mut local);
                local.matrix
            })
            .collect();
    }

    /// The step matrix of `cell`, when it has eliminated values.
    fn matrix(&self, cell: usize) -> Option<&[[f64; LOCAL_SIZE]; LOCAL_SIZE]> {
        self.matrices.get(*self.slot.get(cell)? as usize)
    }
}

/// Subtracts the local step `matrix` applied to the cell's eliminated values (in `dofs`)
/// from `load`.
fn lift_fixed_values(
    matrix: &[[f64; LOCAL_SIZE]; LOCAL_SIZE],
    dofs: &[ComponentDof; LOCAL_SIZE],
    load: &mut [f64; LOCAL_SIZE],
) {
    for (j, d) in dofs.iter().enumerate() {
        if let ComponentDof::Fixed(value) = *d
            && value != 0.0
        {
            for (i, l) in load.iter_mut().enumerate() {
                *l -= matrix[i][j] * value;
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn boundary_data_use_time_only_through_a_prescribed_velocity_with_t() {
        let steady = BoundaryCondition::Velocity {
            ux: ScalarExpr::parse("4*y*(1-y)").unwrap(),
            uy: ScalarExpr::constant(0.0),
        };
        let ramped = BoundaryCondition::Velocity {
            ux: ScalarExpr::constant(0.0),
            uy: ScalarExpr::parse("sin(t) * x").unwrap(),
        };
        let walls =
            [BoundaryCondition::NoSlip, BoundaryCondition::Slip, BoundaryCondition::Outflow];
        assert!(!uses_time(&walls));
        assert!(!uses_time(&[walls.as_slice(), std::slice::from_ref(&steady)].concat()));
        assert!(uses_time(&[steady, ramped]));
    }

    #[test]
    fn bdf_coefficients_are_consistent() {
        // A consistent difference formula is exact for constants (a₀ = b₁ + b₂) and for
        // u(t) = t with t₁ = Δt, t₀ = 0, t₋₁ = −Δt: a₀ t₁ − b₁ t₀ − b₂ t₋₁ = 1.
        for order in [1, 2] {
            let dt = 0.1;
            let (a0, b1, b2) = bdf_coefficients(order, dt);
            assert!((a0 - b1 - b2).abs() < 1e-12);
            assert!((a0 * dt - b2 * (-dt) - 1.0).abs() < 1e-12);
        }
    }
}
