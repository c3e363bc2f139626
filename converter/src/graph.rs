//! The converter's intermediate representation: a float dense classifier, as imported and
//! normalised, before quantisation. Every importer (ONNX, the plain JSON description) produces
//! a [`FloatModel`]; calibration, quantisation and packing consume it.

pub use kinglet_runtime::unstable::pointwise::{Kind as PointwiseKind, Pointwise};
pub use kinglet_runtime::unstable::wire::format::OutputKind;

/// A layer's activation in the float model.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Activation {
    /// No activation.
    Linear,
    /// `max(0, x)` (the fused ReLU).
    Relu,
    /// Any other pointwise function (f32: its formula; int8: a table made at pack time).
    Pointwise(Pointwise),
}

impl Activation {
    /// The activation at `x`, in f32 as the runtime computes it.
    pub fn eval(&self, x: f32) -> f32 {
        match self {
            Activation::Linear => x,
            Activation::Relu => x.max(0.0),
            Activation::Pointwise(p) => p.eval(x),
        }
    }

    /// The name reports use (`linear`, `relu`, `tanh`, ...).
    pub fn name(&self) -> &'static str {
        match self {
            Activation::Linear => "linear",
            Activation::Relu => "relu",
            Activation::Pointwise(p) => p.kind.name(),
        }
    }
}

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

impl Scaler {
    /// Applies the scaler to one raw row, in f32 as the runtime does: `(x - offset) * scale`.
    pub fn apply(&self, raw: &[f32]) -> Vec<f32> {
        raw.iter()
            .enumerate()
            .map(|(i, &x)| {
                let off = self
                    .offset
                    .get(i)
                    .or(self.offset.first())
                    .copied()
                    .unwrap_or(0.0);
                let sc = self
                    .scale
                    .get(i)
                    .or(self.scale.first())
                    .copied()
                    .unwrap_or(1.0);
                (x - off) * sc
            })
            .collect()
    }
}

impl FloatModel {
    /// Number of classes the model tells apart (2 for a single sigmoid output).
    pub fn classes(&self) -> usize {
        match (self.output, self.layers.last()) {
            (OutputKind::Sigmoid, _) => 2,
            (_, Some(l)) => l.outputs,
            (_, None) => 0,
        }
    }

    /// Straightforward f64-accumulating forward pass of the imported model, used to check
    /// importers against reference evaluators. Returns the output scores (after softmax or
    /// sigmoid, if the model has one). Panics never; a width mismatch yields fewer outputs.
    pub fn forward_reference(&self, raw: &[f32]) -> Vec<f64> {
        let mut x: Vec<f64> = match &self.scaler {
            Some(s) => s.apply(raw).into_iter().map(f64::from).collect(),
            None => raw.iter().map(|&v| f64::from(v)).collect(),
        };
        for layer in &self.layers {
            let mut y = Vec::with_capacity(layer.outputs);
            for o in 0..layer.outputs {
                let row = layer
                    .weights
                    .get(o * layer.inputs..(o + 1) * layer.inputs)
                    .unwrap_or(&[]);
                let dot: f64 = row.iter().zip(&x).map(|(&w, &v)| f64::from(w) * v).sum();
                let v = dot + f64::from(layer.bias.get(o).copied().unwrap_or(0.0));
                y.push(match layer.activation {
                    Activation::Relu => v.max(0.0),
                    Activation::Linear => v,
                    Activation::Pointwise(p) => f64::from(p.eval(v as f32)),
                });
            }
            x = y;
        }
        match self.output {
            OutputKind::Softmax => {
                let m = x.iter().copied().fold(f64::NEG_INFINITY, f64::max);
                let e: Vec<f64> = x.iter().map(|v| (v - m).exp()).collect();
                let s: f64 = e.iter().sum();
                e.into_iter().map(|v| v / s).collect()
            }
            OutputKind::Sigmoid => x.into_iter().map(|v| 1.0 / (1.0 + (-v).exp())).collect(),
            OutputKind::OneVsRest => {
                let p: Vec<f64> = x.iter().map(|v| 1.0 / (1.0 + (-v).exp())).collect();
                let s: f64 = p.iter().sum();
                p.into_iter().map(|v| v / s).collect()
            }
            OutputKind::Logits => x,
        }
    }
}
