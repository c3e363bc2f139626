//! The `kinglet` command-line tool: a thin layer that turns arguments into calls of the
//! `kinglet-converter` library and errors into one-line causes and exit codes.
//!
//! Exit codes: 0 success; 1 a check the user asked for did not pass (a model that does not fit,
//! an accuracy drop over the limit); 2 bad input or any other error.
use clap::Parser;
use std::process::ExitCode;

mod commands;

fn main() -> ExitCode {
    let cli = commands::Cli::parse();
    match commands::run(cli) {
        Ok(commands::Outcome::Pass) => ExitCode::SUCCESS,
        Ok(commands::Outcome::CheckFailed) => ExitCode::from(1),
        Err(e) => {
            // One line: the chain of causes, outermost first.
            eprintln!("kinglet: error: {e:#}");
            ExitCode::from(2)
        }
    }
}
