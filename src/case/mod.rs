//! Case files: the TOML description of a flow problem (fluid, domain, mesh controls, boundary
//! conditions, model, output), parsed and validated into typed settings.
//!
//! **Invariant:** every error that bad input can cause is a [`CaseError`] naming the file and,
//! where known, the line, column and key; nothing in this module panics on user input.

pub mod expr;

pub use expr::{ExprError, ScalarExpr};

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
