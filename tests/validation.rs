//! The CI subset of the built-in validation cases (`cornerflow validate --quick`): coarse
//! meshes, the relaxed tolerances stated beside each row in `src/validation/cases.rs`, every
//! reference value published (Schäfer & Turek 1996 with Nabh 1998 / John & Matthies 2001;
//! Ghia, Ghia & Shin 1982; Botella & Peyret 1998; Kovasznay 1948; Verfürth 1996 with Dauge
//! 1989; Moffatt 1964 for the corner eddies of the Stokes cavity; Dauge 1989 for the Stokes
//! backward step). The time-dependent cylinder cases run only at the full level (`cornerflow validate
//! all`, minutes each).

use cornerflow::validation::{Level, ValidationError, run_case, run_cases};

#[test]
fn quick_validation_subset_meets_the_published_values() {
    let names = [
        "kovasznay",
        "l-shape",
        "profile-trailing-edge",
        "cylinder-steady",
        "cavity-100",
        "cavity-1000",
        "cavity-eddies",
        "step-stokes",
    ]
    .map(String::from);
    let rows = run_cases(&names, Level::Quick, &mut |line| eprintln!("{line}")).unwrap();
    assert_eq!(rows.len(), 3 + 5 + 1 + 3 + 2 + 3 + 5 + 1);
    for row in &rows {
        eprintln!(
            "{:<16} {:<42} ours {:>12.6} published {:>12.6} ({}) {}",
            row.case,
            row.quantity,
            row.ours,
            row.reference,
            row.tolerance.describe(),
            if row.passed { "pass" } else { "FAIL" }
        );
    }
    let failed: Vec<_> = rows.iter().filter(|r| !r.passed).collect();
    assert!(failed.is_empty(), "outside tolerance: {failed:#?}");
}

#[test]
fn an_unknown_validation_case_is_a_typed_error() {
    match run_case("cylinder-3d", Level::Quick, &mut |_| {}) {
        Err(ValidationError::UnknownCase { name, known }) => {
            assert_eq!(name, "cylinder-3d");
            assert!(known.contains("cylinder-steady"));
        }
        other => panic!("expected an unknown-case error, got {other:?}"),
    }
}
