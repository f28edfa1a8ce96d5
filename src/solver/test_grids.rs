//! Test matrices shared by the solver's unit tests: the 5-point grid Laplacian, its
//! nested-dissection order, and faer's own `LDLᵀ` of it as the reference.

use std::ops::Range;

use faer::dyn_stack::{MemBuffer, MemStack};
use faer::linalg::cholesky::ldlt::factor::LdltRegularization;
use faer::perm::PermRef;
use faer::sparse::linalg::cholesky::{
    CholeskySymbolicParams, LdltRef, SymbolicCholesky, SymmetricOrdering,
    factorize_symbolic_cholesky,
};
use faer::sparse::{SparseColMat, Triplet};
use faer::{Conj, MatMut, Par, Side};

/// Nested-dissection order of the nodes `rows × cols` of an `m`-wide grid: both halves
/// of the longer side, then the separating grid line.
pub fn grid_dissection(rows: Range<usize>, cols: Range<usize>, m: usize, out: &mut Vec<usize>) {
    let node = |i: usize, j: usize| i * m + j;
    if rows.len() * cols.len() <= 16 {
        rows.clone().for_each(|i| cols.clone().for_each(|j| out.push(node(i, j))));
        return;
    }
    if rows.len() >= cols.len() {
        let mid = rows.start + rows.len() / 2;
        grid_dissection(rows.start..mid, cols.clone(), m, out);
        grid_dissection(mid + 1..rows.end, cols.clone(), m, out);
        cols.for_each(|j| out.push(node(mid, j)));
    } else {
        let mid = cols.start + cols.len() / 2;
        grid_dissection(rows.clone(), cols.start..mid, m, out);
        grid_dissection(rows.clone(), mid + 1..cols.end, m, out);
        rows.for_each(|i| out.push(node(i, mid)));
    }
}

/// The 5-point Laplacian of an `m × m` grid plus `shift · I`, both triangles.
pub fn grid_matrix(m: usize, shift: f64) -> SparseColMat<usize, f64> {
    let mut triplets = Vec::new();
    for i in 0..m {
        for j in 0..m {
            let k = i * m + j;
            triplets.push(Triplet::new(k, k, 4.0 + shift + 0.01 * (k % 7) as f64));
            let mut couple = |l: usize| {
                triplets.push(Triplet::new(k, l, -1.0 - 0.001 * (l % 3) as f64));
                triplets.push(Triplet::new(l, k, -1.0 - 0.001 * (l % 3) as f64));
            };
            if i + 1 < m {
                couple(k + m);
            }
            if j + 1 < m {
                couple(k + 1);
            }
        }
    }
    SparseColMat::try_new_from_triplets(m * m, m * m, &triplets).unwrap()
}

/// The inverse of the permutation `perm`.
pub fn inverse(perm: &[usize]) -> Vec<usize> {
    let mut inv = vec![0; perm.len()];
    perm.iter().enumerate().for_each(|(k, &p)| inv[p] = k);
    inv
}

/// faer's own sparse `LDLᵀ` of `a` (lower triangle read, no regularisation) in the order
/// `perm`: the reference the solver's tests compare against.
pub fn faer_factor(
    a: &SparseColMat<usize, f64>,
    perm: &[usize],
    params: CholeskySymbolicParams<'_>,
) -> (SymbolicCholesky<usize>, Vec<f64>) {
    let (n, inv) = (perm.len(), inverse(perm));
    let ordering = SymmetricOrdering::Custom(PermRef::new_checked(perm, &inv, n));
    let sym = factorize_symbolic_cholesky(a.symbolic(), Side::Lower, ordering, params).unwrap();
    let mut values = vec![0.0; sym.len_val()];
    let mut buf =
        MemBuffer::new(sym.factorize_numeric_ldlt_scratch::<f64>(Par::Seq, Default::default()));
    sym.factorize_numeric_ldlt(
        &mut values,
        a.as_ref(),
        Side::Lower,
        LdltRegularization::default(),
        Par::Seq,
        MemStack::new(&mut buf),
        Default::default(),
    )
    .unwrap();
    (sym, values)
}

/// `A⁻¹ rhs` by faer's own solve with the factor of [`faer_factor`].
pub fn faer_solve(sym: &SymbolicCholesky<usize>, values: &[f64], rhs: &[f64]) -> Vec<f64> {
    let mut x = rhs.to_vec();
    let n = x.len();
    let mut buf = MemBuffer::new(sym.solve_in_place_scratch::<f64>(1, Par::Seq));
    LdltRef::new(sym, values).solve_in_place_with_conj(
        Conj::No,
        MatMut::from_column_major_slice_mut(&mut x, n, 1),
        Par::Seq,
        MemStack::new(&mut buf),
    );
    x
}
