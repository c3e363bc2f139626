//! Importers: each turns a trained model file into a [`crate::graph::FloatModel`].

pub mod onnx;
pub mod plain;
