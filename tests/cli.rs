//! The command-line tool end to end: every example meshes into a `.vtu` that an independent
//! reader (meshio) loads with all arrays intact and whose area equals the domain's; the
//! default run writes its results; bad input exits with code 2.

use std::path::Path;

use cornerflow::case::Case;

use crate::util::{floats, read_vtu_with_meshio, repo_root, run_cli};

/// Area of the straight-sided triangles of a `triangle6` block read back by meshio.
fn area_from_reader(mesh: &serde_json::Value) -> (f64, usize) {
    let points: Vec<Vec<f64>> = serde_json::from_value(mesh["points"].clone()).unwrap();
    let block =
        mesh["cells"].as_array().unwrap().iter().find(|b| b["type"] == "triangle6").unwrap();
    let cells: Vec<Vec<usize>> = serde_json::from_value(block["data"].clone()).unwrap();
    let area = cells
        .iter()
        .map(|c| {
            let (a, b, d) = (&points[c[0]], &points[c[1]], &points[c[2]]);
            0.5 * ((b[0] - a[0]) * (d[1] - a[1]) - (d[0] - a[0]) * (b[1] - a[1]))
        })
        .sum();
    (area, cells.len())
}

fn mesh_example(name: &str) {
    let case_path = repo_root().join("examples").join(name);
    let dir = tempfile::tempdir().unwrap();
    let out = run_cli(dir.path(), &["mesh", case_path.to_str().unwrap(), "-o", "out"]);
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(out.status.success(), "{name}: {stderr}");
    let stdout = String::from_utf8_lossy(&out.stdout);
    assert!(
        stdout.contains("triangles") && stdout.contains("min"),
        "{name}: summary missing: {stdout}"
    );

    let mesh = read_vtu_with_meshio(&dir.path().join("out/mesh.vtu"));
    let (area, n_cells) = area_from_reader(&mesh);
    // The domain area comes from the case's polygons (shoelace formula), independent of the
    // mesher; the mesh must cover it to round-off (relative 1e-12, the issue's acceptance).
    let domain_area = Case::load(&case_path).unwrap().domain.area();
    assert!((area - domain_area).abs() <= 1e-12 * domain_area, "{name}: {area} vs {domain_area}");
    let quality = floats(&mesh["cell_data"]["quality_min_angle_deg"][0]);
    assert_eq!(quality.len(), n_cells);
    assert!(quality.iter().all(|q| *q > 0.0 && *q <= 60.0 + 1e-9), "{name}: quality out of range");
    let parts = floats(&mesh["cell_data"]["boundary_part"][1]);
    assert!(
        !parts.is_empty() && parts.iter().all(|p| *p >= 0.0),
        "{name}: boundary edges lack parts"
    );
    let node_parts = floats(&mesh["point_data"]["boundary_part"]);
    assert_eq!(node_parts.len(), mesh["points"].as_array().unwrap().len());
}

#[test]
fn every_example_meshes_into_a_vtu_that_meshio_reads_with_the_domain_area() {
    let dir = repo_root().join("examples");
    let mut names: Vec<String> = std::fs::read_dir(&dir)
        .unwrap()
        .filter_map(|e| e.ok()?.file_name().into_string().ok())
        .filter(|n| n.ends_with(".toml"))
        .collect();
    names.sort();
    assert!(names.len() >= 5, "examples missing: {names:?}");
    for name in &names {
        mesh_example(name);
    }
}

#[test]
fn run_without_a_case_solves_the_default_case_and_writes_every_result() {
    let dir = tempfile::tempdir().unwrap();
    let out = run_cli(dir.path(), &["run", "-o", "out"]);
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(out.status.success(), "{stderr}");
    assert!(
        stderr.contains("[solve]") && stderr.contains("[mesh]"),
        "stage lines missing: {stderr}"
    );
    let root = dir.path().join("out");
    let summary: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(root.join("summary.json")).unwrap()).unwrap();
    let residual = summary["solver"]["relative_residual"].as_f64().unwrap();
    assert!(residual < 1e-10, "residual {residual}");
    let force = &summary["forces"][0];
    let (surface, volume) = (
        force["surface"]["coefficients"]["drag"].as_f64().unwrap(),
        force["volume"]["coefficients"]["drag"].as_f64().unwrap(),
    );
    // Two independent force formulas on the same solution (John & Matthies 2001 recommend the
    // volume form); on the default mesh they agree to within 2 % (common practice, no source).
    assert!(surface > 0.0 && (surface - volume).abs() < 0.02 * volume, "{surface} vs {volume}");
    assert!(
        summary["corners"]
            .as_array()
            .unwrap()
            .iter()
            .any(|c| c["angle_deg"].as_f64().unwrap() > 340.0)
    );
    // The exponent fitted at the sharp trailing edge (fluid angle 343.5°) lies within 0.05 of
    // the predicted λ₁ = 0.500241 (benchmarks.md §2.2, computed from the wedge equation of
    // Dauge 1989); measured 0.547 on this mesh, closest to the second exponent 0.5503 (ψ-odd
    // family), which the run reports as "the leading mode is weak here".
    let te = &summary["measured_exponents"][0];
    let (fitted, predicted) = (te["fitted"].as_f64().unwrap(), te["predicted"].as_f64().unwrap());
    assert!((predicted - 0.500241).abs() < 1e-5, "predicted {predicted}");
    assert!((fitted - predicted).abs() < 0.05, "fitted {fitted} against {predicted}");
    let closest = te["closest_predicted"].as_f64().unwrap();
    assert!((fitted - closest).abs() < 0.01, "fitted {fitted}, closest predicted {closest}");

    let solution = read_vtu_with_meshio(&root.join("solution.vtu"));
    for name in ["velocity", "pressure", "speed", "vorticity", "stream_function", "boundary_part"] {
        assert!(solution["point_data"].get(name).is_some(), "solution.vtu lacks {name}");
    }
    assert!(solution["cell_data"].get("divergence_error").is_some());
    let wall = std::fs::read_to_string(root.join("wall-wing.csv")).unwrap();
    assert!(wall.starts_with("s,x,y,cp,wall_shear\n") && wall.lines().count() > 100);
}

#[test]
fn adaptive_study_writes_tables_plot_and_level_files_with_estimator_and_local_rates() {
    // The Stokes cavity (lid corners: discontinuous data, the strongest singularities there).
    let dir = tempfile::tempdir().unwrap();
    let text = std::fs::read_to_string(repo_root().join("examples/cavity.toml")).unwrap();
    write_case(dir.path(), &text.replace("size = 0.04", "size = 0.1"));
    let args = ["study", "case.toml", "--levels", "4", "--refine", "adaptive", "-o", "out"];
    let out = run_cli(dir.path(), &args);
    let stdout = String::from_utf8_lossy(&out.stdout);
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    assert!(stdout.contains("Besov-type index") && stdout.contains("estimator"), "{stdout}");
    let root = dir.path().join("out");
    let csv = std::fs::read_to_string(root.join("study.csv")).unwrap();
    assert!(csv.lines().next().unwrap().ends_with("estimator,efficiency_index"), "{csv}");
    assert_eq!(csv.lines().count(), 5);
    let report: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(root.join("study.json")).unwrap()).unwrap();
    assert_eq!(report["refinement"], "adaptive");
    let level0 = read_vtu_with_meshio(&root.join("level-0.vtu"));
    assert!(level0["cell_data"].get("error_estimator").is_some());
    assert!(level0["cell_data"].get("local_rate").is_none(), "level 0 has no parent");
    let level3 = read_vtu_with_meshio(&root.join("level-3.vtu"));
    for name in ["error_estimator", "local_rate", "divergence_error"] {
        assert!(level3["cell_data"].get(name).is_some(), "level-3.vtu lacks {name}");
    }
    // The lid corners (velocity jump) attract the marking: the smallest triangle shrinks and
    // sits at a lid corner.
    let smallest = |v: &serde_json::Value| {
        let points = v["points"].as_array().unwrap();
        let p = |n: &serde_json::Value| {
            let q = &points[n.as_u64().unwrap() as usize];
            [q[0].as_f64().unwrap(), q[1].as_f64().unwrap()]
        };
        let cells = v["cells"][0]["data"].as_array().unwrap();
        cells
            .iter()
            .map(|c| {
                let (a, b, d) = (p(&c[0]), p(&c[1]), p(&c[2]));
                let area = 0.5 * ((b[0] - a[0]) * (d[1] - a[1]) - (d[0] - a[0]) * (b[1] - a[1]));
                (area, [(a[0] + b[0] + d[0]) / 3.0, (a[1] + b[1] + d[1]) / 3.0])
            })
            .min_by(|x, y| x.0.total_cmp(&y.0))
            .unwrap()
    };
    let ((a0, _), (a3, at)) = (smallest(&level0), smallest(&level3));
    assert!(a3 < a0 / 4.0, "smallest triangle {a0} -> {a3}");
    let corner_distance = (at[0].min(1.0 - at[0])).hypot(1.0 - at[1]);
    assert!(corner_distance < 0.01, "smallest triangle at {at:?}");
    assert!(std::fs::read_to_string(root.join("study-errors.svg")).unwrap().contains("<svg"));
    let bad = run_cli(
        dir.path(),
        &["study", "case.toml", "--refine", "adaptive", "--marking-fraction", "1.5"],
    );
    assert_eq!(bad.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&bad.stderr).contains("marking fraction"));
}

#[test]
fn check_with_an_adaptive_study_stores_and_rechecks_the_besov_index() {
    let dir = tempfile::tempdir().unwrap();
    let text = std::fs::read_to_string(repo_root().join("examples/cavity.toml")).unwrap();
    write_case(dir.path(), &text.replace("size = 0.04", "size = 0.1"));
    let args = ["check", "case.toml", "--baseline", "b.json", "--study-levels", "3"];
    let update =
        run_cli(dir.path(), &[&args[..], &["--study-refine", "adaptive", "--update"]].concat());
    assert!(update.status.success(), "{}", String::from_utf8_lossy(&update.stderr));
    let names = baseline_names(&dir.path().join("b.json"));
    for name in ["study.besov_index", "study.adaptive_rate_in_n", "study.rate.u_h1"] {
        assert!(names.iter().any(|n| n == name), "{name} missing from {names:?}");
    }
    // The same run reproduces the baseline (deterministic marking and bisection).
    let same = run_cli(dir.path(), &[&args[..], &["--study-refine", "adaptive"]].concat());
    assert!(same.status.success(), "{}", String::from_utf8_lossy(&same.stdout));
}

/// The quantity names stored in a `check` baseline file.
fn baseline_names(path: &Path) -> Vec<String> {
    let base: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(path).unwrap()).unwrap();
    let quantities = base["quantities"].as_array().unwrap();
    quantities.iter().map(|q| q["name"].as_str().unwrap().to_string()).collect()
}

fn write_case(dir: &Path, text: &str) {
    std::fs::write(dir.join("case.toml"), text).unwrap();
}

#[test]
fn a_mesh_larger_than_the_cap_is_refused_with_the_estimate_unless_forced() {
    let dir = tempfile::tempdir().unwrap();
    let text = std::fs::read_to_string(repo_root().join("examples/cavity.toml")).unwrap();
    write_case(dir.path(), &text.replace("size = 0.04", "size = 0.04\nmax_triangles = 500"));
    let out = run_cli(dir.path(), &["mesh", "case.toml", "-o", "out"]);
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{stderr}");
    assert!(
        stderr.contains("triangles") && stderr.contains("500") && stderr.contains("--force"),
        "{stderr}"
    );
    let forced = run_cli(dir.path(), &["mesh", "case.toml", "-o", "out", "--force"]);
    assert!(forced.status.success(), "{}", String::from_utf8_lossy(&forced.stderr));
}

#[test]
fn a_solve_that_cannot_fit_in_memory_is_refused_before_meshing() {
    // 0.0002 on the unit square is about 5.8e7 triangles: tens of terabytes for the direct
    // solve by the measured memory law (src/cli/mesh.rs), more than any machine here has.
    let dir = tempfile::tempdir().unwrap();
    let text = std::fs::read_to_string(repo_root().join("examples/cavity.toml")).unwrap();
    write_case(
        dir.path(),
        &text.replace("size = 0.04", "size = 0.0002\nmax_triangles = 1000000000"),
    );
    let out = run_cli(dir.path(), &["run", "case.toml", "-o", "out"]);
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{stderr}");
    assert!(stderr.contains("GB") && stderr.contains("--force"), "{stderr}");
    assert!(!dir.path().join("out/mesh.vtu").exists(), "nothing may be meshed");
}

#[test]
fn run_reports_moffatt_eddies_in_the_bottom_corners_of_a_graded_stokes_cavity() {
    // examples/cavity-eddies.toml on a coarser grading (about 6 elements across every r down
    // to 1e-3): the first two eddies of each bottom corner are resolved.
    let dir = tempfile::tempdir().unwrap();
    let text = std::fs::read_to_string(repo_root().join("examples/cavity-eddies.toml")).unwrap();
    let text = text.replace("size = 0.04", "size = 0.05").replace("growth = 0.1", "growth = 0.15");
    write_case(dir.path(), &text);
    let out = run_cli(dir.path(), &["run", "case.toml", "-o", "out"]);
    let stdout = String::from_utf8_lossy(&out.stdout);
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    assert!(stdout.contains("Moffatt eddies") && stdout.contains("size ratios"), "{stdout}");
    let summary: serde_json::Value = serde_json::from_str(
        &std::fs::read_to_string(dir.path().join("out/summary.json")).unwrap(),
    )
    .unwrap();
    let eddies = summary["eddies"].as_array().unwrap();
    // Two bottom corners; the lid corners (discontinuous data) are not measured.
    assert_eq!(eddies.len(), 2, "{eddies:?}");
    for corner in eddies {
        let measured = corner["size_ratios"][0].as_f64().unwrap();
        let predicted = corner["predicted"]["size_ratio"].as_f64().unwrap();
        // The issue's 10 % on e^(π/q) of the 90° root (Moffatt 1964; benchmarks.md §2.3).
        assert!((measured / predicted - 1.0).abs() < 0.1, "{measured} vs {predicted}");
    }
}

#[test]
fn missing_case_file_and_bad_options_are_bad_input() {
    let dir = tempfile::tempdir().unwrap();
    let out = run_cli(dir.path(), &["mesh", "nowhere.toml"]);
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{stderr}");
    assert!(stderr.contains("nowhere.toml"), "{stderr}");
    let out = run_cli(dir.path(), &["mesh"]);
    assert_eq!(out.status.code(), Some(2), "clap usage errors exit with 2");
}

#[test]
fn corners_command_reports_the_step_corner_exponent() {
    let dir = tempfile::tempdir().unwrap();
    let case = repo_root().join("examples/backward-step.toml");
    let out = run_cli(dir.path(), &["corners", case.to_str().unwrap(), "--json", "c.json"]);
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    // 270° no-slip corner: λ₁ = 0.5444837368 (Dauge 1989; benchmarks.md §2.2).
    assert!(String::from_utf8_lossy(&out.stdout).contains("0.544484"));
    let json: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.path().join("c.json")).unwrap()).unwrap();
    assert!(json.as_array().unwrap().len() >= 6);
}

/// A small time-dependent case: a 16-gon in a short channel with an inflow that grows in time.
const UNSTEADY_CASE: &str = r#"
name = "small-unsteady"
[fluid]
density = 1.0
kinematic_viscosity = 0.01
reference_velocity = 1.0
reference_length = 0.1
[domain.outer]
rectangle = [0.0, 0.0, 1.0, 0.4]
sides = { bottom = "wall", right = "outlet", top = "wall", left = "inlet" }
[[domain.bodies]]
name = "body"
polygon = { center = [0.3, 0.2], radius = 0.05, sides = 16 }
[conditions.inlet]
kind = "velocity"
ux = "4 * sin(t) * y * (0.4 - y) / 0.16"
uy = 0
[conditions.wall]
kind = "no-slip"
[conditions.body]
kind = "no-slip"
[conditions.outlet]
kind = "outflow"
[mesh]
size = 0.05
[model]
equations = "navier-stokes"
[model.time]
dt = 0.01
t_end = 0.05
write_every = 2
[report]
pressure_difference = [[0.2, 0.2], [0.4, 0.2]]
[output]
directory = "out"
"#;

#[test]
fn unsteady_run_writes_a_pvd_series_a_force_history_and_statistics() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("case.toml"), UNSTEADY_CASE).unwrap();
    let out = run_cli(dir.path(), &["run", "case.toml"]);
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let root = dir.path().join("out");
    // Steps 0 (initial), 2, 4 and the final step 5.
    let pvd = std::fs::read_to_string(root.join("solution.pvd")).unwrap();
    for step in ["000000", "000002", "000004", "000005"] {
        let name = format!("fields/solution-{step}.vtu");
        assert!(pvd.contains(&name), "{name} missing from the pvd: {pvd}");
        let mesh = read_vtu_with_meshio(&root.join(&name));
        let n_points = mesh["points"].as_array().unwrap().len();
        assert_eq!(mesh["point_data"]["velocity"].as_array().unwrap().len(), n_points);
    }
    let csv = std::fs::read_to_string(root.join("forces.csv")).unwrap();
    let lines: Vec<&str> = csv.lines().collect();
    assert!(lines[0].starts_with("t,courant,cd_volume_0,cl_volume_0,cd_surface_0,cl_surface_0"));
    assert!(lines[0].ends_with("pressure_difference"));
    assert_eq!(lines.len(), 1 + 6, "header plus states 0..=5: {csv}");
    let last: Vec<f64> = lines[6].split(',').map(|v| v.parse().unwrap()).collect();
    assert!((last[0] - 0.05).abs() < 1e-12);
    // The inflow grows from zero, so the drag at t = 0.05 is positive and finite.
    assert!(last[2] > 0.0 && last[2].is_finite());
    let summary: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(root.join("summary.json")).unwrap()).unwrap();
    assert_eq!(summary["model"], "unsteady-navier-stokes");
    assert_eq!(summary["time_stepping"]["steps"], 5);
    let drag = &summary["statistics"]["forces"][0]["drag_volume"]["whole_run"];
    assert!(drag["max"].as_f64().unwrap() >= drag["mean"].as_f64().unwrap());
    assert!(summary["statistics"]["pressure_difference"]["final"].as_f64().is_some());
}

#[test]
fn steady_navier_stokes_run_reports_its_newton_iterations() {
    let case = repo_root().join("examples/cylinder-benchmark.toml");
    let dir = tempfile::tempdir().unwrap();
    let out = run_cli(dir.path(), &["run", case.to_str().unwrap(), "-o", "out"]);
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let summary: serde_json::Value = serde_json::from_str(
        &std::fs::read_to_string(dir.path().join("out/summary.json")).unwrap(),
    )
    .unwrap();
    assert_eq!(summary["model"], "navier-stokes");
    let iterations = summary["solver"]["iterations"].as_array().unwrap();
    assert!((2..=8).contains(&iterations.len()), "{iterations:?}");
    assert!(summary["solver"]["final_relative_residual"].as_f64().unwrap() <= 1e-10);
    // 2D-1 benchmark at the example's resolution: drag within 0.2 % of 5.57953523384
    // (Schäfer & Turek 1996; reference value of Nabh 1998 / John & Matthies 2001).
    let cd = summary["forces"][0]["volume"]["coefficients"]["drag"].as_f64().unwrap();
    assert!((cd - 5.57953523384).abs() <= 0.002 * 5.57953523384, "c_D = {cd}");
}

#[test]
fn unconverged_newton_exits_with_code_1_and_keeps_the_last_iterate() {
    let text = std::fs::read_to_string(repo_root().join("examples/cylinder-benchmark.toml"))
        .unwrap()
        .replace(
            "viscous_form = \"gradient\"    # the benchmark's do-nothing outflow",
            "viscous_form = \"gradient\"\n[model.nonlinear]\nmax_iterations = 1",
        )
        .replace("size = 0.02", "size = 0.05");
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("case.toml"), &text).unwrap();
    let out = run_cli(dir.path(), &["run", "case.toml", "-o", "out"]);
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(1), "{stderr}");
    assert!(stderr.contains("did not converge") && stderr.contains("solution-unconverged.vtu"));
    let mesh = read_vtu_with_meshio(&dir.path().join("out/solution-unconverged.vtu"));
    assert!(mesh["point_data"]["velocity"].as_array().is_some());
}

#[test]
fn check_writes_a_baseline_passes_against_it_and_fails_on_a_regression() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("case.toml"), UNSTEADY_CASE).unwrap();
    let update =
        run_cli(dir.path(), &["check", "case.toml", "--baseline", "base.json", "--update"]);
    assert!(update.status.success(), "{}", String::from_utf8_lossy(&update.stderr));
    let text = std::fs::read_to_string(dir.path().join("base.json")).unwrap();
    let base: serde_json::Value = serde_json::from_str(&text).unwrap();
    let names = baseline_names(&dir.path().join("base.json"));
    assert!(names.iter().any(|n| n == "force.body.drag_volume_max"), "{names:?}");
    assert!(names.iter().any(|n| n == "pressure_difference_final"), "{names:?}");

    let same = run_cli(dir.path(), &["check", "case.toml", "--baseline", "base.json"]);
    assert!(same.status.success(), "{}", String::from_utf8_lossy(&same.stderr));

    // Shift the stored drag by 1 %: far outside the default 1e-4 relative tolerance.
    let mut shifted = base.clone();
    for q in shifted["quantities"].as_array_mut().unwrap() {
        if q["name"] == "force.body.drag_volume_max" {
            q["value"] = serde_json::json!(q["value"].as_f64().unwrap() * 1.01);
        }
    }
    std::fs::write(dir.path().join("shifted.json"), shifted.to_string()).unwrap();
    let regressed = run_cli(dir.path(), &["check", "case.toml", "--baseline", "shifted.json"]);
    assert_eq!(regressed.status.code(), Some(1));
    assert!(String::from_utf8_lossy(&regressed.stdout).contains("REGRESSED"));

    std::fs::write(dir.path().join("broken.json"), "{ not json").unwrap();
    let broken = run_cli(dir.path(), &["check", "case.toml", "--baseline", "broken.json"]);
    assert_eq!(broken.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&broken.stderr).contains("broken.json:1:"));
}

/// Reads a Matrix Market `coordinate real general` file: returns (rows, cols, entries) with
/// 0-based indices. Independent of the writer: it follows the format's text layout only.
fn read_matrix_market(path: &Path) -> (usize, usize, Vec<(usize, usize, f64)>) {
    let text = std::fs::read_to_string(path).unwrap();
    let mut lines = text.lines();
    assert_eq!(lines.next().unwrap(), "%%MatrixMarket matrix coordinate real general");
    let mut data = lines.filter(|l| !l.starts_with('%'));
    let size: Vec<usize> =
        data.next().unwrap().split_whitespace().map(|t| t.parse().unwrap()).collect();
    let entries: Vec<(usize, usize, f64)> = data
        .map(|l| {
            let t: Vec<&str> = l.split_whitespace().collect();
            (
                t[0].parse::<usize>().unwrap() - 1,
                t[1].parse::<usize>().unwrap() - 1,
                t[2].parse().unwrap(),
            )
        })
        .collect();
    assert_eq!(entries.len(), size[2], "entry count of {}", path.display());
    (size[0], size[1], entries)
}

#[test]
fn export_system_writes_the_solved_matrix_its_rhs_and_the_solver_figures() {
    let dir = tempfile::tempdir().unwrap();
    let text = std::fs::read_to_string(repo_root().join("examples/cavity.toml")).unwrap();
    write_case(dir.path(), &text.replace("size = 0.04", "size = 0.1"));
    let out = run_cli(dir.path(), &["run", "case.toml", "-o", "out", "--export-system", "sys"]);
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let sys = dir.path().join("sys");
    let info: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(sys.join("info.json")).unwrap()).unwrap();
    let n = info["n"].as_u64().unwrap() as usize;
    let n_velocity = info["velocity_unknowns"].as_u64().unwrap() as usize;
    assert_eq!(n, n_velocity + info["pressure_unknowns"].as_u64().unwrap() as usize);
    // The closed cavity pins one pressure; the summary of the same run reports it too.
    assert_eq!(info["pressure_pinned"], true);
    let summary: serde_json::Value = serde_json::from_str(
        &std::fs::read_to_string(dir.path().join("out/summary.json")).unwrap(),
    )
    .unwrap();
    assert_eq!(info["cornerflow"]["relative_residual"], summary["solver"]["relative_residual"]);
    assert!(info["cornerflow"]["times_s"]["factor_and_solve"].as_f64().unwrap() > 0.0);

    let (rows, cols, entries) = read_matrix_market(&sys.join("matrix.mtx"));
    assert_eq!((rows, cols, entries.len()), (n, n, info["nnz"].as_u64().unwrap() as usize));
    let mut matrix = std::collections::HashMap::new();
    for &(i, j, v) in &entries {
        assert!(i < n && j < n);
        assert!(matrix.insert((i, j), v).is_none(), "duplicate entry ({i}, {j})");
    }
    // The Stokes matrix [[A, Bᵀ], [B, 0]] is symmetric: each entry is summed from symmetric
    // element matrices in the same cell order on both sides, so the values agree exactly up
    // to round-off of the sums (relative 1e-12 is far above that and far below any value).
    let scale = entries.iter().map(|e| e.2.abs()).fold(0.0, f64::max);
    for (&(i, j), &v) in &matrix {
        let w = matrix.get(&(j, i)).copied().unwrap_or(0.0);
        assert!((v - w).abs() <= 1e-12 * scale, "A[{i},{j}] = {v} but A[{j},{i}] = {w}");
    }
    // The viscous block has a positive diagonal; the pressure block is stored as zeros.
    assert!((0..n_velocity).all(|d| matrix.get(&(d, d)).is_some_and(|v| *v > 0.0)));
    assert!((n_velocity..n).all(|d| matrix.get(&(d, d)).is_some_and(|v| *v == 0.0)));

    let rhs = std::fs::read_to_string(sys.join("rhs.mtx")).unwrap();
    let mut rhs_lines = rhs.lines().filter(|l| !l.starts_with('%'));
    assert_eq!(rhs_lines.next().unwrap(), format!("{n} 1"));
    let b: Vec<f64> = rhs_lines.map(|l| l.parse().unwrap()).collect();
    assert_eq!(b.len(), n);
    assert!(b.iter().any(|v| *v != 0.0), "the moving lid drives the flow");
}

#[test]
fn export_system_is_refused_for_a_navier_stokes_case() {
    let case = repo_root().join("examples/cylinder-benchmark.toml");
    let dir = tempfile::tempdir().unwrap();
    let out =
        run_cli(dir.path(), &["run", case.to_str().unwrap(), "-o", "out", "--export-system", "s"]);
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{stderr}");
    assert!(stderr.contains("--export-system"), "{stderr}");
    assert!(!dir.path().join("s").exists());
}

#[test]
fn validate_prints_a_table_with_sources_and_rejects_unknown_names() {
    let dir = tempfile::tempdir().unwrap();
    let out = run_cli(dir.path(), &["validate", "kovasznay", "--quick", "--json", "v.json"]);
    let stdout = String::from_utf8_lossy(&out.stdout);
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    assert!(stdout.contains("velocity H1 rate") && stdout.contains("Kovasznay (1948)"), "{stdout}");
    assert!(stdout.contains("3 passed, 0 failed"), "{stdout}");
    let rows: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.path().join("v.json")).unwrap()).unwrap();
    assert_eq!(rows.as_array().unwrap().len(), 3);
    assert!(rows[0]["passed"].as_bool().unwrap());
    let bad = run_cli(dir.path(), &["validate", "cylinder-3d"]);
    assert_eq!(bad.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&bad.stderr).contains("cylinder-steady"));
}
