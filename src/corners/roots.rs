//! Complex root finder for analytic functions in a rectangle of the complex plane.
//!
//! Takes an analytic function `f: ℂ → ℂ` (no poles in the box), a [`RootBox`] and
//! [`RootParams`]; returns every root inside the box with its multiplicity, polished by
//! Newton's method and sorted by real part.
//!
//! Method (argument principle): the box is cut into a grid of cells. For each cell the number
//! of roots inside is the winding number of `f` around the cell boundary,
//! `N = (1/2π) Δ_∂C arg f`, accumulated along each edge with adaptive sampling (a segment is
//! split until both halves turn by less than π/4 and add up to the whole, which guards
//! against aliasing by a full turn; each grid edge is computed once and shared by its two
//! cells). Cells with `N = 1` start Newton's method at their centre; the root is
//! accepted when Newton converges inside the cell. Other cells with `N ≥ 1` are quartered
//! recursively; a cell that reaches the size floor with `N ≥ 2` holds a multiple root (or an
//! unresolvable cluster) and is polished by the modified Newton step `z ← z − N f/f′`.
//! Finally the total multiplicity found must equal the total winding number of the cells,
//! so a missed root is an error, never a silent omission.
//!
//! A root lying on a grid line makes the phase undefined; the grid is then shifted by an
//! irrational fraction of a cell and the count repeated.
//!
//! # References
//! P. Henrici, *Applied and Computational Complex Analysis*, Vol. 1, Wiley 1974, §4.10
//! (argument principle and its use for counting zeros) [from memory].

use num_complex::Complex64;

/// A closed rectangle `[re.0, re.1] × [im.0, im.1]` of the complex plane.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct RootBox {
    pub re: (f64, f64),
    pub im: (f64, f64),
}

/// Controls of [`find_roots`].
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct RootParams {
    /// Number of grid cells along the real axis.
    pub cells_re: usize,
    /// Number of grid cells along the imaginary axis.
    pub cells_im: usize,
    /// Relative step (in units of the box size) below which Newton has converged.
    pub tolerance: f64,
    /// Cells smaller than this fraction of the box size are not split further.
    pub min_cell_fraction: f64,
    /// Budget of function evaluations; exceeding it is an error.
    pub max_evaluations: usize,
}

impl Default for RootParams {
    /// 12 × 12 cells, Newton tolerance 1e-14 of the box size, cell floor 1e-6 of the box
    /// size (a root of multiplicity m is only determined to about eps^{1/m} anyway, and
    /// below the floor rounding noise would corrupt the winding numbers), 2 million
    /// evaluations.
    fn default() -> Self {
        RootParams {
            cells_re: 12,
            cells_im: 12,
            tolerance: 1e-14,
            min_cell_fraction: 1e-6,
            max_evaluations: 2_000_000,
        }
    }
}

/// A root and its multiplicity (the winding number of the smallest cell that isolated it).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Root {
    pub value: Complex64,
    pub multiplicity: usize,
}

/// Why the root search failed.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum RootError {
    #[error("root box [{re_lo}, {re_hi}] x [{im_lo}, {im_hi}] is empty or not finite")]
    InvalidBox { re_lo: f64, re_hi: f64, im_lo: f64, im_hi: f64 },
    #[error("function is zero or not finite on every tried grid (near {near})")]
    RootOnContour { near: Complex64 },
    #[error("root count mismatch: winding numbers give {expected}, polishing found {found}")]
    CountMismatch { expected: usize, found: usize },
    #[error("root search exceeded {budget} function evaluations")]
    TooManyEvaluations { budget: usize },
}

/// Finds all roots of the analytic function `f` inside `bounds`, sorted by real part, then
/// imaginary part. Multiple roots appear once with their multiplicity.
///
/// # Errors
/// [`RootError::InvalidBox`] for an empty box; [`RootError::RootOnContour`] when `f`
/// vanishes (or is not finite) on the grid lines of three shifted grids (the second and
/// third also widen the box by about 1 % and 2 % of a cell, so a root on the outer boundary
/// is counted as inside);
/// [`RootError::CountMismatch`] when, on all three grids, the counts of a cell and its
/// quarters disagree or polishing does not account for every counted root;
/// [`RootError::TooManyEvaluations`] when the evaluation budget runs out.
pub fn find_roots(
    f: impl Fn(Complex64) -> Complex64,
    bounds: RootBox,
    params: &RootParams,
) -> Result<Vec<Root>, RootError> {
    let (re, im) = (bounds.re, bounds.im);
    let valid = [re.0, re.1, im.0, im.1].iter().all(|v| v.is_finite());
    if !valid || re.1 <= re.0 || im.1 <= im.0 || params.cells_re == 0 || params.cells_im == 0 {
        return Err(RootError::InvalidBox { re_lo: re.0, re_hi: re.1, im_lo: im.0, im_hi: im.1 });
    }
    let mut search =
        Search { f: &f, evaluations: 0, params, scale: (re.1 - re.0).max(im.1 - im.0) };
    let mut last_error = RootError::RootOnContour { near: Complex64::new(re.0, im.0) };
    // Irrational shifts of the interior grid lines (golden-ratio fractions of a cell).
    let cell = ((re.1 - re.0) / params.cells_re as f64).min((im.1 - im.0) / params.cells_im as f64);
    for (attempt, shift) in
        [0.0, 0.381_966_011_250_105, 0.236_067_977_499_79].into_iter().enumerate()
    {
        // Later attempts also move the outer boundary out by a small irrational amount.
        let grow = attempt as f64 * 0.012_345_678_9 * cell;
        let shifted = RootBox { re: (re.0 - grow, re.1 + grow), im: (im.0 - grow, im.1 + grow) };
        match search.grid(shifted, shift) {
            Ok(mut roots) => {
                roots.sort_by(|a, b| {
                    a.value.re.total_cmp(&b.value.re).then(a.value.im.total_cmp(&b.value.im))
                });
                return Ok(roots);
            }
            Err(e @ (RootError::RootOnContour { .. } | RootError::CountMismatch { .. })) => {
                last_error = e
            }
            Err(e) => return Err(e),
        }
    }
    Err(last_error)
}

/// A cell of the search: lower-left and upper-right corners.
#[derive(Clone, Copy, Debug)]
struct Cell {
    lo: Complex64,
    hi: Complex64,
}

impl Cell {
    fn centre(&self) -> Complex64 {
        (self.lo + self.hi) * 0.5
    }

    fn size(&self) -> f64 {
        (self.hi.re - self.lo.re).max(self.hi.im - self.lo.im)
    }

    fn contains(&self, z: Complex64, slack: f64) -> bool {
        z.re >= self.lo.re - slack
            && z.re <= self.hi.re + slack
            && z.im >= self.lo.im - slack
            && z.im <= self.hi.im + slack
    }

    fn quarters(&self) -> [Cell; 4] {
        let c = self.centre();
        let (lo, hi) = (self.lo, self.hi);
        [
            Cell { lo, hi: c },
            Cell { lo: Complex64::new(c.re, lo.im), hi: Complex64::new(hi.re, c.im) },
            Cell { lo: Complex64::new(lo.re, c.im), hi: Complex64::new(c.re, hi.im) },
            Cell { lo: c, hi },
        ]
    }

    /// Corners in counter-clockwise order.
    fn corners(&self) -> [Complex64; 4] {
        [
            self.lo,
            Complex64::new(self.hi.re, self.lo.im),
            self.hi,
            Complex64::new(self.lo.re, self.hi.im),
        ]
    }
}

struct Search<'a, F: Fn(Complex64) -> Complex64> {
    f: &'a F,
    evaluations: usize,
    params: &'a RootParams,
    scale: f64,
}

impl<F: Fn(Complex64) -> Complex64> Search<'_, F> {
    fn eval(&mut self, z: Complex64) -> Result<Complex64, RootError> {
        self.evaluations += 1;
        if self.evaluations > self.params.max_evaluations {
            return Err(RootError::TooManyEvaluations { budget: self.params.max_evaluations });
        }
        let w = (self.f)(z);
        if w.re.is_finite() && w.im.is_finite() && w != Complex64::new(0.0, 0.0) {
            Ok(w)
        } else {
            Err(RootError::RootOnContour { near: z })
        }
    }

    /// Counts and polishes the roots on a grid whose interior lines are shifted by `shift`
    /// cells (the outer boundary stays fixed).
    fn grid(&mut self, bounds: RootBox, shift: f64) -> Result<Vec<Root>, RootError> {
        let lines = |lo: f64, hi: f64, n: usize| -> Vec<f64> {
            let h = (hi - lo) / n as f64;
            let mut v: Vec<f64> = (1..n).map(|k| lo + (k as f64 + shift) * h).collect();
            v.insert(0, lo);
            v.push(hi);
            v
        };
        let xs = lines(bounds.re.0, bounds.re.1, self.params.cells_re);
        let ys = lines(bounds.im.0, bounds.im.1, self.params.cells_im);
        let (horizontal, vertical) = self.grid_edges(&xs, &ys)?;
        let (mut roots, mut expected) = (Vec::new(), 0usize);
        for i in 0..xs.len() - 1 {
            for j in 0..ys.len() - 1 {
                // Counter-clockwise: bottom, right, top reversed, left reversed.
                let total =
                    horizontal[i][j] + vertical[i + 1][j] - horizontal[i][j + 1] - vertical[i][j];
                let n = winding_from_phase(total);
                expected += n;
                if n > 0 {
                    let cell = Cell {
                        lo: Complex64::new(xs[i], ys[j]),
                        hi: Complex64::new(xs[i + 1], ys[j + 1]),
                    };
                    self.resolve(cell, n, &mut roots)?;
                }
            }
        }
        let found: usize = roots.iter().map(|r| r.multiplicity).sum();
        if found != expected {
            return Err(RootError::CountMismatch { expected, found });
        }
        Ok(roots)
    }

    /// Phase changes along every grid edge, each computed once and shared by the two cells
    /// it bounds: `horizontal[i][j]` runs from `(x_i, y_j)` to `(x_{i+1}, y_j)`,
    /// `vertical[i][j]` from `(x_i, y_j)` to `(x_i, y_{j+1})`.
    #[allow(clippy::type_complexity)]
    fn grid_edges(
        &mut self,
        xs: &[f64],
        ys: &[f64],
    ) -> Result<(Vec<Vec<f64>>, Vec<Vec<f64>>), RootError> {
        let z = |x: f64, y: f64| Complex64::new(x, y);
        let mut horizontal = vec![vec![0.0; ys.len()]; xs.len() - 1];
        for (i, row) in horizontal.iter_mut().enumerate() {
            for (j, v) in row.iter_mut().enumerate() {
                *v = self.phase_change(z(xs[i], ys[j]), z(xs[i + 1], ys[j]))?;
            }
        }
        let mut vertical = vec![vec![0.0; ys.len() - 1]; xs.len()];
        for (i, row) in vertical.iter_mut().enumerate() {
            for (j, v) in row.iter_mut().enumerate() {
                *v = self.phase_change(z(xs[i], ys[j]), z(xs[i], ys[j + 1]))?;
            }
        }
        Ok((horizontal, vertical))
    }

    /// Number of roots inside `cell` (argument principle).
    fn winding(&mut self, cell: &Cell) -> Result<usize, RootError> {
        let c = cell.corners();
        let mut total = 0.0;
        for k in 0..4 {
            total += self.phase_change(c[k], c[(k + 1) % 4])?;
        }
        Ok(winding_from_phase(total))
    }

    /// Continuous change of `arg f` along the segment `a → b`, by adaptive bisection.
    fn phase_change(&mut self, a: Complex64, b: Complex64) -> Result<f64, RootError> {
        const MIN_PIECES: usize = 8;
        let (mut total, mut z0) = (0.0, a);
        let mut w0 = self.eval(a)?;
        for k in 1..=MIN_PIECES {
            let z1 = a + (b - a) * (k as f64 / MIN_PIECES as f64);
            let w1 = self.eval(z1)?;
            total += self.refine_phase(z0, w0, z1, w1, 0)?;
            (z0, w0) = (z1, w1);
        }
        Ok(total)
    }

    /// Phase change on `z0 → z1`: accepted only when the midpoint confirms it (both halves
    /// turn by less than π/4 and add up to the whole), which guards against aliasing by a
    /// full turn when a root cluster passes close to the segment.
    fn refine_phase(
        &mut self,
        z0: Complex64,
        w0: Complex64,
        z1: Complex64,
        w1: Complex64,
        depth: usize,
    ) -> Result<f64, RootError> {
        if depth > 60 || (z1 - z0).norm() < 1e-13 * self.scale {
            return Err(RootError::RootOnContour { near: z0 });
        }
        let zm = (z0 + z1) * 0.5;
        let wm = self.eval(zm)?;
        let (d, d1, d2) = ((w1 / w0).arg(), (wm / w0).arg(), (w1 / wm).arg());
        let quarter = std::f64::consts::FRAC_PI_4;
        if d1.abs() < quarter && d2.abs() < quarter && (d1 + d2 - d).abs() < 1e-9 {
            return Ok(d);
        }
        Ok(self.refine_phase(z0, w0, zm, wm, depth + 1)?
            + self.refine_phase(zm, wm, z1, w1, depth + 1)?)
    }

    /// Locates the `n` roots of `cell`: Newton for a single root, otherwise quartering.
    fn resolve(&mut self, cell: Cell, n: usize, out: &mut Vec<Root>) -> Result<(), RootError> {
        if n == 1
            && let Some(z) = self.newton(cell.centre(), 1)?
            && cell.contains(z, 1e-12 * self.scale)
        {
            push_merging(out, z, 1, 1e-9 * self.scale);
            return Ok(());
        }
        // A cluster that stays together below 1e-5 of the box is a multiple root: modified
        // Newton converges quadratically to it, before rounding noise corrupts the winding
        // numbers of still smaller cells.
        if n >= 2
            && cell.size() < 1e-5 * self.scale
            && let Some(z) = self.newton(cell.centre(), n)?
            && cell.contains(z, 1e-12 * self.scale)
        {
            push_merging(out, z, n, 1e-9 * self.scale);
            return Ok(());
        }
        if cell.size() < self.params.min_cell_fraction * self.scale {
            let z = self.newton(cell.centre(), n)?.unwrap_or(cell.centre());
            let z = if cell.contains(z, cell.size()) { z } else { cell.centre() };
            push_merging(out, z, n, 1e-9 * self.scale);
            return Ok(());
        }
        let quarters = cell.quarters();
        let mut counts = [0usize; 4];
        for (c, q) in counts.iter_mut().zip(quarters.iter()) {
            *c = self.winding(q)?;
        }
        let total: usize = counts.iter().sum();
        if total != n {
            // Inconsistent counts: the caller retries on a shifted grid.
            return Err(RootError::CountMismatch { expected: n, found: total });
        }
        for (q, m) in quarters.into_iter().zip(counts) {
            if m > 0 {
                self.resolve(q, m, out)?;
            }
        }
        Ok(())
    }

    /// Newton's method with multiplicity `m` (`z ← z − m f/f′`), derivative by a central
    /// difference. Returns `None` when it does not converge in 60 steps.
    fn newton(&mut self, start: Complex64, m: usize) -> Result<Option<Complex64>, RootError> {
        let mut z = start;
        for _ in 0..60 {
            let h = 1e-6 * self.scale.max(z.norm() * 1e-3);
            let fz = (self.f)(z);
            self.evaluations += 3;
            let fp = ((self.f)(z + h) - (self.f)(z - h)) / (2.0 * h);
            if fz == Complex64::new(0.0, 0.0) {
                return Ok(Some(z));
            }
            if !(fz.re.is_finite() && fz.im.is_finite() && fp.norm() > 0.0 && fp.re.is_finite()) {
                return Ok(None);
            }
            let step = fz / fp * m as f64;
            z -= step;
            if step.norm() < self.params.tolerance * self.scale.max(z.norm()) {
                return Ok(Some(z));
            }
        }
        Ok(None)
    }
}

/// Winding number from a total phase change; the phase changes are exact up to rounding,
/// so the turns are an integer to ~1e-12.
fn winding_from_phase(total: f64) -> usize {
    (total / std::f64::consts::TAU).round().max(0.0) as usize
}

/// Adds the root; one equal to a listed root (within `tol`) came from a disjoint cell, so the
/// two are numerically indistinguishable roots and their multiplicities add.
fn push_merging(out: &mut Vec<Root>, z: Complex64, multiplicity: usize, tol: f64) {
    match out.iter_mut().find(|r| (r.value - z).norm() < tol) {
        Some(r) => r.multiplicity += multiplicity,
        None => out.push(Root { value: z, multiplicity }),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn c(re: f64, im: f64) -> Complex64 {
        Complex64::new(re, im)
    }

    #[test]
    fn finds_every_root_of_a_polynomial_with_close_and_double_roots() {
        // Roots chosen by hand: a close pair (1e-4 apart), a double root and a conjugate pair.
        let roots = [c(0.5, 0.0), c(0.5001, 0.0), c(2.0, 1.0), c(2.0, -1.0), c(3.3, 0.7)];
        let f = |z: Complex64| {
            roots.iter().fold(c(1.0, 0.0), |p, r| p * (z - r)) * (z - c(1.7, 0.2)).powi(2)
        };
        let b = RootBox { re: (0.1, 4.0), im: (-2.0, 2.0) };
        let found = find_roots(f, b, &RootParams::default()).unwrap();
        let total: usize = found.iter().map(|r| r.multiplicity).sum();
        assert_eq!(total, 7);
        for r in roots {
            // Simple roots are polished to ~1e-14 relative; 1e-10 leaves margin for the pair.
            assert!(found.iter().any(|x| (x.value - r).norm() < 1e-10), "missed {r}");
        }
        let double = found.iter().find(|x| x.multiplicity == 2).unwrap();
        // A double root is determined to about sqrt(eps) ≈ 1.5e-8 in double precision.
        assert!((double.value - c(1.7, 0.2)).norm() < 1e-6);
    }

    #[test]
    fn counts_many_roots_of_sine() {
        // sin(z) has roots kπ; the box holds k = 1..6.
        let found = find_roots(
            |z: Complex64| z.sin(),
            RootBox { re: (1.0, 19.5), im: (-1.0, 1.0) },
            &RootParams::default(),
        )
        .unwrap();
        assert_eq!(found.len(), 6);
        for (k, r) in found.iter().enumerate() {
            assert!((r.value - c((k + 1) as f64 * std::f64::consts::PI, 0.0)).norm() < 1e-12);
        }
    }

    #[test]
    fn rejects_an_empty_box() {
        let e =
            find_roots(|z| z, RootBox { re: (1.0, 1.0), im: (0.0, 1.0) }, &RootParams::default());
        assert!(matches!(e, Err(RootError::InvalidBox { .. })));
    }
}
