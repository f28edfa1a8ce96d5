//! Mesh-convergence studies on uniform, graded and adaptive mesh sequences: errors against an
//! exact solution, differences between successive levels or the a-posteriori estimator,
//! observed rates in `h` and in the number of unknowns `N`, Richardson extrapolation of
//! forces, the estimator's efficiency index, and the two regularity figures the rates imply
//! (Sobolev-type index from uniform refinement, Besov-type index from adaptive refinement).
//!
//! Takes a [`Case`], its level-0 [`Mesh`] and [`StudyParams`]; returns a [`StudyReport`] and,
//! through a callback, each level's mesh, field, per-triangle estimator and (nested levels)
//! per-triangle local rate, for the caller to write. Uniform levels split every triangle into
//! four ([`Mesh::refine_uniform`], boundary midpoints snapped to declared circles), so `h`
//! halves and `N` grows about fourfold per level. Graded levels are meshed anew (see
//! [`graded_controls`]). Adaptive levels bisect the triangles that Dörfler marking selects
//! from Verfürth's residual estimator ([`post::residual_estimate`]) by newest-vertex bisection
//! ([`Mesh::refine_marked`]): the smallest set `M` with `Σ_M η_K² ≥ θ Σ η_K²`.
//!
//! **Estimator.** Every level gets `η` (the module notes of [`post::estimator`] give the
//! formula); with an exact solution also the efficiency index `η / E`,
//! `E = (ν |u − u_h|²_{H¹} + ν⁻¹ ‖p − p_h‖²)^{1/2}`, which stays bounded across levels for an
//! efficient and reliable estimator. On nested levels, the local rate of triangle `c` with
//! parent `P` (which has `n_P` children) is `ln(η_P / η_{children of P}) / ln √n_P`: the rate
//! in `h ∝ |K|^{1/2}` at which the estimator falls on that piece of the domain (2 for P2 where
//! the solution is smooth, `Re λ₁` at a singular corner).
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
//! `s < r_h` is the Sobolev-type index the study reports. On adaptive meshes the velocity
//! `H¹` error falls like `N^{−s_B/2}`, where `s_B` is the regularity of `u` in the Besov
//! scale `B^{1+s}_{τ,τ}`, `1/τ = s/2 + 1/2` (the adaptivity scale): the study fits `r_N` over
//! the second half of the levels and reports `s_B = min(2 r_N, 2)`. Where `s_B > s`,
//! adaptivity (or grading) buys convergence that uniform refinement cannot: an error `ε`
//! costs about `ε^{−2/s}` unknowns uniformly against `ε^{−2/s_B}` adaptively.
//!
//! **Richardson.** From the last three levels of a force coefficient `F`: observed order
//! `p = log₂(|F₁ − F₀| / |F₂ − F₁|)` (refinement ratio 2) and extrapolated value
//! `F₂ + (F₂ − F₁) / (2^p − 1)`, reported only when the differences shrink (`p > 0`).
//!
//! # References
//! L.F. Richardson, Phil. Trans. R. Soc. A 210 (1911) 307–357 (extrapolation; from memory).
//! I. Babuška, Computing 6 (1970) 264–273, and M. Dauge, SIAM J. Math. Anal. 20 (1989) 74–97
//! (rates limited by corner singularities; from memory).
//! W. Dörfler, SIAM J. Numer. Anal. 33 (1996) 1106–1124 (marking); R.A. DeVore, Acta Numerica
//! 7 (1998) 51–150 (Besov spaces and nonlinear approximation rates; from memory).

use std::time::{Duration, Instant};

use crate::case::{Case, Equations};
use crate::fem::FlowField;
use crate::fem::norms::{ErrorNorms, PressureComparison, error_norms};
use crate::fem::shape::{AffineTriangle, P2_NODE_BARYCENTRIC, p2_values};
use crate::geometry::PartId;
use crate::mesh::Mesh;
use crate::post::{
    self, BoundaryResidual, EstimatorInputs, FluidProperties, PostError, ReferenceScales,
    VolumeForceTerms,
};
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
    /// Nested: Dörfler marking on the residual estimator, newest-vertex bisection.
    Adaptive,
}

/// Dörfler's bulk parameter `θ` when the caller gives none (common practice, no source: values
/// 0.3–0.6 are usual; 0.5 roughly doubles the marked error per step).
pub const DEFAULT_MARKING_FRACTION: f64 = 0.5;

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
    /// Dörfler's `θ ∈ (0, 1]` for adaptive studies.
    pub marking_fraction: f64,
}

impl StudyParams {
    /// `levels` levels of `refinement`, circles snapped, the default marking fraction.
    pub fn new(levels: usize, refinement: Refinement, max_cells: usize) -> Self {
        StudyParams {
            levels,
            refinement,
            snap_to_circles: true,
            max_cells,
            marking_fraction: DEFAULT_MARKING_FRACTION,
        }
    }
}

/// One solved level as the callback of [`run_study`] sees it.
pub struct LevelView<'a> {
    pub level: usize,
    pub mesh: &'a Mesh,
    pub field: &'a FlowField,
    /// `η_K` per triangle.
    pub estimator: &'a [f64],
    /// Per triangle: the local rate of the estimator against the previous level (nested
    /// levels from level 1 on; NaN where a triangle was not refined).
    pub local_rate: Option<&'a [f64]>,
}

/// What the errors of a level are measured against.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum ErrorKind {
    /// The case's `[exact]` solution.
    Exact,
    /// The next finer level (`u_{ℓ+1} − u_ℓ`); the last level has none.
    NextLevelDifference,
    /// No error norms (non-nested levels without an exact solution): rates of the estimator.
    Estimator,
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
    /// The residual estimator `η`.
    pub estimator: f64,
    /// `η / E` against the exact solution (see the module notes), when there is one.
    pub efficiency_index: Option<f64>,
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

/// Observed rates of the estimator between two successive levels.
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize)]
pub struct EstimatorRate {
    pub from_level: usize,
    pub in_h: f64,
    pub in_n: f64,
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
    pub refinement: Refinement,
    pub rates: Vec<PairRates>,
    pub estimator_rates: Vec<EstimatorRate>,
    pub extrapolations: Vec<Extrapolation>,
    /// Velocity `H¹` rate in `h` of the finest pair of a uniform study: the solution behaves
    /// as `H^{1+s}` for `s` below it (capped by the element order 2).
    pub sobolev_index: Option<f64>,
    /// The same index predicted by the corner analysis: `min(Re λ₁, 2)` over the corners.
    pub predicted_sobolev_index: Option<f64>,
    /// Adaptive studies: the velocity `H¹` error's (or, without an exact solution, the
    /// estimator's) rate in `N`, fitted over the second half of the levels.
    pub adaptive_rate_in_n: Option<f64>,
    /// `s_B = min(2 r_N, 2)` from [`StudyReport::adaptive_rate_in_n`] (see the module notes).
    pub besov_index: Option<f64>,
}

/// Why a study failed.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum StudyError {
    #[error("a study needs at least 2 levels, got {levels}")]
    TooFewLevels { levels: usize },
    #[error("a study solves steady problems; this case has [model.time]")]
    Unsteady,
    #[error("the marking fraction must lie in (0, 1], got {0}")]
    MarkingFraction(f64),
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

/// Runs the study. `on_level` is called after each solve (to write files); its errors are
/// not the study's concern, so it returns nothing.
///
/// # Errors
/// [`StudyError::TooFewLevels`], [`StudyError::Unsteady`], [`StudyError::MarkingFraction`],
/// [`StudyError::TooLarge`], a failed mesh or solve on some level, or a post-processing error.
pub fn run_study(
    case: &Case,
    coarse: Mesh,
    params: &StudyParams,
    on_level: &mut dyn FnMut(&LevelView),
) -> Result<StudyReport, StudyError> {
    check_params(case, &coarse, params)?;
    let error_kind = match (&case.exact, params.refinement) {
        (Some(_), _) => ErrorKind::Exact,
        (None, Refinement::Graded) => ErrorKind::Estimator,
        (None, _) => ErrorKind::NextLevelDifference,
    };
    let analysis = corner_analysis(case)?;
    let corners = grading_corners(&analysis);
    let mut levels: Vec<LevelResult> = Vec::new();
    let mut previous: Option<Solved> = None;
    let mut mesh = match params.refinement {
        Refinement::Adaptive => coarse.with_longest_edge_first(),
        _ => coarse,
    };
    let mut parent: Option<Vec<usize>> = None;
    for level in 0..params.levels {
        if let Some(prev) = &previous {
            (mesh, parent) = next_mesh(case, params, &corners, prev, level)?;
        }
        let clock = Instant::now();
        let (field, n_unknowns) = solve_level(case, &mesh, level)?;
        let solve_time = clock.elapsed();
        let estimate = estimate_case_error(case, &mesh, &field);
        let local_rate = match (&previous, &parent) {
            (Some(prev), Some(p)) => Some(local_rates(&prev.estimate, &estimate.cells, p)),
            _ => None,
        };
        on_level(&LevelView {
            level,
            mesh: &mesh,
            field: &field,
            estimator: &estimate.cells,
            local_rate: local_rate.as_deref(),
        });
        if let (ErrorKind::NextLevelDifference, Some(prev), Some(p)) =
            (error_kind, &previous, &parent)
        {
            let d = difference_norms(&prev.mesh, &prev.field, &mesh, &field, p);
            if let Some(l) = levels.last_mut() {
                l.errors = Some(d);
            }
        }
        let errors = match error_kind {
            ErrorKind::Exact => Some(exact_norms(case, &mesh, &field)),
            _ => None,
        };
        let mut result = level_result(case, &mesh, &field, level, n_unknowns, errors, solve_time)?;
        result.estimator = estimate.total;
        result.efficiency_index = errors.map(|e| estimate.total / energy_error(case, &e));
        levels.push(result);
        previous = Some(Solved { mesh: mesh.clone(), field, estimate: estimate.cells });
    }
    Ok(report(error_kind, params.refinement, levels, &analysis))
}

/// A solved level kept for the next one.
struct Solved {
    mesh: Mesh,
    field: FlowField,
    estimate: Vec<f64>,
}

fn check_params(case: &Case, coarse: &Mesh, params: &StudyParams) -> Result<(), StudyError> {
    if params.levels < 2 {
        return Err(StudyError::TooFewLevels { levels: params.levels });
    }
    if case.model.time.is_some() {
        return Err(StudyError::Unsteady);
    }
    let theta = params.marking_fraction;
    if !(theta > 0.0 && theta <= 1.0) {
        return Err(StudyError::MarkingFraction(theta));
    }
    // Uniform and graded levels grow about fourfold; adaptive levels are checked as they come.
    if params.refinement != Refinement::Adaptive {
        let finest =
            coarse.n_cells().saturating_mul(4usize.saturating_pow(params.levels as u32 - 1));
        if finest > params.max_cells {
            let (level, cap) = (params.levels - 1, params.max_cells);
            return Err(StudyError::TooLarge { level, cells: finest, cap });
        }
    }
    Ok(())
}

/// The mesh of `level` (≥ 1) from the previous level, and the parent of each of its cells
/// when the levels are nested.
fn next_mesh(
    case: &Case,
    params: &StudyParams,
    corners: &[([f64; 2], f64)],
    prev: &Solved,
    level: usize,
) -> Result<(Mesh, Option<Vec<usize>>), StudyError> {
    let mesh_error = |source| StudyError::Mesh { level, source };
    match params.refinement {
        Refinement::Uniform => {
            let parent = (0..4 * prev.mesh.n_cells()).map(|c| c / 4).collect();
            Ok((prev.mesh.refine_uniform(params.snap_to_circles), Some(parent)))
        }
        Refinement::Graded => {
            let controls = graded_controls(case, corners, level);
            Ok((crate::mesh::generate(&case.domain, &controls).map_err(mesh_error)?.0, None))
        }
        Refinement::Adaptive => {
            let marked = dorfler_marking(&prev.estimate, params.marking_fraction);
            let refined =
                prev.mesh.refine_marked(&marked, params.snap_to_circles).map_err(mesh_error)?;
            let cells = refined.mesh.n_cells();
            if cells > params.max_cells {
                return Err(StudyError::TooLarge { level, cells, cap: params.max_cells });
            }
            Ok((refined.mesh, Some(refined.parent)))
        }
    }
}

/// Dörfler marking: the fewest triangles, largest indicators first, whose `Σ η_K²` reaches
/// `θ Σ η_K²` (ties at the threshold are all marked, so equal indicators refine alike).
pub fn dorfler_marking(indicators: &[f64], theta: f64) -> Vec<bool> {
    let mut order: Vec<usize> = (0..indicators.len()).collect();
    order.sort_unstable_by(|&a, &b| indicators[b].total_cmp(&indicators[a]));
    let total: f64 = indicators.iter().map(|e| e * e).sum();
    let mut marked = vec![false; indicators.len()];
    let mut sum = 0.0;
    let mut threshold = f64::INFINITY;
    for &c in &order {
        let e = indicators[c];
        if sum >= theta * total && e < threshold {
            break;
        }
        marked[c] = true;
        sum += e * e;
        threshold = e;
    }
    marked
}

/// Per fine cell: `ln(η_P / η_{children of P}) / ln √n_P` for its parent `P` (NaN when `P` has
/// one child, i.e. was not refined, or an indicator vanishes).
fn local_rates(coarse: &[f64], fine: &[f64], parent: &[usize]) -> Vec<f64> {
    let mut sum_sq = vec![0.0; coarse.len()];
    let mut count = vec![0usize; coarse.len()];
    for (c, &p) in parent.iter().enumerate() {
        sum_sq[p] += fine[c] * fine[c];
        count[p] += 1;
    }
    parent
        .iter()
        .map(|&p| {
            let (children, n) = (sum_sq[p].sqrt(), count[p] as f64);
            if count[p] < 2 || children <= 0.0 || coarse[p] <= 0.0 {
                f64::NAN
            } else {
                (coarse[p] / children).ln() / n.sqrt().ln()
            }
        })
        .collect()
}

/// Verfürth's estimator for the case's field: its viscosity, viscous form, body force at
/// `t = 0`, convection for Navier–Stokes, and per part the boundary term of its condition.
pub fn estimate_case_error(case: &Case, mesh: &Mesh, field: &FlowField) -> post::ErrorEstimate {
    use crate::case::BoundaryCondition as Bc;
    let boundary: Vec<BoundaryResidual> = case
        .conditions
        .iter()
        .map(|c| match c {
            Bc::Velocity { .. } | Bc::NoSlip => BoundaryResidual::None,
            Bc::Outflow => BoundaryResidual::Traction,
            Bc::Slip => BoundaryResidual::TangentialTraction,
        })
        .collect();
    let body_force = post::case_body_force(case, 0.0);
    let inputs = EstimatorInputs {
        viscosity: case.fluid.kinematic_viscosity,
        viscous_form: case.model.viscous_form,
        body_force: body_force.as_deref().map(|f| f as &(dyn Fn([f64; 2]) -> [f64; 2] + Sync)),
        convection: case.model.equations == Equations::NavierStokes,
        boundary: &boundary,
    };
    post::residual_estimate(mesh, field, &inputs)
}

/// `E = (ν |u − u_h|²_{H¹} + ν⁻¹ ‖p − p_h‖²)^{1/2}`, the norm the estimator bounds.
fn energy_error(case: &Case, e: &Norms) -> f64 {
    let nu = case.fluid.kinematic_viscosity;
    (nu * e.velocity_h1.powi(2) + e.pressure_l2.powi(2) / nu).sqrt()
}

fn corner_analysis(case: &Case) -> Result<crate::corners::CornerAnalysis, StudyError> {
    Ok(crate::corners::try_analyse_corners(
        &case.domain,
        &case.conditions,
        case.model.viscous_form,
        &crate::corners::AnalysisParams::default(),
    )?)
}

/// Assembles the report: rates, extrapolations and the regularity indices.
fn report(
    error_kind: ErrorKind,
    refinement: Refinement,
    levels: Vec<LevelResult>,
    analysis: &crate::corners::CornerAnalysis,
) -> StudyReport {
    // Adaptive levels keep their coarsest triangles: no common `h`, no rate in it.
    let nested_h = refinement != Refinement::Adaptive;
    let rates = pair_rates(&levels, nested_h);
    let estimator_rates = levels
        .windows(2)
        .map(|w| {
            let ratio = (w[0].estimator / w[1].estimator).ln();
            EstimatorRate {
                from_level: w[0].level,
                in_h: if nested_h { ratio / (w[0].h / w[1].h).ln() } else { f64::NAN },
                in_n: ratio / (w[1].n_unknowns as f64 / w[0].n_unknowns as f64).ln(),
            }
        })
        .collect();
    let sobolev_index = match refinement {
        Refinement::Uniform => rates.last().map(|r| r.in_h.velocity_h1.min(2.0)),
        _ => None,
    };
    let adaptive_rate_in_n =
        (refinement == Refinement::Adaptive).then(|| adaptive_rate(&levels, error_kind)).flatten();
    let predicted_sobolev_index = analysis
        .reports
        .iter()
        .map(|r| 2.0 * r.grading_exponent)
        .filter(|s| s.is_finite())
        .fold(None, |m: Option<f64>, s| Some(m.map_or(s, |m| m.min(s))))
        .map(|s| s.min(2.0))
        .or(Some(2.0));
    let extrapolations = extrapolations(&levels, nested_h);
    StudyReport {
        error_kind,
        levels,
        refinement,
        rates,
        estimator_rates,
        extrapolations,
        sobolev_index,
        predicted_sobolev_index,
        besov_index: adaptive_rate_in_n.map(|r| (2.0 * r).min(2.0)),
        adaptive_rate_in_n,
    }
}

/// `−d ln e / d ln N` fitted over the second half of the levels (at least two), with `e` the
/// velocity `H¹` error when known, else the estimator.
fn adaptive_rate(levels: &[LevelResult], error_kind: ErrorKind) -> Option<f64> {
    let first = (levels.len() / 2).min(levels.len().saturating_sub(2));
    let tail = &levels[first..];
    let n: Vec<f64> = tail.iter().map(|l| l.n_unknowns as f64).collect();
    let e: Vec<f64> = tail
        .iter()
        .map(|l| match (error_kind, l.errors) {
            (ErrorKind::Exact, Some(e)) => e.velocity_h1,
            _ => l.estimator,
        })
        .collect();
    (n.len() >= 2).then(|| -fitted_rate(&n, &e))
}

/// Location and grading exponent `μ = min(1, Re λ₁ / 2)` of every corner of the case whose
/// leading exponent limits the P2 rate (`μ < 1`).
fn grading_corners(analysis: &crate::corners::CornerAnalysis) -> Vec<([f64; 2], f64)> {
    analysis
        .reports
        .iter()
        .filter(|r| r.grading_exponent.is_finite() && r.grading_exponent < 1.0)
        .map(|r| (r.location, r.grading_exponent))
        .collect()
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
        estimator: f64::NAN,
        efficiency_index: None,
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
/// the parent cell `parent_of[c]` (nested meshes).
fn difference_norms(
    coarse: &Mesh,
    coarse_field: &FlowField,
    fine: &Mesh,
    field: &FlowField,
    parent_of: &[usize],
) -> Norms {
    let mut velocity = field.velocity.clone();
    let mut pressure = field.pressure.clone();
    for (c, cell) in fine.cells.iter().enumerate() {
        let parent = parent_of[c];
        let tri = AffineTriangle::new(coarse.cell_vertices(parent));
        let nodes = &coarse.cells[parent];
        let child = AffineTriangle::new(fine.cell_vertices(c));
        for (k, &node) in cell.iter().enumerate() {
            let x = child.point(P2_NODE_BARYCENTRIC[k]);
            let l = tri.barycentric(x);
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

fn longest_edge(mesh: &Mesh) -> f64 {
    (0..mesh.n_cells()).map(|c| mesh.longest_edge(c)).fold(0.0, f64::max)
}

/// Rates between successive levels; the rates in `h` are NaN unless `with_h`.
fn pair_rates(levels: &[LevelResult], with_h: bool) -> Vec<PairRates> {
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
            let in_h = if with_h { rate(a.h / b.h) } else { rate(f64::NAN) };
            let n_ratio = b.n_unknowns as f64 / a.n_unknowns as f64;
            let in_n = rate(n_ratio);
            Some(PairRates { from_level: a.level, in_h, in_n })
        })
        .collect()
}

/// Richardson extrapolation of every force coefficient from the last three levels when the
/// refinement ratio is 2 (`ratio_two`); otherwise only the finest values.
fn extrapolations(levels: &[LevelResult], ratio_two: bool) -> Vec<Extrapolation> {
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
                n if n >= 3 && ratio_two => {
                    richardson(value(&levels[n - 3]), value(&levels[n - 2]), finest)
                }
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
    fn dorfler_marks_the_fewest_largest_indicators_reaching_the_fraction() {
        // η² = 16, 9, 4, 1 (total 30): θ = 0.5 needs 15 → the first alone (16) suffices;
        // θ = 0.8 needs 24 → 16 + 9 = 25.
        let eta = [1.0, 4.0, 2.0, 3.0];
        assert_eq!(dorfler_marking(&eta, 0.5), vec![false, true, false, false]);
        assert_eq!(dorfler_marking(&eta, 0.8), vec![false, true, false, true]);
        assert_eq!(dorfler_marking(&eta, 1.0), vec![true; 4]);
        // Equal indicators at the threshold are marked alike.
        assert_eq!(dorfler_marking(&[1.0, 1.0, 1.0, 1.0], 0.3), vec![true; 4]);
    }

    #[test]
    fn local_rate_of_a_uniformly_split_parent_is_the_h_rate() {
        // A parent with η = 1 whose four children carry η² = 1/64 each: children total
        // 1/4 = 2^-2 at half the size, so the rate is 2; an unrefined parent has none.
        let rates = local_rates(&[1.0, 1.0], &[0.125, 0.125, 0.125, 0.125, 0.5], &[0, 0, 0, 0, 1]);
        for r in &rates[..4] {
            assert!((r - 2.0).abs() < 1e-12, "{r}");
        }
        assert!(rates[4].is_nan());
    }
}
