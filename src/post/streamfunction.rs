//! Stream function of a P2 velocity field.
//!
//! Takes a mesh and a [`FlowField`]; returns the P2 stream function `ψ` per mesh node, with
//! `u = ∂ψ/∂y`, `v = −∂ψ/∂x`, i.e. `∇ψ = (−v, u)`.
//!
//! Formulation: `ψ_h` minimises `‖∇ψ_h − (−v_h, u_h)‖²_{L²(Ω)}` over continuous P2 functions
//! with `ψ_h = 0` at one pinned node (the first vertex of the first boundary edge). The
//! normal equations are the pure-Neumann Poisson problem
//! `(∇ψ_h, ∇φ) = (u_h, ∂φ/∂y) − (v_h, ∂φ/∂x)` for all P2 `φ` vanishing at the pin, whose
//! matrix is symmetric positive definite on a connected mesh; it is solved by a sparse
//! Cholesky factorisation (faer) in the mesh's nested-dissection order
//! ([`crate::mesh::dissection`]). If the velocity is the exact curl of a P2 function
//! (divergence-free with zero net flux through every hole boundary), the minimum is zero and
//! `ψ_h` is that function up to the pinned constant. Otherwise (non-solenoidal field, or net
//! flux around a hole) `ψ_h` is the least-squares best fit.

use faer::dyn_stack::{MemBuffer, MemStack};
use faer::linalg::cholesky::llt::factor::LltRegularization;
use faer::perm::PermRef;
use faer::sparse::linalg::cholesky::{
    CholeskySymbolicParams, LltRef, SymmetricOrdering, factorize_symbolic_cholesky,
};
use faer::sparse::{SparseColMat, SparseColMatRef, Triplet};
use faer::{Conj, MatMut, Par, Side};

use super::{PostError, cell_triangle, check_field};
use crate::fem::FlowField;
use crate::fem::quadrature::triangle_rule;
use crate::fem::shape::{p2_gradients, p2_values};
use crate::mesh::Mesh;
use crate::mesh::dissection::node_order;

/// P2 stream function `ψ` per mesh node, `ψ = 0` at the first vertex of the first boundary
/// edge (see the module docs for the formulation).
///
/// # Errors
/// [`PostError`] when the field does not match the mesh, or
/// [`PostError::StreamFunction`] when the factorisation fails or gives non-finite values
/// (e.g. a mesh made of several disconnected pieces).
pub fn stream_function(mesh: &Mesh, field: &FlowField) -> Result<Vec<f64>, PostError> {
    check_field(mesh, field)?;
    let pieces = connected_pieces(mesh);
    if pieces != 1 {
        return Err(PostError::StreamFunction {
            reason: format!("the mesh has {pieces} disconnected pieces; ψ needs one pin per piece"),
        });
    }
    let pin = mesh.boundary_edges.first().map_or(0, |e| e.nodes[0]);
    // Unknown index of every node; the pinned node has none.
    let dof: Vec<Option<usize>> = (0..mesh.nodes.len())
        .map(|n| match n.cmp(&pin) {
            std::cmp::Ordering::Less => Some(n),
            std::cmp::Ordering::Equal => None,
            std::cmp::Ordering::Greater => Some(n - 1),
        })
        .collect();
    let n_dofs = mesh.nodes.len() - 1;
    let (triplets, rhs) = assemble(mesh, field, &dof);
    let matrix = SparseColMat::<usize, f64>::try_new_from_triplets(n_dofs, n_dofs, &triplets)
        .map_err(|e| PostError::StreamFunction { reason: format!("assembly: {e:?}") })?;
    let fail =
        |e: &dyn std::fmt::Debug| PostError::StreamFunction { reason: format!("cholesky: {e:?}") };
    // The mesh's nested-dissection order: measured faster than AMD on the matrix graph.
    let perm: Vec<usize> = node_order(mesh).into_iter().filter_map(|n| dof[n]).collect();
    let mut inverse = vec![usize::MAX; n_dofs];
    perm.iter().enumerate().for_each(|(k, &d)| inverse[d] = k);
    if perm.len() != n_dofs {
        return Err(PostError::StreamFunction { reason: "a node lies in no cell".into() });
    }
    let ordering = SymmetricOrdering::Custom(PermRef::new_checked(&perm, &inverse, n_dofs));
    let mut x: Vec<f64> = rhs[..n_dofs].to_vec();
    cholesky_solve_in_place(matrix.as_ref(), ordering, &mut x).map_err(|e| fail(&e))?;
    let psi: Vec<f64> = dof.iter().map(|d| d.map_or(0.0, |i| x[i])).collect();
    match psi.iter().position(|v| !v.is_finite()) {
        Some(node) => Err(PostError::StreamFunction {
            reason: format!("non-finite value at node {node} (is the mesh connected?)"),
        }),
        None => Ok(psi),
    }
}

/// Solves `A x = b` in place (`x` holds `b` on entry) by the sparse Cholesky factorisation of
/// the symmetric positive definite `A` (lower triangle read) with the given ordering.
fn cholesky_solve_in_place(
    matrix: SparseColMatRef<'_, usize, f64>,
    ordering: SymmetricOrdering<'_, usize>,
    x: &mut [f64],
) -> Result<(), Box<dyn std::fmt::Debug>> {
    let boxed =
        |e: &dyn std::fmt::Debug| -> Box<dyn std::fmt::Debug> { Box::new(format!("{e:?}")) };
    let symbolic = factorize_symbolic_cholesky(
        matrix.symbolic(),
        Side::Lower,
        ordering,
        CholeskySymbolicParams::default(),
    )
    .map_err(|e| boxed(&e))?;
    let par = Par::Seq;
    let mut l_values = vec![0.0; symbolic.len_val()];
    let scratch = symbolic.factorize_numeric_llt_scratch::<f64>(par, Default::default());
    let mut buf = MemBuffer::new(scratch);
    symbolic
        .factorize_numeric_llt(
            &mut l_values,
            matrix,
            Side::Lower,
            LltRegularization::default(),
            par,
            MemStack::new(&mut buf),
            Default::default(),
        )
        .map_err(|e| boxed(&e))?;
    let n = x.len();
    let mut buf = MemBuffer::new(symbolic.solve_in_place_scratch::<f64>(1, par));
    LltRef::new(&symbolic, &l_values).solve_in_place_with_conj(
        Conj::No,
        MatMut::from_column_major_slice_mut(x, n, 1),
        par,
        MemStack::new(&mut buf),
    );
    Ok(())
}

/// Number of connected pieces of the mesh (cells sharing a vertex are connected), by
/// union–find over the vertices; unused vertices do not count.
fn connected_pieces(mesh: &Mesh) -> usize {
    fn root(parent: &mut [usize], mut i: usize) -> usize {
        while parent[i] != i {
            parent[i] = parent[parent[i]];
            i = parent[i];
        }
        i
    }
    let mut parent: Vec<usize> = (0..mesh.n_vertices).collect();
    let mut used = vec![false; mesh.n_vertices];
    for cell in &mesh.cells {
        let r0 = root(&mut parent, cell[0]);
        for &v in &cell[..3] {
            used[v] = true;
            let r = root(&mut parent, v);
            parent[r] = r0;
        }
    }
    (0..mesh.n_vertices).filter(|&v| used[v] && root(&mut parent, v) == v).count()
}

/// Stiffness triplets and right-hand side `(u, ∂φ/∂y) − (v, ∂φ/∂x)`.
///
/// A Dunavant degree-4 rule is exact: the stiffness integrand has degree 2, the right-hand
/// side degree 3.
#[allow(non_snake_case)]
fn assemble(
    mesh: &Mesh,
    field: &FlowField,
    dof: &[Option<usize>],
) -> (Vec<Triplet<usize, usize, f64>>, Vec<f64>) {
    let mut triplets = Vec::with_capacity(36 * mesh.n_cells());
    let mut rhs = vec![0.0; mesh.nodes.len().saturating_sub(1)];
    let rule = triangle_rule(4);
    for (c, nodes) in mesh.cells.iter().enumerate() {
        let tri = cell_triangle(mesh, c);
        let mut K = [[0.0; 6]; 6];
        let mut b = [0.0; 6];
        for &(l, w) in rule.points {
            let wq = w * tri.area;
            let phi = p2_values(l);
            let dphi = p2_gradients(l, &tri.grad_bary);
            let mut u = [0.0; 2];
            for (k, &n) in nodes.iter().enumerate() {
                u[0] += phi[k] * field.velocity[n][0];
                u[1] += phi[k] * field.velocity[n][1];
            }
            for i in 0..6 {
                b[i] += wq * (u[0] * dphi[i][1] - u[1] * dphi[i][0]);
                for j in 0..6 {
                    K[i][j] += wq * (dphi[i][0] * dphi[j][0] + dphi[i][1] * dphi[j][1]);
                }
            }
        }
        for i in 0..6 {
            let Some(di) = dof[nodes[i]] else { continue };
            rhs[di] += b[i];
            for j in 0..6 {
                if let Some(dj) = dof[nodes[j]] {
                    triplets.push(Triplet::new(di, dj, K[i][j]));
                }
            }
        }
    }
    (triplets, rhs)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn disconnected_mesh_is_a_typed_error() {
        // Two separate triangles: the second piece has no pinned node, so the Neumann
        // matrix is singular there and the solve must report it instead of returning junk.
        let vertices = vec![[0.0, 0.0], [1.0, 0.0], [0.0, 1.0], [3.0, 0.0], [4.0, 0.0], [3.0, 1.0]];
        let segments: Vec<([usize; 2], usize)> =
            [[0, 1], [1, 2], [2, 0], [3, 4], [4, 5], [5, 3]].iter().map(|&s| (s, 0)).collect();
        let mesh = Mesh::from_linear(
            vertices,
            &[[0, 1, 2], [3, 4, 5]],
            &segments,
            vec!["wall".into()],
            vec![None],
        )
        .unwrap();
        let field = FlowField {
            velocity: vec![[1.0, 0.0]; mesh.nodes.len()],
            pressure: vec![0.0; mesh.n_vertices],
        };
        let err = stream_function(&mesh, &field).unwrap_err();
        assert!(err.to_string().contains("2 disconnected pieces"), "{err}");
    }
}
