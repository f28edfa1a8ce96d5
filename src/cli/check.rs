//! `cornerflow check CASE.toml --baseline FILE.json [--update]`: runs the case like `run`
//! (writing the usual files), collects its quantities from the run summary — forces by both
//! formulas, the pressure difference, predicted and fitted corner exponents, and for a
//! time-dependent case the maxima of the coefficients and the Strouhal number; with
//! `--study-levels N [--study-refine uniform|graded|adaptive]` also the observed rates,
//! regularity indices and extrapolated forces of a study — and
//! compares them with the baseline. Exit codes: 0 all hold, 1 a regression (or a quantity missing), 2
//! bad input (case or baseline file).

use std::path::Path;

use anyhow::Context;
use cornerflow::output::atomic::write_text_atomic;
use cornerflow::regression::{Baseline, CheckRow, CheckStatus, Quantity, all_hold};
use serde_json::Value;

use super::BadInput;
use super::args::{CheckArgs, LinearSolver, NewtonSolver, Ordering, RunArgs};
use super::load_case;
use super::mesh::output_dir;

/// Runs `cornerflow check`.
pub fn run(args: &CheckArgs) -> anyhow::Result<()> {
    let baseline = if args.update { None } else { Some(read_baseline(&args.baseline)?) };
    let case = load_case(&args.case)?;
    let run_args = RunArgs {
        case: Some(args.case.clone()),
        meshing: args.meshing.clone(),
        threads: None,
        linear_solver: LinearSolver::Ldlt,
        newton_solver: NewtonSolver::ReuseLu,
        ordering: Ordering::NestedDissection,
        export_system: None,
    };
    super::run::run(&run_args)?;
    let summary_path = output_dir(&case, &args.meshing).join("summary.json");
    let text = std::fs::read_to_string(&summary_path)
        .with_context(|| format!("reading the run summary {}", summary_path.display()))?;
    let summary: Value = serde_json::from_str(&text)
        .with_context(|| format!("parsing the run summary {}", summary_path.display()))?;
    let mut current = quantities(&summary);
    if let Some(levels) = args.study_levels {
        current.extend(study_quantities(&case, args, levels)?);
    }
    match baseline {
        None => {
            let fresh = Baseline::from_current(&case.name, &current);
            let text = serde_json::to_string_pretty(&fresh)?;
            write_text_atomic(&args.baseline, &text)?;
            println!("wrote {} quantities to {}", current.len(), args.baseline.display());
            Ok(())
        }
        Some(baseline) => {
            let rows = baseline.compare(&current);
            print_rows(&rows);
            if all_hold(&rows) {
                Ok(())
            } else {
                anyhow::bail!("regression against {}", args.baseline.display())
            }
        }
    }
}

fn read_baseline(path: &Path) -> anyhow::Result<Baseline> {
    let text = std::fs::read_to_string(path).map_err(|e| {
        BadInput(format!(
            "{}: cannot read the baseline ({e}); create it with --update",
            path.display()
        ))
    })?;
    serde_json::from_str(&text).map_err(|e| {
        anyhow::Error::new(BadInput(format!(
            "{}:{}:{}: not a baseline file: {e}",
            path.display(),
            e.line(),
            e.column()
        )))
    })
}

/// The quantities a check compares, named `force.<part>.<what>`, `pressure_difference`,
/// `corner.<index>.predicted` / `.fitted`.
fn quantities(summary: &Value) -> Vec<Quantity> {
    let mut out = Vec::new();
    let mut push = |name: String, v: &Value| {
        if let Some(value) = v.as_f64() {
            out.push(Quantity { name, value });
        }
    };
    for f in summary["forces"].as_array().into_iter().flatten() {
        let part = f["part"].as_str().unwrap_or("?");
        for form in ["volume", "surface"] {
            for what in ["drag", "lift"] {
                push(format!("force.{part}.{what}_{form}"), &f[form]["coefficients"][what]);
            }
        }
    }
    push("pressure_difference".into(), &summary["probes"]["pressure_difference"]);
    for f in summary["statistics"]["forces"].as_array().into_iter().flatten() {
        let part = f["part"].as_str().unwrap_or("?");
        for what in ["drag_volume", "lift_volume"] {
            push(format!("force.{part}.{what}_max"), &f[what]["settled_second_half"]["max"]);
        }
        push(format!("force.{part}.strouhal"), &f["strouhal_number"]);
    }
    push(
        "pressure_difference_final".into(),
        &summary["statistics"]["pressure_difference"]["final"],
    );
    for (k, c) in summary["corners"].as_array().into_iter().flatten().enumerate() {
        if c["classification"] != "Smooth" {
            push(format!("corner.{k}.predicted"), &c["leading"]["re"]);
        }
    }
    for m in summary["measured_exponents"].as_array().into_iter().flatten() {
        let k = m["corner"].as_u64().unwrap_or(u64::MAX);
        push(format!("corner.{k}.fitted"), &m["fitted"]);
    }
    out
}

/// Runs the study and returns `study.rate.{u_l2,u_h1,p_l2}` (last pair, in h; in N for
/// adaptive studies), `study.sobolev_index`, `study.adaptive_rate_in_n`, `study.besov_index`
/// and `study.<part>.<drag|lift>_extrapolated`, as far as the refinement gives them.
fn study_quantities(
    case: &cornerflow::case::Case,
    args: &CheckArgs,
    levels: usize,
) -> anyhow::Result<Vec<Quantity>> {
    use cornerflow::study::{Refinement, StudyParams, run_study};
    if levels < 2 {
        return Err(anyhow::Error::new(BadInput("--study-levels must be at least 2".into())));
    }
    let (coarse, _) = super::mesh::mesh_case(case, &args.meshing)?;
    let refinement = match args.study_refine {
        super::args::RefineMode::Uniform => Refinement::Uniform,
        super::args::RefineMode::Graded => Refinement::Graded,
        super::args::RefineMode::Adaptive => Refinement::Adaptive,
    };
    let params = StudyParams::new(levels, refinement, super::mesh::cell_budget(case));
    let report = run_study(case, coarse, &params, &mut |_| {})
        .with_context(|| format!("study of {}", case.source.display()))?;
    let mut out = Vec::new();
    if let Some(r) = report.rates.last() {
        let rates = if refinement == Refinement::Adaptive { r.in_n } else { r.in_h };
        for (name, value) in
            [("u_l2", rates.velocity_l2), ("u_h1", rates.velocity_h1), ("p_l2", rates.pressure_l2)]
        {
            out.push(Quantity { name: format!("study.rate.{name}"), value });
        }
    }
    for (name, value) in [
        ("sobolev_index", report.sobolev_index),
        ("adaptive_rate_in_n", report.adaptive_rate_in_n),
        ("besov_index", report.besov_index),
    ] {
        if let Some(value) = value {
            out.push(Quantity { name: format!("study.{name}"), value });
        }
    }
    for x in &report.extrapolations {
        if let Some(value) = x.extrapolated {
            out.push(Quantity {
                name: format!("study.{}.{}_extrapolated", x.part, x.quantity),
                value,
            });
        }
    }
    Ok(out)
}

fn print_rows(rows: &[CheckRow]) {
    println!("{:<36} {:>16} {:>16} {:>14} status", "quantity", "baseline", "current", "tolerance");
    let num = |v: Option<f64>| v.map_or("-".to_string(), |v| format!("{v:.10}"));
    for r in rows {
        let status = match r.status {
            CheckStatus::Pass => "pass",
            CheckStatus::Regressed => "REGRESSED",
            CheckStatus::Missing => "MISSING",
            CheckStatus::New => "new (not in baseline)",
        };
        println!(
            "{:<36} {:>16} {:>16} {:>14} {status}",
            r.name,
            num(r.baseline),
            num(r.current),
            r.tolerance.map_or("-".into(), |t| t.describe())
        );
    }
}
