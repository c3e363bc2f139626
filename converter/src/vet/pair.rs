//! The two models being compared: a float (f32) blob and an int8 blob of the same network.
use anyhow::{bail, Result};
use kinglet_runtime::unstable::pointwise::activation_name;
use kinglet_runtime::unstable::wire::format::{OutputKind, Precision};
use kinglet_runtime::Model;

/// A float model and its int8 counterpart, checked to have the same shape.
#[derive(Debug, Clone)]
pub struct ModelPair<'a> {
    /// The f32 reference.
    pub float: Model<'a>,
    /// The int8 model under test.
    pub int8: Model<'a>,
}

impl<'a> ModelPair<'a> {
    /// Checks that `float` is f32, `int8` is int8, and that both have the same input width,
    /// layers (widths and activations), output function and class labels.
    pub fn new(float: Model<'a>, int8: Model<'a>) -> Result<Self> {
        if float.precision() != Precision::F32 {
            bail!("the float model is an int8 blob; give the float model (.onnx, .json or an f32 .kgl) first and the int8 blob second");
        }
        if int8.precision() != Precision::Int8 {
            bail!("the second model is an f32 blob; give the int8 blob (made by `kinglet pack --calibration ...`)");
        }
        if float.input_len() != int8.input_len() {
            bail!(
                "the models take different inputs: float {} features, int8 {}",
                float.input_len(),
                int8.input_len()
            );
        }
        let fl: Vec<_> = float.layers().map(|l| shape(l.desc)).collect();
        let ql: Vec<_> = int8.layers().map(|l| shape(l.desc)).collect();
        if fl != ql {
            bail!(
                "the models have different layers: float {}, int8 {}",
                describe(&fl),
                describe(&ql)
            );
        }
        if float.desc().output != int8.desc().output {
            bail!(
                "the models have different output functions: float {}, int8 {}",
                output_name(float.desc().output),
                output_name(int8.desc().output)
            );
        }
        let (lf, lq): (Vec<_>, Vec<_>) = (float.labels().collect(), int8.labels().collect());
        if !lf.is_empty() && !lq.is_empty() && lf != lq {
            bail!(
                "the models have different class labels: float [{}], int8 [{}]",
                lf.join(", "),
                lq.join(", ")
            );
        }
        Ok(ModelPair { float, int8 })
    }

    /// Whether the int8 blob takes the raw input with the float model's scaler folded into its
    /// first layer (`pack --fold-scaler`): the float model scales its input, the int8 blob has
    /// no scaler. Its input tensor is then compared with the raw row, not the scaled one.
    pub fn raw_int8_input(&self) -> bool {
        self.float.desc().scaler.is_some() && self.int8.desc().scaler.is_none()
    }

    /// Number of traced tensors: the input and each layer's output.
    pub fn stages(&self) -> usize {
        self.int8.layers().count() + 1
    }

    /// Number of classes.
    pub fn classes(&self) -> usize {
        self.int8.classes()
    }

    /// Class names from the blobs (the int8 blob's, else the float's); empty if neither has any.
    pub fn class_names(&self) -> Vec<String> {
        let q: Vec<String> = self.int8.labels().map(str::to_string).collect();
        if q.is_empty() {
            self.float.labels().map(str::to_string).collect()
        } else {
            q
        }
    }

    /// Name and width of each traced tensor.
    pub fn stage_names(&self) -> Vec<(String, usize)> {
        let layers: Vec<_> = self.int8.layers().collect();
        let last = layers.len();
        let input = if self.raw_int8_input() {
            "input (raw, quantised; scaler folded into layer 1)"
        } else {
            "input (scaled, quantised)"
        };
        let mut out = vec![(input.to_string(), self.int8.input_len())];
        for (k, l) in layers.iter().enumerate() {
            let act = activation_name(l.desc);
            let name = if k + 1 == last && self.int8.desc().output != OutputKind::Logits {
                format!(
                    "layer {} ({act}, before {})",
                    k + 1,
                    output_name(self.int8.desc().output)
                )
            } else {
                format!("layer {} ({act})", k + 1)
            };
            out.push((name, l.desc.outputs as usize));
        }
        out
    }

    /// What the scores are, for reports.
    pub fn score_unit(&self) -> &'static str {
        match self.int8.desc().output {
            OutputKind::Softmax => "softmax probabilities",
            OutputKind::Sigmoid => "sigmoid probability",
            OutputKind::OneVsRest => "one-vs-rest probabilities",
            OutputKind::Logits => "raw scores (no probabilities)",
        }
    }
}

/// Widths and activation name: an int8 layer's table and an f32 layer's parameters of the
/// same activation differ in bytes, not in kind.
fn shape(d: &kinglet_runtime::unstable::wire::format::LayerDesc<'_>) -> (u32, u32, &'static str) {
    (d.inputs, d.outputs, activation_name(d))
}

fn describe(layers: &[(u32, u32, &'static str)]) -> String {
    let parts: Vec<String> = layers
        .iter()
        .map(|(i, o, a)| format!("{i}→{o} {a}"))
        .collect();
    format!("[{}]", parts.join(", "))
}

/// The output function's name.
pub fn output_name(o: OutputKind) -> &'static str {
    match o {
        OutputKind::Softmax => "softmax",
        OutputKind::Sigmoid => "sigmoid",
        OutputKind::OneVsRest => "one-vs-rest",
        OutputKind::Logits => "logits",
    }
}
