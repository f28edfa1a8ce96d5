//! The time loop of `cornerflow run` for a case with `[model.time]`: IMEX BDF2 steps, forces
//! and probes after every step, fields every `write_every` steps, and the statistics of the
//! force history.
//!
//! Writes into the output folder: `fields/solution-NNNNNN.vtu` (the state at step N, step 0 is
//! the initial state) and `solution.pvd` listing them (rewritten after each field file, so a
//! viewer can open a run in progress), `forces.csv` (time, Courant number, per force part the
//! volume and surface drag and lift coefficients, and the pressure difference when the case
//! names one), `solution.vtu` (the final state) and `summary.json`. When a step fails, the
//! last good state goes to `last-good.vtu` and the history so far to `forces.csv` before the
//! error is returned.
//!
//! **Statistics.** For every coefficient: mean, amplitude, extrema and the time of the
//! maximum over the whole run and over its second half (the "settled" window, which leaves
//! out the start-up transient of a periodic flow); the Strouhal number `St = f L / U` from
//! the upward zero crossings of the volume-form lift minus its mean over the settled window
//! (see `post::series`).

use std::io::IsTerminal;
use std::path::Path;
use std::time::{Duration, Instant};

use anyhow::Context;
use cornerflow::case::{Case, Equations};
use cornerflow::corners::CornerAnalysis;
use cornerflow::mesh::{Mesh, MeshStats};
use cornerflow::output::table::{write_csv, write_json};
use cornerflow::output::vtu::write_pvd;
use cornerflow::post::{
    self, FluidProperties, PointLocator, ReferenceScales, VolumeForceTerms, signal_stats,
    strouhal_number,
};
use cornerflow::solver::{ImexParams, ImexStepper, SolverParams, StepError, UnsteadyProblem};
use indicatif::{ProgressBar, ProgressStyle};
use serde_json::{Value, json};

use super::args::RunArgs;
use super::progress::Stage;
use super::run::{
    fill_ordering, mesh_json, model_name, peak_memory_bytes, solve_error, solver_kind,
    write_field_vtu, write_vtu_with_psi,
};

/// What the steady part of `run` has prepared for the time loop.
pub struct UnsteadySetup<'a> {
    pub args: &'a RunArgs,
    pub out: &'a Path,
    pub stats: &'a MeshStats,
    pub corners: &'a CornerAnalysis,
    pub started: Instant,
}

/// One row of the force history.
struct Sample {
    time: f64,
    courant: f64,
    /// Per force part: volume drag, volume lift, surface drag, surface lift.
    coefficients: Vec<[f64; 4]>,
    pressure_difference: Option<f64>,
}

/// Runs the time loop of an unsteady case.
pub fn run_unsteady(case: &Case, mesh: &Mesh, setup: &UnsteadySetup) -> anyhow::Result<()> {
    let time = case.model.time.expect("run_unsteady is called for timed cases only");
    let n_steps = step_count(time.dt, time.t_end);
    let stage = Stage::start(
        "solve",
        &format!(
            "unsteady {}, IMEX BDF2 (convection explicit), Δt = {}, {n_steps} steps to t = {}",
            if case.model.equations == Equations::NavierStokes {
                "Navier–Stokes"
            } else {
                "Stokes"
            },
            time.dt,
            n_steps as f64 * time.dt
        ),
    );
    let problem = UnsteadyProblem {
        viscosity: case.fluid.kinematic_viscosity,
        conditions: &case.conditions,
        body_force: case.body_force.as_ref(),
        viscous_form: case.model.viscous_form,
        convection: case.model.equations == Equations::NavierStokes,
    };
    let defaults = ImexParams::new(time.dt);
    let params = ImexParams {
        solver: SolverParams {
            kind: solver_kind(setup.args.linear_solver),
            ordering: fill_ordering(setup.args.ordering),
            ..defaults.solver
        },
        speed_scale: case.fluid.reference_velocity,
        ..defaults
    };
    let mut stepper = ImexStepper::new(mesh, problem, params).map_err(|e| step_error(case, e))?;
    let mut history = History::new(case, mesh, setup.out)?;
    history.record(case, mesh, &stepper, 0.0)?;
    history.write_fields(case, mesh, &stepper, 0)?;
    let bar = progress_bar(n_steps);
    let mut courant_max: f64 = 0.0;
    let mut refinement_steps = 0;
    for _ in 0..n_steps {
        let info = match stepper.step() {
            Ok(info) => info,
            Err(e) => {
                bar.abandon();
                return Err(history.fail(case, mesh, &stepper, step_error(case, e)));
            }
        };
        courant_max = courant_max.max(info.courant);
        refinement_steps += info.refinement_steps;
        history.record(case, mesh, &stepper, info.courant)?;
        if info.step.is_multiple_of(time.write_every) || info.step == n_steps {
            history.write_fields(case, mesh, &stepper, info.step)?;
        }
        bar.report(&info, history.samples.last().expect("recorded above"));
    }
    bar.finish();
    let timings = stepper.timings();
    stage.done(&format!(
        "{} steps, {} unknowns, largest Courant number {courant_max:.3}, {:.2} refinement steps per solve; setup {:.2} s, right-hand sides {:.2} s, solves {:.2} s",
        stepper.steps(),
        stepper.n_unknowns(),
        refinement_steps as f64 / stepper.steps().max(1) as f64,
        timings.setup.as_secs_f64(),
        timings.rhs.as_secs_f64(),
        timings.solve.as_secs_f64(),
    ));
    history.write_csv()?;
    let path = setup.out.join("solution.vtu");
    if case.output.solution {
        write_field_vtu(case, mesh, stepper.field(), &path)?;
    }
    let statistics = history.statistics(case);
    print_statistics(&statistics);
    let summary = json!({
        "case": case.name,
        "source": case.source.display().to_string(),
        "model": model_name(case),
        "reynolds_number": case.fluid.reynolds_number(),
        "mesh": mesh_json(setup.stats),
        "time_stepping": {
            "scheme": "IMEX BDF2 (backward Euler first step), convection extrapolated explicitly",
            "dt": time.dt,
            "steps": stepper.steps(),
            "final_time": stepper.time(),
            "unknowns": stepper.n_unknowns(),
            "max_courant_number": courant_max,
            "mean_refinement_steps": refinement_steps as f64 / stepper.steps().max(1) as f64,
            "timings_s": {
                "setup": timings.setup.as_secs_f64(),
                "right_hand_sides": timings.rhs.as_secs_f64(),
                "solves": timings.solve.as_secs_f64(),
                "forces_and_probes": history.post_time.as_secs_f64(),
                "output": history.output_time.as_secs_f64(),
            },
        },
        "statistics": statistics,
        "corners": serde_json::to_value(&setup.corners.reports)?,
        "wall_time_s": setup.started.elapsed().as_secs_f64(),
        "peak_memory_bytes": peak_memory_bytes(),
    });
    write_json(&setup.out.join("summary.json"), &summary)?;
    eprintln!("results in {}", setup.out.display());
    Ok(())
}

/// Steps of length `dt` that reach `t_end` (rounded up; a `t_end` within 1e-9 relative of a
/// whole number of steps is taken as that number).
fn step_count(dt: f64, t_end: f64) -> usize {
    let ratio = t_end / dt;
    let nearest = ratio.round();
    if (ratio - nearest).abs() <= 1e-9 * ratio.max(1.0) {
        nearest as usize
    } else {
        ratio.ceil() as usize
    }
}

fn step_error(case: &Case, err: StepError) -> anyhow::Error {
    match err {
        StepError::Solve(e) => solve_error(case, e),
        e => {
            anyhow::Error::new(e).context(format!("time stepping {} failed", case.source.display()))
        }
    }
}

/// Forces, probes and field files of a run in progress.
struct History<'a> {
    out: &'a Path,
    locator: Option<PointLocator<'a>>,
    samples: Vec<Sample>,
    pvd: Vec<(f64, String)>,
    /// The stream function's factorised matrix, built at the first write and reused (the mesh
    /// does not change, so every later write pays only a right-hand side and two solves).
    psi_solver: Option<cornerflow::post::StreamFunctionSolver>,
    post_time: Duration,
    output_time: Duration,
}

impl<'a> History<'a> {
    fn new(case: &Case, mesh: &'a Mesh, out: &'a Path) -> anyhow::Result<Self> {
        let locator = match case.pressure_difference {
            Some(_) => Some(PointLocator::new(mesh)?),
            None => None,
        };
        Ok(History {
            out,
            locator,
            samples: Vec::new(),
            pvd: Vec::new(),
            psi_solver: None,
            post_time: Duration::ZERO,
            output_time: Duration::ZERO,
        })
    }

    /// Forces on every reported part (both forms) and the pressure difference at the
    /// stepper's current state.
    fn record(
        &mut self,
        case: &Case,
        mesh: &Mesh,
        stepper: &ImexStepper,
        courant: f64,
    ) -> anyhow::Result<()> {
        let clock = Instant::now();
        let (field, t) = (stepper.field(), stepper.time());
        let fluid = FluidProperties::of_case(case);
        let scales = ReferenceScales::of_case(case);
        let body_force = post::case_body_force(case, t);
        let convection = case.model.equations == Equations::NavierStokes;
        let terms = VolumeForceTerms {
            body_force: body_force.as_deref(),
            convecting_velocity: convection.then_some(&field.velocity[..]),
            time_derivative: Some(stepper.time_derivative()),
            ..VolumeForceTerms::default()
        };
        let mut coefficients = Vec::with_capacity(case.forces.len());
        for &part in &case.forces {
            let volume = post::volume_force(mesh, field, &fluid, part, &terms)?;
            let surface = post::surface_force(mesh, field, &fluid, part)?;
            let (v, s) =
                (post::coefficients(&volume, &scales)?, post::coefficients(&surface, &scales)?);
            coefficients.push([v.drag, v.lift, s.drag, s.lift]);
        }
        let pressure_difference = match (&self.locator, &case.pressure_difference) {
            (Some(locator), Some(pd)) => {
                Some(locator.pressure_difference(field, pd.first, pd.second)? * case.fluid.density)
            }
            _ => None,
        };
        self.samples.push(Sample { time: t, courant, coefficients, pressure_difference });
        self.post_time += clock.elapsed();
        Ok(())
    }

    /// Writes the state at `step` to `fields/` and rewrites `solution.pvd`.
    fn write_fields(
        &mut self,
        case: &Case,
        mesh: &Mesh,
        stepper: &ImexStepper,
        step: usize,
    ) -> anyhow::Result<()> {
        if !case.output.solution {
            return Ok(());
        }
        let clock = Instant::now();
        let dir = self.out.join("fields");
        std::fs::create_dir_all(&dir)
            .with_context(|| format!("creating the output folder {}", dir.display()))?;
        let name = format!("fields/solution-{step:06}.vtu");
        let solver = match self.psi_solver.take() {
            Some(solver) => solver,
            None => cornerflow::post::StreamFunctionSolver::new(mesh)?,
        };
        let psi = solver.solve(mesh, stepper.field())?;
        self.psi_solver = Some(solver);
        write_vtu_with_psi(case, mesh, stepper.field(), &psi, &self.out.join(&name), &[])?;
        self.pvd.push((stepper.time(), name));
        write_pvd(&self.out.join("solution.pvd"), &self.pvd)?;
        self.output_time += clock.elapsed();
        Ok(())
    }

    /// Writes `forces.csv`: one row per recorded state.
    fn write_csv(&self) -> anyhow::Result<()> {
        let header = self.header();
        let header: Vec<&str> = header.iter().map(String::as_str).collect();
        let rows: Vec<Vec<f64>> = self
            .samples
            .iter()
            .map(|s| {
                let mut row = vec![s.time, s.courant];
                s.coefficients.iter().for_each(|c| row.extend_from_slice(c));
                row.extend(s.pressure_difference);
                row
            })
            .collect();
        write_csv(&self.out.join("forces.csv"), &header, &rows)?;
        Ok(())
    }

    fn header(&self) -> Vec<String> {
        let mut header = vec!["t".to_string(), "courant".to_string()];
        let n_parts = self.samples.first().map_or(0, |s| s.coefficients.len());
        for k in 0..n_parts {
            for q in ["cd_volume", "cl_volume", "cd_surface", "cl_surface"] {
                header.push(format!("{q}_{k}"));
            }
        }
        if self.samples.first().is_some_and(|s| s.pressure_difference.is_some()) {
            header.push("pressure_difference".to_string());
        }
        header
    }

    /// Saves what the run has produced so far after a failed step and returns `err` with the
    /// names of those files.
    fn fail(
        &self,
        case: &Case,
        mesh: &Mesh,
        stepper: &ImexStepper,
        err: anyhow::Error,
    ) -> anyhow::Error {
        let path = self.out.join("last-good.vtu");
        let saved =
            write_field_vtu(case, mesh, stepper.field(), &path).and_then(|()| self.write_csv());
        match saved {
            Ok(()) => err.context(format!(
                "the last good state (t = {}) is in {} and the history so far in {}",
                stepper.time(),
                path.display(),
                self.out.join("forces.csv").display()
            )),
            Err(e) => err.context(format!("writing the last good state also failed: {e:#}")),
        }
    }

    /// Statistics per force part and of the pressure difference (see the module docs).
    fn statistics(&self, case: &Case) -> Value {
        let times: Vec<f64> = self.samples.iter().map(|s| s.time).collect();
        let settled = times.len() / 2;
        let window = |values: &[f64]| {
            json!({
                "whole_run": signal_stats(&times, values),
                "settled_second_half": signal_stats(&times[settled..], &values[settled..]),
            })
        };
        let mut parts = Vec::new();
        for (k, &part) in case.forces.iter().enumerate() {
            let series = |q: usize| -> Vec<f64> {
                self.samples.iter().map(|s| s.coefficients[k][q]).collect()
            };
            let lift = series(1);
            let strouhal = strouhal_number(
                &times[settled..],
                &lift[settled..],
                case.fluid.reference_length,
                case.fluid.reference_velocity,
            );
            parts.push(json!({
                "part": case.part_name(part),
                "drag_volume": window(&series(0)),
                "lift_volume": window(&lift),
                "drag_surface": window(&series(2)),
                "lift_surface": window(&series(3)),
                "strouhal_number": strouhal,
                "strouhal_method": "upward zero crossings of the volume-form lift minus its mean, settled window",
            }));
        }
        let dp: Vec<f64> = self.samples.iter().filter_map(|s| s.pressure_difference).collect();
        let pressure_difference =
            (!dp.is_empty()).then(|| json!({ "final": dp.last(), "statistics": window(&dp) }));
        json!({ "forces": parts, "pressure_difference": pressure_difference })
    }
}

fn print_statistics(statistics: &Value) {
    let Some(parts) = statistics["forces"].as_array() else { return };
    for p in parts {
        let get = |q: &str, f: &str| p[q]["whole_run"][f].as_f64().unwrap_or(f64::NAN);
        println!(
            "force on {}: volume form c_D max {:.6} (t = {:.4}), c_L max {:.6} (t = {:.4}); Strouhal number {}",
            p["part"].as_str().unwrap_or("?"),
            get("drag_volume", "max"),
            get("drag_volume", "time_of_max"),
            get("lift_volume", "max"),
            get("lift_volume", "time_of_max"),
            p["strouhal_number"]
                .as_f64()
                .map_or("n/a (fewer than two periods)".into(), |s| format!("{s:.5}")),
        );
    }
    if let Some(dp) = statistics["pressure_difference"]["final"].as_f64() {
        println!("pressure difference at the final time: {dp:.6}");
    }
}

/// A progress bar on a terminal; plain lines about every 5 % otherwise.
enum Progress {
    Bar(ProgressBar),
    Lines { every: usize },
}

fn progress_bar(n_steps: usize) -> Progress {
    if std::io::stderr().is_terminal() {
        let bar = ProgressBar::new(n_steps as u64);
        let style = ProgressStyle::with_template("[step] {bar:30} {pos}/{len} {msg} ({eta})")
            .unwrap_or_else(|_| ProgressStyle::default_bar());
        bar.set_style(style);
        Progress::Bar(bar)
    } else {
        Progress::Lines { every: (n_steps / 20).max(1) }
    }
}

impl Progress {
    fn report(&self, info: &cornerflow::solver::StepInfo, sample: &Sample) {
        let forces = sample
            .coefficients
            .first()
            .map_or(String::new(), |c| format!(", c_D {:.5}, c_L {:.5}", c[0], c[1]));
        let message = format!("t = {:.5}, Courant {:.3}{forces}", info.time, info.courant);
        match self {
            Progress::Bar(bar) => {
                bar.set_position(info.step as u64);
                bar.set_message(message);
            }
            Progress::Lines { every } => {
                if info.step.is_multiple_of(*every) {
                    eprintln!("[step] {}: {message}", info.step);
                }
            }
        }
    }

    fn finish(&self) {
        if let Progress::Bar(bar) = self {
            bar.finish_and_clear();
        }
    }

    fn abandon(&self) {
        if let Progress::Bar(bar) = self {
            bar.abandon();
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn step_count_rounds_up_except_for_whole_multiples() {
        assert_eq!(step_count(0.1, 1.0), 10);
        assert_eq!(step_count(0.3, 1.0), 4);
        assert_eq!(step_count(0.0025, 8.0), 3200);
    }
}
