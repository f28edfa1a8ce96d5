//! Discretisation: Taylor–Hood P2–P1 shape functions, quadrature, degrees of freedom,
//! sparsity pattern and assembly.
//!
//! Equations (kinematic form, `p` is pressure divided by density):
//! `−ν Δu + ∇p = f`, `div u = 0` (Stokes), plus `(u·∇)u` and `∂u/∂t` for Navier–Stokes.

pub mod quadrature;
pub mod shape;

/// How the viscous term is written; it changes what the natural (outflow) condition means.
///
/// * `Gradient`: `ν (∇u, ∇v)`; natural condition `ν ∂u/∂n − p n = 0` ("do-nothing").
/// * `Symmetric`: `2ν (ε(u), ε(v))` with `ε(u) = (∇u + ∇uᵀ)/2`; natural condition
///   `(2ν ε(u) − p I) n = 0` (traction-free).
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub enum ViscousForm {
    #[default]
    Gradient,
    Symmetric,
}

/// A discrete flow field on a [`Mesh`](crate::mesh::Mesh): quadratic velocity at every mesh
/// node and linear (kinematic) pressure at every vertex.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct FlowField {
    /// Velocity `[u, v]` per mesh node (vertices first, then edge midpoints).
    pub velocity: Vec<[f64; 2]>,
    /// Kinematic pressure `p/ρ` per mesh vertex (`mesh.n_vertices` entries).
    pub pressure: Vec<f64>,
}

pub mod assembly;
pub mod convection;
pub mod dofs;
pub mod kernels;
pub mod norms;
