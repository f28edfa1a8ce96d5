//! The command implementations: each reads its inputs, calls the library stages in order and
//! reports progress on standard error. Only this layer uses `anyhow`.

pub mod args;
mod check;
mod corners;
mod eddies;
mod export;
mod mesh;
mod progress;
mod run;
mod study;
mod unsteady;
mod validate;

use std::path::Path;

use args::{Cli, Command};
use cornerflow::case::{Case, CaseError};

/// Exit code for a run that failed after its input was accepted.
pub const EXIT_RUN_FAILED: u8 = 1;
/// Exit code for bad input (case file, geometry, options).
pub const EXIT_BAD_INPUT: u8 = 2;

/// Marks an error as caused by bad input (exit code 2).
#[derive(Debug, thiserror::Error)]
#[error("{0}")]
pub struct BadInput(pub String);

/// Runs the command.
pub fn dispatch(cli: Cli) -> anyhow::Result<()> {
    // faer's own threading was measured slower than sequential on 2 cores (stack notes §2).
    faer::set_global_parallelism(faer::Par::Seq);
    match &cli.command {
        Command::Mesh(args) => mesh::run(args),
        Command::Run(args) => run::run(args),
        Command::Corners(args) => corners::run(args),
        Command::Validate(args) => validate::run(args),
        Command::Study(args) => study::run(args),
        Command::Check(args) => check::run(args),
    }
}

/// Loads a case file; every failure is bad input.
pub fn load_case(path: &Path) -> anyhow::Result<Case> {
    Ok(Case::load(path)?)
}

/// The exit code for an error: 2 when any error in the chain is bad input, else 1.
pub fn exit_code(err: &anyhow::Error) -> u8 {
    let bad_input = err.chain().any(|e| e.is::<BadInput>() || e.is::<CaseError>());
    if bad_input { EXIT_BAD_INPUT } else { EXIT_RUN_FAILED }
}
