//! Command-line arguments (parsing only; see `settings` for the second stage that reads the
//! case file). The doc comments here are the single source of `--help`.

use std::path::PathBuf;

use clap::{Args, Parser, Subcommand, ValueEnum};

/// cornerflow: 2D incompressible viscous flow (Stokes, Navier–Stokes) on polygonal domains
/// with sharp corners — meshing, solving, forces, and corner-singularity diagnostics.
#[derive(Debug, Parser)]
#[command(name = "cornerflow", version, about, long_about = None)]
pub struct Cli {
    #[command(subcommand)]
    pub command: Command,
}

#[derive(Debug, Subcommand)]
pub enum Command {
    /// Mesh a case and write the mesh as a VTK file, with a summary on the terminal.
    Mesh(MeshArgs),
    /// Solve a case (the built-in default case when none is given) and write the results.
    Run(RunArgs),
    /// Analyse the corners of a case's domain: angles, singular exponents, regularity.
    Corners(CornersArgs),
    /// Run built-in validation cases and compare with published reference values.
    Validate(ValidateArgs),
    /// Mesh-convergence study: solve on a sequence of uniform, graded or adaptive meshes and
    /// report errors (or level differences), the error estimator, observed rates, regularity
    /// indices and extrapolated forces.
    Study(StudyArgs),
    /// Regression check: run a case and compare its forces and exponents with a baseline.
    Check(CheckArgs),
}

#[derive(Debug, Args)]
pub struct CheckArgs {
    /// The case file (TOML).
    #[arg(value_name = "CASE")]
    pub case: PathBuf,
    /// The baseline JSON file (quantities with tolerances).
    #[arg(long, value_name = "FILE")]
    pub baseline: PathBuf,
    /// Write (or overwrite) the baseline from this run, with default tolerances.
    #[arg(long)]
    pub update: bool,
    /// Also run a uniform convergence study with this many levels (≥ 2) and check its last
    /// observed rates and Richardson-extrapolated forces (steady cases).
    #[arg(long, value_name = "N")]
    pub study_levels: Option<usize>,
    /// Refinement of that study: `uniform` (rates in h, Sobolev-type index, extrapolated
    /// forces), `graded`, or `adaptive` (also the fitted rate in N and the Besov-type index).
    #[arg(long, value_enum, default_value_t = RefineMode::Uniform)]
    pub study_refine: RefineMode,
    #[command(flatten)]
    pub meshing: MeshingOptions,
}

#[derive(Debug, Args)]
pub struct StudyArgs {
    /// The case file (TOML); a steady case.
    #[arg(value_name = "CASE")]
    pub case: PathBuf,
    /// Number of meshes: the case's mesh and `N − 1` refinements (adaptive studies need many
    /// levels, e.g. 20–30, since each adds only the marked triangles).
    #[arg(long, value_name = "N", default_value_t = 4)]
    pub levels: usize,
    /// How the meshes are made: `uniform` (nested, every triangle split into four), `graded`
    /// (meshed anew per level with the sizes halved and power-law grading toward every corner
    /// that limits the P2 rate, from the corner analysis) or `adaptive` (nested: Dörfler
    /// marking on the residual error estimator, newest-vertex bisection).
    #[arg(long, value_enum, default_value_t = RefineMode::Uniform)]
    pub refine: RefineMode,
    /// Adaptive studies: the fraction θ of the squared estimator that the marked triangles
    /// carry (Dörfler marking), in (0, 1].
    #[arg(long, value_name = "THETA", default_value_t = cornerflow::study::DEFAULT_MARKING_FRACTION)]
    pub marking_fraction: f64,
    #[command(flatten)]
    pub meshing: MeshingOptions,
}

/// Refinement of a convergence study.
#[derive(Clone, Copy, Debug, PartialEq, Eq, ValueEnum)]
pub enum RefineMode {
    Uniform,
    Graded,
    Adaptive,
}

#[derive(Debug, Args)]
pub struct ValidateArgs {
    /// Cases to run: `all` (default) or names among kovasznay, l-shape,
    /// profile-trailing-edge, step-stokes, cavity-eddies, cylinder-steady, cavity-100,
    /// cavity-1000, cylinder-inflow, cylinder-periodic.
    #[arg(value_name = "NAME", default_values_t = vec!["all".to_string()])]
    pub names: Vec<String>,
    /// Coarse meshes and relaxed tolerances (the subset CI runs); skips the time-dependent
    /// cases.
    #[arg(long)]
    pub quick: bool,
    /// Also write the table as JSON to this file.
    #[arg(long, value_name = "FILE")]
    pub json: Option<PathBuf>,
}

/// Options shared by the commands that mesh a case.
#[derive(Clone, Debug, Args)]
pub struct MeshingOptions {
    /// Output folder (default: the case's `output.directory`).
    #[arg(short = 'o', long = "output", value_name = "DIR")]
    pub output: Option<PathBuf>,
    /// Mesh even when the estimated triangle count exceeds the case's cap.
    #[arg(long)]
    pub force: bool,
}

#[derive(Debug, Args)]
pub struct MeshArgs {
    /// The case file (TOML).
    #[arg(value_name = "CASE")]
    pub case: PathBuf,
    #[command(flatten)]
    pub meshing: MeshingOptions,
}

#[derive(Debug, Args)]
pub struct RunArgs {
    /// The case file (TOML); omit it to run the built-in default case.
    #[arg(value_name = "CASE")]
    pub case: Option<PathBuf>,
    #[command(flatten)]
    pub meshing: MeshingOptions,
    /// Number of threads for assembly (default: all cores).
    #[arg(long, value_name = "N")]
    pub threads: Option<usize>,
    /// Sparse direct solver for the saddle-point system: `ldlt` (symmetric, regularized, with
    /// iterative refinement; fastest) or `lu` (general LU; slower, kept as a fallback).
    #[arg(long, value_enum, default_value_t = LinearSolver::Ldlt)]
    pub linear_solver: LinearSolver,
    /// Solver of the nonsymmetric Newton systems of steady Navier–Stokes cases: `reuse-lu`
    /// (GMRES preconditioned by the LU of an earlier Newton matrix, refactorised only when
    /// GMRES stalls; fastest), `lu` (a fresh sparse LU every step) or `stokes-gmres` (GMRES
    /// preconditioned by the Stokes `LDLᵀ`; least memory, for slow flows only).
    #[arg(long, value_enum, default_value_t = NewtonSolver::ReuseLu)]
    pub newton_solver: NewtonSolver,
    /// Fill-reducing ordering of the `LDLᵀ`: `nested-dissection` (from the mesh geometry;
    /// fastest) or `amd` (approximate minimum degree on the matrix graph).
    #[arg(long, value_enum, default_value_t = Ordering::NestedDissection)]
    pub ordering: Ordering,
    /// Also write the assembled system of a steady Stokes case to this folder:
    /// `matrix.mtx` and `rhs.mtx` (Matrix Market) and `info.json` (sizes, the solver's own
    /// timings and residual), for timing other sparse solvers on the same matrix.
    #[arg(long, value_name = "DIR")]
    pub export_system: Option<PathBuf>,
}

/// Choice of the sparse direct solver.
#[derive(Clone, Copy, Debug, PartialEq, Eq, ValueEnum)]
pub enum LinearSolver {
    Ldlt,
    Lu,
}

/// Choice of the fill-reducing ordering.
#[derive(Clone, Copy, Debug, PartialEq, Eq, ValueEnum)]
pub enum Ordering {
    NestedDissection,
    Amd,
}

/// Choice of the solver of the nonsymmetric Newton systems.
#[derive(Clone, Copy, Debug, PartialEq, Eq, ValueEnum)]
pub enum NewtonSolver {
    ReuseLu,
    Lu,
    StokesGmres,
}

#[derive(Debug, Args)]
pub struct CornersArgs {
    /// The case file (TOML).
    #[arg(value_name = "CASE")]
    pub case: PathBuf,
    /// Also write the analysis as JSON to this file.
    #[arg(long, value_name = "FILE")]
    pub json: Option<PathBuf>,
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn mesh_takes_a_case_an_output_folder_and_force() {
        let cli =
            Cli::try_parse_from(["cornerflow", "mesh", "c.toml", "-o", "out", "--force"]).unwrap();
        let Command::Mesh(args) = cli.command else { panic!("expected mesh") };
        assert_eq!(args.case, PathBuf::from("c.toml"));
        assert_eq!(args.meshing.output, Some(PathBuf::from("out")));
        assert!(args.meshing.force);
    }

    #[test]
    fn run_without_a_case_uses_the_default() {
        let cli = Cli::try_parse_from(["cornerflow", "run"]).unwrap();
        let Command::Run(args) = cli.command else { panic!("expected run") };
        assert!(args.case.is_none());
        assert_eq!(args.linear_solver, LinearSolver::Ldlt);
        let cli = Cli::try_parse_from(["cornerflow", "run", "--linear-solver", "lu"]).unwrap();
        let Command::Run(args) = cli.command else { panic!("expected run") };
        assert_eq!(args.linear_solver, LinearSolver::Lu);
        assert!(Cli::try_parse_from(["cornerflow", "run", "--linear-solver", "cg"]).is_err());
    }

    #[test]
    fn run_takes_a_newton_solver() {
        let cli = Cli::try_parse_from(["cornerflow", "run"]).unwrap();
        let Command::Run(args) = cli.command else { panic!("expected run") };
        assert_eq!(args.newton_solver, NewtonSolver::ReuseLu);
        assert_eq!(args.ordering, Ordering::NestedDissection);
        let cli = Cli::try_parse_from(["cornerflow", "run", "--ordering", "amd"]).unwrap();
        let Command::Run(args) = cli.command else { panic!("expected run") };
        assert_eq!(args.ordering, Ordering::Amd);
        let cli = Cli::try_parse_from(["cornerflow", "run", "--newton-solver", "lu"]).unwrap();
        let Command::Run(args) = cli.command else { panic!("expected run") };
        assert_eq!(args.newton_solver, NewtonSolver::Lu);
        let cli =
            Cli::try_parse_from(["cornerflow", "run", "--newton-solver", "stokes-gmres"]).unwrap();
        let Command::Run(args) = cli.command else { panic!("expected run") };
        assert_eq!(args.newton_solver, NewtonSolver::StokesGmres);
        assert!(Cli::try_parse_from(["cornerflow", "run", "--newton-solver", "cg"]).is_err());
    }

    #[test]
    fn run_takes_an_export_folder() {
        let cli = Cli::try_parse_from(["cornerflow", "run"]).unwrap();
        let Command::Run(args) = cli.command else { panic!("expected run") };
        assert!(args.export_system.is_none());
        let cli = Cli::try_parse_from(["cornerflow", "run", "--export-system", "sys"]).unwrap();
        let Command::Run(args) = cli.command else { panic!("expected run") };
        assert_eq!(args.export_system, Some(PathBuf::from("sys")));
        assert!(Cli::try_parse_from(["cornerflow", "run", "--export-system"]).is_err());
    }

    #[test]
    fn validate_defaults_to_all_and_takes_names_and_quick() {
        let cli = Cli::try_parse_from(["cornerflow", "validate"]).unwrap();
        let Command::Validate(args) = cli.command else { panic!("expected validate") };
        assert_eq!(args.names, vec!["all".to_string()]);
        assert!(!args.quick);
        let cli =
            Cli::try_parse_from(["cornerflow", "validate", "kovasznay", "cavity-100", "--quick"])
                .unwrap();
        let Command::Validate(args) = cli.command else { panic!("expected validate") };
        assert_eq!(args.names, vec!["kovasznay".to_string(), "cavity-100".to_string()]);
        assert!(args.quick);
    }

    #[test]
    fn study_takes_levels_and_a_refinement_mode() {
        let cli = Cli::try_parse_from(["cornerflow", "study", "c.toml", "--levels", "3"]).unwrap();
        let Command::Study(args) = cli.command else { panic!("expected study") };
        assert_eq!(args.levels, 3);
        assert_eq!(args.refine, RefineMode::Uniform);
        assert!(Cli::try_parse_from(["cornerflow", "study", "c.toml", "--refine", "x"]).is_err());
    }

    #[test]
    fn check_needs_a_baseline_and_takes_update() {
        let cli =
            Cli::try_parse_from(["cornerflow", "check", "c.toml", "--baseline", "b.json"]).unwrap();
        let Command::Check(args) = cli.command else { panic!("expected check") };
        assert_eq!(args.baseline, PathBuf::from("b.json"));
        assert!(!args.update);
        assert!(Cli::try_parse_from(["cornerflow", "check", "c.toml"]).is_err());
    }

    #[test]
    fn corners_takes_a_json_path_and_unknown_options_are_rejected() {
        let cli =
            Cli::try_parse_from(["cornerflow", "corners", "c.toml", "--json", "c.json"]).unwrap();
        let Command::Corners(args) = cli.command else { panic!("expected corners") };
        assert_eq!(args.json, Some(PathBuf::from("c.json")));
        assert!(Cli::try_parse_from(["cornerflow", "mesh", "c.toml", "--bogus"]).is_err());
    }
}
