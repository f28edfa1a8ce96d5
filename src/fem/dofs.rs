//! Degrees of freedom of the Taylor–Hood pair with eliminated Dirichlet values.
//!
//! Takes one [`NodeConstraint`] per mesh node (decided by the solver from the boundary
//! conditions) and an optional pinned pressure vertex; returns a [`DofMap`] that numbers the
//! free unknowns: velocity unknowns first (in node order), then the pressure unknowns (in
//! vertex order).
//!
//! Each local velocity component `u_c` of a node is either eliminated (a known value, moved
//! to the right-hand side) or equals `w · x_g` for a free unknown `x_g` and a weight `w`:
//! `w = 1` for a free node, and `w = t_c` for a slip node whose single unknown is the
//! tangential velocity along the unit tangent `t` (zero normal velocity). Scattering
//! `w_i w_j K_ij` keeps the assembled matrix symmetric.
//!
//! **Invariant:** this module never sees boundary-condition kinds or expressions, only the
//! per-node constraints.

use crate::mesh::Mesh;

use super::kernels::{LOCAL_SIZE, LOCAL_VELOCITY};

/// What is known about the velocity at one mesh node.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum NodeConstraint {
    /// Both components are unknown.
    Free,
    /// Both components are prescribed.
    Fixed([f64; 2]),
    /// Zero normal velocity; the single unknown is the velocity along the unit `tangent`.
    Slip { tangent: [f64; 2] },
}

/// How one scalar local unknown maps to the global system.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum ComponentDof {
    /// The value is `weight · x[dof]`.
    Free { dof: usize, weight: f64 },
    /// The value is known.
    Fixed(f64),
}

/// Numbering of the free unknowns of a Taylor–Hood discretisation.
#[derive(Clone, Debug)]
pub struct DofMap {
    velocity: Vec<[ComponentDof; 2]>,
    pressure: Vec<ComponentDof>,
    n_velocity_dofs: usize,
    n_pressure_dofs: usize,
    pinned_pressure: Option<usize>,
}

impl DofMap {
    /// Numbers the free unknowns.
    ///
    /// `constraints` has one entry per mesh node; `pinned_pressure`, when given, is a vertex
    /// whose pressure is fixed to zero (to remove the constant from a closed domain).
    /// Slip tangents are normalised here.
    ///
    /// # Panics
    /// When `constraints.len() != mesh.nodes.len()` or the pinned vertex is out of range
    /// (programming errors of the caller, not user input).
    pub fn new(
        mesh: &Mesh,
        constraints: &[NodeConstraint],
        pinned_pressure: Option<usize>,
    ) -> Self {
        assert_eq!(constraints.len(), mesh.nodes.len(), "one constraint per mesh node");
        let mut next = 0;
        let velocity = constraints.iter().map(|c| number_node(*c, &mut next)).collect();
        let n_velocity_dofs = next;
        let pressure = (0..mesh.n_vertices)
            .map(|v| {
                if Some(v) == pinned_pressure {
                    ComponentDof::Fixed(0.0)
                } else {
                    next += 1;
                    ComponentDof::Free { dof: next - 1, weight: 1.0 }
                }
            })
            .collect();
        if let Some(v) = pinned_pressure {
            assert!(v < mesh.n_vertices, "pinned pressure vertex {v} out of range");
        }
        DofMap {
            velocity,
            pressure,
            n_velocity_dofs,
            n_pressure_dofs: next - n_velocity_dofs,
            pinned_pressure,
        }
    }

    /// Number of free velocity unknowns.
    pub fn n_velocity_dofs(&self) -> usize {
        self.n_velocity_dofs
    }

    /// Number of free pressure unknowns.
    pub fn n_pressure_dofs(&self) -> usize {
        self.n_pressure_dofs
    }

    /// Total number of unknowns (size of the linear system).
    pub fn n_dofs(&self) -> usize {
        self.n_velocity_dofs + self.n_pressure_dofs
    }

    /// The vertex whose pressure is pinned to zero, if any.
    pub fn pinned_pressure(&self) -> Option<usize> {
        self.pinned_pressure
    }

    /// The two velocity components of mesh node `node`.
    pub fn velocity(&self, node: usize) -> [ComponentDof; 2] {
        self.velocity[node]
    }

    /// The pressure unknown of vertex `vertex`.
    pub fn pressure(&self, vertex: usize) -> ComponentDof {
        self.pressure[vertex]
    }

    /// The 15 local unknowns of a cell in local order (see [`super::kernels`]).
    pub fn cell_dofs(&self, cell: &[usize; 6]) -> [ComponentDof; LOCAL_SIZE] {
        let mut out = [ComponentDof::Fixed(0.0); LOCAL_SIZE];
        for (k, &node) in cell.iter().enumerate() {
            out[2 * k] = self.velocity[node][0];
            out[2 * k + 1] = self.velocity[node][1];
        }
        for q in 0..3 {
            out[LOCAL_VELOCITY + q] = self.pressure[cell[q]];
        }
        out
    }

    /// Replaces the prescribed values of the fixed velocity components by those of
    /// `constraints` (time-dependent boundary data on an unchanged layout). Returns false,
    /// changing nothing, when the layout of `constraints` differs (a node changed between
    /// free, fixed and slip).
    pub fn update_fixed_values(&mut self, constraints: &[NodeConstraint]) -> bool {
        let same_layout = constraints.len() == self.velocity.len()
            && constraints.iter().zip(&self.velocity).all(|(c, v)| {
                matches!(
                    (c, v[0]),
                    (NodeConstraint::Fixed(_), ComponentDof::Fixed(_))
                        | (
                            NodeConstraint::Free | NodeConstraint::Slip { .. },
                            ComponentDof::Free { .. }
                        )
                )
            });
        if !same_layout {
            return false;
        }
        for (c, v) in constraints.iter().zip(&mut self.velocity) {
            if let NodeConstraint::Fixed(value) = c {
                *v = [ComponentDof::Fixed(value[0]), ComponentDof::Fixed(value[1])];
            }
        }
        true
    }

    /// The prescribed velocities of the fixed nodes.
    pub fn fixed_velocities(&self) -> impl Iterator<Item = [f64; 2]> + '_ {
        self.velocity.iter().filter_map(|v| match v {
            [ComponentDof::Fixed(a), ComponentDof::Fixed(b)] => Some([*a, *b]),
            _ => None,
        })
    }

    /// True when global unknown `dof` is a pressure unknown.
    pub fn is_pressure(&self, dof: usize) -> bool {
        dof >= self.n_velocity_dofs
    }

    /// Expands a solution vector `x` of the free unknowns to nodal velocities and vertex
    /// pressures (the eliminated values are filled in).
    pub fn expand(&self, x: &[f64]) -> (Vec<[f64; 2]>, Vec<f64>) {
        let value = |d: ComponentDof| match d {
            ComponentDof::Free { dof, weight } => weight * x[dof],
            ComponentDof::Fixed(v) => v,
        };
        let velocity = self.velocity.iter().map(|c| [value(c[0]), value(c[1])]).collect();
        let pressure = self.pressure.iter().map(|&c| value(c)).collect();
        (velocity, pressure)
    }
}

fn number_node(constraint: NodeConstraint, next: &mut usize) -> [ComponentDof; 2] {
    let first = *next;
    match constraint {
        NodeConstraint::Free => {
            *next += 2;
            [
                ComponentDof::Free { dof: first, weight: 1.0 },
                ComponentDof::Free { dof: first + 1, weight: 1.0 },
            ]
        }
        NodeConstraint::Fixed(v) => [ComponentDof::Fixed(v[0]), ComponentDof::Fixed(v[1])],
        NodeConstraint::Slip { tangent } => {
            *next += 1;
            let norm = tangent[0].hypot(tangent[1]);
            [
                ComponentDof::Free { dof: first, weight: tangent[0] / norm },
                ComponentDof::Free { dof: first, weight: tangent[1] / norm },
            ]
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::mesh::structured::rectangle;

    #[test]
    fn numbering_skips_fixed_nodes_and_gives_slip_nodes_one_unknown() {
        let mesh = rectangle([0.0, 0.0], [1.0, 1.0], 2, 2, |_, _| [0.0, 0.0]).unwrap();
        let mut constraints = vec![NodeConstraint::Free; mesh.nodes.len()];
        constraints[0] = NodeConstraint::Fixed([1.0, 2.0]);
        constraints[1] = NodeConstraint::Slip { tangent: [3.0, 4.0] };
        let map = DofMap::new(&mesh, &constraints, Some(4));
        assert_eq!(map.n_velocity_dofs(), 2 * (mesh.nodes.len() - 2) + 1);
        assert_eq!(map.n_pressure_dofs(), mesh.n_vertices - 1);
        assert_eq!(map.velocity(0), [ComponentDof::Fixed(1.0), ComponentDof::Fixed(2.0)]);
        assert_eq!(
            map.velocity(1),
            [
                ComponentDof::Free { dof: 0, weight: 0.6 },
                ComponentDof::Free { dof: 0, weight: 0.8 }
            ]
        );
        assert_eq!(map.pressure(4), ComponentDof::Fixed(0.0));
        // Expansion fills in fixed values and rotates the slip unknown back to (u, v).
        let x: Vec<f64> = (0..map.n_dofs()).map(|d| d as f64 + 1.0).collect();
        let (u, p) = map.expand(&x);
        assert_eq!(u[0], [1.0, 2.0]);
        assert!((u[1][0] - 0.6).abs() < 1e-15 && (u[1][1] - 0.8).abs() < 1e-15);
        assert_eq!(p[4], 0.0);
    }
}
