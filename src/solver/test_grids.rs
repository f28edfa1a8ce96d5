//! Test matrices shared by the solver's unit tests: the 5-point grid Laplacian and its
//! nested-dissection order.

use std::ops::Range;

use faer::sparse::{SparseColMat, Triplet};

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
