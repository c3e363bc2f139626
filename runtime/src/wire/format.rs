//! The blob's body: the layer table and quantisation parameters, serialised with postcard.
//!
//! Every tensor is a borrowed byte slice into the blob (zero-copy) holding little-endian
//! elements. `FORMAT.md` §3 describes each field; the reader (`validate.rs`) enforces §5.
use serde::{Deserialize, Serialize};

/// Most dense layers a blob may hold (bounds the layer table, a `heapless::Vec`).
pub const MAX_LAYERS: usize = 8;

/// Widest tensor (inputs or outputs of a layer) a blob may declare.
pub const MAX_WIDTH: u32 = 16_384;

/// Largest right shift (for the integer input path's per-feature fixed point).
pub const MAX_INPUT_SHIFT: u8 = 62;

/// Activation applied to a dense layer's output. A pointwise one's record is in the layer
/// ([`LayerDesc::pointwise`]).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Activation {
    /// No activation: the affine output is kept.
    Linear,
    /// `max(0, x)`, fused into requantisation (the int8 clamp at the zero point).
    Relu,
    /// Any other pointwise function (`FORMAT.md` §3.3; [`crate::unstable::pointwise`]).
    /// Format version 4.
    Pointwise,
}

/// The wire form of a layer's activation: the enum with the pointwise record inside
/// (`FORMAT.md` §3). [`LayerDesc`] keeps the record's fields beside a one-byte
/// [`Activation`] instead, so that a layer of the table grows by one slice, not by a tagged
/// record (every `Model` holds [`MAX_LAYERS`] of them).
#[derive(Serialize)]
enum ActivationWire<'a> {
    Linear,
    Relu,
    #[serde(borrow)]
    Pointwise(PointwiseDesc<'a>),
}

/// The record of a pointwise activation (`FORMAT.md` §3.3).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct PointwiseDesc<'a> {
    /// The kind byte ([`crate::unstable::pointwise::Kind`]).
    pub kind: u8,
    /// int8: the zero point of the requantised values before the table; f32: 0.
    pub input_zero_point: i8,
    /// f32: the kind's parameters, little-endian f32; int8: the 256-entry table, indexed by
    /// the requantised value plus 128.
    #[serde(borrow)]
    pub data: &'a [u8],
}

/// How the last layer's outputs are turned into scores.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum OutputKind {
    /// Scores are the raw outputs of the last layer.
    Logits,
    /// Softmax over the outputs; the scores sum to 1.
    Softmax,
    /// One output through the logistic function: a binary classifier.
    Sigmoid,
    /// One-vs-rest probabilities: the logistic function of each output, divided by their sum
    /// (`FORMAT.md` §3.2). Format version 3.
    OneVsRest,
}

/// Numeric precision of the whole model.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Precision {
    /// int8 weights and activations, int32 accumulators, integer-only requantisation.
    Int8,
    /// f32 weights and activations.
    F32,
}

impl Precision {
    /// Bytes per activation element.
    pub const fn activation_bytes(self) -> usize {
        match self {
            Precision::Int8 => 1,
            Precision::F32 => 4,
        }
    }

    /// [`Precision::activation_bytes`] for a model this build accepts: without the `f32`
    /// feature, `Model::parse` refuses f32 models before this is used, so it is the constant 1
    /// and the compiler drops the f32 sizes from the int8-only runtime.
    pub(crate) const fn accepted_bytes(self) -> usize {
        if cfg!(feature = "f32") {
            self.activation_bytes()
        } else {
            1
        }
    }
}

/// Order of the weight matrix in `LayerDesc::weights`.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum WeightLayout {
    /// `[outputs][inputs]`, row by row: element `o * inputs + i`.
    OutputMajor,
    /// Blocks of 4 rows by groups of 4 inputs, padded to multiples of 4, int8 stored
    /// excess-128, optionally preceded by up to 3 alignment bytes (`FORMAT.md` §3.1;
    /// [`crate::wire::layout`] has the geometry). Format version 2.
    Blocked4x4,
    /// int4 weights of an int8 model, two per byte, excess-8, in blocks of 4 rows by groups of
    /// 4 inputs (`FORMAT.md` §3.5; [`crate::wire::nibble`] has the geometry). Format version 6.
    Nibble4x4,
}

/// The saved input scaler: `y[i] = (x[i] - offset[i]) * scale[i]` in f32.
///
/// Both tensors hold `n` little-endian `f32`, with `n` = 1 (one map for every feature) or the
/// model's input width.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct ScalerDesc<'a> {
    /// Subtracted from each raw feature.
    #[serde(borrow)]
    pub offset: &'a [u8],
    /// Multiplied after the subtraction.
    #[serde(borrow)]
    pub scale: &'a [u8],
}

/// Element type of an int8 model's quantised input tensor (tensor 0, the first layer's input).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum InputWidth {
    /// int8, asymmetric (any zero point): every version.
    #[default]
    I8,
    /// int16, symmetric (zero point 0), saturated to `[-32768, 32767]`; the first layer
    /// multiplies it by its int8 weights in the same i32 accumulator (`FORMAT.md` §3.6).
    /// Format version 7.
    I16,
}

impl InputWidth {
    /// Bytes per element of the input tensor.
    pub const fn bytes(self) -> usize {
        match self {
            InputWidth::I8 => 1,
            InputWidth::I16 => 2,
        }
    }

    /// Largest `|q - zero_point|` the tensor can hold for `zero_point`: what bounds the first
    /// layer's accumulator (`FORMAT.md` §5 rule 14).
    pub const fn reach(self) -> i64 {
        match self {
            InputWidth::I8 => 128,
            InputWidth::I16 => 32_768,
        }
    }
}

/// Quantisation of the scaled input to int8, or to int16 (int8 models only).
///
/// Float inputs: `q = saturate(round_half_even(y / scale) + zero_point)`, as ONNX
/// `QuantizeLinear`. Integer inputs (`i16`, `u8`) skip the float scaler and use the per-feature
/// fixed-point map `q = saturate((x * int_mult + int_add + 2^(s-1)) >> s)` with `s = int_shift`,
/// which the converter derives from the same scaler and quantisation. `saturate` is to the
/// tensor's [`InputWidth`].
///
/// On the wire the `Option` around this record is a three-way tag (`FORMAT.md` §3): `0` none,
/// `1` an int8 input, `2` an int16 input (version 7), then the five fields; `width` is the tag.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct InputQuantDesc<'a> {
    /// Scale of the quantised input tensor.
    pub scale: f32,
    /// Zero point of the quantised input tensor.
    pub zero_point: i8,
    /// `n` little-endian `i32` multipliers (n = 1 or the input width).
    #[serde(borrow)]
    pub int_mult: &'a [u8],
    /// `n` little-endian `i64` addends (already holding the zero point and rounding base).
    #[serde(borrow)]
    pub int_add: &'a [u8],
    /// `n` right shifts, each at most [`MAX_INPUT_SHIFT`].
    #[serde(borrow)]
    pub int_shift: &'a [u8],
    /// The input tensor's element type: written as the record's tag, not as a field.
    #[serde(skip)]
    pub width: InputWidth,
}

/// Quantisation parameters of one int8 dense layer.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct LayerQuantDesc<'a> {
    /// `outputs` little-endian `f32`: the symmetric per-channel weight scales (for reports and
    /// dequantisation; not used by inference).
    #[serde(borrow)]
    pub weight_scale: &'a [u8],
    /// `outputs` little-endian `i32` fixed-point multipliers in `[2^30, 2^31 - 1]`.
    #[serde(borrow)]
    pub multiplier: &'a [u8],
    /// `outputs` signed right shifts in `[-31, 31]` (negative: saturating left shift).
    #[serde(borrow)]
    pub shift: &'a [u8],
    /// Scale of the layer's int8 output.
    pub output_scale: f32,
    /// Zero point of the layer's int8 output.
    pub output_zero_point: i8,
}

/// One dense layer. Serialised as its wire form (`FORMAT.md` §3: the activation enum with the
/// pointwise record inside), held with the record's fields beside the activation.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LayerDesc<'a> {
    /// Input width.
    pub inputs: u32,
    /// Output width.
    pub outputs: u32,
    /// Activation after the layer.
    pub activation: Activation,
    /// The pointwise record's kind byte (0 unless `activation` is `Pointwise`).
    pub act_kind: u8,
    /// The pointwise record's zero point (0 unless `activation` is `Pointwise`).
    pub act_zero_point: i8,
    /// The pointwise record's data (empty unless `activation` is `Pointwise`).
    pub act_data: &'a [u8],
    /// Order of `weights`.
    pub layout: WeightLayout,
    /// The weights in `layout`: `inputs * outputs` elements for `OutputMajor`, the padded
    /// blocks for `Blocked4x4`; `i8` for int8 models, little-endian `f32` for f32 models.
    pub weights: &'a [u8],
    /// `outputs` biases: little-endian `i32` (input zero point folded in) or `f32`.
    pub bias: &'a [u8],
    /// Present exactly when the model is int8.
    pub quant: Option<LayerQuantDesc<'a>>,
}

/// [`LayerDesc`] as the wire has it (the encoder's view; the reader decodes into
/// [`LayerDesc`] directly, in the same order).
#[derive(Serialize)]
struct LayerWire<'a> {
    inputs: u32,
    outputs: u32,
    #[serde(borrow)]
    activation: ActivationWire<'a>,
    layout: WeightLayout,
    #[serde(borrow)]
    weights: &'a [u8],
    #[serde(borrow)]
    bias: &'a [u8],
    #[serde(borrow)]
    quant: Option<LayerQuantDesc<'a>>,
}

impl<'a> LayerDesc<'a> {
    /// The pointwise record, if the activation is `Pointwise`.
    pub fn pointwise(&self) -> Option<PointwiseDesc<'a>> {
        (self.activation == Activation::Pointwise).then_some(PointwiseDesc {
            kind: self.act_kind,
            input_zero_point: self.act_zero_point,
            data: self.act_data,
        })
    }

    /// The layer with `activation` and no pointwise record, or with the record `p`.
    pub fn with_activation(self, activation: Activation, p: Option<PointwiseDesc<'a>>) -> Self {
        let p = p.unwrap_or(PointwiseDesc {
            kind: 0,
            input_zero_point: 0,
            data: &[],
        });
        LayerDesc {
            activation,
            act_kind: p.kind,
            act_zero_point: p.input_zero_point,
            act_data: p.data,
            ..self
        }
    }
}

impl Serialize for LayerDesc<'_> {
    fn serialize<S: serde::Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        let activation = match self.pointwise() {
            Some(p) => ActivationWire::Pointwise(p),
            None if self.activation == Activation::Relu => ActivationWire::Relu,
            None => ActivationWire::Linear,
        };
        LayerWire {
            inputs: self.inputs,
            outputs: self.outputs,
            activation,
            layout: self.layout,
            weights: self.weights,
            bias: self.bias,
            quant: self.quant,
        }
        .serialize(s)
    }
}

/// The wire form of the input quantisation (`FORMAT.md` §3): postcard writes an enum as its
/// variant index then the content, so tags `0` and `1` are the bytes an `Option` gives.
#[derive(Serialize)]
enum InputQuantWire<'a> {
    None,
    #[serde(borrow)]
    Int8(InputQuantDesc<'a>),
    #[serde(borrow)]
    Int16(InputQuantDesc<'a>),
}

/// [`ModelDesc`] as the wire has it (the encoder's view).
#[derive(Serialize)]
struct ModelWire<'d, 'a> {
    input_len: u32,
    precision: Precision,
    #[serde(borrow)]
    scaler: Option<ScalerDesc<'a>>,
    #[serde(borrow)]
    input_quant: InputQuantWire<'a>,
    layers: &'d [LayerDesc<'a>],
    output: OutputKind,
    labels: &'a str,
}

impl Serialize for ModelDesc<'_> {
    fn serialize<S: serde::Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        let input_quant = match self.input_quant {
            None => InputQuantWire::None,
            Some(q) if q.width == InputWidth::I16 => InputQuantWire::Int16(q),
            Some(q) => InputQuantWire::Int8(q),
        };
        ModelWire {
            input_len: self.input_len,
            precision: self.precision,
            scaler: self.scaler,
            input_quant,
            layers: &self.layers,
            output: self.output,
            labels: self.labels,
        }
        .serialize(s)
    }
}

impl ModelDesc<'_> {
    /// The input tensor's element type: int16 when the input quantisation says so, else one
    /// byte (int8) — an f32 model's input tensor is f32 ([`Precision::activation_bytes`]).
    pub fn input_width(&self) -> InputWidth {
        self.input_quant
            .as_ref()
            .map_or(InputWidth::I8, |q| q.width)
    }

    /// [`ModelDesc::input_width`] as this build runs it: without the `int16-input` feature
    /// always int8 (`Model::parse` has refused an int16 input), so that the int8-only runtime
    /// compiles no int16 path.
    pub(crate) fn input_width_built(&self) -> InputWidth {
        if cfg!(feature = "int16-input") {
            self.input_width()
        } else {
            InputWidth::I8
        }
    }
}

/// The whole body of a blob. Its `Deserialize` (in `wire::read`) fills a table in place.
#[derive(Debug, Clone, PartialEq)]
pub struct ModelDesc<'a> {
    /// Width of the raw input vector.
    pub input_len: u32,
    /// Precision of every layer.
    pub precision: Precision,
    /// The saved input scaler, if any.
    pub scaler: Option<ScalerDesc<'a>>,
    /// Input quantisation: present exactly when the model is int8.
    pub input_quant: Option<InputQuantDesc<'a>>,
    /// The dense layers in order.
    pub layers: heapless::Vec<LayerDesc<'a>, MAX_LAYERS>,
    /// What turns the last layer's outputs into scores.
    pub output: OutputKind,
    /// Class labels separated by `'\n'`; empty when the model has none.
    pub labels: &'a str,
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A 1 → 1 int8 layer with `activation`, as the encoder writes it.
    fn layer_bytes(activation: Activation, p: Option<PointwiseDesc<'_>>, out: &mut [u8]) -> usize {
        let quant = LayerQuantDesc {
            multiplier: &[0, 0, 0, 64],
            shift: &[0],
            weight_scale: &[],
            output_scale: 0.5,
            output_zero_point: -3,
        };
        let l = LayerDesc {
            inputs: 1,
            outputs: 1,
            activation: Activation::Linear,
            act_kind: 0,
            act_zero_point: 0,
            act_data: &[],
            layout: WeightLayout::OutputMajor,
            weights: &[7],
            bias: &[1, 0, 0, 0],
            quant: Some(quant),
        }
        .with_activation(activation, p);
        postcard::to_slice(&l, out).map(|b| b.len()).unwrap_or(0)
    }

    /// The reader takes the activation enum apart by hand; every variant must decode to what
    /// the derived `Serialize` wrote (postcard's encoding, `FORMAT.md` §3), and the byte after
    /// the record must still be the layout.
    #[test]
    fn activation_parts_round_trip() {
        let table = [9u8; 256];
        let cases = [
            (Activation::Linear, None),
            (Activation::Relu, None),
            (
                Activation::Pointwise,
                Some(PointwiseDesc {
                    kind: 10,
                    input_zero_point: -128,
                    data: &table,
                }),
            ),
        ];
        for (activation, p) in cases {
            let mut buf = [0u8; 512];
            let n = layer_bytes(activation, p, &mut buf);
            assert!(n > 0);
            let back: LayerDesc<'_> = postcard::from_bytes(&buf[..n]).unwrap();
            assert_eq!(back.activation, activation);
            assert_eq!(back.pointwise(), p);
            assert_eq!(back.weights, &[7]);
            assert_eq!(back.quant.map(|q| q.output_zero_point), Some(-3));
        }
    }

    /// A variant index past `Pointwise`, one byte (3) or a two-byte varint (128), is refused.
    #[test]
    fn unknown_activation_variant_is_refused() {
        let mut buf = [0u8; 64];
        let n = layer_bytes(Activation::Linear, None, &mut buf);
        // inputs (1), outputs (1), then the activation's variant index.
        assert_eq!(buf[2], 0);
        for bad in [&[3u8][..], &[0x80, 0x01]] {
            let mut b = buf[..2].to_vec();
            b.extend_from_slice(bad);
            b.extend_from_slice(&buf[3..n]);
            assert!(postcard::from_bytes::<LayerDesc<'_>>(&b).is_err());
        }
    }
}
