//! The converter's intermediate representation: a float dense classifier, as imported and
//! normalised, before quantisation. Every importer (ONNX, the plain JSON description) produces
//! a [`FloatModel`]; calibration, quantisation and packing consume it.

pub use kinglet_runtime::format::{Activation, OutputKind};

/// What the saved input scaler was, for reports. The arithmetic is always the same affine map.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ScalerKind {
    /// `(x - mean) / std` per feature (a standardising scaler).
    Standardise,
    /// `(x - min) / (max - min)` per feature, possibly onto another range.
    MinMax,
    /// One factor (and offset) for every feature, such as pixel / 255.
    Uniform,
    /// A per-feature affine map of unknown origin (for example constant graph nodes).
    Affine,
}

/// The input scaler as an affine map applied to raw inputs: `y[i] = (x[i] - offset[i]) * scale[i]`.
///
/// `offset` and `scale` have length 1 (the same for every feature) or the model's input width.
#[derive(Debug, Clone, PartialEq)]
pub struct Scaler {
    /// Where the scaler came from.
    pub kind: ScalerKind,
    /// Subtracted from each raw feature.
    pub offset: Vec<f32>,
    /// Multiplied after the subtraction.
    pub scale: Vec<f32>,
}

/// One dense (fully connected) layer: `y = act(W x + b)`.
#[derive(Debug, Clone, PartialEq)]
pub struct DenseLayer {
    /// Input width.
    pub inputs: usize,
    /// Output width.
    pub outputs: usize,
    /// Row-major `[outputs][inputs]`: `weights[o * inputs + i]` multiplies input `i` for output `o`.
    pub weights: Vec<f32>,
    /// One bias per output.
    pub bias: Vec<f32>,
    /// Activation after the affine map.
    pub activation: Activation,
}

/// A float dense classifier: optional scaler, a chain of dense layers, an output function.
#[derive(Debug, Clone, PartialEq)]
pub struct FloatModel {
    /// Width of the raw input vector.
    pub input_len: usize,
    /// The saved input scaler, if the model carries one.
    pub scaler: Option<Scaler>,
    /// Dense layers in order; the first takes `input_len` inputs.
    pub layers: Vec<DenseLayer>,
    /// What is applied to the last layer's outputs.
    pub output: OutputKind,
    /// Class labels, one per class (empty when the source has none).
    pub labels: Vec<String>,
}
