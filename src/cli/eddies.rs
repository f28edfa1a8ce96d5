//! The Moffatt-eddy lines of a run: measured eddies of the corners whose leading exponent is
//! complex, as terminal lines and as the `eddies` array of `summary.json`.

use cornerflow::corners::{EddyError, EddySequence};
use serde_json::{Value, json};

/// The `eddies` array of the summary: one object per corner, the sequence or the reason.
pub fn eddies_json(eddies: &[Result<EddySequence, EddyError>]) -> Value {
    let rows: Vec<Value> = eddies
        .iter()
        .map(|e| match e {
            Ok(s) => serde_json::to_value(s).unwrap_or(Value::Null),
            Err(why) => json!({ "error": why.to_string() }),
        })
        .collect();
    Value::Array(rows)
}

/// Prints measured against predicted eddy ratios per corner.
pub fn print_eddies(eddies: &[Result<EddySequence, EddyError>]) {
    if eddies.is_empty() {
        return;
    }
    println!("Moffatt eddies on the corner bisectors (sign changes of ψ − ψ_wall):");
    let mut unresolved = 0;
    for e in eddies {
        match e {
            Ok(s) if s.eddies.is_empty() => unresolved += 1,
            Ok(s) => print_sequence(s),
            Err(why) => println!("  no eddies measured: {why}"),
        }
    }
    if unresolved > 0 {
        println!(
            "  {unresolved} corner(s) with a complex leading root: no eddy in the resolved range (grade the mesh toward the corner to resolve them; ranges in summary.json)"
        );
    }
}

fn print_sequence(s: &EddySequence) {
    let [x, y] = s.location;
    let (lo, hi) = s.resolved_range;
    println!(
        "  ({x:.4}, {y:.4}): {} eddies in the resolved range r in [{lo:.2e}, {hi:.2e}]",
        s.eddies.len()
    );
    for e in &s.eddies {
        let psi = e.extremum.map_or("beyond the resolved range".to_string(), |(r, v)| {
            format!("ψ − ψ_wall = {v:+.4e} at r = {r:.3e}")
        });
        println!("    eddy {}: outer boundary r = {:.4e}, {psi}", e.index, e.outer_boundary);
    }
    let list = |v: &[f64]| v.iter().map(|r| format!("{r:.4}")).collect::<Vec<_>>().join(", ");
    if !s.size_ratios.is_empty() {
        println!(
            "    size ratios d_k/d_k+1: {} (predicted {:.4})",
            list(&s.size_ratios),
            s.predicted.size_ratio
        );
    }
    if !s.psi_ratios.is_empty() {
        println!(
            "    ψ ratios |ψ_k/ψ_k+1|: {} (predicted {:.4e})",
            list(&s.psi_ratios),
            s.predicted.psi_ratio
        );
    }
}
