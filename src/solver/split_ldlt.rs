//! Sparse `LDLᵀ` factorised on two threads along the top split of a nested dissection.
//!
//! Takes the full pattern and values of a symmetric matrix `A`, a permutation `P` that numbers
//! the unknowns `[first half | second half | separator]` with no entry coupling the halves
//! ([`super::ordering::nested_dissection_halves`]), and the expected pivot signs; returns
//!
//! ```text
//! P A Pᵀ = [A₁₁  0   A₁ₜ]  = L D Lᵀ,   L = [L₁₁  0    0 ]
//!          [0   A₂₂  A₂ₜ]                  [0    L₂₂  0 ]
//!          [Aₜ₁ Aₜ₂  Aₜₜ]                  [Lₜ₁  Lₜ₂  Lₜ]
//! ```
//!
//! with `A_hh = L_hh D_h L_hhᵀ`, `Lₜₕ = Aₜₕ L_hh⁻ᵀ D_h⁻¹` and the dense factorisation
//! `Lₜ Dₜ Lₜᵀ = S` of the separator's Schur complement `S = Aₜₜ − Σ_h Lₜₕ D_h Lₜₕᵀ`.
//!
//! **How.** Each half `h` is factorised by faer's supernodal `LDLᵀ`, on its own thread, as
//! the matrix `M_h = [A_hh A_hₜ; Aₜₕ c I]` in a local numbering (the half, then the
//! separator). The factorisation is left-looking, so the columns of the half come out as
//! `L_hh`, `D_h` and `Lₜₕ` whatever the separator block holds; its separator columns
//! (a factorisation of `c I − Lₜₕ D_h Lₜₕᵀ`, `c` huge) are never read. The update `Lₜₕ D_h Lₜₕᵀ` is
//! then summed from the half's supernodes (one dense product `W D Wᵀ` of the separator rows
//! `W` of each), `S` is formed and factorised by faer's dense `LDLᵀ` with the same dynamic
//! regularisation as the sparse one. A supernode may hold the last columns of a half and
//! the first of the separator ([`super::supernodal`]'s sweeps eliminate only the former).
//!
//! **Why.** faer's sparse numeric factorisation uses threads only inside its dense kernels,
//! measured slower than one thread on two cores (`refs/stack-notes.md`); the two halves of a
//! nested dissection are independent, so each takes a core. Measured on the 1M-unknown
//! default case: docs/performance.md.
//!
//! **Invariant:** no I/O; the triangular solves are [`super::supernodal`]'s, both halves on
//! their own thread, the separator on one.
//!
//! # References
//! A. George, *Nested dissection of a regular finite element mesh*, SIAM J. Numer. Anal. 10
//! (1973) 345–363 (the block elimination); J.W.H. Liu, *The multifrontal method for sparse
//! matrix solution: theory and practice*, SIAM Review 34 (1992) 82–109 (independent subtrees,
//! Schur-complement updates). Both from memory.

use faer::dyn_stack::{MemBuffer, MemStack, StackReq};
use faer::linalg::cholesky::ldlt::factor::{
    LdltRegularization, cholesky_in_place, cholesky_in_place_scratch,
};
use faer::linalg::matmul::triangular::{BlockStructure, matmul};
use faer::sparse::linalg::SymbolicSupernodalParams;
use faer::sparse::linalg::cholesky::supernodal::SymbolicSupernodalCholesky;
use faer::sparse::linalg::cholesky::{simplicial, supernodal};
use faer::sparse::{FaerError, SparseColMatRef, SymbolicSparseColMat, SymbolicSparseColMatRef};
use faer::{Accum, Mat, MatMut, MatRef, Par};

use super::supernodal::{
    self as supernodal_sweeps, SupernodalLdlt, Supernode, packed_offset, solve_dense_ldlt_in_place,
};

/// Unknowns in the two halves of a bisected ordering; the separator is the rest, numbered
/// last.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Halves {
    pub first: usize,
    pub second: usize,
}

/// Unknowns each half needs before a caller factorises the halves on two threads; smaller
/// systems factorise in milliseconds either way.
pub const SPLIT_MIN_HALF: usize = 500;

/// Source index of the diagonal of a half's separator block (no entry of `A`).
const UNIT: u32 = u32::MAX;

/// The diagonal `c` of a half's separator block `c I`: so large that `c I − Lₜₕ D_h Lₜₕᵀ`
/// factorises with pivots near `c`, far from any regularisation threshold or overflow,
/// whatever the matrix (its factor is never read; the half's own columns do not depend on it).
const SEPARATOR_STAND_IN: f64 = 1e100;

/// Dynamic regularisation of the pivots: those of the wrong sign or below `epsilon` in
/// magnitude become `±delta` (signs `+1`, `−1`; `0` leaves a pivot unchanged unless it is
/// within `epsilon` of zero). `None` for no regularisation.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct PivotRegularization {
    pub delta: f64,
    pub epsilon: f64,
}

/// One half's matrix `M_h` and its symbolic factorisation.
#[derive(Debug)]
struct Half {
    /// Permuted position of the half's first unknown.
    start: usize,
    /// Unknowns of the half: local numbering `0..own` the half, `own..` the separator.
    own: usize,
    /// Lower triangle of `M_h`, local numbering (rows unsorted inside a column).
    lower: SymbolicSparseColMat<usize>,
    /// Index in `A`'s values of every entry of `lower`, or [`UNIT`].
    source: Vec<u32>,
    /// Expected pivot signs in local numbering (`+1` on the separator block).
    signs: Vec<i8>,
    symbolic: SymbolicSupernodalCholesky<usize>,
    /// Supernodes holding columns of the half (the last may also hold separator columns).
    supernodes: usize,
    /// Where the supernodes' blocks start once packed ([`supernodal::pack_in_place`]).
    packed_ptr: Vec<usize>,
}

/// The symbolic analysis of a bisected matrix: both halves' and the separator's layout.
#[derive(Debug)]
pub struct SplitSymbolic {
    /// `perm[k]`: the unknown at permuted position `k`.
    perm: Vec<usize>,
    halves: [Half; 2],
    n_top: usize,
    /// `(position in the dense column-major separator block, index in A's values)` of every
    /// entry of `Aₜₜ`'s lower triangle.
    top_entries: Vec<(usize, usize)>,
    /// Expected pivot signs of the separator's unknowns.
    top_signs: Vec<i8>,
    /// Where the halves are factorised.
    threads: HalfThreads,
}

/// Which threads factorise the two halves.
///
/// Measured on this machine (docs/performance.md): on rayon's workers the one-off steady
/// factorisation is fastest (1M unknowns: 3.3–3.4 s against 4.9–5.8 s on fresh threads,
/// whose memory arenas start cold). A time loop's factor on threads of its own gave IMEX
/// steps no slower and mostly faster (607k unknowns: 0.107 / 0.124 / 0.135 s against 0.139 /
/// 0.133 / 0.139 s, alternating). Whichever threads run faer, the solver resets their vector
/// registers afterwards ([`super::vector_registers`]); that, not the threads, was the cause of
/// the earlier 1.6–1.8× slowdown of our kernels on rayon's workers.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub enum HalfThreads {
    /// Rayon's pool (default: one factorisation, then a few solves).
    #[default]
    Pool,
    /// Two scoped threads of their own (a factor reused by many solves).
    Own,
}

/// `A`'s values laid out for a [`SplitSymbolic`] ([`SplitSymbolic::gather`]): each half's
/// `M_h` in the order of its lower pattern (the stand-in `c` on its separator block) and the
/// entries of `Aₜₜ`'s lower triangle. Together they hold every entry of `A`'s lower triangle
/// once, so the factorisation and the residual of a solve need neither `A`'s values nor its
/// pattern: a one-shot solve frees both before the factor's pages are touched.
#[derive(Debug, Default)]
pub struct SplitValues {
    halves: [Vec<f64>; 2],
    /// In the order of [`SplitSymbolic::top_entries`].
    top: Vec<f64>,
}

/// A numeric factorisation on a [`SplitSymbolic`].
#[derive(Debug, Default)]
pub struct SplitFactor {
    /// Each half's supernodal values (faer's layout on the half's symbolic structure).
    halves: [Vec<f64>; 2],
    /// The separator's dense factor, column-major: `Lₜ` below the diagonal, `Dₜ` on it.
    top: Vec<f64>,
    /// Whether the halves' values are packed ([`SplitSymbolic::pack`]).
    packed: bool,
}

impl SplitSymbolic {
    /// Analyses the full pattern `a` (both triangles) ordered by `perm` (`inverse` its
    /// inverse) with the `halves` first; `signs` are the expected pivot signs per unknown.
    /// `None` when an entry couples the two halves (not a separator), a half is empty, or
    /// the pattern has too many entries for the 32-bit source map.
    ///
    /// # Errors
    /// faer's, when the symbolic analysis runs out of memory or overflows its indices.
    pub fn analyse(
        a: SymbolicSparseColMatRef<'_, usize>,
        perm: &[usize],
        inverse: &[usize],
        halves: Halves,
        signs: &[i8],
    ) -> Result<Option<Self>, FaerError> {
        let n = a.nrows();
        let top_start = halves.first + halves.second;
        let fits = a.row_idx().len() < UNIT as usize;
        if halves.first == 0 || halves.second == 0 || top_start > n || !fits {
            return Ok(None);
        }
        let layout = Layout { a, perm, inverse, top_start };
        let (first, second) = rayon::join(
            || Half::analyse(&layout, 0, halves.first, signs),
            || Half::analyse(&layout, halves.first, halves.second, signs),
        );
        let (Some(first), Some(second)) = (first?, second?) else { return Ok(None) };
        Ok(Some(SplitSymbolic {
            perm: perm.to_vec(),
            halves: [first, second],
            n_top: n - top_start,
            top_entries: layout.separator_entries(),
            top_signs: perm[top_start..].iter().map(|&p| signs[p]).collect(),
            threads: HalfThreads::Pool,
        }))
    }

    /// Chooses the threads of the halves' factorisations.
    pub fn set_half_threads(&mut self, threads: HalfThreads) {
        self.threads = threads;
    }

    /// Order of the matrix.
    pub fn n(&self) -> usize {
        self.perm.len()
    }

    /// Entries of `L` (the halves' columns, as stored, and the separator's lower triangle).
    pub fn factor_entries(&self) -> usize {
        self.halves.iter().map(Half::own_entries).sum::<usize>() + self.n_top * (self.n_top + 1) / 2
    }

    /// Nonzeros of `L` (its lower triangle with the diagonal, which holds `D`): the values
    /// one triangular solve must read, without the unused upper triangles of the
    /// supernodes' diagonal blocks that [`SplitSymbolic::factor_entries`] counts.
    pub fn factor_nonzeros(&self) -> usize {
        self.halves.iter().map(Half::own_nonzeros).sum::<usize>()
            + self.n_top * (self.n_top + 1) / 2
    }

    /// `A`'s `values` (on the analysed pattern) laid out for the halves and the separator;
    /// the halves on two threads.
    ///
    /// # Panics
    /// When `values` belongs to a smaller pattern (a programming error).
    pub fn gather(&self, values: &[f64]) -> SplitValues {
        let [first, second] = &self.halves;
        let (first, second) = rayon::join(|| first.gather(values), || second.gather(values));
        let top = self.top_entries.iter().map(|&(_, source)| values[source]).collect();
        SplitValues { halves: [first, second], top }
    }

    /// Factorises the matrix with `values` ([`SplitSymbolic::gather`]) into `factor`,
    /// reusing its storage: the halves on two threads, then the separator with `par`.
    ///
    /// # Errors
    /// faer's, when a factorisation fails (not expected with regularisation).
    pub fn factorize(
        &self,
        values: &SplitValues,
        regularization: Option<PivotRegularization>,
        par: Par,
        factor: &mut SplitFactor,
    ) -> Result<(), String> {
        factor.packed = false;
        let [first, second] = &mut factor.halves;
        let [m_first, m_second] = &values.halves;
        let halves = &self.halves;
        let first = || halves[0].factorize(m_first, regularization, self.n_top, first);
        let second = || halves[1].factorize(m_second, regularization, self.n_top, second);
        let (update_first, update_second) = match self.threads {
            HalfThreads::Pool => rayon::join(first, second),
            HalfThreads::Own => std::thread::scope(|scope| {
                let (first, second) = (scope.spawn(first), scope.spawn(second));
                (joined(first), joined(second))
            }),
        };
        let (update_first, update_second) = (update_first?, update_second?);
        // S = Aₜₜ − Σ_h Lₜₕ D_h Lₜₕᵀ (lower triangle; the rest is not read).
        let top = &mut factor.top;
        top.clear();
        top.resize(self.n_top * self.n_top, 0.0);
        for (&(position, _), value) in self.top_entries.iter().zip(&values.top) {
            top[position] += value;
        }
        for (s, (u1, u2)) in top.iter_mut().zip(update_first.iter().zip(&update_second)) {
            *s -= u1 + u2;
        }
        drop((update_first, update_second));
        let n = self.n_top;
        let mut buf = MemBuffer::new(cholesky_in_place_scratch::<f64>(n, par, Default::default()));
        cholesky_in_place(
            MatMut::from_column_major_slice_mut(top, n, n),
            faer_regularization(regularization, &self.top_signs),
            par,
            MemStack::new(&mut buf),
            Default::default(),
        )
        .map(|_| ())
        .map_err(|e| format!("separator: {e:?}"))
    }

    /// Packs both halves' values (on two threads) for faster triangular solves: worth its one
    /// pass over the factor when many solves follow (time stepping). Undone by the next
    /// [`SplitSymbolic::factorize`].
    pub fn pack(&self, factor: &mut SplitFactor) {
        if factor.packed {
            return;
        }
        let [first, second] = &mut factor.halves;
        let pack = |h: &Half, values: &mut Vec<f64>| {
            supernodal_sweeps::pack_in_place(&h.symbolic, &h.packed_ptr, values)
        };
        rayon::join(|| pack(&self.halves[0], first), || pack(&self.halves[1], second));
        factor.packed = true;
    }

    /// Overwrites `rhs` with `A⁻¹ rhs` for the factor (halves on two threads where rayon's
    /// pool has them).
    ///
    /// # Panics
    /// When `rhs` or `factor` belong to another system (a programming error).
    pub fn solve_in_place<'s>(&'s self, factor: &'s SplitFactor, rhs: &mut [f64]) {
        assert_eq!(rhs.len(), self.n(), "right-hand side of another size");
        let [first, second] = &self.halves;
        let view = |h: &'s Half, values: &'s [f64]| match factor.packed {
            true => SupernodalLdlt::new_packed(&h.symbolic, &h.packed_ptr, values),
            false => SupernodalLdlt::new(&h.symbolic, values),
        };
        let views = [view(first, &factor.halves[0]), view(second, &factor.halves[1])];
        let mut y: Vec<f64> = self.perm.iter().map(|&p| rhs[p]).collect();
        let (y1, rest) = y.split_at_mut(first.own);
        let (y2, top) = rest.split_at_mut(second.own);
        let (t1, t2) = rayon::join(
            || views[0].forward_group(0..first.supernodes, y1, 0, first.own, self.n_top),
            || views[1].forward_group(0..second.supernodes, y2, 0, second.own, self.n_top),
        );
        top.iter_mut().zip(t1.iter().zip(&t2)).for_each(|(t, (a, b))| *t += a + b);
        solve_dense_ldlt_in_place(&factor.top, top);
        let top = &*top;
        rayon::join(
            || views[0].backward_group(0..first.supernodes, y1, 0, top, first.own),
            || views[1].backward_group(0..second.supernodes, y2, 0, top, second.own),
        );
        for (k, &p) in self.perm.iter().enumerate() {
            rhs[p] = y[k];
        }
    }
}

impl SplitSymbolic {
    /// `r = b − A x` and `‖r‖₂²` for the matrix with `values` ([`SplitSymbolic::gather`]):
    /// each half's lower triangle on its own thread in the permuted numbering (its own rows
    /// are its alone; its separator rows go to a vector of its own, summed afterwards), then
    /// `Aₜₜ`. Deterministic: the summation order does not depend on the threads.
    ///
    /// # Panics
    /// When `x`, `b` or `r` belong to another system (a programming error).
    pub fn residual(&self, values: &SplitValues, x: &[f64], b: &[f64], r: &mut [f64]) -> f64 {
        let n = self.n();
        assert!(x.len() == n && b.len() == n && r.len() == n, "vectors of another size");
        let y: Vec<f64> = self.perm.iter().map(|&p| x[p]).collect();
        let [first, second] = &self.halves;
        let top_start = n - self.n_top;
        let mut product = vec![0.0; n];
        let (own_first, rest) = product.split_at_mut(first.own);
        let (own_second, top) = rest.split_at_mut(second.own);
        let (top_first, top_second) = rayon::join(
            || first.add_product(&values.halves[0], &y, top_start, own_first),
            || second.add_product(&values.halves[1], &y, top_start, own_second),
        );
        let y_top = &y[top_start..];
        for (t, (a, b)) in top.iter_mut().zip(top_first.iter().zip(&top_second)) {
            *t = a + b;
        }
        for (&(position, _), &value) in self.top_entries.iter().zip(&values.top) {
            let (col, row) = (position / self.n_top, position % self.n_top);
            top[row] += value * y_top[col];
            if row != col {
                top[col] += value * y_top[row];
            }
        }
        let mut squares = 0.0;
        for (k, &p) in self.perm.iter().enumerate() {
            r[p] = b[p] - product[k];
            squares += r[p] * r[p];
        }
        squares
    }
}

/// The result of a scoped thread, its panic passed on.
fn joined<T>(handle: std::thread::ScopedJoinHandle<'_, T>) -> T {
    handle.join().unwrap_or_else(|panic| std::panic::resume_unwind(panic))
}

/// faer's regularisation settings for `signs` (the expected pivot signs in the factor's
/// numbering); shared with the one-piece factor of [`super::linear`].
pub(super) fn faer_regularization(
    regularization: Option<PivotRegularization>,
    signs: &[i8],
) -> LdltRegularization<'_, f64> {
    match regularization {
        Some(r) => LdltRegularization {
            dynamic_regularization_signs: Some(signs),
            dynamic_regularization_delta: r.delta,
            dynamic_regularization_epsilon: r.epsilon,
        },
        None => LdltRegularization::default(),
    }
}

/// The full pattern and the permutation, shared by both halves' analyses.
struct Layout<'a> {
    a: SymbolicSparseColMatRef<'a, usize>,
    perm: &'a [usize],
    inverse: &'a [usize],
    top_start: usize,
}

impl Layout<'_> {
    /// The lower-triangle entries of `Aₜₜ` (see [`SplitSymbolic::top_entries`]).
    fn separator_entries(&self) -> Vec<(usize, usize)> {
        let (col_ptr, row_idx) = (self.a.col_ptr(), self.a.row_idx());
        let n_top = self.a.nrows() - self.top_start;
        let mut entries = Vec::new();
        for j in 0..n_top {
            let p = self.perm[self.top_start + j];
            let range = col_ptr[p]..col_ptr[p + 1];
            for (e, &row) in range.clone().zip(&row_idx[range]) {
                let k = self.inverse[row];
                if k >= self.top_start + j {
                    entries.push((j * n_top + k - self.top_start, e));
                }
            }
        }
        entries
    }
}

impl Half {
    /// The half of `own` unknowns from permuted position `start`: its lower triangle of
    /// `M_h` and supernodal symbolic factorisation; `None` when it couples to the other half.
    fn analyse(
        layout: &Layout<'_>,
        start: usize,
        own: usize,
        signs: &[i8],
    ) -> Result<Option<Self>, FaerError> {
        let n_local = own + layout.a.nrows() - layout.top_start;
        let Some((col_ptr, row_idx, source)) = half_lower(layout, start, own) else {
            return Ok(None);
        };
        let (upper_ptr, upper_idx) = transpose(n_local, &col_ptr, &row_idx);
        let upper = SymbolicSparseColMatRef::new_unsorted_checked(
            n_local, n_local, &upper_ptr, None, &upper_idx,
        );
        let symbolic = supernodal_symbolic(upper)?;
        drop((upper_ptr, upper_idx));
        let supernodes = symbolic.supernode_begin().iter().filter(|&&b| b < own).count();
        let packed_ptr = supernodal_sweeps::packed_pointers(&symbolic);
        let local_signs =
            (0..n_local).map(|j| if j < own { signs[layout.perm[start + j]] } else { 1 }).collect();
        Ok(Some(Half {
            start,
            own,
            lower: SymbolicSparseColMat::new_unsorted_checked(
                n_local, n_local, col_ptr, None, row_idx,
            ),
            source,
            signs: local_signs,
            symbolic,
            supernodes,
            packed_ptr,
        }))
    }

    /// `(block height, own columns)` of each supernode holding the half's own columns (a
    /// straddling supernode's columns below the separator only).
    fn own_blocks(&self) -> impl Iterator<Item = (usize, usize)> + '_ {
        let sym = &self.symbolic;
        let (begin, end, rows) =
            (sym.supernode_begin(), sym.supernode_end(), sym.col_ptr_for_row_idx());
        (0..self.supernodes).map(move |s| {
            let cols = end[s] - begin[s];
            (cols + rows[s + 1] - rows[s], cols.min(self.own - begin[s]))
        })
    }

    /// Stored entries of the half's own columns.
    fn own_entries(&self) -> usize {
        self.own_blocks().map(|(height, own)| height * own).sum()
    }

    /// Lower-triangle entries of the half's own columns (their packed length).
    fn own_nonzeros(&self) -> usize {
        self.own_blocks().map(|(height, own)| packed_offset(own, height)).sum()
    }

    /// The values of `M_h` from `A`'s `values`, in the order of the half's lower pattern.
    fn gather(&self, values: &[f64]) -> Vec<f64> {
        self.source
            .iter()
            .map(|&e| if e == UNIT { SEPARATOR_STAND_IN } else { values[e as usize] })
            .collect()
    }

    /// `(A y)` restricted to this half's entries of `A`'s lower triangle and their mirror
    /// images, `y` in the permuted numbering: the half's own rows added into `own_rows`, the
    /// separator's rows returned (`n − top_start` of them). The stand-in entries of `M_h`'s
    /// separator block are not `A`'s and are skipped.
    fn add_product(
        &self,
        m_values: &[f64],
        y: &[f64],
        top_start: usize,
        own_rows: &mut [f64],
    ) -> Vec<f64> {
        let global =
            |i: usize| if i < self.own { self.start + i } else { top_start + i - self.own };
        let mut top_rows = vec![0.0; y.len() - top_start];
        let (col_ptr, row_idx) = (self.lower.col_ptr(), self.lower.row_idx());
        for j in 0..self.own {
            let y_j = y[self.start + j];
            let mut mirrored = 0.0;
            for k in col_ptr[j]..col_ptr[j + 1] {
                let (i, value) = (row_idx[k], m_values[k]);
                mirrored += value * y[global(i)];
                if i == j {
                    continue;
                }
                match i.checked_sub(self.own) {
                    Some(t) => top_rows[t] += value * y_j,
                    None => own_rows[i] += value * y_j,
                }
            }
            own_rows[j] += mirrored;
        }
        top_rows
    }

    /// Factorises `M_h` with its values `m_values` ([`Half::gather`]) into `l_values`;
    /// returns `Lₜₕ D_h Lₜₕᵀ` (dense `n_top × n_top`, column-major, lower triangle).
    fn factorize(
        &self,
        m_values: &[f64],
        regularization: Option<PivotRegularization>,
        n_top: usize,
        l_values: &mut Vec<f64>,
    ) -> Result<Vec<f64>, String> {
        let matrix = SparseColMatRef::new(self.lower.as_ref(), m_values);
        l_values.resize(self.symbolic.len_val(), 0.0);
        let scratch = supernodal::factorize_supernodal_numeric_ldlt_scratch::<usize, f64>(
            &self.symbolic,
            Par::Seq,
            Default::default(),
        );
        let mut buf = MemBuffer::try_new(scratch).map_err(|_| "out of memory".to_string())?;
        supernodal::factorize_supernodal_numeric_ldlt(
            l_values,
            matrix,
            faer_regularization(regularization, &self.signs),
            &self.symbolic,
            Par::Seq,
            MemStack::new(&mut buf),
            Default::default(),
        )
        .map_err(|e| format!("half from {}: {e:?}", self.start))?;
        Ok(self.separator_update(l_values, n_top))
    }

    /// `Lₜₕ D_h Lₜₕᵀ` from the factor values: for each supernode of the half, its separator
    /// rows `W` (below its eliminated columns) give `W D Wᵀ`.
    fn separator_update(&self, l_values: &[f64], n_top: usize) -> Vec<f64> {
        let view = SupernodalLdlt::new(&self.symbolic, l_values);
        let mut update = vec![0.0; n_top * n_top];
        for s in 0..self.supernodes {
            let supernode = view.supernode(s);
            self.add_supernode_update(&supernode, n_top, &mut update);
        }
        update
    }

    /// `update += W D Wᵀ` for one supernode (see [`Half::separator_update`]).
    fn add_supernode_update(&self, sn: &Supernode<'_>, n_top: usize, update: &mut [f64]) {
        debug_assert!(!sn.packed, "the update reads faer's column-major blocks");
        let rows = sn.rows();
        let eliminated = sn.cols.min(self.own - sn.start);
        // Block rows from `first` on are separator rows: the diagonal block's below the
        // half when the supernode straddles it, else a suffix of the pattern.
        let first = if eliminated < sn.cols {
            eliminated
        } else {
            sn.cols + sn.pattern.partition_point(|&r| r < self.own)
        };
        let t = rows - first;
        if t == 0 || eliminated == 0 {
            return;
        }
        let separator_row =
            |i: usize| if i < sn.cols { sn.start + i } else { sn.pattern[i - sn.cols] } - self.own;
        let w =
            MatRef::from_column_major_slice_with_stride(&sn.block[first..], t, eliminated, rows);
        let wd = Mat::from_fn(t, eliminated, |i, j| w[(i, j)] * sn.block[j * rows + j]);
        let (lo, hi) = (separator_row(first), separator_row(rows - 1));
        if hi - lo + 1 == t {
            // Consecutive separator rows: straight into the block of `update`.
            let dst = MatMut::from_column_major_slice_with_stride_mut(
                &mut update[lo * n_top + lo..],
                t,
                t,
                n_top,
            );
            lower_product(dst, Accum::Add, wd.as_ref(), w);
            return;
        }
        let mut product = Mat::<f64>::zeros(t, t);
        lower_product(product.as_mut(), Accum::Replace, wd.as_ref(), w);
        for b in 0..t {
            let column = separator_row(first + b) * n_top;
            for a in b..t {
                update[column + separator_row(first + a)] += product[(a, b)];
            }
        }
    }
}

/// `dst ← (dst +) wd wᵀ`, lower triangle only.
fn lower_product(dst: MatMut<'_, f64>, accum: Accum, wd: MatRef<'_, f64>, w: MatRef<'_, f64>) {
    matmul(
        dst,
        BlockStructure::TriangularLower,
        accum,
        wd,
        BlockStructure::Rectangular,
        w.transpose(),
        BlockStructure::Rectangular,
        1.0,
        Par::Seq,
    );
}

/// The lower triangle of `M_h` for the half of `own` unknowns from `start`: CSC column
/// pointers, local rows and the source index of every entry; `None` when an entry couples
/// to the other half.
fn half_lower(
    layout: &Layout<'_>,
    start: usize,
    own: usize,
) -> Option<(Vec<usize>, Vec<usize>, Vec<u32>)> {
    let (col_ptr_a, row_idx_a) = (layout.a.col_ptr(), layout.a.row_idx());
    let n_local = own + layout.a.nrows() - layout.top_start;
    let local = |k: usize| {
        if (start..start + own).contains(&k) {
            Some(k - start)
        } else if k >= layout.top_start {
            Some(own + k - layout.top_start)
        } else {
            None
        }
    };
    let mut col_ptr = Vec::with_capacity(n_local + 1);
    col_ptr.push(0);
    let mut row_idx = Vec::new();
    let mut source = Vec::new();
    for j in 0..own {
        let p = layout.perm[start + j];
        let range = col_ptr_a[p]..col_ptr_a[p + 1];
        for (e, &row) in range.clone().zip(&row_idx_a[range]) {
            let i = local(layout.inverse[row])?;
            if i >= j {
                row_idx.push(i);
                source.push(e as u32);
            }
        }
        col_ptr.push(row_idx.len());
    }
    for j in own..n_local {
        row_idx.push(j);
        source.push(UNIT);
        col_ptr.push(row_idx.len());
    }
    Some((col_ptr, row_idx, source))
}

/// The transpose of the `n × n` pattern (`col_ptr`, `row_idx`), rows sorted.
fn transpose(n: usize, col_ptr: &[usize], row_idx: &[usize]) -> (Vec<usize>, Vec<usize>) {
    let mut ptr = vec![0; n + 1];
    for &i in row_idx {
        ptr[i + 1] += 1;
    }
    for i in 0..n {
        ptr[i + 1] += ptr[i];
    }
    let mut next = ptr[..n].to_vec();
    let mut idx = vec![0; row_idx.len()];
    for j in 0..n {
        for &i in &row_idx[col_ptr[j]..col_ptr[j + 1]] {
            idx[next[i]] = j;
            next[i] += 1;
        }
    }
    (ptr, idx)
}

/// faer's supernodal symbolic factorisation of the matrix whose upper triangle is `upper`
/// (elimination tree, column counts, supernodes with faer's default relaxation).
fn supernodal_symbolic(
    upper: SymbolicSparseColMatRef<'_, usize>,
) -> Result<SymbolicSupernodalCholesky<usize>, FaerError> {
    let n = upper.nrows();
    let scratch = StackReq::or(
        simplicial::prefactorize_symbolic_cholesky_scratch::<usize>(n, upper.row_idx().len()),
        supernodal::factorize_supernodal_symbolic_cholesky_scratch::<usize>(n),
    );
    let mut buf = MemBuffer::try_new(scratch).map_err(|_| FaerError::OutOfMemory)?;
    let mut etree = vec![0isize; n];
    let mut col_counts = vec![0usize; n];
    let etree = simplicial::prefactorize_symbolic_cholesky(
        &mut etree,
        &mut col_counts,
        upper,
        MemStack::new(&mut buf),
    );
    supernodal::factorize_supernodal_symbolic_cholesky(
        upper,
        etree,
        &col_counts,
        MemStack::new(&mut buf),
        SymbolicSupernodalParams::default(),
    )
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::solver::test_grids::{
        faer_factor, faer_solve, grid_dissection, grid_matrix, inverse,
    };

    /// The split factorisation solves grid systems like faer's own `LDLᵀ` in the same order:
    /// indefinite without regularisation on one thread and two, definite with pivot signs.
    #[test]
    fn split_solve_matches_faer_on_a_dissected_grid() {
        let m = 40;
        let n = m * m;
        let mut perm = Vec::new();
        grid_dissection(0..m, 0..m, m, &mut perm);
        // grid_dissection's top split: rows 0..m/2, rows m/2 + 1..m, then row m/2.
        let halves = Halves { first: (m / 2) * m, second: (m - m / 2 - 1) * m };
        let rhs: Vec<f64> = (0..n).map(|k| ((k * 37) % 101) as f64 / 50.0 - 1.0).collect();
        let signs = vec![1i8; n];
        let tiny = PivotRegularization { delta: 1e-300, epsilon: 1e-300 };
        for (shift, threads, regularization) in
            [(-1.0, 1, None), (-1.0, 2, None), (0.5, 2, Some(tiny))]
        {
            let a = grid_matrix(m, shift);
            let mut split =
                SplitSymbolic::analyse(a.symbolic(), &perm, &inverse(&perm), halves, &signs)
                    .unwrap()
                    .expect("the grid's halves are separated");
            assert!(split.halves.iter().all(|h| h.supernodes > 0));
            if regularization.is_some() {
                split.set_half_threads(HalfThreads::Own);
            }
            let (sym, values) = faer_factor(&a, &perm, Default::default());
            let reference = faer_solve(&sym, &values, &rhs);
            let scale = reference.iter().fold(0.0f64, |s, v| s.max(v.abs()));
            let pool = rayon::ThreadPoolBuilder::new().num_threads(threads).build().unwrap();
            let mut factor = SplitFactor::default();
            let mut x = rhs.clone();
            pool.install(|| {
                split
                    .factorize(&split.gather(a.val()), regularization, Par::Seq, &mut factor)
                    .unwrap();
                split.solve_in_place(&factor, &mut x);
            });
            let diff = x.iter().zip(&reference).fold(0.0f64, |s, (a, b)| s.max((a - b).abs()));
            assert!(
                diff <= 1e-11 * scale,
                "shift {shift}, {threads} thread(s): max difference {diff:e}"
            );
        }
    }

    /// The residual from the gathered values equals `b − A x` computed from the full
    /// pattern, with the separator's own block and both halves' couplings to it.
    #[test]
    fn residual_of_the_gathered_values_matches_the_full_matrix() {
        let m = 30;
        let n = m * m;
        let mut perm = Vec::new();
        grid_dissection(0..m, 0..m, m, &mut perm);
        let halves = Halves { first: (m / 2) * m, second: (m - m / 2 - 1) * m };
        let a = grid_matrix(m, -1.0);
        let split = SplitSymbolic::analyse(a.symbolic(), &perm, &inverse(&perm), halves, &[1; 900])
            .unwrap()
            .expect("the grid's halves are separated");
        let x: Vec<f64> = (0..n).map(|k| ((k * 53) % 97) as f64 / 40.0 - 1.0).collect();
        let b: Vec<f64> = (0..n).map(|k| ((k * 31) % 89) as f64 / 30.0).collect();
        let mut expected = b.clone();
        for (j, &x_j) in x.iter().enumerate() {
            for (&i, &value) in a.row_idx_of_col_raw(j).iter().zip(a.val_of_col(j)) {
                expected[i] -= value * x_j;
            }
        }
        let mut r = vec![f64::NAN; n];
        let squares = split.residual(&split.gather(a.val()), &x, &b, &mut r);
        let diff = r.iter().zip(&expected).fold(0.0f64, |s, (a, b)| s.max((a - b).abs()));
        assert!(diff <= 1e-12, "max difference {diff:e}");
        let expected_squares: f64 = expected.iter().map(|v| v * v).sum();
        assert!((squares - expected_squares).abs() <= 1e-12 * expected_squares);
    }

    /// An ordering whose "halves" share a matrix entry is refused.
    #[test]
    fn coupled_halves_are_refused() {
        let m = 12;
        let a = grid_matrix(m, 0.0);
        let perm: Vec<usize> = (0..m * m).collect();
        let halves = Halves { first: m * m / 2, second: m * m / 2 - m };
        let split = SplitSymbolic::analyse(a.symbolic(), &perm, &perm, halves, &vec![1; m * m]);
        assert!(split.unwrap().is_none());
    }
}
