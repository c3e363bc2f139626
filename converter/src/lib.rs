//! Host-side converter for Kinglet: import a trained dense classifier and its input scaler,
//! quantise it to int8, pack it into the runtime's binary format, and report on it.
#![deny(missing_docs)]

pub mod atomic;
pub mod dataset;
pub mod echo;
pub mod emit_rust;
pub mod error_line;
pub mod fit;
pub mod graph;
pub mod host;
pub mod import;
mod layer_table;
pub mod output_guard;
pub mod pack;
pub mod quantise;
pub mod report;
pub mod scaler_file;
pub mod score;
pub mod search;
pub mod vet;
