//! Mesh-convergence studies under uniform refinement: errors against an exact solution or
//! differences between successive levels, observed rates in `h` and in the number of
//! unknowns `N`, Richardson extrapolation of forces, and the Sobolev-type regularity index
//! that the observed rate implies.
//!
//! Takes a [`Case`], its level-0 [`Mesh`] and [`StudyParams`]; returns a [`StudyReport`] and,
//! through a callback, each level's mesh and field (for the caller to write). Levels
//! `1, 2, …` split every triangle into four ([`Mesh::refine_uniform`], boundary midpoints
//! snapped to declared circles), so `h` halves and `N` grows about fourfold per level.
//!
//! **Errors.** With an `[exact]` solution: `‖u − u_h‖_{L²}`, `|u − u_h|_{H¹}` and
//! `‖p − p_h‖_{L²}` (pressure up to a constant when the domain is closed; exact gradients by
//! central differences of the expressions, step `1e-9 · max(1, |x|)`, whose error is far
//! below the discretisation error). Without one: the same norms of `u_{ℓ+1} − u_ℓ`, where the
//! coarse field is interpolated at the fine nodes — exact for nested meshes, since a P2 (P1)
//! function on a triangle is P2 (P1) on each child — so the difference is a finite-element
//! function on level `ℓ+1` and the norms are exact; `d_ℓ ~ C hℓ^r` shows the same rate `r`.
//!
//! **Rates.** Between levels `ℓ` and `ℓ+1`: `r_h = log(e_ℓ / e_{ℓ+1}) / log(h_ℓ / h_{ℓ+1})`
//! and `r_N = −log(e_{ℓ+1} / e_ℓ) / log(N_{ℓ+1} / N_ℓ)`. The velocity `H¹` rate in `h` is
//! `min(Re λ₁, k)` with `k = 2` on quasi-uniform meshes, so `u ∈ H^{1+s}` for every
//! `s < r_h` is the Sobolev-type index the study reports.
//!
//! **Richardson.** From the last three levels of a force coefficient `F`: observed order
//! `p = log₂(|F₁ − F₀| / |F₂ − F₁|)` (refinement ratio 2) and extrapolated value
//! `F₂ + (F₂ − F₁) / (2^p − 1)`, reported only when the differences shrink (`p > 0`).
//!
//! # References
//! L.F. Richardson, Phil. Trans. R. Soc. A 210 (1911) 307–357 (extrapolation; from memory).
//! I. Babuška, Computing 6 (1970) 264–273, and M. Dauge, SIAM J. Math. Anal. 20 (1989) 74–97
//! (rates limited by corner singularities; from memory).

use std::time::{Duration, Instant};

use crate::case::{Case, Equations};
use crate::fem::FlowField;
use crate::fem::norms::{ErrorNorms, PressureComparison, error_norms};
use crate::fem::shape::{AffineTriangle, P2_NODE_BARYCENTRIC, p2_values};
use crate::geometry::PartId;
use crate::mesh::Mesh;
use crate::post::{self, FluidProperties, PostError, ReferenceScales, VolumeForceTerms};
use crate::solver::{
    NewtonError, NewtonParams, SolveError, SolverParams, StokesProblem, solve_steady_navier_stokes,
    solve_stokes,
};

/// How the meshes of a study are made.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Refinement {
    /// Nested: every triangle of level `ℓ` split into four.
    #[default]
    Uniform,
    /// Meshed anew per level with all sizes halved and the size law `h(r) = h_ℓ (r/R)^{1−μ}`
    /// toward every corner whose predicted exponent limits the P2 rate (see [`graded_controls`]).
    Graded,
}

/// Settings of a study.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct StudyParams {
    /// Number of meshes (≥ 2; 3 or more for rates between several pairs and Richardson).
    pub levels: usize,
    pub refinement: Refinement,
    /// Snap new boundary midpoints to declared circles (default true).
    pub snap_to_circles: bool,
    /// Refuse a level with more triangles than this (a memory guard chosen by the caller).
    pub max_cells: usize,
}

/// What the errors of a level are measured against.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum ErrorKind {
    /// The case's `[exact]` solution.
    Exact,
    /// The next finer level (`u_{ℓ+1} − u_ℓ`); the last level has none.
    NextLevelDifference,
}

/// Drag and lift coefficients (volume form) on one force part.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct PartCoefficients {
    pub part: String,
    pub drag: f64,
    pub lift: f64,
}

/// One mesh of the study.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct LevelResult {
    pub level: usize,
    pub n_cells: usize,
    /// Unknowns of the linear system (free velocity components and pressures).
    pub n_unknowns: usize,
    /// Longest triangle edge.
    pub h: f64,
    /// Errors (see [`ErrorKind`]); `None` on the last level of a difference study.
    pub errors: Option<Norms>,
    pub forces: Vec<PartCoefficients>,
    pub solve_seconds: f64,
}

/// The three error norms.
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize)]
pub struct Norms {
    pub velocity_l2: f64,
    pub velocity_h1: f64,
    pub pressure_l2: f64,
}

impl From<ErrorNorms> for Norms {
    fn from(e: ErrorNorms) -> Self {
        Norms {
            velocity_l2: e.velocity_l2,
            velocity_h1: e.velocity_h1_semi,
            pressure_l2: e.pressure_l2,
        }
    }
}

/// Observed rates between two successive levels, in `h` and in `N`.
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize)]
pub struct PairRates {
    /// The coarser level of the pair.
    pub from_level: usize,
    pub in_h: Norms,
    pub in_n: Norms,
}

/// Richardson extrapolation of one force coefficient.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct Extrapolation {
    pub part: String,
    /// `drag` or `lift`.
    pub quantity: &'static str,
    pub finest: f64,
    /// Observed order `p`; `None` when the last differences do not shrink.
    pub order: Option<f64>,
    pub extrapolated: Option<f64>,
}

/// The result of a study.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct StudyReport {
    pub error_kind: ErrorKind,
    pub levels: Vec<LevelResult>,
    pub rates: Vec<PairRates>,
    pub extrapolations: Vec<Extrapolation>,
    /// Velocity `H¹` rate in `h` of the finest pair: the solution behaves as `H^{1+s}` for
    /// `s` below it (capped by the element order 2).
    pub sobolev_index: Option<f64>,
}

/// Why a study failed.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum StudyError {
    #[error("a study needs at least 2 levels, got {levels}")]
    TooFewLevels { levels: usize },
    #[error("a study solves steady problems; this case has [model.time]")]
    Unsteady,
    #[error(
        "a graded study compares with an exact solution (its meshes are not nested); give the case an [exact] table"
    )]
    GradedNeedsExact,
    #[error("level {level}: {source}")]
    Mesh { level: usize, source: crate::mesh::MeshError },
    #[error(transparent)]
    Corners(#[from] crate::corners::CornerError),
    #[error(
        "level {level} would have {cells} triangles, more than the {cap} that fit in memory; use fewer levels or a coarser case mesh"
    )]
    TooLarge { level: usize, cells: usize, cap: usize },
    #[error("level {level}: {source}")]
    Solve { level: usize, source: SolveError },
    #[error("level {level}: {source}")]
    Newton { level: usize, source: Box<NewtonError> },
    #[error(transparent)]
    Post(#[from] PostError),
}

/// Runs the study. `on_level(level, mesh, field)` is called after each solve (to write
/// files); its errors are not the study's concern, so it returns nothing.
///
/// # Errors
/// [`StudyError::TooFewLevels`], [`StudyError::Unsteady`], a failed solve on some level, or a
/// post-processing error.
pub fn run_study(
    case: &Case,
    coarse: Mesh,
    params: &StudyParams,
    on_level: &mut dyn FnMut(usize, &Mesh, &FlowField),
) -> Result<StudyReport, StudyError> {
    if params.levels < 2 {
        return Err(StudyError::TooFewLevels { levels: params.levels });
    }
    if case.model.time.is_some() {
        return Err(StudyError::Unsteady);
    }
    let error_kind =
        if case.exact.is_some() { ErrorKind::Exact } else { ErrorKind::NextLevelDifference };
    if params.refinement == Refinement::Graded && case.exact.is_none() {
        return Err(StudyError::GradedNeedsExact);
    }
    let corners = match params.refinement {
        Refinement::Uniform => Vec::new(),
        Refinement::Graded => grading_corners(case)?,
    };
    let mut levels: Vec<LevelResult> = Vec::new();
    let mut previous: Option<(Mesh, FlowField)> = None;
    let finest = coarse.n_cells().saturating_mul(4usize.saturating_pow(params.levels as u32 - 1));
    if finest > params.max_cells {
        let cells = finest;
        return Err(StudyError::TooLarge {
            level: params.levels - 1,
            cells,
            cap: params.max_cells,
        });
    }
    let mut mesh = coarse;
    for level in 0..params.levels {
        match params.refinement {
            Refinement::Uniform if level > 0 => mesh = mesh.refine_uniform(params.snap_to_circles),
            Refinement::Uniform => {}
            Refinement::Graded => {
                let controls = graded_controls(case, &corners, level);
                mesh = crate::mesh::generate(&case.domain, &controls)
                    .map_err(|source| StudyError::Mesh { level, source })?
                    .0;
            }
        }
        let clock = Instant::now();
        let (field, n_unknowns) = solve_level(case, &mesh, level)?;
        let solve_time = clock.elapsed();
        on_level(level, &mesh, &field);
        if let (ErrorKind::NextLevelDifference, Some((coarse_mesh, coarse_field))) =
            (error_kind, &previous)
        {
            let d = difference_norms(coarse_mesh, coarse_field, &mesh, &field);
            if let Some(l) = levels.last_mut() {
                l.errors = Some(d);
            }
        }
        let errors = match (&case.exact, error_kind) {
            (Some(_), ErrorKind::Exact) => Some(exact_norms(case, &mesh, &field)),
            _ => None,
        };
        levels.push(level_result(case, &mesh, &field, level, n_unknowns, errors, solve_time)?);
        previous = Some((mesh.clone(), field));
    }
    let rates = pair_rates(&levels);
    let sobolev_index = rates.last().map(|r| r.in_h.velocity_h1.min(2.0));
    let extrapolations = extrapolations(&levels);
    Ok(StudyReport { error_kind, levels, rates, extrapolations, sobolev_index })
}

/// Location and grading exponent `μ = min(1, Re λ₁ / 2)` of every corner of the case whose
/// leading exponent limits the P2 rate (`μ < 1`).
fn grading_corners(case: &Case) -> Result<Vec<([f64; 2], f64)>, StudyError> {
    let analysis = crate::corners::try_analyse_corners(
        &case.domain,
        &case.conditions,
        case.model.viscous_form,
        &crate::corners::AnalysisParams::default(),
    )?;
    Ok(analysis
        .reports
        .iter()
        .filter(|r| r.grading_exponent.is_finite() && r.grading_exponent < 1.0)
        .map(|r| (r.location, r.grading_exponent))
        .collect())
}

/// Tangent lines of the grading law per corner (see [`graded_controls`]).
const TANGENTS_PER_CORNER: usize = 10;
/// The grading parameter used is this fraction of `μ` (the theory needs it strictly below).
const GRADING_SAFETY: f64 = 0.9;
/// Smallest size at a corner, relative to `R`: a practical floor so that the finest level
/// stays meshable in double precision (the pure law asks for `R (h/R)^{1/μ}`).
const CORNER_SIZE_FLOOR: f64 = 1e-7;

/// Mesh controls of graded level `ℓ`: every size of the case divided by `2^ℓ`, and toward
/// each corner with grading exponent `μ_c < 1` the law `h(r) = h_ℓ (r/R)^{1−μ}` with
/// `μ = 0.9 μ_c`, `R = 4 h_0` and the floor `max(R (h_ℓ/R)^{1/μ}, 1e-7 R)` at the corner:
/// the mesh family for which P2 regains its optimal rate when `μ < Re λ₁ / 2` (Babuška 1970;
/// Apel, Sändig & Whiteman 1996; benchmarks.md §7.3, from memory). The mesher takes point
/// gradings `h_min + g r`; the concave power law is represented by the lower envelope of its
/// tangents at ten radii spaced geometrically between the floor radius and `R`. Tangents of a
/// concave function lie above it, so the envelope is never finer than the law.
pub fn graded_controls(
    case: &Case,
    corners: &[([f64; 2], f64)],
    level: usize,
) -> crate::mesh::MeshControls {
    let scale = 0.5f64.powi(level as i32);
    let mut controls = case.mesh.clone();
    controls.max_triangles = usize::MAX;
    let h0 = controls.size;
    controls.size *= scale;
    controls.part_sizes.iter_mut().flatten().for_each(|s| *s *= scale);
    controls.grading.iter_mut().for_each(|g| g.h_min *= scale);
    let radius = 4.0 * h0;
    for &(point, mu_corner) in corners {
        let mu = GRADING_SAFETY * mu_corner;
        let h = controls.size;
        let law = |r: f64| h * (r / radius).powf(1.0 - mu);
        let floor = (radius * (h / radius).powf(1.0 / mu)).max(CORNER_SIZE_FLOOR * radius);
        // Radius where the law meets the floor.
        let r_floor = radius * (floor / h).powf(1.0 / (1.0 - mu));
        for k in 0..TANGENTS_PER_CORNER {
            let t = k as f64 / (TANGENTS_PER_CORNER - 1) as f64;
            let r = r_floor * (radius / r_floor).powf(t);
            let slope = (1.0 - mu) * law(r) / r;
            let intercept = (law(r) - slope * r).max(floor);
            controls.grading.push(crate::mesh::Grading { point, h_min: intercept, growth: slope });
        }
    }
    controls
}

/// Solves the case's steady problem on `mesh`; returns the field and the unknown count.
fn solve_level(case: &Case, mesh: &Mesh, level: usize) -> Result<(FlowField, usize), StudyError> {
    let problem = StokesProblem::from_case(case);
    let params = SolverParams::default();
    match case.model.equations {
        Equations::Stokes => {
            let (field, info) = solve_stokes(mesh, &problem, &params)
                .map_err(|source| StudyError::Solve { level, source })?;
            Ok((field, info.n_velocity_dofs + info.n_pressure_dofs))
        }
        Equations::NavierStokes => {
            let newton = NewtonParams::from_controls(&case.model.nonlinear);
            let (field, info) = solve_steady_navier_stokes(mesh, &problem, &params, &newton)
                .map_err(|e| StudyError::Newton { level, source: Box::new(e) })?;
            Ok((field, info.n_velocity_dofs + info.n_pressure_dofs))
        }
    }
}

fn level_result(
    case: &Case,
    mesh: &Mesh,
    field: &FlowField,
    level: usize,
    n_unknowns: usize,
    errors: Option<Norms>,
    solve_time: Duration,
) -> Result<LevelResult, StudyError> {
    let forces = case
        .forces
        .iter()
        .map(|&part| part_coefficients(case, mesh, field, part))
        .collect::<Result<Vec<_>, _>>()?;
    Ok(LevelResult {
        level,
        n_cells: mesh.n_cells(),
        n_unknowns,
        h: longest_edge(mesh),
        errors,
        forces,
        solve_seconds: solve_time.as_secs_f64(),
    })
}

fn part_coefficients(
    case: &Case,
    mesh: &Mesh,
    field: &FlowField,
    part: PartId,
) -> Result<PartCoefficients, PostError> {
    let fluid = FluidProperties::of_case(case);
    let body_force = post::case_body_force(case, 0.0);
    let terms = VolumeForceTerms {
        body_force: body_force.as_deref(),
        convecting_velocity: (case.model.equations == Equations::NavierStokes)
            .then_some(&field.velocity[..]),
        ..VolumeForceTerms::default()
    };
    let force = post::volume_force(mesh, field, &fluid, part, &terms)?;
    let c = post::coefficients(&force, &ReferenceScales::of_case(case))?;
    Ok(PartCoefficients { part: case.part_name(part).to_string(), drag: c.drag, lift: c.lift })
}

/// Step of the central differences of the exact solution. Small enough that no difference
/// stencil around a quadrature point of the smallest graded corner element (size ≥ 1e-7 R,
/// degree-6 points ≥ about 5e-9 R from its edges) straddles the boundary — beyond which an
/// exact formula may jump, e.g. across the branch cut of a polar angle — while the round-off
/// `ε |u| / δ` stays near 1e-7 of O(1) gradients, far below the errors a study measures
/// (measured: with 1e-6 a graded L-shape study lost its rate to branch-cut crossings).
const FD_STEP: f64 = 1e-9;

/// Error norms against the case's exact solution (gradients by central differences).
fn exact_norms(case: &Case, mesh: &Mesh, field: &FlowField) -> Norms {
    let exact = case.exact.as_ref().expect("called with an exact solution");
    let u = |x: f64, y: f64| [exact.u.eval(x, y, 0.0), exact.v.eval(x, y, 0.0)];
    let grad = |x: f64, y: f64| {
        let (dx, dy) = (FD_STEP * x.abs().max(1.0), FD_STEP * y.abs().max(1.0));
        let (ux1, ux0) = (u(x + dx, y), u(x - dx, y));
        let (uy1, uy0) = (u(x, y + dy), u(x, y - dy));
        [
            [(ux1[0] - ux0[0]) / (2.0 * dx), (uy1[0] - uy0[0]) / (2.0 * dy)],
            [(ux1[1] - ux0[1]) / (2.0 * dx), (uy1[1] - uy0[1]) / (2.0 * dy)],
        ]
    };
    let p = |x: f64, y: f64| exact.p.eval(x, y, 0.0);
    let closed =
        !case.conditions.iter().any(|c| matches!(c, crate::case::BoundaryCondition::Outflow));
    let comparison =
        if closed { PressureComparison::UpToConstant } else { PressureComparison::Absolute };
    error_norms(mesh, field, u, grad, p, comparison).into()
}

/// Norms of `fine − I(coarse)`, with the coarse field interpolated at the fine nodes through
/// the parent cell (`fine cell / 4`, the order of [`Mesh::refine_uniform`]).
fn difference_norms(
    coarse: &Mesh,
    coarse_field: &FlowField,
    fine: &Mesh,
    field: &FlowField,
) -> Norms {
    let mut velocity = field.velocity.clone();
    let mut pressure = field.pressure.clone();
    for (c, cell) in fine.cells.iter().enumerate() {
        let parent = c / 4;
        let tri = AffineTriangle::new(coarse.cell_vertices(parent));
        let nodes = &coarse.cells[parent];
        let child = AffineTriangle::new(fine.cell_vertices(c));
        for (k, &node) in cell.iter().enumerate() {
            let x = child.point(P2_NODE_BARYCENTRIC[k]);
            let l = barycentric(&tri, x);
            let phi = p2_values(l);
            let mut u = [0.0; 2];
            for (m, &n) in nodes.iter().enumerate() {
                u[0] += phi[m] * coarse_field.velocity[n][0];
                u[1] += phi[m] * coarse_field.velocity[n][1];
            }
            velocity[node] = [field.velocity[node][0] - u[0], field.velocity[node][1] - u[1]];
            if k < 3 {
                let p: f64 = (0..3).map(|m| l[m] * coarse_field.pressure[nodes[m]]).sum();
                pressure[node] = field.pressure[node] - p;
            }
        }
    }
    let difference = FlowField { velocity, pressure };
    let zero = |_: f64, _: f64| 0.0;
    error_norms(
        fine,
        &difference,
        |_, _| [0.0; 2],
        |_, _| [[0.0; 2]; 2],
        zero,
        PressureComparison::UpToConstant,
    )
    .into()
}

/// Barycentric coordinates of `x` in `tri`: `L_i(x) = 1/3 + ∇L_i · (x − centroid)`.
fn barycentric(tri: &AffineTriangle, x: [f64; 2]) -> [f64; 3] {
    let c = tri.point([1.0 / 3.0; 3]);
    std::array::from_fn(|i| {
        let g = tri.grad_bary[i];
        1.0 / 3.0 + g[0] * (x[0] - c[0]) + g[1] * (x[1] - c[1])
    })
}

fn longest_edge(mesh: &Mesh) -> f64 {
    (0..mesh.n_cells()).map(|c| mesh.longest_edge(c)).fold(0.0, f64::max)
}

fn pair_rates(levels: &[LevelResult]) -> Vec<PairRates> {
    levels
        .windows(2)
        .filter_map(|w| {
            let (a, b) = (&w[0], &w[1]);
            // Difference studies hold the error of the pair on the coarser level only.
            let (ea, eb) = match (a.errors, b.errors) {
                (Some(ea), Some(eb)) => (ea, eb),
                _ => return None,
            };
            let rate = |ratio: f64| {
                let r = |x: f64, y: f64| (x / y).ln() / ratio.ln();
                Norms {
                    velocity_l2: r(ea.velocity_l2, eb.velocity_l2),
                    velocity_h1: r(ea.velocity_h1, eb.velocity_h1),
                    pressure_l2: r(ea.pressure_l2, eb.pressure_l2),
                }
            };
            let in_h = rate(a.h / b.h);
            let n_ratio = b.n_unknowns as f64 / a.n_unknowns as f64;
            let in_n = rate(n_ratio);
            Some(PairRates { from_level: a.level, in_h, in_n })
        })
        .collect()
}

fn extrapolations(levels: &[LevelResult]) -> Vec<Extrapolation> {
    let Some(last) = levels.last() else { return Vec::new() };
    let mut out = Vec::new();
    for (k, part) in last.forces.iter().enumerate() {
        for (quantity, pick) in [("drag", 0usize), ("lift", 1)] {
            let value = |l: &LevelResult| {
                let f = &l.forces[k];
                if pick == 0 { f.drag } else { f.lift }
            };
            let finest = value(last);
            let (order, extrapolated) = match levels.len() {
                n if n >= 3 => richardson(value(&levels[n - 3]), value(&levels[n - 2]), finest),
                _ => (None, None),
            };
            out.push(Extrapolation {
                part: part.part.clone(),
                quantity,
                finest,
                order,
                extrapolated,
            });
        }
    }
    out
}

/// Least-squares slope of `log e` against `log h`: the observed convergence order of errors
/// `e` at mesh sizes `h` (any number of levels ≥ 2).
pub fn fitted_rate(h: &[f64], e: &[f64]) -> f64 {
    let x: Vec<f64> = h.iter().map(|v| v.ln()).collect();
    let y: Vec<f64> = e.iter().map(|v| v.ln()).collect();
    let n = x.len() as f64;
    let (mx, my) = (x.iter().sum::<f64>() / n, y.iter().sum::<f64>() / n);
    let sxy: f64 = x.iter().zip(&y).map(|(a, b)| (a - mx) * (b - my)).sum();
    let sxx: f64 = x.iter().map(|a| (a - mx).powi(2)).sum();
    sxy / sxx
}

/// Observed order and extrapolated value from three levels with refinement ratio 2.
fn richardson(f0: f64, f1: f64, f2: f64) -> (Option<f64>, Option<f64>) {
    let (d1, d2) = (f1 - f0, f2 - f1);
    if d2 == 0.0 {
        return (None, Some(f2));
    }
    let p = (d1.abs() / d2.abs()).log2();
    if !(p.is_finite() && p > 0.0) {
        return (None, None);
    }
    (Some(p), Some(f2 + d2 / (2f64.powf(p) - 1.0)))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn richardson_recovers_order_and_limit_of_a_power_law() {
        // F(h) = 2 + 0.5 h^1.5 at h = 1, 1/2, 1/4: order 1.5, limit 2 (exact for a pure power).
        let f = |h: f64| 2.0 + 0.5 * h.powf(1.5);
        let (p, x) = richardson(f(1.0), f(0.5), f(0.25));
        assert!((p.unwrap() - 1.5).abs() < 1e-12);
        assert!((x.unwrap() - 2.0).abs() < 1e-12);
        // Growing differences give no order.
        assert_eq!(richardson(1.0, 1.1, 1.4), (None, None));
    }

    #[test]
    fn barycentric_coordinates_of_the_vertices_are_unit_vectors() {
        let tri = AffineTriangle::new([[0.1, 0.2], [1.3, 0.4], [0.5, 1.1]]);
        for (i, v) in tri.vertices.iter().enumerate() {
            let l = barycentric(&tri, *v);
            for (j, lj) in l.iter().enumerate() {
                assert!((lj - if i == j { 1.0 } else { 0.0 }).abs() < 1e-14);
            }
        }
    }
}
