//! Boundary conditions turned into per-node velocity constraints.
//!
//! Takes a [`Mesh`], the [`BoundaryCondition`] of every part (indexed by part id) and the
//! time; returns [`BoundaryConstraints`]: one [`NodeConstraint`] per mesh node and whether
//! some part leaves the pressure level free.
//!
//! **Corner rule.** A node on several parts takes the condition of highest precedence:
//! no-slip > prescribed velocity > slip > outflow (natural, nothing to impose). Between two
//! prescribed-velocity parts the one with the lower part id wins. A node on two slip parts
//! with different directions has zero normal velocity on both lines, so its velocity is
//! fixed to zero.
//!
//! **Slip.** A slip part must be straight; its nodes keep one unknown, the velocity along the
//! part's unit tangent (the node's two components are rotated to normal/tangent coordinates
//! and the normal one eliminated). For axis-parallel parts this is exactly "fix the normal
//! component". On a straight wall with zero normal velocity, `∂u_n/∂t = 0`, so the natural
//! condition of either viscous form is the same zero tangential stress `ν ∂u_t/∂n = 0`.
//!
//! **Invariant:** only conditions and coordinates are read here; no matrix is touched.

use crate::case::BoundaryCondition;
use crate::fem::dofs::NodeConstraint;
use crate::fem::quadrature::gauss_legendre_unit_3;
use crate::geometry::Point;
use crate::mesh::Mesh;

use super::SolveError;

/// Straightness tolerance of a slip part, relative to its extent: far above the round-off of
/// mesh generation (points on a segment within ~1e-16 relative, stack-notes §1) and far
/// below any genuine kink. Common practice, no source.
const STRAIGHTNESS_TOLERANCE: f64 = 1e-9;
/// Two unit tangents are parallel when their cross product is below this (round-off of a
/// normalised direction, a few ulps). Common practice, no source.
const PARALLEL_TOLERANCE: f64 = 1e-12;

/// Velocity constraints of every mesh node.
#[derive(Clone, Debug, PartialEq)]
pub struct BoundaryConstraints {
    /// One constraint per mesh node.
    pub nodes: Vec<NodeConstraint>,
    /// True when some boundary edge lies on an outflow part, so the pressure level is fixed
    /// by the natural condition; false for a closed domain.
    pub pressure_level_free: bool,
}

/// Net and absolute flux of the prescribed boundary velocity.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct BoundaryFlux {
    /// `∮ u·n ds` with `n` the outward normal.
    pub net: f64,
    /// `∮ |u·n| ds`.
    pub absolute: f64,
}

/// The condition a node has been claimed by, in increasing precedence.
#[derive(Clone, Copy, Debug, PartialEq)]
enum Claim {
    None,
    Outflow,
    Slip { tangent: [f64; 2] },
    SlipCorner,
    Velocity { part: usize },
    NoSlip,
}

impl Claim {
    fn rank(self) -> u8 {
        match self {
            Claim::None => 0,
            Claim::Outflow => 1,
            Claim::Slip { .. } => 2,
            Claim::SlipCorner => 3,
            Claim::Velocity { .. } => 4,
            Claim::NoSlip => 5,
        }
    }

    /// The claim that survives when `self` meets `other` at one node (see the module docs).
    fn merge(self, other: Claim) -> Claim {
        match (self, other) {
            (Claim::Slip { tangent: a }, Claim::Slip { tangent: b }) => {
                if (a[0] * b[1] - a[1] * b[0]).abs() <= PARALLEL_TOLERANCE {
                    self
                } else {
                    Claim::SlipCorner
                }
            }
            (Claim::Velocity { part: a }, Claim::Velocity { part: b }) => {
                Claim::Velocity { part: a.min(b) }
            }
            _ if other.rank() > self.rank() => other,
            _ => self,
        }
    }
}

/// Resolves the boundary conditions into node constraints (see the module docs for the
/// corner and slip rules).
///
/// # Errors
/// [`SolveError::MissingCondition`] when a part has no condition,
/// [`SolveError::SlipPartNotStraight`] for a curved or kinked slip part,
/// [`SolveError::NonFiniteBoundaryValue`] when a velocity expression gives NaN or ±∞.
pub fn resolve_boundary(
    mesh: &Mesh,
    conditions: &[BoundaryCondition],
    time: f64,
) -> Result<BoundaryConstraints, SolveError> {
    if let Some(part) = (conditions.len()..mesh.part_names.len()).next() {
        return Err(SolveError::MissingCondition { part: mesh.part_names[part].clone() });
    }
    let tangents = slip_tangents(mesh, conditions)?;
    let mut claims = vec![Claim::None; mesh.nodes.len()];
    let mut pressure_level_free = false;
    for edge in &mesh.boundary_edges {
        let claim = match &conditions[edge.part] {
            BoundaryCondition::Velocity { .. } => Claim::Velocity { part: edge.part },
            BoundaryCondition::NoSlip => Claim::NoSlip,
            BoundaryCondition::Outflow => Claim::Outflow,
            BoundaryCondition::Slip => Claim::Slip { tangent: tangents[edge.part] },
        };
        pressure_level_free |= claim == Claim::Outflow;
        for &node in &edge.nodes {
            claims[node] = claims[node].merge(claim);
        }
    }
    let nodes = claims
        .iter()
        .enumerate()
        .map(|(node, claim)| node_constraint(mesh, conditions, node, *claim, time))
        .collect::<Result<_, _>>()?;
    Ok(BoundaryConstraints { nodes, pressure_level_free })
}

/// Net and absolute flux `∮ u·n` of the eliminated boundary velocities, integrated exactly
/// (3-point Gauss–Legendre) on the P2 trace of every boundary edge. Free and slip nodes count
/// as zero normal velocity.
pub fn boundary_flux(mesh: &Mesh, nodes: &[NodeConstraint]) -> BoundaryFlux {
    let fixed = |n: usize| match nodes[n] {
        NodeConstraint::Fixed(v) => v,
        _ => [0.0, 0.0],
    };
    let mut flux = BoundaryFlux { net: 0.0, absolute: 0.0 };
    for edge in &mesh.boundary_edges {
        let [a, b, m] = edge.nodes;
        let (pa, pb) = (mesh.nodes[a], mesh.nodes[b]);
        // Outward normal times edge length: fluid on the left of a -> b.
        let normal = [pb[1] - pa[1], pa[0] - pb[0]];
        let (ua, ub, um) = (fixed(a), fixed(b), fixed(m));
        for (s, w) in gauss_legendre_unit_3() {
            let phi = [(1.0 - s) * (1.0 - 2.0 * s), s * (2.0 * s - 1.0), 4.0 * s * (1.0 - s)];
            let un: f64 = (0..2)
                .map(|c| (phi[0] * ua[c] + phi[1] * ub[c] + phi[2] * um[c]) * normal[c])
                .sum();
            flux.net += w * un;
            flux.absolute += w * un.abs();
        }
    }
    flux
}

fn node_constraint(
    mesh: &Mesh,
    conditions: &[BoundaryCondition],
    node: usize,
    claim: Claim,
    time: f64,
) -> Result<NodeConstraint, SolveError> {
    Ok(match claim {
        Claim::None | Claim::Outflow => NodeConstraint::Free,
        Claim::Slip { tangent } => NodeConstraint::Slip { tangent },
        Claim::SlipCorner | Claim::NoSlip => NodeConstraint::Fixed([0.0, 0.0]),
        Claim::Velocity { part } => {
            let BoundaryCondition::Velocity { ux, uy } = &conditions[part] else {
                return Ok(NodeConstraint::Fixed([0.0, 0.0]));
            };
            let [x, y] = mesh.nodes[node];
            let value = [ux.eval(x, y, time), uy.eval(x, y, time)];
            if !value.iter().all(|v| v.is_finite()) {
                return Err(SolveError::NonFiniteBoundaryValue {
                    part: mesh.part_names[part].clone(),
                    x,
                    y,
                    value,
                });
            }
            NodeConstraint::Fixed(value)
        }
    })
}

/// Unit tangent of every slip part (zero for other parts); checks that slip parts are
/// straight.
fn slip_tangents(
    mesh: &Mesh,
    conditions: &[BoundaryCondition],
) -> Result<Vec<[f64; 2]>, SolveError> {
    let mut tangents = vec![[0.0, 0.0]; mesh.part_names.len()];
    for (part, condition) in conditions.iter().enumerate().take(mesh.part_names.len()) {
        if !matches!(condition, BoundaryCondition::Slip) {
            continue;
        }
        let points: Vec<Point> = mesh
            .boundary_edges
            .iter()
            .filter(|e| e.part == part)
            .flat_map(|e| e.nodes.map(|n| mesh.nodes[n]))
            .collect();
        tangents[part] = straight_line_tangent(&points).map_err(|deviation| {
            SolveError::SlipPartNotStraight { part: mesh.part_names[part].clone(), deviation }
        })?;
    }
    Ok(tangents)
}

/// The unit direction of the line through `points` (the first two distinct ones), or the
/// largest relative distance of a point from that line when it exceeds the tolerance.
fn straight_line_tangent(points: &[Point]) -> Result<[f64; 2], f64> {
    let Some(&origin) = points.first() else { return Ok([1.0, 0.0]) };
    let dist = |p: &Point| (p[0] - origin[0]).hypot(p[1] - origin[1]);
    let Some(far) = points.iter().max_by(|a, b| dist(a).total_cmp(&dist(b))) else {
        return Ok([1.0, 0.0]);
    };
    let extent = dist(far);
    if extent == 0.0 {
        return Ok([1.0, 0.0]);
    }
    let t = [(far[0] - origin[0]) / extent, (far[1] - origin[1]) / extent];
    let deviation = points
        .iter()
        .map(|p| ((p[0] - origin[0]) * t[1] - (p[1] - origin[1]) * t[0]).abs() / extent)
        .fold(0.0, f64::max);
    if deviation > STRAIGHTNESS_TOLERANCE { Err(deviation) } else { Ok(t) }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn corner_precedence_is_noslip_velocity_slip_outflow() {
        let slip = Claim::Slip { tangent: [1.0, 0.0] };
        let order = [
            Claim::None,
            Claim::Outflow,
            slip,
            Claim::SlipCorner,
            Claim::Velocity { part: 3 },
            Claim::NoSlip,
        ];
        for (i, a) in order.iter().enumerate() {
            for b in &order[i..] {
                assert_eq!(a.merge(*b), *b, "{a:?} meets {b:?}");
                assert_eq!(b.merge(*a), *b, "{b:?} meets {a:?}");
            }
        }
        assert_eq!(
            Claim::Velocity { part: 5 }.merge(Claim::Velocity { part: 2 }),
            Claim::Velocity { part: 2 }
        );
    }

    #[test]
    fn slip_parts_meeting_at_an_angle_fix_the_node() {
        let a = Claim::Slip { tangent: [1.0, 0.0] };
        let b = Claim::Slip { tangent: [0.6, 0.8] };
        let c = Claim::Slip { tangent: [-1.0, 0.0] };
        assert_eq!(a.merge(b), Claim::SlipCorner);
        assert_eq!(a.merge(c), a, "collinear slip parts keep the slip");
    }

    #[test]
    fn straightness_check_accepts_lines_and_refuses_kinks() {
        let line = [[0.0, 0.0], [0.5, 0.25], [1.0, 0.5], [2.0, 1.0]];
        let t = straight_line_tangent(&line).unwrap();
        assert!(
            (t[0] - 2.0 / 5f64.sqrt()).abs() < 1e-15 && (t[1] - 1.0 / 5f64.sqrt()).abs() < 1e-15
        );
        let kink = [[0.0, 0.0], [1.0, 0.0], [1.0, 1e-3]];
        assert!(straight_line_tangent(&kink).is_err());
    }
}
