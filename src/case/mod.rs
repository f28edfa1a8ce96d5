//! Case files: the TOML description of a flow problem (fluid, domain, mesh controls, boundary
//! conditions, model, output), parsed and validated into typed settings.
//!
//! **Invariant:** every error that bad input can cause is a [`CaseError`] naming the file and,
//! where known, the line, column and key; nothing in this module panics on user input.

pub mod coords;
pub mod error;
pub mod expr;

mod build;
mod raw;

use std::path::{Path, PathBuf};

pub use error::{CaseError, Site};
pub use expr::{ExprError, ScalarExpr};

use crate::fem::ViscousForm;
use crate::geometry::{Domain, PartId, Point};
use crate::mesh::MeshControls;

/// The text of the built-in default case (`examples/profile-channel.toml`).
pub const DEFAULT_CASE_TOML: &str = include_str!("../../examples/profile-channel.toml");

/// A validated flow problem. Part ids index `domain.part_names`; `conditions` and
/// `mesh.part_sizes` are indexed by part id.
#[derive(Clone, Debug)]
pub struct Case {
    pub name: String,
    /// The case file (or a `<built-in …>` marker); messages and relative paths refer to it.
    pub source: PathBuf,
    pub fluid: Fluid,
    pub domain: Domain,
    /// The bodies (holes) in the order of `domain.holes`.
    pub bodies: Vec<Body>,
    pub mesh: MeshControls,
    /// One condition per boundary part.
    pub conditions: Vec<BoundaryCondition>,
    pub model: Model,
    /// Parts on which lift and drag are reported (default: every body's part).
    pub forces: Vec<PartId>,
    pub probes: Vec<Probe>,
    pub pressure_difference: Option<PressureDifference>,
    /// Exact solution for verification cases.
    pub exact: Option<ExactSolution>,
    /// Body force `f = (fx, fy)` per unit mass (kinematic form); `None` means zero.
    pub body_force: Option<[ScalarExpr; 2]>,
    pub output: Output,
}

/// Fluid properties and the reference scales of the force coefficients and Reynolds number.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Fluid {
    /// Density ρ (kg/m³).
    pub density: f64,
    /// Kinematic viscosity ν (m²/s).
    pub kinematic_viscosity: f64,
    /// Reference velocity U (m/s) of `c = 2F/(ρU²L)` and `Re = UL/ν`.
    pub reference_velocity: f64,
    /// Reference length L (m).
    pub reference_length: f64,
}

impl Fluid {
    /// Dynamic viscosity μ = ρν (Pa·s).
    pub fn dynamic_viscosity(&self) -> f64 {
        self.density * self.kinematic_viscosity
    }

    /// Reynolds number `Re = U L / ν`.
    pub fn reynolds_number(&self) -> f64 {
        self.reference_velocity * self.reference_length / self.kinematic_viscosity
    }
}

/// A body (hole in the fluid domain) as declared in the case file.
#[derive(Clone, Debug, PartialEq)]
pub struct Body {
    pub name: String,
    /// The boundary part of the whole body outline.
    pub part: PartId,
    /// The sharp trailing edge of a NACA profile (`None` for other shapes).
    pub trailing_edge: Option<Point>,
}

/// Which equations are solved.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub enum Equations {
    #[default]
    Stokes,
    NavierStokes,
}

/// The flow model: equations, viscous form and (optional) time stepping.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct Model {
    pub equations: Equations,
    pub viscous_form: ViscousForm,
    /// `None` for a steady problem.
    pub time: Option<TimeStepping>,
    /// Controls of the steady nonlinear (Newton) iteration.
    pub nonlinear: NonlinearControls,
}

/// Controls of the steady Navier–Stokes iteration (`[model.nonlinear]`); see
/// `solver::NewtonParams` for their meaning.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct NonlinearControls {
    /// Picard steps before Newton (default 0).
    pub picard_steps: usize,
    /// Most iterations per viscosity (default 30).
    pub max_iterations: usize,
    /// Relative residual target (default 1e-10).
    pub tolerance: f64,
    /// Intermediate viscosities before the target (default 0).
    pub continuation_steps: usize,
    /// First continuation viscosity over the target one (default 10, must exceed 1).
    pub continuation_factor: f64,
}

impl Default for NonlinearControls {
    fn default() -> Self {
        NonlinearControls {
            picard_steps: 0,
            max_iterations: 30,
            tolerance: 1e-10,
            continuation_steps: 0,
            continuation_factor: 10.0,
        }
    }
}

/// Time-stepping controls of an unsteady run.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct TimeStepping {
    /// Time step (s), positive.
    pub dt: f64,
    /// Final time (s), positive; the run covers `[0, t_end]`.
    pub t_end: f64,
    /// Write fields every `write_every` steps (≥ 1).
    pub write_every: usize,
}

/// A named point where the solution is sampled.
#[derive(Clone, Debug, PartialEq)]
pub struct Probe {
    pub name: String,
    pub point: Point,
}

/// A pressure difference `Δp = p(first) − p(second)` to report.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct PressureDifference {
    pub first: Point,
    pub second: Point,
}

/// An exact solution `(u, v, p)` of a verification case (`p` kinematic, i.e. divided by ρ).
#[derive(Clone, Debug)]
pub struct ExactSolution {
    pub u: ScalarExpr,
    pub v: ScalarExpr,
    pub p: ScalarExpr,
}

/// What to write and where.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Output {
    /// Output folder, already resolved against the case file's folder.
    pub directory: PathBuf,
    pub mesh: bool,
    pub solution: bool,
    pub compress: bool,
}

impl Case {
    /// Reads and validates the case file at `path`.
    ///
    /// # Errors
    /// [`CaseError::Read`] when the file cannot be read, otherwise as [`Case::parse`].
    pub fn load(path: &Path) -> Result<Case, CaseError> {
        let text = std::fs::read_to_string(path)
            .map_err(|source| CaseError::Read { path: path.to_path_buf(), source })?;
        Case::parse(&text, path)
    }

    /// Parses and validates case-file text. `origin` is the file the text came from: it names
    /// the file in messages, and relative paths (coordinate files, the output folder) are
    /// resolved against its folder.
    ///
    /// # Errors
    /// A [`CaseError`] naming the file, line, column and key path of the first problem found.
    pub fn parse(text: &str, origin: &Path) -> Result<Case, CaseError> {
        build::build(text, origin)
    }

    /// The built-in default case: a NACA 2412 profile at 6° incidence in a channel
    /// (`examples/profile-channel.toml`). Relative paths resolve against the working folder.
    pub fn default_case() -> Case {
        Case::parse(DEFAULT_CASE_TOML, Path::new("<built-in profile-channel.toml>"))
            .expect("the built-in default case is valid (checked by a unit test)")
    }

    /// Name of boundary part `id`.
    pub fn part_name(&self, id: PartId) -> &str {
        &self.domain.part_names[id]
    }
}

/// A boundary condition attached to a named boundary part.
#[derive(Clone, Debug)]
pub enum BoundaryCondition {
    /// Prescribed velocity `u = (ux(x, y, t), uy(x, y, t))`.
    Velocity { ux: ScalarExpr, uy: ScalarExpr },
    /// No-slip wall: `u = 0`.
    NoSlip,
    /// Natural ("do-nothing") outflow: `ν ∂u/∂n − p n = 0` (gradient form) or
    /// `2ν ε(u) n − p n = 0` (symmetric form).
    Outflow,
    /// Slip wall: zero normal velocity and zero tangential stress.
    Slip,
}

impl BoundaryCondition {
    /// Short name used in tables and messages.
    pub fn kind_name(&self) -> &'static str {
        match self {
            BoundaryCondition::Velocity { .. } => "velocity",
            BoundaryCondition::NoSlip => "no-slip",
            BoundaryCondition::Outflow => "outflow",
            BoundaryCondition::Slip => "slip",
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn default_case_builds_the_profile_channel() {
        let case = Case::default_case();
        assert_eq!(case.name, "profile-channel");
        assert_eq!(case.domain.holes.len(), 1);
        assert_eq!(case.conditions.len(), case.domain.part_names.len());
        let wing = case.domain.part_id("wing").unwrap();
        assert_eq!(case.forces, vec![wing]);
        assert!(matches!(case.conditions[wing], BoundaryCondition::NoSlip));
        // Fluid on the left of every edge: outer counter-clockwise, holes clockwise.
        assert!(case.domain.outer.signed_area() > 0.0);
        assert!(case.domain.holes[0].signed_area() < 0.0);
        // The grading sits at the trailing edge: chord 1 rotated nose-up by 6° about the
        // quarter chord puts it at (0.25 + 0.75 cos 6°, −0.75 sin 6°) (the 2412 camber is 0 at x = 1).
        let g = case.mesh.grading[0].point;
        let a = 6f64.to_radians();
        assert!((g[0] - (0.25 + 0.75 * a.cos())).abs() < 1e-14);
        assert!((g[1] + 0.75 * a.sin()).abs() < 1e-14);
    }
}
