//! The command implementations: each reads its inputs, calls the library stages in order and
//! reports progress on standard error. Only this layer uses `anyhow`.

pub mod args;

use args::{Cli, Command};

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
    match cli.command {
        Command::Mesh(_) | Command::Run(_) | Command::Corners(_) => {
            Err(anyhow::anyhow!("not wired yet"))
        }
    }
}

/// The exit code for an error: 2 when any error in the chain is bad input, else 1.
pub fn exit_code(err: &anyhow::Error) -> u8 {
    let bad_input = err.chain().any(|e| e.is::<BadInput>());
    if bad_input { EXIT_BAD_INPUT } else { EXIT_RUN_FAILED }
}
