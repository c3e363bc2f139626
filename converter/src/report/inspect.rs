//! What a packed blob holds, as data: shapes, parameters, bytes, memory, quantisation.
use kinglet_runtime::unstable::pointwise::activation_name;
use kinglet_runtime::unstable::wire::format::{OutputKind, Precision, WeightLayout};
use kinglet_runtime::Model;
use serde::Serialize;

/// One layer of the report.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct LayerRow {
    /// 1-based layer number.
    pub layer: usize,
    /// Input width.
    pub inputs: usize,
    /// Output width.
    pub outputs: usize,
    /// "relu" or "linear".
    pub activation: String,
    /// The weights' precision: "int8", "int4" (`FORMAT.md` §3.5) or "f32".
    pub weights: String,
    /// `inputs · outputs + outputs`.
    pub parameters: usize,
    /// Multiply-accumulates per inference.
    pub macs: usize,
    /// Bytes of this layer's tensors in the blob.
    pub bytes: usize,
    /// Output scale and zero point (int8 only).
    pub output_quant: Option<(f32, i8)>,
}

/// The whole report.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct BlobReport {
    /// The blob's format version (`runtime/FORMAT.md` §2): the lowest that holds its table,
    /// which older readers tell apart (7: an int16 input tensor, 6: int4 weights, …).
    pub format_version: u16,
    /// "int8" or "f32".
    pub precision: String,
    /// Input width.
    pub inputs: usize,
    /// Number of classes.
    pub classes: usize,
    /// "softmax", "sigmoid", "one-vs-rest" or "logits".
    pub output: String,
    /// "none", "uniform" or "per-feature".
    pub scaler: String,
    /// Input scale and zero point (int8 only).
    pub input_quant: Option<(f32, i8)>,
    /// The quantised input tensor's type: "int8", "int16" (symmetric, zero point 0; format
    /// version 7) or, for an f32 blob, "f32".
    pub input_tensor: String,
    /// Whether the blob takes raw `i16` / `u8` samples (`Model::takes_integer_input`): an int8
    /// blob only with the integer input path (`kinglet pack --integer-input`).
    pub integer_input: bool,
    /// Class labels (empty if none).
    pub labels: Vec<String>,
    /// Layers.
    pub layers: Vec<LayerRow>,
    /// Total parameters.
    pub parameters: usize,
    /// Total multiply-accumulates per inference.
    pub macs: usize,
    /// Flash bytes: the blob.
    pub flash_bytes: usize,
    /// RAM bytes: the scratch buffer.
    pub scratch_bytes: usize,
    /// Estimated instructions per inference on each target and input path (from measured
    /// rates; an instruction count, not cycles), with a latency range once [`Self::at_clock`]
    /// gave a clock.
    pub instruction_estimate: Vec<super::cycles::Estimate>,
    /// Whether the weights are 4-byte aligned for the Cortex-M4 kernels once the blob is loaded
    /// at an address, when one was given ([`Self::at_load_address`]).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub alignment: Option<Alignment>,
}

/// The weights' alignment at a load address.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct Alignment {
    /// The address the blob's first byte is loaded at.
    pub load_address: u64,
    /// Whether every `Blocked4x4` and `Nibble4x4` weight field's data is 4-byte aligned there.
    pub weights_aligned: bool,
}

/// The precision of a layer's weights in a model of `precision`.
pub fn weight_name(precision: Precision, layout: WeightLayout) -> &'static str {
    match (precision, layout) {
        (_, WeightLayout::Nibble4x4) => "int4",
        (Precision::Int8, _) => "int8",
        (Precision::F32, _) => "f32",
    }
}

impl BlobReport {
    /// Describes a parsed model.
    pub fn of(model: &Model<'_>) -> Self {
        let d = model.desc();
        let layers: Vec<LayerRow> = model
            .layers()
            .enumerate()
            .map(|(i, l)| LayerRow {
                layer: i + 1,
                inputs: l.desc.inputs as usize,
                outputs: l.desc.outputs as usize,
                activation: activation_name(l.desc).into(),
                weights: weight_name(d.precision, l.desc.layout).into(),
                parameters: l.parameters(),
                macs: l.macs(),
                bytes: l.tensor_bytes(),
                output_quant: l.desc.quant.map(|q| (q.output_scale, q.output_zero_point)),
            })
            .collect();
        BlobReport {
            format_version: kinglet_runtime::unstable::wire::version::version_for(d),
            precision: match d.precision {
                Precision::Int8 => "int8",
                Precision::F32 => "f32",
            }
            .into(),
            inputs: model.input_len(),
            classes: model.classes(),
            output: match d.output {
                OutputKind::Softmax => "softmax",
                OutputKind::Sigmoid => "sigmoid",
                OutputKind::OneVsRest => "one-vs-rest",
                OutputKind::Logits => "logits",
            }
            .into(),
            scaler: match &d.scaler {
                None => "none",
                Some(s) if s.offset.len() == 4 => "uniform",
                Some(_) => "per-feature",
            }
            .into(),
            input_quant: d.input_quant.map(|q| (q.scale, q.zero_point)),
            input_tensor: match d.input_quant.map(|q| q.width) {
                None => "f32",
                Some(kinglet_runtime::unstable::wire::format::InputWidth::I8) => "int8",
                Some(kinglet_runtime::unstable::wire::format::InputWidth::I16) => "int16",
            }
            .into(),
            integer_input: model.takes_integer_input(),
            labels: model.labels().map(String::from).collect(),
            parameters: layers.iter().map(|l| l.parameters).sum(),
            macs: layers.iter().map(|l| l.macs).sum(),
            layers,
            instruction_estimate: super::cycles::estimate(
                &super::cycles::RATES,
                match d.precision {
                    Precision::Int8 => super::cycles::Weights::Int8,
                    Precision::F32 => super::cycles::Weights::F32,
                },
                model.input_len(),
                &model
                    .layers()
                    .enumerate()
                    .map(|(k, l)| super::cycles::Layer {
                        inputs: l.desc.inputs as usize,
                        outputs: l.desc.outputs as usize,
                        int4: l.desc.layout == WeightLayout::Nibble4x4,
                        int16_input: k == 0
                            && d.input_width()
                                == kinglet_runtime::unstable::wire::format::InputWidth::I16,
                    })
                    .collect::<Vec<_>>(),
                None,
            )
            .into_iter()
            // No integer-path estimate for a blob that refuses integer samples.
            .filter(|e| e.feed != super::cycles::Feed::Integer || model.takes_integer_input())
            .collect(),
            alignment: None,
            flash_bytes: model.blob_bytes(),
            scratch_bytes: model.scratch_bytes(),
        }
    }
}

impl BlobReport {
    /// Adds a latency range at `clock_mhz` to every estimate.
    pub fn at_clock(mut self, clock_mhz: f64) -> Self {
        for e in &mut self.instruction_estimate {
            e.latency = super::cycles::latency(e.core, e.instructions, clock_mhz);
        }
        self
    }

    /// Records whether `model`'s weights are aligned when its blob is loaded at `address`.
    pub fn at_load_address(mut self, model: &Model<'_>, address: u64) -> Self {
        self.alignment = Some(Alignment {
            load_address: address,
            // Only the address modulo 4 matters, and it fits any `usize`.
            weights_aligned: model.weights_aligned_at((address % 4) as usize),
        });
        self
    }
}
