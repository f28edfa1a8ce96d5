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
//! `LDLᵀ` factorisation (faer; no pivoting is needed for a definite matrix) in the mesh's
//! nested-dissection order ([`crate::mesh::dissection`]): the two halves of the top split on
//! two threads ([`crate::solver::split_ldlt`]), or in one piece on small meshes, with the
//! triangular solves of [`crate::solver::supernodal`]. If the velocity is the exact curl of a P2 function
//! (divergence-free with zero net flux through every hole boundary), the minimum is zero and
//! `ψ_h` is that function up to the pinned constant. Otherwise (non-solenoidal field, or net
//! flux around a hole) `ψ_h` is the least-squares best fit.

use faer::dyn_stack::{MemBuffer, MemStack};
use faer::linalg::cholesky::ldlt::factor::LdltRegularization;
use faer::perm::PermRef;
use faer::sparse::linalg::cholesky::{
    CholeskySymbolicParams, SymbolicCholesky, SymmetricOrdering, factorize_symbolic_cholesky,
};
use faer::sparse::{SparseColMat, SparseColMatRef, SymbolicSparseColMat};
use faer::{Par, Side};
use rayon::prelude::*;

use super::{PostError, cell_triangle, check_field};
use crate::fem::FlowField;
use crate::fem::quadrature::triangle_rule;
use crate::fem::shape::{p2_gradients, p2_values};
use crate::mesh::Mesh;
use crate::mesh::dissection::{in_dissection_order, node_keys};
use crate::solver::split_ldlt::{Halves, SPLIT_MIN_HALF, SplitFactor, SplitSymbolic};
use crate::solver::supernodal::{SweepSplit, solve_ldlt_in_place, sweep_split};
use crate::solver::vector_registers::reset_after_faer;

/// P2 stream function `ψ` per mesh node, `ψ = 0` at the first vertex of the first boundary
/// edge (see the module docs for the formulation).
///
/// # Errors
/// [`PostError`] when the field does not match the mesh, or
/// [`PostError::StreamFunction`] when the factorisation fails or gives non-finite values
/// (e.g. a mesh made of several disconnected pieces).
pub fn stream_function(mesh: &Mesh, field: &FlowField) -> Result<Vec<f64>, PostError> {
    check_field(mesh, field)?;
    StreamFunctionSolver::new(mesh)?.solve(mesh, field)
}

/// The factorised stream-function matrix of a mesh. The matrix depends on the mesh only, so a
/// caller can factorise it while the flow is being solved (e.g. on another core) and pay
/// only a right-hand side and two triangular solves afterwards.
pub struct StreamFunctionSolver {
    /// Unknown index of every node; the pinned node has none.
    dof: Vec<Option<usize>>,
    factor: Factor,
}

/// The factorised matrix in one of two forms.
enum Factor {
    /// The halves of the top split factorised on two threads (large meshes).
    Split { symbolic: Box<SplitSymbolic>, values: SplitFactor },
    /// One factorisation (small meshes).
    Whole {
        symbolic: Box<SymbolicCholesky<usize>>,
        l_values: Vec<f64>,
        /// Where the triangular solves split over two threads.
        split: Option<SweepSplit>,
    },
}

impl StreamFunctionSolver {
    /// Assembles the pinned P2 stiffness matrix and factorises it (`LDLᵀ` in the mesh's
    /// nested-dissection order: measured faster than AMD on the matrix graph; the halves of
    /// its top split on two threads when each has [`SPLIT_MIN_HALF`] unknowns).
    ///
    /// # Errors
    /// [`PostError::StreamFunction`] for a disconnected mesh or a failed factorisation.
    pub fn new(mesh: &Mesh) -> Result<Self, PostError> {
        let pieces = connected_pieces(mesh);
        if pieces != 1 {
            return Err(PostError::StreamFunction {
                reason: format!(
                    "the mesh has {pieces} disconnected pieces; ψ needs one pin per piece"
                ),
            });
        }
        let pin = mesh.boundary_edges.first().map_or(0, |e| e.nodes[0]);
        let dof: Vec<Option<usize>> = (0..mesh.nodes.len())
            .map(|n| match n.cmp(&pin) {
                std::cmp::Ordering::Less => Some(n),
                std::cmp::Ordering::Equal => None,
                std::cmp::Ordering::Greater => Some(n - 1),
            })
            .collect();
        let n_dofs = mesh.nodes.len() - 1;
        // The ordering is mostly one sort: it runs beside the parallel assembly.
        let (matrix, (perm, halves)) =
            rayon::join(|| stiffness(mesh, &dof, n_dofs), || dissection_order(mesh, &dof));
        if perm.len() != n_dofs {
            return Err(PostError::StreamFunction { reason: "a node lies in no cell".into() });
        }
        let factored = factorize(matrix.as_ref(), &perm, halves);
        // faer ran on this thread and, for the halves, on rayon's workers.
        reset_after_faer();
        let factor = factored.map_err(|e| PostError::StreamFunction {
            reason: format!("LDLᵀ factorisation: {e}"),
        })?;
        Ok(StreamFunctionSolver { dof, factor })
    }

    /// `ψ` of `field` (one velocity per node of the mesh this solver was built for).
    ///
    /// # Errors
    /// [`PostError`] when the field does not match the mesh, or
    /// [`PostError::StreamFunction`] for non-finite values.
    pub fn solve(&self, mesh: &Mesh, field: &FlowField) -> Result<Vec<f64>, PostError> {
        check_field(mesh, field)?;
        if self.dof.len() != mesh.nodes.len() {
            return Err(PostError::StreamFunction {
                reason: "the solver was built for another mesh".into(),
            });
        }
        let mut x = load(mesh, field, &self.dof);
        match &self.factor {
            Factor::Split { symbolic, values } => symbolic.solve_in_place(values, &mut x),
            Factor::Whole { symbolic, l_values, split } => {
                solve_ldlt_in_place(symbolic, l_values, split.as_ref(), &mut x)
            }
        }
        let psi: Vec<f64> = self.dof.iter().map(|d| d.map_or(0.0, |i| x[i])).collect();
        match psi.iter().position(|v| !v.is_finite()) {
            Some(node) => Err(PostError::StreamFunction {
                reason: format!("non-finite value at node {node} (is the mesh connected?)"),
            }),
            None => Ok(psi),
        }
    }
}

/// The unknowns in the mesh's nested-dissection order (`perm[k]` = the unknown eliminated
/// `k`-th; the pinned node left out) with the number of them in each half of the top split,
/// which `perm` numbers first, before the top separator.
fn dissection_order(mesh: &Mesh, dof: &[Option<usize>]) -> (Vec<usize>, Halves) {
    let keyed =
        node_keys(mesh).into_iter().zip(dof).filter_map(|(key, d)| Some((key?, (*d)?))).collect();
    let (perm, [first, second]) = in_dissection_order(keyed);
    (perm, Halves { first, second })
}

/// The sparse `LDLᵀ` factorisation of the symmetric positive definite `A` (both triangles
/// stored) in the order `perm`: split at `halves` when both are large enough, else whole.
fn factorize(
    matrix: SparseColMatRef<'_, usize, f64>,
    perm: &[usize],
    halves: Halves,
) -> Result<Factor, String> {
    let n = perm.len();
    let mut inverse = vec![usize::MAX; n];
    perm.iter().enumerate().for_each(|(k, &d)| inverse[d] = k);
    let debug = |e: &dyn std::fmt::Debug| format!("{e:?}");
    if halves.first.min(halves.second) >= SPLIT_MIN_HALF {
        let signs = vec![1; n];
        let analysed = SplitSymbolic::analyse(matrix.symbolic(), perm, &inverse, halves, &signs);
        if let Some(symbolic) = analysed.map_err(|e| debug(&e))? {
            let mut values = SplitFactor::default();
            symbolic.factorize(&symbolic.gather(matrix.val()), None, Par::Seq, &mut values)?;
            return Ok(Factor::Split { symbolic: Box::new(symbolic), values });
        }
    }
    let ordering = SymmetricOrdering::Custom(PermRef::new_checked(perm, &inverse, n));
    let symbolic = factorize_symbolic_cholesky(
        matrix.symbolic(),
        Side::Lower,
        ordering,
        CholeskySymbolicParams::default(),
    )
    .map_err(|e| debug(&e))?;
    let par = Par::Seq;
    let mut l_values = vec![0.0; symbolic.len_val()];
    let scratch = symbolic.factorize_numeric_ldlt_scratch::<f64>(par, Default::default());
    let mut buf = MemBuffer::new(scratch);
    symbolic
        .factorize_numeric_ldlt(
            &mut l_values,
            matrix,
            Side::Lower,
            LdltRegularization::default(),
            par,
            MemStack::new(&mut buf),
            Default::default(),
        )
        .map_err(|e| debug(&e))?;
    let split = sweep_split(&symbolic);
    Ok(Factor::Whole { symbolic: Box::new(symbolic), l_values, split })
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

/// Cells per rayon task of the stiffness assembly.
const STIFFNESS_BATCH: usize = 4096;

/// The stiffness matrix `(∇φ_i, ∇φ_j)` of the unknowns, both triangles, assembled straight
/// into compressed columns: one column per unknown gathers the local matrices of the cells
/// around its node, columns in parallel (no triplet list to sort: measured 0.95 s → see
/// docs/performance.md, at 453k nodes).
fn stiffness(mesh: &Mesh, dof: &[Option<usize>], n_dofs: usize) -> SparseColMat<usize, f64> {
    let local: Vec<[[f64; 6]; 6]> = (0..mesh.n_cells())
        .into_par_iter()
        .with_min_len(STIFFNESS_BATCH)
        .map(|c| local_stiffness(mesh, c))
        .collect();
    // The cells around every node (CSR), as (cell, local index).
    let mut start = vec![0usize; mesh.nodes.len() + 1];
    mesh.cells.iter().flatten().for_each(|&n| start[n + 1] += 1);
    for n in 0..mesh.nodes.len() {
        start[n + 1] += start[n];
    }
    let mut next = start[..mesh.nodes.len()].to_vec();
    let mut around = vec![(0u32, 0u8); start[mesh.nodes.len()]];
    for (c, nodes) in mesh.cells.iter().enumerate() {
        for (i, &n) in nodes.iter().enumerate() {
            around[next[n]] = (c as u32, i as u8);
            next[n] += 1;
        }
    }
    let mut column_node = vec![0; n_dofs];
    dof.iter().enumerate().for_each(|(n, d)| {
        if let Some(d) = d {
            column_node[*d] = n
        }
    });
    // Per batch of columns: their lengths, rows and values. `slot[d]` is the place of row `d`
    // in the current column (`usize::MAX` when absent), one map per task.
    let batches: Vec<(Vec<usize>, Vec<usize>, Vec<f64>)> = column_node
        .par_chunks(STIFFNESS_BATCH)
        .map_init(
            || vec![usize::MAX; n_dofs],
            |slot, nodes| {
                let (mut lengths, mut rows, mut values) = (Vec::new(), Vec::new(), Vec::new());
                for &node in nodes {
                    let first = rows.len();
                    let cells = &around[start[node]..start[node + 1]];
                    for &(c, _) in cells {
                        for d in mesh.cells[c as usize].iter().filter_map(|&m| dof[m]) {
                            if slot[d] == usize::MAX {
                                slot[d] = 0;
                                rows.push(d);
                            }
                        }
                    }
                    rows[first..].sort_unstable();
                    for (k, &d) in rows[first..].iter().enumerate() {
                        slot[d] = first + k;
                    }
                    values.resize(rows.len(), 0.0);
                    for &(c, i) in cells {
                        let k_row = &local[c as usize][i as usize];
                        for (&m, k) in mesh.cells[c as usize].iter().zip(k_row) {
                            if let Some(d) = dof[m] {
                                values[slot[d]] += k;
                            }
                        }
                    }
                    rows[first..].iter().for_each(|&d| slot[d] = usize::MAX);
                    lengths.push(rows.len() - first);
                }
                (lengths, rows, values)
            },
        )
        .collect();
    let mut col_ptr = Vec::with_capacity(n_dofs + 1);
    col_ptr.push(0);
    for (lengths, _, _) in &batches {
        lengths.iter().for_each(|l| col_ptr.push(col_ptr.last().unwrap() + l));
    }
    let row_idx: Vec<usize> = batches.iter().flat_map(|b| b.1.iter().copied()).collect();
    let values: Vec<f64> = batches.iter().flat_map(|b| b.2.iter().copied()).collect();
    let symbolic = SymbolicSparseColMat::new_checked(n_dofs, n_dofs, col_ptr, None, row_idx);
    SparseColMat::new(symbolic, values)
}

/// The local stiffness `(∇φ_i, ∇φ_j)` of cell `c` (symmetric). A Dunavant degree-4 rule is
/// exact (the integrand has degree 2).
fn local_stiffness(mesh: &Mesh, c: usize) -> [[f64; 6]; 6] {
    let tri = cell_triangle(mesh, c);
    let mut k = [[0.0; 6]; 6];
    for &(l, w) in triangle_rule(4).points {
        let wq = w * tri.area;
        let dphi = p2_gradients(l, &tri.grad_bary);
        for i in 0..6 {
            for j in 0..6 {
                k[i][j] += wq * (dphi[i][0] * dphi[j][0] + dphi[i][1] * dphi[j][1]);
            }
        }
    }
    k
}

/// Right-hand side `(u, ∂φ/∂y) − (v, ∂φ/∂x)` of the unknowns (degree 3: the degree-4 rule is
/// exact).
fn load(mesh: &Mesh, field: &FlowField, dof: &[Option<usize>]) -> Vec<f64> {
    let mut rhs = vec![0.0; mesh.nodes.len().saturating_sub(1)];
    let rule = triangle_rule(4);
    for (c, nodes) in mesh.cells.iter().enumerate() {
        let tri = cell_triangle(mesh, c);
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
            }
        }
        for i in 0..6 {
            if let Some(di) = dof[nodes[i]] {
                rhs[di] += b[i];
            }
        }
    }
    rhs
}

#[cfg(test)]
mod tests {
    use super::*;

    /// ψ₁ = x² − y² and ψ₂ = xy lie in P2 and their curls (u, v) = (∂ψ/∂y, −∂ψ/∂x) =
    /// (−2y, −2x) and (x, −y) are interpolated exactly, so the least-squares ψ_h equals ψ up
    /// to the pinned constant (elementary calculus), from one factorisation for both; `solver`
    /// gives the same values as [`stream_function`]. Returns the largest error.
    fn largest_error_on_exact_curls(mesh: &Mesh, solver: &StreamFunctionSolver) -> f64 {
        let psi_exact: [fn(f64, f64) -> f64; 2] = [|x, y| x * x - y * y, |x, y| x * y];
        let curls: [fn(f64, f64) -> [f64; 2]; 2] = [|x, y| [-2.0 * y, -2.0 * x], |x, y| [x, -y]];
        let pin = mesh.boundary_edges[0].nodes[0];
        let mut largest: f64 = 0.0;
        for (psi_of, curl) in psi_exact.iter().zip(curls) {
            let field = FlowField {
                velocity: mesh.nodes.iter().map(|p| curl(p[0], p[1])).collect(),
                pressure: vec![0.0; mesh.n_vertices],
            };
            let psi = solver.solve(mesh, &field).unwrap();
            assert_eq!(psi, stream_function(mesh, &field).unwrap());
            let shift = psi_of(mesh.nodes[pin][0], mesh.nodes[pin][1]);
            for (n, p) in mesh.nodes.iter().enumerate() {
                largest = largest.max((psi[n] - (psi_of(p[0], p[1]) - shift)).abs());
            }
        }
        largest
    }

    #[test]
    fn one_factorisation_serves_several_fields_exactly() {
        let mesh =
            crate::mesh::structured::rectangle([0.0, 0.0], [2.0, 1.0], 4, 3, |_, _| [0.0, 0.0])
                .unwrap();
        let solver = StreamFunctionSolver::new(&mesh).unwrap();
        assert!(matches!(solver.factor, Factor::Whole { .. }), "too small to split");
        assert!(largest_error_on_exact_curls(&mesh, &solver) < 1e-11);
    }

    #[test]
    fn halves_factorised_on_two_threads_give_the_exact_stream_function() {
        // 40 × 20 jittered cells: about 3,300 nodes, each half of the top split well above
        // SPLIT_MIN_HALF; the pinned node is on the boundary, so it may leave any part.
        let jitter = |i: usize, j: usize| {
            let s = ((i * 7 + j * 13) % 11) as f64 / 11.0 - 0.5;
            [0.2 * s, -0.15 * s]
        };
        let mesh =
            crate::mesh::structured::rectangle([0.0, 0.0], [2.0, 1.0], 40, 20, jitter).unwrap();
        let solver = StreamFunctionSolver::new(&mesh).unwrap();
        assert!(matches!(solver.factor, Factor::Split { .. }), "large enough to split");
        assert!(largest_error_on_exact_curls(&mesh, &solver) < 1e-10);
    }

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
