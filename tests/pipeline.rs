//! The whole pipeline on the Delaunay mesher: case text -> domain -> mesh -> Stokes solve ->
//! forces, checked against closed-form values.

use std::path::Path;

use cornerflow::case::Case;
use cornerflow::mesh::generate;
use cornerflow::post::{self, FluidProperties, VolumeForceTerms};
use cornerflow::solver::{SolverParams, StokesProblem, solve_stokes};

fn solve(case: &Case, mesh: &cornerflow::mesh::Mesh) -> cornerflow::fem::FlowField {
    let problem = StokesProblem {
        viscosity: case.fluid.kinematic_viscosity,
        conditions: &case.conditions,
        body_force: None,
        viscous_form: case.model.viscous_form,
        time: 0.0,
    };
    solve_stokes(mesh, &problem, &SolverParams::default()).unwrap().0
}

const CHANNEL: &str = r#"name = "poiseuille"
[fluid]
density = 1.0
kinematic_viscosity = 0.001
reference_velocity = 0.2
reference_length = 0.41
[domain.outer]
rectangle = [0.0, 0.0, 2.2, 0.41]
sides = { bottom = "walls", right = "outlet", top = "walls", left = "inlet" }
[conditions.inlet]
kind = "velocity"
ux = "4 * 0.3 * y * (0.41 - y) / 0.41^2"
uy = 0
[conditions.walls]
kind = "no-slip"
[conditions.outlet]
kind = "outflow"
[mesh]
size = 0.05
"#;

#[test]
fn poiseuille_flow_on_a_delaunay_mesh_matches_the_exact_solution_to_round_off() {
    // Plane Poiseuille flow u = 4U y(H − y)/H², p = p0 − 8νU x/H² lies in the Taylor–Hood
    // space and satisfies the do-nothing outflow condition exactly (benchmarks.md §6.2;
    // any fluid-mechanics handbook), so the discrete solution is exact up to round-off.
    let case = Case::parse(CHANNEL, Path::new("inline.toml")).unwrap();
    let (mesh, _) = generate(&case.domain, &case.mesh).unwrap();
    mesh.check_invariants().unwrap();
    let field = solve(&case, &mesh);
    let (u_max, h, nu) = (0.3, 0.41, 0.001);
    let mut max_err: f64 = 0.0;
    for (node, p) in mesh.nodes.iter().enumerate() {
        let exact = 4.0 * u_max * p[1] * (h - p[1]) / (h * h);
        max_err =
            max_err.max((field.velocity[node][0] - exact).abs()).max(field.velocity[node][1].abs());
    }
    assert!(max_err <= 1e-10 * u_max, "max velocity error {max_err:e}");
    // Pressure drop 8νU L/H² over the channel length (the outlet fixes p = 0 there).
    let slope = -8.0 * nu * u_max / (h * h);
    let p_err = (0..mesh.n_vertices)
        .map(|v| (field.pressure[v] - slope * (mesh.nodes[v][0] - 2.2)).abs())
        .fold(0.0, f64::max);
    assert!(p_err <= 1e-10 * (slope * 2.2).abs(), "max pressure error {p_err:e}");
    // Wall force per unit depth: shear stress 4μU/H times the length, on both walls together.
    let fluid = FluidProperties { density: 1.0, viscosity: nu, form: case.model.viscous_form };
    let walls = case.domain.part_id("walls").unwrap();
    let exact = 2.0 * 4.0 * nu * u_max / h * 2.2;
    let surface = post::surface_force(&mesh, &field, &fluid, walls).unwrap();
    let volume =
        post::volume_force(&mesh, &field, &fluid, walls, &VolumeForceTerms::default()).unwrap();
    assert!((surface.total[0] - exact).abs() < 1e-9 * exact, "{:?} vs {exact}", surface.total);
    assert!((volume.total[0] - exact).abs() < 1e-9 * exact, "{:?} vs {exact}", volume.total);
}

const SQUARE_BODY: &str = r#"name = "square"
[fluid]
density = 1.0
kinematic_viscosity = 1.0
reference_velocity = 1.0
reference_length = 0.5
[domain.outer]
rectangle = [0.0, 0.0, 4.0, 2.0]
sides = { bottom = "walls", right = "outlet", top = "walls", left = "inlet" }
[[domain.bodies]]
name = "square"
points = [[1.25, 0.75], [1.75, 0.75], [1.75, 1.25], [1.25, 1.25]]
[conditions.inlet]
kind = "velocity"
ux = "y * (2 - y)"
uy = 0
[conditions.walls]
kind = "no-slip"
[conditions.outlet]
kind = "outflow"
[conditions.square]
kind = "no-slip"
[mesh]
size = 0.2
"#;

#[test]
fn surface_and_volume_forces_on_a_body_approach_each_other_under_refinement() {
    // The two force forms are different functionals of the discrete solution; both converge to
    // the same force (John & Matthies 2001), the volume form faster. At the square's 270°
    // corners the traction is singular (λ₁ = 0.5445, Dauge 1989), so the surface form converges
    // only like h^λ₁: the gap must shrink by at least a factor 1.3 per uniform refinement
    // (2^0.5445 ≈ 1.46, less a margin for pre-asymptotic levels).
    let case = Case::parse(SQUARE_BODY, Path::new("inline.toml")).unwrap();
    let (mut mesh, _) = generate(&case.domain, &case.mesh).unwrap();
    let square = case.domain.part_id("square").unwrap();
    let fluid = FluidProperties { density: 1.0, viscosity: 1.0, form: case.model.viscous_form };
    let mut gaps = Vec::new();
    for level in 0..3 {
        if level > 0 {
            mesh = mesh.refine_uniform(false);
        }
        let field = solve(&case, &mesh);
        let surface = post::surface_force(&mesh, &field, &fluid, square).unwrap();
        let volume =
            post::volume_force(&mesh, &field, &fluid, square, &VolumeForceTerms::default())
                .unwrap();
        let gap = (surface.total[0] - volume.total[0]).abs() / volume.total[0].abs();
        eprintln!(
            "level {level}: {} cells, drag surface {:.6} volume {:.6}, gap {gap:.2e}",
            mesh.n_cells(),
            surface.total[0],
            volume.total[0]
        );
        gaps.push(gap);
    }
    for w in gaps.windows(2) {
        assert!(w[1] < w[0] / 1.3, "gap did not shrink: {gaps:?}");
    }
}

#[test]
fn fitted_exponent_at_the_re_entrant_step_corner_matches_the_prediction() {
    // Stokes flow over the backward-facing step example: the 270° no-slip corner has
    // λ₁ = 0.5444837368 (Dauge 1989; benchmarks.md §2.2). The exponent fitted from the gradient
    // energy in discs around the corner must lie within 0.05 of it (the corner issue's bound).
    use cornerflow::corners::{
        AnalysisParams, Classification, measure_singular_corners, try_analyse_corners,
    };
    let path = crate::util::repo_root().join("examples/backward-step.toml");
    let text = std::fs::read_to_string(&path).unwrap();
    assert!(text.contains("equations = \"navier-stokes\""), "example changed: update this test");
    let case = Case::parse(
        &text.replace("equations = \"navier-stokes\"", "equations = \"stokes\""),
        &path,
    )
    .unwrap();
    let analysis = try_analyse_corners(
        &case.domain,
        &case.conditions,
        case.model.viscous_form,
        &AnalysisParams::default(),
    )
    .unwrap();
    let singular: Vec<_> = analysis
        .reports
        .iter()
        .filter(|r| r.classification == Classification::SingularGradient)
        .collect();
    assert_eq!(singular.len(), 1, "exactly the step corner is singular");
    let (mesh, _) = generate(&case.domain, &case.mesh).unwrap();
    let field = solve(&case, &mesh);
    let measured = measure_singular_corners(&case.domain, &mesh, &field, &analysis.reports);
    let fit = measured[0].fit.as_ref().unwrap();
    assert!((measured[0].predicted - 0.5444837368).abs() < 1e-8);
    assert!((fit.lambda - 0.5444837368).abs() < 0.05, "fitted {fit:?}");
}
