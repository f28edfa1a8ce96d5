//! Moffatt eddies measured along a corner bisector: takes a mesh, a flow field and the corner
//! reports, and returns for every corner whose leading exponent is complex the successive
//! corner eddies the mesh resolves, with their sizes, stream-function extrema and the ratios
//! of successive ones beside the predicted ratios.
//!
//! Near a corner of angle `ω` with leading exponent `λ = p + iq`, the stream function along
//! the bisector behaves like `ψ ∝ r^{p+1} cos(q ln r + φ)` (Moffatt 1964; benchmarks.md
//! §2.3): `ψ − ψ_wall` changes sign at radii in the ratio `e^{π/q}` (the eddy boundaries) and
//! its extrema between them fall by `e^{π(p+1)/q}` from one eddy to the next.
//!
//! The stream function on the bisector is the flux of the discrete velocity across the
//! segment from the corner: with the unit bisector `t` and its right normal
//! `n = (t_y, −t_x)`,
//!
//! ```text
//! ψ(r) − ψ_wall = ∫₀^r u_h(c + s t) · n ds      (∇ψ = (−v, u), so dψ/ds = u · n),
//! ```
//!
//! integrated by 3-point Gauss–Legendre rules on geometrically spaced intervals. This line
//! integral is local: unlike the global least-squares stream function
//! ([`stream_function`](crate::post::stream_function)), whose residual is the non-solenoidal
//! part of `u_h` over the whole domain, it carries no error from far away, which matters
//! when the second eddy's `ψ` is 1e-9 of the primary vortex's. (Measured in the Stokes
//! cavity of `cornerflow validate cavity-eddies`: the largest nodal value of the
//! least-squares `ψ` was 2.4e-5 on the full mesh and 1.7e-4 on the quick one, where the
//! first corner eddy's maximum is 2.23e-6; the bisector flux gives 2.2274e-6.)
//!
//! Which radii are trusted (the rule): a sample at distance `r` counts as resolved when the
//! cell containing it has a longest edge `≤ r / min_cells` (at least `min_cells` elements
//! between the corner and the point, so also across an eddy, whose width on the bisector is
//! `(1 − e^{−π/q}) r ≈ r`); the resolved range is the contiguous run of such samples ending at
//! the outer radius. A sign is only read from samples with `|ψ| > noise_factor · ε · U · r`
//! (`ε` the machine epsilon, `U` the largest nodal speed: the round-off floor of a flux
//! integral of length `r`; see [`EddyParams::noise_factor`] for the measured value).
//! Common practice, no source, for both thresholds. The innermost eddy in the list is the
//! one closest to these limits; its ratio to the next-outer eddy is the least reliable.
//!
//! Point location walks from cell to cell across the edge of the most negative barycentric
//! coordinate, starting from the previous sample's cell (the samples march outward along a
//! ray), and falls back to the bucket grid of [`PointLocator`]; the whole profile costs
//! `O(number of samples + cells crossed)`.
//!
//! **Invariant:** no I/O; the CLI prints and writes what this returns.
//!
//! # References
//! H.K. Moffatt, *Viscous and resistive eddies near a sharp corner*, J. Fluid Mech. 18 (1964)
//! 1–18.

use super::analysis::{CornerReport, EddyRatios, nearest_corner_distance};
use super::measure::local_mesh_size;
use crate::fem::FlowField;
use crate::fem::quadrature::gauss_legendre_unit_3;
use crate::fem::shape::{AffineTriangle, p2_values};
use crate::geometry::{Domain, Point};
use crate::mesh::Mesh;
use crate::post::PointLocator;

/// Controls of [`detect_eddies`].
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct EddyParams {
    /// Sample intervals per decade of distance. Default 200 (the extremum of
    /// `cos(q ln r)` is then sampled to a relative `(q · ln 10 / 200)² / 8 ≈ 2e-5` before the
    /// parabolic refinement; `q ≈ 1.12` at 90°).
    pub samples_per_decade: usize,
    /// Outer radius as a fraction of the distance to the nearest other corner. Default 0.5.
    pub max_fraction: f64,
    /// Elements between the corner and a trusted sample (see the module docs). Default 4.
    pub min_cells: f64,
    /// Multiple of `ε · U · r` below which `ψ` has no sign. Default 1e4. Measured in the
    /// Stokes cavity: with the solve of `cornerflow validate cavity-eddies` (relative
    /// residual 1e-13, regularisation only of pivots below 1e-30) the flux integral carried
    /// noise below 1e3 `ε U r` (the fourth eddy, `|ψ| ≈ 5e-20`, showed as a sign change of
    /// the wrong size at 1e3), so 1e4 keeps a factor 10 of margin. The default solve
    /// (residual 1e-10, pivots below 1e-11 replaced by ±1e-8) on a grading down to
    /// `h = 1e-6` was noisier, about 3e4 `ε U r` near `r = 2e-4`, and there the third eddy
    /// came out with the wrong size; with `h ≥ 1e-4` at the corner (no perturbed pivots) the
    /// first two eddies were clean.
    pub noise_factor: f64,
}

impl Default for EddyParams {
    fn default() -> Self {
        EddyParams { samples_per_decade: 200, max_fraction: 0.5, min_cells: 4.0, noise_factor: 1e4 }
    }
}

/// One corner eddy on the bisector; eddy 1 is the largest (outermost).
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize)]
pub struct Eddy {
    pub index: usize,
    /// Distance from the corner of the eddy's outer boundary (a sign change of
    /// `ψ − ψ_wall`), interpolated linearly in `ln r`.
    pub outer_boundary: f64,
    /// Distance of the inner boundary, when it lies in the resolved range.
    pub inner_boundary: Option<f64>,
    /// Distance and value of the extremum of `ψ − ψ_wall` on the bisector (parabola through
    /// the largest sample and its neighbours, in `ln r`); `None` when the resolved range
    /// ends before the extremum is reached.
    pub extremum: Option<(f64, f64)>,
}

/// The eddies of one corner.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct EddySequence {
    /// Index into the corner reports.
    pub corner: usize,
    pub location: Point,
    /// Unit vector along the bisector of the fluid-side angle.
    pub bisector: [f64; 2],
    /// Distances the mesh resolves: from the innermost trusted sample to the outer radius.
    pub resolved_range: (f64, f64),
    pub eddies: Vec<Eddy>,
    /// `d_k / d_{k+1}`: outer-boundary distances of successive eddies.
    pub size_ratios: Vec<f64>,
    /// `|ψ_k / ψ_{k+1}|`: extrema of successive eddies (where both are resolved).
    pub psi_ratios: Vec<f64>,
    /// The ratios predicted from the leading exponent.
    pub predicted: EddyRatios,
}

/// Why the eddies of a corner could not be measured.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum EddyError {
    #[error("corner {corner} does not exist ({n_reports} reports)")]
    NoSuchCorner { corner: usize, n_reports: usize },
    #[error("corner {corner}: the leading exponent is real, so no eddies are predicted")]
    NotPredicted { corner: usize },
    #[error("corner {corner}: the bisector cannot be formed (degenerate or missing vertex)")]
    NoBisector { corner: usize },
    #[error("flow field has {velocity} velocities but the mesh has {nodes} nodes")]
    FieldMismatch { velocity: usize, nodes: usize },
    #[error("corner {corner}: the bisector near the corner lies outside the mesh")]
    OutsideMesh { corner: usize },
    #[error("the mesh has no cells")]
    EmptyMesh,
}

/// One sample of the bisector profile.
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize)]
pub struct ProfileSample {
    /// Distance from the corner.
    pub r: f64,
    /// `ψ(r) − ψ_wall`.
    pub psi: f64,
    /// Longest edge of the cell containing the sample.
    pub h: f64,
}

/// Measures the eddies of every corner whose leading exponent is complex and whose data are
/// continuous (at a lid corner the jump in the data dominates the local flow).
pub fn measure_eddies(
    domain: &Domain,
    mesh: &Mesh,
    field: &FlowField,
    reports: &[CornerReport],
    params: &EddyParams,
) -> Vec<Result<EddySequence, EddyError>> {
    let Ok(walker) = Walker::new(mesh) else { return vec![Err(EddyError::EmptyMesh)] };
    reports
        .iter()
        .enumerate()
        .filter(|(_, r)| r.eddies.is_some() && !r.discontinuous_data)
        .map(|(i, _)| detect_with(&walker, domain, field, reports, i, params))
        .collect()
}

/// The eddies of corner `corner` (an index into `reports`).
///
/// # Errors
/// [`EddyError::NoSuchCorner`], [`EddyError::NotPredicted`] for a real leading exponent,
/// [`EddyError::NoBisector`], [`EddyError::FieldMismatch`], [`EddyError::EmptyMesh`],
/// [`EddyError::OutsideMesh`] when the first sample is not in the mesh.
pub fn detect_eddies(
    domain: &Domain,
    mesh: &Mesh,
    field: &FlowField,
    reports: &[CornerReport],
    corner: usize,
    params: &EddyParams,
) -> Result<EddySequence, EddyError> {
    let walker = Walker::new(mesh)?;
    detect_with(&walker, domain, field, reports, corner, params)
}

fn detect_with(
    walker: &Walker,
    domain: &Domain,
    field: &FlowField,
    reports: &[CornerReport],
    corner: usize,
    params: &EddyParams,
) -> Result<EddySequence, EddyError> {
    let n_reports = reports.len();
    let report = reports.get(corner).ok_or(EddyError::NoSuchCorner { corner, n_reports })?;
    let predicted = report.eddies.ok_or(EddyError::NotPredicted { corner })?;
    let bisector = corner_bisector(domain, report).ok_or(EddyError::NoBisector { corner })?;
    let mesh = walker.mesh;
    let far = nearest_corner_distance(reports, corner).unwrap_or(f64::INFINITY);
    let r_far = params.max_fraction * far.min(super::measure::domain_diameter(mesh));
    let r_near = 0.25 * local_mesh_size(mesh, report.location);
    let profile =
        bisector_profile(walker, field, report.location, bisector, (r_near, r_far), params)
            .map_err(|e| match e {
                EddyError::OutsideMesh { .. } => EddyError::OutsideMesh { corner },
                e => e,
            })?;
    let speed = field.velocity.iter().map(|u| u[0].hypot(u[1])).fold(0.0, f64::max);
    let trusted = resolved_start(&profile, params.min_cells);
    let samples = &profile[trusted..];
    let resolved_range = match (samples.first(), samples.last()) {
        (Some(a), Some(b)) => (a.r, b.r),
        _ => (f64::NAN, f64::NAN),
    };
    let noise = |s: &ProfileSample| params.noise_factor * f64::EPSILON * speed * s.r;
    let eddies = eddies_of(samples, &noise);
    let size_ratios =
        eddies.windows(2).map(|w| w[0].outer_boundary / w[1].outer_boundary).collect();
    let psi_ratios = eddies
        .windows(2)
        .map_while(|w| Some((w[0].extremum?.1 / w[1].extremum?.1).abs()))
        .collect();
    Ok(EddySequence {
        corner,
        location: report.location,
        bisector,
        resolved_range,
        eddies,
        size_ratios,
        psi_ratios,
        predicted,
    })
}

/// Unit bisector of the fluid-side angle at the report's vertex: the outgoing edge direction
/// rotated counter-clockwise by `ω/2` (the fluid lies on the left of every loop edge).
pub fn corner_bisector(domain: &Domain, report: &CornerReport) -> Option<[f64; 2]> {
    let lp = domain.loops().nth(report.loop_index)?;
    let n = lp.points.len();
    let (p, next) = (*lp.points.get(report.vertex)?, lp.points[(report.vertex + 1) % n]);
    let d = [next[0] - p[0], next[1] - p[1]];
    let len = d[0].hypot(d[1]);
    let half = 0.5 * report.angle_deg.to_radians();
    if !(len > 0.0 && len.is_finite() && half.is_finite()) {
        return None;
    }
    let (s, c) = half.sin_cos();
    Some([(c * d[0] - s * d[1]) / len, (s * d[0] + c * d[1]) / len])
}

/// `ψ − ψ_wall` on the bisector at geometrically spaced distances from `range.0` to
/// `range.1` (see the module docs for the flux integral); the profile stops at the first
/// point outside the mesh.
///
/// # Errors
/// [`EddyError::FieldMismatch`]; [`EddyError::OutsideMesh`] when the first interval leaves
/// the mesh.
fn bisector_profile(
    walker: &Walker,
    field: &FlowField,
    corner: Point,
    t: [f64; 2],
    range: (f64, f64),
    params: &EddyParams,
) -> Result<Vec<ProfileSample>, EddyError> {
    let mesh = walker.mesh;
    if field.velocity.len() != mesh.nodes.len() {
        let (velocity, nodes) = (field.velocity.len(), mesh.nodes.len());
        return Err(EddyError::FieldMismatch { velocity, nodes });
    }
    let (r_near, r_far) = range;
    if !(r_near > 0.0 && r_far > r_near) {
        return Ok(Vec::new());
    }
    let n_per = params.samples_per_decade.max(1) as f64;
    let n = ((r_far / r_near).log10() * n_per).ceil() as usize;
    let ratio = (r_far / r_near).powf(1.0 / n as f64);
    let normal = [t[1], -t[0]];
    let mut cell = None;
    let mut psi = 0.0;
    let mut out = Vec::with_capacity(n + 1);
    // The first interval [0, r_near] in four pieces, then the geometric ones.
    let mut edges: Vec<f64> = (0..=4).map(|k| r_near * k as f64 / 4.0).collect();
    edges.extend((1..=n).map(|k| r_near * ratio.powi(k as i32)));
    for w in edges.windows(2) {
        let (a, b) = (w[0], w[1]);
        let mut flux = 0.0;
        for (x, weight) in gauss_legendre_unit_3() {
            let s = a + x * (b - a);
            let point = [corner[0] + s * t[0], corner[1] + s * t[1]];
            let Some((c, l)) = walker.locate(point, cell) else {
                return if out.is_empty() {
                    Err(EddyError::OutsideMesh { corner: 0 })
                } else {
                    Ok(out)
                };
            };
            cell = Some(c);
            let u = velocity_at(mesh, field, c, l);
            flux += weight * (b - a) * (u[0] * normal[0] + u[1] * normal[1]);
        }
        psi += flux;
        if b >= r_near * (1.0 - 1e-12) {
            let h = cell.map_or(f64::NAN, |c| mesh.longest_edge(c));
            out.push(ProfileSample { r: b, psi, h });
        }
    }
    Ok(out)
}

/// Index of the first sample of the resolved range: the contiguous run of samples with
/// `h ≤ r / min_cells` that ends at the last sample.
fn resolved_start(profile: &[ProfileSample], min_cells: f64) -> usize {
    let resolved = |s: &ProfileSample| s.h.is_finite() && s.h * min_cells <= s.r;
    profile.iter().rposition(|s| !resolved(s)).map_or(0, |i| i + 1)
}

/// The eddies in resolved samples: runs of one sign (samples below `noise` have none), the
/// outermost run being the outer flow; each later run is an eddy.
fn eddies_of(samples: &[ProfileSample], noise: &dyn Fn(&ProfileSample) -> f64) -> Vec<Eddy> {
    let sign = |s: &ProfileSample| {
        if s.psi.abs() > noise(s) { s.psi.signum() } else { 0.0 }
    };
    // Runs of equal nonzero sign, from the outside in: (first index, last index) inclusive.
    let mut runs: Vec<(usize, usize)> = Vec::new();
    let mut current = 0.0;
    for i in (0..samples.len()).rev() {
        let s = sign(&samples[i]);
        if s == 0.0 {
            continue;
        }
        match runs.last_mut() {
            Some(run) if s == current => run.0 = i,
            _ => runs.push((i, i)),
        }
        current = s;
    }
    let boundaries: Vec<f64> =
        runs.windows(2).map(|w| zero_crossing(samples, w[1].1, w[0].0)).collect();
    let innermost = runs.len().saturating_sub(1);
    (1..runs.len())
        .map(|k| {
            let (first, last) = runs[k];
            let truncated = k == innermost;
            Eddy {
                index: k,
                outer_boundary: boundaries[k - 1],
                inner_boundary: boundaries.get(k).copied(),
                extremum: run_extremum(samples, first, last, truncated),
            }
        })
        .collect()
}

/// Where `ψ` crosses zero between samples `inner < outer` of opposite sign (samples in
/// between are below the noise floor): linear interpolation in `ln r` at the raw sign change
/// when there is exactly one between them, else the geometric mean of the two.
fn zero_crossing(samples: &[ProfileSample], inner: usize, outer: usize) -> f64 {
    let changes: Vec<usize> = (inner..outer)
        .filter(|&i| samples[i].psi.signum() != samples[i + 1].psi.signum())
        .collect();
    let [i] = changes[..] else {
        return (samples[inner].r * samples[outer].r).sqrt();
    };
    let (a, b) = (samples[i], samples[i + 1]);
    let f = a.psi / (a.psi - b.psi);
    (a.r.ln() + f * (b.r.ln() - a.r.ln())).exp()
}

/// Extremum of `ψ` in the run `first..=last`: the largest `|ψ|` sample and the vertex of the
/// parabola through it and its neighbours in `ln r`. `None` when the run is the innermost
/// (truncated by the resolved range) and its largest sample is its first one.
fn run_extremum(
    samples: &[ProfileSample],
    first: usize,
    last: usize,
    truncated: bool,
) -> Option<(f64, f64)> {
    let i =
        (first..=last).max_by(|&a, &b| samples[a].psi.abs().total_cmp(&samples[b].psi.abs()))?;
    if truncated && i == first {
        return None;
    }
    if i == 0 || i + 1 >= samples.len() {
        return Some((samples[i].r, samples[i].psi));
    }
    let (x0, x1, x2) = (samples[i - 1].r.ln(), samples[i].r.ln(), samples[i + 1].r.ln());
    let (y0, y1, y2) = (samples[i - 1].psi, samples[i].psi, samples[i + 1].psi);
    // Vertex of the parabola through three points (divided differences).
    let d01 = (y1 - y0) / (x1 - x0);
    let d12 = (y2 - y1) / (x2 - x1);
    let c = (d12 - d01) / (x2 - x0);
    if c == 0.0 || !c.is_finite() {
        return Some((samples[i].r, y1));
    }
    let xv = 0.5 * (x0 + x1) - d01 / (2.0 * c);
    if !(xv >= x0 && xv <= x2) {
        return Some((samples[i].r, y1));
    }
    let yv = y1 + d01 * (xv - x1) + c * (xv - x0) * (xv - x1);
    Some((xv.exp(), yv))
}

/// P2 velocity in cell `c` at barycentric `l`.
fn velocity_at(mesh: &Mesh, field: &FlowField, c: usize, l: [f64; 3]) -> [f64; 2] {
    let phi = p2_values(l);
    let mut u = [0.0; 2];
    for (k, &node) in mesh.cells[c].iter().enumerate() {
        u[0] += phi[k] * field.velocity[node][0];
        u[1] += phi[k] * field.velocity[node][1];
    }
    u
}

/// Barycentric tolerance for "inside" (as in the probe module; common practice, no source).
const INSIDE_TOL: f64 = 1e-12;

/// Point location by walking across cell edges, with the bucket grid as fallback.
struct Walker<'m> {
    mesh: &'m Mesh,
    locator: PointLocator<'m>,
    /// `neighbours[c][i]`: the cell across the edge of `c` opposite its vertex `i`.
    neighbours: Vec<[Option<usize>; 3]>,
}

impl<'m> Walker<'m> {
    fn new(mesh: &'m Mesh) -> Result<Self, EddyError> {
        let locator = PointLocator::new(mesh).map_err(|_| EddyError::EmptyMesh)?;
        // Every edge has its own midpoint node, so the midpoint identifies the edge.
        let n_mid = mesh.nodes.len().saturating_sub(mesh.n_vertices);
        let mut owners: Vec<[Option<(usize, usize)>; 2]> = vec![[None; 2]; n_mid];
        for (c, cell) in mesh.cells.iter().enumerate() {
            // Midpoint of the edge opposite vertex i: m12 (i = 0), m20 (i = 1), m01 (i = 2).
            for (i, &m) in [cell[4], cell[5], cell[3]].iter().enumerate() {
                if let Some(slot) = owners.get_mut(m.wrapping_sub(mesh.n_vertices)) {
                    let k = usize::from(slot[0].is_some());
                    slot[k] = Some((c, i));
                }
            }
        }
        let mut neighbours = vec![[None; 3]; mesh.n_cells()];
        for pair in &owners {
            if let [Some((a, i)), Some((b, j))] = *pair {
                neighbours[a][i] = Some(b);
                neighbours[b][j] = Some(a);
            }
        }
        Ok(Walker { mesh, locator, neighbours })
    }

    /// The cell containing `p` and its barycentric coordinates, walking from `start`.
    fn locate(&self, p: Point, start: Option<usize>) -> Option<(usize, [f64; 3])> {
        let Some(mut c) = start else { return self.locator.locate(p) };
        for _ in 0..self.mesh.n_cells().min(100_000) {
            let l = barycentric(self.mesh, c, p);
            let (i, min) = (0..3).map(|i| (i, l[i])).min_by(|a, b| a.1.total_cmp(&b.1))?;
            if min >= -INSIDE_TOL {
                return Some((c, l));
            }
            match self.neighbours[c][i] {
                Some(next) => c = next,
                None => break,
            }
        }
        self.locator.locate(p)
    }
}

/// Barycentric coordinates of `p` in cell `c`.
fn barycentric(mesh: &Mesh, c: usize, p: Point) -> [f64; 3] {
    AffineTriangle::new(mesh.cell_vertices(c)).barycentric(p)
}

#[cfg(test)]
mod tests {
    use std::f64::consts::PI;

    use super::*;
    use crate::case::Case;
    use crate::corners::{AnalysisParams, try_analyse_corners};

    /// Exponent and frequency of the test stream function `ψ = r^a sin²(2θ) cos(q ln r)`:
    /// those of the 90° no-slip corner (benchmarks.md §2.3), so the sign changes on the
    /// bisector recur at the ratio `e^{π/q}` that the analysis predicts.
    const A: f64 = 3.73959335632;
    const Q: f64 = 1.11902453434;

    fn square(h_min: f64, growth: f64) -> (Case, Mesh) {
        let toml = format!(
            r#"name = "eddy-test"
[fluid]
density = 1.0
kinematic_viscosity = 1.0
reference_velocity = 1.0
reference_length = 1.0
[domain.outer]
rectangle = [0.0, 0.0, 1.0, 1.0]
sides = {{ bottom = "walls", right = "walls", top = "walls", left = "walls" }}
[conditions.walls]
kind = "no-slip"
[mesh]
size = 0.1
[[mesh.grading]]
near = [0.0, 0.0]
h_min = {h_min}
growth = {growth}
[model]
equations = "stokes"
"#
        );
        let case = Case::parse(&toml, std::path::Path::new("<eddy test>")).unwrap();
        let (mesh, _) = crate::mesh::generate(&case.domain, &case.mesh).unwrap();
        (case, mesh)
    }

    /// `u = ∂ψ/∂y, v = −∂ψ/∂x` for `ψ = g(r) s(θ)`, `g = r^a cos(q ln r)`, `s = sin²(2θ)`.
    fn velocity(p: Point) -> [f64; 2] {
        let (r, th) = (p[0].hypot(p[1]), p[1].atan2(p[0]));
        if r == 0.0 {
            return [0.0, 0.0];
        }
        let (g, s) = (r.powf(A) * (Q * r.ln()).cos(), (2.0 * th).sin().powi(2));
        let dg = r.powf(A - 1.0) * (A * (Q * r.ln()).cos() - Q * (Q * r.ln()).sin());
        let ds = 2.0 * (4.0 * th).sin();
        let (c, sn) = (th.cos(), th.sin());
        let psi_x = dg * s * c - g * ds * sn / r;
        let psi_y = dg * s * sn + g * ds * c / r;
        [psi_y, -psi_x]
    }

    fn interpolated(mesh: &Mesh) -> FlowField {
        FlowField {
            velocity: mesh.nodes.iter().map(|&p| velocity(p)).collect(),
            pressure: vec![0.0; mesh.n_vertices],
        }
    }

    fn reports(case: &Case) -> Vec<CornerReport> {
        let params = AnalysisParams::default();
        try_analyse_corners(&case.domain, &case.conditions, case.model.viscous_form, &params)
            .unwrap()
            .reports
    }

    #[test]
    fn interpolated_corner_eddies_are_found_at_their_closed_form_radii() {
        let (case, mesh) = square(2e-5, 0.1);
        let (field, reports) = (interpolated(&mesh), reports(&case));
        let corner = reports.iter().position(|r| r.location == [0.0, 0.0]).unwrap();
        let s =
            detect_eddies(&case.domain, &mesh, &field, &reports, corner, &EddyParams::default())
                .unwrap();
        let t = std::f64::consts::FRAC_1_SQRT_2;
        assert!((s.bisector[0] - t).abs() < 1e-15 && (s.bisector[1] - t).abs() < 1e-15);
        // Sign changes of cos(q ln r): q ln d_k = −π/2 − (k − 1)π, k = 1, 2, 3 (d_4 ≈ 5e-5 lies
        // inside the unresolved range 4 h(r) > r, r < 1.3e-4).
        assert_eq!(s.eddies.len(), 3, "{s:#?}");
        for e in &s.eddies {
            let exact = (-(std::f64::consts::FRAC_PI_2 + (e.index - 1) as f64 * PI) / Q).exp();
            // P2 interpolation of a smooth field on cells with h ≈ 0.1 r: errors ≈ 1e-4
            // relative (h³ terms), and the zero crossing is interpolated linearly in ln r
            // over steps of 0.0115; 1e-3 is a safe bound.
            assert!((e.outer_boundary / exact - 1.0).abs() < 1e-3, "{e:?} vs {exact}");
        }
        for ratio in &s.size_ratios {
            assert!((ratio / s.predicted.size_ratio - 1.0).abs() < 2e-3, "{ratio}");
        }
        // Extremum on the bisector (s = 1): d/d ln r of r^a cos(q ln r) = 0, so
        // tan(q ln r) = a/q, on the branch inside eddy 1.
        let ln_r = ((A / Q).atan() - PI) / Q;
        let (r1, psi1) = s.eddies[0].extremum.unwrap();
        let exact = ln_r.exp().powf(A) * (Q * ln_r).cos();
        assert!((r1 / ln_r.exp() - 1.0).abs() < 1e-2, "{r1} vs {}", ln_r.exp());
        assert!((psi1 / exact - 1.0).abs() < 1e-4, "{psi1} vs {exact}");
        // Successive extrema fall by e^{aπ/q}, the predicted ψ ratio.
        let predicted = (A * PI / Q).exp();
        assert!((s.psi_ratios[0] / predicted - 1.0).abs() < 1e-3, "{:?}", s.psi_ratios);
        assert!((predicted / s.predicted.psi_ratio - 1.0).abs() < 1e-9);
    }

    #[test]
    fn a_coarse_mesh_resolves_fewer_eddies_and_a_real_root_none() {
        let (case, mesh) = square(5e-3, 0.1);
        let (field, reports) = (interpolated(&mesh), reports(&case));
        let corner = reports.iter().position(|r| r.location == [0.0, 0.0]).unwrap();
        let s =
            detect_eddies(&case.domain, &mesh, &field, &reports, corner, &EddyParams::default())
                .unwrap();
        // h(r) ≈ 0.005 + 0.1 r resolves only r ≥ 0.033 (4 cells): the first boundary 0.246
        // lies in the resolved range, the second (0.0148) does not.
        assert!(s.resolved_range.0 > 0.0148 && s.eddies.len() == 1, "{s:#?}");
        assert!(s.size_ratios.is_empty());
        let mut real = reports.clone();
        real[corner].eddies = None;
        let e = detect_eddies(&case.domain, &mesh, &field, &real, corner, &EddyParams::default());
        assert_eq!(e.unwrap_err(), EddyError::NotPredicted { corner });
        let short = FlowField { velocity: vec![[0.0; 2]; 3], pressure: field.pressure.clone() };
        let e =
            detect_eddies(&case.domain, &mesh, &short, &reports, corner, &EddyParams::default());
        assert!(matches!(e, Err(EddyError::FieldMismatch { .. })), "{e:?}");
    }
}
