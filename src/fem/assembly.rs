//! Sparsity pattern and numeric assembly of the Taylor–Hood system.
//!
//! Takes a [`Mesh`] and a [`DofMap`]; [`SystemPattern::new`] builds the compressed-column
//! (CSC) pattern of the full (both triangles stored) saddle-point matrix
//! `[[A, Bᵀ], [B, 0]]` once, together with a position map from every element-local entry to
//! its index in the CSC values. [`assemble`] then turns local systems into global values and a
//! right-hand side by a pure scatter; local systems are computed serially or with rayon.
//!
//! The pattern holds the velocity–velocity couplings of a cell chosen by
//! [`VelocityCoupling`] (all of them, or like components only), every velocity–pressure
//! coupling and the pressure diagonal (for a static regularisation), but no off-diagonal
//! pressure–pressure entry. Both triangles are stored, so a nonsymmetric convection block fits
//! the same pattern. A nonzero local entry without a slot is counted in
//! [`AssembledSystem::dropped_entries`], never silently lost.
//!
//! **Invariant:** the pattern depends only on the mesh and the dof layout, never on values;
//! numeric assembly never allocates per entry.

use faer::sparse::SymbolicSparseColMatRef;
use rayon::prelude::*;

use crate::fem::dofs::{ComponentDof, DofMap};
use crate::fem::kernels::{LOCAL_SIZE, LOCAL_VELOCITY, LocalSystem};
use crate::mesh::Mesh;

/// How local element matrices are computed.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub enum Parallelism {
    /// One thread, elements in order.
    #[default]
    Serial,
    /// Local matrices computed in parallel (rayon) in chunks, then scattered in element order.
    Rayon,
}

impl Parallelism {
    /// `(a(), b())`: concurrently on rayon's pool with [`Parallelism::Rayon`], one after the
    /// other with [`Parallelism::Serial`].
    pub fn join<A, B, RA, RB>(self, a: A, b: B) -> (RA, RB)
    where
        A: FnOnce() -> RA + Send,
        B: FnOnce() -> RB + Send,
        RA: Send,
        RB: Send,
    {
        match self {
            Parallelism::Serial => (a(), b()),
            Parallelism::Rayon => rayon::join(a, b),
        }
    }
}

/// Which velocity–velocity couplings of a cell the pattern stores.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub enum VelocityCoupling {
    /// Every pair of velocity unknowns of a cell: needed by the symmetric viscous form and by
    /// Newton linearisations of convection.
    #[default]
    Full,
    /// Only like components (`u` with `u`, `v` with `v`), plus every pair that involves a slip
    /// unknown (which carries both components): enough for the gradient form and for
    /// Oseen/Picard convection, with about a third fewer nonzeros. **But** the `LDLᵀ` factor
    /// came out larger (180M against 141M entries at 608k unknowns, AMD ordering, structured
    /// unit square, `CORNERFLOW_BENCH_SOLVE_N=260 cargo bench --bench assembly`, 2026-12-02):
    /// AMD no longer sees a node's two components as one supervariable. Use it for
    /// matrix-free or iterative work, not for direct solves.
    SameComponent,
}

/// Errors from pattern construction.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum PatternError {
    #[error("the system has {nnz} nonzeros, more than the position map can index ({max})")]
    TooLarge { nnz: usize, max: usize },
}

/// Marks a local entry that is not stored (eliminated unknown or pressure–pressure coupling).
const NOT_STORED: u32 = u32::MAX;
/// Entries per cell in the position map.
const LOCAL_ENTRIES: usize = LOCAL_SIZE * LOCAL_SIZE;
/// Cells per rayon work batch: the buffer of local systems (256 × 1.8 kB ≈ 460 kB) stays
/// within a core's L2 cache (1 MB on this machine, solver-peers.md) while it is scattered.
const BATCH: usize = 256;
/// Cells per kernel call, and fewest unknowns per rayon task, of a vector assembly: keeps
/// the per-task overhead small next to about 0.1 µs of work per item.
const VECTOR_CHUNK: usize = 1024;

/// The CSC pattern of the assembled system plus the element-to-value position map.
#[derive(Clone, Debug)]
pub struct SystemPattern {
    dofs: DofMap,
    col_ptr: Vec<usize>,
    row_idx: Vec<usize>,
    /// `positions[cell * 225 + i * 15 + j]`: index in the values of local entry `(i, j)`.
    positions: Vec<u32>,
    diagonal: Vec<usize>,
}

/// The nonzero entries of a symmetric matrix on a [`SystemPattern`], with 32-bit rows: what
/// the residual of every step of a time loop reads. Exact zeros are dropped — under the
/// gradient form the coupling of the two velocity components, stored because the pattern
/// couples them fully (about 40 % of the entries of a Taylor–Hood step matrix) — except on
/// the diagonal, whose slot keeps a non-finite `x` visible in `A x` (`0 · ∞` is NaN).
#[derive(Clone, Debug, Default)]
pub struct CompactMatrix {
    col_ptr: Vec<usize>,
    rows: Vec<u32>,
    values: Vec<f64>,
}

impl CompactMatrix {
    /// The entries of `values` on `pattern` without the exact zeros off the diagonal.
    ///
    /// # Panics
    /// When `values` does not have one entry per stored entry of `pattern` (a programming
    /// error).
    pub fn of(pattern: &SystemPattern, values: &[f64]) -> Self {
        assert_eq!(values.len(), pattern.nnz(), "values of another pattern");
        let mut compact = CompactMatrix {
            col_ptr: Vec::with_capacity(pattern.n() + 1),
            ..CompactMatrix::default()
        };
        compact.col_ptr.push(0);
        for col in 0..pattern.n() {
            let range = pattern.col_ptr[col]..pattern.col_ptr[col + 1];
            for (&row, &value) in pattern.row_idx[range.clone()].iter().zip(&values[range]) {
                if value != 0.0 || row == col {
                    compact.rows.push(row as u32);
                    compact.values.push(value);
                }
            }
            compact.col_ptr.push(compact.rows.len());
        }
        compact
    }

    /// Stored entries.
    pub fn nnz(&self) -> usize {
        self.rows.len()
    }

    /// `r = b − A x` and `‖r‖₂²`, as [`SystemPattern::symmetric_residual`].
    pub fn symmetric_residual(&self, x: &[f64], b: &[f64], r: &mut [f64]) -> f64 {
        symmetric_residual_with(&self.col_ptr, &self.rows, &self.values, x, b, r)
    }
}

/// Assembled values on a [`SystemPattern`] and the right-hand side (eliminated values moved).
#[derive(Clone, Debug, PartialEq)]
pub struct AssembledSystem {
    pub values: Vec<f64>,
    pub rhs: Vec<f64>,
    /// Nonzero local entries that had no slot in the pattern (a kernel that does not fit the
    /// pattern's [`VelocityCoupling`] or fills the pressure–pressure block); must be 0.
    pub dropped_entries: usize,
}

impl SystemPattern {
    /// Builds the pattern and position map for `mesh` with the numbering `dofs`, storing the
    /// velocity couplings selected by `coupling`.
    ///
    /// # Errors
    /// [`PatternError::TooLarge`] when the number of nonzeros does not fit the 32-bit position
    /// map.
    pub fn new(
        mesh: &Mesh,
        dofs: DofMap,
        coupling: VelocityCoupling,
    ) -> Result<Self, PatternError> {
        let classes = component_classes(mesh, &dofs);
        let couples = |a: usize, b: usize| match coupling {
            VelocityCoupling::Full => true,
            VelocityCoupling::SameComponent => {
                let (ca, cb) = (classes[a], classes[b]);
                ca == cb || ca >= MIXED || cb >= MIXED
            }
        };
        let full = matches!(coupling, VelocityCoupling::Full);
        let (col_ptr, row_idx) = build_columns(mesh, &dofs, full, couples);
        let nnz = row_idx.len();
        if nnz >= NOT_STORED as usize {
            return Err(PatternError::TooLarge { nnz, max: NOT_STORED as usize - 1 });
        }
        let find = |row: usize, col: usize| {
            let rows = &row_idx[col_ptr[col]..col_ptr[col + 1]];
            rows.binary_search(&row).ok().map(|k| col_ptr[col] + k)
        };
        // Zeroed lazily by the allocator and filled in parallel: the first touch of the
        // pages (205 MB at 1M unknowns) is shared by the threads.
        let mut positions = vec![0; mesh.cells.len() * LOCAL_ENTRIES];
        positions.par_chunks_mut(LOCAL_ENTRIES).zip(mesh.cells.par_iter()).for_each(|(p, cell)| {
            p.fill(NOT_STORED);
            cell_positions(&dofs.cell_dofs(cell), &col_ptr, &row_idx, p);
        });
        let diagonal = (0..dofs.n_dofs()).map(|d| find(d, d).unwrap_or(usize::MAX)).collect();
        Ok(SystemPattern { dofs, col_ptr, row_idx, positions, diagonal })
    }

    /// The dof numbering the pattern was built for.
    pub fn dofs(&self) -> &DofMap {
        &self.dofs
    }

    /// Size of the (square) system.
    pub fn n(&self) -> usize {
        self.dofs.n_dofs()
    }

    /// Number of stored entries.
    pub fn nnz(&self) -> usize {
        self.row_idx.len()
    }

    /// Column pointers of the CSC pattern.
    pub fn col_ptr(&self) -> &[usize] {
        &self.col_ptr
    }

    /// Row indices of the CSC pattern (sorted within each column).
    pub fn row_idx(&self) -> &[usize] {
        &self.row_idx
    }

    /// Index in the values of the diagonal entry of unknown `dof`.
    pub fn diagonal_position(&self, dof: usize) -> usize {
        self.diagonal[dof]
    }

    /// The pattern as a faer symbolic matrix view (no copy).
    pub fn symbolic(&self) -> SymbolicSparseColMatRef<'_, usize> {
        SymbolicSparseColMatRef::new_checked(self.n(), self.n(), &self.col_ptr, None, &self.row_idx)
    }

    /// `y = A x` for values `values` on this pattern.
    pub fn multiply(&self, values: &[f64], x: &[f64], y: &mut [f64]) {
        y.iter_mut().for_each(|v| *v = 0.0);
        for (col, &xc) in x.iter().enumerate() {
            for k in self.col_ptr[col]..self.col_ptr[col + 1] {
                y[self.row_idx[k]] += values[k] * xc;
            }
        }
    }

    /// `r = b − A x` for a symmetric `A` with `values` on this pattern, in one pass that also
    /// returns `‖r‖₂²`. Each row of `A x` is gathered from one column (`(A x)_i = Σ_k A_ki x_k`
    /// by symmetry), so rows run in parallel with no write conflicts, unlike the scatter of
    /// [`SystemPattern::multiply`]. The squares are summed in fixed chunks, then the chunks in order, so the
    /// result does not depend on how rayon splits the work.
    pub fn symmetric_residual(&self, values: &[f64], x: &[f64], b: &[f64], r: &mut [f64]) -> f64 {
        symmetric_residual_with(&self.col_ptr, &self.row_idx, values, x, b, r)
    }

    /// Replaces the prescribed boundary values by those of `constraints` (time-dependent
    /// data); the pattern and position map are unchanged. Returns false, changing nothing,
    /// when the constraint layout differs from the one the pattern was built for.
    pub fn update_fixed_values(
        &mut self,
        constraints: &[crate::fem::dofs::NodeConstraint],
    ) -> bool {
        self.dofs.update_fixed_values(constraints)
    }

    /// Frees the position map (4 bytes per local entry: 205 MB at 1M unknowns) when no
    /// further assembly on the pattern is expected: a one-shot steady solve frees it before
    /// its numeric factorisation, whose fresh pages cost most of that stage on a virtual
    /// machine (docs/performance.md). A later assembly still gives the same sums, finding
    /// each cell's positions by merging its columns again (slower).
    pub fn release_positions(&mut self) {
        self.positions = Vec::new();
    }

    /// Scatters one local system of `cell` into `out` (see the module docs).
    fn scatter(&self, mesh: &Mesh, cell: usize, local: &LocalSystem, out: &mut AssembledSystem) {
        let dofs = self.dofs.cell_dofs(&mesh.cells[cell]);
        if self.positions.is_empty() {
            let mut positions = [NOT_STORED; LOCAL_ENTRIES];
            cell_positions(&dofs, &self.col_ptr, &self.row_idx, &mut positions);
            scatter_at(&dofs, &positions, local, out);
        } else {
            let positions = &self.positions[cell * LOCAL_ENTRIES..(cell + 1) * LOCAL_ENTRIES];
            scatter_at(&dofs, positions, local, out);
        }
    }
}

/// Scatters a local system whose unknowns are `dofs` into `out`, entry `(i, j)` at
/// `positions[i · LOCAL_SIZE + j]` of the values (see the module docs).
fn scatter_at(
    dofs: &[ComponentDof; LOCAL_SIZE],
    positions: &[u32],
    local: &LocalSystem,
    out: &mut AssembledSystem,
) {
    // Per local unknown: global row (or none), weight (0 when fixed), fixed value (0 when free).
    let mut row = [usize::MAX; LOCAL_SIZE];
    let mut weight = [0.0; LOCAL_SIZE];
    let mut fixed = [0.0; LOCAL_SIZE];
    for (i, d) in dofs.iter().enumerate() {
        match *d {
            ComponentDof::Free { dof, weight: w } => (row[i], weight[i]) = (dof, w),
            ComponentDof::Fixed(v) => fixed[i] = v,
        }
    }
    for i in (0..LOCAL_SIZE).filter(|&i| row[i] != usize::MAX) {
        let k = &local.matrix[i];
        let pos = &positions[i * LOCAL_SIZE..(i + 1) * LOCAL_SIZE];
        let mut load = local.load[i];
        for j in 0..LOCAL_SIZE {
            load -= k[j] * fixed[j];
            let entry = weight[i] * weight[j] * k[j];
            if pos[j] != NOT_STORED {
                out.values[pos[j] as usize] += entry;
            } else if entry != 0.0 {
                out.dropped_entries += 1;
            }
        }
        out.rhs[row[i]] += weight[i] * load;
    }
}

/// Assembles the global values and right-hand side on `pattern`.
///
/// `kernel(cell, local)` must overwrite `local` with the local system of `cell` (see
/// [`crate::fem::kernels`] for the local numbering). Local entries of eliminated unknowns move
/// to the right-hand side with their known values; free entries are scattered with the
/// weights of the [`DofMap`].
///
/// Both parallelism modes scatter in element order, so they give identical sums.
pub fn assemble(
    pattern: &SystemPattern,
    mesh: &Mesh,
    parallelism: Parallelism,
    kernel: impl Fn(usize, &mut LocalSystem) + Sync,
) -> AssembledSystem {
    let mut out = AssembledSystem { values: Vec::new(), rhs: Vec::new(), dropped_entries: 0 };
    assemble_into(pattern, mesh, parallelism, &mut out, kernel);
    out
}

/// Like [`assemble`], but reuses the storage of `out` (resized and zeroed first): the form
/// for repeated assembly in time or Newton loops.
pub fn assemble_into(
    pattern: &SystemPattern,
    mesh: &Mesh,
    parallelism: Parallelism,
    out: &mut AssembledSystem,
    kernel: impl Fn(usize, &mut LocalSystem) + Sync,
) {
    out.values.clear();
    out.values.resize(pattern.nnz(), 0.0);
    out.rhs.clear();
    out.rhs.resize(pattern.n(), 0.0);
    out.dropped_entries = 0;
    match parallelism {
        Parallelism::Serial => {
            let mut local = LocalSystem::default();
            for cell in 0..mesh.cells.len() {
                kernel(cell, &mut local);
                pattern.scatter(mesh, cell, &local, out);
            }
        }
        Parallelism::Rayon => {
            let mut buffer = vec![LocalSystem::default(); BATCH];
            for start in (0..mesh.cells.len()).step_by(BATCH) {
                let end = (start + BATCH).min(mesh.cells.len());
                let batch = &mut buffer[..end - start];
                batch.par_iter_mut().enumerate().for_each(|(k, local)| kernel(start + k, local));
                for (k, local) in batch.iter().enumerate() {
                    pattern.scatter(mesh, start + k, local, out);
                }
            }
        }
    }
}

/// A stored row index, of either width.
trait RowIndex: Copy + Sync {
    fn index(self) -> usize;
}

impl RowIndex for usize {
    fn index(self) -> usize {
        self
    }
}

impl RowIndex for u32 {
    fn index(self) -> usize {
        self as usize
    }
}

/// [`SystemPattern::symmetric_residual`] on the columns `col_ptr` / `rows`.
fn symmetric_residual_with<I: RowIndex>(
    col_ptr: &[usize],
    rows: &[I],
    values: &[f64],
    x: &[f64],
    b: &[f64],
    r: &mut [f64],
) -> f64 {
    const CHUNK: usize = 4096;
    let partial: Vec<f64> = r
        .par_chunks_mut(CHUNK)
        .enumerate()
        .map(|(k, chunk)| {
            let mut squares = 0.0;
            for (i, ri) in chunk.iter_mut().enumerate() {
                let col = k * CHUNK + i;
                let range = col_ptr[col]..col_ptr[col + 1];
                let ax: f64 = rows[range.clone()]
                    .iter()
                    .zip(&values[range])
                    .map(|(&row, v)| v * x[row.index()])
                    .sum();
                *ri = b[col] - ax;
                squares += *ri * *ri;
            }
            squares
        })
        .collect();
    partial.iter().sum()
}

/// Where each free unknown's right-hand side comes from: unknown `d` sums
/// `weight · loads[slot]` over its entries `(slot, weight)` (`start[d]..start[d + 1]`), where `loads` are the
/// local loads of all cells laid end to end (`slot = LOCAL_SIZE · cell + i`). The entries of
/// an unknown are in element order, so the gathered sum is the serial scatter's, bit for
/// bit. Built once per pattern; its size is one entry per free local unknown of each cell.
#[derive(Clone, Debug)]
pub struct LoadGather {
    start: Vec<usize>,
    /// `(slot, weight)` per entry.
    entries: Vec<(u32, f64)>,
}

impl LoadGather {
    /// The gather map of `pattern`'s dof layout on `mesh`.
    ///
    /// # Panics
    /// When the mesh has more than `u32::MAX / LOCAL_SIZE` cells (about 286 million).
    pub fn new(pattern: &SystemPattern, mesh: &Mesh) -> Self {
        assert!(mesh.cells.len() <= u32::MAX as usize / LOCAL_SIZE, "too many cells");
        let (start, entries) = group_by_unknown(mesh, pattern.n(), |c, cell| {
            let dofs = pattern.dofs.cell_dofs(cell);
            (0..LOCAL_SIZE).filter_map(move |i| match dofs[i] {
                // Fits: c · LOCAL_SIZE + i < u32::MAX by the assertion above.
                ComponentDof::Free { dof, weight } => {
                    Some((dof, ((c * LOCAL_SIZE + i) as u32, weight)))
                }
                ComponentDof::Fixed(_) => None,
            })
        });
        LoadGather { start, entries }
    }

    /// Number of unknowns.
    pub fn n(&self) -> usize {
        self.start.len() - 1
    }
}

/// Assembles a right-hand side only: `kernel(first, loads)` must overwrite each `loads[k]`
/// with the local load of cell `first + k`, **already lifted** (the contribution of the
/// cell's eliminated values subtracted by the kernel itself); free entries are summed with
/// the weights of the [`DofMap`] through `gather` (built for the same pattern and mesh). `loads` holds the
/// local loads of all cells and is reused across calls, so a time loop allocates nothing per
/// step.
///
/// The kernel gets runs of up to `VECTOR_CHUNK` consecutive cells (so it can work on several
/// cells at once). With rayon both passes (local loads, then one gathered sum per unknown)
/// run in parallel; both parallelism modes sum in element order, so they give identical
/// results.
///
/// # Panics
/// When `gather` was built for another number of unknowns (a programming error).
pub fn assemble_vector_into(
    gather: &LoadGather,
    mesh: &Mesh,
    parallelism: Parallelism,
    loads: &mut Vec<[f64; LOCAL_SIZE]>,
    rhs: &mut Vec<f64>,
    kernel: impl Fn(usize, &mut [[f64; LOCAL_SIZE]]) + Sync,
) {
    loads.resize(mesh.cells.len(), [0.0; LOCAL_SIZE]);
    rhs.resize(gather.n(), 0.0);
    let flat = |loads: &[[f64; LOCAL_SIZE]], d: usize| -> f64 {
        let loads = loads.as_flattened();
        let entries = &gather.entries[gather.start[d]..gather.start[d + 1]];
        entries.iter().fold(0.0, |sum, &(slot, w)| sum + w * loads[slot as usize])
    };
    match parallelism {
        Parallelism::Serial => {
            let chunks = loads.chunks_mut(VECTOR_CHUNK).enumerate();
            chunks.for_each(|(k, chunk)| kernel(k * VECTOR_CHUNK, chunk));
            rhs.iter_mut().enumerate().for_each(|(d, r)| *r = flat(loads, d));
        }
        Parallelism::Rayon => {
            let chunks = loads.par_chunks_mut(VECTOR_CHUNK).enumerate();
            chunks.for_each(|(k, chunk)| kernel(k * VECTOR_CHUNK, chunk));
            let loads = &*loads;
            rhs.par_iter_mut()
                .enumerate()
                .with_min_len(VECTOR_CHUNK)
                .for_each(|(d, r)| *r = flat(loads, d));
        }
    }
}

/// Items grouped by unknown in CSR form: `entries(c, cell)` yields `(unknown, item)` pairs of
/// cell `c`; unknown `d` gets `items[start[d]..start[d + 1]]`, in element order.
fn group_by_unknown<T: Copy + Default, I: Iterator<Item = (usize, T)>>(
    mesh: &Mesh,
    n: usize,
    entries: impl Fn(usize, &[usize; 6]) -> I,
) -> (Vec<usize>, Vec<T>) {
    let mut start = vec![0usize; n + 1];
    for (c, cell) in mesh.cells.iter().enumerate() {
        entries(c, cell).for_each(|(d, _)| start[d + 1] += 1);
    }
    for d in 0..n {
        start[d + 1] += start[d];
    }
    let mut fill = start.clone();
    let mut items = vec![T::default(); start[n]];
    for (c, cell) in mesh.cells.iter().enumerate() {
        for (d, item) in entries(c, cell) {
            items[fill[d]] = item;
            fill[d] += 1;
        }
    }
    (start, items)
}

/// Class of a velocity unknown carrying both components (slip).
const MIXED: u8 = 2;
/// Class of a pressure unknown.
const PRESSURE: u8 = 3;

/// Per unknown: 0 or 1 for a velocity component, [`MIXED`] for a slip unknown,
/// [`PRESSURE`] for a pressure unknown.
fn component_classes(mesh: &Mesh, dofs: &DofMap) -> Vec<u8> {
    let mut classes = vec![PRESSURE; dofs.n_dofs()];
    for node in 0..mesh.nodes.len() {
        match dofs.velocity(node) {
            [ComponentDof::Free { dof: a, .. }, ComponentDof::Free { dof: b, .. }] if a == b => {
                classes[a] = MIXED;
            }
            components => {
                for (c, d) in components.iter().enumerate() {
                    if let ComponentDof::Free { dof, .. } = d {
                        classes[*dof] = c as u8;
                    }
                }
            }
        }
    }
    classes
}

/// Builds the CSC columns: for each unknown, the sorted unknowns of every cell that touches
/// it and `couples` with it (pressure columns keep only velocity rows and their own
/// diagonal).
fn build_columns(
    mesh: &Mesh,
    dofs: &DofMap,
    full: bool,
    couples: impl Fn(usize, usize) -> bool + Sync,
) -> (Vec<usize>, Vec<usize>) {
    let n = dofs.n_dofs();
    let free = |cell: &[usize; 6]| {
        dofs.cell_dofs(cell).into_iter().filter_map(|d| match d {
            ComponentDof::Free { dof, .. } => Some(dof),
            ComponentDof::Fixed(_) => None,
        })
    };
    let (start, cells_of) = group_by_unknown(mesh, n, |c, cell| free(cell).map(move |d| (d, c)));
    let column_rows = |col: usize, rows: &mut Vec<usize>| {
        let first = rows.len();
        rows.push(col);
        for &c in &cells_of[start[col]..start[col + 1]] {
            let keep =
                |r: &usize| !(dofs.is_pressure(col) && dofs.is_pressure(*r)) && couples(*r, col);
            rows.extend(free(&mesh.cells[c]).filter(keep));
        }
        rows[first..].sort_unstable();
        let mut kept = first;
        for k in first..rows.len() {
            if k == first || rows[k] != rows[kept - 1] {
                rows[kept] = rows[k];
                kept += 1;
            }
        }
        rows.truncate(kept);
    };
    // With full coupling, a velocity column's rows are the free unknowns of its cells (its
    // own among them), so two velocity columns on the same cells (the two components of a
    // node) have the same rows: the second is copied instead of sorted again.
    let same_rows_as_previous = |col: usize| {
        let cells = |c: usize| &cells_of[start[c]..start[c + 1]];
        full && !dofs.is_pressure(col) && cells(col) == cells(col - 1)
    };
    // Blocks of columns in parallel, each into its own row list, then stitched in order.
    let blocks: Vec<(Vec<usize>, Vec<usize>)> = (0..n.div_ceil(PATTERN_BLOCK))
        .into_par_iter()
        .map(|b| {
            let (mut lengths, mut rows) = (Vec::with_capacity(PATTERN_BLOCK), Vec::new());
            let first = b * PATTERN_BLOCK;
            for col in first..((b + 1) * PATTERN_BLOCK).min(n) {
                let before = rows.len();
                if col > first && same_rows_as_previous(col) {
                    let previous = before - lengths.last().copied().unwrap_or(0);
                    rows.extend_from_within(previous..before);
                } else {
                    column_rows(col, &mut rows);
                }
                lengths.push(rows.len() - before);
            }
            (lengths, rows)
        })
        .collect();
    let mut col_ptr = Vec::with_capacity(n + 1);
    col_ptr.push(0);
    for length in blocks.iter().flat_map(|(lengths, _)| lengths) {
        col_ptr.push(col_ptr.last().copied().unwrap_or(0) + length);
    }
    // Copied into place in parallel (one block per task, at its first column's offset).
    let mut row_idx = vec![0; col_ptr[n]];
    let mut rest = &mut row_idx[..];
    let mut targets = Vec::with_capacity(blocks.len());
    for (_, rows) in &blocks {
        let (target, tail) = rest.split_at_mut(rows.len());
        targets.push(target);
        rest = tail;
    }
    targets.into_par_iter().zip(&blocks).for_each(|(target, (_, rows))| {
        target.copy_from_slice(rows);
    });
    (col_ptr, row_idx)
}

/// The storage positions of one cell's local matrix entries (`p[i · LOCAL_SIZE + j]` for
/// local row `i`, column `j`; [`NOT_STORED`] for fixed unknowns and the pressure–pressure
/// block off the diagonal): the cell's free unknowns sorted once, then merged with each of
/// their columns (linear in the column length instead of a search per entry).
fn cell_positions(
    local: &[ComponentDof; LOCAL_SIZE],
    col_ptr: &[usize],
    row_idx: &[usize],
    p: &mut [u32],
) {
    let mut free = [(0usize, 0usize); LOCAL_SIZE];
    let mut m = 0;
    for (i, d) in local.iter().enumerate() {
        if let ComponentDof::Free { dof, .. } = d {
            free[m] = (*dof, i);
            m += 1;
        }
    }
    let free = &mut free[..m];
    free.sort_unstable();
    for &(col, j) in free.iter() {
        let rows = &row_idx[col_ptr[col]..col_ptr[col + 1]];
        let mut k = 0;
        for &(row, i) in free.iter() {
            if i >= LOCAL_VELOCITY && j >= LOCAL_VELOCITY && row != col {
                continue;
            }
            while k < rows.len() && rows[k] < row {
                k += 1;
            }
            let stored = k < rows.len() && rows[k] == row;
            p[i * LOCAL_SIZE + j] = if stored { (col_ptr[col] + k) as u32 } else { NOT_STORED };
        }
    }
}

/// Columns per parallel task of [`build_columns`].
const PATTERN_BLOCK: usize = 8192;

#[cfg(test)]
mod tests {
    use super::*;
    use crate::fem::dofs::NodeConstraint;
    use crate::mesh::structured::rectangle;

    /// The fully coupled pattern of an `nx × ny` unit square with every node free.
    fn free_pattern(nx: usize, ny: usize) -> SystemPattern {
        let mesh = rectangle([0.0, 0.0], [1.0, 1.0], nx, ny, |_, _| [0.0, 0.0]).unwrap();
        let constraints = vec![NodeConstraint::Free; mesh.nodes.len()];
        let dofs = DofMap::new(&mesh, &constraints, None);
        SystemPattern::new(&mesh, dofs, VelocityCoupling::Full).unwrap()
    }

    /// An `nx × ny` mesh of `[0, 2] × [0, 1]` with the velocity `fixed` on the left side and
    /// slip nodes (weights other than 1) on the bottom, and its fully coupled pattern.
    fn fixed_and_slip_pattern(nx: usize, ny: usize, fixed: [f64; 2]) -> (Mesh, SystemPattern) {
        let mesh = rectangle([0.0, 0.0], [2.0, 1.0], nx, ny, |_, _| [0.0, 0.0]).unwrap();
        let mut constraints = vec![NodeConstraint::Free; mesh.nodes.len()];
        for (n, p) in mesh.nodes.iter().enumerate() {
            if p[0] == 0.0 {
                constraints[n] = NodeConstraint::Fixed(fixed);
            } else if p[1] == 0.0 {
                constraints[n] = NodeConstraint::Slip { tangent: [0.6, 0.8] };
            }
        }
        let dofs = DofMap::new(&mesh, &constraints, None);
        let pattern = SystemPattern::new(&mesh, dofs, VelocityCoupling::Full).unwrap();
        (mesh, pattern)
    }

    #[test]
    fn symmetric_residual_is_b_minus_the_general_product_and_its_squared_norm() {
        // The row gather by symmetry against the column scatter of `multiply`.
        let pattern = free_pattern(40, 30);
        let (cp, ri) = (pattern.col_ptr(), pattern.row_idx());
        let mut values = vec![0.0; pattern.nnz()];
        for col in 0..pattern.n() {
            for k in cp[col]..cp[col + 1] {
                let (a, b) = (ri[k].min(col), ri[k].max(col));
                values[k] = ((a * 31 + b * 7) % 13) as f64 - 6.0;
            }
        }
        let x: Vec<f64> = (0..pattern.n()).map(|i| (i % 5) as f64 - 2.0).collect();
        let b: Vec<f64> = (0..pattern.n()).map(|i| (i % 3) as f64).collect();
        let mut ax = vec![0.0; x.len()];
        pattern.multiply(&values, &x, &mut ax);
        assert!(ax.iter().any(|v| *v != 0.0));
        let mut r = vec![f64::NAN; x.len()];
        let squares = pattern.symmetric_residual(&values, &x, &b, &mut r);
        let expected: Vec<f64> = b.iter().zip(&ax).map(|(b, a)| b - a).collect();
        assert!(pattern.n() > 4096, "more than one chunk");
        assert_eq!(r, expected);
        let norm2: f64 = expected.iter().map(|v| v * v).sum();
        assert!((squares - norm2).abs() <= 1e-12 * norm2, "{squares} against {norm2}");
        // The compact copy without the exact zeros gives the same residual to the bit
        // (a dropped term adds 0 · x_k = 0 exactly, as x is finite here).
        for col in 0..pattern.n() {
            for k in (cp[col]..cp[col + 1]).filter(|&k| k % 3 == 0 && ri[k] != col) {
                values[k] = 0.0;
            }
        }
        let mut r_full = vec![f64::NAN; x.len()];
        let squares_full = pattern.symmetric_residual(&values, &x, &b, &mut r_full);
        let compact = CompactMatrix::of(&pattern, &values);
        assert!(compact.nnz() < pattern.nnz() * 3 / 4, "a third of the entries dropped");
        let mut again = vec![f64::NAN; x.len()];
        assert_eq!(compact.symmetric_residual(&x, &b, &mut again), squares_full);
        assert_eq!(again, r_full);
    }

    #[test]
    fn compact_matrix_keeps_the_diagonal_so_a_non_finite_x_shows() {
        let pattern = free_pattern(6, 5);
        let zeros = vec![0.0; pattern.nnz()];
        let compact = CompactMatrix::of(&pattern, &zeros);
        assert_eq!(compact.nnz(), pattern.n(), "only the diagonal slots");
        let mut x = vec![1.0; pattern.n()];
        x[pattern.n() / 2] = f64::INFINITY;
        let b = vec![0.0; pattern.n()];
        let mut r = vec![0.0; pattern.n()];
        assert!(compact.symmetric_residual(&x, &b, &mut r).is_nan());
    }

    #[test]
    fn gathered_load_equals_the_serial_scatter_bit_for_bit() {
        // Fixed and slip nodes (weights other than 1) on the boundary; the reference is the
        // plain element-order scatter `rhs[dof] += weight · load[i]`.
        let (mesh, pattern) = fixed_and_slip_pattern(30, 14, [1.0, 0.0]);
        let local = |cell: usize, load: &mut [f64; LOCAL_SIZE]| {
            for (i, l) in load.iter_mut().enumerate() {
                *l = ((cell * 17 + i * 5) % 23) as f64 / 7.0 - 1.3;
            }
        };
        let kernel = |first: usize, loads: &mut [[f64; LOCAL_SIZE]]| {
            loads.iter_mut().enumerate().for_each(|(k, load)| local(first + k, load));
        };
        let mut expected = vec![0.0; pattern.n()];
        for (c, cell) in mesh.cells.iter().enumerate() {
            let mut load = [0.0; LOCAL_SIZE];
            local(c, &mut load);
            for (i, d) in pattern.dofs.cell_dofs(cell).iter().enumerate() {
                if let ComponentDof::Free { dof, weight } = *d {
                    expected[dof] += weight * load[i];
                }
            }
        }
        let gather = LoadGather::new(&pattern, &mesh);
        for parallelism in [Parallelism::Serial, Parallelism::Rayon] {
            let (mut loads, mut rhs) = (Vec::new(), vec![f64::NAN; 3]);
            assemble_vector_into(&gather, &mesh, parallelism, &mut loads, &mut rhs, kernel);
            assert_eq!(rhs, expected, "{parallelism:?}");
        }
    }

    /// Without the position map, assembly finds each cell's positions again and gives the
    /// same sums to the bit (same scatter order), with fixed and slip unknowns and a kernel
    /// that fills the pressure–pressure block (dropped entries counted alike).
    #[test]
    fn assembly_after_releasing_the_positions_is_unchanged() {
        let (mesh, mut pattern) = fixed_and_slip_pattern(12, 7, [1.0, 0.5]);
        let kernel = |cell: usize, local: &mut LocalSystem| {
            for (i, row) in local.matrix.iter_mut().enumerate() {
                for (j, k) in row.iter_mut().enumerate() {
                    *k = ((cell * 13 + i * 7 + j * 3) % 29) as f64 / 9.0 - 1.5;
                }
                local.load[i] = ((cell + i) % 5) as f64 - 2.0;
            }
        };
        let before = assemble(&pattern, &mesh, Parallelism::Rayon, kernel);
        assert!(before.dropped_entries > 0, "the pressure–pressure block is not stored");
        pattern.release_positions();
        for parallelism in [Parallelism::Serial, Parallelism::Rayon] {
            assert_eq!(assemble(&pattern, &mesh, parallelism, kernel), before);
        }
    }

    /// The full pattern, whose second velocity columns are copied from the first, against
    /// the definition: every pair of free unknowns of one cell, except two different
    /// pressures; with fixed and slip nodes (one and no unknown per node).
    #[test]
    fn full_pattern_is_every_pair_of_free_unknowns_of_a_cell() {
        let mesh = rectangle([0.0, 0.0], [1.0, 1.0], 5, 4, |_, _| [0.0, 0.0]).unwrap();
        let mut constraints = vec![NodeConstraint::Free; mesh.nodes.len()];
        for n in (0..mesh.nodes.len()).filter(|n| n % 7 == 3) {
            constraints[n] = NodeConstraint::Slip { tangent: [0.6, 0.8] };
        }
        for n in (0..mesh.nodes.len()).filter(|n| n % 11 == 5) {
            constraints[n] = NodeConstraint::Fixed([1.0, 0.0]);
        }
        let dofs = DofMap::new(&mesh, &constraints, None);
        let mut expected = std::collections::BTreeSet::new();
        for cell in &mesh.cells {
            let free: Vec<usize> = dofs
                .cell_dofs(cell)
                .iter()
                .filter_map(|d| match *d {
                    ComponentDof::Free { dof, .. } => Some(dof),
                    ComponentDof::Fixed(_) => None,
                })
                .collect();
            for &r in &free {
                for &c in &free {
                    if r == c || !(dofs.is_pressure(r) && dofs.is_pressure(c)) {
                        expected.insert((c, r));
                    }
                }
            }
        }
        let pattern = SystemPattern::new(&mesh, dofs, VelocityCoupling::Full).unwrap();
        let (cp, ri) = (pattern.col_ptr(), pattern.row_idx());
        let stored: std::collections::BTreeSet<(usize, usize)> = (0..pattern.n())
            .flat_map(|c| ri[cp[c]..cp[c + 1]].iter().map(move |&r| (c, r)))
            .collect();
        assert_eq!(stored.len(), ri.len(), "no duplicate rows");
        assert_eq!(stored, expected);
        let ascending = |c: usize| ri[cp[c]..cp[c + 1]].windows(2).all(|w| w[0] < w[1]);
        assert!((0..pattern.n()).all(ascending), "rows ascending in every column");
    }

    #[test]
    fn pattern_is_structurally_symmetric_with_full_diagonal_and_no_pressure_coupling() {
        let mesh = rectangle([0.0, 0.0], [1.0, 1.0], 3, 3, |_, _| [0.0, 0.0]).unwrap();
        let mut constraints = vec![NodeConstraint::Free; mesh.nodes.len()];
        constraints[2] = NodeConstraint::Fixed([0.0, 0.0]);
        let pattern = SystemPattern::new(
            &mesh,
            DofMap::new(&mesh, &constraints, None),
            VelocityCoupling::Full,
        )
        .unwrap();
        let (cp, ri) = (pattern.col_ptr(), pattern.row_idx());
        let has = |r: usize, c: usize| ri[cp[c]..cp[c + 1]].binary_search(&r).is_ok();
        for col in 0..pattern.n() {
            assert!(has(col, col), "diagonal of {col}");
            for &row in &ri[cp[col]..cp[col + 1]] {
                assert!(has(col, row), "({row}, {col}) without its transpose");
                let both_pressure =
                    pattern.dofs().is_pressure(row) && pattern.dofs().is_pressure(col);
                assert!(!both_pressure || row == col, "pressure coupling ({row}, {col})");
            }
        }
    }

    #[test]
    fn scatter_moves_fixed_values_to_the_right_hand_side() {
        // A kernel whose velocity entries are all 1 and whose load is 0: a fixed value v at a
        // node then contributes −v to every free row of each cell touching that node.
        let mesh = rectangle([0.0, 0.0], [1.0, 1.0], 2, 2, |_, _| [0.0, 0.0]).unwrap();
        let mut constraints = vec![NodeConstraint::Free; mesh.nodes.len()];
        constraints[0] = NodeConstraint::Fixed([2.0, 0.0]);
        let pattern = SystemPattern::new(
            &mesh,
            DofMap::new(&mesh, &constraints, None),
            VelocityCoupling::Full,
        )
        .unwrap();
        let system = assemble(&pattern, &mesh, Parallelism::Serial, |_, local| {
            local.clear();
            for i in 0..LOCAL_VELOCITY {
                for j in 0..LOCAL_VELOCITY {
                    local.matrix[i][j] = 1.0;
                }
            }
        });
        let cells_with_node0 = mesh.cells.iter().filter(|c| c.contains(&0)).count() as f64;
        // Each cell touching node 0 has 10 free local velocity rows (the other 5 nodes, 2
        // components), each receiving −(1 · 2 + 1 · 0) = −2.
        let total: f64 = system.rhs[..pattern.dofs().n_velocity_dofs()].iter().sum();
        assert!((total + 2.0 * cells_with_node0 * 10.0).abs() < 1e-12, "total {total}");
    }
}
