//! Host-side converter for Kinglet: import a trained dense classifier and its input scaler,
//! quantise it to int8, pack it into the runtime's binary format, and report on it.
#![deny(missing_docs)]

pub mod graph;
pub mod import;
pub mod dataset;
pub mod scaler_file;
pub mod pack;
pub mod quantise;
pub mod atomic;
pub mod report;
pub mod vet;
pub mod fit;
pub mod emit_rust;
