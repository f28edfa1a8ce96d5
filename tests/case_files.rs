//! Case files: the validation catalogue (one small TOML per kind of bad input, each asserting
//! the error variant and that the message locates the problem) and the shipped examples.

use std::path::{Path, PathBuf};

use cornerflow::case::{BoundaryCondition, Case, CaseError, Equations, ExprError};
use cornerflow::geometry::validate::LoopDefect;

/// A valid case: a 4 × 2 channel with a box-shaped body; the tests below break one thing each.
const VALID: &str = r#"name = "t"
[fluid]
density = 1.0
kinematic_viscosity = 1.0
reference_velocity = 1.0
reference_length = 1.0

[domain.outer]
rectangle = [0.0, 0.0, 4.0, 2.0]

[[domain.bodies]]
name = "box"
points = [[1.0, 0.5], [2.0, 0.5], [2.0, 1.0], [1.0, 1.0]]

[conditions.bottom]
kind = "no-slip"
[conditions.top]
kind = "no-slip"
[conditions.left]
kind = "velocity"
ux = "y * (2 - y)"
uy = 0
[conditions.right]
kind = "outflow"
[conditions.box]
kind = "no-slip"

[mesh]
size = 0.1
"#;

fn origin() -> &'static Path {
    Path::new("cases/test.toml")
}

/// `VALID` with `from` replaced by `to` (the replaced text must exist).
fn with(from: &str, to: &str) -> String {
    assert!(VALID.contains(from), "test setup: `{from}` not in the base case");
    VALID.replacen(from, to, 1)
}

/// Parses `text`, expecting an error; returns it with its message. Every catalogue entry is
/// also run through the binary (`cornerflow mesh`), which must exit with code 2 (bad input),
/// print the same locating key and line, and not panic.
fn fails(text: &str) -> (CaseError, String) {
    match Case::parse(text, origin()) {
        Ok(_) => panic!("expected an error for:\n{text}"),
        Err(e) => {
            let msg = e.to_string();
            check_cli_rejects(text, &e);
            (e, msg)
        }
    }
}

/// Writes `text` to a temporary case file and checks the CLI's verdict on it.
fn check_cli_rejects(text: &str, expected: &CaseError) {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("test.toml"), text).unwrap();
    let out = crate::util::run_cli(dir.path(), &["mesh", "test.toml"]);
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "exit code for {expected}: {stderr}");
    assert!(!stderr.contains("panicked"), "{stderr}");
    if let Some(site) = expected.site() {
        if !site.key.is_empty() {
            assert!(stderr.contains(&site.key), "CLI message lacks key `{}`: {stderr}", site.key);
        }
        if let Some((line, col)) = site.position {
            assert!(
                stderr.contains(&format!(":{line}:{col}")),
                "CLI message lacks {line}:{col}: {stderr}"
            );
        }
    }
}

const BOX_POINTS: &str = "points = [[1.0, 0.5], [2.0, 0.5], [2.0, 1.0], [1.0, 1.0]]";

#[test]
fn the_base_case_is_valid() {
    let case = Case::parse(VALID, origin()).unwrap();
    assert_eq!(case.domain.part_names, ["bottom", "right", "top", "left", "box"]);
    assert_eq!(case.conditions.len(), 5);
    // Fluid area 8 − 0.5: exact in binary floating point.
    assert_eq!(case.domain.area(), 7.5);
    assert_eq!(case.output.directory, PathBuf::from("cases/output"));
}

#[test]
fn toml_syntax_error_names_file_line_and_column() {
    let (e, msg) = fails(&with("density = 1.0", "density = = 1.0"));
    assert!(matches!(e, CaseError::Syntax { .. }), "{e:?}");
    assert!(msg.starts_with("cases/test.toml:3:"), "{msg}");
}

#[test]
fn unknown_key_names_the_key_path_and_line() {
    let (e, msg) = fails(&with("density = 1.0", "densty = 1.0"));
    assert!(matches!(e, CaseError::UnknownKey { ref name, .. } if name == "densty"), "{e:?}");
    assert!(msg.contains(":3:") && msg.contains("fluid.densty"), "{msg}");
    // Tables whose keys all have defaults still reject strangers.
    let mut text = VALID.to_string();
    text.push_str("[output]\ndir = \"out\"\n");
    let (e, msg) = fails(&text);
    assert!(matches!(e, CaseError::UnknownKey { .. }) && msg.contains("output.dir"), "{msg}");
}

#[test]
fn wrong_value_type_is_a_schema_error_with_line() {
    let (e, msg) = fails(&with("size = 0.1", "size = \"fine\""));
    assert!(matches!(e, CaseError::Schema { .. }), "{e:?}");
    assert!(msg.contains(":29:") && msg.contains("mesh.size"), "{msg}");
}

#[test]
fn unknown_condition_kind_lists_the_valid_kinds() {
    let (e, msg) = fails(&with("kind = \"outflow\"", "kind = \"open\""));
    assert!(matches!(e, CaseError::Schema { .. }), "{e:?}");
    assert!(msg.contains(":24:") && msg.contains("no-slip"), "{msg}");
}

#[test]
fn self_intersecting_body_is_rejected_with_its_key() {
    let bow = "points = [[1.0, 0.5], [2.0, 1.0], [2.0, 0.5], [1.0, 1.0]]";
    let (e, msg) = fails(&with(BOX_POINTS, bow));
    assert!(
        matches!(e, CaseError::Polygon { defect: LoopDefect::SelfIntersection { .. }, .. }),
        "{e:?}"
    );
    assert!(msg.contains("domain.bodies[0].points") && msg.contains(":13:"), "{msg}");
}

#[test]
fn self_intersecting_outer_boundary_is_rejected() {
    let text = with(
        "rectangle = [0.0, 0.0, 4.0, 2.0]",
        "points = [[0.0, 0.0], [4.0, 2.0], [4.0, 0.0], [0.0, 2.0]]",
    );
    let (e, msg) = fails(&text);
    assert!(matches!(e, CaseError::Polygon { defect: LoopDefect::SelfIntersection { .. }, .. }));
    assert!(msg.contains("domain.outer.points"), "{msg}");
}

#[test]
fn repeated_point_is_rejected() {
    let rep = "points = [[1.0, 0.5], [2.0, 0.5], [1.5, 0.7], [2.0, 0.5], [1.0, 1.0]]";
    let (e, msg) = fails(&with(BOX_POINTS, rep));
    assert!(
        matches!(
            e,
            CaseError::Polygon {
                defect: LoopDefect::RepeatedPoint { first: 1, second: 3, .. },
                ..
            }
        ),
        "{e:?}"
    );
    assert!(msg.contains("domain.bodies[0].points"), "{msg}");
}

#[test]
fn zero_length_edge_is_rejected() {
    let zero = "points = [[1.0, 0.5], [2.0, 0.5], [2.0, 0.5], [1.0, 1.0]]";
    let (e, msg) = fails(&with(BOX_POINTS, zero));
    assert!(
        matches!(e, CaseError::Polygon { defect: LoopDefect::ZeroLengthEdge { edge: 1 }, .. }),
        "{e:?}"
    );
    assert!(msg.contains("domain.bodies[0].points"), "{msg}");
}

#[test]
fn fewer_than_three_points_is_rejected() {
    let (e, msg) = fails(&with(BOX_POINTS, "points = [[1.0, 0.5], [2.0, 0.5]]"));
    assert!(matches!(e, CaseError::Polygon { defect: LoopDefect::TooFewPoints(2), .. }), "{e:?}");
    assert!(msg.contains("domain.bodies[0].points"), "{msg}");
}

#[test]
fn loops_close_implicitly_and_a_repeated_closing_point_is_dropped() {
    // Loops are closed by construction (the last point joins the first), so an "unclosed"
    // polygon cannot be written; a list that repeats its first point at the end is the same loop.
    let closed = "points = [[1.0, 0.5], [2.0, 0.5], [2.0, 1.0], [1.0, 1.0], [1.0, 0.5]]";
    let case = Case::parse(&with(BOX_POINTS, closed), origin()).unwrap();
    assert_eq!(case.domain.holes[0].points.len(), 4);
    assert_eq!(case.domain.area(), 7.5);
}

#[test]
fn overlapping_bodies_are_rejected() {
    let second = "[[domain.bodies]]\nname = \"other\"\npoints = [[1.5, 0.7], [3.0, 0.7], [3.0, 1.5]]\n\n[conditions.bottom]";
    let mut text = with("[conditions.bottom]", second);
    text.push_str("[conditions.other]\nkind = \"no-slip\"\n");
    let (e, msg) = fails(&text);
    assert!(matches!(e, CaseError::BodiesOverlap { .. }), "{e:?}");
    assert!(msg.contains("domain.bodies[1]") && msg.contains("`box`"), "{msg}");
}

#[test]
fn body_inside_another_body_is_rejected() {
    let second = "[[domain.bodies]]\nname = \"inner\"\npoints = [[1.2, 0.6], [1.4, 0.6], [1.4, 0.8]]\n\n[conditions.bottom]";
    let mut text = with("[conditions.bottom]", second);
    text.push_str("[conditions.inner]\nkind = \"no-slip\"\n");
    let (e, _) = fails(&text);
    assert!(matches!(e, CaseError::BodiesOverlap { .. }), "{e:?}");
}

#[test]
fn body_outside_the_outer_boundary_is_rejected() {
    let out = "points = [[5.0, 0.5], [6.0, 0.5], [6.0, 1.0]]";
    let (e, msg) = fails(&with(BOX_POINTS, out));
    assert!(matches!(e, CaseError::BodyOutside { .. }), "{e:?}");
    assert!(msg.contains("domain.bodies[0]"), "{msg}");
}

#[test]
fn body_crossing_the_outer_boundary_is_rejected() {
    let cross = "points = [[3.0, 0.5], [5.0, 0.5], [5.0, 1.0]]";
    let (e, msg) = fails(&with(BOX_POINTS, cross));
    assert!(matches!(e, CaseError::BodyTouchesOuter { .. }), "{e:?}");
    assert!(msg.contains("domain.bodies[0]"), "{msg}");
}

#[test]
fn body_touching_the_outer_boundary_is_rejected() {
    let touch = "points = [[1.0, 0.0], [2.0, 0.0], [2.0, 1.0], [1.0, 1.0]]";
    let (e, _) = fails(&with(BOX_POINTS, touch));
    assert!(matches!(e, CaseError::BodyTouchesOuter { .. }), "{e:?}");
}

#[test]
fn part_without_condition_is_rejected() {
    let (e, msg) = fails(&with("[conditions.box]\nkind = \"no-slip\"\n", ""));
    assert!(matches!(e, CaseError::MissingCondition { ref part, .. } if part == "box"), "{e:?}");
    assert!(msg.contains("conditions") && msg.contains("`box`"), "{msg}");
}

#[test]
fn condition_for_unknown_part_is_rejected() {
    let (e, msg) = fails(&with("[conditions.left]", "[conditions.inlet]"));
    assert!(matches!(e, CaseError::UnknownPart { ref part, .. } if part == "inlet"), "{e:?}");
    assert!(msg.contains("conditions.inlet") && msg.contains(":19:"), "{msg}");
}

#[test]
fn non_positive_physical_values_are_rejected() {
    let cases = [
        ("density = 1.0", "density = 0.0", "fluid.density"),
        ("kinematic_viscosity = 1.0", "kinematic_viscosity = -1e-3", "fluid.kinematic_viscosity"),
        ("reference_velocity = 1.0", "reference_velocity = 0", "fluid.reference_velocity"),
        ("reference_length = 1.0", "reference_length = -2.0", "fluid.reference_length"),
        ("size = 0.1", "size = 0.0", "mesh.size"),
        ("size = 0.1", "size = nan", "mesh.size"),
        ("size = 0.1", "size = 0.1\npart_sizes = { box = -0.01 }", "mesh.part_sizes.box"),
        (
            "size = 0.1",
            "size = 0.1\n[[mesh.grading]]\nat = [1.0, 0.5]\nh_min = 0",
            "mesh.grading[0].h_min",
        ),
        (BOX_POINTS, "naca = { digits = \"0012\", chord = -1.0 }", "domain.bodies[0].naca.chord"),
        (
            BOX_POINTS,
            "polygon = { center = [1.5, 0.7], radius = 0.0, sides = 8 }",
            "domain.bodies[0].polygon.radius",
        ),
    ];
    for (from, to, key) in cases {
        let (e, msg) = fails(&with(from, to));
        assert!(matches!(e, CaseError::NotPositive { .. }), "{key}: {e:?}");
        assert!(msg.contains(key), "{msg}");
    }
}

#[test]
fn exactly_one_viscosity_must_be_given() {
    let both =
        with("kinematic_viscosity = 1.0", "kinematic_viscosity = 1.0\ndynamic_viscosity = 1.0");
    let (e, msg) = fails(&both);
    assert!(matches!(e, CaseError::Viscosity { .. }), "{e:?}");
    assert!(msg.contains("both") && msg.contains("fluid"), "{msg}");
    let (e, msg) = fails(&with("kinematic_viscosity = 1.0\n", ""));
    assert!(matches!(e, CaseError::Viscosity { .. }) && msg.contains("neither"), "{msg}");
}

#[test]
fn dynamic_viscosity_is_divided_by_density() {
    let text =
        with("density = 1.0\nkinematic_viscosity = 1.0", "density = 4.0\ndynamic_viscosity = 2.0");
    let case = Case::parse(&text, origin()).unwrap();
    // ν = μ/ρ = 0.5, exact in floating point.
    assert_eq!(case.fluid.kinematic_viscosity, 0.5);
    assert_eq!(case.fluid.dynamic_viscosity(), 2.0);
}

#[test]
fn expression_that_does_not_parse_is_rejected() {
    let (e, msg) = fails(&with("ux = \"y * (2 - y)\"", "ux = \"y * (2 - \""));
    assert!(matches!(e, CaseError::Expression { source: ExprError::Syntax { .. }, .. }), "{e:?}");
    assert!(msg.contains("conditions.left.ux") && msg.contains(":21:"), "{msg}");
}

#[test]
fn expression_with_unknown_variable_is_rejected() {
    let (e, msg) = fails(&with("ux = \"y * (2 - y)\"", "ux = \"z * (2 - y)\""));
    assert!(
        matches!(e, CaseError::Expression { source: ExprError::UnknownVariable { .. }, .. }),
        "{e:?}"
    );
    assert!(msg.contains("conditions.left.ux") && msg.contains("`z`"), "{msg}");
}

#[test]
fn missing_coordinate_file_names_the_path() {
    let (e, msg) = fails(&with(BOX_POINTS, "file = \"no-such-body.dat\""));
    assert!(matches!(e, CaseError::CoordinateFile { .. }), "{e:?}");
    assert!(msg.contains("no-such-body.dat") && msg.contains("domain.bodies[0].file"), "{msg}");
}

#[test]
fn bad_coordinate_line_names_the_line() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("body.dat"), "# box\n1.0 0.5\n2.0 zero\n2.0 1.0\n").unwrap();
    let case_path = dir.path().join("case.toml");
    std::fs::write(&case_path, with(BOX_POINTS, "file = \"body.dat\"")).unwrap();
    let e = Case::load(&case_path).unwrap_err();
    assert!(matches!(e, CaseError::CoordinateLine { line: 3, .. }), "{e:?}");
    assert!(e.to_string().contains("body.dat:3:"), "{e}");
}

#[test]
fn coordinate_file_is_read_relative_to_the_case_file() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::create_dir(dir.path().join("shapes")).unwrap();
    let body = "# box, clockwise on purpose\n1 0.5\n1 1\n2 1\n2 0.5\n";
    std::fs::write(dir.path().join("shapes/box.dat"), body).unwrap();
    let case_path = dir.path().join("case.toml");
    std::fs::write(&case_path, with(BOX_POINTS, "file = \"shapes/box.dat\"")).unwrap();
    let case = Case::load(&case_path).unwrap();
    assert_eq!(case.domain.holes[0].points.len(), 4);
    assert!(case.domain.holes[0].signed_area() < 0.0);
    assert_eq!(case.output.directory, dir.path().join("output"));
}

#[test]
fn min_angle_must_lie_in_zero_to_thirty_three_degrees() {
    for bad in ["0.0", "-5", "33.5", "60"] {
        let (e, msg) = fails(&with("size = 0.1", &format!("size = 0.1\nmin_angle = {bad}")));
        assert!(matches!(e, CaseError::MinAngle { .. }), "{bad}: {e:?}");
        assert!(msg.contains("mesh.min_angle") && msg.contains(":30:"), "{msg}");
    }
    let ok = Case::parse(&with("size = 0.1", "size = 0.1\nmin_angle = 33"), origin()).unwrap();
    assert_eq!(ok.mesh.min_angle_deg, 33.0);
    assert_eq!(Case::parse(VALID, origin()).unwrap().mesh.min_angle_deg, 28.0);
}

#[test]
fn max_triangles_and_write_every_must_be_at_least_one() {
    let (e, msg) = fails(&with("size = 0.1", "size = 0.1\nmax_triangles = 0"));
    assert!(matches!(e, CaseError::Count { .. }) && msg.contains("mesh.max_triangles"), "{msg}");
    let time = "[model.time]\ndt = 0.1\nt_end = 1.0\nwrite_every = 0\n[mesh]";
    let (e, msg) = fails(&with("[mesh]", time));
    assert!(
        matches!(e, CaseError::Count { .. }) && msg.contains("model.time.write_every"),
        "{msg}"
    );
    let (e, msg) = fails(&with("[mesh]", "[model.time]\ndt = -0.1\nt_end = 1.0\n[mesh]"));
    assert!(matches!(e, CaseError::NotPositive { .. }) && msg.contains("model.time.dt"), "{msg}");
}

#[test]
fn edge_part_list_must_match_the_edge_count() {
    let text = with(
        "rectangle = [0.0, 0.0, 4.0, 2.0]",
        "points = [[0.0, 0.0], [4.0, 0.0], [4.0, 2.0], [0.0, 2.0]]\nedge_parts = [\"bottom\", \"right\", \"top\"]",
    );
    let (e, msg) = fails(&text);
    assert!(matches!(e, CaseError::PartCount { given: 3, edges: 4, .. }), "{e:?}");
    assert!(msg.contains("domain.outer.edge_parts") && msg.contains(":10:"), "{msg}");
}

#[test]
fn clockwise_outer_points_are_reversed_with_their_parts() {
    let text = with(
        "rectangle = [0.0, 0.0, 4.0, 2.0]",
        "points = [[0.0, 0.0], [0.0, 2.0], [4.0, 2.0], [4.0, 0.0]]\nedge_parts = [\"left\", \"top\", \"right\", \"bottom\"]",
    );
    let case = Case::parse(&text, origin()).unwrap();
    let outer = &case.domain.outer;
    assert!(outer.signed_area() > 0.0);
    for i in 0..outer.n_edges() {
        let (a, b) = outer.edge(i);
        let name = case.part_name(outer.edge_parts[i]);
        // The part follows its edge: "left" is the edge at x = 0, "bottom" the one at y = 0, ….
        let expect = match (a[0] == b[0], a[1] == b[1]) {
            (true, _) if a[0] == 0.0 => "left",
            (true, _) => "right",
            (_, true) if a[1] == 0.0 => "bottom",
            _ => "top",
        };
        assert_eq!(name, expect, "edge {i}: {a:?} -> {b:?}");
    }
}

#[test]
fn rectangle_must_have_positive_extent() {
    let (e, msg) =
        fails(&with("rectangle = [0.0, 0.0, 4.0, 2.0]", "rectangle = [4.0, 0.0, 0.0, 2.0]"));
    assert!(matches!(e, CaseError::Rectangle { .. }), "{e:?}");
    assert!(msg.contains("domain.outer.rectangle"), "{msg}");
}

#[test]
fn body_needs_exactly_one_shape() {
    let two = format!("{BOX_POINTS}\nfile = \"x.dat\"");
    let (e, msg) = fails(&with(BOX_POINTS, &two));
    assert!(matches!(e, CaseError::BodyShape { .. }), "{e:?}");
    assert!(msg.contains("points and file") && msg.contains("domain.bodies[0]"), "{msg}");
}

#[test]
fn bad_naca_designation_is_rejected() {
    let naca = "naca = { digits = \"24x2\", leading_edge = [1.0, 0.5] }";
    let (e, msg) = fails(&with(BOX_POINTS, naca));
    assert!(matches!(e, CaseError::Naca { .. }), "{e:?}");
    assert!(msg.contains("domain.bodies[0].naca") && msg.contains("24x2"), "{msg}");
}

#[test]
fn duplicate_body_names_are_rejected() {
    let second = "[[domain.bodies]]\nname = \"box\"\npoints = [[3.0, 0.5], [3.5, 0.5], [3.5, 1.0]]\n\n[conditions.bottom]";
    let (e, msg) = fails(&with("[conditions.bottom]", second));
    assert!(matches!(e, CaseError::DuplicateBody { .. }), "{e:?}");
    assert!(msg.contains("domain.bodies[1].name"), "{msg}");
}

#[test]
fn trailing_edge_grading_needs_a_naca_body() {
    let g = "size = 0.1\n[[mesh.grading]]\ntrailing_edge = \"box\"\nh_min = 0.01";
    let (e, msg) = fails(&with("size = 0.1", g));
    assert!(matches!(e, CaseError::NoTrailingEdge { .. }), "{e:?}");
    assert!(msg.contains("mesh.grading[0].trailing_edge"), "{msg}");
    let g = "size = 0.1\n[[mesh.grading]]\ntrailing_edge = \"wing\"\nh_min = 0.01";
    let (e, msg) = fails(&with("size = 0.1", g));
    assert!(matches!(e, CaseError::UnknownBody { .. }) && msg.contains("box"), "{msg}");
}

#[test]
fn grading_near_a_point_snaps_to_the_nearest_domain_vertex() {
    let g = "size = 0.1\n[[mesh.grading]]\nnear = [2.1, 1.05]\nh_min = 0.01";
    let case = Case::parse(&with("size = 0.1", g), origin()).unwrap();
    assert_eq!(case.mesh.grading[0].point, [2.0, 1.0]);
    assert_eq!(case.mesh.grading[0].growth, 0.25);
}

#[test]
fn velocity_condition_needs_both_components() {
    let (e, msg) = fails(&with("uy = 0\n", ""));
    assert!(matches!(e, CaseError::Schema { .. }), "{e:?}");
    assert!(msg.contains("conditions.left") && msg.contains("uy"), "{msg}");
}

#[test]
fn force_report_naming_an_unknown_part_is_rejected() {
    let (e, msg) = fails(&with("[mesh]", "[report]\nforces = [\"wing\"]\n[mesh]"));
    assert!(matches!(e, CaseError::UnknownPart { .. }), "{e:?}");
    assert!(msg.contains("report.forces") && msg.contains("box"), "{msg}");
}

#[test]
fn unreadable_case_file_is_a_read_error() {
    let e = Case::load(Path::new("/nonexistent/dir/case.toml")).unwrap_err();
    assert!(matches!(e, CaseError::Read { .. }), "{e:?}");
    assert!(e.to_string().contains("/nonexistent/dir/case.toml"));
}

fn example(name: &str) -> Case {
    let path = Path::new(env!("CARGO_MANIFEST_DIR")).join("examples").join(name);
    Case::load(&path).unwrap_or_else(|e| panic!("{name}: {e}"))
}

#[test]
fn every_example_loads_with_fluid_on_the_left_of_every_edge() {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("examples");
    let mut count = 0;
    for entry in std::fs::read_dir(dir).unwrap() {
        let path = entry.unwrap().path();
        if path.extension().is_some_and(|e| e == "toml") {
            let case = Case::load(&path).unwrap_or_else(|e| panic!("{e}"));
            assert!(case.domain.outer.signed_area() > 0.0, "{}", path.display());
            assert!(case.domain.holes.iter().all(|h| h.signed_area() < 0.0), "{}", path.display());
            assert_eq!(case.conditions.len(), case.domain.part_names.len());
            assert!(case.domain.area() > 0.0);
            count += 1;
        }
    }
    assert!(count >= 6, "found {count} examples");
}

#[test]
fn cylinder_example_matches_the_schafer_turek_geometry() {
    // Schäfer & Turek (1996), 2D-1: channel [0, 2.2] × [0, 0.41], cylinder centre (0.2, 0.2),
    // radius 0.05, ρ = 1, ν = 1e-3, U_mean = 0.2, D = 0.1, so Re = 20.
    let case = example("cylinder-benchmark.toml");
    let hole = &case.domain.holes[0];
    let circle = hole.circle.expect("declared as a circle");
    assert_eq!((circle.center, circle.radius), ([0.2, 0.2], 0.05));
    // Area = channel − inscribed 128-gon, (n/2) r² sin(2π/n); round-off ~ 1e-16 × 0.9 area.
    let ngon = 64.0 * 0.05f64.powi(2) * (std::f64::consts::TAU / 128.0).sin();
    assert!((case.domain.area() - (2.2 * 0.41 - ngon)).abs() < 1e-14);
    // Re = U L / ν = 20 up to the rounding of 0.2 · 0.1 / 1e-3 (a few ulp).
    assert!((case.fluid.reynolds_number() - 20.0).abs() < 1e-12);
    assert_eq!(case.model.equations, Equations::NavierStokes);
    let inlet = case.domain.part_id("inlet").unwrap();
    let BoundaryCondition::Velocity { ux, .. } = &case.conditions[inlet] else { panic!("inlet") };
    // Peak inflow 0.3 at mid-height y = 0.205 (the benchmark's 4 U y (H − y) / H²).
    assert!((ux.eval(0.0, 0.205, 0.0) - 0.3).abs() < 1e-15);
    assert_eq!(case.pressure_difference.unwrap().first, [0.15, 0.2]);
}

#[test]
fn wedge_plate_example_reads_its_body_from_the_coordinate_file() {
    let case = example("wedge-plate.toml");
    let plate = &case.domain.holes[0];
    assert_eq!(plate.points.len(), 5);
    // Area of the plate 0.7 × 0.04 plus the wedge ½ · 0.04 · 0.3 = 0.034 (a few ulp of round-off).
    assert!((plate.signed_area().abs() - 0.034).abs() < 1e-15);
    assert!((case.fluid.kinematic_viscosity - 0.02).abs() < 1e-18);
    assert_eq!(case.mesh.grading[0].point, [1.0, 0.0]);
}

#[test]
fn body_may_not_share_a_part_with_the_outer_boundary() {
    let (e, msg) = fails(&with("name = \"box\"", "name = \"box\"\npart = \"bottom\""));
    assert!(matches!(e, CaseError::BodyPartOnOuter { ref part, .. } if part == "bottom"), "{e:?}");
    assert!(msg.contains("domain.bodies[0].part"), "{msg}");
}

#[test]
fn non_finite_points_are_rejected() {
    let probe = "[report]\nprobes = [{ name = \"p\", at = [nan, 0.5] }]\n[mesh]";
    let (e, msg) = fails(&with("[mesh]", probe));
    assert!(matches!(e, CaseError::Schema { .. }), "{e:?}");
    assert!(msg.contains("report.probes[0].at") && msg.contains(":29:"), "{msg}");
    let body = "points = [[1.0, 0.5], [2.0, 0.5], [inf, 1.0]]";
    let (e, _) = fails(&with(BOX_POINTS, body));
    assert!(matches!(e, CaseError::Polygon { defect: LoopDefect::NonFinite(2), .. }), "{e:?}");
}

#[test]
fn time_step_longer_than_the_run_is_rejected() {
    let (e, msg) = fails(&with("[mesh]", "[model.time]\ndt = 2.0\nt_end = 1.0\n[mesh]"));
    assert!(matches!(e, CaseError::Schema { .. }), "{e:?}");
    assert!(msg.contains("model.time.dt") && msg.contains("t_end"), "{msg}");
}

#[test]
fn naca_point_count_is_bounded() {
    for n in ["4", "-3", "1000000000"] {
        let naca = format!(
            "naca = {{ digits = \"0012\", leading_edge = [1.0, 0.7], points_per_side = {n} }}"
        );
        let (e, msg) = fails(&with(BOX_POINTS, &naca));
        assert!(matches!(e, CaseError::Naca { .. }), "{n}: {e:?}");
        assert!(msg.contains("points_per_side"), "{msg}");
    }
}

#[test]
fn error_site_exposes_file_line_and_key() {
    let (e, _) = fails(&with("density = 1.0", "density = -1.0"));
    let site = e.site().expect("a located error");
    assert_eq!(site.file, PathBuf::from("cases/test.toml"));
    assert_eq!(site.key, "fluid.density");
    assert_eq!(site.position, Some((3, 11)));
}

#[test]
fn key_paths_reach_into_array_tables_and_inline_tables() {
    // A second body whose inline `naca` table has a misspelt key and a wrong value type.
    let second = "[[domain.bodies]]\nname = \"w\"\nnaca = { digits = \"0012\", chord = 0.5, leading_edge = [2.5, 1.0], pointz = 3 }\n\n[conditions.bottom]";
    let (e, msg) = fails(&with("[conditions.bottom]", second));
    assert!(matches!(e, CaseError::UnknownKey { .. }), "{e:?}");
    assert!(msg.contains("domain.bodies[1].naca.pointz") && msg.contains(":17:"), "{msg}");
    let second = "[[domain.bodies]]\nname = \"w\"\nnaca = { digits = \"0012\", chord = \"long\" }\n\n[conditions.bottom]";
    let (e, msg) = fails(&with("[conditions.bottom]", second));
    assert!(matches!(e, CaseError::Schema { .. }), "{e:?}");
    assert!(msg.contains("domain.bodies[1].naca.chord"), "{msg}");
}

#[test]
fn array_rows_are_not_mistaken_for_table_headers() {
    // A multi-line point list: its rows start with `[`, yet the key after it is in [domain.outer].
    let multi = "points = [\n  [0.0, 0.0],\n  [4.0, 0.0],\n  [4.0, 2.0],\n  [0.0, 2.0],\n]\nedge_partz = []";
    let (e, msg) = fails(&with("rectangle = [0.0, 0.0, 4.0, 2.0]", multi));
    assert!(matches!(e, CaseError::UnknownKey { .. }), "{e:?}");
    assert!(msg.contains("`domain.outer.edge_partz`") && msg.contains(":15:"), "{msg}");
}

#[test]
fn documented_expression_functions_evaluate() {
    // docs/case-format.md promises these operators and functions.
    let text = with(
        "ux = \"y * (2 - y)\"",
        "ux = \"sin(x) + cos(y) + exp(t) + sqrt(4) + abs(-2) + 2^3 - 1/2\"",
    );
    let case = Case::parse(&text, origin()).unwrap();
    let left = case.domain.part_id("left").unwrap();
    let BoundaryCondition::Velocity { ux, .. } = &case.conditions[left] else { panic!("left") };
    // sin 0 + cos 0 + e^0 + 2 + 2 + 8 − 0.5 = 13.5, exact in floating point.
    assert_eq!(ux.eval(0.0, 0.0, 0.0), 13.5);
}

#[test]
fn outer_boundary_needs_exactly_one_shape_and_matching_part_keys() {
    let (e, msg) = fails(&with("rectangle = [0.0, 0.0, 4.0, 2.0]\n", ""));
    assert!(matches!(e, CaseError::OuterShape { .. }), "{e:?}");
    assert!(msg.contains("domain.outer") && msg.contains(":8:"), "{msg}");
    let both = "rectangle = [0.0, 0.0, 4.0, 2.0]\npoints = [[0.0, 0.0], [4.0, 0.0], [4.0, 2.0]]";
    let (e, _) = fails(&with("rectangle = [0.0, 0.0, 4.0, 2.0]", both));
    assert!(matches!(e, CaseError::OuterShape { .. }), "{e:?}");
    // `edge_parts` would be silently ignored next to a rectangle: rejected instead.
    let stray = "rectangle = [0.0, 0.0, 4.0, 2.0]\nedge_parts = [\"a\", \"b\", \"c\", \"d\"]";
    let (e, msg) = fails(&with("rectangle = [0.0, 0.0, 4.0, 2.0]", stray));
    assert!(matches!(e, CaseError::Schema { .. }) && msg.contains("edge_parts"), "{msg}");
}

#[test]
fn rectangle_sides_default_and_may_share_names() {
    let sides = "rectangle = [0.0, 0.0, 4.0, 2.0]\nsides = { top = \"bottom\", left = \"inlet\" }";
    let mut text = with("rectangle = [0.0, 0.0, 4.0, 2.0]", sides);
    text = text.replacen("[conditions.top]\nkind = \"no-slip\"\n", "", 1);
    text = text.replacen("[conditions.left]", "[conditions.inlet]", 1);
    let case = Case::parse(&text, origin()).unwrap();
    assert_eq!(case.domain.part_names, ["bottom", "right", "inlet", "box"]);
    assert_eq!(case.domain.outer.edge_parts, vec![0, 1, 0, 2]);
}

#[test]
fn regular_polygon_bodies_need_three_or_more_sides() {
    let poly = "polygon = { center = [1.5, 0.7], radius = 0.2, sides = 2 }";
    let (e, msg) = fails(&with(BOX_POINTS, poly));
    assert!(matches!(e, CaseError::Count { count: 2, .. }), "{e:?}");
    assert!(msg.contains("domain.bodies[0].polygon.sides"), "{msg}");
    let circle = "polygon = { center = [1.5, 0.7], radius = 0.2, sides = 64, circle = true }";
    let case = Case::parse(&with(BOX_POINTS, circle), origin()).unwrap();
    assert_eq!(case.domain.holes[0].circle.unwrap().radius, 0.2);
    assert_eq!(case.domain.holes[0].points.len(), 64);
}

#[test]
fn body_without_shape_or_named_like_an_outer_part_is_rejected() {
    let (e, msg) = fails(&with(&format!("{BOX_POINTS}\n"), ""));
    assert!(matches!(e, CaseError::BodyShape { .. }) && msg.contains("found none"), "{msg}");
    // The default part of a body is its name, which here is already an outer part.
    let (e, msg) = fails(&with("name = \"box\"", "name = \"top\""));
    assert!(matches!(e, CaseError::BodyPartOnOuter { .. }), "{e:?}");
    assert!(msg.contains("domain.bodies[0].name") && msg.contains(":12:"), "{msg}");
}
