//! Geometric nested-dissection ordering of the Taylor–Hood unknowns for the sparse `LDLᵀ`.
//!
//! Takes a [`Mesh`] and the [`DofMap`] of its system; returns a fill-reducing permutation
//! `perm` (`perm[k]` = the unknown eliminated `k`-th) built from the geometry instead of the
//! matrix graph, so it costs a sort instead of a minimum-degree search.
//!
//! The tree is [`crate::mesh::dissection`]'s: every mesh node belongs to the smallest subtree
//! that holds all its cells, so a node shared by the two halves of a split lies in that
//! split's separator. Unknowns are numbered in post-order of the tree (both halves, then
//! their separator), and inside one tree node the velocity unknowns before the pressure
//! unknowns. The midside nodes of a vertex's
//! edges lie in the vertex's subtree, so every pressure pivot comes after velocity unknowns
//! it couples to and never meets the zero pressure block alone.
//!
//! # References
//! A. George, *Nested dissection of a regular finite element mesh*, SIAM J. Numer. Anal. 10
//! (1973) 345–363; R.J. Lipton, D.J. Rose, R.E. Tarjan, *Generalized nested dissection*,
//! SIAM J. Numer. Anal. 16 (1979) 346–358 (`O(n^{3/2})` work for planar meshes). From memory.

use super::split_ldlt::Halves;
use crate::fem::dofs::{ComponentDof, DofMap};
use crate::mesh::Mesh;
use crate::mesh::dissection::{self, DissectionKey};

/// The nested-dissection permutation of the unknowns of `dofs` on `mesh` (see the module
/// docs; `perm[k]` is the unknown eliminated `k`-th, every unknown appears once) with the
/// number of unknowns in the two halves of the top split: `perm` numbers the first half,
/// then the second, then the top separator. No cell has
/// nodes in both halves, so no matrix entry couples them ([`super::split_ldlt`]).
pub fn nested_dissection_halves(mesh: &Mesh, dofs: &DofMap) -> (Vec<usize>, Halves) {
    let keys = dissection::node_keys(mesh);
    // (key, (class, node, unknown)): class 0 velocity, 1 pressure.
    let mut entries: Vec<(DissectionKey, (u8, usize, usize))> = Vec::with_capacity(dofs.n_dofs());
    for (node, key) in keys.into_iter().enumerate() {
        let Some(key) = key else { continue };
        let [a, b] = dofs.velocity(node);
        let mut last = None;
        for c in [a, b] {
            // A slip node's two components share one unknown.
            if let ComponentDof::Free { dof, .. } = c
                && last != Some(dof)
            {
                entries.push((key, (0, node, dof)));
                last = Some(dof);
            }
        }
        if node < mesh.n_vertices
            && let ComponentDof::Free { dof, .. } = dofs.pressure(node)
        {
            entries.push((key, (1, node, dof)));
        }
    }
    let (ordered, [first, second]) = dissection::in_dissection_order(entries);
    (ordered.into_iter().map(|(_, _, dof)| dof).collect(), Halves { first, second })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_unknown_appears_once_and_pressures_follow_their_node_velocities() {
        use crate::fem::dofs::NodeConstraint;
        let mesh =
            crate::mesh::structured::rectangle([0.0, 0.0], [3.0, 1.0], 12, 5, |_, _| [0.0, 0.0])
                .unwrap();
        // Fix the velocity on the bottom side to exercise eliminated unknowns.
        let constraints: Vec<NodeConstraint> =
            mesh.nodes
                .iter()
                .map(|p| {
                    if p[1] == 0.0 { NodeConstraint::Fixed([0.0; 2]) } else { NodeConstraint::Free }
                })
                .collect();
        let dofs = DofMap::new(&mesh, &constraints, None);
        let (perm, halves) = nested_dissection_halves(&mesh, &dofs);
        assert!(halves.first > 0 && halves.second > 0);
        assert!(halves.first + halves.second < perm.len(), "a separator is left");
        let mut seen = vec![false; dofs.n_dofs()];
        perm.iter().for_each(|&d| seen[d] = true);
        assert_eq!(perm.len(), dofs.n_dofs());
        assert!(seen.iter().all(|&s| s));
        let position: Vec<usize> = {
            let mut p = vec![0; perm.len()];
            perm.iter().enumerate().for_each(|(k, &d)| p[d] = k);
            p
        };
        for v in 0..mesh.n_vertices {
            let (ComponentDof::Free { dof: p, .. }, [ComponentDof::Free { dof: u, .. }, _]) =
                (dofs.pressure(v), dofs.velocity(v))
            else {
                continue;
            };
            assert!(position[u] < position[p], "vertex {v}: pressure before its velocity");
        }
    }
}
