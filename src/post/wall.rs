//! Distributions of pressure coefficient and wall shear along a boundary part.
//!
//! Takes a mesh, a flow field, the fluid constants, a part and reference values; returns one
//! [`WallRow`] per sample point, at edge end points and midpoints, ordered along the
//! boundary chain(s) of the part (the direction in which the fluid lies on the left).
//!
//! For an edge `a → b` with unit tangent `t` and normal `n_Ω` out of the fluid, the traction
//! exerted by the fluid on the wall is `τ_vec = σ n_b = −σ n_Ω` (force per unit area), the
//! wall shear is its tangential component `τ = t · τ_vec = ρν ∂(u·t)/∂n_b` for the gradient
//! form (plus `ρν t·∇uᵀn_b`, which vanishes on a no-slip wall, for the symmetric form), and
//! `C_p = (p − p_ref)/(½ U²)` with kinematic `p`. So `τ > 0` where the near-wall flow runs
//! along `t`. Gradients come from the cell owning each edge; at a vertex shared by two edges
//! of a chain the two one-sided values are averaged.
//!
//! Chains: the part's edges are linked end to start. An open chain starts at an edge whose
//! start vertex ends no edge of the part; a closed chain starts at its edge that comes first
//! in the mesh's boundary-edge order and lists its first point again at the end. Chains are
//! ordered by their first edge in boundary-edge order; the arc length `s` runs on
//! continuously from one chain to the next.

use std::collections::HashMap;

use super::{
    EdgeFrame, FluidProperties, PostError, check_field, check_part, pressure_at, traction_parts,
};
use crate::fem::FlowField;
use crate::geometry::PartId;
use crate::mesh::Mesh;

/// One sample of a wall distribution.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct WallRow {
    /// Index of the boundary chain of the part (0 for a single connected part).
    pub chain: usize,
    /// Arc length from the start of the part's first chain.
    pub s: f64,
    pub x: f64,
    pub y: f64,
    /// `C_p = (p − p_ref)/(½U²)`.
    pub pressure_coefficient: f64,
    /// Tangential traction on the wall along the edge direction, `τ = t·(σ n_b)`.
    pub wall_shear: f64,
    /// Full traction `σ n_b` exerted by the fluid on the wall (force per unit area).
    pub traction: [f64; 2],
}

/// Reference values of a wall distribution.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct WallReference {
    /// Reference velocity `U` of `C_p` (> 0).
    pub velocity: f64,
    /// Reference kinematic pressure `p_ref` (default 0).
    pub pressure: f64,
}

impl WallReference {
    /// Reference velocity `velocity` and `p_ref = 0`.
    pub fn new(velocity: f64) -> Self {
        WallReference { velocity, pressure: 0.0 }
    }
}

/// Samples `C_p`, wall shear and traction along `part` (see the module docs).
///
/// # Errors
/// [`PostError`] when the field does not match the mesh, the fluid constants or reference
/// values are invalid, the part is unknown or empty, or a boundary edge is not in its cell.
pub fn wall_distribution(
    mesh: &Mesh,
    field: &FlowField,
    fluid: &FluidProperties,
    part: PartId,
    reference: &WallReference,
) -> Result<Vec<WallRow>, PostError> {
    check_field(mesh, field)?;
    fluid.validate()?;
    check_part(mesh, part)?;
    check_reference(reference)?;
    let mut rows = Vec::new();
    let mut s0 = 0.0;
    for (chain, edges) in part_chains(mesh, part).iter().enumerate() {
        let frames =
            edges.iter().map(|&e| EdgeFrame::new(mesh, e)).collect::<Result<Vec<_>, _>>()?;
        let sampler = Sampler { mesh, field, fluid, reference, chain };
        let [first, last] = [edges[0], edges[edges.len() - 1]];
        let closed = mesh.boundary_edges[last].nodes[1] == mesh.boundary_edges[first].nodes[0];
        s0 = sampler.push_chain(&frames, closed, s0, &mut rows);
    }
    Ok(rows)
}

fn check_reference(reference: &WallReference) -> Result<(), PostError> {
    if !(reference.velocity.is_finite() && reference.velocity > 0.0) {
        return Err(PostError::InvalidParameter {
            name: "reference velocity",
            value: reference.velocity,
            reason: "must be positive and finite",
        });
    }
    if !reference.pressure.is_finite() {
        return Err(PostError::InvalidParameter {
            name: "reference pressure",
            value: reference.pressure,
            reason: "must be finite",
        });
    }
    Ok(())
}

/// The part's boundary edges (indices into `mesh.boundary_edges`) grouped into chains.
fn part_chains(mesh: &Mesh, part: PartId) -> Vec<Vec<usize>> {
    let edges: Vec<usize> =
        (0..mesh.boundary_edges.len()).filter(|&e| mesh.boundary_edges[e].part == part).collect();
    let by_start: HashMap<usize, usize> =
        edges.iter().map(|&e| (mesh.boundary_edges[e].nodes[0], e)).collect();
    let by_end: HashMap<usize, usize> =
        edges.iter().map(|&e| (mesh.boundary_edges[e].nodes[1], e)).collect();
    let mut visited = vec![false; mesh.boundary_edges.len()];
    let mut chains = Vec::new();
    for &first in &edges {
        if visited[first] {
            continue;
        }
        let start = chain_start(mesh, &by_end, &visited, first, edges.len());
        let mut chain = Vec::new();
        let mut e = start;
        while !visited[e] {
            visited[e] = true;
            chain.push(e);
            match by_start.get(&mesh.boundary_edges[e].nodes[1]) {
                Some(&next) => e = next,
                None => break,
            }
        }
        chains.push(chain);
    }
    chains
}

/// Walks back from `first` to the start of its chain: the first edge of an open chain, or
/// `first` itself when the walk comes round a closed loop. At most `max_steps` steps, so a
/// pinched boundary (a vertex with two incoming edges) cannot loop forever.
fn chain_start(
    mesh: &Mesh,
    by_end: &HashMap<usize, usize>,
    visited: &[bool],
    first: usize,
    max_steps: usize,
) -> usize {
    let mut start = first;
    for _ in 0..max_steps {
        match by_end.get(&mesh.boundary_edges[start].nodes[0]) {
            Some(&prev) if prev == first => return first,
            Some(&prev) if !visited[prev] => start = prev,
            _ => break,
        }
    }
    start
}

/// Kinematic pressure, traction `σ n_b` and wall shear at one edge point.
#[derive(Clone, Copy, Debug)]
struct Sample {
    pressure: f64,
    traction: [f64; 2],
    shear: f64,
}

/// Evaluates [`Sample`]s on the edges of one chain and turns them into rows.
struct Sampler<'a> {
    mesh: &'a Mesh,
    field: &'a FlowField,
    fluid: &'a FluidProperties,
    reference: &'a WallReference,
    chain: usize,
}

impl Sampler<'_> {
    /// The sample on edge `frame` at parameter `s`.
    fn sample(&self, frame: &EdgeFrame, s: f64) -> Sample {
        let (tp, tv) = traction_parts(self.mesh, self.field, self.fluid, frame, s);
        let rho = self.fluid.density;
        let traction = [-rho * (tp[0] + tv[0]), -rho * (tp[1] + tv[1])];
        let shear = frame.tangent[0] * traction[0] + frame.tangent[1] * traction[1];
        let p = pressure_at(&self.field.pressure, &self.mesh.cells[frame.cell], frame.bary(s));
        Sample { pressure: p, traction, shear }
    }

    /// Builds a row from a point and (possibly averaged) samples.
    fn row(&self, s: f64, x: [f64; 2], samples: &[Sample]) -> WallRow {
        let n = samples.len() as f64;
        let mean = |f: fn(&Sample) -> f64| samples.iter().map(f).sum::<f64>() / n;
        let p = mean(|q| q.pressure);
        let q_ref = 0.5 * self.reference.velocity * self.reference.velocity;
        WallRow {
            chain: self.chain,
            s,
            x: x[0],
            y: x[1],
            pressure_coefficient: (p - self.reference.pressure) / q_ref,
            wall_shear: mean(|q| q.shear),
            traction: [mean(|q| q.traction[0]), mean(|q| q.traction[1])],
        }
    }

    /// Appends the rows of one chain starting at arc length `s0`; returns the end arc length.
    /// `closed` says the chain's last edge ends where its first edge starts.
    fn push_chain(
        &self,
        frames: &[EdgeFrame],
        closed: bool,
        s0: f64,
        rows: &mut Vec<WallRow>,
    ) -> f64 {
        let (Some(first), Some(last)) = (frames.first(), frames.last()) else { return s0 };
        let start_samples = if closed {
            vec![self.sample(first, 0.0), self.sample(last, 1.0)]
        } else {
            vec![self.sample(first, 0.0)]
        };
        rows.push(self.row(s0, first.a, &start_samples));
        let mut s = s0;
        for (i, frame) in frames.iter().enumerate() {
            rows.push(self.row(
                s + 0.5 * frame.length,
                frame.point(0.5),
                &[self.sample(frame, 0.5)],
            ));
            s += frame.length;
            let mut end = vec![self.sample(frame, 1.0)];
            match frames.get(i + 1) {
                Some(next) => end.push(self.sample(next, 0.0)),
                None if closed => end.push(self.sample(first, 0.0)),
                None => {}
            }
            rows.push(self.row(s, frame.point(1.0), &end));
        }
        s
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::fem::ViscousForm;
    use crate::mesh::structured::rectangle;

    #[test]
    fn a_part_in_two_pieces_gives_two_chains_with_continuing_arc_length() {
        // Give the top side the bottom's part id: one part, two open chains of 3 edges each.
        let mut mesh = rectangle([0.0, 0.0], [3.0, 1.0], 3, 2, |_, _| [0.0, 0.0]).unwrap();
        for be in mesh.boundary_edges.iter_mut().filter(|e| e.part == 2) {
            be.part = 0;
        }
        let chains = part_chains(&mesh, 0);
        assert_eq!(chains.iter().map(Vec::len).collect::<Vec<_>>(), vec![3, 3]);
        let field = FlowField {
            velocity: vec![[0.0; 2]; mesh.nodes.len()],
            pressure: vec![0.0; mesh.n_vertices],
        };
        let fluid = FluidProperties { density: 1.0, viscosity: 1.0, form: ViscousForm::Gradient };
        let rows = wall_distribution(&mesh, &field, &fluid, 0, &WallReference::new(1.0)).unwrap();
        assert_eq!(rows.len(), 2 * 7);
        // The second chain starts where the first ended (s = 3) and runs from x = 3 to 0.
        assert_eq!((rows[7].chain, rows[7].s, rows[7].x, rows[7].y), (1, 3.0, 3.0, 1.0));
        assert_eq!((rows[13].s, rows[13].x), (6.0, 0.0));
    }

    #[test]
    fn invalid_reference_velocity_is_a_typed_error() {
        let mesh = rectangle([0.0, 0.0], [1.0, 1.0], 2, 2, |_, _| [0.0, 0.0]).unwrap();
        let field = FlowField {
            velocity: vec![[0.0; 2]; mesh.nodes.len()],
            pressure: vec![0.0; mesh.n_vertices],
        };
        let fluid = FluidProperties { density: 1.0, viscosity: 1.0, form: ViscousForm::Gradient };
        let r = wall_distribution(&mesh, &field, &fluid, 1, &WallReference::new(0.0));
        assert!(matches!(r, Err(PostError::InvalidParameter { name: "reference velocity", .. })));
    }
}
