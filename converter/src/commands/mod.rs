//! Subcommands, one module each.
use clap::{Parser, Subcommand};

mod budget;
mod emit_rust;
mod inspect;
mod out;
mod pack;
mod pack_search;
mod progress;
mod rows;
mod score;
mod vet;

/// Puts small trained classifiers onto microcontrollers.
#[derive(Debug, Parser)]
#[command(name = "kinglet", version, about)]
pub struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Debug, Subcommand)]
enum Command {
    /// Import a trained model (ONNX or plain JSON), quantise it to int8 (or keep f32) and write
    /// the blob the firmware links.
    Pack(pack::Args),
    /// Report what a packed blob holds: layers, parameters, flash and RAM.
    Inspect(inspect::Args),
    /// Compare an int8 blob with its float model on rows: accuracy, agreement, per-layer SQNR.
    Vet(vet::Args),
    /// Run a blob on rows as the firmware does and write each row's class, scores and raw
    /// outputs (CSV, JSON, or test vectors with exact bits).
    Score(score::Args),
    /// Check a blob against a part's flash and RAM (built-in profile or custom sizes).
    Budget(budget::Args),
    /// Write a blob as a Rust source file: the bytes as a static array, sizes as constants.
    EmitRust(emit_rust::Args),
}

/// What a successful run concluded.
pub enum Outcome {
    /// Everything asked for passed.
    Pass,
    /// A requested check failed (exit code 1).
    CheckFailed,
}

/// Runs the parsed command.
pub fn run(cli: Cli) -> anyhow::Result<Outcome> {
    match cli.command {
        Command::Pack(a) => pack::run(a),
        Command::Inspect(a) => inspect::run(a),
        Command::Vet(a) => vet::run(a),
        Command::Score(a) => score::run(a),
        Command::Budget(a) => budget::run(a),
        Command::EmitRust(a) => emit_rust::run(a),
    }
}
