//! Forces exerted by the fluid on a boundary part, in two forms, and their coefficients.
//!
//! Takes a mesh, a flow field, the fluid constants and a part id; returns a [`Force`] split
//! into pressure and viscous parts. [`coefficients`] turns a force into drag and lift
//! coefficients.
//!
//! **Surface form.** `F = −∫_S σ n_Ω dS = ρ ∫_S p n_Ω dS − ρ ∫_S S n_Ω dS` with
//! `S = ν∇u` or `2ν ε(u)` and `n_Ω` the normal out of the fluid. The gradients are taken
//! from the cell that owns each edge; a 3-point Gauss rule per edge (exact to degree 5) is
//! exact for the P2–P1 integrand, which is linear along the edge.
//!
//! **Volume (weak-residual) form.** Testing the momentum equation
//! `∂_t u + (b·∇)u − div(σ/ρ) = f` with a P2 vector field `w` and integrating by parts gives
//! `R(w) := (∂_t u, w) + ((b·∇)u, w) + a(u, w) − (p, div w) − (f, w) = ∫_∂Ω (σ/ρ) n_Ω · w`,
//! with `a(u, w) = ν(∇u, ∇w)` or `2ν(ε(u), ε(w))`. Take `w_k = e_k ψ_S`, where `ψ_S` is the
//! P2 function equal to 1 at **every node of the part's edges, end nodes included**, and 0
//! at all other nodes. Its trace is 1 on the part, so `F_k = −ρ R(w_k)` — except that at an
//! end node shared with another part, `ψ_S` is also non-zero on the neighbouring boundary
//! edges. [`EndNodeRule::SubtractNeighbourTraction`] (the default) removes that spill-over by
//! adding back `ρ ∫_{∂Ω∖S} (σ/ρ) n_Ω · w_k` over those few edges, evaluated like the surface
//! form; [`EndNodeRule::Raw`] keeps the plain residual. On a closed body (no end nodes) both
//! rules give the same number and no surface integral is used at all.
//!
//! **Sign.** `F` is the force of the fluid on the body or wall, `F = −∫_S σ n_Ω dS`; the
//! volume form follows from the identity above with the same sign, `F_k = −ρ R(w_k)`. For
//! plane Poiseuille flow `u = 4U y(H − y)/H²` in `+x`, both walls feel
//! `F_x = +ρ (4νU/H) L` (the flow drags them downstream), and the bottom wall feels
//! `F_y = −ρ ∫ p dx` (pressed outwards, away from the fluid), the top wall `+ρ ∫ p dx`. For
//! a cylinder in a `+x` stream the drag `F_x` is positive, as in Schäfer & Turek (1996).
//!
//! **Consistency with the solver.** The volume form is most accurate when `R` is the
//! solver's own discrete residual, which vanishes for every `w` that is zero on the boundary.
//! This module uses the plain convective form `((b·∇)u, w)`; a solver that discretises
//! convection differently (e.g. skew-symmetrically) gets a force that differs by that
//! form's consistency error on the cells next to the part.
//!
//! # References
//! V. John, G. Matthies, Int. J. Numer. Meth. Fluids 37 (2001) 885–903, and V. John,
//! Int. J. Numer. Meth. Fluids 44 (2004) 777–788 (volume form of drag and lift).
//! M. Schäfer, S. Turek, Notes Numer. Fluid Mech. 52 (1996) 547–566 (coefficients).

use std::fmt;

use super::{
    EdgeFrame, FluidProperties, PostError, cell_triangle, check_field, check_nodal, check_part,
    pressure_at, traction_parts, velocity_at, velocity_gradient, viscous_stress,
};
use crate::fem::FlowField;
use crate::fem::quadrature::{gauss_legendre_unit_3, triangle_rule};
use crate::fem::shape::{AffineTriangle, p2_gradients, p2_values};
use crate::geometry::{PartId, Point};
use crate::mesh::Mesh;

/// Force exerted by the fluid on a boundary part (per unit depth), in the mesh axes.
///
/// `total = pressure + viscous + inertial`. Only `total` is the same physical quantity in
/// both forms: the volume form's parts are its volume terms, e.g. its `pressure` part
/// `ρ(p, div w)` also contains `−ρ(∇p, w)` over the cells next to the part, which the
/// viscous term balances. Compare the splits only within one form.
#[derive(Clone, Debug, Default, PartialEq, serde::Serialize)]
pub struct Force {
    /// Pressure part `ρ ∫ p n_Ω` (surface form) or `ρ (p, div w)` (volume form).
    pub pressure: [f64; 2],
    /// Viscous part `−ρ ∫ S n_Ω` (surface form) or `−ρ a(u, w)` (volume form).
    pub viscous: [f64; 2],
    /// Volume form only: `−ρ [(∂_t u, w) + ((b·∇)u, w) − (f, w)]`; zero for the surface form.
    pub inertial: [f64; 2],
    pub total: [f64; 2],
}

/// What happens at end nodes of the part that are shared with another part.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
#[non_exhaustive]
pub enum EndNodeRule {
    /// Subtract the traction on the neighbouring boundary edges weighted by `w_k`.
    #[default]
    SubtractNeighbourTraction,
    /// Keep the plain residual `−ρ R(w_k)`, which includes that spill-over.
    Raw,
}

/// Optional terms of the volume form. The default is the steady Stokes residual with `f = 0`.
#[derive(Clone, Copy, Default)]
pub struct VolumeForceTerms<'a> {
    /// Convecting velocity `b` per mesh node (usually the velocity itself): adds `((b·∇)u, w)`.
    pub convecting_velocity: Option<&'a [[f64; 2]]>,
    /// Time derivative `∂_t u` per mesh node (e.g. a difference quotient): adds `(∂_t u, w)`.
    pub time_derivative: Option<&'a [[f64; 2]]>,
    /// Body force per unit mass `f(x, y)`: adds `−(f, w)`.
    pub body_force: Option<&'a (dyn Fn(Point) -> [f64; 2] + Sync)>,
    /// Treatment of end nodes shared with other parts.
    pub end_nodes: EndNodeRule,
}

impl fmt::Debug for VolumeForceTerms<'_> {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.debug_struct("VolumeForceTerms")
            .field("convecting_velocity", &self.convecting_velocity.map(<[_]>::len))
            .field("time_derivative", &self.time_derivative.map(<[_]>::len))
            .field("body_force", &self.body_force.is_some())
            .field("end_nodes", &self.end_nodes)
            .finish()
    }
}

/// Reference scales of the coefficients.
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize)]
pub struct ReferenceScales {
    /// Density `ρ`.
    pub density: f64,
    /// Reference velocity `U` (the Schäfer–Turek benchmark uses the mean inflow velocity).
    pub velocity: f64,
    /// Reference length `L` (the cylinder diameter, the chord, the side of a square).
    pub length: f64,
}

impl ReferenceScales {
    /// The density and the reference velocity and length of a case.
    pub fn of_case(case: &crate::case::Case) -> Self {
        ReferenceScales {
            density: case.fluid.density,
            velocity: case.fluid.reference_velocity,
            length: case.fluid.reference_length,
        }
    }
}

/// A case's body force at time `t` as the closure [`VolumeForceTerms::body_force`] takes
/// (use `.as_deref()`), or `None` when the case has none.
pub fn case_body_force(
    case: &crate::case::Case,
    t: f64,
) -> Option<Box<dyn Fn(Point) -> [f64; 2] + Sync + '_>> {
    let [fx, fy] = case.body_force.as_ref()?;
    Some(Box::new(move |p: Point| [fx.eval(p[0], p[1], t), fy.eval(p[0], p[1], t)]))
}

/// Drag and lift coefficients: drag is the `+x` component, lift the `+y` component of the
/// force (align the mesh with the free stream, or rotate the force, to get wind axes).
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct ForceCoefficients {
    /// `c_D = 2 F_x / (ρ U² L)`.
    pub drag: f64,
    /// `c_L = 2 F_y / (ρ U² L)`.
    pub lift: f64,
}

/// Force on `part` by the surface form `F = −∫_S σ n_Ω dS` (see the module docs).
///
/// # Errors
/// [`PostError`] when the field does not match the mesh, the fluid constants are invalid, the
/// part is unknown or empty, or a boundary edge is not an edge of its cell.
pub fn surface_force(
    mesh: &Mesh,
    field: &FlowField,
    fluid: &FluidProperties,
    part: PartId,
) -> Result<Force, PostError> {
    surface_force_on_parts(mesh, field, fluid, &[part])
}

/// Force on the union of `parts` (e.g. the upper and lower sides of a profile) by the surface
/// form; equal to the sum of the parts' surface forces.
///
/// # Errors
/// As [`surface_force`], plus [`PostError::NoParts`] for an empty list.
pub fn surface_force_on_parts(
    mesh: &Mesh,
    field: &FlowField,
    fluid: &FluidProperties,
    parts: &[PartId],
) -> Result<Force, PostError> {
    check_field(mesh, field)?;
    fluid.validate()?;
    let in_set = part_set(mesh, parts)?;
    let mut force = Force::default();
    for (index, be) in mesh.boundary_edges.iter().enumerate() {
        if !in_set.get(be.part).copied().unwrap_or(false) {
            continue;
        }
        let frame = EdgeFrame::new(mesh, index)?;
        for (s, w) in gauss_legendre_unit_3() {
            let (tp, tv) = traction_parts(mesh, field, fluid, &frame, s);
            let weight = fluid.density * w * frame.length;
            for k in 0..2 {
                force.pressure[k] -= weight * tp[k];
                force.viscous[k] -= weight * tv[k];
            }
        }
    }
    force.total = [force.pressure[0] + force.viscous[0], force.pressure[1] + force.viscous[1]];
    Ok(force)
}

/// Force on `part` by the volume (weak-residual) form `F_k = −ρ R(w_k)` (see the module docs
/// for `R`, `w_k` and the end-node rule).
///
/// With `terms` empty this is the steady Stokes residual; the Navier–Stokes solver passes
/// the convecting velocity, and time steppers the time derivative.
///
/// # Errors
/// As [`surface_force`], plus [`PostError::FieldLength`] / [`PostError::NonFinite`] for the
/// optional nodal fields in `terms`.
///
/// # References
/// V. John, G. Matthies (2001); V. John (2004), see the module docs.
pub fn volume_force(
    mesh: &Mesh,
    field: &FlowField,
    fluid: &FluidProperties,
    part: PartId,
    terms: &VolumeForceTerms<'_>,
) -> Result<Force, PostError> {
    volume_force_on_parts(mesh, field, fluid, &[part], terms)
}

/// Force on the union of `parts` by the volume form, with `ψ_S = 1` at every node of every
/// listed part (so nodes shared between listed parts are not end nodes). Use this, not the
/// sum of per-part volume forces, for a body made of several parts.
///
/// # Errors
/// As [`volume_force`], plus [`PostError::NoParts`] for an empty list.
pub fn volume_force_on_parts(
    mesh: &Mesh,
    field: &FlowField,
    fluid: &FluidProperties,
    parts: &[PartId],
    terms: &VolumeForceTerms<'_>,
) -> Result<Force, PostError> {
    check_field(mesh, field)?;
    fluid.validate()?;
    let in_set = part_set(mesh, parts)?;
    if let Some(b) = terms.convecting_velocity {
        check_nodal(mesh, b, "convecting velocity")?;
    }
    if let Some(dt) = terms.time_derivative {
        check_nodal(mesh, dt, "time derivative")?;
    }
    let marked = part_nodes(mesh, &in_set);
    let mut force = Force::default();
    for cell in 0..mesh.n_cells() {
        if mesh.cells[cell].iter().any(|&n| marked[n]) {
            add_cell_residual(mesh, field, fluid, terms, &marked, cell, &mut force);
        }
    }
    if terms.end_nodes == EndNodeRule::SubtractNeighbourTraction {
        add_neighbour_traction(mesh, field, fluid, &in_set, &marked, &mut force)?;
    }
    for k in 0..2 {
        force.total[k] = force.pressure[k] + force.viscous[k] + force.inertial[k];
    }
    Ok(force)
}

/// Drag and lift coefficients `c = 2F / (ρ U² L)` of `force.total`.
///
/// # Errors
/// [`PostError::InvalidParameter`] when a reference scale is not positive and finite.
///
/// # References
/// Schäfer & Turek (1996), benchmark definition of `c_D` and `c_L`.
pub fn coefficients(
    force: &Force,
    scales: &ReferenceScales,
) -> Result<ForceCoefficients, PostError> {
    for (name, value) in [
        ("reference density", scales.density),
        ("reference velocity", scales.velocity),
        ("reference length", scales.length),
    ] {
        if !(value.is_finite() && value > 0.0) {
            return Err(PostError::InvalidParameter {
                name,
                value,
                reason: "must be positive and finite",
            });
        }
    }
    let q = 0.5 * scales.density * scales.velocity * scales.velocity * scales.length;
    Ok(ForceCoefficients { drag: force.total[0] / q, lift: force.total[1] / q })
}

/// Membership mask over all part ids; checks that each listed part exists and is non-empty.
fn part_set(mesh: &Mesh, parts: &[PartId]) -> Result<Vec<bool>, PostError> {
    if parts.is_empty() {
        return Err(PostError::NoParts);
    }
    let mut in_set = vec![false; mesh.part_names.len()];
    for &part in parts {
        check_part(mesh, part)?;
        in_set[part] = true;
    }
    Ok(in_set)
}

/// `true` for every mesh node (vertex or midpoint) on an edge of a part in the set.
fn part_nodes(mesh: &Mesh, in_set: &[bool]) -> Vec<bool> {
    let mut marked = vec![false; mesh.nodes.len()];
    for be in mesh.boundary_edges.iter().filter(|e| in_set.get(e.part).copied().unwrap_or(false)) {
        for &n in &be.nodes {
            marked[n] = true;
        }
    }
    marked
}

/// Adds `−ρ` times the cell's share of `R(w_k)`, for k = x, y, to `force`.
///
/// Exactness: a Dunavant degree-6 rule integrates `a(u, w)` (degree 2), `(p, div w)`
/// (degree 2), `(∂_t u, w)` (degree 4) and `((b·∇)u, w)` (degree 5) exactly.
fn add_cell_residual(
    mesh: &Mesh,
    field: &FlowField,
    fluid: &FluidProperties,
    terms: &VolumeForceTerms<'_>,
    marked: &[bool],
    cell: usize,
    force: &mut Force,
) {
    let nodes = &mesh.cells[cell];
    let tri = cell_triangle(mesh, cell);
    for &(l, wq) in triangle_rule(6).points {
        let phi = p2_values(l);
        let dphi = p2_gradients(l, &tri.grad_bary);
        let (mut psi, mut gpsi) = (0.0, [0.0; 2]);
        for (i, &n) in nodes.iter().enumerate() {
            if marked[n] {
                psi += phi[i];
                gpsi[0] += dphi[i][0];
                gpsi[1] += dphi[i][1];
            }
        }
        let g = velocity_gradient(&field.velocity, nodes, &tri, l);
        let sv = viscous_stress(g, fluid.viscosity, fluid.form);
        let p = pressure_at(&field.pressure, nodes, l);
        let rest = inertial_density(terms, nodes, &tri, l, g);
        let weight = fluid.density * wq * tri.area;
        for k in 0..2 {
            force.pressure[k] += weight * p * gpsi[k];
            force.viscous[k] -= weight * (sv[k][0] * gpsi[0] + sv[k][1] * gpsi[1]);
            force.inertial[k] -= weight * rest[k] * psi;
        }
    }
}

/// `∂_t u + (b·∇)u − f` at one point (the parts of the residual that multiply `w`).
fn inertial_density(
    terms: &VolumeForceTerms<'_>,
    nodes: &[usize; 6],
    tri: &AffineTriangle,
    l: [f64; 3],
    g: [[f64; 2]; 2],
) -> [f64; 2] {
    let mut r = [0.0; 2];
    if let Some(b) = terms.convecting_velocity {
        let bq = velocity_at(b, nodes, l);
        r[0] += bq[0] * g[0][0] + bq[1] * g[0][1];
        r[1] += bq[0] * g[1][0] + bq[1] * g[1][1];
    }
    if let Some(dt) = terms.time_derivative {
        let d = velocity_at(dt, nodes, l);
        r[0] += d[0];
        r[1] += d[1];
    }
    if let Some(f) = terms.body_force {
        let fq = f(tri.point(l));
        r[0] -= fq[0];
        r[1] -= fq[1];
    }
    r
}

/// Adds `ρ ∫ (σ/ρ) n_Ω · e_k ψ_S` over boundary edges of other parts that touch a marked
/// node, which cancels the spill-over of `w_k` past the part's end nodes.
///
/// Exactness: the traction is linear and the trace of `ψ_S` quadratic along an edge, so the
/// 3-point Gauss rule (degree 5) is exact.
fn add_neighbour_traction(
    mesh: &Mesh,
    field: &FlowField,
    fluid: &FluidProperties,
    in_set: &[bool],
    marked: &[bool],
    force: &mut Force,
) -> Result<(), PostError> {
    for (index, be) in mesh.boundary_edges.iter().enumerate() {
        let [a, b, m] = be.nodes;
        if in_set.get(be.part).copied().unwrap_or(false) || !(marked[a] || marked[b] || marked[m]) {
            continue;
        }
        let frame = EdgeFrame::new(mesh, index)?;
        for (s, w) in gauss_legendre_unit_3() {
            // Trace of ψ_S on the edge: quadratic Lagrange functions of a, b and m.
            let mut psi = 0.0;
            if marked[a] {
                psi += (1.0 - s) * (1.0 - 2.0 * s);
            }
            if marked[b] {
                psi += s * (2.0 * s - 1.0);
            }
            if marked[m] {
                psi += 4.0 * s * (1.0 - s);
            }
            let (tp, tv) = traction_parts(mesh, field, fluid, &frame, s);
            let weight = fluid.density * w * frame.length * psi;
            for k in 0..2 {
                force.pressure[k] += weight * tp[k];
                force.viscous[k] += weight * tv[k];
            }
        }
    }
    Ok(())
}
