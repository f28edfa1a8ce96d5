//! The `cornerflow` command-line tool: argument parsing and the edge where library errors
//! become messages and exit codes (0 ok, 1 the run failed, 2 bad input).

use std::process::ExitCode;

use clap::Parser;

mod cli;

fn main() -> ExitCode {
    let args = cli::args::Cli::parse();
    match cli::dispatch(args) {
        Ok(()) => ExitCode::SUCCESS,
        Err(err) => {
            eprintln!("error: {err:#}");
            ExitCode::from(cli::exit_code(&err))
        }
    }
}
