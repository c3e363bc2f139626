//! The `kinglet` command-line tool: a thin layer that turns arguments into calls of the
//! `kinglet-converter` library and errors into one-line causes and exit codes.
//!
//! Exit codes: 0 success; 1 a check the user asked for did not pass (a model that does not fit,
//! an accuracy drop over the limit); 2 bad input or any other error.
use clap::error::ErrorKind;
use clap::Parser;
use std::process::ExitCode;

mod commands;

fn main() -> ExitCode {
    let cli = match commands::Cli::try_parse() {
        Ok(cli) => cli,
        Err(e) => return usage_error(&e),
    };
    match commands::run(cli) {
        Ok(commands::Outcome::Pass) => ExitCode::SUCCESS,
        Ok(commands::Outcome::CheckFailed) => ExitCode::from(1),
        Err(e) => {
            // Each library error states only its own level; the chain is printed once.
            eprintln!(
                "kinglet: error: {}",
                cut_long_words(&kinglet_converter::error_line::one_line(e.as_ref()))
            );
            ExitCode::from(2)
        }
    }
}

/// A command line clap could not take. `--help` and `--version` (and a bare `kinglet`, which
/// shows the help) print as clap prints them; every other usage error becomes the documented
/// one line `kinglet: error: <cause>` with exit code 2, instead of clap's usage block.
fn usage_error(e: &clap::Error) -> ExitCode {
    match e.kind() {
        ErrorKind::DisplayHelp
        | ErrorKind::DisplayVersion
        | ErrorKind::DisplayHelpOnMissingArgumentOrSubcommand => e.exit(),
        _ => {
            eprintln!("kinglet: error: {}", clap_one_line(&e.render().to_string()));
            ExitCode::from(2)
        }
    }
}

/// Clap's rendered error (`error: …`, indented items, `tip:` lines, then `Usage:` and a pointer
/// to `--help`) as one line: the message, its items after the colon, tips after a semicolon.
fn clap_one_line(rendered: &str) -> String {
    let head = rendered.split("\nUsage:").next().unwrap_or(rendered);
    let mut message = String::new();
    let mut items: Vec<&str> = Vec::new();
    let mut tips: Vec<&str> = Vec::new();
    for line in head.lines().map(str::trim).filter(|l| !l.is_empty()) {
        if line.starts_with("For more information") {
            continue;
        }
        if let Some(tip) = line.strip_prefix("tip: ") {
            tips.push(tip);
        } else if message.is_empty() {
            message = line.strip_prefix("error: ").unwrap_or(line).to_string();
        } else {
            items.push(line);
        }
    }
    if !items.is_empty() {
        message.push(' ');
        message.push_str(&items.join(", "));
    }
    for tip in tips {
        message.push_str("; ");
        message.push_str(tip);
    }
    message.push_str(" (see --help)");
    cut_long_words(&message)
}

/// The last guard on the one-line rule: any run of non-blank characters longer than
/// [`MAX_WORD`] (an echoed value nobody cut before) is cut to its start and its length.
fn cut_long_words(line: &str) -> String {
    line.split(' ')
        .map(|w| {
            let n = w.chars().count();
            if n > MAX_WORD {
                let head: String = w.chars().take(32).collect();
                format!("{head}… ({n} characters)")
            } else {
                w.to_string()
            }
        })
        .collect::<Vec<_>>()
        .join(" ")
}

/// Longest word of an error line left whole (paths in deep directories stay readable).
const MAX_WORD: usize = 240;

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn clap_errors_become_one_line() {
        let rendered = "error: the following required arguments were not provided:\n  --ram <RAM>\n  --board <BOARD>\n\nUsage: kinglet budget --ram <RAM> --board <BOARD> <BLOB>\n\nFor more information, try '--help'.\n";
        assert_eq!(
            clap_one_line(rendered),
            "the following required arguments were not provided: --ram <RAM>, --board <BOARD> (see --help)"
        );
        let rendered = "error: unexpected argument '--flot' found\n\n  tip: a similar argument exists: '--float'\n\nUsage: kinglet pack --float <MODEL>\n\nFor more information, try '--help'.\n";
        assert_eq!(
            clap_one_line(rendered),
            "unexpected argument '--flot' found; a similar argument exists: '--float' (see --help)"
        );
    }

    #[test]
    fn long_words_are_cut() {
        let line = format!("bad value {} here", "7".repeat(100_000));
        let cut = cut_long_words(&line);
        assert!(cut.len() < 100, "{cut}");
        assert!(cut.contains("(100000 characters) here"), "{cut}");
        assert_eq!(cut_long_words("a b  c"), "a b  c");
    }
}
