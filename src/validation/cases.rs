//! The validation cases: case text, solve, and the comparison rows (see the module docs of
//! [`super`]).

use crate::case::Case;
use crate::fem::FlowField;
use crate::fem::norms::{ErrorNorms, PressureComparison, error_norms};
use crate::mesh::structured::rectangle;
use crate::mesh::{Mesh, generate};
use crate::post::{
    self, FluidProperties, PointLocator, ReferenceScales, VolumeForceTerms, signal_stats,
    strouhal_number,
};
use crate::solver::{
    ImexParams, ImexStepper, NewtonParams, SolverParams, StokesProblem, UnsteadyProblem,
    solve_steady_navier_stokes,
};
use crate::study::fitted_rate;

use super::{Level, Tolerance, ValidationError, ValidationRow, origin};

/// Every built-in case, in the order `all` runs them.
pub const CASE_NAMES: [&str; 10] = [
    "kovasznay",
    "l-shape",
    "profile-trailing-edge",
    "step-stokes",
    "cavity-eddies",
    "cylinder-steady",
    "cavity-100",
    "cavity-1000",
    "cylinder-inflow",
    "cylinder-periodic",
];

const SCHAEFER_TUREK: &str =
    "Schäfer & Turek (1996), 2D-1 reference of Nabh (1998) / John & Matthies (2001)";
const SCHAEFER_TUREK_2D2: &str = "Schäfer & Turek (1996), 2D-2 interval midpoint";
const JOHN_2004: &str = "John (2004), Int. J. Numer. Meth. Fluids 44, 777-788";
const GHIA: &str = "Ghia, Ghia & Shin (1982), J. Comput. Phys. 48, Tables I-II";
const BOTELLA_PEYRET: &str = "Botella & Peyret (1998), Comput. Fluids 27, 421-433";
const KOVASZNAY: &str = "Kovasznay (1948) exact solution; optimal Taylor-Hood rate";
const VERFURTH: &str = "Verfürth (1996) exact L-shape solution; Dauge (1989) exponent";

/// Runs one case.
///
/// # Errors
/// [`ValidationError::UnknownCase`] for a name not in [`CASE_NAMES`]; any error of the
/// pipeline stages.
pub fn run_case(
    name: &str,
    level: Level,
    progress: &mut dyn FnMut(&str),
) -> Result<Vec<ValidationRow>, ValidationError> {
    progress(&format!("{name}: running ({level:?})"));
    match name {
        "kovasznay" => kovasznay(level),
        "l-shape" => l_shape(level),
        "profile-trailing-edge" => profile_trailing_edge(level),
        "cylinder-steady" => cylinder_steady(level),
        "cylinder-periodic" => cylinder_periodic(level, progress),
        "cylinder-inflow" => cylinder_inflow(level, progress),
        "cavity-100" => cavity(100.0, level),
        "cavity-1000" => cavity(1000.0, level),
        "cavity-eddies" => super::eddies::cavity_eddies(level, progress),
        "step-stokes" => super::eddies::step_stokes(level, progress),
        _ => Err(ValidationError::UnknownCase {
            name: name.to_string(),
            known: CASE_NAMES.join(", "),
        }),
    }
}

// ---------------------------------------------------------------------------------------
// Cylinder in a channel (Schäfer & Turek 1996 geometry).

/// Mesh controls of a cylinder case: global size, polygon sides, size on the cylinder.
struct CylinderMesh {
    size: f64,
    sides: usize,
    cylinder: f64,
}

/// Angular velocity of the brief start-up rotation of the cylinder in the periodic case: a
/// Gaussian pulse centred at t = 0.25 (width 0.1, peak surface speed 1 = U_mean) that breaks
/// the near-symmetry of the start so that shedding saturates within a few time units
/// instead of tens; it is below 1e-20 after t = 1. Common practice, no source.
const KICK: &str = "20 * exp(-(((t - 0.25) / 0.1)^2))";

fn cylinder_toml(
    inflow: &str,
    mean_velocity: f64,
    mesh: &CylinderMesh,
    time: Option<(f64, f64)>,
    kick: bool,
) -> String {
    let wall = if kick {
        format!("kind = \"velocity\"\nux = \"-{KICK} * (y - 0.2)\"\nuy = \"{KICK} * (x - 0.2)\"")
    } else {
        "kind = \"no-slip\"".to_string()
    };
    let time = time.map_or(String::new(), |(dt, t_end)| {
        format!("[model.time]\ndt = {dt}\nt_end = {t_end}\nwrite_every = 1000000\n")
    });
    format!(
        r#"name = "validation-cylinder"
[fluid]
density = 1.0
kinematic_viscosity = 1.0e-3
reference_velocity = {mean_velocity}
reference_length = 0.1
[domain.outer]
rectangle = [0.0, 0.0, 2.2, 0.41]
sides = {{ bottom = "wall", right = "outlet", top = "wall", left = "inlet" }}
[[domain.bodies]]
name = "cylinder"
polygon = {{ center = [0.2, 0.2], radius = 0.05, sides = {sides}, circle = true }}
[conditions.inlet]
kind = "velocity"
ux = "4 * {inflow} * y * (0.41 - y) / 0.41^2"
uy = 0
[conditions.wall]
kind = "no-slip"
[conditions.cylinder]
{wall}
[conditions.outlet]
kind = "outflow"
[mesh]
size = {size}
part_sizes = {{ cylinder = {cylinder} }}
max_triangles = 10000000
[model]
equations = "navier-stokes"
{time}
[report]
forces = ["cylinder"]
pressure_difference = [[0.15, 0.2], [0.25, 0.2]]
"#,
        sides = mesh.sides,
        size = mesh.size,
        cylinder = mesh.cylinder,
    )
}

/// Volume-form drag and lift coefficients on the case's first force part, and the pressure
/// difference, of `field` at one time.
fn cylinder_quantities(
    case: &Case,
    mesh: &Mesh,
    locator: &PointLocator,
    field: &FlowField,
    time_derivative: Option<&[[f64; 2]]>,
) -> Result<(f64, f64, f64), ValidationError> {
    let terms = VolumeForceTerms {
        convecting_velocity: Some(&field.velocity),
        time_derivative,
        ..VolumeForceTerms::default()
    };
    let force =
        post::volume_force(mesh, field, &FluidProperties::of_case(case), case.forces[0], &terms)?;
    let c = post::coefficients(&force, &ReferenceScales::of_case(case))?;
    let pd = case.pressure_difference.expect("the cylinder cases name a pressure difference");
    let dp = locator.pressure_difference(field, pd.first, pd.second)? * case.fluid.density;
    Ok((c.drag, c.lift, dp))
}

fn cylinder_steady(level: Level) -> Result<Vec<ValidationRow>, ValidationError> {
    let name = "cylinder-steady";
    let mesh = match level {
        Level::Full => CylinderMesh { size: 0.01, sides: 256, cylinder: 0.00125 },
        Level::Quick => CylinderMesh { size: 0.02, sides: 128, cylinder: 0.0025 },
    };
    let case = Case::parse(&cylinder_toml("0.3", 0.2, &mesh, None, false), &origin(name))?;
    let (mesh, _) = generate(&case.domain, &case.mesh)?;
    let (field, _) = solve_steady_navier_stokes(
        &mesh,
        &StokesProblem::from_case(&case),
        &SolverParams::default(),
        &NewtonParams::default(),
    )?;
    let locator = PointLocator::new(&mesh)?;
    let (cd, cl, dp) = cylinder_quantities(&case, &mesh, &locator, &field, None)?;
    // Issue tolerances: c_D 0.2 %, c_L 3 %, Δp 0.5 %. Quick (coarse mesh): c_L 5 %, the
    // others unchanged (measured 3.4 % for c_L at the quick resolution).
    let lift_tolerance = if level == Level::Full { 0.03 } else { 0.05 };
    Ok(vec![
        ValidationRow::new(
            name,
            "drag coefficient c_D",
            cd,
            5.57953523384,
            Tolerance::Relative(0.002),
            SCHAEFER_TUREK,
        ),
        ValidationRow::new(
            name,
            "lift coefficient c_L",
            cl,
            0.010618948146,
            Tolerance::Relative(lift_tolerance),
            SCHAEFER_TUREK,
        ),
        ValidationRow::new(
            name,
            "pressure difference Δp",
            dp,
            0.11752016697,
            Tolerance::Relative(0.005),
            SCHAEFER_TUREK,
        ),
    ])
}

/// The time series of an unsteady cylinder run: times, drag, lift, pressure difference.
struct Series {
    times: Vec<f64>,
    drag: Vec<f64>,
    lift: Vec<f64>,
    dp: Vec<f64>,
}

fn run_cylinder_series(
    case: &Case,
    progress: &mut dyn FnMut(&str),
) -> Result<Series, ValidationError> {
    let time = case.model.time.expect("unsteady cylinder cases have [model.time]");
    let (mesh, _) = generate(&case.domain, &case.mesh)?;
    let problem = UnsteadyProblem {
        viscosity: case.fluid.kinematic_viscosity,
        conditions: &case.conditions,
        body_force: None,
        viscous_form: case.model.viscous_form,
        convection: true,
    };
    let params =
        ImexParams { speed_scale: case.fluid.reference_velocity, ..ImexParams::new(time.dt) };
    let mut stepper = ImexStepper::new(&mesh, problem, params)?;
    let locator = PointLocator::new(&mesh)?;
    let n_steps = (time.t_end / time.dt).round() as usize;
    let mut series =
        Series { times: Vec::new(), drag: Vec::new(), lift: Vec::new(), dp: Vec::new() };
    for step in 1..=n_steps {
        stepper.step()?;
        let (cd, cl, dp) = cylinder_quantities(
            case,
            &mesh,
            &locator,
            stepper.field(),
            Some(stepper.time_derivative()),
        )?;
        series.times.push(stepper.time());
        series.drag.push(cd);
        series.lift.push(cl);
        series.dp.push(dp);
        if step.is_multiple_of((n_steps / 10).max(1)) {
            progress(&format!("  t = {:.4}: c_D {cd:.5}, c_L {cl:.5}", stepper.time()));
        }
    }
    Ok(series)
}

fn cylinder_periodic(
    level: Level,
    progress: &mut dyn FnMut(&str),
) -> Result<Vec<ValidationRow>, ValidationError> {
    let name = "cylinder-periodic";
    if level == Level::Quick {
        progress(&format!("{name}: skipped at the quick level (minutes of time stepping)"));
        return Ok(Vec::new());
    }
    let mesh = CylinderMesh { size: 0.02, sides: 128, cylinder: 0.0025 };
    let case =
        Case::parse(&cylinder_toml("1.5", 1.0, &mesh, Some((0.0005, 10.0)), true), &origin(name))?;
    let s = run_cylinder_series(&case, progress)?;
    // The settled window: the second half of the run (shedding is periodic by then).
    let from = s.times.len() / 2;
    let stats = |v: &[f64]| signal_stats(&s.times[from..], &v[from..]);
    let failed = |what: &str| ValidationError::Failed { case: name.into(), what: what.into() };
    let drag = stats(&s.drag).ok_or_else(|| failed("empty drag history"))?;
    let lift = stats(&s.lift).ok_or_else(|| failed("empty lift history"))?;
    let st = strouhal_number(&s.times[from..], &s.lift[from..], 0.1, 1.0).unwrap_or(f64::NAN);
    // References: midpoints of the 1996 intervals c_D,max ∈ [3.22, 3.24], c_L,max ∈
    // [0.99, 1.01], St ∈ [0.295, 0.305]; tolerances of the issue (0.5 %, 2 %, 1 %).
    Ok(vec![
        ValidationRow::new(
            name,
            "maximum drag c_D,max",
            drag.max,
            3.23,
            Tolerance::Relative(0.005),
            SCHAEFER_TUREK_2D2,
        ),
        ValidationRow::new(
            name,
            "maximum lift c_L,max",
            lift.max,
            1.00,
            Tolerance::Relative(0.02),
            SCHAEFER_TUREK_2D2,
        ),
        ValidationRow::new(
            name,
            "Strouhal number St",
            st,
            0.300,
            Tolerance::Relative(0.01),
            SCHAEFER_TUREK_2D2,
        ),
    ])
}

fn cylinder_inflow(
    level: Level,
    progress: &mut dyn FnMut(&str),
) -> Result<Vec<ValidationRow>, ValidationError> {
    let name = "cylinder-inflow";
    if level == Level::Quick {
        progress(&format!("{name}: skipped at the quick level (minutes of time stepping)"));
        return Ok(Vec::new());
    }
    let mesh = CylinderMesh { size: 0.02, sides: 128, cylinder: 0.0025 };
    let toml = cylinder_toml("1.5 * sin(PI * t / 8)", 1.0, &mesh, Some((0.0005, 8.0)), false);
    let case = Case::parse(&toml, &origin(name))?;
    let s = run_cylinder_series(&case, progress)?;
    let failed = |what: &str| ValidationError::Failed { case: name.into(), what: what.into() };
    let drag = signal_stats(&s.times, &s.drag).ok_or_else(|| failed("empty drag history"))?;
    let lift = signal_stats(&s.times, &s.lift).ok_or_else(|| failed("empty lift history"))?;
    let dp_final = *s.dp.last().ok_or_else(|| failed("empty history"))?;
    // Issue tolerances: c_D,max 1 %, c_L,max 5 %, Δp(8) 5 %.
    Ok(vec![
        ValidationRow::new(
            name,
            "maximum drag c_D,max",
            drag.max,
            2.950921575,
            Tolerance::Relative(0.01),
            JOHN_2004,
        ),
        ValidationRow::new(
            name,
            "maximum lift c_L,max",
            lift.max,
            0.47795,
            Tolerance::Relative(0.05),
            JOHN_2004,
        ),
        ValidationRow::new(
            name,
            "pressure difference Δp(t = 8)",
            dp_final,
            -0.1116,
            Tolerance::Relative(0.05),
            JOHN_2004,
        ),
    ])
}

// ---------------------------------------------------------------------------------------
// Kovasznay flow (Kovasznay 1948): λ(Re = 40) = −0.963740544195767 (benchmarks.md §6.1).

const KOVASZNAY_LAMBDA: f64 = -0.963740544195767;

fn kovasznay_exact(x: f64, y: f64) -> ([f64; 2], [[f64; 2]; 2], f64) {
    let (l, tau) = (KOVASZNAY_LAMBDA, std::f64::consts::TAU);
    let e = (l * x).exp();
    let (c, s) = ((tau * y).cos(), (tau * y).sin());
    let u = [1.0 - e * c, l / tau * e * s];
    let grad = [[-l * e * c, tau * e * s], [l * l / tau * e * s, l * e * c]];
    (u, grad, -0.5 * (2.0 * l * x).exp())
}

fn kovasznay(level: Level) -> Result<Vec<ValidationRow>, ValidationError> {
    let name = "kovasznay";
    let levels: &[usize] = match level {
        Level::Full => &[4, 8, 16, 32],
        Level::Quick => &[2, 4, 8],
    };
    let l = KOVASZNAY_LAMBDA;
    let toml = format!(
        r#"name = "validation-kovasznay"
[fluid]
density = 1.0
kinematic_viscosity = 0.025
reference_velocity = 1.0
reference_length = 1.0
[domain.outer]
rectangle = [-0.5, -0.5, 1.0, 1.5]
sides = {{ bottom = "boundary", right = "boundary", top = "boundary", left = "boundary" }}
[conditions.boundary]
kind = "velocity"
ux = "1 - exp({l} * x) * cos(2 * PI * y)"
uy = "{l} / (2 * PI) * exp({l} * x) * sin(2 * PI * y)"
[mesh]
size = 0.1
[model]
equations = "navier-stokes"
"#
    );
    let case = Case::parse(&toml, &origin(name))?;
    let params = SolverParams { flux_tolerance: 1e-2, ..SolverParams::default() };
    let mut h = Vec::new();
    let mut errors: Vec<ErrorNorms> = Vec::new();
    for &n in levels {
        let mesh = rectangle([-0.5, -0.5], [1.0, 1.5], 3 * n, 4 * n, |_, _| [0.0, 0.0])?;
        let conditions = vec![case.conditions[0].clone(); 4];
        let problem = StokesProblem { conditions: &conditions, ..StokesProblem::from_case(&case) };
        let (field, _) =
            solve_steady_navier_stokes(&mesh, &problem, &params, &NewtonParams::default())?;
        h.push(0.5 / n as f64);
        errors.push(error_norms(
            &mesh,
            &field,
            |x, y| kovasznay_exact(x, y).0,
            |x, y| kovasznay_exact(x, y).1,
            |x, y| kovasznay_exact(x, y).2,
            PressureComparison::UpToConstant,
        ));
    }
    let from = levels.len() - 3;
    let rate = |f: fn(&ErrorNorms) -> f64| {
        let e: Vec<f64> = errors.iter().map(f).collect();
        fitted_rate(&h[from..], &e[from..])
    };
    // Thresholds of the issue, below the optimal rates 3, 2, 2 (benchmarks.md §7.1).
    Ok(vec![
        ValidationRow::new(
            name,
            "velocity L2 rate",
            rate(|e| e.velocity_l2),
            3.0,
            Tolerance::AtLeast(2.8),
            KOVASZNAY,
        ),
        ValidationRow::new(
            name,
            "velocity H1 rate",
            rate(|e| e.velocity_h1_semi),
            2.0,
            Tolerance::AtLeast(1.8),
            KOVASZNAY,
        ),
        ValidationRow::new(
            name,
            "pressure L2 rate",
            rate(|e| e.pressure_l2),
            2.0,
            Tolerance::AtLeast(1.8),
            KOVASZNAY,
        ),
    ])
}

// ---------------------------------------------------------------------------------------
// Lid-driven cavity: Ghia, Ghia & Shin (1982) Tables I and II (benchmarks.md §3.1), interior
// points only (the end points are boundary data).

const GHIA_Y: [f64; 15] = [
    0.9766, 0.9688, 0.9609, 0.9531, 0.8516, 0.7344, 0.6172, 0.5, 0.4531, 0.2813, 0.1719, 0.1016,
    0.0703, 0.0625, 0.0547,
];
const GHIA_U_100: [f64; 15] = [
    0.84123, 0.78871, 0.73722, 0.68717, 0.23151, 0.00332, -0.13641, -0.20581, -0.21090, -0.15662,
    -0.10150, -0.06434, -0.04775, -0.04192, -0.03717,
];
const GHIA_U_1000: [f64; 15] = [
    0.65928, 0.57492, 0.51117, 0.46604, 0.33304, 0.18719, 0.05702, -0.06080, -0.10648, -0.27805,
    -0.38289, -0.29730, -0.22220, -0.20196, -0.18109,
];
const GHIA_X: [f64; 15] = [
    0.9688, 0.9609, 0.9531, 0.9453, 0.9063, 0.8594, 0.8047, 0.5, 0.2344, 0.2266, 0.1563, 0.0938,
    0.0781, 0.0703, 0.0625,
];
const GHIA_V_100: [f64; 15] = [
    -0.05906, -0.07391, -0.08864, -0.10313, -0.16914, -0.22445, -0.24533, 0.05454, 0.17527,
    0.17507, 0.16077, 0.12317, 0.10890, 0.10091, 0.09233,
];
const GHIA_V_1000: [f64; 15] = [
    -0.21388, -0.27669, -0.33714, -0.39188, -0.51550, -0.42665, -0.31966, 0.02526, 0.32235,
    0.33075, 0.37095, 0.32627, 0.30353, 0.29012, 0.27485,
];

fn cavity_toml(reynolds: f64, size: f64, continuation: usize) -> String {
    let model = format!(
        "[model]\nequations = \"navier-stokes\"\n[model.nonlinear]\ncontinuation_steps = {continuation}\n"
    );
    unit_cavity_toml("validation-cavity", 1.0 / reynolds, size, &model)
}

/// The lid-driven unit square (lid `u = (1, 0)` on top, no-slip walls, unit reference
/// scales), mesh size `size` graded to `size / 8` at both lid corners, followed by `rest`
/// (further `[[mesh.grading]]` tables and the `[model]` section).
pub(super) fn unit_cavity_toml(name: &str, viscosity: f64, size: f64, rest: &str) -> String {
    format!(
        r#"name = "{name}"
[fluid]
density = 1.0
kinematic_viscosity = {viscosity}
reference_velocity = 1.0
reference_length = 1.0
[domain.outer]
rectangle = [0.0, 0.0, 1.0, 1.0]
sides = {{ bottom = "walls", right = "walls", top = "lid", left = "walls" }}
[conditions.lid]
kind = "velocity"
ux = 1
uy = 0
[conditions.walls]
kind = "no-slip"
[mesh]
size = {size}
max_triangles = 10000000
[[mesh.grading]]
near = [0.0, 1.0]
h_min = {h_lid}
[[mesh.grading]]
near = [1.0, 1.0]
h_min = {h_lid}
{rest}"#,
        h_lid = size / 8.0,
    )
}

fn cavity(reynolds: f64, level: Level) -> Result<Vec<ValidationRow>, ValidationError> {
    let name = if reynolds < 500.0 { "cavity-100" } else { "cavity-1000" };
    let size = match level {
        Level::Full => 1.0 / 64.0,
        Level::Quick => 1.0 / 24.0,
    };
    let continuation = if reynolds < 500.0 { 0 } else { 3 };
    let case = Case::parse(&cavity_toml(reynolds, size, continuation), &origin(name))?;
    let (mesh, _) = generate(&case.domain, &case.mesh)?;
    let newton = NewtonParams::from_controls(&case.model.nonlinear);
    let (field, _) = solve_steady_navier_stokes(
        &mesh,
        &StokesProblem::from_case(&case),
        &SolverParams::default(),
        &newton,
    )?;
    let locator = PointLocator::new(&mesh)?;
    let deviation = |points: Vec<[f64; 2]>, component: usize, table: &[f64; 15]| {
        let values = locator.probe(&field, &points)?;
        let mut worst: f64 = 0.0;
        for (v, reference) in values.iter().zip(table) {
            let v = v.as_ref().ok_or(ValidationError::Failed {
                case: name.into(),
                what: "a Ghia point lies outside the mesh".into(),
            })?;
            worst = worst.max((v.velocity[component] - reference).abs());
        }
        Ok::<f64, ValidationError>(worst)
    };
    let (u_table, v_table) =
        if reynolds < 500.0 { (&GHIA_U_100, &GHIA_V_100) } else { (&GHIA_U_1000, &GHIA_V_1000) };
    let du = deviation(GHIA_Y.iter().map(|&y| [0.5, y]).collect(), 0, u_table)?;
    let dv = deviation(GHIA_X.iter().map(|&x| [x, 0.5]).collect(), 1, v_table)?;
    // Ghia's values are accurate to about 1e-3 to 1e-2 (benchmarks.md §3.1); at Re = 1000
    // accurate modern solutions differ from them by about 2 %. Bands: 0.01 (Re = 100) and 0.02
    // (Re = 1000) absolute, doubled at the quick level.
    let band =
        if reynolds < 500.0 { 0.01 } else { 0.02 } * if level == Level::Full { 1.0 } else { 2.0 };
    let mut rows = vec![
        ValidationRow::new(
            name,
            "max |u − u_Ghia| on x = 0.5 (15 points)",
            du,
            0.0,
            Tolerance::Absolute(band),
            GHIA,
        ),
        ValidationRow::new(
            name,
            "max |v − v_Ghia| on y = 0.5 (15 points)",
            dv,
            0.0,
            Tolerance::Absolute(band),
            GHIA,
        ),
    ];
    if reynolds >= 500.0 {
        let psi = post::stream_function(&mesh, &field)?;
        let psi_min = psi.iter().copied().fold(f64::INFINITY, f64::min);
        let tolerance = if level == Level::Full { 0.01 } else { 0.05 };
        rows.push(ValidationRow::new(
            name,
            "primary vortex ψ_min",
            psi_min,
            -0.1189366,
            Tolerance::Relative(tolerance),
            BOTELLA_PEYRET,
        ));
    }
    Ok(rows)
}

// ---------------------------------------------------------------------------------------
// L-shaped domain with Verfürth's exact singular Stokes solution (R. Verfürth, A Review of A
// Posteriori Error Estimation and Adaptive Mesh-Refinement Techniques, Wiley–Teubner 1996,
// from memory; benchmarks.md §6.4). Uniform refinement: velocity H¹ rate λ₁ = 0.5444837 in h
// (Dauge 1989); graded meshes: the optimal rate 1 in N (benchmarks.md §7.3).

/// The exact solution as case-file expressions (polar angle in [0, 2π) from `atan2`).
fn verfurth_expressions(alpha: f64) -> [String; 3] {
    let omega = 1.5 * std::f64::consts::PI;
    let (c, p, m) = ((alpha * omega).cos(), 1.0 + alpha, 1.0 - alpha);
    // Every number in parentheses: exmex does not accept `a - -b`.
    let n = |v: f64| format!("({v:?})");
    let th = "((y atan2 x) + PI * (1 - signum((y atan2 x) + 1e-300)))";
    let (sp, cp) = (format!("sin({} * {th})", n(p)), format!("cos({} * {th})", n(p)));
    let (sm, cm) = (format!("sin({} * {th})", n(m)), format!("cos({} * {th})", n(m)));
    let psi = format!("({} * {sp} - {cp} - {} * {sm} + {cm})", n(c / p), n(c / m));
    let d1 = format!("({} * {cp} + {} * {sp} - {} * {cm} - {} * {sm})", n(c), n(p), n(c), n(m));
    let d3 = format!(
        "({} * {cp} + {} * {sp} + {} * {cm} + {} * {sm})",
        n(-p * p * c),
        n(-p.powi(3)),
        n(m * m * c),
        n(m.powi(3))
    );
    let ra = format!("((x^2 + y^2)^{})", n(alpha / 2.0));
    let u = format!("{ra} * ({} * sin({th}) * {psi} + cos({th}) * {d1})", n(p));
    let v = format!("{ra} * (sin({th}) * {d1} - {} * cos({th}) * {psi})", n(p));
    let pressure = format!(
        "{} * ((x^2 + y^2)^{}) * ({} * {d1} + {d3})",
        n(-1.0 / m),
        n((alpha - 1.0) / 2.0),
        n(p * p)
    );
    [u, v, pressure]
}

/// The exponent α of the 270° no-slip corner: the root of `sin(αω) = α` near 0.5445,
/// `ω = 3π/2` (Dauge 1989; benchmarks.md §2.2), by Newton's method.
pub fn dauge_exponent() -> f64 {
    let omega = 1.5 * std::f64::consts::PI;
    let mut a: f64 = 0.54;
    for _ in 0..50 {
        let step = ((a * omega).sin() - a) / (omega * (a * omega).cos() - 1.0);
        a -= step;
        if step.abs() < 1e-16 {
            break;
        }
    }
    a
}

/// The case text of the L-shaped domain `(−1, 1)² \ [0, 1) × (−1, 0]` with Verfürth's exact
/// singular Stokes solution as Dirichlet data and `[exact]` (ν = 1), mesh size `size`.
pub fn l_shape_case_toml(size: f64) -> String {
    let [u, v, p] = verfurth_expressions(dauge_exponent());
    format!(
        r#"name = "l-shape"
[fluid]
density = 1.0
kinematic_viscosity = 1.0
reference_velocity = 1.0
reference_length = 1.0
[domain.outer]
points = [[-1.0, -1.0], [0.0, -1.0], [0.0, 0.0], [1.0, 0.0], [1.0, 1.0], [-1.0, 1.0]]
edge_parts = ["wall", "wall", "wall", "wall", "wall", "wall"]
[conditions.wall]
kind = "velocity"
ux = "{u}"
uy = "{v}"
[exact]
u = "{u}"
v = "{v}"
p = "{p}"
[mesh]
size = {size}
[model]
equations = "stokes"
"#
    )
}

fn l_shape(level: Level) -> Result<Vec<ValidationRow>, ValidationError> {
    let name = "l-shape";
    let (size, levels, adaptive_levels) = match level {
        Level::Full => (0.125, 4, 34),
        Level::Quick => (0.25, 3, 26),
    };
    let case = Case::parse(&l_shape_case_toml(size), &origin(name))?;
    // The finest graded level, kept for the local exponent fit.
    let mut finest: Option<(Mesh, FlowField)> = None;
    let mut run = |refinement, levels| -> Result<crate::study::StudyReport, ValidationError> {
        let (mesh, _) = generate(&case.domain, &case.mesh)?;
        let params = crate::study::StudyParams::new(levels, refinement, 4_000_000);
        let mut keep = |v: &crate::study::LevelView| {
            if refinement == crate::study::Refinement::Graded && v.level + 1 == levels {
                finest = Some((v.mesh.clone(), v.field.clone()));
            }
        };
        crate::study::run_study(&case, mesh, &params, &mut keep)
            .map_err(|e| ValidationError::Failed { case: name.into(), what: e.to_string() })
    };
    let uniform = run(crate::study::Refinement::Uniform, levels)?;
    let graded = run(crate::study::Refinement::Graded, levels)?;
    let adaptive = run(crate::study::Refinement::Adaptive, adaptive_levels)?;
    let fitted = re_entrant_corner_fit(&case, name, finest)?;
    let last = |r: &crate::study::StudyReport| r.rates.last().copied();
    let failed = || ValidationError::Failed { case: name.into(), what: "no rates".into() };
    let (u, g) = (last(&uniform).ok_or_else(failed)?, last(&graded).ok_or_else(failed)?);
    let adaptive_rate = adaptive.adaptive_rate_in_n.ok_or_else(failed)?;
    // Over the levels the rate is fitted on (the second half; the first ones only resolve
    // the corner of a coarse mesh and are pre-asymptotic).
    let half = adaptive.levels.len() / 2;
    let efficiency: Vec<f64> =
        adaptive.levels[half..].iter().filter_map(|l| l.efficiency_index).collect();
    let spread = efficiency.iter().copied().fold(0.0, f64::max)
        / efficiency.iter().copied().fold(f64::INFINITY, f64::min);
    // Issue tolerances: uniform H¹ rate within 0.05 of λ₁ in h; adaptive rate in N at least
    // 0.9 of the optimal 1 (the same bound is used for graded meshes); efficiency index
    // bounded across levels (spread max/min ≤ 1.5 over the fitted levels: common practice,
    // no source).
    Ok(vec![
        ValidationRow::new(
            name,
            "uniform: velocity H1 rate in h",
            u.in_h.velocity_h1,
            dauge_exponent(),
            Tolerance::Absolute(0.05),
            VERFURTH,
        ),
        ValidationRow::new(
            name,
            "graded: velocity H1 rate in N",
            g.in_n.velocity_h1,
            1.0,
            Tolerance::AtLeast(0.9),
            VERFURTH,
        ),
        ValidationRow::new(
            name,
            "adaptive: velocity H1 rate in N",
            adaptive_rate,
            1.0,
            Tolerance::AtLeast(0.9),
            VERFURTH,
        ),
        ValidationRow::new(
            name,
            "graded: fitted exponent at the 270° corner",
            fitted,
            dauge_exponent(),
            Tolerance::Absolute(0.05),
            VERFURTH,
        ),
        ValidationRow::new(
            name,
            "adaptive: efficiency index max/min",
            spread,
            1.0,
            Tolerance::AtMost(1.5),
            VERFURTH,
        ),
    ])
}

/// The local exponent fitted at the re-entrant corner `(0, 0)` from the gradient energy in
/// discs ([`crate::corners::measure_singular_corners`]) on the given level.
fn re_entrant_corner_fit(
    case: &Case,
    name: &str,
    level: Option<(Mesh, FlowField)>,
) -> Result<f64, ValidationError> {
    let failed = |what: &str| ValidationError::Failed { case: name.into(), what: what.into() };
    let (mesh, field) = level.ok_or_else(|| failed("no graded level was solved"))?;
    let reports = super::eddies::corner_reports(case, name)?;
    let measured = crate::corners::measure_singular_corners(&case.domain, &mesh, &field, &reports);
    let corner = measured
        .iter()
        .find(|m| m.location[0].abs() < 1e-12 && m.location[1].abs() < 1e-12)
        .ok_or_else(|| failed("the re-entrant corner was not classified singular"))?;
    corner.fit.as_ref().map(|f| f.lambda).map_err(|e| failed(e))
}

// ---------------------------------------------------------------------------------------
// The default sharp-edged profile (`examples/profile-channel.toml`, Stokes): the exponent
// fitted at its trailing edge against the wedge prediction for its fluid angle (Dauge 1989,
// benchmarks.md §2.2: λ₁ = 0.500241 at 343.46°; the issue's tolerance 0.05).

fn profile_trailing_edge(level: Level) -> Result<Vec<ValidationRow>, ValidationError> {
    let name = "profile-trailing-edge";
    let case = Case::default_case();
    let mut controls = case.mesh.clone();
    if level == Level::Quick {
        controls.size *= 1.5;
    }
    let (mesh, _) = generate(&case.domain, &controls)?;
    let (field, _) = crate::solver::solve_stokes(
        &mesh,
        &StokesProblem::from_case(&case),
        &SolverParams::default(),
    )?;
    let reports = super::eddies::corner_reports(&case, name)?;
    let measured = crate::corners::measure_singular_corners(&case.domain, &mesh, &field, &reports);
    // The trailing edge is the corner with the largest fluid angle.
    let te = measured
        .iter()
        .max_by(|a, b| {
            let angle = |m: &crate::corners::MeasuredExponent| reports[m.corner].angle_deg;
            angle(a).total_cmp(&angle(b))
        })
        .ok_or_else(|| ValidationError::Failed {
            case: name.into(),
            what: "no singular corner".into(),
        })?;
    let fitted = te
        .fit
        .as_ref()
        .map_err(|e| ValidationError::Failed { case: name.into(), what: e.clone() })?
        .lambda;
    Ok(vec![ValidationRow::new(
        name,
        "fitted trailing-edge exponent",
        fitted,
        te.predicted,
        Tolerance::Absolute(0.05),
        "Dauge (1989) wedge exponent for the trailing-edge angle (benchmarks.md §2.2)",
    )])
}
