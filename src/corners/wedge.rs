//! Corner exponents of the Stokes operator in a plane wedge `0 < θ < ω`.
//!
//! Takes the fluid-side angle `ω ∈ (0, 2π]` and the homogeneous condition on each side
//! ([`SideKind`]); returns the exponents `λ` (velocity `~ r^λ`, pressure `~ r^{λ−1}`) with
//! `0 < Re λ < re_max`, each with its multiplicity, symmetry family and a flag for
//! polynomial (smooth) modes.
//!
//! Ansatz: stream function `ψ = r^{λ+1} f(θ)` with
//! `f = A cos((λ+1)θ) + B sin((λ+1)θ) + C cos((λ−1)θ) + D sin((λ−1)θ)`; with `m = λ + 1`
//! and `W = f″ + m² f` the side conditions read (benchmarks.md §2.4):
//!
//! | side | rows |
//! |---|---|
//! | wall, prescribed velocity (D) | `f = 0`, `f′ = 0` |
//! | free slip (S) | `f = 0`, `f″ = 0` |
//! | do-nothing outflow, gradient form (O) | `f″ + m f = 0`, `−W′ + (1−m)(m−2) f′ = 0` |
//! | traction-free, symmetric form (N) | `f″ + m(2−m) f = 0`, `−W′ + 2(1−m)(m−2) f′ = 0` |
//!
//! Eigenvalue equations used (the pair is unordered; every equation is symmetric in the sides):
//! * D/D: `sin(λω) = −λ sin ω` (ψ even) and `sin(λω) = +λ sin ω` (ψ odd) — Dauge (1989),
//!   Moffatt (1964).
//! * N/N: the same two equations — derived (benchmarks.md §2.4, \[D\]).
//! * D/N: `cos(λω) = ±λ sin ω` — derived (\[D\]).
//! * D/S: `sin(2λω) = λ sin 2ω` — derived (\[D\]).
//! * S/S: `λ = nπ/ω ± 1`, `n ≥ 1` — derived (\[D\]), closed-form roots.
//! * D/O: `3 sin²(λω) + λ² sin² ω = 4` — derived (\[D\]).
//! * S/O, S/N, O/O, O/N: the 4×4 determinant of the rows above, evaluated numerically.
//!
//! Spurious roots: `λ = 0` (translations; also outside the search box) and `λ = 1` (where
//! the basis degenerates: `sin((λ−1)θ) ≡ 0`) are divided out of the equations that always
//! vanish there (`sin(λω) ± λ sin ω` by `λ`, resp. `λ(λ−1)`; `sin 2λω − λ sin 2ω` by
//! `λ(λ−1)`; the determinant by `λ²(λ−1)`). A root that survives at `λ = 1` is genuine for
//! D/D and D/S (benchmarks.md §2.1: `sin ω (sin ω − ω cos ω) = 0`; D/S is its reflection);
//! there the mode carries `ψ ∋ r²θ` and the pressure `p = 4μD ln r`. When a side has an
//! outflow or traction condition, that log pressure cannot satisfy the normal-stress row at
//! every `r`, so any `λ = 1` mode has `ψ = r²(A cos 2θ + B sin 2θ + C)`, a quadratic
//! polynomial, with constant pressure — smooth (derived here; e.g. the rigid rotation for
//! N/N and Couette flow for D/O at 90°). Such a root is dropped and mentioned in the notes.
//! For the determinant pairs the zeros at `λ = 0` and `λ = 1` are divided out with their
//! measured orders (winding numbers on circles of radius 0.02 and 1e-3); a genuine root
//! within 1e-3 of `λ = 1` at an isolated angle is then removed too, and a note says so.
//!
//! Polynomial modes: for integer `λ ≥ 2` every basis function gives a polynomial `ψ`, so a
//! simple integer root is a smooth mode (e.g. D/S at 90°: 2, 3). For S/S every integer root
//! `λ ≥ 1` is polynomial (the eigenfunctions are single sines). Such modes do not limit
//! regularity and are skipped when the leading exponent is chosen.
//!
//! # References
//! * M. Dauge, *Stationary Stokes and Navier–Stokes systems on two- or three-dimensional
//!   domains with corners. Part I*, SIAM J. Math. Anal. 20 (1989) 74–97.
//! * H.K. Moffatt, *Viscous and resistive eddies near a sharp corner*, J. Fluid Mech. 18
//!   (1964) 1–18.
//! * /work/shared/refs/benchmarks.md §2.1–2.4 (derivations marked \[D\] there).

use num_complex::Complex64;
use std::f64::consts::PI;

use super::roots::{RootBox, RootError, RootParams, find_roots};

/// The homogeneous operator a boundary condition imposes at a corner side.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, PartialOrd, Ord, serde::Serialize)]
pub enum SideKind {
    /// Dirichlet velocity: no-slip or prescribed velocity (D).
    Wall,
    /// Free slip: `u·n = 0`, zero shear stress (S).
    Slip,
    /// Do-nothing outflow in gradient form, `ν ∂u/∂n − p n = 0` (O).
    Outflow,
    /// Traction-free outflow in symmetric form, `(2ν ε(u) − p I) n = 0` (N).
    Traction,
}

impl SideKind {
    /// One-letter code used in tables: D, S, O, N.
    pub fn letter(self) -> char {
        match self {
            SideKind::Wall => 'D',
            SideKind::Slip => 'S',
            SideKind::Outflow => 'O',
            SideKind::Traction => 'N',
        }
    }
}

/// Which factor of the eigenvalue equation a root belongs to.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize)]
#[non_exhaustive]
pub enum Family {
    /// `sin(λω) = −λ sin ω`: ψ even about the bisector (Moffatt's "antisymmetric" flow).
    PsiEven,
    /// `sin(λω) = +λ sin ω`: ψ odd about the bisector.
    PsiOdd,
    /// `cos(λω) = +λ sin ω` (D/N).
    CosPlus,
    /// `cos(λω) = −λ sin ω` (D/N).
    CosMinus,
    /// The pair has a single equation (D/S, D/O, S/S or the determinant).
    Single,
}

/// One corner exponent `λ = re ± i·im` (`im ≥ 0`; `im > 0` stands for the conjugate pair).
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize)]
pub struct Exponent {
    pub re: f64,
    pub im: f64,
    pub multiplicity: usize,
    pub family: Family,
    /// The mode is a polynomial (smooth): it does not limit regularity.
    pub polynomial: bool,
}

impl Exponent {
    /// `λ` as a complex number (the member of the pair with `Im λ ≥ 0`).
    pub fn value(&self) -> Complex64 {
        Complex64::new(self.re, self.im)
    }

    /// Whether `λ` is complex (a conjugate pair: oscillating, Moffatt-type modes).
    pub fn is_complex(&self) -> bool {
        self.im > 0.0
    }
}

/// Controls of the exponent search.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct ExponentSearch {
    /// Real parts up to this are searched (doubled, up to `min(re_cap, max(re_max, 10/ω))`,
    /// until a non-polynomial exponent is found).
    pub re_max: f64,
    /// Largest real part ever searched (acute corners have large exponents, `≈ 4.2/ω`).
    pub re_cap: f64,
    /// Real parts below this are not searched (`λ = 0` is the translation mode).
    pub re_floor: f64,
    /// Root-finder controls (the grid size is set from the box, cells of about 1 × 1).
    pub roots: RootParams,
}

impl Default for ExponentSearch {
    /// `re_max = 6`, `re_cap = 400`, `re_floor = 1e-3`.
    fn default() -> Self {
        ExponentSearch { re_max: 6.0, re_cap: 400.0, re_floor: 1e-3, roots: RootParams::default() }
    }
}

/// The exponents of one wedge and remarks about dropped roots.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct WedgeSpectrum {
    /// Exponents sorted by real part, then imaginary part.
    pub exponents: Vec<Exponent>,
    /// Human-readable remarks (e.g. a dropped root at `λ = 1`).
    pub notes: Vec<String>,
}

impl WedgeSpectrum {
    /// The leading singular exponent: smallest real part among non-polynomial modes.
    pub fn leading(&self) -> Option<Exponent> {
        self.exponents.iter().copied().find(|e| !e.polynomial)
    }
}

/// Errors of the exponent computation.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum WedgeError {
    #[error("wedge angle {omega} rad is outside (0, 2π]")]
    InvalidAngle { omega: f64 },
    #[error("root search for the {pair} corner of angle {degrees:.3}° failed: {source}")]
    RootSearch { pair: String, degrees: f64, source: RootError },
}

/// Exponents of the Stokes wedge with sides `a`, `b` and fluid angle `omega` (radians), using
/// the closed-form equations where one is known and the determinant otherwise.
///
/// # Errors
/// [`WedgeError::InvalidAngle`] unless `0 < omega ≤ 2π` (with 1e-9 slack);
/// [`WedgeError::RootSearch`] when the root finder fails.
///
/// # References
/// Dauge (1989); Moffatt (1964); benchmarks.md §2 (see the module documentation).
pub fn wedge_exponents(
    a: SideKind,
    b: SideKind,
    omega: f64,
    search: &ExponentSearch,
) -> Result<WedgeSpectrum, WedgeError> {
    let (a, b) = (a.min(b), a.max(b));
    let equations = closed_form_equations(a, b);
    spectrum(a, b, omega, search, &equations)
}

/// Like [`wedge_exponents`] but always from the numerical 4×4 determinant (used to
/// cross-check the closed forms).
///
/// # Errors
/// As [`wedge_exponents`].
pub fn wedge_exponents_by_determinant(
    a: SideKind,
    b: SideKind,
    omega: f64,
    search: &ExponentSearch,
) -> Result<WedgeSpectrum, WedgeError> {
    spectrum(a, b, omega, search, &[Equation::Determinant(a, b, [0, 0])])
}

/// The 4×4 determinant of the side rows (side `a` at `θ = 0`, side `b` at `θ = ω`) for the
/// ansatz basis `cos((λ+1)θ), sin((λ+1)θ), cos((λ−1)θ), sin((λ−1)θ)`, without any division.
pub fn raw_determinant(a: SideKind, b: SideKind, lambda: Complex64, omega: f64) -> Complex64 {
    let ra = side_rows(a, lambda, 0.0);
    let rb = side_rows(b, lambda, omega);
    det4([ra[0], ra[1], rb[0], rb[1]])
}

/// An eigenvalue equation `F(λ) = 0` before division by its spurious factors.
#[derive(Clone, Copy, Debug, PartialEq)]
enum Equation {
    DdEven,
    DdOdd,
    DnPlus,
    DnMinus,
    Ds,
    Do,
    SlipSlip,
    /// The determinant with the orders of its zeros at `λ = 0` and `λ = 1` (measured).
    Determinant(SideKind, SideKind, [i32; 2]),
}

fn closed_form_equations(a: SideKind, b: SideKind) -> Vec<Equation> {
    use SideKind::*;
    match (a, b) {
        (Wall, Wall) | (Traction, Traction) => vec![Equation::DdEven, Equation::DdOdd],
        (Wall, Traction) => vec![Equation::DnPlus, Equation::DnMinus],
        (Wall, Slip) => vec![Equation::Ds],
        (Wall, Outflow) => vec![Equation::Do],
        (Slip, Slip) => vec![Equation::SlipSlip],
        _ => vec![Equation::Determinant(a, b, [0, 0])],
    }
}

impl Equation {
    fn family(self) -> Family {
        match self {
            Equation::DdEven => Family::PsiEven,
            Equation::DdOdd => Family::PsiOdd,
            Equation::DnPlus => Family::CosPlus,
            Equation::DnMinus => Family::CosMinus,
            _ => Family::Single,
        }
    }

    /// Name used in notes.
    fn label(self) -> String {
        match self {
            Equation::DdEven | Equation::DdOdd => "D/D (or N/N)".into(),
            Equation::DnPlus | Equation::DnMinus => "D/N".into(),
            Equation::Ds => "D/S".into(),
            Equation::Do => "D/O".into(),
            Equation::SlipSlip => "S/S".into(),
            Equation::Determinant(a, b, _) => format!("{}/{} determinant", a.letter(), b.letter()),
        }
    }

    /// `F(λ)` before division.
    fn raw(self, l: Complex64, w: f64) -> Complex64 {
        let (s, lw) = (w.sin(), l * w);
        match self {
            Equation::DdEven => lw.sin() + l * s,
            Equation::DdOdd => lw.sin() - l * s,
            Equation::DnPlus => lw.cos() - l * s,
            Equation::DnMinus => lw.cos() + l * s,
            Equation::Ds => (lw * 2.0).sin() - l * (2.0 * w).sin(),
            Equation::Do => lw.sin().powi(2) * 3.0 + l * l * s * s - 4.0,
            Equation::SlipSlip => ((l + 1.0) * w).sin() * ((l - 1.0) * w).sin(),
            Equation::Determinant(a, b, _) => raw_determinant(a, b, l, w),
        }
    }

    /// Spurious zeros divided out: orders at `λ = 0` and `λ = 1`.
    fn removed(self) -> [(f64, i32); 2] {
        let orders = match self {
            Equation::DdEven => [1, 0],
            Equation::DdOdd | Equation::Ds => [1, 1],
            Equation::DnPlus | Equation::DnMinus | Equation::Do => [0, 0],
            Equation::SlipSlip => [0, 1],
            Equation::Determinant(_, _, k) => k,
        };
        [(0.0, orders[0]), (1.0, orders[1])]
    }

    /// For the determinant: measures the orders of its zeros at `λ = 0` and `λ = 1` (at
    /// least 2 and 1 from the degenerate basis; the rigid modes of traction and outflow
    /// sides and the `(m − 2)`-scaled pressure rows add more) by the winding number on
    /// circles of radius 0.02 and 1e-3. Genuine roots inside those circles are removed too
    /// (documented limitation).
    fn with_measured_orders(self, w: f64) -> Equation {
        match self {
            Equation::Determinant(a, b, _) => {
                let order = |s: f64, rho: f64| {
                    let raw = |l: Complex64| raw_determinant(a, b, l, w);
                    circle_winding(raw, s, rho) as i32
                };
                Equation::Determinant(a, b, [order(0.0, 0.02), order(1.0, 1e-3)])
            }
            other => other,
        }
    }

    /// Whether a surviving root at exactly `λ = 1` is a genuine exponent (module docs).
    fn keeps_root_at_one(self) -> bool {
        matches!(self, Equation::DdEven | Equation::DdOdd | Equation::Ds | Equation::SlipSlip)
    }

    /// `F(λ) / Π (λ − s)^k`, an entire function. Within 0.05 of a removed point it is
    /// evaluated by Cauchy's integral formula on a circle of radius 0.15 (64-point
    /// trapezoid rule, geometric convergence with ratio ≤ 1/3), avoiding the 0/0.
    fn reduced(self, l: Complex64, w: f64) -> Complex64 {
        let removed = self.removed();
        if let Some(&(s, _)) = removed.iter().find(|(s, k)| *k > 0 && (l - s).norm() < 0.01) {
            const N: usize = 64;
            let rho = 0.05;
            let mut sum = Complex64::new(0.0, 0.0);
            for k in 0..N {
                let e = Complex64::from_polar(rho, 2.0 * PI * k as f64 / N as f64);
                let z = e + s;
                sum += self.divided(z, w, &removed) * e / (z - l);
            }
            return sum / N as f64;
        }
        self.divided(l, w, &removed)
    }

    fn divided(self, l: Complex64, w: f64, removed: &[(f64, i32)]) -> Complex64 {
        removed.iter().fold(self.raw(l, w), |acc, &(s, k)| acc / (l - s).powi(k))
    }
}

fn spectrum(
    a: SideKind,
    b: SideKind,
    omega: f64,
    search: &ExponentSearch,
    equations: &[Equation],
) -> Result<WedgeSpectrum, WedgeError> {
    if !(omega > 0.0 && omega <= 2.0 * PI + 1e-9) {
        return Err(WedgeError::InvalidAngle { omega });
    }
    let omega = omega.min(2.0 * PI);
    let mut re_max = search.re_max;
    loop {
        let mut out = WedgeSpectrum { exponents: Vec::new(), notes: Vec::new() };
        let pressure_side =
            [a, b].iter().any(|k| matches!(k, SideKind::Outflow | SideKind::Traction));
        for &eq in equations {
            let eq = eq.with_measured_orders(omega);
            if let Some(note) = isolated_root_near_one(eq, omega) {
                out.notes.push(note);
            }
            let found = if eq == Equation::SlipSlip {
                slip_slip_roots(omega, search.re_floor, re_max)
            } else {
                search_equation(eq, omega, search, re_max).map_err(|source| {
                    WedgeError::RootSearch {
                        pair: format!("{}/{}", a.letter(), b.letter()),
                        degrees: omega.to_degrees(),
                        source,
                    }
                })?
            };
            collect(eq, pressure_side, omega, found, &mut out);
        }
        out.exponents.sort_by(|x, y| x.re.total_cmp(&y.re).then(x.im.total_cmp(&y.im)));
        // The first non-polynomial root of every pair lies below ~4.3/ω (the small-angle D/D
        // limit ξ₁/ω = 4.2124/ω, benchmarks.md §2.3); beyond 10/ω there is nothing to find
        // (e.g. the all-polynomial straight wall) and widening would only cost time.
        let cap = search.re_cap.min(search.re_max.max(10.0 / omega));
        if out.leading().is_some() || re_max >= cap {
            return Ok(out);
        }
        re_max = (2.0 * re_max).min(cap);
    }
}

/// Roots of one equation in `[re_floor, re_max] × [−δ, 0.6 re_max + 1]` (δ small so that real roots
/// lie strictly inside; conjugates are restored afterwards).
fn search_equation(
    eq: Equation,
    omega: f64,
    search: &ExponentSearch,
    re_max: f64,
) -> Result<Vec<(Complex64, usize)>, RootError> {
    // Every family here has Im λ ≤ 0.55 Re λ (the small-angle limit of D/D is
    // 2.2507/4.2124 = 0.534, benchmarks.md §2.3), so Im λ ≤ 0.6 re_max + 1 covers the box
    // with margin. The entries grow like exp(|Im λ| ω), hence the cap 30/ω against overflow.
    let im_max = (0.6 * re_max + 1.0).min(30.0 / omega).max(1.0);
    let delta = 0.013_7 * re_max.min(6.0) / 6.0;
    let bounds = RootBox { re: (search.re_floor, box_top(re_max)), im: (-delta, im_max) };
    let mut params = search.roots;
    params.cells_re = (re_max.ceil() as usize).max(2);
    params.cells_im = (im_max.ceil() as usize).max(2);
    let roots = find_roots(|l| eq.reduced(l, omega), bounds, &params)?;
    Ok(roots.into_iter().map(|r| (r.value, r.multiplicity)).collect())
}

/// For the determinant: a note when the zero removed at `λ = 1` is of higher order at this
/// angle than at a neighbouring angle (0.01 rad away), i.e. a genuine root branch passes
/// within 1e-3 of `λ = 1` here and was divided out with the degenerate modes.
fn isolated_root_near_one(eq: Equation, omega: f64) -> Option<String> {
    let Equation::Determinant(a, b, [_, here]) = eq else {
        return None;
    };
    let other = if omega > PI { omega - 0.01 } else { omega + 0.01 };
    let Equation::Determinant(_, _, [_, there]) =
        Equation::Determinant(a, b, [0, 0]).with_measured_orders(other)
    else {
        return None;
    };
    (here > there).then(|| {
        format!(
            "{}/{}: a root within 1e-3 of λ = 1 exists at this angle and is not listed (it is \
             removed with the degenerate λ = 1 modes); treat the corner as having λ ≈ 1",
            a.letter(),
            b.letter()
        )
    })
}

/// Winding number of `f` around the circle `|λ − s| = rho` (1024 samples; the functions
/// here vary slowly on such small circles).
fn circle_winding(f: impl Fn(Complex64) -> Complex64, s: f64, rho: f64) -> i64 {
    const N: usize = 1024;
    let point = |k: usize| Complex64::from_polar(rho, 2.0 * PI * k as f64 / N as f64) + s;
    let mut total = 0.0;
    let mut prev = f(point(0));
    for k in 1..=N {
        let next = f(point(k % N));
        total += (next / prev).arg();
        prev = next;
    }
    (total / (2.0 * PI)).round() as i64
}

/// Upper real edge of the search box: `re_max` nudged off round numbers, where integer
/// exponents (e.g. 6 for D/S at 270°) would sit on the contour.
fn box_top(re_max: f64) -> f64 {
    re_max * 1.007_31
}

/// `λ = nπ/ω ± 1`, `n ≥ 1`, within `(re_floor, re_max)`; coinciding values are merged.
fn slip_slip_roots(omega: f64, re_floor: f64, re_max: f64) -> Vec<(Complex64, usize)> {
    let mut values: Vec<f64> = Vec::new();
    let mut n = 1.0;
    while n * PI / omega - 1.0 < re_max {
        values.extend([n * PI / omega - 1.0, n * PI / omega + 1.0]);
        n += 1.0;
    }
    values.retain(|&v| v > re_floor && v < box_top(re_max));
    values.sort_by(f64::total_cmp);
    let mut out: Vec<(Complex64, usize)> = Vec::new();
    for v in values {
        match out.last_mut() {
            Some((last, m)) if (last.re - v).abs() < 1e-12 * v.max(1.0) => *m += 1,
            _ => out.push((Complex64::new(v, 0.0), 1)),
        }
    }
    out
}

/// Turns raw roots into [`Exponent`]s: snaps near-real roots, drops the lower member of
/// conjugate pairs, applies the `λ = 1` rule and flags polynomial modes.
fn collect(
    eq: Equation,
    pressure_side: bool,
    omega: f64,
    found: Vec<(Complex64, usize)>,
    out: &mut WedgeSpectrum,
) {
    for (z, multiplicity) in found {
        let scale = z.norm().max(1.0);
        let im = if z.im.abs() < 1e-9 * scale { 0.0 } else { z.im };
        if im < 0.0 {
            continue;
        }
        let re = z.re;
        let is_one = im == 0.0 && (re - 1.0).abs() < 1e-8;
        if is_one && (pressure_side || !eq.keeps_root_at_one()) {
            out.notes.push(format!(
                "λ = 1 solves the {} equation at this angle: with an outflow or traction side \
                 such a mode is a quadratic polynomial (smooth), so it is not listed",
                eq.label()
            ));
            continue;
        }
        let re = if is_one { 1.0 } else { re };
        let polynomial = is_polynomial(eq, omega, re, im, multiplicity);
        out.exponents.push(Exponent { re, im, multiplicity, family: eq.family(), polynomial });
    }
}

fn is_polynomial(eq: Equation, omega: f64, re: f64, im: f64, multiplicity: usize) -> bool {
    let integer = im == 0.0 && (re - re.round()).abs() < 1e-9 * re.max(1.0);
    if !integer {
        return false;
    }
    let n = re.round();
    match eq {
        Equation::SlipSlip => n >= 1.0,
        // λ = 1 at ω = π or 2π (sin ω = 0) is the Couette/shear polynomial; at tan ω = ω it
        // carries a θ-term and is singular.
        Equation::DdEven | Equation::DdOdd if n == 1.0 => omega.sin().abs() < 1e-9,
        _ => n >= 2.0 && multiplicity == 1,
    }
}

/// `f, f′, f″, f‴` of the four basis functions at `θ`.
fn basis_derivatives(lambda: Complex64, theta: f64) -> [[Complex64; 4]; 4] {
    let one = Complex64::new(1.0, 0.0);
    let mut out = [[Complex64::new(0.0, 0.0); 4]; 4];
    for (j, k) in [lambda + one, lambda + one, lambda - one, lambda - one].into_iter().enumerate() {
        let (c, s) = ((k * theta).cos(), (k * theta).sin());
        out[j] = if j % 2 == 0 {
            [c, -k * s, -k * k * c, k * k * k * s]
        } else {
            [s, k * c, -k * k * s, -k * k * k * c]
        };
    }
    out
}

/// The two boundary rows of side `kind` at angle `theta` (benchmarks.md §2.4).
fn side_rows(kind: SideKind, lambda: Complex64, theta: f64) -> [[Complex64; 4]; 2] {
    let m = lambda + 1.0;
    let basis = basis_derivatives(lambda, theta);
    let mut rows = [[Complex64::new(0.0, 0.0); 4]; 2];
    for (j, [f, f1, f2, f3]) in basis.into_iter().enumerate() {
        let w1 = f3 + m * m * f1;
        let (r0, r1) = match kind {
            SideKind::Wall => (f, f1),
            SideKind::Slip => (f, f2),
            SideKind::Outflow => (f2 + m * f, -w1 + (-m + 1.0) * (m - 2.0) * f1),
            SideKind::Traction => {
                (f2 + m * (-m + 2.0) * f, -w1 + (-m + 1.0) * (m - 2.0) * f1 * 2.0)
            }
        };
        rows[0][j] = r0;
        rows[1][j] = r1;
    }
    rows
}

/// Determinant of a 4×4 complex matrix by Laplace expansion in 2×2 minors.
fn det4(m: [[Complex64; 4]; 4]) -> Complex64 {
    let minor =
        |r0: usize, r1: usize, c0: usize, c1: usize| m[r0][c0] * m[r1][c1] - m[r0][c1] * m[r1][c0];
    let pairs = [(0, 1), (0, 2), (0, 3), (1, 2), (1, 3), (2, 3)];
    let mut det = Complex64::new(0.0, 0.0);
    for &(c0, c1) in &pairs {
        let (d0, d1) = complement(c0, c1);
        let sign = if (c0 + c1 + 1) % 2 == 0 { 1.0 } else { -1.0 };
        det += minor(0, 1, c0, c1) * minor(2, 3, d0, d1) * sign;
    }
    det
}

/// The two column indices of `0..4` not in `{c0, c1}`, ascending.
fn complement(c0: usize, c1: usize) -> (usize, usize) {
    let mut rest = (0..4).filter(|&c| c != c0 && c != c1);
    let first = rest.next().unwrap_or(0);
    (first, rest.next().unwrap_or(0))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn det4_matches_a_hand_computed_determinant() {
        // det of [[2,0,1,0],[1,3,0,0],[0,1,4,1],[0,0,1,5]] expanded by hand along row 0:
        // 2·det[[3,0,0],[1,4,1],[0,1,5]] + 1·det[[1,3,0],[0,1,1],[0,0,5]] = 2·57 + 5 = 119.
        let r = |v: [f64; 4]| v.map(|x| Complex64::new(x, 0.0));
        let m =
            [r([2., 0., 1., 0.]), r([1., 3., 0., 0.]), r([0., 1., 4., 1.]), r([0., 0., 1., 5.])];
        assert!((det4(m) - Complex64::new(119.0, 0.0)).norm() < 1e-12);
    }

    #[test]
    fn reduced_equation_is_continuous_across_the_removed_points() {
        // The Cauchy-formula branch and the plain division must agree where both are accurate.
        let eq = Equation::Determinant(SideKind::Slip, SideKind::Outflow, [0, 0])
            .with_measured_orders(1.3);
        assert!(eq.removed()[0].1 >= 2 && eq.removed()[1].1 >= 1, "{eq:?}");
        for s in [0.0, 1.0] {
            let inside = eq.reduced(Complex64::new(s + 0.009, 0.002), 1.3);
            let outside = eq.divided(Complex64::new(s + 0.009, 0.002), 1.3, &eq.removed());
            // Plain division loses ~log10(1/0.01^k) digits (k ≤ 3 here); 1e-7 relative is ample.
            assert!((inside - outside).norm() < 1e-7 * outside.norm(), "{inside} vs {outside}");
        }
    }
}
