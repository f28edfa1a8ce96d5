//! Geometric nested dissection of a mesh: recursive bisection of the cells and, for every
//! node, its place in the dissection tree (the smallest subtree holding all its cells).
//!
//! Takes a [`Mesh`]; returns per node a [`DissectionKey`] whose order is a fill-reducing
//! elimination order for matrices coupling the nodes of each cell (both halves of a split
//! before their separator). Used by the solver's `LDLᵀ` ordering and the stream function's
//! Cholesky; costs a few sorts instead of a minimum-degree search on the matrix graph.
//!
//! The cells are split recursively along one axis at one of a few candidate fractions of
//! their sorted centroids, the one cutting the fewest cells relative to its balance, until at
//! most [`LEAF_CELLS`] remain. A node shared by the two halves of a split lies in that split's
//! separator.
//!
//! # References
//! A. George, *Nested dissection of a regular finite element mesh*, SIAM J. Numer. Anal. 10
//! (1973) 345–363; R.J. Lipton, D.J. Rose, R.E. Tarjan, *Generalized nested dissection*,
//! SIAM J. Numer. Anal. 16 (1979) 346–358 (`O(n^{3/2})` work for planar meshes). From memory.

use super::Mesh;

/// Cells below which a subtree is not split further (its unknowns are few, so their order
/// inside it barely changes the fill).
pub const LEAF_CELLS: usize = 2;
/// Deepest split (2⁶⁰ leaves, far beyond any mesh).
const MAX_DEPTH: u32 = 60;

/// Sort key of a tree node in post-order: descendants first, the left subtree before the right.
pub type DissectionKey = (u64, std::cmp::Reverse<u32>);

/// A tree node: the split decisions from the root, left-aligned (`0` left, `1` right), and
/// their number.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
struct TreeNode {
    path: u64,
    depth: u32,
}

impl TreeNode {
    const ROOT: TreeNode = TreeNode { path: 0, depth: 0 };

    fn child(self, right: bool) -> TreeNode {
        let bit = if right { 1u64 << (63 - self.depth) } else { 0 };
        TreeNode { path: self.path | bit, depth: self.depth + 1 }
    }

    /// The deepest common ancestor of two tree nodes.
    fn common_ancestor(self, other: TreeNode) -> TreeNode {
        let shared = (self.path ^ other.path).leading_zeros().min(self.depth).min(other.depth);
        let mask = if shared == 0 { 0 } else { !0u64 << (64 - shared) };
        TreeNode { path: self.path & mask, depth: shared }
    }

    /// Sort key of the post-order: descendants first, the left subtree before the right.
    /// Filling the free bits with ones gives the largest path in the subtree; ancestors tie
    /// with their rightmost descendants and then come last by the smaller depth.
    fn post_order_key(self) -> DissectionKey {
        let free = if self.depth == 0 { !0u64 } else { !0u64 >> self.depth };
        (self.path | free, std::cmp::Reverse(self.depth))
    }
}

/// The dissection key of every node (`None` for a node in no cell): eliminating nodes in
/// increasing key order is the post-order of the dissection tree.
pub fn node_keys(mesh: &Mesh) -> Vec<Option<DissectionKey>> {
    let leaves = cell_leaves(mesh);
    let mut home: Vec<Option<TreeNode>> = vec![None; mesh.nodes.len()];
    for (cell, nodes) in mesh.cells.iter().enumerate() {
        for &node in nodes {
            home[node] = Some(home[node].map_or(leaves[cell], |t| t.common_ancestor(leaves[cell])));
        }
    }
    home.into_iter().map(|t| t.map(TreeNode::post_order_key)).collect()
}

/// The half of the top split a key's tree node lies in: `Some(0)` (first) or `Some(1)`
/// (second) below the root, `None` for the root, whose nodes form the top separator. In
/// key order the first half comes before the second and the separator last.
pub fn top_half(key: &DissectionKey) -> Option<u64> {
    (key.1.0 > 0).then_some(key.0 >> 63)
}

/// The items of `entries` in increasing order of `(key, item)` — the dissection order — and
/// how many of them lie in the first and in the second half of the top split
/// ([`top_half`]); the top separator's items come last.
pub fn in_dissection_order<T: Ord>(mut entries: Vec<(DissectionKey, T)>) -> (Vec<T>, [usize; 2]) {
    entries.sort_unstable();
    let count = |side| entries.iter().filter(|(key, _)| top_half(key) == Some(side)).count();
    let halves = [count(0), count(1)];
    (entries.into_iter().map(|(_, item)| item).collect(), halves)
}

/// A cell's centroid and bounding box: what the bisection reads, kept in one array that is
/// reordered with the cells so that every pass over a subtree reads contiguous memory; and
/// the leaf the bisection puts the cell in.
#[derive(Clone, Copy, Debug)]
struct CellBox {
    centroid: [f64; 2],
    lo: [f64; 2],
    hi: [f64; 2],
    cell: usize,
    leaf: TreeNode,
}

/// Cells of a subtree above which its two halves are bisected on two threads.
const PARALLEL_CELLS: usize = 8192;

/// The leaf of every cell in the recursive median bisection of the cell centroids.
fn cell_leaves(mesh: &Mesh) -> Vec<TreeNode> {
    let mut boxes: Vec<CellBox> = mesh
        .cells
        .iter()
        .enumerate()
        .map(|(cell, c)| {
            let p = [mesh.nodes[c[0]], mesh.nodes[c[1]], mesh.nodes[c[2]]];
            CellBox {
                centroid: [
                    (p[0][0] + p[1][0] + p[2][0]) / 3.0,
                    (p[0][1] + p[1][1] + p[2][1]) / 3.0,
                ],
                lo: [p[0][0].min(p[1][0]).min(p[2][0]), p[0][1].min(p[1][1]).min(p[2][1])],
                hi: [p[0][0].max(p[1][0]).max(p[2][0]), p[0][1].max(p[1][1]).max(p[2][1])],
                cell,
                leaf: TreeNode::ROOT,
            }
        })
        .collect();
    bisect(&mut boxes, TreeNode::ROOT);
    let mut leaves = vec![TreeNode::ROOT; mesh.cells.len()];
    boxes.iter().for_each(|b| leaves[b.cell] = b.leaf);
    leaves
}

/// Splits `cells`, the subtree `tree`, recursively until at most [`LEAF_CELLS`] remain and
/// records every cell's leaf; the halves of large subtrees on two threads (the result does
/// not depend on the threads). The recursion depth is at most [`MAX_DEPTH`].
fn bisect(cells: &mut [CellBox], tree: TreeNode) {
    if cells.len() <= LEAF_CELLS || tree.depth == MAX_DEPTH {
        cells.iter_mut().for_each(|b| b.leaf = tree);
        return;
    }
    let (axis, mid) = best_cut(cells);
    cells.select_nth_unstable_by(mid, |a, b| a.centroid[axis].total_cmp(&b.centroid[axis]));
    let parallel = cells.len() >= PARALLEL_CELLS;
    let (left, right) = cells.split_at_mut(mid);
    let (left_tree, right_tree) = (tree.child(false), tree.child(true));
    if parallel {
        rayon::join(|| bisect(left, left_tree), || bisect(right, right_tree));
    } else {
        bisect(left, left_tree);
        bisect(right, right_tree);
    }
}

/// Fractions of the cells left of a candidate cut.
const CUT_FRACTIONS: [f64; 7] = [0.35, 0.4, 0.45, 0.5, 0.55, 0.6, 0.65];

/// The axis and the number of cells on the left of the cut, among cuts at
/// [`CUT_FRACTIONS`] of the sorted centroids on either axis, that minimises the number of
/// cells straddling the cut line (a proxy of the separator size) divided by `f (1 − f)`
/// (penalising unbalanced halves).
fn best_cut(cells: &[CellBox]) -> (usize, usize) {
    let n = cells.len();
    let mids = CUT_FRACTIONS.map(|f| ((n as f64 * f) as usize).clamp(1, n - 1));
    // The order statistics the cut lines need: positions m − 1 and m of the sorted keys.
    let mut positions: Vec<usize> = mids.iter().flat_map(|&m| [m - 1, m]).collect();
    positions.sort_unstable();
    positions.dedup();
    let mut best = (f64::INFINITY, longer_axis(cells), n / 2);
    let mut keys = Vec::with_capacity(n);
    let mut sorted = vec![0.0; positions.len()];
    for axis in 0..2 {
        keys.clear();
        keys.extend(cells.iter().map(|b| b.centroid[axis]));
        select_many(&mut keys, &positions, 0, &mut sorted);
        let key_at = |p: usize| sorted[positions.binary_search(&p).expect("a selected position")];
        let lines = mids.map(|m| 0.5 * (key_at(m - 1) + key_at(m)));
        let mut straddling = [0usize; CUT_FRACTIONS.len()];
        for b in cells {
            let (lo, hi) = (b.lo[axis], b.hi[axis]);
            for (count, &line) in straddling.iter_mut().zip(&lines) {
                *count += usize::from(lo < line && line < hi);
            }
        }
        for ((&f, &mid), &count) in CUT_FRACTIONS.iter().zip(&mids).zip(&straddling) {
            let score = (count as f64 + 1.0) / (f * (1.0 - f));
            if score < best.0 {
                best = (score, axis, mid);
            }
        }
    }
    (best.1, best.2)
}

/// `out[i]` = the `positions[i]`-th smallest of `keys` (positions relative to `base`,
/// ascending and distinct), by recursive selection: `O(n log k)` for `k` positions instead
/// of a full sort's `O(n log n)`. Reorders `keys`.
fn select_many(keys: &mut [f64], positions: &[usize], base: usize, out: &mut [f64]) {
    if positions.is_empty() {
        return;
    }
    let middle = positions.len() / 2;
    let at = positions[middle] - base;
    let (left, pivot, right) = keys.select_nth_unstable_by(at, f64::total_cmp);
    out[middle] = *pivot;
    let (out_left, out_right) = out.split_at_mut(middle);
    select_many(left, &positions[..middle], base, out_left);
    select_many(right, &positions[middle + 1..], base + at + 1, &mut out_right[1..]);
}

/// 0 when the bounding box of the centroids of `cells` is wider than tall, else 1.
fn longer_axis(cells: &[CellBox]) -> usize {
    let mut lo = [f64::INFINITY; 2];
    let mut hi = [f64::NEG_INFINITY; 2];
    for b in cells {
        for k in 0..2 {
            lo[k] = lo[k].min(b.centroid[k]);
            hi[k] = hi[k].max(b.centroid[k]);
        }
    }
    if hi[0] - lo[0] >= hi[1] - lo[1] { 0 } else { 1 }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn post_order_puts_descendants_first_and_left_before_right() {
        let root = TreeNode::ROOT;
        let (l, r) = (root.child(false), root.child(true));
        let (rl, rr) = (r.child(false), r.child(true));
        let mut nodes = vec![root, rr, l, r, rl];
        nodes.sort_by_key(|t| t.post_order_key());
        assert_eq!(nodes, vec![l, rl, rr, r, root]);
        assert_eq!(rl.common_ancestor(rr), r);
        assert_eq!(rl.common_ancestor(l), root);
        assert_eq!(rr.common_ancestor(r), r);
    }

    #[test]
    fn keys_do_not_depend_on_the_threads() {
        // 9,600 cells: the top splits run on two threads ([`PARALLEL_CELLS`]).
        let jitter = |i: usize, j: usize| [0.05 * ((i * 5 + j * 3) % 7) as f64 - 0.15, 0.0];
        let mesh = crate::mesh::structured::rectangle([0.0, 0.0], [3.0, 1.0], 120, 40, jitter)
            .expect("valid mesh");
        let keys_on = |threads: usize| {
            let pool = rayon::ThreadPoolBuilder::new().num_threads(threads).build().unwrap();
            pool.install(|| node_keys(&mesh))
        };
        let one = keys_on(1);
        assert!(one.iter().all(Option::is_some));
        assert_eq!(one, keys_on(2));
        let split = one.iter().flatten().filter(|key| top_half(key).is_some()).count();
        assert!(split > 0 && split < one.len(), "both halves and a separator");
    }
}
