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
    // mesher; the mesh must cover it to round-off (relative 1e-12, the acceptance).
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

    let solution = read_vtu_with_meshio(&root.join("solution.vtu"));
    for name in ["velocity", "pressure", "speed", "vorticity", "stream_function", "boundary_part"] {
        assert!(solution["point_data"].get(name).is_some(), "solution.vtu lacks {name}");
    }
    assert!(solution["cell_data"].get("divergence_error").is_some());
    let wall = std::fs::read_to_string(root.join("wall-wing.csv")).unwrap();
    assert!(wall.starts_with("s,x,y,cp,wall_shear\n") && wall.lines().count() > 100);
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
