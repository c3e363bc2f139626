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
            eprintln!("kinglet: error: {}", one_line(&e));
            ExitCode::from(2)
        }
    }
}

/// The error and its causes on one line, outermost first. Many library errors already carry
/// their source in their own message, so a cause whose text the line already holds is left
/// out (printing the plain chain repeated it, up to three times).
fn one_line(e: &anyhow::Error) -> String {
    let mut line = String::new();
    for cause in e.chain() {
        let text = cause.to_string();
        if line.contains(&text) {
            continue;
        }
        if !line.is_empty() {
            line.push_str(": ");
        }
        line.push_str(&text);
    }
    line
}
