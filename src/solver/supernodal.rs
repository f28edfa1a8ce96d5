//! Forward and backward substitution with faer's supernodal `LDLᵀ` factor, streaming every
//! supernode's block once per sweep, on two threads where the elimination tree splits.
//!
//! Takes the symbolic structure and the values of a supernodal factor `P A Pᵀ = L D Lᵀ`
//! (faer's storage: supernode `s` owns the columns `begin[s]..end[s]` of `L`, stored as one
//! dense column-major block of `c + r` rows, the `c × c` diagonal block, whose diagonal holds
//! `D`, above the `r` rows of the supernode's row pattern `R`); solves `L D Lᵀ y = z` in place
//! in the factor's (permuted) numbering.
//!
//! Both sweeps work on a dense vector `w = [y_s; y_R]` per supernode and walk its block
//! column by column:
//! * forward, supernodes in increasing order, `w = [y_s; 0]`, columns `j` ascending:
//!   `w_{j+1..} −= L_{j+1.., j} w_j`; then `y_s ← w_s` and `y_R += w_R` (so
//!   `y_s ← L_ss⁻¹ y_s`, `y_R ← y_R − L_Rs y_s`);
//! * backward, supernodes in decreasing order, `w = [y_s; y_R]`, columns `j` descending:
//!   `w_j ← w_j / d_j − L_{j+1.., j} · w_{j+1..}`; then `y_s ← w_s` (so
//!   `y_s ← L_ssᵀ⁻¹ (D_s⁻¹ y_s − L_Rsᵀ y_R)`).
//!
//! Every column is one contiguous run of memory, read upwards forward and downwards
//! backward, so the factor streams through the prefetcher; `y_R` is gathered or scattered
//! once per supernode. faer's own solve does the same algebra through its general dense
//! kernels, whose per-call cost dominates on the many small supernodes of a finite-element
//! factor (measured: docs/performance.md, "Memory bandwidth and the IMEX step").
//!
//! **Two threads.** Below the chain of top separators the elimination tree splits into
//! independent subtrees ([`SweepSplit`]). The forward sweep runs two groups of them at once,
//! each adding its updates of the top rows into its own buffer; the buffers are summed and the
//! top supernodes finished on one thread. The backward sweep does the top first and then the
//! two groups at once, reading the top rows only.
//!
//! **Invariant:** no I/O; the work buffers are one `w` of the largest block height per
//! thread and, with two threads, one copy of the top rows per group.
//!
//! # References
//! J.W.H. Liu, *The multifrontal method for sparse matrix solution: theory and practice*,
//! SIAM Review 34 (1992) 82–109 (elimination trees, independent subtrees); E. Ng,
//! B.W. Peyton, *Block sparse Cholesky algorithms on advanced uniprocessor computers*, SIAM J.
//! Sci. Comput. 14 (1993) 1034–1056 (supernodal storage and substitution). Both from memory.

use std::ops::Range;

use faer::dyn_stack::{MemBuffer, MemStack};
use faer::sparse::linalg::cholesky::supernodal::SymbolicSupernodalCholesky;
use faer::sparse::linalg::cholesky::{LdltRef, SymbolicCholesky, SymbolicCholeskyRaw};
use faer::{Conj, MatMut, Par};

/// `rhs ← A⁻¹ rhs` for a faer `LDLᵀ` factorisation (`symbolic`, `values`) of `A`: through
/// this module's sweeps when the factor is supernodal and ordered (on two threads when
/// `split` is given and rayon's pool has two), through faer's own solve otherwise (small
/// simplicial factors).
pub fn solve_ldlt_in_place(
    symbolic: &SymbolicCholesky<usize>,
    values: &[f64],
    split: Option<&SweepSplit>,
    rhs: &mut [f64],
) {
    if let (SymbolicCholeskyRaw::Supernodal(raw), Some(perm)) = (symbolic.raw(), symbolic.perm()) {
        let (fwd, inv) = perm.arrays();
        let split = split.filter(|_| rayon::current_num_threads() > 1);
        let mut permuted: Vec<f64> = fwd.iter().map(|&i| rhs[i]).collect();
        SupernodalLdlt::new(raw, values).solve_in_place(&mut permuted, split);
        rhs.iter_mut().zip(inv).for_each(|(r, &k)| *r = permuted[k]);
        return;
    }
    let n = rhs.len();
    let mut buf = MemBuffer::new(symbolic.solve_in_place_scratch::<f64>(1, Par::Seq));
    LdltRef::new(symbolic, values).solve_in_place_with_conj(
        Conj::No,
        MatMut::from_column_major_slice_mut(rhs, n, 1),
        Par::Seq,
        MemStack::new(&mut buf),
    );
}

/// [`SweepSplit::find`] for a supernodal factor; `None` for a simplicial one.
pub fn sweep_split(symbolic: &SymbolicCholesky<usize>) -> Option<SweepSplit> {
    match symbolic.raw() {
        SymbolicCholeskyRaw::Supernodal(raw) => SweepSplit::find(raw),
        SymbolicCholeskyRaw::Simplicial(_) => None,
    }
}

/// A supernodal `LDLᵀ` factor as raw arrays (see the module docs).
#[derive(Clone, Copy, Debug)]
pub struct SupernodalLdlt<'a> {
    structure: Structure<'a>,
    /// `values[val_ptr[s]..val_ptr[s + 1]]`: supernode `s`'s column-major block (faer's
    /// layout), or `values[packed[s]..packed[s + 1]]` its packed columns ([`pack_in_place`]).
    values: &'a [f64],
    packed: Option<&'a [usize]>,
}

/// Where every supernode's packed block starts ([`pack_in_place`]), and the total length.
pub fn packed_pointers(symbolic: &SymbolicSupernodalCholesky<usize>) -> Vec<usize> {
    let f = Structure::of(symbolic);
    let mut ptr = Vec::with_capacity(f.begin.len() + 1);
    ptr.push(0);
    for s in 0..f.begin.len() {
        let (cols, rows) = (f.end[s] - f.begin[s], f.end[s] - f.begin[s] + f.pattern(s).len());
        ptr.push(ptr[s] + packed_offset(cols, rows));
    }
    ptr
}

/// Rewrites faer's supernodal `values` (on `symbolic`) in place to the packed layout of
/// `packed` (from [`packed_pointers`]): each column from its diagonal down, the columns of
/// a supernode one after another, the unused upper triangles of the diagonal blocks dropped.
/// The sweeps then read one unbroken stream (measured: docs/performance.md, "Memory bandwidth and the
/// IMEX step"). Every value moves to a lower index, so a forward pass of `copy_within` is
/// safe; `values` is truncated to the packed length.
///
/// # Panics
/// When `values` does not have the structure's length (a programming error).
pub fn pack_in_place(
    symbolic: &SymbolicSupernodalCholesky<usize>,
    packed: &[usize],
    values: &mut Vec<f64>,
) {
    assert_eq!(values.len(), symbolic.len_val(), "factor values of another structure");
    let f = Structure::of(symbolic);
    for (s, &to) in packed[..f.begin.len()].iter().enumerate() {
        let (cols, rows) = (f.end[s] - f.begin[s], f.end[s] - f.begin[s] + f.pattern(s).len());
        for j in 0..cols {
            let from = f.val_ptr[s] + j * rows + j;
            values.copy_within(from..from + rows - j, to + packed_offset(j, rows));
        }
    }
    values.truncate(packed[f.begin.len()]);
    values.shrink_to_fit();
}

/// Packed offset of column `j` of a block of `rows` rows: `Σ_{i<j} (rows − i)`, the
/// lower-triangle entries of the block's first `j` columns.
pub(super) fn packed_offset(j: usize, rows: usize) -> usize {
    j * rows - j * j.saturating_sub(1) / 2
}

/// Where the supernodal elimination tree splits into two independent groups of subtrees
/// below a chain of top supernodes; found once per symbolic structure by
/// [`SweepSplit::find`].
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct SweepSplit {
    /// Supernodes of the two groups (`0..b.start` and `b`) and of the top chain.
    a: Range<usize>,
    b: Range<usize>,
    top: Range<usize>,
    /// First column of the second group and of the top chain.
    b_column: usize,
    top_column: usize,
}

impl SweepSplit {
    /// The split of `symbolic`'s supernodal elimination tree, or `None` when it has no two
    /// independent groups worth a thread each (a group holds under a sixth of the factor)
    /// or its supernodes are not numbered in post-order.
    ///
    /// The parent of supernode `s` is the supernode holding the first row of its pattern.
    /// From the last supernode (the root) down the chain of only children to the first node
    /// `v` with several children; those children's subtrees are consecutive ranges of
    /// supernodes, cut into two groups of about equal stored values.
    pub fn find(symbolic: &SymbolicSupernodalCholesky<usize>) -> Option<SweepSplit> {
        let factor = Structure::of(symbolic);
        let n_super = factor.begin.len();
        if n_super < 2 {
            return None;
        }
        let mut supernode_of_column = vec![0; factor.n];
        for s in 0..n_super {
            supernode_of_column[factor.begin[s]..factor.end[s]].fill(s);
        }
        let parent: Vec<Option<usize>> = (0..n_super)
            .map(|s| factor.pattern(s).first().map(|&row| supernode_of_column[row]))
            .collect();
        let mut children = vec![Vec::new(); n_super];
        for (s, p) in parent.iter().enumerate() {
            if let Some(p) = *p {
                if p <= s {
                    return None;
                }
                children[p].push(s);
            }
        }
        // Post-order: the tree is one root, the last supernode; every subtree is the range
        // [first descendant, root of the subtree].
        if parent.iter().filter(|p| p.is_none()).count() != 1 || parent[n_super - 1].is_some() {
            return None;
        }
        let mut first: Vec<usize> = (0..n_super).collect();
        for s in 0..n_super {
            if let Some(p) = parent[s] {
                first[p] = first[p].min(first[s]);
            }
        }
        let mut v = n_super - 1;
        while children[v].len() == 1 {
            if children[v][0] + 1 != v {
                return None;
            }
            v = children[v][0];
        }
        let kids = &children[v];
        // The children's subtrees tile 0..v: consecutive, the first from 0, the last up to v.
        let consecutive = kids.windows(2).all(|k| first[k[1]] == k[0] + 1);
        if kids.len() < 2 || first[v] != 0 || !consecutive || kids.last() != Some(&(v - 1)) {
            return None;
        }
        let weight = |r: Range<usize>| factor.val_ptr[r.end] - factor.val_ptr[r.start];
        let total = weight(0..v);
        // Cut after the child where the running weight first reaches half.
        let cut = kids.iter().position(|&c| 2 * weight(0..c + 1) >= total)?;
        let cut = cut.min(kids.len() - 2);
        let b_start = kids[cut] + 1;
        let (a, b) = (0..b_start, b_start..v);
        if 6 * weight(a.clone()).min(weight(b.clone())) < factor.val_ptr[n_super] {
            return None;
        }
        Some(SweepSplit {
            b_column: factor.begin[b.start],
            top_column: factor.begin[v],
            a,
            b,
            top: v..n_super,
        })
    }
}

/// The symbolic arrays of a supernodal factor of order `n`.
#[derive(Clone, Copy, Debug)]
struct Structure<'a> {
    n: usize,
    /// First column of every supernode, and one past its last column.
    begin: &'a [usize],
    end: &'a [usize],
    /// `row_idx[row_ptr[s]..row_ptr[s + 1]]`: the rows below supernode `s`'s diagonal block.
    row_ptr: &'a [usize],
    row_idx: &'a [usize],
    /// Where each supernode's block starts in the values.
    val_ptr: &'a [usize],
}

impl<'a> Structure<'a> {
    fn of(symbolic: &'a SymbolicSupernodalCholesky<usize>) -> Self {
        Structure {
            n: symbolic.nrows(),
            begin: symbolic.supernode_begin(),
            end: symbolic.supernode_end(),
            row_ptr: symbolic.col_ptr_for_row_idx(),
            row_idx: symbolic.row_idx(),
            val_ptr: symbolic.col_ptr_for_val(),
        }
    }

    fn pattern(&self, s: usize) -> &'a [usize] {
        &self.row_idx[self.row_ptr[s]..self.row_ptr[s + 1]]
    }
}

impl<'a> SupernodalLdlt<'a> {
    /// Views faer's supernodal structure with the numeric `values` of an `LDLᵀ`
    /// factorisation on it.
    ///
    /// # Panics
    /// When `values` does not have the structure's length (a programming error).
    pub fn new(symbolic: &'a SymbolicSupernodalCholesky<usize>, values: &'a [f64]) -> Self {
        assert_eq!(values.len(), symbolic.len_val(), "factor values of another structure");
        SupernodalLdlt { structure: Structure::of(symbolic), values, packed: None }
    }

    /// Like [`SupernodalLdlt::new`], for values packed by [`pack_in_place`] with `packed`.
    ///
    /// # Panics
    /// When `values` does not have the packed length (a programming error).
    pub fn new_packed(
        symbolic: &'a SymbolicSupernodalCholesky<usize>,
        packed: &'a [usize],
        values: &'a [f64],
    ) -> Self {
        assert_eq!(values.len(), *packed.last().unwrap_or(&0), "packed values of another size");
        SupernodalLdlt { structure: Structure::of(symbolic), values, packed: Some(packed) }
    }

    /// Order of the factor.
    pub fn n(&self) -> usize {
        self.structure.n
    }

    fn n_supernodes(&self) -> usize {
        self.structure.begin.len()
    }

    /// Supernode `s`: first column, number of columns, row pattern, column-major block.
    pub(super) fn supernode(&self, s: usize) -> Supernode<'a> {
        let f = &self.structure;
        let ptr = self.packed.unwrap_or(f.val_ptr);
        let block = &self.values[ptr[s]..ptr[s + 1]];
        let (start, cols, pattern) = (f.begin[s], f.end[s] - f.begin[s], f.pattern(s));
        Supernode { start, cols, pattern, block, packed: self.packed.is_some() }
    }

    /// Tallest block (rows of the work vector `w`) among `supernodes`.
    fn max_rows(&self, supernodes: Range<usize>) -> usize {
        supernodes.map(|s| self.supernode(s).rows()).max().unwrap_or(0)
    }

    /// Overwrites `y` (length [`SupernodalLdlt::n`], the factor's numbering) with
    /// `(L D Lᵀ)⁻¹ y`; on two threads when `split` (from [`SweepSplit::find`] on the same
    /// structure) is given.
    ///
    /// # Panics
    /// When `y` has the wrong length (a programming error).
    pub fn solve_in_place(&self, y: &mut [f64], split: Option<&SweepSplit>) {
        assert_eq!(y.len(), self.n(), "right-hand side of another size");
        match split {
            Some(split) => self.split_sweeps(y, split),
            None => {
                let all = 0..self.n_supernodes();
                let mut w = vec![0.0; self.max_rows(all.clone())];
                self.forward(all.clone(), &mut Rows::whole(y), &mut w);
                self.backward(all, &mut Rows::whole(y), &mut w);
            }
        }
    }

    fn split_sweeps(&self, y: &mut [f64], split: &SweepSplit) {
        let n_top = self.n() - split.top_column;
        let mut w_top = vec![0.0; self.max_rows(split.top.clone())];
        // Forward: both groups at once, each into its own copy of the top rows.
        let (groups, top) = y.split_at_mut(split.top_column);
        let (ya, yb) = groups.split_at_mut(split.b_column);
        let (top_a, top_b) = rayon::join(
            || self.forward_group(split.a.clone(), ya, 0, split.top_column, n_top),
            || self.forward_group(split.b.clone(), yb, split.b_column, split.top_column, n_top),
        );
        for (t, (a, b)) in top.iter_mut().zip(top_a.iter().zip(&top_b)) {
            *t += a + b;
        }
        self.forward(split.top.clone(), &mut Rows::whole(y), &mut w_top);
        // Backward: the top first, then both groups at once reading the top rows.
        self.backward(split.top.clone(), &mut Rows::whole(y), &mut w_top);
        let (groups, top) = y.split_at_mut(split.top_column);
        let (ya, yb) = groups.split_at_mut(split.b_column);
        let top = &*top;
        rayon::join(
            || self.backward_group(split.a.clone(), ya, 0, top, split.top_column),
            || self.backward_group(split.b.clone(), yb, split.b_column, top, split.top_column),
        );
    }

    /// Forward sweep over one group (its columns `own`, starting at `own_offset`); returns
    /// its updates of the top rows (from `top_offset`, `n_top` of them).
    pub(super) fn forward_group(
        &self,
        supernodes: Range<usize>,
        own: &mut [f64],
        own_offset: usize,
        top_offset: usize,
        n_top: usize,
    ) -> Vec<f64> {
        let mut top = vec![0.0; n_top];
        let mut w = vec![0.0; self.max_rows(supernodes.clone())];
        let mut rows = Rows { own, own_offset, top: TopRows::Write(&mut top), top_offset };
        self.forward(supernodes, &mut rows, &mut w);
        top
    }

    /// Backward sweep over one group, reading the (final) top rows.
    pub(super) fn backward_group(
        &self,
        supernodes: Range<usize>,
        own: &mut [f64],
        own_offset: usize,
        top: &[f64],
        top_offset: usize,
    ) {
        let mut w = vec![0.0; self.max_rows(supernodes.clone())];
        let mut rows = Rows { own, own_offset, top: TopRows::Read(top), top_offset };
        self.backward(supernodes, &mut rows, &mut w);
    }

    fn forward(&self, supernodes: Range<usize>, y: &mut Rows<'_>, w: &mut [f64]) {
        for s in supernodes {
            self.supernode(s).forward(y, w);
        }
    }

    fn backward(&self, supernodes: Range<usize>, y: &mut Rows<'_>, w: &mut [f64]) {
        for s in supernodes.rev() {
            self.supernode(s).backward(y, w);
        }
    }
}

/// The part of `y` one sweep owns (`own`, global rows from `own_offset`) and the top rows
/// above its subtrees (global rows from `top_offset`), written (forward, a private buffer)
/// or read (backward, shared).
struct Rows<'y> {
    own: &'y mut [f64],
    own_offset: usize,
    top: TopRows<'y>,
    top_offset: usize,
}

enum TopRows<'y> {
    Write(&'y mut [f64]),
    Read(&'y [f64]),
}

impl<'y> Rows<'y> {
    /// All of `y`, no top rows.
    fn whole(y: &'y mut [f64]) -> Self {
        let n = y.len();
        Rows { own: y, own_offset: 0, top: TopRows::Read(&[]), top_offset: n }
    }

    /// The pattern split into rows this sweep owns and top rows (patterns are sorted).
    fn split<'p>(&self, pattern: &'p [usize]) -> (&'p [usize], &'p [usize]) {
        pattern.split_at(pattern.partition_point(|&r| r < self.top_offset))
    }
}

/// One supernode of the factor (see [`SupernodalLdlt::supernode`]).
pub(super) struct Supernode<'a> {
    /// First column.
    pub start: usize,
    /// Columns (`start..start + cols`).
    pub cols: usize,
    /// Rows below the diagonal block, ascending.
    pub pattern: &'a [usize],
    /// Column-major block of `cols + pattern.len()` rows, or its packed columns.
    pub block: &'a [f64],
    /// Whether `block` holds the packed columns ([`pack_in_place`]).
    pub packed: bool,
}

impl Supernode<'_> {
    /// Rows of the block: the diagonal block's and the pattern's.
    pub fn rows(&self) -> usize {
        self.cols + self.pattern.len()
    }

    /// Where column `j`'s diagonal entry is stored in `block`.
    fn diagonal_index(&self, j: usize) -> usize {
        let rows = self.rows();
        if self.packed { packed_offset(j, rows) } else { j * rows + j }
    }

    /// The pivot `d_j`.
    fn pivot(&self, j: usize) -> f64 {
        self.block[self.diagonal_index(j)]
    }

    /// Column `j` below the diagonal (rows `j + 1..`, diagonal block and pattern).
    fn below_diagonal(&self, j: usize) -> &[f64] {
        let first = self.diagonal_index(j) + 1;
        &self.block[first..first + self.rows() - j - 1]
    }

    /// Columns of this supernode below `top_offset`, the ones a sweep eliminates (all of
    /// them, except for a supernode of [`super::split_ldlt`] that straddles its separator:
    /// its block's separator columns then count as rows of the pattern).
    fn eliminated(&self, top_offset: usize) -> usize {
        self.cols.min(top_offset.saturating_sub(self.start))
    }

    /// `y_s ← L_ss⁻¹ y_s`, `y_R ← y_R − L_Rs y_s` (module docs).
    fn forward(&self, y: &mut Rows<'_>, w: &mut [f64]) {
        let (c, w) = (self.cols, &mut w[..self.rows()]);
        let e = self.eliminated(y.top_offset);
        let own_start = self.start - y.own_offset;
        w[..e].copy_from_slice(&y.own[own_start..own_start + e]);
        w[e..].fill(0.0);
        for j in 0..e {
            let wj = w[j];
            w[j + 1..].iter_mut().zip(self.below_diagonal(j)).for_each(|(v, l)| *v -= l * wj);
        }
        y.own[own_start..own_start + e].copy_from_slice(&w[..e]);
        let (own_rows, top_rows) = y.split(self.pattern);
        let (w_own, w_top) = w[c..].split_at(own_rows.len());
        for (&row, a) in own_rows.iter().zip(w_own) {
            y.own[row - y.own_offset] += a;
        }
        if let TopRows::Write(top) = &mut y.top {
            if e < c {
                let first = self.start + e - y.top_offset;
                top[first..first + c - e].iter_mut().zip(&w[e..c]).for_each(|(t, a)| *t += a);
            }
            for (&row, a) in top_rows.iter().zip(w_top) {
                top[row - y.top_offset] += a;
            }
        }
    }

    /// `y_s ← L_ssᵀ⁻¹ (D_s⁻¹ y_s − L_Rsᵀ y_R)` (module docs).
    fn backward(&self, y: &mut Rows<'_>, w: &mut [f64]) {
        let (c, rows) = (self.cols, self.rows());
        let e = self.eliminated(y.top_offset);
        let w = &mut w[..rows];
        let own_start = self.start - y.own_offset;
        w[..e].copy_from_slice(&y.own[own_start..own_start + e]);
        let (own_rows, top_rows) = y.split(self.pattern);
        let top: &[f64] = match &y.top {
            TopRows::Read(top) => top,
            TopRows::Write(top) => top,
        };
        if e < c {
            let first = self.start + e - y.top_offset;
            w[e..c].copy_from_slice(&top[first..first + c - e]);
        }
        let (w_own, w_top) = w[c..].split_at_mut(own_rows.len());
        for (g, &row) in w_own.iter_mut().zip(own_rows) {
            *g = y.own[row - y.own_offset];
        }
        for (g, &row) in w_top.iter_mut().zip(top_rows) {
            *g = top[row - y.top_offset];
        }
        for j in (0..e).rev() {
            w[j] = w[j] / self.pivot(j) - dot_descending(self.below_diagonal(j), &w[j + 1..]);
        }
        y.own[own_start..own_start + e].copy_from_slice(&w[..e]);
    }
}

/// `y ← (L D Lᵀ)⁻¹ y` for a dense `LDLᵀ` factor of order `y.len()` stored column-major in
/// `block` (`L` strictly below the diagonal, `D` on it; faer's dense layout): one supernode
/// with an empty pattern.
///
/// # Panics
/// When `block` is not `y.len()²` long (a programming error).
pub(super) fn solve_dense_ldlt_in_place(block: &[f64], y: &mut [f64]) {
    let n = y.len();
    assert_eq!(block.len(), n * n, "dense factor of another order");
    let dense = Supernode { start: 0, cols: n, pattern: &[], block, packed: false };
    let mut w = vec![0.0; n];
    dense.forward(&mut Rows::whole(y), &mut w);
    dense.backward(&mut Rows::whole(y), &mut w);
}

/// Number of independent partial sums in the dot products (lets the compiler vectorise the
/// reduction without reassociating it).
const LANES: usize = 8;

/// `Σ a_i b_i` over the common length, reading both from the end (the backward sweep walks
/// the factor towards lower addresses; reading every column downwards keeps one descending
/// stream for the prefetcher: measured 0.095 s against 0.15 s upwards at 607k unknowns).
fn dot_descending(a: &[f64], b: &[f64]) -> f64 {
    let n = a.len().min(b.len());
    let (a, b) = (&a[..n], &b[..n]);
    let mut acc = [0.0; LANES];
    let head = n % LANES;
    for (x, y) in a[head..].rchunks_exact(LANES).zip(b[head..].rchunks_exact(LANES)) {
        for k in 0..LANES {
            acc[k] += x[k] * y[k];
        }
    }
    let front: f64 = a[..head].iter().zip(&b[..head]).map(|(x, y)| x * y).sum();
    acc.iter().sum::<f64>() + front
}
