//! Corner validation cases on generated meshes: Moffatt eddies in the Stokes lid-driven
//! cavity (`cavity-eddies`) and the local exponent at the re-entrant corner of a Stokes
//! backward-facing step (`step-stokes`). Each builds its case text, meshes it with strong
//! point gradings toward the corners, solves the Stokes problem and compares the corner
//! diagnostics with the predictions of the wedge analysis and the published values.

use crate::case::Case;
use crate::corners::{
    AnalysisParams, CornerReport, EddyParams, EddySequence, detect_eddies,
    measure_singular_corners, try_analyse_corners,
};
use crate::fem::FlowField;
use crate::mesh::{Mesh, generate};
use crate::solver::{Regularization, SolveInfo, SolverParams, StokesProblem, solve_stokes};

use super::{Level, Tolerance, ValidationError, ValidationRow, origin};

const MOFFATT: &str = "Moffatt (1964) 90° root, e^(π/q) = 16.567 (benchmarks.md §2.3)";
const MOFFATT_PSI: &str = "Moffatt (1964) 90° root, e^(π(p+1)/q) = 3.627e4 (benchmarks.md §2.3)";
const CAVITY_EDDY: &str = "Stokes cavity first corner eddy, benchmarks.md §3.3 [C], ±1 %";
const SYMMETRY: &str = "exact mirror symmetry of Stokes cavity flow (benchmarks.md §3.3)";
const DAUGE: &str = "Dauge (1989) 270° no-slip exponent (benchmarks.md §2.2)";

/// Mesh of the eddy cavity: global size, and the growth of the gradings toward the two
/// bottom corners (size `h_min + growth · r`).
struct EddyMesh {
    size: f64,
    growth: f64,
    h_min: f64,
}

fn cavity_eddies_toml(m: &EddyMesh) -> String {
    let bottom_corners = format!(
        r#"[[mesh.grading]]
near = [0.0, 0.0]
h_min = {h_min}
growth = {growth}
[[mesh.grading]]
near = [1.0, 0.0]
h_min = {h_min}
growth = {growth}
[model]
equations = "stokes"
"#,
        h_min = m.h_min,
        growth = m.growth,
    );
    super::cases::unit_cavity_toml("validation-cavity-eddies", 1.0, m.size, &bottom_corners)
}

/// Solver settings for fields whose small features matter. The refined LDLᵀ solve is driven
/// to a relative residual of 1e-13 (a few hundred rounding errors), and the dynamic
/// regularisation only replaces pivots below 1e-30 (by ±1e-14). The default (pivots below
/// 1e-11 replaced by ±1e-8) perturbs the pressure pivots of cells smaller than about 1e-5,
/// which scale like h²; the refined solution then still meets its global residual target,
/// but in this cavity the third eddy (|ψ| ≈ 1.7e-15) drowned in noise: measured on the full
/// mesh, d₂/d₃ = 13.3 instead of 16.5 and a spurious fourth sign change.
fn accurate_solver() -> SolverParams {
    SolverParams {
        regularization: Regularization::Dynamic { delta: 1e-14, epsilon: 1e-30 },
        residual_target: 1e-13,
        max_refinement_steps: 20,
        ..SolverParams::default()
    }
}

fn solve_case(
    case: &Case,
    progress: &mut dyn FnMut(&str),
) -> Result<(Mesh, FlowField, SolveInfo), ValidationError> {
    let (mesh, _) = generate(&case.domain, &case.mesh)?;
    let (field, info) = solve_stokes(&mesh, &StokesProblem::from_case(case), &accurate_solver())?;
    progress(&format!(
        "  {} cells, relative residual {:.2e} after {} refinement steps",
        mesh.n_cells(),
        info.relative_residual,
        info.refinement_steps
    ));
    Ok((mesh, field, info))
}

/// The corner reports of the case (the wedge analysis), its failure as a case failure.
pub(super) fn corner_reports(
    case: &Case,
    name: &str,
) -> Result<Vec<CornerReport>, ValidationError> {
    try_analyse_corners(
        &case.domain,
        &case.conditions,
        case.model.viscous_form,
        &AnalysisParams::default(),
    )
    .map(|a| a.reports)
    .map_err(|e| ValidationError::Failed { case: name.into(), what: e.to_string() })
}

fn report_at(reports: &[CornerReport], at: [f64; 2]) -> Option<usize> {
    reports.iter().position(|r| (r.location[0] - at[0]).hypot(r.location[1] - at[1]) < 1e-12)
}

fn describe(s: &EddySequence) -> String {
    let mut line = format!(
        "  corner ({:.3}, {:.3}): resolved r in [{:.2e}, {:.2e}];",
        s.location[0], s.location[1], s.resolved_range.0, s.resolved_range.1
    );
    for e in &s.eddies {
        let psi = e.extremum.map_or("-".to_string(), |x| format!("{:.4e} at r {:.3e}", x.1, x.0));
        line.push_str(&format!(" eddy {}: d {:.4e}, ψ {psi};", e.index, e.outer_boundary));
    }
    line.push_str(&format!(" size ratios {:?}, ψ ratios {:?}", s.size_ratios, s.psi_ratios));
    line
}

/// `cavity-eddies`: Moffatt eddies in the bottom corners of the Stokes lid-driven cavity.
///
/// Rows: the size ratio of the first two eddies in the left corner (and of the second and
/// third at the full level) against `e^{π/q}` of the 90° root, the ratio of their `ψ`
/// extrema against `e^{π(p+1)/q}`, the first eddy's `ψ` extremum against the computed value
/// of benchmarks.md §3.3, and the mirror symmetry of the two corners.
pub(super) fn cavity_eddies(
    level: Level,
    progress: &mut dyn FnMut(&str),
) -> Result<Vec<ValidationRow>, ValidationError> {
    let name = "cavity-eddies";
    // Gradings toward the bottom corners: the full mesh has about 20 elements across every
    // distance r (h ≈ 0.05 r) down to r ≈ 1e-6, the quick one about 7 down to 1e-4.
    let m = match level {
        Level::Full => EddyMesh { size: 0.04, growth: 0.05, h_min: 1e-7 },
        Level::Quick => EddyMesh { size: 0.05, growth: 0.15, h_min: 1e-5 },
    };
    let case = Case::parse(&cavity_eddies_toml(&m), &origin(name))?;
    let reports = corner_reports(&case, name)?;
    let (mesh, field, _) = solve_case(&case, progress)?;
    let failed = |what: &str| ValidationError::Failed { case: name.into(), what: what.into() };
    let mut sides = Vec::new();
    for at in [[0.0, 0.0], [1.0, 0.0]] {
        let corner = report_at(&reports, at).ok_or_else(|| failed("no bottom corner report"))?;
        let s =
            detect_eddies(&case.domain, &mesh, &field, &reports, corner, &EddyParams::default())
                .map_err(|e| failed(&e.to_string()))?;
        progress(&describe(&s));
        sides.push(s);
    }
    let (left, right) = (&sides[0], &sides[1]);
    let ratio = |v: &[f64], k: usize| v.get(k).copied().unwrap_or(f64::NAN);
    let first = |s: &EddySequence| s.eddies.first().copied();
    let psi_1 = |s: &EddySequence| first(s).and_then(|e| e.extremum).map_or(f64::NAN, |x| x.1);
    let d_1 = |s: &EddySequence| first(s).map_or(f64::NAN, |e| e.outer_boundary);
    let predicted = left.predicted;
    // Tolerances: 10 % on the ratios (the issue's); the first eddy's ψ to 1 % (the stated
    // uncertainty of the reference; the reference is the 2-D maximum at (0.038, 0.039), ours
    // the maximum on the bisector, which passes within 1e-3 of it: a second-order difference
    // of about 1e-3 relative), 2 % at the quick level. Symmetry: the mesh is not mirror
    // symmetric, so the two corners differ by the discretisation error; 1e-3 is about 30
    // times the measured difference between the quick and full values of d₁.
    let psi_tolerance = if level == Level::Full { 0.01 } else { 0.02 };
    let mut rows = vec![
        ValidationRow::new(
            name,
            "left corner: eddy size ratio d1/d2",
            ratio(&left.size_ratios, 0),
            predicted.size_ratio,
            Tolerance::Relative(0.1),
            MOFFATT,
        ),
        ValidationRow::new(
            name,
            "left corner: eddy ψ ratio |ψ1/ψ2|",
            ratio(&left.psi_ratios, 0),
            predicted.psi_ratio,
            Tolerance::Relative(0.1),
            MOFFATT_PSI,
        ),
        ValidationRow::new(
            name,
            "left corner: first eddy ψ max (bisector)",
            psi_1(left),
            2.23e-6,
            Tolerance::Relative(psi_tolerance),
            CAVITY_EDDY,
        ),
        ValidationRow::new(
            name,
            "symmetry: d1 right / d1 left",
            d_1(right) / d_1(left),
            1.0,
            Tolerance::Absolute(1e-3),
            SYMMETRY,
        ),
        ValidationRow::new(
            name,
            "symmetry: ψ1 right / ψ1 left",
            psi_1(right) / psi_1(left),
            1.0,
            Tolerance::Absolute(1e-3),
            SYMMETRY,
        ),
    ];
    if level == Level::Full {
        rows.insert(
            1,
            ValidationRow::new(
                name,
                "left corner: eddy size ratio d2/d3",
                ratio(&left.size_ratios, 1),
                predicted.size_ratio,
                Tolerance::Relative(0.1),
                MOFFATT,
            ),
        );
    }
    Ok(rows)
}

fn step_stokes_toml(h_min: f64, growth: f64, size: f64) -> String {
    format!(
        r#"name = "validation-step-stokes"
[fluid]
density = 1.0
kinematic_viscosity = 1.0
reference_velocity = 1.0
reference_length = 0.5
[domain.outer]
points = [[-1.0, 0.5], [0.0, 0.5], [0.0, 0.0], [4.0, 0.0], [4.0, 1.0], [-1.0, 1.0]]
edge_parts = ["wall", "step", "wall", "outlet", "wall", "inlet"]
[conditions.inlet]
kind = "velocity"
ux = "24 * (y - 0.5) * (1 - y)"
uy = 0
[conditions.wall]
kind = "no-slip"
[conditions.step]
kind = "no-slip"
[conditions.outlet]
kind = "outflow"
[mesh]
size = {size}
max_triangles = 10000000
[[mesh.grading]]
near = [0.0, 0.5]
h_min = {h_min}
growth = {growth}
[model]
equations = "stokes"
"#
    )
}

/// `step-stokes`: fitted local exponent at the re-entrant corner of a Stokes backward step.
///
/// The fit of [`measure_singular_corners`] needs no change here: on the mesh of
/// `examples/backward-step.toml` (h_min 0.002, growth 0.25) the Stokes solution fits 0.5435
/// over r in [5.7e-3, 0.15], while the Navier–Stokes solution of that example (Re = 50 on
/// the step height) fits 0.725 over the same radii: convection, not the fit, moves the
/// exponent there; the Stokes asymptotics only hold where the local Reynolds number
/// |u| r / ν is small, well inside the default fit range.
pub(super) fn step_stokes(
    level: Level,
    progress: &mut dyn FnMut(&str),
) -> Result<Vec<ValidationRow>, ValidationError> {
    let name = "step-stokes";
    let (h_min, growth, size) = match level {
        Level::Full => (1e-6, 0.1, 0.05),
        Level::Quick => (1e-4, 0.25, 0.1),
    };
    let case = Case::parse(&step_stokes_toml(h_min, growth, size), &origin(name))?;
    let reports = corner_reports(&case, name)?;
    let (mesh, field, _) = solve_case(&case, progress)?;
    let corner = report_at(&reports, [0.0, 0.5]).ok_or(ValidationError::Failed {
        case: name.into(),
        what: "no report at the step corner".into(),
    })?;
    let measured = measure_singular_corners(&case.domain, &mesh, &field, &reports);
    let m = measured.iter().find(|m| m.corner == corner).ok_or(ValidationError::Failed {
        case: name.into(),
        what: "the step corner was not fitted".into(),
    })?;
    let fit = m.fit.clone().map_err(|what| ValidationError::Failed { case: name.into(), what })?;
    progress(&format!(
        "  fitted {:.4} [{:.4}, {:.4}] over r in [{:.2e}, {:.2e}], predicted {:.4}",
        fit.lambda, fit.band.0, fit.band.1, fit.r_range.0, fit.r_range.1, m.predicted
    ));
    Ok(vec![ValidationRow::new(
        name,
        "fitted exponent at the step corner",
        fit.lambda,
        m.predicted,
        Tolerance::Absolute(0.05),
        DAUGE,
    )])
}
