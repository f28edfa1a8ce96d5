//! Post-processing of Taylor–Hood flow fields.
//!
//! Takes a [`FlowField`] (P2 velocity per mesh node, P1 kinematic pressure per vertex) on a
//! [`Mesh`], with the fluid's density, kinematic viscosity and [`ViscousForm`], and returns
//! plain numbers and vectors: surface forces in two forms ([`surface_force`],
//! [`volume_force`]), drag/lift coefficients ([`coefficients`]), wall distributions
//! ([`wall_distribution`]), nodal derived fields (vorticity, speed, pressure, stream function),
//! per-cell divergence errors, and point evaluation ([`PointLocator`]).
//!
//! Conventions used throughout:
//! * the Cauchy stress is `σ = ρ(−p I + ν ∇u)` (gradient form) or `σ = ρ(−p I + 2ν ε(u))`
//!   (symmetric form), with `(∇u)_ij = ∂u_i/∂x_j` and `p` the kinematic pressure;
//! * `n_Ω` is the unit normal pointing **out of the fluid** (into the body or wall); for a
//!   boundary edge `a → b` (fluid on the left) it is the right normal of `a → b`;
//! * the force **exerted by the fluid on a body or wall** is `F = −∫_S σ n_Ω dS`, which is
//!   `∫_S σ n_b dS` with `n_b = −n_Ω` the body's outward normal (pointing into the fluid).
//!   Pressure then pushes the body along `n_Ω`, and a flow in `+x` drags a wall in `+x`.
//!   This is the sign of the Schäfer–Turek drag and lift formulas (positive drag).
//!
//! Geometry is affine: every cell is the straight-sided triangle of its three vertices; the
//! P2 velocity is interpolated on that triangle.
//!
//! **Invariant:** this module does no I/O; it never writes files or prints. The output module
//! turns what it returns into CSV, VTU or JSON.
//!
//! # References
//! M. Schäfer, S. Turek, *Benchmark computations of laminar flow around a cylinder*, Notes on
//! Numerical Fluid Mechanics 52, Vieweg 1996, pp. 547–566 (force and coefficient definitions).
//! V. John, G. Matthies, *Higher-order finite element discretizations in a benchmark problem
//! for incompressible flows*, Int. J. Numer. Meth. Fluids 37 (2001) 885–903 (volume form).

pub mod estimator;
mod fields;
mod forces;
mod probe;
pub mod series;
mod streamfunction;
mod wall;

pub use estimator::{BoundaryResidual, ErrorEstimate, EstimatorInputs, residual_estimate};
pub use fields::{
    DerivedFields, derived_fields, divergence_error, pressure_at_nodes, speed, vorticity,
};
pub use forces::{
    EndNodeRule, Force, ForceCoefficients, ReferenceScales, VolumeForceTerms, case_body_force,
    coefficients, surface_force, surface_force_on_parts, volume_force, volume_force_on_parts,
};
pub use probe::{PointLocator, PointValue, evaluate_in_cell, locate};
pub use series::{
    SignalStats, shedding_frequency, signal_stats, strouhal_number, upward_crossings,
};
pub use streamfunction::{StreamFunctionSolver, stream_function};
pub use wall::{WallReference, WallRow, wall_distribution};

use crate::fem::shape::{AffineTriangle, p2_gradients, p2_values};
use crate::fem::{FlowField, ViscousForm};
use crate::geometry::PartId;
use crate::mesh::Mesh;

/// Material constants and the stress form used by the post-processors.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct FluidProperties {
    /// Density `ρ` (> 0).
    pub density: f64,
    /// Kinematic viscosity `ν` (≥ 0).
    pub viscosity: f64,
    /// Which viscous stress enters the traction: `ν ∇u` or `2ν ε(u)`.
    pub form: ViscousForm,
}

impl FluidProperties {
    /// The density, kinematic viscosity and viscous form of a case.
    pub fn of_case(case: &crate::case::Case) -> Self {
        FluidProperties {
            density: case.fluid.density,
            viscosity: case.fluid.kinematic_viscosity,
            form: case.model.viscous_form,
        }
    }
}

/// Errors of the post-processing stage.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum PostError {
    #[error("{what} has {found} entries but the mesh needs {expected}")]
    FieldLength { what: &'static str, expected: usize, found: usize },
    #[error("{what} entry {index} is not finite")]
    NonFinite { what: &'static str, index: usize },
    #[error("boundary part id {part} does not exist (the mesh has {n_parts} parts)")]
    UnknownPart { part: PartId, n_parts: usize },
    #[error("no boundary part is called `{name}` (known parts: {known})")]
    UnknownPartName { name: String, known: String },
    #[error("boundary part `{name}` has no boundary edges")]
    EmptyPart { name: String },
    #[error("parameter `{name}` = {value} is invalid: {reason}")]
    InvalidParameter { name: &'static str, value: f64, reason: &'static str },
    #[error("boundary edge {edge} ({a}, {b}) is not an edge of its cell {cell}")]
    InconsistentMesh { edge: usize, a: usize, b: usize, cell: usize },
    #[error("point ({x}, {y}) lies outside the mesh")]
    PointOutsideMesh { x: f64, y: f64 },
    #[error("no boundary part was given")]
    NoParts,
    #[error("the mesh has no cells")]
    EmptyMesh,
    #[error("stream-function solve failed: {reason}")]
    StreamFunction { reason: String },
}

impl FluidProperties {
    /// Checks `ρ > 0` and `ν ≥ 0`, both finite.
    ///
    /// # Errors
    /// [`PostError::InvalidParameter`] naming the offending constant.
    pub fn validate(&self) -> Result<(), PostError> {
        if !(self.density.is_finite() && self.density > 0.0) {
            return Err(PostError::InvalidParameter {
                name: "density",
                value: self.density,
                reason: "must be positive and finite",
            });
        }
        if !(self.viscosity.is_finite() && self.viscosity >= 0.0) {
            return Err(PostError::InvalidParameter {
                name: "viscosity",
                value: self.viscosity,
                reason: "must be non-negative and finite",
            });
        }
        Ok(())
    }
}

/// Id of the boundary part called `name`.
///
/// # Errors
/// [`PostError::UnknownPartName`] listing the known part names.
pub fn part_id(mesh: &Mesh, name: &str) -> Result<PartId, PostError> {
    mesh.part_names.iter().position(|n| n == name).ok_or_else(|| PostError::UnknownPartName {
        name: name.to_string(),
        known: mesh.part_names.join(", "),
    })
}

/// Checks that `field` matches `mesh` (one velocity per node, one pressure per vertex) and
/// holds only finite numbers.
///
/// # Errors
/// [`PostError::FieldLength`], [`PostError::NonFinite`] or [`PostError::EmptyMesh`].
pub fn check_field(mesh: &Mesh, field: &FlowField) -> Result<(), PostError> {
    if mesh.cells.is_empty() {
        return Err(PostError::EmptyMesh);
    }
    check_nodal(mesh, &field.velocity, "velocity")?;
    if field.pressure.len() != mesh.n_vertices {
        return Err(PostError::FieldLength {
            what: "pressure",
            expected: mesh.n_vertices,
            found: field.pressure.len(),
        });
    }
    match field.pressure.iter().position(|p| !p.is_finite()) {
        Some(index) => Err(PostError::NonFinite { what: "pressure", index }),
        None => Ok(()),
    }
}

/// Checks a per-node vector field (length and finiteness).
fn check_nodal(mesh: &Mesh, values: &[[f64; 2]], what: &'static str) -> Result<(), PostError> {
    if values.len() != mesh.nodes.len() {
        return Err(PostError::FieldLength {
            what,
            expected: mesh.nodes.len(),
            found: values.len(),
        });
    }
    match values.iter().position(|v| !(v[0].is_finite() && v[1].is_finite())) {
        Some(index) => Err(PostError::NonFinite { what, index }),
        None => Ok(()),
    }
}

/// Checks that `part` exists and owns at least one boundary edge.
fn check_part(mesh: &Mesh, part: PartId) -> Result<(), PostError> {
    if part >= mesh.part_names.len() {
        return Err(PostError::UnknownPart { part, n_parts: mesh.part_names.len() });
    }
    if !mesh.boundary_edges.iter().any(|e| e.part == part) {
        return Err(PostError::EmptyPart { name: mesh.part_names[part].clone() });
    }
    Ok(())
}

/// The straight-sided triangle of cell `c`.
fn cell_triangle(mesh: &Mesh, c: usize) -> AffineTriangle {
    AffineTriangle::new(mesh.cell_vertices(c))
}

/// P2 velocity of `field` in cell `nodes` at barycentric point `l`.
fn velocity_at(field: &[[f64; 2]], nodes: &[usize; 6], l: [f64; 3]) -> [f64; 2] {
    let phi = p2_values(l);
    let mut u = [0.0; 2];
    for (k, &n) in nodes.iter().enumerate() {
        u[0] += phi[k] * field[n][0];
        u[1] += phi[k] * field[n][1];
    }
    u
}

/// Velocity gradient `G[i][j] = ∂u_i/∂x_j` of the P2 field in a cell at barycentric `l`.
fn velocity_gradient(
    field: &[[f64; 2]],
    nodes: &[usize; 6],
    tri: &AffineTriangle,
    l: [f64; 3],
) -> [[f64; 2]; 2] {
    let dphi = p2_gradients(l, &tri.grad_bary);
    let mut g = [[0.0; 2]; 2];
    for (k, &n) in nodes.iter().enumerate() {
        for i in 0..2 {
            for j in 0..2 {
                g[i][j] += field[n][i] * dphi[k][j];
            }
        }
    }
    g
}

/// P1 pressure of `field` in a cell at barycentric `l`.
fn pressure_at(pressure: &[f64], nodes: &[usize; 6], l: [f64; 3]) -> f64 {
    l[0] * pressure[nodes[0]] + l[1] * pressure[nodes[1]] + l[2] * pressure[nodes[2]]
}

/// The viscous stress per unit density: `ν G` (gradient form) or `ν (G + Gᵀ)` (symmetric).
fn viscous_stress(g: [[f64; 2]; 2], viscosity: f64, form: ViscousForm) -> [[f64; 2]; 2] {
    match form {
        ViscousForm::Gradient => {
            [[viscosity * g[0][0], viscosity * g[0][1]], [viscosity * g[1][0], viscosity * g[1][1]]]
        }
        ViscousForm::Symmetric => {
            let off = viscosity * (g[0][1] + g[1][0]);
            [[2.0 * viscosity * g[0][0], off], [off, 2.0 * viscosity * g[1][1]]]
        }
    }
}

/// A boundary edge seen from the cell it belongs to: end points, unit tangent `a → b`, unit
/// normal out of the fluid (the right normal) and the local edge index in the cell.
#[derive(Clone, Copy, Debug)]
struct EdgeFrame {
    cell: usize,
    /// Local edge `k` of the cell runs from local vertex `k` to local vertex `(k + 1) % 3`.
    local: usize,
    a: [f64; 2],
    b: [f64; 2],
    length: f64,
    tangent: [f64; 2],
    normal_out: [f64; 2],
}

impl EdgeFrame {
    /// Frame of boundary edge `index` of `mesh`.
    ///
    /// # Errors
    /// [`PostError::InconsistentMesh`] when the edge is not an edge of its cell.
    fn new(mesh: &Mesh, index: usize) -> Result<Self, PostError> {
        let be = &mesh.boundary_edges[index];
        let [a, b, _] = be.nodes;
        let bad = PostError::InconsistentMesh { edge: index, a, b, cell: be.cell };
        let cell = mesh.cells.get(be.cell).ok_or(bad)?;
        let local = (0..3)
            .find(|&k| cell[k] == a && cell[(k + 1) % 3] == b)
            .ok_or(PostError::InconsistentMesh { edge: index, a, b, cell: be.cell })?;
        let (pa, pb) = (mesh.nodes[a], mesh.nodes[b]);
        let d = [pb[0] - pa[0], pb[1] - pa[1]];
        let length = d[0].hypot(d[1]);
        let tangent = [d[0] / length, d[1] / length];
        Ok(EdgeFrame {
            cell: be.cell,
            local,
            a: pa,
            b: pb,
            length,
            tangent,
            normal_out: [tangent[1], -tangent[0]],
        })
    }

    /// Barycentric coordinates (in the cell) of the edge point `(1 − s) a + s b`.
    fn bary(&self, s: f64) -> [f64; 3] {
        let mut l = [0.0; 3];
        l[self.local] = 1.0 - s;
        l[(self.local + 1) % 3] = s;
        l
    }

    /// The physical point at edge parameter `s`.
    fn point(&self, s: f64) -> [f64; 2] {
        [(1.0 - s) * self.a[0] + s * self.b[0], (1.0 - s) * self.a[1] + s * self.b[1]]
    }
}

/// Traction per unit density on the fluid side, `(σ/ρ) n_Ω`, at edge parameter `s`, split
/// into its pressure part `−p n_Ω` and viscous part `S n_Ω` (`S = ν∇u` or `2ν ε(u)`).
fn traction_parts(
    mesh: &Mesh,
    field: &FlowField,
    fluid: &FluidProperties,
    frame: &EdgeFrame,
    s: f64,
) -> ([f64; 2], [f64; 2]) {
    let nodes = &mesh.cells[frame.cell];
    let tri = cell_triangle(mesh, frame.cell);
    let l = frame.bary(s);
    let p = pressure_at(&field.pressure, nodes, l);
    let g = velocity_gradient(&field.velocity, nodes, &tri, l);
    let sv = viscous_stress(g, fluid.viscosity, fluid.form);
    let n = frame.normal_out;
    ([-p * n[0], -p * n[1]], [sv[0][0] * n[0] + sv[0][1] * n[1], sv[1][0] * n[0] + sv[1][1] * n[1]])
}
