//! `cornerflow validate [NAME|all] [--quick]`: runs the built-in validation cases and prints
//! the comparison table (quantity, ours, published, relative difference, tolerance, pass or
//! fail, source). Exits with code 1 when a comparison fails, 2 for an unknown case name.

use std::time::Instant;

use cornerflow::output::table::write_json;
use cornerflow::validation::{CASE_NAMES, Level, ValidationError, ValidationRow, run_cases};

use super::BadInput;
use super::args::ValidateArgs;

/// Runs `cornerflow validate`.
pub fn run(args: &ValidateArgs) -> anyhow::Result<()> {
    for name in &args.names {
        if name != "all" && !CASE_NAMES.contains(&name.as_str()) {
            return Err(anyhow::Error::new(BadInput(format!(
                "unknown validation case `{name}` (known: all, {})",
                CASE_NAMES.join(", ")
            ))));
        }
    }
    let level = if args.quick { Level::Quick } else { Level::Full };
    let started = Instant::now();
    let mut progress = |line: &str| {
        eprintln!("[validate {:>7.1} s] {line}", started.elapsed().as_secs_f64());
    };
    let rows = run_cases(&args.names, level, &mut progress).map_err(|e| match e {
        e @ ValidationError::UnknownCase { .. } => anyhow::Error::new(BadInput(e.to_string())),
        e => anyhow::Error::new(e).context("a validation case could not be run"),
    })?;
    print_table(&rows);
    if let Some(path) = &args.json {
        write_json(path, &rows)?;
    }
    let failed = rows.iter().filter(|r| !r.passed).count();
    println!("{} passed, {failed} failed", rows.len() - failed);
    if failed > 0 {
        anyhow::bail!("{failed} validation comparison(s) outside their tolerance");
    }
    Ok(())
}

fn print_table(rows: &[ValidationRow]) {
    println!(
        "{:<18} {:<42} {:>14} {:>14} {:>10} {:>9} {:<5} source",
        "case", "quantity", "ours", "published", "rel. diff", "tolerance", "ok"
    );
    for r in rows {
        println!(
            "{:<18} {:<42} {:>14} {:>14} {:>9.3}% {:>9} {:<5} {}",
            r.case,
            r.quantity,
            number(r.ours),
            number(r.reference),
            100.0 * r.relative_difference,
            r.tolerance.describe(),
            if r.passed { "pass" } else { "FAIL" },
            r.source
        );
    }
}

/// Eight decimals, or six significant digits in exponent form for magnitudes below 1e-3
/// (the eddy stream functions) and above 1e6.
fn number(v: f64) -> String {
    if v != 0.0 && v.is_finite() && !(1e-3..1e6).contains(&v.abs()) {
        format!("{v:.6e}")
    } else {
        format!("{v:.8}")
    }
}
